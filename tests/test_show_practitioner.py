"""Figures a practitioner reads at a glance: colouring of the radial and (u, v) figures by baseline,
station or time on every kind of data; the sky plot's field, markers, position errors and flux
labels.

Checks read the figures' numbers and matplotlib's artists, never pixels.
"""

import math
import types

import numpy as np
import pytest
from helpers import show_sim
from matplotlib.lines import Line2D
from matplotlib.patches import Ellipse
from scipy import stats
from test_practitioner_figures import _nine_station_set

from uvfit.errors import UvfitError
from uvfit.show import plots, style
from uvfit.show.corner import corner_plot
from uvfit.show.figures import make_figure
from uvfit.show.readback import fit_view
from uvfit.show.sky import position_covariances, sky_figure
from uvfit.sky.model import SkyModel

# --------------------------------------------------------------------------- the data kinds


def _complex_set():
    vset = show_sim.simulated_set(noise=0.01, n_times=8)
    return vset, show_sim.truth_vis(vset.u, vset.v)


def _ecsv_set(tmp_path):
    from uvfit.data.table import read_table, write_table

    vset, _ = _complex_set()
    path = write_table(vset, tmp_path / "sim.ecsv")
    back = read_table(path)
    return back, show_sim.truth_vis(back.u, back.v)


def _ms_set(tmp_path):
    pytest.importorskip("casacore")
    from _ms_tools import textbook_double, write_invented_ms

    import uvfit

    write_invented_ms(str(tmp_path / "double.ms"), n_times=4, n_chan=2)  # the last channel is flagged
    vset = uvfit.read(str(tmp_path / "double.ms")).good()
    five = sorted(set(vset.station1.tolist()))[:5]  # ten baselines keep the test fast
    vset = vset.subset(np.isin(vset.station1, five) & np.isin(vset.station2, five))
    return vset, textbook_double(vset.u, vset.v)


def _real_set(real_data):
    from helpers.real_data import real_file

    import uvfit

    vset = uvfit.read(str(real_file("lo"))).good()
    vset = vset.subset(np.arange(vset.n) < 150)
    return vset, np.full(vset.n, 1.0 + 0j)  # a 1 Jy point at the phase centre


def _data_kinds(tmp_path, real_data):
    yield "complex (invented)", _complex_set()
    yield "ECSV (invented)", _ecsv_set(tmp_path)
    yield "3C 279 UVFITS (tests/data)", _real_set(real_data)
    try:
        yield "Measurement Set (invented)", _ms_set(tmp_path)
    except pytest.skip.Exception:
        pass


def _data_points(ax):
    """Points of the data lines in an axes (everything marked except the model's line)."""
    return sum(
        len(line.get_xdata())
        for line in ax.get_lines()
        if line.get_marker() not in (None, "None", "", ".") and line.get_linestyle() in ("None", "none", "")
    )


def test_radial_colour_by_every_kind_of_data(tmp_path, real_data):
    for what, (vset, model_vis) in _data_kinds(tmp_path, real_data):
        rows = np.argsort(np.hypot(vset.u, vset.v), kind="stable")
        # normalised amplitude residuals, (|V| - |M|) / sigma, computed here (definition)
        expected = (np.abs(vset.vis) - np.abs(model_vis)) / vset.sigma
        # the baseline of every row, built here from the station columns
        labels = np.array([f"{a}-{b}" for a, b in zip(vset.station1[rows], vset.station2[rows])])
        for colour_by in plots.COLOURINGS:
            fig, d = plots.radial_plot(vset, model_vis, colour_by=colour_by)
            # the residual panel is in sigma as before, whatever the colouring
            np.testing.assert_allclose(d["residual_amplitude"], expected[rows], rtol=1e-9, err_msg=what)
            ax_a = fig.axes[0]
            if colour_by == "time":
                # hours since 0 h UTC of the first day (MJD definition: days)
                day0 = math.floor(float(np.min(vset.time)))
                np.testing.assert_allclose(d["colour_key"], (vset.time[rows] - day0) * 24.0, err_msg=what)
                assert any(c.get_offsets().shape[0] == vset.n for c in ax_a.collections), what
            else:
                # every row drawn once in the amplitude panel (matplotlib artists)
                assert _data_points(ax_a) == vset.n, what
                legend = [t.get_text() for t in fig.legends[0].get_texts()]
                assert legend == d["groups"], what
                if colour_by == "baseline":
                    assert sorted(set(labels)) == d["groups"], what
                    assert all(np.asarray(d["groups"])[d["colour_key"]] == labels), what
                else:
                    stations = sorted(set(vset.station1.tolist()) | set(vset.station2.tolist()))
                    assert d["groups"] == stations, what
                    colours = plots.station_colours(stations)
                    for line in ax_a.get_lines():
                        if line.get_fillstyle() == "left":
                            a, b = line.get_label().split("-", 1) if line.get_label().count("-") == 1 else (None, None)
                            if a in colours and b in colours:
                                # left half the first station, right half the second
                                assert line.get_markerfacecolor() == colours[a], what
                                assert line.get_markerfacecoloralt() == colours[b], what
            style.close(fig)


