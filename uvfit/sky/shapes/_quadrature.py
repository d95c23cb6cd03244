"""Point-set descriptions (quadratures) of shapes whose brightness cannot be sampled on a grid.

Each function returns flat arrays ``(l, m, weight)`` (radians, l east, m north; weights summing to 1)
such that the sum over nodes of weight * f(l, m) approximates the integral of I(l, m) f(l, m) for
smooth f (Gauss-Legendre in radius or polar angle, the periodic trapezoid/midpoint rule in azimuth:
both converge faster than any power of the node count). Image rendering splats these nodes onto
pixels; they also serve as an image-domain reference for the Fourier-domain formulas.
"""

import numpy as np


def _gauss_legendre(a, b, n):
    t, w = np.polynomial.legendre.leggauss(int(n))
    return 0.5 * (b - a) * t + 0.5 * (a + b), 0.5 * (b - a) * w


def ring_points(radius, n, weight=None):
    """n equally spaced nodes on a circle; ``weight(psi)`` (position angle, north through east)
    multiplies the uniform weight 1/n (the result is not renormalised)."""
    psi = 2.0 * np.pi * (np.arange(int(n)) + 0.5) / int(n)
    w = np.full(psi.shape, 1.0 / int(n))
    if weight is not None:
        w = w * weight(psi)
    return radius * np.sin(psi), radius * np.cos(psi), w


def disk_points(radius, n):
    """Uniform disk: n Gauss-Legendre radii (weight r dr) times 4n azimuths."""
    r, wr = _gauss_legendre(0.0, radius, n)
    wr = wr * r / np.sum(wr * r)
    l, m, wa = ring_points(1.0, 4 * int(n))
    return ((r[:, None] * l[None, :]).ravel(), (r[:, None] * m[None, :]).ravel(), (wr[:, None] * wa[None, :]).ravel())


def sphere_surface_points(n):
    """Projection onto the sky (l, m) of uniform weight on the unit sphere.

    Polar angle alpha from the m (north) axis with Gauss-Legendre nodes on [0, pi] and weight
    sin(alpha)/2; azimuth phi about that axis by the midpoint rule on [0, pi] (phi and -phi project
    onto the same sky point). l = sin(alpha) cos(phi), m = cos(alpha); the line-of-sight coordinate
    sin(alpha) sin(phi) is integrated out by the projection.
    """
    alpha, wa = _gauss_legendre(0.0, np.pi, n)
    wa = wa * np.sin(alpha) / 2.0
    phi = np.pi * (np.arange(2 * int(n)) + 0.5) / (2 * int(n))
    wp = np.full(phi.shape, 1.0 / phi.size)
    l = np.sin(alpha)[:, None] * np.cos(phi)[None, :]
    m = np.cos(alpha)[:, None] * np.ones_like(phi)[None, :]
    return l.ravel(), m.ravel(), (wa[:, None] * wp[None, :]).ravel()


def shell_points(inner, outer, n):
    """Optically thin uniform emissivity between radii ``inner`` and ``outer``, projected on the sky.

    Radii by Gauss-Legendre with weight r^2 dr (a single radius when inner == outer), each carrying
    the projected sphere surface of ``sphere_surface_points(n)``.
    """
    if inner == outer:
        r, wr = np.array([float(outer)]), np.array([1.0])
    else:
        r, wr = _gauss_legendre(inner, outer, max(4, int(n) // 2))
        wr = wr * r**2 / np.sum(wr * r**2)
    l, m, ws = sphere_surface_points(n)
    return ((r[:, None] * l[None, :]).ravel(), (r[:, None] * m[None, :]).ravel(), (wr[:, None] * ws[None, :]).ravel())


def gaussian_blur_points(l, m, w, fwhm, n=20):
    """Convolve a point set with a circular Gaussian of the given FWHM (2-D Gauss-Hermite nodes)."""
    if fwhm == 0:
        return l, m, w
    sigma = abs(fwhm) / np.sqrt(8.0 * np.log(2.0))
    t, wt = np.polynomial.hermite.hermgauss(int(n))
    d = np.sqrt(2.0) * sigma * t
    wt = wt / np.sqrt(np.pi)
    dl = np.repeat(d, d.size)
    dm = np.tile(d, d.size)
    wd = np.outer(wt, wt).ravel()
    return ((l[:, None] + dl[None, :]).ravel(), (m[:, None] + dm[None, :]).ravel(), (w[:, None] * wd[None, :]).ravel())
