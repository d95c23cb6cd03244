"""`uvfit info DATA`: what a visibility file holds, at a glance (and as JSON with --json)."""
import click
import numpy as np

from ._common import force_option, pop_read_options, pop_selection, read_data, read_options, selection_options

_RAD_TO_MAS = 180.0 / np.pi * 3.6e6


def _sexagesimal(ra_deg, dec_deg):
    if not (np.isfinite(ra_deg) and np.isfinite(dec_deg)):
        return "unknown"
    from astropy.coordinates import Angle
    import astropy.units as u
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


def summarise(vset):
    """The summary dictionary of ``uvfit info`` (VisibilitySet.summary plus a few file facts)."""
    s = vset.summary()
    s["stokes"] = vset.meta.get("stokes_i_from", "I")
    s["file_format"] = vset.meta.get("format")
    for key in ("note_single_hand", "note_weights", "note_stations", "selection_notes", "orientation",
                "n_autocorrelation_rows_flagged"):
        if key in vset.meta:
            s[key] = vset.meta[key]
    if vset.meta.get("format") == "ms":
        _ms_extras(vset, s)
    return s


def _ms_extras(vset, s):
    """Measurement Set facts for ``uvfit info``: data column, fields, spectral windows, antennas,
    scans (from the rows' scan numbers, unflagged rows)."""
    for key in ("ms_column", "ms_column_note", "ms_weights", "ms_fields", "ms_field", "ms_spws",
                "ms_spws_read", "ms_antennas", "ms_rows_total"):
        if key in vset.meta:
            s[key] = vset.meta[key]
    good = vset.subset(~vset.flag)
    scans = []
    if good.n:
        numbers, inverse = np.unique(good.scan, return_inverse=True)
        inverse = inverse.reshape(-1)
        start = np.full(numbers.size, np.inf)
        end = np.full(numbers.size, -np.inf)
        np.minimum.at(start, inverse, good.time)
        np.maximum.at(end, inverse, good.time)
        count = np.bincount(inverse, minlength=numbers.size)
        scans = [{"scan": int(n), "start_mjd": float(a), "end_mjd": float(b), "duration_s": float((b - a) * 86400.0),
                  "n_visibilities": int(c)} for n, a, b, c in zip(numbers, start, end, count)]
    s["scans"] = scans


def _ms_lines(s):
    """The extra lines of the human table for a Measurement Set."""
    fields = s.get("ms_fields", [])
    used = [f for f in fields if f.get("n_rows")]
    spws = s.get("ms_spws", [])
    read = set(s.get("ms_spws_read", []))
    scans = s.get("scans", [])
    rows = [
        ("data column", s.get("ms_column_note", "-") + f"; weights from {s.get('ms_weights', '-')}"),
        ("fields", f"{len(fields)}: " + ", ".join(
            f"{f['id']} {f['name']}" + (" (read)" if f["id"] == s.get("ms_field") else "")
            + ("" if f.get("n_rows") else " (no rows)") for f in fields) + (f"; {len(used)} with data" if len(used) != len(fields) else "")),
        ("spectral windows", f"{len(spws)}: " + ", ".join(
            f"{w['id']} {w['name'] or '-'} ({w['n_channels']} channels, "
            f"{(w['frequency_min_hz'] or 0) / 1e9:.6g}-{(w['frequency_max_hz'] or 0) / 1e9:.6g} GHz)"
            + (" (read)" if w["id"] in read else "") for w in spws)),
        ("antennas", f"{len(s.get('ms_antennas', []))} in the ANTENNA table, {s['n_stations']} with data"),
        ("scans", f"{len(scans)}: " + ", ".join(f"{c['scan']} ({c['duration_s']:.4g} s, {c['n_visibilities']} vis)"
                                                for c in scans[:20]) + (" ..." if len(scans) > 20 else "")),
    ]
    return rows


def render(s):
    """The human table: one quantity per line, units in the line."""
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
        ("source", s["source"]),
        ("phase centre", _sexagesimal(s["ra_deg"], s["dec_deg"])),
        ("frequency", ftext),
        ("polarization", f"Stokes I from {s['stokes']}"),
        ("stations", f"{s['n_stations']}: {' '.join(s['stations'])}"),
        ("baselines", f"{s['n_baselines']}"),
        ("visibilities", f"{s['n_visibilities']} usable, {s['n_flagged']} flagged"),
        ("time (UTC)", f"{start} to {end} ({span:.2f} h)" if span is not None else "-"),
        ("integration", f"{s['median_integration_s']:.3g} s (median)" if s.get("median_integration_s") else "-"),
        ("uv distance", f"{_uv(s['uv_min_lambda'])} to {_uv(s['uv_max_lambda'])}"),
        ("resolution", f"{_angle(s['resolution_mas'])}  (lambda/B_max, nominal)"),
        ("largest scale", f"{_angle(s['largest_scale_mas'])}  (lambda/B_min)"),
        ("median SNR", f"{s['median_snr']:.3g}  (median sigma {s['median_sigma_jy']:.3g} Jy)"
         if s.get("median_snr") is not None else "-"),
    ]
    if s.get("file_format") == "ms":
        rows += _ms_lines(s)
    width = max(len(k) for k, _ in rows)
    lines = [f"{k:<{width}}  {v}" for k, v in rows]
    for key in ("note_single_hand", "note_weights", "note_stations"):
        if key in s:
            lines.append(f"{'note':<{width}}  {s[key]}")
    return "\n".join(lines)


@click.command("info")
@click.argument("data", type=click.Path())
@click.option("--json", "json_out", default=None, metavar="OUT",
              help="Also write the summary as JSON to OUT ('-' writes the JSON to stdout instead of the table).")
@selection_options
@read_options
@force_option
def command(data, json_out, force, **kwargs):
    """Describe a visibility file: source, frequencies, stations, times, uv coverage, resolution.

    The resolution and largest scale are nominal (lambda over the longest and shortest projected
    baseline); what a fit can resolve also depends on the signal-to-noise ratio.
    """
    from ..data.select import apply_selection
    from ..outputs import to_json, write_json

    selection = {k: v for k, v in pop_selection(kwargs).items() if v not in (None, (), "")}
    vset = read_data(data, pop_read_options(kwargs), echo=json_out != "-")
    if selection:
        vset, notes = apply_selection(vset, **selection)
        for note in notes:
            click.echo(note, err=True)
    vset.good()   # a clear error when nothing usable is left
    s = summarise(vset)
    s["path"] = str(data)
    if json_out == "-":
        click.echo(to_json(s), nl=False)
        return
    click.echo(render(s))
    if json_out:
        write_json(json_out, s, force=force)
        click.echo(f"wrote {json_out}", err=True)
