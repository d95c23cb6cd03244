"""Compiled visibility kernels (numba). Imported only by ``uvfit.sky.engine`` on first use.

One call evaluates every component of a model over all rows, chunk by chunk, and writes the
visibility (and, when asked, every Jacobian column) without an intermediate array per term:

    V = sum_k A_k D_k(u, v) P_k,   P_k = exp[-2 pi i t_k],   t_k = u l_k + v m_k  (turns),

the shift theorem with the phase in turns (TMS 2017, ch. 3). The phase factor P_k of a component
is computed once per row and reused by its visibility and by every derivative (d/d east =
-2 pi i u V, d/d north = -2 pi i v V, d/d size = A dD/dsize P).

Elementary functions are evaluated here by vectorisable polynomial code instead of scalar library
calls, so that the compiler emits SIMD code for the whole loop:

* sin and cos of 2 pi t: the argument is reduced in turns, r = t - round(t), exact in floating
  point, then to an octant by quarter turns; on |a| <= pi/4 the Taylor series to a^15 (sine) and
  a^16 (cosine) leave a truncation error below 1e-16 (a^17/17! < 5e-17). Reduction in turns is
  more accurate than a library sine of 2 pi t for large t (no rounding of 2 pi t).
* exp(x): x = k ln 2 + r with a two-part ln 2 (Cody & Waite 1980, "Software Manual for the
  Elementary Functions"), |r| <= ln2 / 2, Taylor series to r^13 (error < 1e-17 relative), times
  2^k built from its bits in two factors (so that results down to the subnormal range are right).
  Arguments below -745.5 give 0, above 709 are clipped (never reached by these shapes).

Layout of the model description (built by ``uvfit.sky.engine``), for component c:
``kinds[c]``: 0 point, 1 circular Gaussian, 2 elliptical Gaussian, 3 any shape whose structure
and derivatives were evaluated by the shape itself (``gen_d`` / ``gen_g`` rows, ``gidx[c]``,
``gstart[c]``, ``gnum[c]``); ``par[c]`` = flux (Jy), l0, m0 (rad), shape parameters (rad / 1);
``sidx[c]``: row of ``spec`` (per-row (nu/nu0)^alpha) and ``logr`` (ln nu/nu0), or -1;
``cols[c, s]`` / ``facs[c, s]``: Jacobian column and unit factor of local slot s (flux, east,
north, the shape's parameters, [spectral_index]); column -1 for a parameter that is not free.
The Jacobian is written transposed, ``jac[column, row]``, so that each column is contiguous.
"""
import math

import numpy as np
from llvmlite import ir
from numba import njit, types
from numba.extending import intrinsic

#: rows per chunk: the scratch arrays of one chunk stay in the first-level caches
CHUNK = 1024
#: rows of the scratch array ``evaluate`` needs
SCRATCH_ROWS = 11

_HALF_PI = math.pi / 2.0
_TWO_PI = 2.0 * math.pi
#: pi^2 / (4 ln 2), the Gaussian visibility constant (as in uvfit.sky.shapes.gaussian)
C_VIS = math.pi ** 2 / (4.0 * math.log(2.0))

_S = [(-1) ** k / math.factorial(2 * k + 1) for k in range(8)]
_C = [(-1) ** k / math.factorial(2 * k) for k in range(9)]
S1, S3, S5, S7, S9, S11, S13, S15 = _S
C0, C2, C4, C6, C8, C10, C12, C14, C16 = _C
_E = [1.0 / math.factorial(k) for k in range(14)]
E0, E1, E2, E3, E4, E5, E6, E7, E8, E9, E10, E11, E12, E13 = _E
LOG2E = 1.4426950408889634
LN2_HI = 6.93147180369123816490e-01
LN2_LO = 1.90821492927058770002e-10


@intrinsic
def _bits_to_float(typingctx, x):
    """The float64 whose bit pattern is the int64 ``x``."""
    if not isinstance(x, types.Integer):
        return None
    sig = types.float64(types.int64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.DoubleType())

    return sig, codegen


