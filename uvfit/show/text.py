"""The human tables the commands print: one function per result, a dict (the JSON) in, text out.

Every function returns the text without a final newline; ``click.echo(text)`` prints it. The
functions read only the JSON-ready dictionaries the tasks return (``uvfit.tasks``), so a table can
be printed again from a file written by ``--json``.
"""

import numpy as np

from ..labels import SAMPLE_CAUTION, printable

_RAD_TO_MAS = 180.0 / np.pi * 3.6e6


# --------------------------------------------------------------------------- fit


def _fmt(value, error=None):
    if value is None:
        return "-"
    if error is None:
        return f"{value:.6g}"
    if error != error or error == float("inf"):
        return f"{value:.6g} ± unconstrained"
    return f"{value:.6g} ± {error:.2g}"


def fit_text(out):
    """The table of a fit result dictionary (``uvfit.tasks.fit(...).to_dict()``)."""
    lines = []
    echo = lines.append
    st = out["statistics"]
    if out.get("errors_reliable") is False:
        echo(
            "WARNING: several distinct solutions fit about equally well; the errors below are "
            "curvature errors of the best one and do NOT describe the uncertainty"
        )
        for i, sol in enumerate(out.get("solutions", [])[:5]):
            echo(
                f"  solution {i + 1}: chi2 {sol['chi2']:.6g} (delta {sol['delta_chi2']:.3g}, "
                f"{sol['n_starts']} start(s)): " + ", ".join(f"{k} {v:.4g}" for k, v in sol["parameters"].items())
            )
        echo("")
    echo(
        f"mode {out['mode']}, {st['n_data']} data, {st['n_free']} free parameters, "
        f"systematic floor {out['systematic']:g}, seed {out['seed']}"
        + (f", {out['starts']} starts" if "starts" in out else "")
    )
    echo("")
    echo(f"{'parameter':<28} {'value ± error':<30} {'unit':<6} status")
    for name, p in out["parameters"].items():
        status = "free" if p["free"] else (f"tied to {p['tie']}" if p.get("tie") else "fixed")
        if p.get("measured") is False:
            status += f", not measured (x flux scale: {p['from_flux_scale']:.4g})"
        echo(
            f"{name:<28} {_fmt(p['value'], p['error'] if p['free'] or p.get('tie') else None):<30} "
            f"{p['unit']:<6} {status}"
        )
    if out["derived"]:
        echo("")
        echo(f"{'derived quantity':<36} {'value ± error':<30} unit")
        for key, d in out["derived"].items():
            if d.get("alias_of"):
                continue
            if key.endswith(".resolved"):
                verdict = "yes" if d.get("resolved") else ("no" if d.get("resolved") is False else "?")
                echo(f"{key:<36} {verdict} (delta chi2 {d['delta_chi2']:.3g}, p = {d['value']:.3g})")
                continue
            text = _fmt(d["value"], d["error"])
            if "upper_limit" in d:
                text += f"  (< {d['upper_limit']:.3g})"
            if "lower_limit" in d:
                text += f"  (> {d['lower_limit']:.3g})"
            if d.get("measured") is False:
                text += "  not measured"
            echo(f"{key:<36} {text:<30} {d['unit']}")
    echo("")
    echo(
        f"chi2 {st['chi2']:.6g} for {st['dof']} degrees of freedom (reduced {st['reduced_chi2']:.4g}); "
        f"AIC {st['aic']:.6g}, BIC {st['bic']:.6g}"
    )
    if out["rescale_errors"]:
        echo(f"errors scaled by {out['error_scale']:.4g} (reduced chi2 set to 1)")
    gains = out.get("gains")
    if gains:
        per = "scan" if gains["interval"] == "scan" else f"{gains['interval']:g} s"
        prior = ", ".join(f"{k}={v:g}" for k, v in gains["prior_spread"].items()) or "flat"
        table = gains["table"]
        amps = np.array([r["amplitude"] for r in table]) if table else np.ones(1)
        echo(
            f"gains ({gains['solved']}): {gains['n_gains']} solved, one per station per {per} in "
            f"{gains['n_intervals']} intervals; amplitude prior {prior}; amplitudes "
            f"{amps.min():.3g} to {amps.max():.3g}; chi2 per station below is after the gains"
        )
    for label, key in (("stations", "per_station"), ("baselines", "per_baseline")):
        table = out.get(key) or {}
        if not table:
            continue
        worst = sorted(table.items(), key=lambda kv: -(kv[1]["chi2"] / max(kv[1]["n"], 1)))[:5]
        echo(
            f"worst {label} (chi2 / n): "
            + ", ".join(f"{k} {v['chi2'] / max(v['n'], 1):.3g} ({v['n']})" for k, v in worst)
        )
    for f in out.get("files") or []:
        line = f"file {f['data']}: chi2 {f['chi2']:.6g} on {f['n']} data ({f['rows']} rows)"
        values = f.get("parameters") or {}
        if values:  # the file's values of the per-file parameters
            line += "; " + ", ".join(
                f"{name} {_fmt(v['value'], v['error'])} {v['unit']}".rstrip() for name, v in values.items()
            )
        echo(line)
    for note in out["notices"]:
        echo(f"notice: {note}")
    for caution in out["cautions"]:
        echo(f"caution: {caution}")
    return "\n".join(lines)