def test_radial_after_a_closure_fit_shows_the_scaled_model_and_says_so():
    vset = show_sim.simulated_set(n_times=6)
    fit = {
        **show_sim.truth_fit_json("closure"),
        "flux_scale": {"measured_by_mode": False, "scale": 2.0, "total_flux_jy": 2.8, "total_flux_error_jy": 0.1},
    }
    fit["flux_scale"]["n_rows"] = 10
    view = fit_view(vset, fit)
    # visibilities are linear in the fluxes (linearity of the Fourier transform, common practice):
    # the drawn model is twice the closed-form one
    np.testing.assert_allclose(view.model_vis, 2.0 * show_sim.truth_vis(vset.u, vset.v), rtol=1e-9, atol=1e-12)
    fig, d = make_figure("radial", view, colour_by="station")
    texts = " ".join(t.get_text() for t in fig.texts)
    assert "amplitude estimate 2.8" in texts and "does not measure the flux" in texts
    np.testing.assert_allclose(d["model_amplitude"], np.abs(2.0 * show_sim.truth_vis(vset.u, vset.v))[d["order"]])
    style.close(fig)


def test_uv_legend_by_station_when_there_are_many_baselines():
    vset = _nine_station_set()
    fig, d = make_figure("uv", types.SimpleNamespace(vset=vset))
    assert d["colour_by"] == "station" and len(d["baselines"]) == 36  # 9 choose 2 (combinatorics)
    legend = fig.legends[0]
    assert [t.get_text() for t in legend.get_texts()] == [f"ST{k}" for k in range(9)]
    renderer = fig.canvas.get_renderer()
    box, frame = legend.get_window_extent(renderer), fig.bbox
    assert frame.x0 - 0.5 <= box.x0 and box.x1 <= frame.x1 + 0.5  # inside the figure (renderer geometry)
    assert fig.axes[0].get_window_extent(renderer).x1 <= box.x0
    # every row and its conjugate drawn once (matplotlib artists)
    assert sum(len(ln.get_xdata()) for ln in fig.axes[0].get_lines()) == 2 * vset.n
    style.close(fig)
    few = show_sim.simulated_set(n_times=4)  # 5 stations, 10 baselines: the legend by baseline
    fig, d = make_figure("uv", types.SimpleNamespace(vset=few))
    assert d["colour_by"] == "baseline" and len(d["groups"]) == 10
    style.close(fig)


# --------------------------------------------------------------------------- the sky plot


def _double(separation=30.0, position_angle=60.0):
    return SkyModel.build(
        [
            {
                "name": "pair",
                "shape": "double",
                "member": "point",
                "flux": 1.0,
                "east": 0.0,
                "north": 0.0,
                "flux_ratio": 0.5,
                "separation": separation,
                "position_angle": position_angle,
            }
        ],
        angular_unit="uas",
    )


def _view(model, vset, **fit):
    return fit_view(vset, {**show_sim.truth_fit_json(), "model_toml": model.to_toml(), "parameters": {}, **fit})


