"""One self-contained HTML page that shows a fit: data, numbers, figures, checks and cautions.

The page embeds its figures as base64 PNG and its style inline; it loads nothing (no script, no
font, no image) from anywhere. It is deterministic: the same inputs give the same bytes, because
the PNGs carry no time or software stamp, the page carries no time except those in the inputs, and
every table follows the order of its input.
"""

import base64
import html

import numpy as np

from .. import __version__
from ..errors import UvfitError
from ..labels import REPORT_CAUTIONS
from . import plots, style
from .corner import corner_plot
from .figures import KINDS, make_figure

_CSS = """
body{font-family:Georgia,'DejaVu Serif',serif;max-width:1100px;margin:1.5em auto;padding:0 1em;
color:#111;background:#fff;line-height:1.4}
h1{font-size:1.6em;border-bottom:2px solid #0072B2;padding-bottom:.2em}
h2{font-size:1.25em;margin-top:1.6em;border-bottom:1px solid #bbb}
table{border-collapse:collapse;margin:.6em 0;font-size:.92em}
th,td{border:1px solid #999;padding:.25em .6em;text-align:left;vertical-align:top}
th{background:#e8eef4}
td.num{text-align:right;font-family:'DejaVu Sans Mono',monospace}
figure{margin:1em 0}
figure img{max-width:100%;height:auto;border:1px solid #ccc}
figcaption{font-size:.9em;color:#333}
.caution{border-left:4px solid #D55E00;background:#fdf3ec;padding:.4em .8em;margin:.6em 0}
.note{color:#444;font-size:.92em}
.verdict{font-weight:bold}
@media print{figure{page-break-inside:avoid}h2{page-break-after:avoid}}
"""


# --------------------------------------------------------------------------- formatting


def _esc(x):
    return html.escape(str(x), quote=True)


def fmt(x):
    """Numbers with 6 significant digits; None and NaN as a dash; everything else as text."""
    if x is None:
        return "—"
    if isinstance(x, (bool, np.bool_)):
        return "yes" if x else "no"
    if isinstance(x, (int, np.integer)):
        return str(int(x))
    if isinstance(x, (float, np.floating)):
        return "—" if not np.isfinite(x) else f"{float(x):.6g}"
    if isinstance(x, (list, tuple)):
        if len(x) <= 8:
            return ", ".join(fmt(v) for v in x)
        return ", ".join(fmt(v) for v in x[:8]) + f", … ({len(x)} values)"
    if isinstance(x, dict):
        return "; ".join(f"{k}: {fmt(v)}" for k, v in x.items())
    return str(x)


def _cell(x):
    cls = (
        ' class="num"'
        if isinstance(x, (int, float, np.integer, np.floating)) and not isinstance(x, (bool, np.bool_))
        else ""
    )
    return f"<td{cls}>{_esc(fmt(x))}</td>"