# --------------------------------------------------------------------------- compare


def compare_text(out):
    """The table of a model comparison (``uvfit.tasks.compare(...).to_dict()``)."""
    lines = []
    echo = lines.append
    echo(
        f"mode {out['mode']}, systematic floor {out['systematic']:g}, seed {out['seed']}, "
        f"{out['n_bootstrap']} bootstrap simulations"
    )
    echo("")
    echo(f"{'model':<24} {'n_free':>6} {'chi2':>12} {'dof':>6} {'AIC':>12} {'BIC':>12} {'2 ln LR':>10} {'FAP':>8}")
    for r in out["models"]:
        fap = r["false_alarm_probability"]
        fap_text = "-" if fap is None else f"{fap:.3g}"
        echo(
            f"{r['name']:<24} {r['n_free']:>6} {r['chi2']:>12.6g} {r['dof']:>6} {r['aic']:>12.6g} "
            f"{r['bic']:>12.6g} {r['likelihood_ratio']:>10.4g} {fap_text:>8}"
        )
    echo("")
    echo(f"2 ln LR: chi2 of the simplest model ('{out['simplest']}') minus the model's chi2.")
    for r in out["models"]:
        for note in r.get("notices", []):
            echo(f"notice ({r['name']}): {note}")
    if out.get("n_failed_refits"):
        echo(f"notice: {out['n_failed_refits']} bootstrap refits failed and were left out")
    for pair in out.get("pairs") or []:
        echo(f"pair: {pair['verdict']}")
    echo(f"verdict: {out['verdict']}")
    if out.get("fit_caution"):
        echo(f"caution: {out['fit_caution']}")
    return "\n".join(lines)


# --------------------------------------------------------------------------- closures


def _fmt_or_dash(x, spec=".4g"):
    return "-" if x is None else format(x, spec)