@njit(inline="always", cache=True)
def sincos_turns(t):
    """(sin 2 pi t, cos 2 pi t)."""
    x = 4.0 * (t - np.floor(t + 0.5))          # quarter turns, in [-2, 2]
    k = np.floor(x + 0.5)
    a = (x - k) * _HALF_PI                     # radians, in [-pi/4, pi/4]
    a2 = a * a
    s = a * (S1 + a2 * (S3 + a2 * (S5 + a2 * (S7 + a2 * (S9 + a2 * (S11 + a2 * (S13 + a2 * S15)))))))
    c = C0 + a2 * (C2 + a2 * (C4 + a2 * (C6 + a2 * (C8 + a2 * (C10 + a2 * (C12 + a2 * (C14 + a2 * C16)))))))
    # turn by k quarter turns, k in {-2, -1, 0, 1, 2}, without branches
    kk = k * k
    e = 1.0 - 0.5 * kk                         # 1 for k = 0, -1 for k = +-2
    odd = kk == 1.0
    sn = k * c if odd else e * s
    cs = -k * s if odd else e * c
    return sn, cs


@njit(inline="always", cache=True)
def exp_(x):
    """exp(x) for finite x (see the module docstring)."""
    x = min(max(x, -745.5), 709.0)
    kf = np.floor(x * LOG2E + 0.5)
    r = (x - kf * LN2_HI) - kf * LN2_LO
    p = E0 + r * (E1 + r * (E2 + r * (E3 + r * (E4 + r * (E5 + r * (E6 + r * (E7 + r * (
        E8 + r * (E9 + r * (E10 + r * (E11 + r * (E12 + r * E13))))))))))))
    k = np.int64(kf)
    k1 = k >> 1
    k2 = k - k1
    out = p * _bits_to_float((k1 + 1023) << 52) * _bits_to_float((k2 + 1023) << 52)
    return out if x > -745.0 else 0.0


@njit(cache=True, nogil=True)
def sincos_array(t, out_sin, out_cos):
    """sin and cos of 2 pi t into the given arrays (the engine's bare trigonometric work)."""
    for i in range(t.size):
        s, c = sincos_turns(t[i])
        out_sin[i] = s
        out_cos[i] = c


@njit(cache=True, nogil=True)
def exp_array(x, out):
    for i in range(x.size):
        out[i] = exp_(x[i])


