"""Statistics on the visibilities themselves: complex (real and imaginary parts) and amplitudes.

Both use the unflagged rows of the visibility set. ``sigma`` of a row is the error of its real and
of its imaginary part each; a systematic floor ``f`` (a fraction of the amplitude) is added in
quadrature, sigma_eff = sqrt(sigma^2 + (f |V_data|)^2) (common practice).

Complex mode
    data vector [Re V_1..Re V_n, Im V_1..Im V_n]; each row gives two residuals, both mapped back to
    that row by ``row_index``. The Gaussian likelihood is exact for thermal noise.

Amplitude mode
    The amplitude A = |V| of a visibility with true amplitude nu and Gaussian noise sigma per part
    follows the Rice distribution (Rice 1944, Bell Syst. Tech. J. 23, 282):
        p(A | nu, sigma) = A / sigma^2 exp[-(A^2 + nu^2) / (2 sigma^2)] I0(A nu / sigma^2).
    * ``log_likelihood`` is this exact Rice likelihood (evaluated stably with scipy.special.i0e).
    * The least-squares objective (``residuals``, ``jacobian``, ``chi2``) is a sum of squares of
      smooth functions of the parameters. Each row is classed ONCE, when the statistic is built,
      by the SNR of the MODEL amplitude at its current (start) values, nu_ref / sigma: a class
      taken from the noisy data would select rows by their noise and bias the fit.
        - rows with nu_ref / sigma >= ``debias_snr`` (default 3): datum = the debiased amplitude
          sqrt(A^2 - sigma^2) (common practice; its mean is nu to first order in sigma/nu),
          prediction = |V_model|, weight 1 / sigma^2;
        - fainter rows: datum = A itself, prediction = the Rice mean
          E[A] = sigma sqrt(pi/2) L_1/2(-nu^2 / (2 sigma^2)), exact at any SNR, so faint rows
          neither bias the fit nor are thrown away; weight 1 / Var(A | nu_ref), the Rice variance
          2 sigma^2 + nu_ref^2 - E[A]^2 (fixed during the fit).
      Residual = (datum - prediction) / weight^-1/2.
    Amplitudes carry no information on absolute position, and a model and its point reflection
    through the origin have the same amplitudes (a 180-degree ambiguity).
"""

import numpy as np
from scipy.special import i0e, i1e

from .base import (
    REFLECTION_NOTICE,
    Statistic,
    common_shift,
    effective_sigma,
    model_visibilities_and_jacobian,
    row_files,
)

_SQRT_HALF_PI = np.sqrt(np.pi / 2.0)


def free_translation(model):
    """[names] of the position parameters that make a common shift of the whole model free.

    A shift of every component together changes no amplitude and no closure quantity. It is free
    along east (north) when no component has its east (north) fixed; then the east (north) of the
    first component whose position is free is returned, to be held fixed (:func:`common_shift`).
    When some component's position is fixed, the absolute position is anchored already and
    nothing is returned.
    """
    return [name for name in (common_shift(model, axis) for axis in ("east", "north")) if name]


class _Rows:
    """The unflagged rows of a visibility set, and their indices in it."""

    def __init__(self, vset):
        good = vset.good()  # DataError when nothing is left
        self.index = np.flatnonzero(~vset.flag)
        self.u, self.v, self.frequency = good.u, good.v, good.frequency
        self.vis, self.sigma = good.vis, good.sigma
        self.n = good.n
        self.set = good

    def files(self, model):
        """Each row's data file for a model with per-file parameters, else None (kept)."""
        if not model.needs_files():
            return None
        if getattr(self, "_files", None) is None:
            self._files = row_files(model, self.set)
        return self._files


def _model_vis_and_jac(model, rows, theta):
    return model_visibilities_and_jacobian(model, rows.u, rows.v, rows.frequency, theta, files=rows.files(model))


def _model_vis(model, rows, theta):
    vis = model.visibilities(rows.u, rows.v, frequency=rows.frequency, theta=theta, files=rows.files(model))
    return np.asarray(vis, dtype=complex).reshape(-1)