def closures_text(res):
    """The table of a closure check (``uvfit.stats.closures.check_closures`` or its JSON summary)."""
    _f = _fmt_or_dash
    lines = [
        f"stations              {res['n_stations']} ({res['n_stations_in_closures']} in closures)",
        f"snapshots             {res['n_snapshots']}",
        f"closure set           {res['set']}, SNR cut {res['snr_cut']:g} on each visibility, "
        f"systematic floor {100 * res['systematic']:g}% of |V|",
        f"closure phases        {res['n_closure_phases']} on {res['n_triangles']} triangles",
        f"closure amplitudes    {res['n_closure_amplitudes']} (log) on {res['n_quadrangles']} quadrangles",
        f"errors                {res['covariance']}",
    ]
    if res.get("average") is not None:
        lines.insert(3, f"averaged              {res['averaging']}")
    if res.get("sites_left_out"):
        sites = "; ".join("-".join(g) for g in res["sites_left_out"])
        lines.insert(3, f"same site             loops with two stations of one site left out ({sites})")
    if "closure_phase_chi2" in res:
        lines += [
            "",
            f"closure phase chi2    {_f(res['closure_phase_chi2'])}  reduced "
            f"{_f(res['closure_phase_reduced_chi2'])}  (expected 1 +/- "
            f"{_f(res['closure_phase_expected_spread'], '.2g')})",
            f"log closure amp. chi2 {_f(res['closure_amplitude_chi2'])}  reduced "
            f"{_f(res['closure_amplitude_reduced_chi2'])}  (expected 1 +/- "
            f"{_f(res['closure_amplitude_expected_spread'], '.2g')})",
        ]
        for title, key, label in (
            ("worst triangles", "worst_triangles", "label"),
            ("worst quadrangles", "worst_quadrangles", "label"),
            ("worst stations", "worst_stations", "station"),
        ):
            rows = res.get(key) or []
            if not rows:
                continue
            lines.append("")
            lines.append(f"{title} (reduced chi2 per closure, n, chi2; diagonal errors)")
            for r in rows:
                lines.append(f"  {r[label]:<16} {r['reduced_chi2']:>10.3g} {r['n']:>6d} {r['chi2']:>12.4g}")
        lines += ["", res["verdict"]]
    lines += ["", "Caution: " + res["caution"]]
    return "\n".join(lines)


# --------------------------------------------------------------------------- info


def _sexagesimal(ra_deg, dec_deg):
    if not (np.isfinite(ra_deg) and np.isfinite(dec_deg)):
        return "unknown"
    import astropy.units as u
    from astropy.coordinates import Angle

    ra = Angle(ra_deg, u.deg).to_string(unit=u.hourangle, sep="hms", precision=4, pad=True)
    dec = Angle(dec_deg, u.deg).to_string(unit=u.deg, sep="dms", precision=3, alwayssign=True, pad=True)
    return f"RA {ra}  Dec {dec}  (J2000; {ra_deg:.6f} deg, {dec_deg:+.6f} deg)"


def _uv(lam):
    if lam is None:
        return "-"
    for scale, unit in ((1e9, "Glambda"), (1e6, "Mlambda"), (1e3, "klambda")):
        if lam >= scale:
            return f"{lam / scale:.4g} {unit}"
    return f"{lam:.4g} lambda"


def _angle(mas):
    if mas is None or not np.isfinite(mas):
        return "-"
    if mas < 1:
        return f"{mas:.3g} mas ({mas * 1e3:.3g} microarcsec)"
    if mas < 1e3:
        return f"{mas:.3g} mas"
    return f"{mas / 1e3:.3g} arcsec"


def _ms_lines(s):
    """The extra lines of the human table for a Measurement Set."""
    fields = s.get("ms_fields", [])
    used = [f for f in fields if f.get("n_rows")]
    spws = s.get("ms_spws", [])
    read = set(s.get("ms_spws_read", []))
    scans = s.get("scans", [])
    rows = [
        ("data column", s.get("ms_column_note", "-") + f"; weights from {s.get('ms_weights', '-')}"),
        (
            "fields",
            f"{len(fields)}: "
            + ", ".join(
                f"{f['id']} {f['name']}"
                + (" (read)" if f["id"] == s.get("ms_field") else "")
                + ("" if f.get("n_rows") else " (no rows)")
                for f in fields
            )
            + (f"; {len(used)} with data" if len(used) != len(fields) else ""),
        ),
        (
            "spectral windows",
            f"{len(spws)}: "
            + ", ".join(
                f"{w['id']} {w['name'] or '-'} ({w['n_channels']} channels, "
                f"{(w['frequency_min_hz'] or 0) / 1e9:.6g}-{(w['frequency_max_hz'] or 0) / 1e9:.6g} GHz)"
                + (" (read)" if w["id"] in read else "")
                for w in spws
            ),
        ),
        ("antennas", f"{len(s.get('ms_antennas', []))} in the ANTENNA table, {s['n_stations']} with data"),
        (
            "scans",
            f"{len(scans)}: "
            + ", ".join(f"{c['scan']} ({c['duration_s']:.4g} s, {c['n_visibilities']} vis)" for c in scans[:20])
            + (" ..." if len(scans) > 20 else ""),
        ),
    ]
    return rows