def test_sky_field_follows_a_small_double_of_points():
    # 5 GHz on an Earth-sized array: lambda / B_max about 1 mas, thirty times the separation
    vset = show_sim.simulated_set(n_times=4, frequency=5e9)
    view = _view(_double(), vset)
    fig, d = sky_figure(view, npix=64)
    x0, x1, y0, y1 = d["extent"]
    width = abs(x1 - x0)
    assert d["resolution"] > 20 * 30.0
    assert 30.0 < width < 3 * 30.0  # the frame is a few separations, not a few beams
    for o in d["outlines"]:
        assert x0 + 0.1 * width < o["x"] < x1 - 0.1 * width and y0 + 0.1 * width < o["y"] < y1 - 0.1 * width
    # points as markers, no image and no colour bar (matplotlib artists)
    assert len(fig.axes) == 1 and not fig.axes[0].images and d["image_drawn"] is False
    assert not d["resolution_drawn"]
    texts = " ".join(t.get_text() for t in fig.axes[0].texts)
    assert "larger than this field" in texts
    style.close(fig)


def _inside(points, centre, ellipse):
    """Whether points (n, 2) in (east, north) lie inside an ellipse of full axes and PA."""
    pa = math.radians(ellipse["pa_deg"])
    major_dir = np.array([math.sin(pa), math.cos(pa)])  # north through east (common practice)
    minor_dir = np.array([math.cos(pa), -math.sin(pa)])
    d = points - np.asarray(centre)
    a, b = d @ major_dir / (ellipse["major"] / 2), d @ minor_dir / (ellipse["minor"] / 2)
    return a * a + b * b <= 1.0


def test_sky_position_error_ellipses_from_the_covariance():
    model = SkyModel.build(
        [
            {"name": "core", "shape": "gaussian", "flux": 1.0, "east": 0.0, "north": 0.0, "fwhm": 20.0},
            {"name": "knot", "shape": "point", "flux": 0.4, "east": -15.0, "north": -20.0},
        ],
        angular_unit="uas",
    )
    cov = [[4.0, 1.5], [1.5, 1.0]]
    vset = show_sim.simulated_set(n_times=4)
    view = _view(model, vset, covariance={"names": ["knot.east", "knot.north"], "matrix": cov})
    fig, d = sky_figure(view, npix=64)
    knot = [o for o in d["outlines"] if o["label"].startswith("knot")][0]
    err = knot["position_error"]
    # the 1-sigma ellipse holds 1 - exp(-1/2) of a 2-D Gaussian (scipy.stats.chi2 with 2 d.o.f.)
    draws = stats.multivariate_normal(mean=[-15.0, -20.0], cov=cov).rvs(size=200000, random_state=5)
    frac = _inside(draws, (-15.0, -20.0), err).mean()
    assert frac == pytest.approx(stats.chi2.cdf(1.0, df=2), abs=0.005)
    drawn = [p for p in fig.axes[0].patches if isinstance(p, Ellipse) and p.get_gid() == "position_error"]
    assert len(drawn) == 1 and drawn[0].width == pytest.approx(err["major"])
    assert "core" not in [o["label"].split()[0] for o in d["outlines"] if "position_error" in o]
    style.close(fig)


def test_sky_position_error_of_a_double_member_by_monte_carlo():
    model = _double(separation=30.0, position_angle=60.0)
    cov = np.array([[4.0, -2.0], [-2.0, 9.0]])  # separation (uas), position angle (deg)
    fit = {"covariance": {"names": ["pair.separation", "pair.position_angle"], "matrix": cov.tolist()}}
    got = position_covariances(model, fit)
    assert "pair.1" not in got  # the first member sits at the reference point, which is not moved
    # Monte Carlo through the closed form: second member at (s sin psi, s cos psi) (north through east)
    rng = np.random.default_rng(8)
    s, pa = rng.multivariate_normal([30.0, 60.0], cov, size=200000).T
    east, north = s * np.sin(np.radians(pa)), s * np.cos(np.radians(pa))
    np.testing.assert_allclose(got["pair.2"], np.cov(east, north), rtol=0.03, atol=0.05)


