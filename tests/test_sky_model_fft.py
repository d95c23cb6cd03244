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
FOV = 2.0  # mas
STEP = FOV / NPIX  # 1/256 mas: offsets below are whole pixels for the point sources
MAS = math.pi / 180 / 3600e3  # radians per mas


def fft_visibilities(model):
    img, l_axis, m_axis = model.render(NPIX, FOV)
    assert l_axis[NPIX // 2] == 0.0 and m_axis[NPIX // 2] == 0.0
    vis = np.fft.fft2(np.fft.ifftshift(img))  # axis 0: north (v), axis 1: east (u)
    freq = np.fft.fftfreq(NPIX, STEP * MAS)  # wavelengths
    return vis, freq, img


CASES = {
    "point": [{"name": "p", "shape": "point", "flux": 1.0, "east": 80 * STEP, "north": -24 * STEP}],
    "gaussian": [{"name": "g", "shape": "gaussian", "flux": 1.0, "east": 0.1, "north": 0.05, "fwhm": 0.08}],
    "elliptical": [
        {
            "name": "e",
            "shape": "elliptical_gaussian",
            "flux": 1.0,
            "east": -0.1,
            "north": 0.2,
            "fwhm": 0.15,
            "axis_ratio": 0.35,
            "position_angle": 35.0,
        }
    ],
    "double_point": [
        {
            "name": "d",
            "shape": "double",
            "flux": 1.0,
            "east": -16 * STEP,
            "north": 8 * STEP,
            "flux_ratio": 0.5,
            "separation": math.hypot(40, -64) * STEP,
            "position_angle": math.degrees(math.atan2(40, -64)),
        }
    ],
    "double_elliptical": [
        {
            "name": "d",
            "shape": "double",
            "member": "elliptical_gaussian",
            "flux": 1.0,
            "flux_ratio": 0.7,
            "separation": 0.3,
            "position_angle": 240.0,
            "fwhm_1": 0.06,
            "axis_ratio_1": 0.5,
            "position_angle_1": 80.0,
            "fwhm_2": 0.1,
            "axis_ratio_2": 0.8,
            "position_angle_2": -20.0,
        }
    ],
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


SHAPE_CASES = [
    ("gaussian", {}, {"fwhm": 0.08 * MAS}),
    ("elliptical_gaussian", {}, {"fwhm": 0.1 * MAS, "axis_ratio": 0.4, "position_angle": 0.6}),
    (
        "double",
        {"member": "elliptical_gaussian"},
        {
            "flux_ratio": 0.5,
            "separation": 0.2 * MAS,
            "position_angle": 2.0,
            "fwhm_1": 0.05 * MAS,
            "axis_ratio_1": 0.6,
            "position_angle_1": 0.3,
            "fwhm_2": 0.08 * MAS,
            "axis_ratio_2": 0.9,
            "position_angle_2": -1.0,
        },
    ),
]


@pytest.mark.parametrize("key,settings,p", SHAPE_CASES)
def test_brightness_integrates_to_one(key, settings, p):
    # scipy.integrate.dblquad of the brightness per steradian (outside reference)
    from scipy import integrate

    from uvfit.sky.shapes import shape_class

    shape = shape_class(key)(**settings)
    assert not shape.singular(p)
    half = 0.6 * MAS
    total, _ = integrate.dblquad(
        lambda m, l: float(shape.brightness(np.array(l), np.array(m), p)), -half, half, -half, half, epsabs=1e-10
    )
    assert total == pytest.approx(1.0, abs=1e-6)


@pytest.mark.parametrize(
    "key,settings,p",
    SHAPE_CASES
    + [("point", {}, {}), ("double", {}, {"flux_ratio": 0.3, "separation": 0.1 * MAS, "position_angle": 4.0})],
)
def test_sample_points_reproduce_the_visibility(key, settings, p):
    # the quadrature nodes, summed with the Fourier kernel, against the closed form (TMS 2017 ch. 3)
    from uvfit.sky.shapes import shape_class

    shape = shape_class(key)(**settings)
    lp, mp, w = shape.sample_points(p)
    assert np.sum(w) == pytest.approx(1.0, abs=1e-12)
    rng = np.random.default_rng(2)
    u, v = rng.normal(0, 1.0e9, (2, 30))
    direct = np.exp(-2j * np.pi * (u[:, None] * lp[None, :] + v[:, None] * mp[None, :])) @ w
    # (the Gaussians' nodes stop at 6 sigma: 1.5e-8 of the flux is left out)
    np.testing.assert_allclose(direct, shape.structure(u, v, p), atol=1e-7)


def test_point_and_narrow_components_keep_their_flux_on_a_grid():
    # a point goes into its nearest pixel; a Gaussian narrower than a pixel keeps its flux
    m = SkyModel.build(
        [
            {"name": "p", "shape": "point", "flux": 2.0, "east": 0.0101, "north": -0.02},
            {
                "name": "g",
                "shape": "elliptical_gaussian",
                "flux": 0.5,
                "east": 0.3,
                "fwhm": 0.05,
                "axis_ratio": 0.01,
                "position_angle": 45.0,
            },
        ]
    )
    img, l_axis, m_axis = m.render(64, 1.0)
    assert img.sum() == pytest.approx(2.5, abs=1e-9)
    i, j = np.unravel_index(np.argmax(img), img.shape)
    assert img[i, j] == pytest.approx(2.0)
    assert abs(l_axis[j] - 0.0101) <= 0.5 / 64 and abs(m_axis[i] + 0.02) <= 0.5 / 64
    # off the grid: nothing drawn
    far = SkyModel.build([{"name": "p", "shape": "point", "flux": 1.0, "east": 5.0}])
    assert far.render(32, 1.0)[0].sum() == 0.0
