"""Reading the observation options people type: angles, times, durations, frequencies.

Angles and quantities use astropy's string forms: ``12h30m49.4s`` or ``187.7d`` (right
ascension), ``+12d23m28s`` or ``-5.79`` (declination; a bare number is degrees), ``2027-03-01T02:00``
(UTC), ``12h`` / ``30s`` / ``90min`` (durations), ``86GHz`` / ``512MHz`` (frequencies). Anything
else is one UvfitError saying what was expected.
"""

import numpy as np

from ..errors import UvfitError


def parse_angle(text, what="angle", colon_unit="deg"):
    """Degrees from '12h30m49s', '+12d23m', '187.5d', '1.2rad' or a bare number (degrees).

    A sexagesimal string with colons ('12:30:49') is read in ``colon_unit`` ('hourangle' for RA).
    """
    from astropy import units as u
    from astropy.coordinates import Angle

    text = str(text).strip()
    try:
        value = float(text)
        return value
    except ValueError:
        pass
    try:
        if ":" in text or " " in text:
            return float(Angle(text, unit=getattr(u, colon_unit)).to_value(u.deg))
        return float(Angle(text).to_value(u.deg))
    except (ValueError, TypeError, u.UnitsError) as exc:
        raise UvfitError(
            f"cannot read the {what} {text!r} ({exc})", "write it as 12h30m49s, +12d23m28s or 187.7d"
        ) from None


def parse_quantity(text, unit, what):
    """A float in ``unit`` (an astropy unit string) from text such as '12h' or '86GHz'."""
    from astropy import units as u

    text = str(text).strip()
    try:
        q = u.Quantity(text)
    except (ValueError, TypeError):
        raise UvfitError(
            f"cannot read the {what} {text!r}: unknown number or unit",
            f"give a number with a unit convertible to {unit}, e.g. {_EXAMPLES.get(unit, '1' + unit)}",
        ) from None
    if q.unit == u.dimensionless_unscaled:
        raise UvfitError(f"the {what} {text!r} has no unit", f"add one, e.g. {_EXAMPLES.get(unit, '1' + unit)}")
    try:
        value = float(q.to_value(unit))
    except u.UnitConversionError:
        raise UvfitError(
            f"the {what} {text!r} is in {q.unit}, which is not a {_KIND.get(unit, unit)}",
            f"e.g. {_EXAMPLES.get(unit, '1' + unit)}",
        ) from None
    if not np.isfinite(value):
        raise UvfitError(f"the {what} {text!r} is not finite")
    return value


_EXAMPLES = {"s": "12h, 30min or 10s", "Hz": "86GHz or 512MHz"}
_KIND = {"s": "time", "Hz": "frequency"}


def parse_duration(text, what="duration"):
    return parse_quantity(text, "s", what)


def parse_frequency(text, what="frequency"):
    return parse_quantity(text, "Hz", what)
