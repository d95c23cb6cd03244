"""Export of closure quantities (data, errors and model values) as an astropy Table."""

import numpy as np

from .check import CLOSURE_CAUTION


def closure_table(result, vset=None):
    """An astropy Table of the closure quantities in ``result`` (from :func:`check_closures`):
    kind, time (MJD), frequency (Hz), channel, stations, value, sigma, model (NaN without a
    model), unit (deg for closure phases, empty for natural-log closure amplitudes)."""
    import astropy.units as un
    from astropy.table import Table, vstack

    cs = result["closures"]
    models = result.get("model_values") or {}
    tabs = []
    for kind, scale, unit in (("phase", np.degrees(1.0), "deg"), ("amplitude", 1.0, "")):
        c = cs[kind]
        m = models.get(kind)
        m = np.full(c.n, np.nan) if m is None else np.asarray(m) * scale
        t = Table()
        t["kind"] = np.full(c.n, "closure_phase" if kind == "phase" else "log_closure_amplitude", dtype="U21")
        t["time"] = c.time * un.day
        t["time"].description = "MJD (UTC)"
        t["frequency"] = c.frequency * un.Hz
        t["channel"] = c.channel.astype(int)
        t["stations"] = c.labels.astype("U64") if c.n else np.zeros(0, "U64")
        t["value"] = c.value * scale
        t["sigma"] = c.sigma * scale
        t["model"] = m
        t["unit"] = np.full(c.n, unit, dtype="U3")
        tabs.append(t)
    out = vstack(tabs, metadata_conflicts="silent")
    out.meta["closure_set"] = result["set"]
    out.meta["snr_cut"] = result["snr_cut"]
    out.meta["systematic"] = result["systematic"]
    out.meta["covariance"] = result["covariance"]
    out.meta["stations_meaning"] = (
        "triangle A-B-C: arg V_AB + arg V_BC + arg V_CA; quadrangle A-B-C-D: ln(|V_AB| |V_CD| / (|V_AC| |V_BD|))"
    )
    out.meta["caution"] = CLOSURE_CAUTION
    return out