def table(header, rows, caption=None):
    """An HTML table; ``rows`` are sequences of cell values (formatted by :func:`fmt`)."""
    out = ["<table>"]
    if caption:
        out.append(f"<caption>{_esc(caption)}</caption>")
    out.append("<tr>" + "".join(f"<th>{_esc(h)}</th>" for h in header) + "</tr>")
    for row in rows:
        out.append("<tr>" + "".join(_cell(v) for v in row) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


def mapping_table(mapping, header=("quantity", "value")):
    return table(header, [(k, v) for k, v in mapping.items()])


def records_table(records, first="name"):
    """A table of {name: {column: value}}; columns in order of first appearance."""
    columns = []
    for rec in records.values():
        if isinstance(rec, dict):
            columns.extend(c for c in rec if c not in columns)
    rows = [
        [name] + [rec.get(c) if isinstance(rec, dict) else (rec if c == "value" else None) for c in columns]
        for name, rec in records.items()
    ]
    if not columns:
        columns = ["value"]
        rows = [[name, rec] for name, rec in records.items()]
    return table([first] + columns, rows)


def _figure(fig, caption, alt):
    data = base64.b64encode(style.png_bytes(fig)).decode("ascii")
    style.close(fig)
    return (
        f'<figure><img alt="{_esc(alt)}" src="data:image/png;base64,{data}">'
        f"<figcaption>{_esc(caption)}</figcaption></figure>"
    )


def _section(title, body, anchor):
    return f'<h2 id="{anchor}">{_esc(title)}</h2>\n{body}'


# --------------------------------------------------------------------------- sections


_SUMMARY_UNITS = {
    "ra_deg": "deg",
    "dec_deg": "deg",
    "uv_min_lambda": "λ",
    "uv_max_lambda": "λ",
    "time_start_mjd": "MJD (UTC)",
    "time_end_mjd": "MJD (UTC)",
    "time_start_utc": "UTC",
    "time_end_utc": "UTC",
    "time_span_hours": "h",
    "resolution_mas": "mas",
    "largest_scale_mas": "mas",
    "median_sigma_jy": "Jy",
    "median_integration_s": "s",
}


def _iso(mjd):
    from astropy.time import Time

    return Time(float(mjd), format="mjd", scale="utc").isot[:19]


def data_summary_table(summary, vset, model=None):
    """The data summary with units; times also as ISO UTC, frequencies in GHz."""
    rows = []
    for key, value in summary.items():
        if key == "frequency_hz":
            rows.append(("frequencies", [round(f / 1e9, 6) for f in value], "GHz"))
            continue
        rows.append((summary_label(key), value, _SUMMARY_UNITS.get(key, "")))
        if (
            key in ("time_start_mjd", "time_end_mjd")
            and value is not None
            and key.replace("_mjd", "_utc") not in summary
        ):
            rows.append((summary_label(key.replace("_mjd", "")), _iso(value), "UTC"))
    res = plots.nominal_resolution(vset)
    if np.isfinite(res):
        if model is not None:
            rows.append(
                (
                    "nominal resolution λ/B_max",
                    res / float(model.rad_per_unit),
                    style.angle_label(model.angular_unit_text),
                )
            )
        else:
            rows.append(("nominal resolution λ/B_max", res, "rad"))
    return table(("quantity", "value", "unit"), rows)


def parameter_rows(parameters):
    rows = []
    for name, p in parameters.items():
        if p.get("free", True):
            status = "free"
        elif p.get("tie"):
            status = f"tied: {p['tie']}"
        else:
            status = "fixed"
        rows.append([name, p.get("value"), p.get("error"), p.get("unit", ""), status])
    return rows


#: readable labels of the data summary's keys (the JSON keys stay in the outputs)
SUMMARY_LABELS = {
    "source": "source",
    "ra_deg": "right ascension",
    "dec_deg": "declination",
    "n_visibilities": "visibilities (unflagged)",
    "n_flagged": "flagged rows",
    "stations": "stations",
    "n_stations": "number of stations",
    "n_baselines": "baselines",
    "frequencies": "frequencies",
    "time_start_mjd": "start (MJD)",
    "time_end_mjd": "end (MJD)",
    "time_start": "start",
    "time_end": "end",
    "uv_min_lambda": "shortest uv distance",
    "uv_max_lambda": "longest uv distance",
    "median_snr": "median signal-to-noise ratio",
    "n_rows": "rows (flagged included)",
    "channels": "channels",
    "time_span_hours": "time span",
    "time_start_utc": "start (UTC)",
    "time_end_utc": "end (UTC)",
    "resolution_mas": "resolution (longest baseline)",
    "largest_scale_mas": "largest scale (shortest baseline)",
    "median_sigma_jy": "median error per part",
    "median_integration_s": "median integration",
}


def summary_label(key):
    """The readable label of a data-summary key (unknown keys with underscores as spaces)."""
    return SUMMARY_LABELS.get(key, str(key).replace("_", " "))


def probability_text(p):
    """A probability as text: a value that underflowed to 0 is stated as a bound, not as 0."""
    if p is None or not np.isfinite(p):
        return "—"
    if p <= 1e-15:
        return "p < 1e-15"
    return f"p = {float(p):.3g}"


def _readable_derived(derived):
    """Derived records for the page: a resolved test's value is its false-alarm probability,
    shown as ``p = ...`` (or ``p < 1e-15``), never as a bare 0."""
    out = {}
    for name, rec in derived.items():
        if isinstance(rec, dict) and "resolved" in rec and "delta_chi2" in rec:
            rec = dict(rec)
            rec["value"] = probability_text(rec.get("value"))
        out[name] = rec
    return out


def _derived_table(derived):
    if not derived:
        return '<p class="note">No derived quantities were recorded.</p>'
    derived = _readable_derived(derived)
    if all(isinstance(v, dict) for v in derived.values()):
        return records_table(derived, first="quantity")
    return mapping_table(derived)


def _statistics_section(fit):
    stats = fit.get("statistics") or {}
    order = ("chi2", "dof", "reduced_chi2", "n_data", "aic", "bic")
    rows = [(k, stats.get(k)) for k in order if k in stats]
    rows += [(k, v) for k, v in stats.items() if k not in order]
    body = [table(("statistic", "value"), rows)]
    body.append(
        f'<p class="note">Mode: {_esc(fit.get("mode", "unknown"))}; systematic floor: '
        f"{_esc(fmt(fit.get('systematic')))} of |V| added in quadrature to each sigma.</p>"
    )
    per_station = fit.get("per_station")
    if isinstance(per_station, dict) and per_station:
        body.append("<p>Chi-square by station (a station far above the others points at its calibration):</p>")
        body.append(records_table(per_station, first="station"))
    elif isinstance(per_station, list) and per_station:
        body.append(_list_table(per_station))
    corr = fit.get("correlation")
    if isinstance(corr, dict) and corr.get("names") and corr.get("matrix"):
        names, matrix = corr["names"], corr["matrix"]
        if len(names) == len(matrix):
            body.append("<p>Correlation of the free parameters (|r| near 1: the data cannot tell them apart):</p>")
            body.append(
                table(
                    [""] + list(names),
                    [[n] + [None if v is None else round(float(v), 3) for v in row] for n, row in zip(names, matrix)],
                )
            )
    for key, text in (
        ("fixed_by_fitter", "Fixed by the fitter (the data cannot constrain them)"),
        ("unconstrained", "Unconstrained by the data"),
    ):
        items = fit.get(key) or []
        if items:
            body.append(f"<p>{_esc(text)}: {_esc(fmt(list(items)))}</p>")
    per_baseline = fit.get("per_baseline")
    if isinstance(per_baseline, dict) and per_baseline:
        body.append("<p>Chi-square by baseline:</p>")
        body.append(records_table(per_baseline, first="baseline"))
    elif isinstance(per_baseline, list) and per_baseline:
        body.append(_list_table(per_baseline))
    return "\n".join(body)


def _list_table(records):
    if all(isinstance(r, dict) for r in records):
        columns = []
        for r in records:
            columns.extend(c for c in r if c not in columns)
        return table(columns, [[r.get(c) for c in columns] for r in records])
    return table(("value",), [[r] for r in records])


#: lists of a closure check shown as tables, with their headings (the full per-quadrangle list
#: is long and stays in the check's own outputs)
_CLOSURE_LISTS = (
    ("per_station", "Closure misfit by station (worst first)"),
    ("per_triangle", "Closure phases by triangle (worst first)"),
    ("worst_quadrangles", "Log closure amplitudes: the worst quadrangles"),
)
_CLOSURE_SKIP = (
    "closures",
    "model_values",
    "verdict",
    "summary",
    "caution",
    "per_quadrangle",
    "worst_triangles",
    "worst_stations",
)


def _closure_section(check):
    if check is None:
        return '<p class="note">The closure check was not run.</p>'
    if isinstance(check, str):
        return f'<p class="note">{_esc(check)}</p>'
    body = []
    verdict = check.get("verdict") or check.get("summary")
    if verdict:
        body.append(f'<p class="verdict">{_esc(fmt(verdict))}</p>')
    flat = {
        k: v for k, v in check.items() if k not in _CLOSURE_SKIP and not isinstance(v, (dict, list, tuple, np.ndarray))
    }
    listed = {k: v for k, v in check.items() if k == "stations"}
    if flat or listed:
        body.append(mapping_table({**flat, **listed}))
    for key, heading in _CLOSURE_LISTS:
        v = check.get(key)
        if isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            body.append(f"<p>{_esc(heading)}:</p>")
            body.append(_list_table(v))
    caution = check.get("caution")
    if caution:
        body.append(f'<p class="caution">{_esc(caution)}</p>')
    body.append(
        '<p class="note">The closure check compares the closure phases and log closure '
        "amplitudes of the data with those of the fitted model. It is immune to "
        "station-based gain errors, not to baseline-based errors, and blind to the "
        "absolute position and the flux scale.</p>"
    )
    return "\n".join(body)


def _compare_section(compare):
    body = []
    verdict = compare.get("verdict")
    if verdict:
        body.append(f'<p class="verdict">Verdict: {_esc(fmt(verdict))}</p>')
    models = compare.get("models")
    cols = ("chi2", "dof", "n_free", "reduced_chi2", "aic", "bic", "likelihood_ratio", "false_alarm_probability")
    if isinstance(models, dict) and models:
        rows = []
        for name, m in models.items():
            m = m if isinstance(m, dict) else {}
            rows.append([name] + [m.get(c) for c in cols])
        body.append(table(("model",) + cols, rows))
    elif isinstance(models, list) and models:
        rows = [
            [m.get("name", f"model {i}")] + [m.get(c) for c in cols]
            for i, m in enumerate(models)
            if isinstance(m, dict)
        ]
        body.append(table(("model",) + cols, rows))
    rest = {k: v for k, v in compare.items() if k not in ("verdict", "models") and not isinstance(v, (dict, list))}
    if rest:
        body.append(mapping_table(rest))
    body.append(
        '<p class="note">The false-alarm probability, where given, is calibrated by '
        "simulation on the data's own (u, v) coverage and errors; the chi-square reference "
        "distribution does not hold for a component whose flux can go to zero.</p>"
    )
    return "\n".join(body)


def _posterior_section(posterior):
    params = posterior.get("parameters", {})
    cols = [
        c
        for c in (
            "median",
            "lower",
            "upper",
            "lower_95",
            "upper_95",
            "max_posterior",
            "upper_limit_95",
            "lower_limit_95",
        )
        if any(c in p for p in params.values())
    ]
    rows = [[n] + [p.get(c) for c in cols] + [p.get("unit", "")] for n, p in params.items()]
    body = [
        table(["parameter"] + cols + ["unit"], rows),
        '<p class="note">lower and upper: the central 68 % credible interval; _95: the central '
        "95 % interval; a limit is given where the posterior piles up against a bound.</p>",
    ]
    derived = posterior.get("derived")
    if derived:
        body.append("<p>Derived quantities from the samples:</p>")
        body.append(_derived_table(derived))
    diag = {
        k: posterior.get(k)
        for k in (
            "converged",
            "acceptance_fraction",
            "autocorrelation_time",
            "n_walkers",
            "n_steps",
            "n_samples",
            "burn_in",
            "discard",
            "thin",
            "seed",
        )
        if k in posterior
    }
    ordering = posterior.get("ordering")
    if isinstance(ordering, dict) and ordering.get("description"):
        diag["ordering of the samples"] = ordering["description"]
    if diag:
        body.append(mapping_table(diag, header=("sampler diagnostic", "value")))
    if posterior.get("converged") is False:
        body.append(
            '<p class="caution">The sampler did not record convergence: the chain may be '
            "shorter than a few tens of autocorrelation times, and the intervals are not "
            "to be trusted yet.</p>"
        )
    return "\n".join(body)


# --------------------------------------------------------------------------- figures


#: anchor and caption of each figure of :data:`uvfit.show.figures.KINDS` in the page
_CAPTIONS = {
    "radial": (
        "radial",
        "Visibility amplitude and phase against uv distance: data with 1σ errors "
        "(blue), the model at the data's own (u, v) (vermillion); normalised residuals "
        "below.",
    ),
    "uv": ("coverage", "(u, v) coverage, each visibility with its conjugate; u increases to the left (east)."),
    "closure": (
        "closure-phases",
        "Closure phases against time for the worst-fitting distinct triangles (largest reduced "
        "χ² first; triangles through one site drawn once): data with 1σ errors and the model.",
    ),
    "sky": (
        "sky",
        "The fitted model on the sky (east to the left) with each component's "
        "outline and the nominal resolution λ/B_max for scale.",
    ),
}


def figures(view, chain=None, chain_names=None, chain_units=None, chain_summaries=None):
    """[(anchor, caption, Figure)] for the report; a figure that cannot be made becomes a note."""
    out = []
    for kind in [k for k in KINDS if k in _CAPTIONS]:
        anchor, caption = _CAPTIONS[kind]
        try:
            fig, _ = make_figure(kind, view)
        except UvfitError as exc:
            if kind != "closure":
                raise
            out.append((anchor, f"No closure-phase figure: {exc}", None))
            continue
        out.append((anchor, caption, fig))
    if chain is not None:
        fig, _ = corner_plot(chain, chain_names, chain_units, summaries=chain_summaries)
        out.append(("corner", "Posterior samples of the free parameters (16, 50, 84 % quantiles marked).", fig))
    return out


# --------------------------------------------------------------------------- the page


def build_report(view, closure_check=None, posterior=None, chain=None, compare=None, data_name=None):
    """The report as HTML text. ``view`` is a :class:`uvfit.show.readback.FitView`."""
    fit = view.fit
    summary = view.vset.summary()
    source = summary.get("source", "unknown")
    parts = [f"<h1>uvfit fit report: {_esc(source)}</h1>"]
    ident = {
        "data": data_name or fit.get("data"),
        "fitted data": fit.get("data"),
        "mode": fit.get("mode"),
        "seed": fit.get("seed"),
        "fit written by uvfit version": fit.get("version"),
        "report written by uvfit version": __version__,
        "angular unit": view.angular_unit,
    }
    if posterior is not None:
        ident["sampler seed"] = posterior.get("seed")
    parts.append(mapping_table(ident, header=("item", "value")))
    parts.append(
        '<p class="caution">Results hold for the model family fitted, under the '
        'calibration assumptions of the mode used; see <a href="#cautions">Cautions</a>.'
        "</p>"
    )
    parts.append(
        _section(
            "Data",
            data_summary_table(summary, view.vset, view.model)
            + (
                "<p>Selection applied (the fit's own, overridden by the command's options):</p>"
                + mapping_table(view.selection, header=("option", "value"))
                if view.selection
                else '<p class="note">No selection applied.</p>'
            ),
            "data",
        )
    )
    params = fit.get("parameters", {})
    parts.append(
        _section(
            "Parameters",
            table(("parameter", "value", "error (1σ)", "unit", "status"), parameter_rows(params)),
            "parameters",
        )
    )
    parts.append(_section("Derived quantities", _derived_table(fit.get("derived") or {}), "derived"))
    parts.append(_section("Goodness of fit", _statistics_section(fit), "goodness"))
    chain_names = list((posterior or {}).get("parameters", {}).keys())
    chain_units = [
        (posterior or {}).get("parameters", {}).get(n, {}).get("unit") or params.get(n, {}).get("unit", "")
        for n in chain_names
    ]
    if chain is not None and chain.shape[1] != len(chain_names):
        chain_names = [n for n, p in params.items() if p.get("free", True)]
        chain_units = [params[n].get("unit", "") for n in chain_names]
    # the corner plot marks the posterior's own 68 % intervals (one computation for both)
    recorded = (posterior or {}).get("parameters", {})
    chain_summaries = None
    if chain is not None and all(
        isinstance(recorded.get(n), dict) and all(k in recorded[n] for k in ("median", "lower", "upper"))
        for n in chain_names
    ):
        chain_summaries = [recorded[n] for n in chain_names]
    made = figures(view, chain, chain_names, chain_units, chain_summaries)
    html_figs = {
        anchor: (f'<p class="note">{_esc(caption)}</p>' if fig is None else _figure(fig, caption, anchor))
        for anchor, caption, fig in made
    }
    corner_html = html_figs.pop("corner", "")
    parts.append(_section("Figures", "\n".join(html_figs.values()), "figures"))
    parts.append(_section("Closure check", _closure_section(closure_check), "closure-check"))
    if compare is not None:
        parts.append(_section("Model comparison", _compare_section(compare), "comparison"))
    if posterior is not None or corner_html:
        body = (
            _posterior_section(posterior)
            if posterior is not None
            else ('<p class="note">No posterior summary was given; the corner plot shows the whole chain.</p>')
        )
        parts.append(_section("Posterior", body + corner_html, "posterior"))
    notices = list(fit.get("notices") or []) + list(fit.get("cautions") or [])
    if notices:
        parts.append(
            _section(
                "Notices and cautions recorded by the fit",
                "<ul>" + "".join(f"<li>{_esc(fmt(n))}</li>" for n in notices) + "</ul>",
                "notices",
            )
        )
    parts.append(
        _section(
            "Cautions",
            "\n".join(f'<div class="caution"><b>{_esc(t)}.</b> {_esc(x)}</div>' for t, x in REPORT_CAUTIONS),
            "cautions",
        )
    )
    body = "\n".join(parts)
    return (
        '<!DOCTYPE html>\n<html lang="en">\n<head>\n<meta charset="utf-8">\n'
        f"<title>uvfit report: {_esc(source)}</title>\n<style>{_CSS}</style>\n</head>\n"
        f"<body>\n{body}\n</body>\n</html>\n"
    )


def run_closure_check(view):
    """The closure check of the fitted model on the data (a dict), or a sentence saying why not."""
    from ..stats.closures import check_closures

    try:
        return check_closures(view.vset, view.model, view.systematic)
    except UvfitError as exc:
        return f"The closure check could not be made: {exc}"
