"""The numbers behind each figure, checked against closed forms and the conventions.

Expected values come from outside uvfit's model code: the Gaussian visibility and the shift
theorem (Pearson 1995; see tests/show_sim.py), Hermitian symmetry and the closure-phase invariance
under station phase errors (REFERENCES.md, "Conventions", "Closure quantities").
"""

import numpy as np
import pytest
from scipy import stats

from tests.helpers import show_sim
from uvfit.errors import UvfitError
from uvfit.show import plots, style
from uvfit.show.corner import corner_plot
from uvfit.show.readback import fit_view
from uvfit.show.sky import sky_figure


@pytest.fixture(scope="module")
def noiseless():
    vset = show_sim.simulated_set(noise=0.0)
    return fit_view(vset, show_sim.truth_fit_json())


def test_radial_model_passes_through_noiseless_data(noiseless):
    fig, d = plots.radial_plot(noiseless.vset, noiseless.model_vis)
    style.close(fig)
    # the data are the closed-form Gaussians (Pearson 1995) computed in show_sim, the model is
    # rebuilt from the fit's model text: on noiseless data the model points lie on the data
    np.testing.assert_allclose(d["model_amplitude"], d["amplitude"], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose((d["model_phase_deg"] - d["phase_deg"] + 180) % 360 - 180, 0.0, atol=1e-7)
    np.testing.assert_allclose(d["residual_amplitude"], 0.0, atol=1e-7)
    # plotted in uv-distance order, at the data's own uv distances
    q = np.hypot(noiseless.vset.u, noiseless.vset.v)
    np.testing.assert_allclose(d["uv"], np.sort(q))
    np.testing.assert_allclose(
        d["amplitude"], np.abs(show_sim.truth_vis(noiseless.vset.u, noiseless.vset.v))[d["order"]], rtol=1e-12
    )
    # axis unit: Glambda once the longest baseline passes 1e9 wavelengths (common practice)
    assert q.max() > 1e9 and d["uv_unit"] == "Gλ" and d["uv_scale"] == 1e9


def test_radial_residuals_are_normalised():
    vset = show_sim.simulated_set(noise=0.02, seed=5)
    view = fit_view(vset, show_sim.truth_fit_json())
    fig, d = plots.radial_plot(view.vset, view.model_vis)
    style.close(fig)
    # with the true model and Gaussian noise of the stated sigma, the amplitude residuals
    # (|V| - |M|) / sigma are close to unit variance at high SNR (common practice)
    r = d["residual_amplitude"][d["model_amplitude"] > 10 * 0.02]
    assert 0.7 < np.std(r) < 1.3


def test_uv_coverage_has_conjugates_and_east_left(noiseless):
    vset = noiseless.vset
    for colour_by in ("baseline", "time"):
        fig, d = plots.uv_coverage_plot(vset, colour_by=colour_by)
        ax = fig.axes[0]
        # Hermitian symmetry V(-u, -v) = conj V(u, v): each row is drawn twice (REFERENCES.md)
        n = vset.n
        np.testing.assert_array_equal(d["u"][n:], -d["u"][:n])
        np.testing.assert_array_equal(d["v"][n:], -d["v"][:n])
        left, right = ax.get_xlim()
        assert left > right  # u increases to the left, as east on the sky (common practice)
        assert "Gλ" in ax.get_xlabel() and "Gλ" in ax.get_ylabel()
        style.close(fig)
    assert len(d["baselines"]) == 10  # 5 stations: 5 * 4 / 2 baselines
    with pytest.raises(UvfitError):
        plots.uv_coverage_plot(vset, colour_by="colour")


def test_closure_phases_match_closed_form_and_ignore_station_phases(noiseless):
    vset = noiseless.vset
    series = plots.closure_phase_series(vset, noiseless.model_vis)
    n_times = len(np.unique(vset.time))
    # every triangle of 5 stations at every time: C(5, 3) = 10 per time
    assert series["phase"].size == 10 * n_times
    # closure phase arg(V_ab V_bc V_ca) of the closed-form visibilities (REFERENCES.md)
    for tri in ("OSPREY-HERON-CRANE", "HERON-EGRET-PLOVER"):
        a, b, c = tri.split("-")
        sel = series["triangle"] == tri
        for t, cp in zip(series["time"][sel][:5], series["phase"][sel][:5]):

            def vis(p, q):
                row = np.nonzero((vset.station1 == p) & (vset.station2 == q) & (np.abs(vset.time - t) < 1e-9))[0][0]
                return show_sim.truth_vis(vset.u[row], vset.v[row])

            expect = np.angle(vis(a, b) * vis(b, c) * np.conj(vis(a, c)))
            assert abs(np.angle(np.exp(1j * (cp - expect)))) < 1e-9
    # station-based phase errors leave every closure phase unchanged (REFERENCES.md)
    rng = np.random.default_rng(11)
    gains = {s: np.exp(1j * rng.uniform(-np.pi, np.pi, n_times)) for s in show_sim.STATIONS}
    tindex = np.searchsorted(np.unique(vset.time), vset.time)
    g1 = np.array([gains[s][k] for s, k in zip(vset.station1, tindex)])
    g2 = np.array([gains[s][k] for s, k in zip(vset.station2, tindex)])
    corrupted = vset.with_vis(vset.vis * g1 * np.conj(g2))
    again = plots.closure_phase_series(corrupted, noiseless.model_vis)
    np.testing.assert_allclose(np.angle(np.exp(1j * (again["phase"] - series["phase"]))), 0.0, atol=1e-9)
    np.testing.assert_allclose(np.angle(np.exp(1j * (series["model"] - series["phase"]))), 0.0, atol=1e-9)
    # error at high SNR: sqrt(sum (sigma/|V|)^2) (Chael et al. 2018)
    assert np.all(series["sigma"] > 0)


def test_closure_plot_chooses_most_informative_triangles():
    vset = show_sim.simulated_set(noise=0.02, seed=2)
    view = fit_view(vset, show_sim.truth_fit_json())
    series = plots.closure_phase_series(vset, view.model_vis)
    fig, d = plots.closure_phase_plot(series, max_panels=4)
    style.close(fig)
    assert len(d["triangles"]) == 4
    info = {t: np.sum(1 / series["sigma"][series["triangle"] == t] ** 2) for t in np.unique(series["triangle"])}
    best = sorted(info, key=lambda t: -info[t])[:4]
    assert d["triangles"] == best
    for t in d["triangles"]:
        p = d["panels"][t]
        assert np.all(np.diff(p["hours"]) >= 0)
        assert p["phase_deg"].size == np.sum(series["triangle"] == t)


def test_closure_plot_without_triangles_is_a_clear_error():
    vset = show_sim.simulated_set()
    pair = vset.subset((vset.station1 == "OSPREY") & (vset.station2 == "HERON"))
    series = plots.closure_phase_series(pair, pair.vis)
    with pytest.raises(UvfitError, match="triangle"):
        plots.closure_phase_plot(series)


def test_sky_plot_orientation_outlines_and_flux(noiseless):
    fig, d = sky_figure(noiseless, npix=200)
    ax = fig.axes[0]
    left, right = ax.get_xlim()
    assert left > right  # east to the left, as on the sky (common practice)
    style.close(fig)
    x0, x1, y0, y1 = d["extent"]
    ny, nx = d["image"].shape
    pixel = (x1 - x0) / nx * (y1 - y0) / ny
    # the rendered image holds the model's total flux, 1.0 + 0.4 Jy (the model file)
    assert abs(d["image"].sum() * pixel - 1.4) < 0.02
    # the brightest pixel is the core at the origin
    assert np.hypot(*d["peak_xy"]) < 3.0

    # the knot at east -15, north -20 uas (west and south of the core) is bright there and not
    # at the point-reflected position: the sky is not mirrored (README, "Conventions")
    def at(x, y):
        i = int((x - x0) / (x1 - x0) * nx)
        j = int((y - y0) / (y1 - y0) * ny)
        return d["image"][j, i]

    assert at(-15.0 - 8, -20.0 - 8) > 3 * at(15.0 + 8, 20.0 + 8)
    names = [o["label"].split()[0] for o in d["outlines"]]
    assert names == ["core", "knot"]
    knot = d["outlines"][1]
    assert (knot["x"], knot["y"], knot["major"]) == pytest.approx((-15.0, -20.0, 30.0))
    # nominal resolution 1 / max uv distance in radians, shown in uas (common practice)
    q = np.hypot(noiseless.vset.u, noiseless.vset.v).max()
    assert d["resolution"] == pytest.approx(1.0 / q / show_sim.UAS)


def test_sky_plot_ellipse_and_point_outlines():
    image = np.zeros((50, 50))
    image[25, 25] = 1.0
    outlines = [
        {"label": "a", "kind": "ellipse", "x": 1.0, "y": 2.0, "major": 4.0, "minor": 2.0, "pa_deg": 30.0},
        {"label": "b", "kind": "point", "x": -3.0, "y": 0.0},
    ]
    fig, d = plots.sky_plot(image, (-10, 10, -10, 10), outlines, resolution=3.0, unit="mas")
    from matplotlib.patches import Ellipse

    ell = [p for p in fig.axes[0].patches if isinstance(p, Ellipse)]
    # position angle north through east: the major axis points to (sin pa, cos pa) in (east,
    # north), at 90 - pa degrees from the east axis (common practice)
    major = [e for e in ell if e.width == pytest.approx(4.0)][0]
    assert major.angle == pytest.approx(60.0)
    style.close(fig)
    assert d["peak_xy"] == pytest.approx((0.2, 0.2))


def test_corner_plot_quantiles():
    rng = np.random.default_rng(4)
    samples = rng.normal(size=(20000, 2)) * [1.0, 3.0] + [0.0, 5.0]
    fig, d = corner_plot(samples, ["a.flux", "a.fwhm"], ["Jy", "uas"])
    style.close(fig)
    # 16th and 84th percentiles of a normal: mean -+ 0.9945 sigma (scipy.stats.norm)
    z = stats.norm.ppf(0.84)
    np.testing.assert_allclose(d["upper"] - d["median"], [z, 3 * z], rtol=0.05)
    np.testing.assert_allclose(d["median"], [0.0, 5.0], atol=0.06)
    with pytest.raises(UvfitError):
        corner_plot(samples, ["only one"])


def test_png_is_reproducible_and_valid(noiseless, tmp_path):
    import matplotlib.image as mpimg

    fig, _ = plots.radial_plot(noiseless.vset, noiseless.model_vis)
    one, two = style.png_bytes(fig), style.png_bytes(fig)
    assert one == two and one.startswith(style.PNG_SIGNATURE)  # PNG signature (PNG spec)
    path = style.save_png(fig, tmp_path / "r.png")
    style.close(fig)
    pixels = mpimg.imread(path)
    assert pixels.shape[0] > 400 and pixels.shape[1] > 400
    with pytest.raises(UvfitError, match="exists"):
        style.save_png(fig, tmp_path / "r.png")


def test_sky_outlines_of_every_shape_family():
    from uvfit.sky.model import SkyModel

    model = SkyModel.build(
        [
            {
                "name": "blob",
                "shape": "elliptical_gaussian",
                "flux": 1.0,
                "east": 0.0,
                "north": 0.0,
                "fwhm": 10.0,
                "axis_ratio": 0.5,
                "position_angle": 40.0,
            },
            {"name": "plate", "shape": "disk", "flux": 0.5, "east": 20.0, "north": 5.0, "diameter": 8.0},
            {"name": "loop", "shape": "ring", "flux": 0.3, "east": -20.0, "north": 10.0, "diameter": 12.0},
            {
                "name": "pair",
                "shape": "double",
                "member": "point",
                "flux": 0.4,
                "east": 5.0,
                "north": -25.0,
                "flux_ratio": 1.0,
                "separation": 10.0,
                "position_angle": 90.0,
            },
        ],
        angular_unit="mas",
    )
    vset = show_sim.simulated_set()
    view = fit_view(
        vset, {**show_sim.truth_fit_json(), "model_toml": model.to_toml(), "parameters": {}, "angular_unit": "mas"}
    )
    fig, d = sky_figure(view, npix=128)
    style.close(fig)
    got = {o["label"].split()[0]: o for o in d["outlines"]}
    assert set(got) == {"blob", "plate", "loop", "pair.1", "pair.2"}
    # FWHM ellipse: minor = axis ratio x major, at the model's position angle (the model file)
    assert (got["blob"]["kind"], got["blob"]["major"], got["blob"]["minor"], got["blob"]["pa_deg"]) == (
        "ellipse",
        10.0,
        5.0,
        40.0,
    )
    assert (got["plate"]["kind"], got["plate"]["major"]) == ("circle", 8.0)
    assert (got["loop"]["kind"], got["loop"]["major"]) == ("ring", 12.0)
    # the second member of the double at separation 10 and PA 90 deg: 10 to the east (position
    # angles north through east, REFERENCES.md "Conventions")
    assert (got["pair.2"]["x"] - got["pair.1"]["x"], got["pair.2"]["y"] - got["pair.1"]["y"]) == pytest.approx(
        (10.0, 0.0), abs=1e-9
    )
    assert got["pair.1"]["kind"] == "point"
    # the field holds every component, and the image every jansky of the model (the thin ring's
    # flux put into the pixels under it): 1.0 + 0.5 + 0.3 + 0.4 Jy
    x0, x1, y0, y1 = d["extent"]
    ny, nx = d["image"].shape
    assert d["image"].sum() * (x1 - x0) / nx * (y1 - y0) / ny == pytest.approx(2.2, rel=0.01)
    for o in d["outlines"]:
        assert x0 < o["x"] < x1 and y0 < o["y"] < y1
