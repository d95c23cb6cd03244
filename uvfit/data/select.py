"""Selecting rows of a VisibilitySet, and averaging in time or frequency.

Every function returns a new set and says in words what it did (``notes``). The averaging functions
also report the worst-case amplitude loss ("smearing") their averaging introduces for a source
structure out to a field radius (Thompson, Moran & Swenson 2017, ch. 6, from memory):

- time: over an interval dt the (u, v) point of a baseline moves at most omega_e * q * dt (Earth
  rotation at omega_e, uv distance q), so the phase of emission at a radius theta from the phase
  centre changes by at most 2 pi omega_e dt theta q; averaging a phase that runs linearly over that
  range keeps the fraction sinc(x) = sin(pi x)/(pi x) of the amplitude, x = omega_e dt theta q;
- frequency: across a band dnu the (u, v) point scales by dnu/nu, the phase at radius theta changes
  by 2 pi (dnu/nu) theta q, and a flat band keeps sinc(x), x = (dnu/nu) theta q.

The worst case uses the longest baseline in the set. These are upper limits on the loss for a
linear phase run; a real source loses less where its emission is closer to the phase centre.
"""

import os

import numpy as np

from ..errors import DataError

#: Earth's rotation rate relative to the stars, rad/s (IERS value 7.292115e-5, from memory).
OMEGA_EARTH = 7.2921150e-5
_DEFAULT_FIELD_BEAMS = 10.0
_SECONDS_PER_DAY = 86400.0


# --------------------------------------------------------------------------- smearing
def time_smearing_loss(seconds, field_radius_rad, uv_distance):
    """Fractional amplitude loss 1 - sinc(omega_e * dt * theta * q) (see module docstring)."""
    x = OMEGA_EARTH * np.asarray(seconds, float) * np.asarray(field_radius_rad, float) * np.asarray(uv_distance, float)
    return 1.0 - np.sinc(x)


def bandwidth_smearing_loss(bandwidth_hz, frequency_hz, field_radius_rad, uv_distance):
    """Fractional amplitude loss 1 - sinc((dnu/nu) * theta * q) (see module docstring)."""
    x = (
        np.asarray(bandwidth_hz, float)
        / np.asarray(frequency_hz, float)
        * np.asarray(field_radius_rad, float)
        * np.asarray(uv_distance, float)
    )
    return 1.0 - np.sinc(x)


def _default_radius(vset):
    q = vset.uv_distance[~vset.flag] if np.any(~vset.flag) else vset.uv_distance
    qmax = float(np.max(q)) if q.size else 0.0
    return _DEFAULT_FIELD_BEAMS / qmax if qmax > 0 else 0.0


def _radius_for_loss(loss, rate):
    """Field radius at which 1 - sinc(rate * theta) reaches ``loss`` (rate = x per radian)."""
    if rate <= 0:
        return float("inf")
    from scipy.optimize import brentq

    x = brentq(lambda x: 1.0 - np.sinc(x) - loss, 1e-12, 1.0)
    return x / rate


def _fmt_angle(rad):
    mas = np.degrees(rad) * 3.6e6
    if not np.isfinite(mas):
        return "any radius"
    if mas < 1:
        return f"{mas * 1e3:.3g} microarcsec"
    if mas < 1e3:
        return f"{mas:.3g} mas"
    return f"{mas / 1e3:.3g} arcsec"


# --------------------------------------------------------------------------- averaging
def _weighted_groups(vset, keys):
    """Group the rows by the integer key columns; returns (inverse, n_groups, sum of weights)."""
    uniq, inv = np.unique(keys, axis=0, return_inverse=True)
    inv = inv.reshape(-1)
    weight = 1.0 / vset.sigma**2
    wsum = np.bincount(inv, weights=weight, minlength=len(uniq))
    return inv, len(uniq), weight, wsum