class ComplexStatistic(Statistic):
    """Real and imaginary parts of the visibilities (see the module docstring)."""

    mode = "complex"

    def __init__(self, vset, model, systematic=0.0, **options):
        super().__init__(vset, model, systematic, **options)
        self.rows = rows = _Rows(vset)
        self.data = np.concatenate([rows.vis.real, rows.vis.imag])
        s = effective_sigma(rows.sigma, np.abs(rows.vis), self.systematic)
        self.sigma = np.concatenate([s, s])
        #: the row of ``vset`` behind each datum (two data per row)
        self.row_index = np.concatenate([rows.index, rows.index])

    def predict(self, theta):
        vis = _model_vis(self.model, self.rows, theta)
        return np.concatenate([vis.real, vis.imag])

    def predict_jacobian(self, theta):
        vis, jac = _model_vis_and_jac(self.model, self.rows, theta)
        return np.concatenate([vis.real, vis.imag]), np.vstack([jac.real, jac.imag])

    def degeneracies(self):
        return []

    # chi2 and log-likelihood straight from the model's misfit sum (no residual vector), with the
    # complex data, weights and normalisation kept until ``data`` or ``sigma`` is replaced
    def _misfit_parts(self):
        cache = self.__dict__.get("_misfit_cache")
        if cache is not None and cache[0] is self.data and cache[1] is self.sigma:
            return cache[2]
        n = self.rows.n
        s = self.sigma
        parts = None
        if s.shape == (2 * n,) and self.data.shape == (2 * n,) and np.array_equal(s[:n], s[n:]):
            data = self.data[:n] + 1j * self.data[n:]
            weight = 1.0 / s[:n] ** 2
            norm = -float(np.sum(np.log(s))) - 0.5 * s.size * np.log(2 * np.pi)
            parts = (data, weight, norm)
        self.__dict__["_misfit_cache"] = (self.data, self.sigma, parts)
        return parts

    def jacobian(self, theta):
        """d residuals / d theta, (2n, n_free): -[Re J; Im J] / sigma, written in one pass per
        part (column-major when the model's Jacobian is, which LAPACK takes without a copy)."""
        _, jac = _model_vis_and_jac(self.model, self.rows, theta)
        n = jac.shape[0]
        if self.sigma.shape != (2 * n,):
            return -np.vstack([jac.real, jac.imag]) / self.sigma[:, None]
        scale = -1.0 / self.sigma
        if jac.T.flags.c_contiguous:
            jt = jac.T  # (n_free, n), rows contiguous
            out = np.empty((jac.shape[1], 2 * n))
            np.multiply(jt.real, scale[:n], out=out[:, :n])
            np.multiply(jt.imag, scale[n:], out=out[:, n:])
            return out.T
        out = np.empty((2 * n, jac.shape[1]))
        np.multiply(jac.real, scale[:n, None], out=out[:n])
        np.multiply(jac.imag, scale[n:, None], out=out[n:])
        return out

    def _fast_misfit(self, theta):
        """(chi-square, log-likelihood normalisation) from the model's fused ``misfit``, or None
        when the model or the data cannot use it."""
        fast = getattr(self.model, "misfit", None)
        parts = self._misfit_parts() if fast is not None else None
        if parts is None:
            return None
        r = self.rows
        return fast(r.u, r.v, parts[0], parts[1], frequency=r.frequency, theta=theta, files=r.files(self.model)), parts[
            2
        ]

    def chi2(self, theta):
        fast = self._fast_misfit(theta)
        if fast is None:
            return super().chi2(theta)
        return float(fast[0])

    def log_likelihood(self, theta):
        """Gaussian log-likelihood, including the normalisation (as ``Statistic``)."""
        fast = self._fast_misfit(theta)
        if fast is None:
            return super().log_likelihood(theta)
        return float(-0.5 * fast[0] + fast[1])


