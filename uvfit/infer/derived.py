"""Quantities derived from a fit, with errors propagated through the full covariance.

For a quantity q(theta) the error is sqrt(g^T C g), with g = dq/dtheta by central differences
(steps of 1e-3 of each parameter's error, one-sided at a bound) and C the fit's covariance
(first-order error propagation, e.g. Bevington & Robinson, "Data Reduction and Error Analysis",
3rd ed. 2003, ch. 3). Position angles are differenced on the circle, so an angle near the
0/360 wrap gets the right error.

Keys ("a", "b" are component names in model order; a double "pair" counts as "pair.1" and
"pair.2"):
  ``a-b.separation``     distance of b from a (model angular unit)
  ``a-b.position_angle`` position angle of b seen from a, north through east, in [0, 360) deg
  ``a-b.flux_ratio``     flux of b / flux of a
  ``a.size``             the main size (``Shape.size_parameter``: FWHM, or diameter, or radius: see
                         "parameter"; the same entry also appears as ``a.fwhm``, ``a.diameter``...,
                         with "alias_of"), and the shape's ``reported_parameters`` (for an
                         elliptical Gaussian ``a.axis_ratio``, ``a.position_angle``); a shape that
                         gives no brightness temperature says so in the size entry
                         ("brightness_temperature_note")
  ``a.brightness_temperature``  (K) from ``Shape.brightness_temperature`` (Gaussians and uniform
      disks; ``uvfit.sky.temperature``), rest frame with ``redshift``:
      Gaussian:  Tb = 2 ln2 c^2 S / (pi k nu^2 theta_maj theta_min) (1 + z)
                 (e.g. Kovalev et al. 2005, AJ 130, 2473);
      disk of diameter D: the mean brightness S / (pi D^2 / 4) in the Rayleigh-Jeans law
                 T = c^2 I / (2 k nu^2) gives Tb = 2 c^2 S / (pi k nu^2 D^2) (1 + z).
      nu is the data's mean frequency (or the one given).
  ``a.resolved``         likelihood-ratio test of the component against a point of the same
      position (its size fixed at zero, everything else refitted): delta chi2 = chi2(point) -
      chi2(best) and its p-value. The size sits on the boundary of its range under the null, so the
      reference distribution is the mixture 0.5 chi2_0 + 0.5 chi2_1 (Self & Liang 1987, JASA 82,
      605): p = 0.5 P(chi2_1 >= delta chi2). "resolved" is p < ``alpha`` (default 0.01). For an
      elliptical Gaussian the axis ratio and angle are held at their best values in the point
      refit (they mean nothing for a point), so the p-value is approximate.
When a size is not significant (best value below twice its error, or the component is not
resolved) an upper limit on the size is given (``upper_limit``: where the chi2 profile, other
parameters refitted, rises by 2.71 above the minimum, one-sided 95%), and a lower limit on Tb.
"""

import math

import numpy as np
from scipy import stats as _st

from ..errors import UvfitError
from ..sky.temperature import C_LIGHT, JY, K_BOLTZMANN, brightness_temperature_disk, brightness_temperature_gaussian  # noqa: F401 (public here too)

#: delta chi2 of a one-sided 95% limit (the 90% point of chi2 with 1 d.o.f.)
LIMIT_DCHI2 = float(_st.chi2.ppf(0.90, 1))

_UNIT_OF_KIND = {"ratio": "", "angle": "deg"}


def _member_units(model, member):
    """The member's parameters as its shape sees them (lengths in radians, angles in radians)."""
    shape = member["member"]
    rad = float(model.rad_per_unit)
    factor = {"length": rad, "angle": math.pi / 180.0}
    return {n: float(x) * factor.get(shape.parameter_kind(n), 1.0) for n, x in member["parameters"].items()}


def _tb(model, member, frequency, redshift, size=None):
    """The member's brightness temperature (K) from its shape, with its size replaced by ``size``
    (model units) when given; None without a frequency or when the shape gives none."""
    if frequency is None or not np.isfinite(frequency):
        return None
    shape = member["member"]
    p = _member_units(model, member)
    if size is not None:
        p[shape.size_parameter()] = float(size) * float(model.rad_per_unit)
    return shape.brightness_temperature(member["flux"], frequency, p, redshift)