def test_sky_flux_labels_only_where_the_flux_is_measured():
    vset = show_sim.simulated_set(n_times=4)
    model = _double()
    measured = sky_figure(_view(model, vset), npix=32)
    fs = {"measured_by_mode": False, "scale": 1.0, "total_flux_jy": 1.0, "total_flux_error_jy": 0.1, "n_rows": 5}
    closure = sky_figure(_view(model, vset, mode="closure", flux_scale=fs), npix=32)
    assert all("Jy" in o["label"] for o in measured[1]["outlines"])
    assert all("Jy" not in o["label"] for o in closure[1]["outlines"])
    assert all(o["flux_measured"] is False for o in closure[1]["outlines"])
    labels = [t.get_text() for t in closure[0].axes[0].texts]
    assert "pair.1" in labels and not any("Jy" in t for t in labels if t.startswith("pair"))
    for fig, _ in (measured, closure):
        style.close(fig)


def test_station_markers_are_split_lines():
    groups, key, legend = plots.row_groups(np.array(["A", "A", "B"]), np.array(["B", "C", "C"]), "station")
    assert [g[0] for g in groups] == ["A-B", "A-C", "B-C"] and [e[0] for e in legend] == ["A", "B", "C"]
    line = Line2D([0], [0], **groups[0][2])
    assert line.get_fillstyle() == "left"


# --------------------------------------------------------------------------- the corner plot


def _overlaps(fig):
    """Pairs (axis label, tick label) whose text boxes overlap (matplotlib's renderer geometry)."""
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    bad = []
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            label = axis.label
            if not label.get_visible() or not label.get_text():
                continue
            box = label.get_window_extent(renderer)
            ticks = [t for t in axis.get_ticklabels() if t.get_visible() and t.get_text()]
            offset = axis.get_offset_text()
            for t in ticks + ([offset] if offset.get_visible() and offset.get_text() else []):
                if box.overlaps(t.get_window_extent(renderer)):
                    bad.append((label.get_text(), t.get_text()))
    return bad


def test_corner_labels_do_not_overlap_tick_labels():
    rng = np.random.default_rng(1)
    # long tick labels: a tiny spread about a large value, and large values (invented posteriors)
    samples = rng.normal(size=(4000, 4)) * [1e-4, 3.0, 0.01, 50.0] + [1234.5678, -20000.0, 0.5, 1e5]
    names = ["core.flux", "knot.east", "knot.a_rather_long_parameter_name", "core.fwhm"]
    fig, _ = corner_plot(samples, names, ["Jy", "uas", "", "uas"])
    assert _overlaps(fig) == []
    renderer = fig.canvas.get_renderer()
    frame = fig.bbox
    titles = [ax.title.get_window_extent(renderer) for ax in fig.axes if ax.title.get_text()]
    for ax in fig.axes:
        for label in (ax.xaxis.label, ax.yaxis.label):
            if label.get_text():
                b = label.get_window_extent(renderer)
                assert frame.x0 <= b.x0 and b.y0 >= frame.y0  # inside the figure
    # the diagonal titles do not overlap one another
    assert all(not a.overlaps(b) for i, a in enumerate(titles) for b in titles[i + 1 :])
    style.close(fig)


def _posterior_of_two_points():
    """A Posterior of the invented two-point model from draws of a known normal (not a sampler)."""
    from helpers.sample_data import two_points

    from uvfit.infer.sampling.runner import Chain
    from uvfit.infer.sampling.summary import summarize_chain

    model = two_points(1.0, 0.3, east=0.3, north=0.2)
    names = list(model.free_names)
    mean = np.array([model.parameters[n].value for n in names])
    sd = np.array([0.01 if n.endswith("flux") else 0.02 for n in names])
    rng = np.random.default_rng(12)
    draws = mean + sd * rng.standard_normal((200, 10, len(names)))
    chain = Chain(
        names=names,
        chain=draws,
        log_prob=np.zeros((200, 10)),
        acceptance=np.full(10, 0.4),
        tau=np.full(len(names), 5.0),
        converged=True,
        seed=12,
        burn_in=0,
        thin=1,
    )
    return summarize_chain(chain, model, frequency=86e9), draws.reshape(-1, len(names)), names