def _scan_site_lines(s):
    """The scans, sites and phase-calibration lines of the data summary."""
    rows = []
    sc = s.get("scan_structure")
    if sc and sc.get("n_scans"):
        rows.append(
            (
                "scans",
                f"{sc['n_scans']}, median length {sc['median_scan_length_s']:.4g} s, median "
                f"{sc['median_rows_per_baseline_per_scan']:.3g} rows per baseline and scan ({sc['scans_from']})",
            )
        )
    st = s.get("sites")
    if st is not None:
        if st["all_one_site"]:
            text = f"every station within {st['distance_m']:g} m of another: one site (same-site handling off)"
        elif st["sites"]:
            parts = []
            for g in st["sites"]:
                ds = [p["distance_m"] for p in st["pairs"] if set(p["stations"]) <= set(g)]
                parts.append("-".join(g) + (f" ({max(ds):.4g} m)" if ds else ""))
            text = "; ".join(parts) + f"  (stations closer than {st['distance_m']:g} m)"
        else:
            text = f"none (no two stations closer than {st['distance_m']:g} m)"
        rows.append(("same site", text))
    pc = s.get("phase_calibration")
    if pc is not None:
        rows.append(("phases", pc.get("hint") or pc["verdict"]))
    return rows


def info_text(s):
    """The table of a data summary (``uvfit.tasks.info(...).to_dict()``): one quantity per line."""
    freqs = s["frequency_hz"]
    if len(freqs) <= 4:
        ftext = ", ".join(f"{f / 1e9:.7g}" for f in freqs) + " GHz"
    else:
        ftext = f"{len(freqs)} frequencies, {freqs[0] / 1e9:.6g} to {freqs[-1] / 1e9:.6g} GHz"
    ftext += f" ({len(s['channels'])} channel{'s' if len(s['channels']) != 1 else ''})"
    start = (s.get("time_start_utc") or "-").replace("T", " ")[:19]
    end = (s.get("time_end_utc") or "-").replace("T", " ")[:19]
    span = s.get("time_span_hours")
    rows = [
        ("source", printable(s["source"])),
        ("phase centre", _sexagesimal(s["ra_deg"], s["dec_deg"])),
        ("frequency", ftext),
        ("polarization", f"Stokes I from {s['stokes']}"),
        ("stations", f"{s['n_stations']}: {' '.join(printable(n) for n in s['stations'])}"),
        ("baselines", f"{s['n_baselines']}"),
        (
            "visibilities",
            f"{s['n_visibilities']} usable, {s['n_flagged']} flagged"
            + "".join(f"; {k}: {n}" for k, n in (s.get("flagged_reasons") or {}).items()),
        ),
        ("time (UTC)", f"{start} to {end} ({span:.2f} h)" if span is not None else "-"),
        ("integration", f"{s['median_integration_s']:.3g} s (median)" if s.get("median_integration_s") else "-"),
        ("uv distance", f"{_uv(s['uv_min_lambda'])} to {_uv(s['uv_max_lambda'])}"),
        ("resolution", f"{_angle(s['resolution_mas'])}  (lambda/B_max, nominal)"),
        ("largest scale", f"{_angle(s['largest_scale_mas'])}  (lambda/B_min)"),
        (
            "median SNR",
            f"{s['median_snr']:.3g}  (median sigma {s['median_sigma_jy']:.3g} Jy)"
            if s.get("median_snr") is not None
            else "-",
        ),
    ]
    rows += _scan_site_lines(s)
    if s.get("file_format") == "ms":
        rows += _ms_lines(s)
    width = max(len(k) for k, _ in rows)
    lines = [f"{k:<{width}}  {v}" for k, v in rows]
    for key in ("note_single_hand", "note_weights", "note_stations"):
        if key in s:
            lines.append(f"{'note':<{width}}  {s[key]}")
    return "\n".join(lines)


