"""The contract every statistic fulfils: data vector, model vector, whitened residuals.

A statistic turns (data, model) into whitened residuals r = (data - prediction) / sigma, their
Jacobian with respect to the model's free parameters, and a log-likelihood. It knows nothing of
files (it gets a VisibilitySet) nor of fitters (they get residuals and a Jacobian).
"""
import numpy as np


class Statistic:
    """Base class; subclasses fill ``data``, ``sigma`` and implement the two predict methods.

    Constructor signature for every mode: ``Cls(vset, model, systematic=0.0, **options)``, where
    ``systematic`` is a fraction of |V| added in quadrature to every visibility's sigma.
    """

    #: mode name, e.g. "complex"
    mode = ""
    #: True when the residual is an angle and must be wrapped into (-pi, pi]
    wrapped = None  # or a boolean array over the data vector

    def __init__(self, vset, model, systematic=0.0, **options):
        self.vset = vset
        self.model = model
        self.systematic = float(systematic)
        self.options = options
        self.data = np.zeros(0)
        self.sigma = np.ones(0)

    # -- to implement --------------------------------------------------------
    def predict(self, theta):
        """Model data vector (same layout as ``self.data``) for the free-parameter vector theta."""
        raise NotImplementedError

    def predict_jacobian(self, theta):
        """(prediction, d prediction / d theta as an (n_data, n_free) array)."""
        raise NotImplementedError

    def degeneracies(self):
        """[(parameter name, reason)] of free parameters this statistic cannot constrain.

        The fitter fixes each at its current value and prints the reason.
        """
        return []

    # -- shared -----------------------------------------------------------------
    @property
    def n_data(self):
        return int(len(self.data))

    def _difference(self, pred):
        d = self.data - pred
        if self.wrapped is not None and np.any(self.wrapped):
            w = np.broadcast_to(self.wrapped, d.shape)
            d = np.where(w, np.angle(np.exp(1j * d)), d)
        return d

    def residuals(self, theta):
        """Whitened residuals (data - model) / sigma."""
        return self._difference(self.predict(theta)) / self.sigma

    def jacobian(self, theta):
        """d residuals / d theta, shape (n_data, n_free)."""
        _, dpred = self.predict_jacobian(theta)
        return -dpred / self.sigma[:, None]

    def chi2(self, theta):
        r = self.residuals(theta)
        return float(r @ r)

    def log_likelihood(self, theta):
        """Gaussian log-likelihood, including the normalisation."""
        r = self.residuals(theta)
        return float(-0.5 * (r @ r) - np.sum(np.log(self.sigma)) - 0.5 * self.n_data * np.log(2 * np.pi))

    def scaled(self, factor):
        """A shallow copy with every sigma multiplied by ``factor`` (for rescaling to reduced chi2 1)."""
        out = object.__new__(type(self))
        out.__dict__.update(self.__dict__)
        out.sigma = self.sigma * float(factor)
        return out


class CombinedStatistic(Statistic):
    """Several statistics on the same model, their data vectors joined end to end."""

    def __init__(self, parts, mode=""):
        self.parts = list(parts)
        self.mode = mode or "+".join(p.mode for p in self.parts)
        self.model = self.parts[0].model
        self.vset = self.parts[0].vset
        self.systematic = self.parts[0].systematic
        self.data = np.concatenate([p.data for p in self.parts])
        self.sigma = np.concatenate([p.sigma for p in self.parts])
        self.wrapped = np.concatenate([np.broadcast_to(
            False if p.wrapped is None else p.wrapped, (p.n_data,)) for p in self.parts])

    def predict(self, theta):
        return np.concatenate([p.predict(theta) for p in self.parts])

    def predict_jacobian(self, theta):
        out = [p.predict_jacobian(theta) for p in self.parts]
        return np.concatenate([o[0] for o in out]), np.vstack([o[1] for o in out])

    def degeneracies(self):
        # a parameter is degenerate only if every part is blind to it
        sets = [dict(p.degeneracies()) for p in self.parts]
        common = set(sets[0]).intersection(*sets[1:]) if sets else set()
        return [(name, sets[0][name]) for name in sets[0] if name in common]

    def scaled(self, factor):
        return CombinedStatistic([p.scaled(factor) for p in self.parts], self.mode)