def quantities_at(model, theta, frequency, redshift=0.0):
    """The derived quantities of ``model`` at one free-parameter vector ``theta``.

    Returns three dicts over the same keys: values, units and extra information (the parameter
    behind each size). Keys: ``A-B.separation``, ``A-B.position_angle`` (deg, east of north) and
    ``A-B.flux_ratio`` (B / A) for every pair of members, ``A.size`` (and ``A.axis_ratio``,
    ``A.position_angle`` for elliptical members) and ``A.brightness_temperature`` (K, when the
    frequency is known). One vector per call: the sampler and the forecast loop over theirs.
    The periods of the quantities that live on a circle are given by :func:`derived_periods`.
    """
    unit = model.angular_unit_text
    members = model.members(theta=theta, frequency=frequency)
    out, units, info = {}, {}, {}
    for i, a in enumerate(members):
        for b in members[i + 1 :]:
            key = f"{a['name']}-{b['name']}"
            de, dn = b["east"] - a["east"], b["north"] - a["north"]
            out[key + ".separation"] = math.hypot(de, dn)
            units[key + ".separation"] = unit
            out[key + ".position_angle"] = math.degrees(math.atan2(de, dn)) % 360.0
            units[key + ".position_angle"] = "deg"
            out[key + ".flux_ratio"] = b["flux"] / a["flux"] if a["flux"] != 0 else float("nan")
            units[key + ".flux_ratio"] = ""
    for m in members:
        shape = m["member"]
        size = shape.size_parameter()
        if size is None:
            continue
        name = m["name"]
        out[f"{name}.size"] = shape.main_size(m["parameters"])
        units[f"{name}.size"] = unit
        info[f"{name}.size"] = {"parameter": size}
        periods = shape.periods()
        for pn in shape.reported_parameters():
            x = float(m["parameters"][pn])
            if pn in periods:
                x = x % periods[pn]
            out[f"{name}.{pn}"] = x
            units[f"{name}.{pn}"] = _UNIT_OF_KIND.get(shape.parameter_kind(pn), unit)
        tb = _tb(model, m, frequency, redshift)
        if tb is not None:
            out[f"{name}.brightness_temperature"] = tb
            units[f"{name}.brightness_temperature"] = "K"
        elif frequency is not None and np.isfinite(frequency):
            info[f"{name}.size"]["brightness_temperature_note"] = f"shape '{shape.key}' gives no brightness temperature"
    return out, units, info


def derived_periods(model):
    """{key: period in degrees} of the derived quantities of ``model`` that live on a circle:
    the position angle between two members (360) and the shapes' periodic reported parameters
    (an elliptical member's position angle, 180)."""
    members = model.members()
    out = {}
    for i, a in enumerate(members):
        for b in members[i + 1 :]:
            out[f"{a['name']}-{b['name']}.position_angle"] = 360.0
    for m in members:
        shape = m["member"]
        if shape.size_parameter() is None:
            continue
        periods = shape.periods()
        for pn in shape.reported_parameters():
            if pn in periods:
                out[f"{m['name']}.{pn}"] = periods[pn]
    return out


def _gradients(model, theta, errors, bounds, frequency, redshift, keys):
    """d q / d theta for every key, by central differences (one-sided at a bound)."""
    lo, hi = bounds
    k = len(theta)
    grads = {key: np.zeros(k) for key in keys}
    base, _, _ = quantities_at(model, theta, frequency, redshift)
    periods = derived_periods(model)
    for i in range(k):
        e = errors[i]
        h = 1e-3 * e if np.isfinite(e) and e > 0 else 1e-6 * max(abs(theta[i]), 1.0)
        up, down = theta.copy(), theta.copy()
        hu = h if theta[i] + h <= hi[i] else 0.0
        hd = h if theta[i] - h >= lo[i] else 0.0
        if hu == 0.0 and hd == 0.0:
            continue
        up[i] += hu
        down[i] -= hd
        qu, _, _ = quantities_at(model, up, frequency, redshift)
        qd, _, _ = quantities_at(model, down, frequency, redshift)
        for key in keys:
            diff = qu[key] - qd[key]
            period = periods.get(key)
            if period:
                diff = (diff + period / 2.0) % period - period / 2.0
            grads[key][i] = diff / (hu + hd)
    return base, grads


def derived_quantities(result, redshift=0.0, frequency=None, resolved_test=True, alpha=0.01, limits=True):
    """{key: {"value", "error", "unit", ...}} for a :class:`uvfit.infer.lsq.FitResult`.

    ``frequency`` (Hz): for the brightness temperature; default the data's mean frequency.
    ``resolved_test``: one refit per component with a free size (see the module docstring).
    """
    from .lsq import free_bounds

    model = result.model
    if frequency is None:
        vs = result.statistic.vset
        good = ~vs.flag
        frequency = float(np.mean(vs.frequency[good])) if good.any() else float("nan")
    if redshift is None:
        redshift = 0.0
    if float(redshift) <= -1.0:
        raise UvfitError(f"redshift must be > -1 (got {redshift})")
    theta = np.asarray(result.values, float)
    cov = np.asarray(result.covariance, float)
    errors = np.asarray(result.errors, float)
    bounds = free_bounds(model)
    values, units, info = quantities_at(model, theta, frequency, redshift)
    keys = list(values)
    _, grads = _gradients(model, theta, errors, bounds, frequency, redshift, keys)
    out = {}
    for key in keys:
        g = grads[key]
        used = g != 0
        if not used.any():
            err = 0.0
        else:
            sub = cov[np.ix_(used, used)]
            err = float(np.sqrt(g[used] @ sub @ g[used])) if np.all(np.isfinite(sub)) else float("inf")
        out[key] = {"value": values[key], "error": err, "unit": units[key], **info.get(key, {})}
    if resolved_test or limits:
        _size_tests(result, out, frequency, redshift, alpha, resolved_test, limits)
    # the size also under its own name ("core.fwhm", "shell.radius"), for readers that look for it
    for key in [k for k in out if k.endswith(".size")]:
        alias = key[: -len("size")] + out[key]["parameter"]
        if alias not in out:
            out[alias] = dict(out[key], alias_of=key)
    return out