# --------------------------------------------------------------------------- sample


def sample_text(table):
    """The posterior table (``Posterior.table()``) and the caution printed under it."""
    return f"{table}\n{SAMPLE_CAUTION}"


# --------------------------------------------------------------------------- simulate, forecast


def simulation_text(s, obs):
    """The summary of a simulation (``uvfit.tasks.simulate``): ``s`` its dict, ``obs`` the
    :class:`uvfit.sim.observe.Observation`."""
    lines = [
        f"wrote {s['output']}: {s['rows']} visibilities over {s['times']} integrations and "
        f"{s['channels']} channel(s), source {s['source']}, seed {s['seed']}",
        f"band: {obs.frequency_hz / 1e9:.6g} GHz centre, {obs.bandwidth_hz / 1e6:.6g} MHz in "
        f"{obs.channels} channel(s) of {obs.channel_width_hz / 1e6:.6g} MHz; integration "
        f"{obs.integration_s:g} s; scans of {obs.scan_length_s:g} s",
        f"baselines with data: {s['baselines_with_data']} of {s['baselines_in_array']}",
        f"nominal resolution lambda/B_max: {s['nominal_resolution_uas']:.1f} microarcsec "
        f"(longest projected baseline {s['max_uv_lambda'] / 1e6:.1f} Mlambda)",
        f"median thermal sigma per real/imaginary part: {s['median_sigma_jy'] * 1e3:.3g} mJy",
        "time on source (h, above the elevation limit):",
    ]
    lines += [f"  {name:<10s} {h:6.2f}" for name, h in s["hours_on_source"].items()]
    return "\n".join(lines)


def forecast_text(out):
    """The summary of a forecast (``uvfit.tasks.forecast(...).to_dict()``)."""
    lines = [
        f"forecast: {out['trials']} trials of '{out['true_model']}' ({out['true_free_parameters']} free) "
        f"with array '{out['array']}', "
        f"mode {out['mode']}, seed {out['seed']} (trial k uses seed {out['seed']} + k)",
        f"rows per trial: {out['rows_per_trial']}; nominal resolution {out['nominal_resolution_uas']:.1f} microarcsec",
        f"true structure recovered (all free parameters within 3 sigma): "
        f"{out['recovered_fraction']:.0%}"
        + (f" ({out['true_fit_failures']} fits failed)" if out["true_fit_failures"] else ""),
        f"true model preferred over every alternative: by BIC {out['preferred_bic_fraction']:.0%}, "
        f"by likelihood ratio {out['preferred_lr_fraction']:.0%}",
    ]
    for a in out["alternatives"]:
        d = a["delta_chi2"]
        med = "-" if d["median"] is None else f"{d['median']:.1f} [{d['p16']:.1f}, {d['p84']:.1f}]"
        rule = (
            f"threshold delta chi2 {a['lr_threshold_delta_chi2']:.2f}"
            if a["free_parameters"] != out["true_free_parameters"]
            else "same number of free parameters: higher likelihood"
        )
        lines.append(
            f"  vs {a['name']} ({a['free_parameters']} free): BIC {a['true_preferred_bic_fraction']:.0%}, "
            f"LR {a['true_preferred_lr_fraction']:.0%} ({rule}); "
            f"delta chi2 = chi2_alt - chi2_true, median [16%, 84%] {med}"
        )
    if out["structure"]:
        lines.append("recovered structure, median [16%, 84%] (true value):")
        for key, s in out["structure"].items():
            if s["median"] is None:
                lines.append(f"  {key:<28s} -")
            else:
                lines.append(f"  {key:<28s} {s['median']:.4g} [{s['p16']:.4g}, {s['p84']:.4g}]  ({s['true']:.4g})")
    lines.append("caution: " + out["cautions"][0])
    return "\n".join(lines)


# --------------------------------------------------------------------------- batch


