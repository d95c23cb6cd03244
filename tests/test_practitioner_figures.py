"""Issue 19, figures and progress a practitioner reads at a glance (items 8, 11, 12).

Checks are on the numbers and on matplotlib's own renderer geometry (bounding boxes), not pixels.
"""

import io

import numpy as np
from helpers.arrays import every_baseline, observe

from uvfit.commands import _common
from uvfit.show import plots, report, style


def _nine_station_set():
    """An invented 9-station snapshot series: 36 baselines (9 * 8 / 2, combinatorics)."""
    rng = np.random.default_rng(19)
    xy = rng.uniform(-4e9, 4e9, size=(9, 2))
    t, i, j = every_baseline(9, 4)
    angle = 0.3 * t
    d = xy[j] - xy[i]
    u = np.cos(angle) * d[:, 0] - np.sin(angle) * d[:, 1]
    v = np.sin(angle) * d[:, 0] + np.cos(angle) * d[:, 1]
    names = np.array([f"ST{k}" for k in range(9)])
    return observe(
        u,
        v,
        names[i],
        names[j],
        60000.0 + t / 24.0,
        frequency=86e9,
        sigma=0.1,
        vis=np.ones(u.size, complex),
        source="INVENTED",
    )


def test_uv_legend_of_36_baselines_inside_the_figure():
    vset = _nine_station_set()
    fig, numbers = plots.uv_coverage_plot(vset, colour_by="baseline")
    assert len(numbers["baselines"]) == 36  # 9 choose 2 (combinatorics)
    renderer = fig.canvas.get_renderer()
    legend = fig.legends[0]
    axes_box = fig.axes[0].get_window_extent(renderer)
    box, frame = legend.get_window_extent(renderer), fig.bbox
    # the whole legend lies inside the figure (matplotlib's renderer geometry)
    assert box.x0 >= frame.x0 - 0.5 and box.x1 <= frame.x1 + 0.5
    assert box.y0 >= frame.y0 - 0.5 and box.y1 <= frame.y1 + 0.5
    assert len(legend.get_texts()) == 36
    assert axes_box.x1 <= box.x0  # the legend does not cover the coverage
    style.close(fig)


def test_report_data_table_has_readable_labels():
    vset = _nine_station_set()
    text = report.data_summary_table(vset.summary(), vset)
    for key in ("time_start_mjd", "uv_max_lambda", "median_sigma_jy", "n_visibilities"):
        assert f">{key}<" not in text
    assert ">start (MJD)<" in text and ">longest uv distance<" in text


def test_resolved_row_states_a_bound_not_zero():
    derived = {
        "core.resolved": {"value": 0.0, "delta_chi2": 900.0, "resolved": True, "alpha": 0.01, "unit": ""},
        "knot.resolved": {"value": 0.2, "delta_chi2": 0.7, "resolved": False, "alpha": 0.01, "unit": ""},
    }
    text = report._derived_table(derived)
    assert "p &lt; 1e-15" in text and "p = 0.2" in text
    assert '<td class="num">0</td>' not in text


class _Pipe(io.StringIO):
    def isatty(self):
        return False


class _Terminal(io.StringIO):
    def isatty(self):
        return True


def test_progress_not_a_terminal_prints_a_line_per_stage():
    out = _Pipe()
    with _common._Progress(10, "fitting", stream=out) as bar:
        for _ in range(10):
            bar.update(1)
    lines = out.getvalue().strip().splitlines()
    assert lines[0] == "fitting: started (10 steps)"
    assert lines[1].startswith("fitting: done, 10 of 10 steps in ")
    assert len(lines) == 2


def test_progress_hides_the_time_estimate_at_the_start():
    out = _Terminal()
    now = {"t": 0.0}
    bar = _common._Progress(100, "sampling", stream=out)
    bar._clock = lambda: now["t"]
    with bar:
        now["t"] = 0.2
        bar.update(1)
        bar.update(1)
        assert bar._bar.show_eta is False  # two updates in 0.2 s: no estimate yet
        bar.update(1)
        assert bar._bar.show_eta is False  # three updates but only 0.2 s
        now["t"] = 5.0
        bar.update(1)
        assert bar._bar.show_eta is True  # four updates, 5 s: the estimate is shown