def _reduce(vset, inv, n_groups, weight, wsum, new_channel):
    def mean(x):
        return np.bincount(inv, weights=weight * x, minlength=n_groups) / wsum

    vis = mean(vset.vis.real) + 1j * mean(vset.vis.imag)
    # a group of one frequency keeps it exactly (no rounding noise from the weighted mean)
    fmin = np.full(n_groups, np.inf)
    fmax = np.full(n_groups, -np.inf)
    np.minimum.at(fmin, inv, vset.frequency)
    np.maximum.at(fmax, inv, vset.frequency)
    frequency = np.where(fmin == fmax, fmin, mean(vset.frequency))
    integ = vset.integration
    known = np.isfinite(integ)
    integ_sum = np.bincount(inv, weights=np.where(known, integ, 0.0), minlength=n_groups)
    n_known = np.bincount(inv, weights=known.astype(float), minlength=n_groups)
    count = np.bincount(inv, minlength=n_groups)
    first = np.full(n_groups, vset.n, int)
    np.minimum.at(first, inv, np.arange(vset.n))
    from .visset import VisibilitySet

    out = VisibilitySet(
        u=mean(vset.u),
        v=mean(vset.v),
        w=mean(vset.w),
        time=mean(vset.time),
        frequency=frequency,
        station1=vset.station1[first],
        station2=vset.station2[first],
        vis=vis,
        sigma=1.0 / np.sqrt(wsum),
        flag=np.zeros(n_groups, bool),
        channel=new_channel[first],
        integration=np.where(n_known == count, integ_sum, np.nan),
        scan=vset.scan[first],
        stations=vset.stations,
        source=vset.source,
        ra_deg=vset.ra_deg,
        dec_deg=vset.dec_deg,
        meta=dict(vset.meta),
    )
    return out, count


def _codes(values):
    return np.unique(np.asarray(values), return_inverse=True)[1].reshape(-1)


def average_time(vset, seconds, field_radius=None):
    """Average coherently in time bins of ``seconds`` per baseline and channel.

    Bins start at the earliest row; weights 1/sigma^2; the mean visibility, u, v, w and
    frequency are weighted means; every row of a bin gets the bin's common time (the mean time of
    the rows in it, over all baselines), so averaged baselines stay simultaneous for closures; sigma of the mean is 1/sqrt(sum of weights); the integration time
    is the sum over the bin. Flagged rows are left out. Returns ``(vset, report)`` where ``report``
    holds the counts, the worst-case time-smearing loss at ``field_radius`` (radians; default 10
    times the nominal resolution 1/q_max) and a note in words. Coherent averaging assumes the
    calibrated phases are steady over a bin: at short wavelengths the atmosphere can decorrelate
    (lose amplitude) within seconds, which this report does not include.
    """
    seconds = float(seconds)
    if not np.isfinite(seconds) or seconds <= 0:
        raise DataError(f"averaging time must be a positive number of seconds, not {seconds}")
    good = vset.subset(~vset.flag)
    if good.n == 0:
        raise DataError("nothing to average: every row is flagged")
    t_s = (good.time - good.time.min()) * _SECONDS_PER_DAY
    bins = np.floor((t_s + 1e-5) / seconds).astype(np.int64)  # 10 us: MJD rounding
    # the scan number last: bins never mix scans (a constant -1 where the file has no scans
    # leaves the grouping as it was)
    keys = np.column_stack([bins, _codes(good.station1), _codes(good.station2), good.channel, good.scan])
    inv, n_groups, weight, wsum = _weighted_groups(good, keys)
    out, count = _reduce(good, inv, n_groups, weight, wsum, good.channel)
    # Every row of one bin gets the bin's common time stamp (the mean time of all rows in it), so
    # that baselines averaged together stay simultaneous and closures can still be formed. The
    # (u, v, w) of each row remain its own baseline's weighted means.
    _, bin_index = np.unique(bins, return_inverse=True)
    t0 = good.time.min()  # sum offsets, not MJDs, to keep the precision of the stamp
    bin_time = t0 + np.bincount(bin_index, weights=good.time - t0) / np.bincount(bin_index)
    group_bin = np.zeros(n_groups, dtype=np.int64)
    group_bin[inv] = bin_index
    out.time = bin_time[group_bin]
    order = np.lexsort((out.channel, out.station2, out.station1, out.time))
    out = out.subset(order)
    radius = _default_radius(good) if field_radius is None else float(field_radius)
    qmax = float(good.uv_distance.max())
    loss = float(time_smearing_loss(seconds, radius, qmax))
    r1 = _radius_for_loss(0.01, OMEGA_EARTH * seconds * qmax)
    note = (
        f"averaged {good.n} rows into {out.n} in {seconds:g} s bins per baseline and channel "
        f"(up to {int(count.max())} rows each); worst-case time smearing: {100 * loss:.3g}% amplitude "
        f"loss at {_fmt_angle(radius)} from the phase centre on the longest baseline "
        f"({qmax:.4g} wavelengths); below 1% within {_fmt_angle(r1)}. Coherent averaging assumes "
        "steady phases over each bin"
    )
    report = {
        "kind": "time",
        "seconds": seconds,
        "n_in": int(good.n),
        "n_out": int(out.n),
        "n_flagged_dropped": int(vset.n - good.n),
        "field_radius_rad": radius,
        "uv_max_lambda": qmax,
        "smearing_loss": loss,
        "radius_for_1pct_loss_rad": r1,
        "note": note,
    }
    out.meta["time_averaging"] = {k: v for k, v in report.items() if k != "note"}
    return out, report