def _refit_chi2(result, fix):
    """chi2 of a refit from the best fit with the parameters in ``fix`` ({name: value}) fixed."""
    from ..errors import FitError
    from .lsq import fit

    model = result.model.copy()
    for name, value in fix.items():
        p = model.parameters[name]
        if p.min > value:
            p.min = value
        p.value = value
        p.fixed = True
        p.tie = None
    if not model.free_names:
        stat = result.statistic.rebuilt(model)
        return stat.chi2(np.zeros(0))
    stat = result.statistic.rebuilt(model)
    try:
        res = fit(stat, starts=1, seed=result.seed, strict=False)
    except FitError:
        return float("nan")
    return res.chi2


def _size_tests(result, out, frequency, redshift, alpha, resolved_test, limits):
    model = result.model
    free = set(model.free_names)
    for m in model.members():
        shape = m["member"]
        size = shape.size_parameter()
        if size is None:
            continue
        full = m["names"][size]
        if model.root(full) not in free:
            continue
        root = model.root(full)
        lengths = [pn for pn in m["parameters"] if shape.parameter_kind(pn) == "length"]
        if lengths != [size]:
            continue  # several sizes (a shell's two radii, a blurred ring): no single "point" limit
        extra = {}
        for other in shape.reported_parameters():
            oname = m["names"][other]
            if model.root(oname) in free:
                extra[model.root(oname)] = model.values()[oname]
        name = m["name"]
        entry = out.get(f"{name}.size")
        resolved = None
        if resolved_test:
            c0 = _refit_chi2(result, {root: 0.0, **extra})
            dchi2 = max(float(c0 - result.chi2), 0.0) if np.isfinite(c0) else float("nan")
            p = 0.5 * float(_st.chi2.sf(dchi2, 1)) if dchi2 > 0 else 1.0
            if not np.isfinite(dchi2):
                p = float("nan")
            resolved = bool(p < alpha) if np.isfinite(p) else None
            out[f"{name}.resolved"] = {
                "value": p,
                "delta_chi2": dchi2,
                "resolved": resolved,
                "alpha": alpha,
                "unit": "",
                "test": "likelihood ratio against a point (size fixed at 0), reference 0.5 chi2_0 + 0.5 chi2_1",
            }
        if limits and entry is not None:
            small = not (entry["value"] > 2.0 * entry["error"]) or resolved is False
            if small:
                ul = _upper_limit(result, root, extra, entry["value"])
                if ul is not None:
                    entry["upper_limit"] = ul
                    entry["note"] = "not significantly resolved: upper limit (one-sided 95%)"
                    tb_key = f"{name}.brightness_temperature"
                    if tb_key in out:
                        tb = _tb(model, m, frequency, redshift, size=ul)
                        if tb is not None:
                            out[tb_key]["lower_limit"] = tb
                            out[tb_key]["note"] = "lower limit from the size's upper limit"


def _upper_limit(result, root, extra, best, max_steps=14):
    """Size where the chi2 profile rises by LIMIT_DCHI2 above the best fit (bisection)."""
    target = result.chi2 + LIMIT_DCHI2 * (result.error_scale**2)
    vs = result.statistic.vset
    good = ~vs.flag
    qmax = float(np.max(np.hypot(vs.u[good], vs.v[good]))) if good.any() else 0.0
    if qmax <= 0:
        return None
    resolution = (1.0 / qmax) / float(result.model.rad_per_unit)
    lo = max(float(best), 0.0)
    hi = max(2.0 * lo, 0.1 * resolution)
    for _ in range(12):
        c = _refit_chi2(result, {root: hi, **extra})
        if not np.isfinite(c):
            return None
        if c >= target:
            break
        lo, hi = hi, 2.0 * hi
    else:
        return None
    for _ in range(max_steps):
        mid = 0.5 * (lo + hi)
        c = _refit_chi2(result, {root: mid, **extra})
        if not np.isfinite(c):
            break
        if c >= target:
            hi = mid
        else:
            lo = mid
        if hi - lo < 1e-3 * hi:
            break
    return float(hi)