def test_corner_with_derived_quantities_beside_the_parameters():
    from uvfit.show.corner import derived_columns, select_derived

    post, flat, names = _posterior_of_two_points()
    keys = select_derived(post.derived, ["separation", "a-b.position_angle", "flux_ratio"])
    assert keys == ["a-b.separation", "a-b.position_angle", "a-b.flux_ratio"]
    extra, units, summaries = derived_columns(post, keys)
    east, north = flat[:, names.index("b.east")], flat[:, names.index("b.north")]
    # separation from a at the origin and position angle north through east (closed forms, common practice)
    np.testing.assert_allclose(np.sort(extra[:, 0]), np.sort(np.hypot(east, north)))
    pa = np.degrees(np.arctan2(east, north))
    np.testing.assert_allclose(np.median(extra[:, 1]), np.median(pa), atol=1e-9)
    ratio = flat[:, names.index("b.flux")] / flat[:, names.index("a.flux")]
    np.testing.assert_allclose(np.median(extra[:, 2]), np.median(ratio))
    assert units == ["mas", "deg", ""]
    samples = np.column_stack([post.samples, extra])
    fig, d = corner_plot(samples, names + keys, [post.parameters[n]["unit"] for n in names] + units)
    assert d["names"][-3:] == keys
    # the marked median of the separation is the sample median (numpy percentile)
    assert d["median"][len(names)] == pytest.approx(np.median(np.hypot(east, north)), rel=1e-6)
    assert _overlaps(fig) == []
    style.close(fig)
    with pytest.raises(UvfitError, match="not among this model's"):
        select_derived(post.derived, ["brightness"])


def _exit_message(args, capsys):
    """Exit code and stderr of ``uvfit ARGS`` run as the console script runs it."""
    from uvfit.cli import main

    with pytest.raises(SystemExit) as exc:
        main(list(args))
    return exc.value.code, capsys.readouterr().err.strip()


def test_sample_command_derived_option(tmp_path, capsys):
    from click.testing import CliRunner
    from helpers.sample_data import simulate, two_points

    import uvfit
    from uvfit.cli import cli

    truth = two_points(1.0, 0.3, east=0.3, north=0.2)
    uvfit.write(simulate(truth, n=60, sigma=0.05, seed=2), str(tmp_path / "obs.ecsv"))
    truth.save(str(tmp_path / "model.toml"))
    base = ["sample", str(tmp_path / "obs.ecsv"), str(tmp_path / "model.toml"), "--walkers", "10", "--seed", "3"]
    code, err = _exit_message([*base, "--corner", str(tmp_path / "c.png"), "--derived", "nonsense"], capsys)
    assert code == 2 and "--derived names 'nonsense'" in err and "a-b.separation" in err
    assert len(err.splitlines()) == 1 and not (tmp_path / "c.png").exists()
    code, err = _exit_message([*base, "--derived", "separation"], capsys)
    assert code == 2 and "--corner" in err
    ok = CliRunner().invoke(
        cli, [*base, "--max-steps", "60", "--corner", str(tmp_path / "c.png"), "--derived", "separation"]
    )
    assert ok.exit_code == 0, ok.output
    assert (tmp_path / "c.png").read_bytes().startswith(style.PNG_SIGNATURE)  # PNG signature (PNG spec)


def test_plot_command_colours_the_radial_figure(tmp_path):
    import json

    from click.testing import CliRunner

    import uvfit
    from uvfit.cli import cli

    vset = show_sim.simulated_set(n_times=4)
    uvfit.write(vset, str(tmp_path / "sim.ecsv"))
    show_sim.write_json(tmp_path / "fit.json", show_sim.truth_fit_json())
    args = ["plot", str(tmp_path / "sim.ecsv"), "--fit", str(tmp_path / "fit.json"), "--kind", "radial"]
    r = CliRunner().invoke(
        cli, [*args, "--colour-by", "station", "-o", str(tmp_path / "r.png"), "--numbers", str(tmp_path / "r.json")]
    )
    assert r.exit_code == 0, r.output
    numbers = json.loads((tmp_path / "r.json").read_text())
    assert numbers["colour_by"] == "station" and numbers["groups"] == sorted(show_sim.STATIONS)