class AmplitudeStatistic(Statistic):
    """Visibility amplitudes, debiased at high SNR, Rice mean at low SNR; Rice likelihood."""

    mode = "amplitude"
    amplitude_only = True

    def __init__(self, vset, model, systematic=0.0, debias_snr=3.0, **options):
        super().__init__(vset, model, systematic, debias_snr=debias_snr, **options)
        self.rows = rows = _Rows(vset)
        self.debias_snr = float(debias_snr)
        amp = np.abs(rows.vis)
        self.amplitude = amp
        self.sigma = effective_sigma(rows.sigma, np.abs(rows.vis), self.systematic)
        self.noise_sigma = self.sigma.copy()  # per real/imaginary part, for the Rice law
        # class and weight every row by the model's amplitude at its current values (not by the
        # data, which would select rows by their noise)
        try:
            nu_ref = np.abs(_model_vis(model, rows, None))
        except Exception:  # a model that cannot be evaluated yet: treat every row as faint
            nu_ref = np.zeros(rows.n)
        if not np.all(np.isfinite(nu_ref)):
            nu_ref = np.where(np.isfinite(nu_ref), nu_ref, 0.0)
        self.reference_amplitude = nu_ref
        self.high = nu_ref >= self.debias_snr * self.sigma
        debiased = np.sqrt(np.maximum(amp**2 - self.sigma**2, 0.0))
        self.data = np.where(self.high, debiased, amp)
        low = ~self.high
        if np.any(low):
            s = self.sigma[low]
            mean, _ = self._rice_mean(nu_ref[low], s)
            var = 2.0 * s**2 + nu_ref[low] ** 2 - mean**2
            self.sigma = self.sigma.copy()
            self.sigma[low] = np.sqrt(np.maximum(var, 1e-6 * s**2))
            self.rice_sigma = s
        else:
            self.rice_sigma = self.sigma[low]
        self.row_index = rows.index
        self.notices = [REFLECTION_NOTICE] if self.amplitude_only else []

    # Rice mean E[A] = sigma sqrt(pi/2) [(1 + 2y) i0e(y) + 2y i1e(y)], y = nu^2 / (4 sigma^2);
    # d/dy of the bracket = i0e(y) + i1e(y).
    def _rice_mean(self, nu, sigma):
        y = nu**2 / (4.0 * sigma**2)
        mean = sigma * _SQRT_HALF_PI * ((1.0 + 2.0 * y) * i0e(y) + 2.0 * y * i1e(y))
        dmean = _SQRT_HALF_PI * (i0e(y) + i1e(y)) * nu / (2.0 * sigma)
        return mean, dmean

    def _amp_prediction(self, vis, jac=None):
        nu = np.abs(vis)
        low = ~self.high
        pred = nu.copy()
        if np.any(low):
            mean, dmean = self._rice_mean(nu[low], self.rice_sigma)
            pred[low] = mean
        if jac is None:
            return pred, None
        safe = np.where(nu > 0, nu, 1.0)
        dnu = np.real(np.conj(vis)[:, None] * jac) / safe[:, None]
        dnu[nu == 0] = 0.0
        if np.any(low):
            dnu[low] *= dmean[:, None]
        return pred, dnu

    def predict(self, theta):
        return self._amp_prediction(_model_vis(self.model, self.rows, theta))[0]

    def predict_jacobian(self, theta):
        vis, jac = _model_vis_and_jac(self.model, self.rows, theta)
        return self._amp_prediction(vis, jac)

    def log_likelihood(self, theta):
        """Exact Rice log-likelihood of the measured amplitudes (not the least-squares objective)."""
        nu = np.abs(_model_vis(self.model, self.rows, theta))
        a = self.amplitude
        s2 = self.noise_sigma**2
        z = a * nu / s2
        with np.errstate(divide="ignore"):
            loga = np.log(a)
        # log I0(z) = log i0e(z) + z, so the exponent becomes -(a - nu)^2 / (2 s^2)
        return float(np.sum(loga - np.log(s2) - (a - nu) ** 2 / (2.0 * s2) + np.log(i0e(z))))

    def scaled(self, factor):
        out = super().scaled(factor)
        out.noise_sigma = self.noise_sigma * float(factor)
        out.rice_sigma = self.rice_sigma * float(factor)
        return out

    def degeneracies(self):
        reason = (
            "visibility amplitudes do not depend on the absolute position; it is held at its "
            "start value (positions of other components are relative to it, and the whole "
            "model is still ambiguous by a 180-degree point reflection)"
        )
        return [(name, reason) for name in free_translation(self.model)]