@njit(cache=True, nogil=True)
def evaluate(u, v, r0, r1, kinds, par, sidx, spec, logr, gidx, gstart, gnum, gen_d, gen_g,
             cols, facs, out, jac, want_jac, scratch):
    """For rows r0 <= i < r1: add every component's visibility to ``out`` (complex, n) and, with ``want_jac``, its
    derivatives to ``jac`` (complex, (n_free, n)). ``scratch``: float64 (SCRATCH_ROWS, CHUNK)
    work space, given by the caller so that its memory is accounted for. ``gen_d`` / ``gen_g``
    hold rows r0..r1 only (index i - r0)."""
    ncomp = kinds.size
    pc = scratch[0]
    ps = scratch[1]
    wr = scratch[2]
    wi = scratch[3]
    dr = scratch[4]
    di = scratch[5]
    am = scratch[6]
    for i0 in range(r0, r1, CHUNK):
        i1 = min(i0 + CHUNK, r1)
        m = i1 - i0
        for c in range(ncomp):
            kind = kinds[c]
            flux = par[c, 0]
            l0 = par[c, 1]
            m0 = par[c, 2]
            si = sidx[c]
            # --- shape structure D (real for kinds 0-2) and, with want_jac, dD per parameter
            if kind == 0:
                for j in range(m):
                    dr[j] = 1.0
                    di[j] = 0.0
            elif kind == 1:
                th = par[c, 3]
                a = -C_VIS * th * th
                if want_jac:
                    g = scratch[8]
                    b = -2.0 * C_VIS * th
                    for j in range(m):
                        i = i0 + j
                        q2 = u[i] * u[i] + v[i] * v[i]
                        d = exp_(a * q2)
                        dr[j] = d
                        di[j] = 0.0
                        g[j] = b * q2 * d
                else:
                    for j in range(m):
                        i = i0 + j
                        dr[j] = exp_(a * (u[i] * u[i] + v[i] * v[i]))
                        di[j] = 0.0
            elif kind == 2:
                fa = par[c, 3]
                rho = par[c, 4]
                phi = par[c, 5]
                sp = math.sin(phi)
                cp = math.cos(phi)
                r2 = rho * rho
                a2c = -C_VIS * fa * fa
                if want_jac:
                    g0 = scratch[8]
                    g1 = scratch[9]
                    g2 = scratch[10]
                    for j in range(m):
                        i = i0 + j
                        qp = u[i] * sp + v[i] * cp
                        qn = u[i] * cp - v[i] * sp
                        qp2 = qp * qp
                        qn2 = qn * qn
                        d = exp_(a2c * (qp2 + r2 * qn2))
                        cv = -C_VIS * d
                        dr[j] = d
                        di[j] = 0.0
                        g0[j] = cv * 2.0 * fa * (qp2 + r2 * qn2)
                        g1[j] = cv * 2.0 * fa * fa * rho * qn2
                        g2[j] = cv * 2.0 * fa * fa * (1.0 - r2) * qp * qn
                else:
                    for j in range(m):
                        i = i0 + j
                        qp = u[i] * sp + v[i] * cp
                        qn = u[i] * cp - v[i] * sp
                        dr[j] = exp_(a2c * (qp * qp + r2 * qn * qn))
                        di[j] = 0.0
            else:
                gi = gidx[c]
                for j in range(m):
                    z = gen_d[gi, i0 + j - r0]
                    dr[j] = z.real
                    di[j] = z.imag
            # --- phase, amplitude, visibility
            if si >= 0:
                for j in range(m):
                    am[j] = flux * spec[si, i0 + j]
            else:
                for j in range(m):
                    am[j] = flux
            for j in range(m):
                i = i0 + j
                s, co = sincos_turns(u[i] * l0 + v[i] * m0)
                # W = D P, P = cos - i sin
                xr = dr[j] * co + di[j] * s
                xi = di[j] * co - dr[j] * s
                pc[j] = co
                ps[j] = s
                wr[j] = xr
                wi[j] = xi
                out[i] += complex(am[j] * xr, am[j] * xi)
            if not want_jac:
                continue
            # --- derivatives, slot by slot, from the chunk's scratch
            nshape = 0
            if kind == 1:
                nshape = 1
            elif kind == 2:
                nshape = 3
            elif kind == 3:
                nshape = gnum[c]
            for slot in range(3 + nshape + (1 if si >= 0 else 0)):
                col = cols[c, slot]
                if col < 0:
                    continue
                f = facs[c, slot]
                if slot == 0:
                    if si >= 0:
                        for j in range(m):
                            sf = f * spec[si, i0 + j]
                            jac[col, i0 + j] += complex(sf * wr[j], sf * wi[j])
                    else:
                        for j in range(m):
                            jac[col, i0 + j] += complex(f * wr[j], f * wi[j])
                elif slot == 1 or slot == 2:
                    # -2 pi i x A W = 2 pi x A (Wi - i Wr), x = u or v
                    if slot == 1:
                        for j in range(m):
                            h = _TWO_PI * f * am[j] * u[i0 + j]
                            jac[col, i0 + j] += complex(h * wi[j], -h * wr[j])
                    else:
                        for j in range(m):
                            h = _TWO_PI * f * am[j] * v[i0 + j]
                            jac[col, i0 + j] += complex(h * wi[j], -h * wr[j])
                elif slot < 3 + nshape:
                    p = slot - 3
                    if kind == 3:
                        row = gstart[c] + p
                        for j in range(m):
                            z = gen_g[row, i0 + j - r0]
                            h = f * am[j]
                            jac[col, i0 + j] += complex(h * (z.real * pc[j] + z.imag * ps[j]),
                                                        h * (z.imag * pc[j] - z.real * ps[j]))
                    else:
                        g = scratch[8 + p]
                        for j in range(m):
                            h = f * am[j] * g[j]
                            jac[col, i0 + j] += complex(h * pc[j], -h * ps[j])
                else:
                    # spectral index: A W ln(nu / nu0)
                    for j in range(m):
                        h = f * am[j] * logr[si, i0 + j]
                        jac[col, i0 + j] += complex(h * wr[j], h * wi[j])
