"""The closed-form visibilities of the point, Gaussian and double shapes against a numerical 2-D FFT
(numpy.fft) of the same model rendered on a fine grid by SkyModel.render.

Outside reference: numpy.fft.fft2 uses the kernel exp(-2 pi i k n / N), the same sign as the
visibility kernel exp[-2 pi i (u l + v m)] (REFERENCES.md). With the pixel at index N//2 on the
origin, ifftshift moves it to index 0, and FFT bin k is the spatial frequency fftfreq(N, step)[k].
This also checks the orientation of every rendered image (east = +l, north = +m, position
angles north through east) against the visibilities.
"""
import math

import numpy as np
import pytest

from uvfit.sky.model import SkyModel

NPIX = 512
FOV = 2.0                      # mas
STEP = FOV / NPIX              # 1/256 mas: offsets below are whole pixels for the point sources
MAS = math.pi / 180 / 3600e3   # radians per mas


def fft_visibilities(model):
    img, l_axis, m_axis = model.render(NPIX, FOV)
    assert l_axis[NPIX // 2] == 0.0 and m_axis[NPIX // 2] == 0.0
    vis = np.fft.fft2(np.fft.ifftshift(img))        # axis 0: north (v), axis 1: east (u)
    freq = np.fft.fftfreq(NPIX, STEP * MAS)           # wavelengths
    return vis, freq, img


CASES = {
    "point": [{"name": "p", "shape": "point", "flux": 1.0, "east": 80 * STEP, "north": -24 * STEP}],
    "gaussian": [{"name": "g", "shape": "gaussian", "flux": 1.0, "east": 0.1, "north": 0.05, "fwhm": 0.08}],
    "elliptical": [{"name": "e", "shape": "elliptical_gaussian", "flux": 1.0, "east": -0.1, "north": 0.2,
                    "fwhm": 0.15, "axis_ratio": 0.35, "position_angle": 35.0}],
    "double_point": [{"name": "d", "shape": "double", "flux": 1.0, "east": -16 * STEP, "north": 8 * STEP,
                      "flux_ratio": 0.5, "separation": math.hypot(40, -64) * STEP,
                      "position_angle": math.degrees(math.atan2(40, -64))}],
    "double_elliptical": [{"name": "d", "shape": "double", "member": "elliptical_gaussian", "flux": 1.0,
                           "flux_ratio": 0.7, "separation": 0.3, "position_angle": 240.0,
                           "fwhm_1": 0.06, "axis_ratio_1": 0.5, "position_angle_1": 80.0,
                           "fwhm_2": 0.1, "axis_ratio_2": 0.8, "position_angle_2": -20.0}],
}


@pytest.mark.parametrize("case", list(CASES))
def test_closed_form_matches_fft(case):
    model = SkyModel.build(CASES[case], angular_unit="mas")
    vis, freq, img = fft_visibilities(model)
    assert img.sum() == pytest.approx(model.total_flux(), abs=1e-6)
    # compare on off-axis bins out to where the Gaussians have fallen a lot
    k = np.r_[-40:0, 1:41]
    kk_u, kk_v = np.meshgrid(k, k)
    u, v = freq[kk_u], freq[kk_v]
    model_vis = model.visibilities(u.ravel(), v.ravel())
    fft_vis = vis[kk_v, kk_u].ravel()
    assert np.max(np.abs(model_vis - fft_vis)) < 1e-3 * model.total_flux()
    # the check has teeth: a point-reflected sky would fail it
    assert np.max(np.abs(np.conj(model_vis) - fft_vis)) > 1e-2


def test_rendered_ellipse_points_along_its_position_angle():
    # second moments of the rendered image give the major-axis direction (common practice)
    model = SkyModel.build(CASES["elliptical"], angular_unit="mas")
    img, l_axis, m_axis = model.render(NPIX, FOV)
    ll, mm = np.meshgrid(l_axis, m_axis)
    w = img / img.sum()
    l0, m0 = (w * ll).sum(), (w * mm).sum()
    assert (l0, m0) == pytest.approx((-0.1, 0.2), abs=1e-6)
    cll = (w * (ll - l0) ** 2).sum()
    cmm = (w * (mm - m0) ** 2).sum()
    clm = (w * (ll - l0) * (mm - m0)).sum()
    evals, evecs = np.linalg.eigh([[cll, clm], [clm, cmm]])
    east, north = evecs[:, 1]
    pa = math.degrees(math.atan2(east, north)) % 180.0
    assert pa == pytest.approx(35.0, abs=0.1)
    # FWHM = sqrt(8 ln 2) sigma for a Gaussian (definition)
    assert math.sqrt(8 * math.log(2) * evals[1]) == pytest.approx(0.15, rel=1e-3)
    assert math.sqrt(8 * math.log(2) * evals[0]) == pytest.approx(0.15 * 0.35, rel=1e-3)
