"""Infinitely thin rings: uniform, and with an azimuthal brightness modulation.

Thin uniform ring of diameter d (Pearson 1995, "Non-imaging data analysis", Synthesis Imaging in
Radio Astronomy; Thompson, Moran & Swenson 2017):

    V(q) = J0(pi d q),   first null q = 2.4048 / (pi d) = 0.7655 / d.

Modulated ring (the model of Johnson et al. 2020, Sci. Adv. 6, eaaz1310, written here in real
parameters). On the ring the brightness per unit position angle psi (north through east) is

    I(psi) = [1 + 2 sum_{k=1..K} a_k cos(k (psi - angle_k))] / (2 pi),

i.e. sum_m beta_m exp(i m psi) with beta_0 = 1, beta_k = a_k exp(-i k angle_k), beta_-k = conj(beta_k).
``amplitude_k`` is a_k = |beta_k| (0 <= a_k <= 0.5; the brightness is non-negative everywhere when
sum_k a_k <= 0.5) and ``angle_k`` is the position angle where the k-th harmonic is brightest.

Visibility, with the kernel exp[-2 pi i (u l + v m)] and (l, m) = r (sin psi, cos psi):
u l + v m = q r cos(psi - phi_q), phi_q = PA of (u, v). The Jacobi-Anger expansion
exp(-i z cos t) = sum_n (-i)^n J_n(z) exp(i n t) leaves, after the psi integral, only n = -m:

    V = sum_m beta_m (-i)^(-m) J_(-m)(z) exp(i m phi_q) = sum_m beta_m J_m(z) exp[i m (phi_q - pi/2)],

z = pi d q (using J_(-m) = (-1)^m J_m). With the real parameters, alpha_k = phi_q - pi/2 - angle_k:

    V = J0(z) + sum_k a_k J_k(z) [exp(i k alpha_k) + (-1)^k exp(-i k alpha_k)],

times exp[-(pi b q)^2 / (4 ln 2)] for a circular Gaussian blur of FWHM b (``blur``; 0 = none).
The sign of the phase is checked against a numerical FFT of the rendered ring in the tests.
"""

import re

import numpy as np
from scipy import special

from uvfit.errors import ModelError
from uvfit.sky.shape import Shape, uv_position_angle
from uvfit.sky.shapes import _pixels, _radial
from uvfit.sky.shapes._quadrature import gaussian_blur_points, ring_points

_LN2 = np.log(2.0)


#: most azimuthal harmonics of a modulated ring (each adds two parameters)
MAX_ORDER = 32


def _bessel_j(top, z):
    """[J_0(z), ..., J_top(z)] stacked on a new first axis (scipy.special j0, j1, jv)."""
    out = [special.j0(z), special.j1(z)]
    if top >= 2:
        orders = np.arange(2, top + 1).reshape((-1,) + (1,) * np.ndim(z))
        out.extend(special.jv(orders, z[None, ...]))
    return np.stack(out[: top + 1])


def _minus_j1(x):
    """d/dx J0(x) = -J1(x)."""
    return -special.j1(x)


class ThinRing(_radial.OneSizeRadial):
    """Infinitely thin uniform ring, parameter ``diameter`` (radians inside the shape)."""

    key = "ring"
    size = "diameter"
    scale = np.pi
    profile = staticmethod(special.j0)
    profile_derivative = staticmethod(_minus_j1)

    def outline(self, p):
        """A ring (an edge) of the diameter."""
        return ("ring", abs(p["diameter"]), abs(p["diameter"]), 0.0)

    def singular(self, p):
        """True: all the flux is on a curve; render it from ``sample_points``."""
        return True

    def brightness(self, l, m, p):
        raise ValueError("a thin ring has no finite brightness; render it from sample_points()")

    def pixel_fractions(self, l, m, p):
        """Flux fraction per pixel: the ring drawn with a Gaussian cross-section of
        _pixels.MIN_LINE_SIGMA pixels (see ModulatedRing.pixel_fractions)."""
        return ModulatedRing(order=0).pixel_fractions(l, m, {"diameter": p["diameter"], "blur": 0.0})

    def sample_points(self, p, n=1024):
        """n equally spaced nodes (l, m, weight) on the ring."""
        return ring_points(0.5 * abs(p["diameter"]), n)


