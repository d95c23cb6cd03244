"""A pair of members of one shape: a close double, a lensed pair, a core with a knot.

Normalised centred visibility (shift theorem, TMS 2017 ch. 3):

    D(u, v) = [M1(u, v) + r M2(u, v) exp(-2 pi i (u dx + v dy))] / (1 + r),

with r the flux ratio (second / first), dx = s sin(psi), dy = s cos(psi) the offset of the second
member from the first (separation s, position angle psi north through east). The component's
position is that of the FIRST member; its flux is the total of both. Each member's size parameters
carry the suffix ``_1`` or ``_2`` (``fwhm_1``, ``axis_ratio_2``...).
"""

import math

import numpy as np

from ..shape import Member, MemberSwap, PixelFlux, Shape, render_fractions
from . import SHAPES, shape_class

_OWN = ("flux_ratio", "separation", "position_angle")
_OWN_KINDS = {"flux_ratio": "ratio", "separation": "length", "position_angle": "angle"}


class Double(Shape):
    """Two members of the shape named by the setting ``member`` (default "point").

    Any other setting is passed to both members (e.g. ``order`` for a ring_modulated member).
    """

    key = "double"
    parameters = _OWN
    kinds = dict(_OWN_KINDS)
    settings = {"member": "point"}
    real_when_centred = False
    compound = True

    def __init__(self, **settings):
        member = settings.pop("member", "point")
        if member not in SHAPES:
            raise ValueError(
                f"unknown member shape '{member}' for a double; known shapes: "
                + ", ".join(k for k in SHAPES if k != "double")
            )
        if member == "double":
            raise ValueError("a double cannot have double members; use two components instead")
        cls = shape_class(member)
        self.member_class = cls
        self.member = cls(**settings)  # raises ValueError on a setting the member does not know
        self.config = {"member": member, **self.member.config}
        self._member_names = list(self.member.parameter_names())

    @classmethod
    def accepted_settings(cls, table):
        """Settings a double accepts: ``member`` plus the member shape's own settings."""
        member = table.get("member", "point")
        if not isinstance(member, str) or member not in SHAPES or member == "double":
            return ["member"]
        return ["member"] + list(shape_class(member).settings)

    def parameter_names(self):
        return list(_OWN) + [f"{n}_{k}" for k in (1, 2) for n in self._member_names]

    def parameter_kind(self, name):
        if name in _OWN_KINDS:
            return _OWN_KINDS[name]
        return self.member.parameter_kind(self.member_parameter(name)[0])

    @staticmethod
    def member_parameter(name):
        """("fwhm", 2) for "fwhm_2"."""
        base, _, k = name.rpartition("_")
        return base, int(k)

    # what the rest of the package asks -----------------------------------------------------------
    def members(self, p, flux=1.0):
        """The two members: the first at the reference point with flux / (1 + r), the second at
        (s sin psi, s cos psi) from it with flux r / (1 + r); parameters without the suffix."""
        r = p["flux_ratio"]
        sep, pa = p["separation"], p["position_angle"]
        out = []
        for k, (f, offset) in enumerate(
            [(flux / (1.0 + r), None), (flux * r / (1.0 + r), (sep * math.sin(pa), sep * math.cos(pa)))], start=1
        ):
            names = {n: f"{n}_{k}" for n in self._member_names}
            out.append(Member(str(k), self.member, names, f, offset))
        return out

    def size_parameter(self):
        """None: the double has no size of its own (its members have theirs)."""
        return None

    def default_value(self, name):
        if name in _OWN:
            return None
        return self.member.default_value(self.member_parameter(name)[0])

    def periods(self):
        out = {"position_angle": 360.0}
        for n, period in self.member.periods().items():
            for k in (1, 2):
                out[f"{n}_{k}"] = period
        return out

    def symmetric_members(self):
        """The members trade places: see MemberSwap (flux_ratio, separation, position_angle)."""
        return MemberSwap(
            "flux_ratio", "separation", "position_angle", tuple((f"{n}_1", f"{n}_2") for n in self._member_names)
        )

    def member_values(self, p, k):
        """The size parameters of member k (1 or 2) from the double's parameter mapping."""
        return {n: p[f"{n}_{k}"] for n in self._member_names}

    def member_offset(self, p):
        """(dx, dy): offset of the second member from the first, east and north (p's length unit)."""
        s = float(p["separation"])
        psi = float(p["position_angle"])
        return s * np.sin(psi), s * np.cos(psi)

    def _shift(self, u, v, p):
        dx, dy = self.member_offset(p)
        return np.exp(-2j * np.pi * (np.asarray(u, dtype=float) * dx + np.asarray(v, dtype=float) * dy))

    def structure(self, u, v, p):
        r = float(p["flux_ratio"])
        m1 = self.member.structure(u, v, self.member_values(p, 1))
        m2 = self.member.structure(u, v, self.member_values(p, 2))
        return (m1 + r * m2 * self._shift(u, v, p)) / (1.0 + r)

    def structure_gradient(self, u, v, p):
        u = np.asarray(u, dtype=float)
        v = np.asarray(v, dtype=float)
        r = float(p["flux_ratio"])
        s = float(p["separation"])
        psi = float(p["position_angle"])
        m1, g1 = self.member.structure_gradient(u, v, self.member_values(p, 1))
        m2, g2 = self.member.structure_gradient(u, v, self.member_values(p, 2))
        shift = self._shift(u, v, p)
        w = 1.0 / (1.0 + r)
        m2s = m2 * shift
        val = (m1 + r * m2s) * w
        # phase of the second member: -2 pi i (u s sin psi + v s cos psi)
        second = r * m2s * w
        sp, cp = np.sin(psi), np.cos(psi)
        grads = {
            "flux_ratio": (m2s - m1) * w * w,
            "separation": second * (-2j * np.pi) * (u * sp + v * cp),
            "position_angle": second * (-2j * np.pi) * s * (u * cp - v * sp),
        }
        for n in self._member_names:
            grads[f"{n}_1"] = g1[n] * w
            grads[f"{n}_2"] = g2[n] * (r * w) * shift
        return val, grads

    def parameter_bounds(self, name):
        if name in _OWN:
            return {"flux_ratio": (0.0, np.inf), "separation": (0.0, np.inf), "position_angle": (-np.inf, np.inf)}[name]
        return self.member.parameter_bounds(self.member_parameter(name)[0])

    # image domain ---------------------------------------------------------------------------------
    def singular(self, p):
        return bool(self.member.singular(self.member_values(p, 1)) or self.member.singular(self.member_values(p, 2)))

    def brightness(self, l, m, p):
        """Brightness per steradian: [B1(l, m) + r B2(l - dx, m - dy)] / (1 + r)."""
        r = float(p["flux_ratio"])
        dx, dy = self.member_offset(p)
        l = np.asarray(l, dtype=float)
        m = np.asarray(m, dtype=float)
        b1 = self.member.brightness(l, m, self.member_values(p, 1))
        b2 = self.member.brightness(l - dx, m - dy, self.member_values(p, 2))
        return (b1 + r * b2) / (1.0 + r)

    def pixel_fractions(self, l, m, p):
        r = float(p["flux_ratio"])
        dx, dy = self.member_offset(p)
        l = np.asarray(l, dtype=float)
        m = np.asarray(m, dtype=float)
        f1 = render_fractions(self.member, l, m, self.member_values(p, 1))
        f2 = render_fractions(self.member, l - dx, m - dy, self.member_values(p, 2))
        return (f1 + r * f2) / (1.0 + r)

    def pixel_flux(self, l, m, p):
        """The two members' own pixel fluxes, shifted and weighted; the rule of each member."""
        r = float(p["flux_ratio"])
        dx, dy = self.member_offset(p)
        l = np.asarray(l, dtype=float)
        m = np.asarray(m, dtype=float)
        f1 = self.member.pixel_flux(l, m, self.member_values(p, 1))
        f2 = self.member.pixel_flux(l - dx, m - dy, self.member_values(p, 2))
        rule = f1.rule if f1.rule == f2.rule else f"member 1 {f1.rule}; member 2 {f2.rule}"
        return PixelFlux((f1.fraction + r * f2.fraction) / (1.0 + r), rule)

    def sample_points(self, p, n=64):
        r = float(p["flux_ratio"])
        dx, dy = self.member_offset(p)
        l1, m1, w1 = self.member.sample_points(self.member_values(p, 1), n)
        l2, m2, w2 = self.member.sample_points(self.member_values(p, 2), n)
        return (
            np.concatenate([l1, l2 + dx]),
            np.concatenate([m1, m2 + dy]),
            np.concatenate([np.asarray(w1) / (1.0 + r), np.asarray(w2) * (r / (1.0 + r))]),
        )
