"""The contract every statistic fulfils: data vector, model vector, whitened residuals.

A statistic turns (data, model) into whitened residuals r = (data - prediction) / sigma, their
Jacobian with respect to the model's free parameters, and a log-likelihood. It knows nothing of
files (it gets a VisibilitySet) nor of fitters (they get residuals and a Jacobian).

Shared by every statistic: :func:`effective_sigma` (the systematic floor),
:func:`model_visibilities_and_jacobian` (the model and its Jacobian on given rows) and
:func:`common_shift` (the free parameter behind a common shift or scale of all components).
"""

import numpy as np

from ..errors import UvfitError


def effective_sigma(sigma, amplitude, systematic=0.0):
    """sqrt(sigma^2 + (f A)^2) per row: the error with a systematic floor ``f`` (a fraction of the
    amplitude ``A``) added in quadrature (common practice)."""
    f = float(systematic)
    if f < 0:
        raise UvfitError(f"the systematic floor must be >= 0 (got {f})", "pass e.g. `systematic=0.02`")
    return np.sqrt(sigma**2 + (f * amplitude) ** 2)


def model_visibilities_and_jacobian(model, u, v, frequency, theta, files=None):
    """(V, dV/dtheta) of ``model`` at (u, v, frequency) as a 1-D complex array and an (n, n_free)
    complex array, in one pass of the model; ``files``: each row's data file (per-file
    parameters, ``SkyModel.for_files``)."""
    vis, jac = model.visibilities_and_jacobian(u, v, frequency=frequency, theta=theta, files=files)
    vis = np.asarray(vis, dtype=complex).reshape(-1)
    jac = np.asarray(jac, dtype=complex).reshape(vis.size, -1)
    return vis, jac


def row_files(model, vset):
    """Each row's data file (``uvfit.data.stack.file_of_rows``) when ``model`` has per-file
    parameters, else None (the model then needs no file of its rows)."""
    if not model.needs_files():
        return None
    from ..data.stack import file_of_rows

    return file_of_rows(vset)


def common_shift(model, quantity):
    """The first free parameter of ``quantity`` over the components of ``model`` when no component
    has its own fixed, else None.

    ``quantity`` is "east" or "north" (a shift of every component at once) or "flux" (a common
    scale of every flux); the model names the parameters (``position_names``, ``flux_names``).
    Such a common change is unconstrained by a statistic blind to it; holding the returned
    parameter fixed removes that freedom. A tied parameter neither anchors nor is returned.
    """
    if quantity == "flux":
        names = list(model.flux_names().values())
    else:
        axis = {"east": 0, "north": 1}[quantity]
        names = [pair[axis] for pair in model.position_names().values()]
    params = model.parameters
    free = set(model.free_names)
    first = None
    for name in names:
        p = params[name]
        if p.tie is None and p.fixed:
            return None
        if first is None and name in free:
            first = name
    return first


#: the notice of a statistic with ``amplitude_only`` (a 180-degree point-reflection ambiguity)
REFLECTION_NOTICE = (
    "amplitudes cannot fix the absolute position, and a model and its point "
    "reflection through the origin (every position angle + 180 deg) fit equally "
    "well: position angles are ambiguous by 180 degrees in this mode"
)


class Statistic:
    """Base class; subclasses fill ``data``, ``sigma`` and implement the two predict methods.

    Constructor signature for every mode: ``Cls(vset, model, systematic=0.0, **options)``, where
    ``systematic`` is a fraction of |V| added in quadrature to every visibility's sigma.
    """

    #: mode name, e.g. "complex"
    mode = ""
    #: True when the residual is an angle and must be wrapped into (-pi, pi]
    wrapped: bool | np.ndarray | None = None  # or a boolean array over the data vector
    #: True when the statistic sees only amplitudes (of visibilities or closures): a model and its
    #: point reflection through the origin (every position angle + 180 deg) then fit equally well.
    #: Any phase information (visibility or closure phases) breaks that symmetry.
    amplitude_only = False
    #: what the user should know about this statistic (printed with the fit); subclasses set a list
    notices: "list[str] | tuple[str, ...]" = ()

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

    def rebuilt(self, model=None, vset=None, systematic=None):
        """The same statistic (class and options) on another model (or the same model after its
        free set changed), on other rows ``vset`` and with another ``systematic`` floor; each
        defaults to this statistic's own."""
        return type(self)(
            self.vset if vset is None else vset,
            self.model if model is None else model,
            systematic=self.systematic if systematic is None else systematic,
            **self.options,
        )


class JoinedStatistic(Statistic):
    """Several statistics on the same model, their data vectors joined end to end.

    A subclass builds its members in its own constructor (signature as every statistic's) and
    calls :meth:`_join`; :meth:`rebuilt` then calls that constructor again, so the members and
    the subclass's own attributes (``row_index``, ``closures``, ...) are rebuilt together.
    Residuals, Jacobian and log-likelihood are those of the members, joined; a member's own
    whitening or likelihood is kept. Degeneracies: those every member has, unless the subclass
    says otherwise.
    """

    def _join(self, members):
        self.members = list(members)
        self.amplitude_only = all(p.amplitude_only for p in self.members)
        self.data = np.concatenate([p.data for p in self.members])
        self.sigma = np.concatenate([p.sigma for p in self.members])
        self.wrapped = np.concatenate(
            [np.broadcast_to(False if p.wrapped is None else p.wrapped, (p.n_data,)) for p in self.members]
        )

    def predict(self, theta):
        return np.concatenate([p.predict(theta) for p in self.members])

    def predict_jacobian(self, theta):
        out = [p.predict_jacobian(theta) for p in self.members]
        return np.concatenate([o[0] for o in out]), np.vstack([o[1] for o in out])

    def residuals(self, theta):
        return np.concatenate([p.residuals(theta) for p in self.members])

    def jacobian(self, theta):
        return np.vstack([p.jacobian(theta) for p in self.members])

    def log_likelihood(self, theta):
        return float(sum(p.log_likelihood(theta) for p in self.members))

    def degeneracies(self):
        sets = [dict(p.degeneracies()) for p in self.members]
        common = set(sets[0]).intersection(*sets[1:]) if sets else set()
        return [(name, sets[0][name]) for name in sets[0] if name in common]

    def scaled(self, factor):
        out = object.__new__(type(self))
        out.__dict__.update(self.__dict__)
        out.members = [p.scaled(factor) for p in self.members]
        out.sigma = np.concatenate([p.sigma for p in out.members])
        return out