class ModulatedRing(Shape):
    """Thin ring with azimuthal harmonics k = 1..order, optionally blurred by a circular Gaussian.

    Parameters: ``diameter`` (length), ``blur`` (FWHM of the Gaussian, length; 0 = none), and for
    each k ``amplitude_k`` (ratio, 0..0.5) and ``angle_k`` (angle: PA where harmonic k peaks).
    Setting ``order`` (whole number, default 1).
    """

    key = "ring_modulated"
    parameters = ("diameter", "blur", "amplitude_1", "angle_1")
    kinds = {"diameter": "length", "blur": "length", "amplitude_1": "ratio", "angle_1": "angle"}
    settings = {"order": 1}
    real_when_centred = False
    bounds = {"diameter": (0.0, np.inf), "blur": (0.0, np.inf), "amplitude_1": (0.0, 0.5), "angle_1": (-np.inf, np.inf)}

    _HARMONIC = re.compile(r"^(amplitude|angle)_([1-9][0-9]*)$")

    def outline(self, p):
        """A ring (an edge) of the diameter."""
        return ("ring", abs(p["diameter"]), abs(p["diameter"]), 0.0)

    def __init__(self, **settings):
        super().__init__(**settings)
        order = self.config["order"]
        if isinstance(order, bool) or not isinstance(order, (int, np.integer)) or order < 0:
            if isinstance(order, float) and order.is_integer() and order >= 0:
                order = int(order)
            else:
                raise ModelError(
                    f"setting 'order' of shape 'ring_modulated' must be a whole number >= 0, got {order!r}",
                    "write e.g. order = 2",
                )
        if order > MAX_ORDER:
            raise ModelError(
                f"setting 'order' of shape 'ring_modulated' is {order}, more than {MAX_ORDER} harmonics",
                f"use an order from 0 to {MAX_ORDER}; a few harmonics describe any ring the data resolve",
            )
        self.order = int(order)
        self.config["order"] = self.order
        names = ["diameter", "blur"]
        for k in range(1, self.order + 1):
            names += [f"amplitude_{k}", f"angle_{k}"]
        self._names = names
        self.kinds = {n: self._kind(n) for n in names}
        self.bounds = {
            n: (
                (0.0, 0.5)
                if n.startswith("amplitude_")
                else (-np.inf, np.inf)
                if n.startswith("angle_")
                else (0.0, np.inf)
            )
            for n in names
        }

    def parameter_names(self):
        return list(self._names)

    @classmethod
    def _kind(cls, name):
        if name in ("diameter", "blur"):
            return "length"
        match = cls._HARMONIC.match(name)
        if not match:
            raise KeyError(name)
        return "ratio" if match.group(1) == "amplitude" else "angle"

    def parameter_kind(self, name):
        return self._kind(name)

    def default_value(self, name):
        """A model file may leave out ``blur``: 0, fixed (an unblurred ring)."""
        return (0.0, True) if name == "blur" else None

    def invalid_values(self, p):
        """Amplitudes that make the brightness on the ring negative at some position angle (the
        minimum of 1 + 2 sum_k a_k cos(k (psi - angle_k)) on a fine grid of psi). The sum of the
        amplitudes at most 0.5 always passes; larger sums pass where the harmonics do not line up.
        ``p`` in model units (angles in degrees)."""
        if self.order < 1:
            return []
        names = [f"amplitude_{k}" for k in range(1, self.order + 1)]
        rad = {n: float(p[n]) for n in names}
        rad.update({f"angle_{k}": np.deg2rad(float(p[f"angle_{k}"])) for k in range(1, self.order + 1)})
        psi = np.linspace(0.0, 2.0 * np.pi, 720 * self.order, endpoint=False)
        level = self._azimuthal(psi, rad)
        lowest = int(np.argmin(level))
        if level[lowest] >= 0.0:
            return []
        worst = max(names, key=lambda n: abs(rad[n]))
        listed = ", ".join(f"{n} = {p[n]!r}" for n in names)
        return [
            (
                worst,
                f"the modulation ({listed}) makes the ring's brightness negative near position angle "
                f"{np.rad2deg(psi[lowest]):.0f} deg (1 + 2 sum a_k cos k(psi - angle_k) = {level[lowest]:.3g}; "
                "amplitudes summing to at most 0.5 always keep it non-negative)",
            )
        ]

    # Fourier domain -----------------------------------------------------------------------------
    def _terms(self, u, v, p, derivatives):
        u, v = np.broadcast_arrays(np.asarray(u, dtype=float), np.asarray(v, dtype=float))
        q = np.hypot(u, v)
        phi = uv_position_angle(u, v)
        z = np.pi * p["diameter"] * q
        blur = p.get("blur", 0.0)
        taper = np.exp(-((np.pi * blur * q) ** 2) / (4.0 * _LN2))
        bessel = _bessel_j(self.order + 1, z)  # J_0 .. J_(order+1)
        ring = bessel[0].astype(complex)
        grads = {}
        d_ring_dz = -bessel[1].astype(complex)  # J0' = -J1
        for k in range(1, self.order + 1):
            a = p[f"amplitude_{k}"]
            alpha = phi - 0.5 * np.pi - p[f"angle_{k}"]
            plus = np.exp(1j * k * alpha)
            minus = (-1) ** k * np.conj(plus)
            pattern = plus + minus
            ring = ring + a * bessel[k] * pattern
            if derivatives:
                d_ring_dz = d_ring_dz + a * 0.5 * (bessel[k - 1] - bessel[k + 1]) * pattern
                grads[f"amplitude_{k}"] = bessel[k] * pattern * taper
                # d pattern / d angle_k = -i k (plus - minus)
                grads[f"angle_{k}"] = a * bessel[k] * (-1j * k) * (plus - minus) * taper
        value = ring * taper
        if derivatives:
            grads["diameter"] = np.pi * q * d_ring_dz * taper
            grads["blur"] = -(np.pi**2) * blur * q**2 / (2.0 * _LN2) * value
            grads = {n: grads[n] for n in self._names}
        return value, grads

    def structure(self, u, v, p):
        return self._terms(u, v, p, derivatives=False)[0]

    def structure_gradient(self, u, v, p):
        return self._terms(u, v, p, derivatives=True)

    # image domain -------------------------------------------------------------------------------
    def _azimuthal(self, psi, p, bessel_ratio=None):
        """1 + 2 sum_k a_k c_k cos(k (psi - angle_k)); c_k = bessel_ratio[k] (1 if None)."""
        out = np.ones_like(psi) if bessel_ratio is None else bessel_ratio[0].copy()
        for k in range(1, self.order + 1):
            c = 1.0 if bessel_ratio is None else bessel_ratio[k]
            out = out + 2.0 * p[f"amplitude_{k}"] * c * np.cos(k * (psi - p[f"angle_{k}"]))
        return out

    def singular(self, p):
        """True when unblurred (all the flux on a curve): render from ``sample_points`` then."""
        return p.get("blur", 0.0) == 0

    def brightness(self, l, m, p):
        """Brightness per steradian of the blurred ring (integrates to 1); needs blur > 0.

        Convolving the ring with a Gaussian of standard deviation s and using
        exp(z cos t) = sum_n I_n(z) exp(i n t) (Abramowitz & Stegun 9.6.34) gives
        I(r, psi) = exp[-(r - R)^2 / (2 s^2)] / (2 pi s^2) *
                    [ive_0(z) + 2 sum_k a_k ive_k(z) cos(k (psi - angle_k))],  z = r R / s^2,
        with ive_n(z) = exp(-z) I_n(z) (scipy.special.ive) and R = d/2.
        """
        if self.singular(p):
            raise ValueError("an unblurred ring has no finite brightness; render it from sample_points()")
        l, m = np.broadcast_arrays(np.asarray(l, dtype=float), np.asarray(m, dtype=float))
        sigma = abs(p["blur"]) / np.sqrt(8.0 * _LN2)
        radius = 0.5 * abs(p["diameter"])
        r = np.hypot(l, m)
        psi = np.arctan2(l, m)
        z = r * radius / sigma**2
        orders = np.arange(self.order + 1).reshape((-1,) + (1,) * z.ndim)
        ratio = special.ive(orders, z[None, ...])
        envelope = np.exp(-((r - radius) ** 2) / (2.0 * sigma**2)) / (2.0 * np.pi * sigma**2)
        return envelope * self._azimuthal(psi, p, ratio)

    def pixel_fractions(self, l, m, p):
        """Flux fraction per pixel of a regular grid of pixel centres (l, m: 2-D, radians).

        A blur under 1.5 pixels (standard deviation) is widened in quadrature by
        _pixels.MIN_LINE_SIGMA pixels so that sampling at the pixel centres keeps the flux; an
        unblurred ring thus appears about a pixel wide. A wider blur is drawn as it is."""
        dl, dm = _pixels.grid_steps(l, m)
        pixel = np.sqrt(dl * dm)
        to_sigma = np.sqrt(8.0 * _LN2)
        sigma = abs(p.get("blur", 0.0)) / to_sigma
        if sigma < 1.5 * pixel:
            sigma = np.hypot(sigma, _pixels.MIN_LINE_SIGMA * pixel)
        return self.brightness(l, m, {**p, "blur": sigma * to_sigma}) * (dl * dm)

    def sample_points(self, p, n=1024):
        """Nodes (l, m, weight) of the ring, weighted by the modulation; blurred by Gauss-Hermite
        nodes when blur > 0 (weights sum to 1 when n > order)."""
        l, m, w = ring_points(0.5 * abs(p["diameter"]), n, lambda psi: self._azimuthal(psi, p))
        return gaussian_blur_points(l, m, w, p.get("blur", 0.0))