def batch_text(rows, n_run, output):
    """The summary of a batch run: counts, then one line per job."""
    n_failed = sum(r["status"] == "failed" for r in rows)
    n_cached = sum(r["status"] == "cached" for r in rows)
    lines = [f"{len(rows)} jobs: {n_run} run, {n_cached} up to date (skipped), {n_failed} failed"]
    width = max(len(r["name"]) for r in rows)
    for r in rows:
        stats = (r.get("result") or {}).get("statistics") or {}
        chi = stats.get("reduced_chi2")
        tail = f"reduced chi2 {chi:.3f}" if isinstance(chi, (int, float)) else r["error"]
        lines.append(f"  {r['name']:<{width}}  {r['status']:<7}  {tail}")
    lines.append(f"results table: {output}")
    return "\n".join(lines)


# --------------------------------------------------------------------------- image


def image_text(out):
    """The summary of a model image (``uvfit.tasks.image(...).to_dict()``)."""
    unit = out.get("angular_unit") or ""
    n = out["size_pixels"]
    lines = [
        f"model image of {out.get('source') or 'the fit'}: {n} x {n} pixels of {out['pixel']:.4g} {unit}, "
        f"centre RA {out['ra_deg']:.6f} deg, Dec {out['dec_deg']:+.6f} deg, unit {out['bunit']}",
        f"model flux {out['model_flux_jy']:.6g} Jy, inside the image {out['flux_in_image_jy']:.6g} Jy; "
        f"peak {out['peak']:.4g} {out['peak_unit']}",
    ]
    beam = out.get("beam")
    if beam:
        lines.append(
            f"restoring beam {beam['major']:.4g} x {beam['minor']:.4g} {unit}, PA {beam['pa_deg']:.1f} deg ({beam['how']})"
        )
    lines.append("pixels per component:")
    lines += [f"  {name}: {rule}" for name, rule in out.get("rendering", {}).items()]
    lines += [f"NOTE: {note}" for note in out.get("notices", [])]
    lines += list(out.get("cautions", []))
    return "\n".join(lines)


# --------------------------------------------------------------------------- motion


def motion_text(out):
    """The table of a motion result (``uvfit.tasks.motion(...).to_dict()``)."""
    unit = out.get("angular_unit") or ""
    lines = [
        f"{len(out['epochs'])} epochs, {out['epochs'][0]['time_utc'][:10]} to {out['epochs'][-1]['time_utc'][:10]}; "
        f"reference {out['reference']} ({out['reference_chosen']}); components matched {out['matched']}",
    ]
    head = f"{'component':<12} {'mu (mas/yr)':>18} {'PA (deg)':>14} {'ejection (J yr)':>18} {'chi2/dof':>10}"
    beta = out.get("redshift") is not None
    if beta:
        head += f" {'beta_app':>14}"
    lines.append(head)
    for name, c in out["components"].items():
        pm, pa, ej = c["proper_motion"], c["position_angle"], c["ejection_epoch"]
        year = "-" if ej["year"] is None else f"{ej['year']:.2f} ± {ej['error_years']:.2f}"
        dof = f"{c['chi2']:.3g}/{c['dof']}" if c["dof"] > 0 else "-"
        row = f"{name:<12} {pm['value']:>9.4g} ± {pm['error']:<6.2g} {pa['value']:>7.1f} ± {pa['error']:<4.2g} {year:>18} {dof:>10}"
        if beta:
            row += f" {c['beta_app']['value']:>7.3g} ± {c['beta_app']['error']:.2g}"
        lines.append(row)
    if beta:
        d = next(iter(out["components"].values()), {}).get("luminosity_distance_mpc")
        if d is not None:
            lines.append(
                f"z = {out['redshift']:g}, {out['cosmology']}: D_L = {d:.1f} Mpc; beta_app = mu D_L / (c (1 + z))"
            )
    lines.append(f"positions relative to {out['reference']} in {unit}; time in {out['time_unit']}")
    lines += [f"note: {n}" for n in out.get("notes", [])]
    lines += list(out.get("cautions", []))
    return "\n".join(lines)