def average_channels(vset, n, field_radius=None):
    """Average ``n`` adjacent channels (flattened index // n) per (time, baseline), coherently.

    Weighted means as in :func:`average_time`; new channel index = old // n. Returns ``(vset,
    report)``; the report gives the worst-case bandwidth-smearing loss for the merged bandwidth
    (n channel widths, widths from ``meta['channel_width_hz']``, else the spread of the merged
    frequencies) at ``field_radius`` (radians; default 10 times 1/q_max).
    """
    n = int(n)
    if n < 1:
        raise DataError(f"the number of channels to average must be 1 or more, not {n}")
    per_if = vset.meta.get("n_channels_per_if") if isinstance(vset.meta, dict) else None
    if per_if and n > 1 and int(per_if) % n:
        raise DataError(
            f"averaging {n} channels would merge channels of different IFs ({per_if} channels per IF)",
            f"choose a divisor of {per_if}",
        )
    good = vset.subset(~vset.flag)
    if good.n == 0:
        raise DataError("nothing to average: every row is flagged")
    new_channel = good.channel // n
    keys = np.column_stack([_codes(good.time), _codes(good.station1), _codes(good.station2), new_channel])
    inv, n_groups, weight, wsum = _weighted_groups(good, keys)
    out, count = _reduce(good, inv, n_groups, weight, wsum, new_channel)
    widths = vset.meta.get("channel_width_hz") if isinstance(vset.meta, dict) else None
    fmin = np.full(n_groups, np.inf)
    fmax = np.full(n_groups, -np.inf)
    np.minimum.at(fmin, inv, good.frequency)
    np.maximum.at(fmax, inv, good.frequency)
    width_row = np.zeros(good.n)
    if isinstance(widths, (list, tuple)) and len(widths):
        w_arr = np.asarray([np.nan if x is None else x for x in widths], float)
        width_row = np.where(good.channel < len(w_arr), w_arr[np.clip(good.channel, 0, len(w_arr) - 1)], 0.0)
        width_row = np.nan_to_num(width_row)
    wmax = np.zeros(n_groups)
    np.maximum.at(wmax, inv, width_row)
    bandwidth = (fmax - fmin) + wmax  # span of the merged channels, edge to edge
    radius = _default_radius(good) if field_radius is None else float(field_radius)
    q = out.uv_distance
    losses = bandwidth_smearing_loss(bandwidth, out.frequency, radius, q)
    k = int(np.argmax(losses))
    loss = float(losses[k])
    rate = float(bandwidth[k] / out.frequency[k] * q[k])
    r1 = _radius_for_loss(0.01, rate)
    if isinstance(widths, (list, tuple)) and len(widths):
        new_widths = [0.0] * (int(new_channel.max()) + 1)
        for c in np.unique(new_channel):
            new_widths[int(c)] = float(bandwidth[out.channel == c].max())
        out.meta["channel_width_hz"] = new_widths
    if per_if:
        out.meta["n_channels_per_if"] = max(int(per_if) // n, 1)
    note = (
        f"averaged {n} channels: {good.n} rows into {out.n}; worst-case bandwidth smearing: "
        f"{100 * loss:.3g}% amplitude loss at {_fmt_angle(radius)} from the phase centre "
        f"(merged bandwidth {bandwidth[k] / 1e6:.4g} MHz at {out.frequency[k] / 1e9:.6g} GHz); "
        f"below 1% within {_fmt_angle(r1)}"
    )
    report = {
        "kind": "channels",
        "n_channels": n,
        "n_in": int(good.n),
        "n_out": int(out.n),
        "field_radius_rad": radius,
        "bandwidth_hz": float(bandwidth[k]),
        "smearing_loss": loss,
        "radius_for_1pct_loss_rad": r1,
        "note": note,
    }
    out.meta["channel_averaging"] = {k2: v for k2, v in report.items() if k2 != "note"}
    return out, report


# --------------------------------------------------------------------------- selection
def parse_stations(value):
    """'A, B,C' or ['A', 'B'] -> ['A', 'B', 'C']."""
    if value is None:
        return None
    if isinstance(value, str):
        items = value.split(",")
    else:
        items = list(value)
    names = [str(s).strip() for s in items if str(s).strip()]
    if not names:
        raise DataError("the station list is empty", "give comma-separated station names")
    return names


#: most channel indices one channel list may name (a range is expanded into its indices)
MAX_CHANNEL_LIST = 1 << 20


def parse_channels(value):
    """'0,2-5' (or a list of ints) -> sorted list of ints (at most MAX_CHANNEL_LIST of them)."""
    if value is None:
        return None
    if not isinstance(value, str):
        try:
            return sorted({int(x) for x in value})
        except (TypeError, ValueError):
            raise DataError(f"channels must be integers, not {value!r}") from None
    out = set()
    for part in value.split(","):
        part = part.strip()
        if not part:
            continue
        try:
            if "-" in part[1:]:
                lo, hi = part.split("-", 1) if not part.startswith("-") else (part, part)
                lo, hi = int(lo), int(hi)
                if hi < lo:
                    raise ValueError
                if hi - lo + 1 + len(out) > MAX_CHANNEL_LIST:
                    raise DataError(
                        f"the channel list '{value}' names more than {MAX_CHANNEL_LIST} channels",
                        "name the channels the data hold (uvfit info lists them)",
                    )
                out.update(range(lo, hi + 1))
            else:
                out.add(int(part))
        except ValueError:
            raise DataError(
                f"cannot read the channel list '{value}'", "use indices and ranges such as '0,2-5'"
            ) from None
    if not out:
        raise DataError(f"the channel list '{value}' is empty", "use indices and ranges such as '0,2-5'")
    return sorted(out)


#: the selection every command that reads data takes (keyword arguments of apply_selection)
#: options of the reader (Measurement Sets: data column, field, spectral windows), carried in the
#: same selection dictionary as the row selection and recorded in the outputs when given
READ_OPTIONS = ("column", "field", "spw")

SELECTION_OPTIONS = (
    "min_uv",
    "max_uv",
    "stations",
    "exclude_stations",
    "exclude_same_site",
    "site_distance",
    "time_range",
    "channels",
    "average",
)


def parse_time(text):
    """An astropy Time (UTC) from an ISO UTC string ('2017-04-05T03:00') or an MJD number.

    Raises DataError naming the text when it is neither. The one time parser of uvfit: the data
    selection takes ``parse_time(x).mjd`` (a number is kept exactly, see :func:`to_mjd`), the
    simulation the Time itself.
    """
    import warnings

    from astropy.time import Time

    number = _as_number(text)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # ERFA's 'dubious year' for dates past its tables
            if number is not None:
                return Time(number, format="mjd", scale="utc")
            return Time(str(text).strip(), scale="utc")
    except (ValueError, TypeError):
        raise DataError(
            f"cannot read the time {str(text).strip()!r}",
            "give an ISO UTC time such as 2017-04-05T03:00:00, or an MJD number",
        ) from None


def _as_number(text):
    if isinstance(text, (int, float, np.floating, np.integer)) and not isinstance(text, bool):
        return float(text)
    try:
        return float(str(text).strip())
    except ValueError:
        return None


def to_mjd(text):
    """:func:`parse_time` as an MJD number (a number given is returned as it is)."""
    number = _as_number(text)
    return number if number is not None else float(parse_time(text).mjd)


def read_selected(data, selection=None, good=True):
    """Read a visibility file (or take a VisibilitySet) and apply a selection: ``(vset, notes)``.

    ``data``: a path or a VisibilitySet; ``selection``: keyword arguments of
    :func:`apply_selection` (entries that are None or empty are ignored); ``good``: keep only the
    unflagged rows (DataError when none is left; with ``good=False`` the check is still made, but
    the flagged rows are kept). ``notes``: the selection's messages for the user (a list of str).
    Every command, task, batch job and the demo read data through this function.
    """
    if selection is not None and not isinstance(selection, dict):
        raise DataError(
            f"a selection is a table of keys and values, not {type(selection).__name__} {selection!r}",
            "known keys: " + ", ".join(SELECTION_OPTIONS + READ_OPTIONS),
        )
    selection = {k: v for k, v in (selection or {}).items() if v not in (None, (), "", [])}
    unknown = sorted(set(selection) - set(SELECTION_OPTIONS) - set(READ_OPTIONS))
    if unknown:
        raise DataError(
            "unknown selection key(s) " + ", ".join(map(str, unknown)),
            "known keys: " + ", ".join(SELECTION_OPTIONS + READ_OPTIONS),
        )
    reading = {k: selection.pop(k) for k in READ_OPTIONS if k in selection}
    notes = []
    if isinstance(data, (str, bytes)) or hasattr(data, "__fspath__"):
        from .io import read

        vset = read(data, **reading)
        if vset.meta.get("format") == "ms":
            notes.append(
                f"Measurement Set: column {vset.meta['ms_column_note']}, field "
                f"{vset.meta['ms_field']} ({vset.source}), spectral windows "
                + ", ".join(str(s) for s in vset.meta["ms_spws_read"])
            )
    else:
        if reading:
            raise DataError(
                "reader options (" + ", ".join(sorted(reading)) + ") apply to a file "
                "being read, not to visibilities in memory",
                "read the file with these options, or leave them out",
            )
        vset = data
    if selection:
        vset, more = apply_selection(vset, **selection)
        notes += list(more)
    try:
        good_rows = vset.good()
    except DataError as exc:
        if isinstance(data, (str, bytes)) or hasattr(data, "__fspath__"):
            name = os.fsdecode(data)
            raise DataError(f"{name}: {exc.message}", exc.hint) from None
        raise
    return (good_rows if good else vset), notes


def _check_known(names, vset, what):
    known = vset.station_names
    unknown = [s for s in names if s not in known]
    if unknown:
        raise DataError(f"unknown station(s) in {what}: {', '.join(unknown)}", f"the data hold {', '.join(known)}")


def apply_selection(
    vset,
    min_uv=None,
    max_uv=None,
    stations=None,
    exclude_stations=None,
    time_range=None,
    channels=None,
    average=None,
    field_radius=None,
    exclude_same_site=False,
    site_distance=None,
):
    """Select rows (and optionally average in time); returns ``(vset, notes)``.

    ``min_uv``/``max_uv`` in wavelengths; ``stations`` keeps baselines with both ends in the list,
    ``exclude_stations`` drops baselines touching any in the list (comma-separated string or list);
    ``time_range`` two times (ISO UTC or MJD); ``channels`` like '0,2-5'; ``average`` seconds of
    coherent time averaging (see :func:`average_time`); ``exclude_same_site`` drops baselines
    between two stations of one site (stations closer than ``site_distance`` m, default 5000:
    :mod:`uvfit.data.sites`). Raises DataError when a selection leaves
    nothing or names something the data do not have.
    """
    notes = []
    mask = np.ones(vset.n, bool)

    def cut(keep, words):
        nonlocal mask
        before = int(np.count_nonzero(mask))
        mask = mask & keep
        after = int(np.count_nonzero(mask))
        notes.append(f"{words}: kept {after} of {before} rows")
        if after == 0:
            raise DataError(f"the selection leaves no visibilities ({words})", "widen or drop that selection option")

    if channels is not None and channels != "":
        chans = parse_channels(channels)
        present = sorted(set(np.unique(vset.channel).tolist()))
        missing = [c for c in chans if c not in present]
        if missing:
            raise DataError(
                f"channel(s) {', '.join(map(str, missing))} not in the data",
                "the data hold channels " + _ranges(present),
            )
        cut(np.isin(vset.channel, chans), f"channels {_ranges(chans)}")
    if stations is not None and stations != "":
        names = parse_stations(stations)
        _check_known(names, vset, "`stations`")
        cut(np.isin(vset.station1, names) & np.isin(vset.station2, names), f"baselines among {', '.join(names)}")
    if exclude_stations is not None and exclude_stations != "":
        names = parse_stations(exclude_stations)
        _check_known(names, vset, "`exclude_stations`")
        cut(~(np.isin(vset.station1, names) | np.isin(vset.station2, names)), f"baselines without {', '.join(names)}")
    if time_range is not None and len(time_range):
        if len(time_range) != 2:
            raise DataError("a time range needs two times, START and END")
        t0, t1 = to_mjd(time_range[0]), to_mjd(time_range[1])
        if t1 < t0:
            raise DataError(f"the time range ends ({time_range[1]}) before its start ({time_range[0]})")
        cut((vset.time >= t0) & (vset.time <= t1), f"times {time_range[0]} to {time_range[1]}")
    if exclude_same_site:
        from .sites import find_sites, same_site_rows

        sites = find_sites(vset, site_distance)
        if sites.one_site:
            raise DataError(
                f"every station is within {sites.distance:g} m of another: they all form one site, "
                "and excluding same-site baselines would drop every baseline",
                "leave out exclude_same_site, or give a smaller site_distance",
            )
        if sites.groups:
            sites_text = "; ".join("-".join(g) for g in sites.groups)
            cut(~same_site_rows(vset, sites), f"baselines not within one site ({sites_text})")
        else:
            notes.append(f"no two stations within {sites.distance:g} m: no same-site baseline to drop")
    elif site_distance is not None:
        from .sites import check_site_distance

        check_site_distance(site_distance)
    q = vset.uv_distance
    if min_uv is not None:
        cut(q >= float(min_uv), f"uv distance >= {float(min_uv):g} wavelengths")
    if max_uv is not None:
        cut(q <= float(max_uv), f"uv distance <= {float(max_uv):g} wavelengths")
    out = vset.subset(mask)
    if not np.any(~out.flag):
        raise DataError("the selection leaves only flagged visibilities", "widen the selection")
    if average:
        out, report = average_time(out, float(average), field_radius=field_radius)
        notes.append(report["note"])
    out.meta["selection_notes"] = list(notes)
    return out, notes


def _ranges(values):
    values = sorted(int(v) for v in values)
    if not values:
        return "none"
    parts, start, prev = [], values[0], values[0]
    for x in values[1:] + [None]:
        if x is not None and x == prev + 1:
            prev = x
            continue
        parts.append(f"{start}" if start == prev else f"{start}-{prev}")
        if x is not None:
            start = prev = x
    return ",".join(parts)
