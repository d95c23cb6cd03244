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
  Arguments below -745 give 0, above 709.78 infinity, nan gives nan (as the C library).

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

from .shapes import gaussian as _gaussian

#: rows per chunk: the scratch arrays of one chunk stay in the first-level caches
CHUNK = 1024
#: rows of the scratch array ``evaluate`` needs
SCRATCH_ROWS = 10

_HALF_PI = math.pi / 2.0
_TWO_PI = 2.0 * math.pi

#: the Gaussians' visibility formulas, shared with the shapes (uvfit.sky.shapes.gaussian)
C_VIS = _gaussian.C_VIS
circular_exponent = njit(inline="always", cache=True)(_gaussian.circular_exponent)
circular_log_derivative = njit(inline="always", cache=True)(_gaussian.circular_log_derivative)
elliptical_axes = njit(inline="always", cache=True)(_gaussian.elliptical_axes)
elliptical_exponent = njit(inline="always", cache=True)(_gaussian.elliptical_exponent)
elliptical_log_derivatives = njit(inline="always", cache=True)(_gaussian.elliptical_log_derivatives)

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
    x = 4.0 * (t - np.floor(t + 0.5))  # quarter turns, in [-2, 2]
    k = np.floor(x + 0.5)
    a = (x - k) * _HALF_PI  # radians, in [-pi/4, pi/4]
    a2 = a * a
    s = a * (S1 + a2 * (S3 + a2 * (S5 + a2 * (S7 + a2 * (S9 + a2 * (S11 + a2 * (S13 + a2 * S15)))))))
    c = C0 + a2 * (C2 + a2 * (C4 + a2 * (C6 + a2 * (C8 + a2 * (C10 + a2 * (C12 + a2 * (C14 + a2 * C16)))))))
    # turn by k quarter turns, k in {-2, -1, 0, 1, 2}, without branches
    kk = k * k
    e = 1.0 - 0.5 * kk  # 1 for k = 0, -1 for k = +-2
    odd = kk == 1.0
    sn = k * c if odd else e * s
    cs = -k * s if odd else e * c
    return sn, cs


@njit(inline="always", cache=True)
def exp_(x):
    """exp(x) for finite x (see the module docstring)."""
    xc = min(max(x, -745.5), 709.0)
    kf = np.floor(xc * LOG2E + 0.5)
    r = (xc - kf * LN2_HI) - kf * LN2_LO
    p = E0 + r * (
        E1
        + r
        * (
            E2
            + r
            * (
                E3
                + r
                * (
                    E4
                    + r * (E5 + r * (E6 + r * (E7 + r * (E8 + r * (E9 + r * (E10 + r * (E11 + r * (E12 + r * E13))))))))
                )
            )
        )
    )
    k = np.int64(kf)
    k1 = k >> 1
    k2 = k - k1
    out = p * _bits_to_float((k1 + 1023) << 52) * _bits_to_float((k2 + 1023) << 52)
    out = out if x > -745.0 else 0.0
    out = out if x < 709.782712893384 else np.inf
    return out if x == x else x  # nan stays nan


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


def _make_pass(kind, mode):
    """The visibility-only loop over one chunk for one shape kind, specialised (at compile time)
    to what it does with each component's contribution x = A W:
    mode 0: o += x; 1 (first component of a misfit): o = x - data; 2 (last): acc += w |o + x|^2;
    3 (only component): acc += w |x - data|^2. Fusing the data into the first and last loops
    saves two passes over the chunk."""

    @njit(inline="always", cache=True)
    def emit(o, acc, dc, wc, j, xr, xi):
        if mode == 0:
            o[j] += complex(xr, xi)
        elif mode == 1:
            o[j] = complex(xr - dc[j].real, xi - dc[j].imag)
        elif mode == 2:
            rr = o[j].real + xr
            ri = o[j].imag + xi
            acc[j] += wc[j] * (rr * rr + ri * ri)
        else:
            rr = xr - dc[j].real
            ri = xi - dc[j].imag
            acc[j] += wc[j] * (rr * rr + ri * ri)

    if kind == 0:

        @njit(inline="always", cache=True)
        def run(o, acc, dc, wc, uc, vc, am, m, pr, gd):
            l0 = pr[1]
            m0 = pr[2]
            for j in range(m):
                s, co = sincos_turns(uc[j] * l0 + vc[j] * m0)
                emit(o, acc, dc, wc, j, am[j] * co, -am[j] * s)
    elif kind == 1:

        @njit(inline="always", cache=True)
        def run(o, acc, dc, wc, uc, vc, am, m, pr, gd):
            l0 = pr[1]
            m0 = pr[2]
            th = pr[3]
            for j in range(m):
                s, co = sincos_turns(uc[j] * l0 + vc[j] * m0)
                q2 = uc[j] * uc[j] + vc[j] * vc[j]
                d = exp_(circular_exponent(th, q2))
                xr = d * co
                xi = -d * s
                emit(o, acc, dc, wc, j, am[j] * xr, am[j] * xi)
    elif kind == 2:

        @njit(inline="always", cache=True)
        def run(o, acc, dc, wc, uc, vc, am, m, pr, gd):
            l0 = pr[1]
            m0 = pr[2]
            fa = pr[3]
            rho = pr[4]
            sp = math.sin(pr[5])
            cp = math.cos(pr[5])
            for j in range(m):
                s, co = sincos_turns(uc[j] * l0 + vc[j] * m0)
                qp, qn = elliptical_axes(uc[j], vc[j], sp, cp)
                d = exp_(elliptical_exponent(fa, rho, qp, qn))
                xr = d * co
                xi = -d * s
                emit(o, acc, dc, wc, j, am[j] * xr, am[j] * xi)
    else:

        @njit(inline="always", cache=True)
        def run(o, acc, dc, wc, uc, vc, am, m, pr, gd):
            l0 = pr[1]
            m0 = pr[2]
            for j in range(m):
                s, co = sincos_turns(uc[j] * l0 + vc[j] * m0)
                zr = gd[j].real
                zi = gd[j].imag
                xr = zr * co + zi * s
                xi = zi * co - zr * s
                emit(o, acc, dc, wc, j, am[j] * xr, am[j] * xi)

    return run


def _make_mode_dispatch(kind):
    """The loop of one shape kind, picking its specialised pass by ``mode`` (see _make_pass)."""
    p0, p1, p2, p3 = (_make_pass(kind, mode) for mode in range(4))

    @njit(inline="always", cache=True)
    def run(mode, o, acc, dc, wc, uc, vc, am, m, pr, gd):
        if mode == 0:
            p0(o, acc, dc, wc, uc, vc, am, m, pr, gd)
        elif mode == 1:
            p1(o, acc, dc, wc, uc, vc, am, m, pr, gd)
        elif mode == 2:
            p2(o, acc, dc, wc, uc, vc, am, m, pr, gd)
        else:
            p3(o, acc, dc, wc, uc, vc, am, m, pr, gd)

    return run


_K0, _K1, _K2, _K3 = (_make_mode_dispatch(kind) for kind in range(4))


@njit(inline="always", cache=True)
def _visibility_pass(kind, mode, o, acc, dc, wc, uc, vc, am, m, pr, gd):
    if kind == 0:
        _K0(mode, o, acc, dc, wc, uc, vc, am, m, pr, gd)
    elif kind == 1:
        _K1(mode, o, acc, dc, wc, uc, vc, am, m, pr, gd)
    elif kind == 2:
        _K2(mode, o, acc, dc, wc, uc, vc, am, m, pr, gd)
    else:
        _K3(mode, o, acc, dc, wc, uc, vc, am, m, pr, gd)


@njit(cache=True, nogil=True)
def evaluate(
    u,
    v,
    r0,
    r1,
    kinds,
    par,
    sidx,
    spec,
    logr,
    gidx,
    gstart,
    gnum,
    gen_d,
    gen_g,
    cols,
    facs,
    out,
    jac,
    want_jac,
    scratch,
    data,
    weight,
    local,
):
    """For rows r0 <= i < r1: add every component's visibility to ``out`` (complex, n) and, with
    ``want_jac``, its derivatives to ``jac`` (complex, (n_free, n)). ``scratch``: float64
    (rows, chunk) work space, given by the caller so that its memory is accounted for: rows =
    SCRATCH_ROWS with ``want_jac``, else 3 (with ``data``) or 2; chunk (<= CHUNK) the rows done
    per pass, and the length of ``local``.
    ``gen_d`` / ``gen_g`` hold rows r0..r1 only (index i - r0).

    With ``data`` (complex, n; not empty) and ``weight`` (n), nothing is written to ``out``: the
    model of each chunk goes to ``local`` (complex, chunk) and the return value is
    sum weight |data - V|^2 over the rows (0.0 otherwise)."""
    ncomp = kinds.size
    reduce = data.size > 0
    chunk = scratch.shape[1]
    sf = scratch[0]  # spectral factor (nu/nu0)^alpha
    am = scratch[1]  # amplitude: flux * spectral factor
    acc = scratch[2] if reduce else scratch[0]  # partial sums of weight |data - V|^2
    if want_jac:
        wr = scratch[3]  # W = D P: the unit-flux shifted structure
        wi = scratch[4]
        pc = scratch[5]  # P = cos - i sin
        ps = scratch[6]
        hs = scratch[7:10]  # real factors h_p with dD/dp = D h_p (Gaussians)
    else:
        wr = wi = pc = ps = scratch[0]
        hs = scratch[0:1]
    if reduce:
        for j in range(chunk):
            acc[j] = 0.0
    for i0 in range(r0, r1, chunk):
        i1 = min(i0 + chunk, r1)
        m = i1 - i0
        if reduce:
            o = local[0:m]  # V - data of the components so far (first and last fused)
        else:
            o = out[i0:i1]
        dc = data[i0:i1]
        wc = weight[i0:i1]
        uc = u[i0:i1]
        vc = v[i0:i1]
        for c in range(ncomp):
            kind = kinds[c]
            flux = par[c, 0]
            l0 = par[c, 1]
            m0 = par[c, 2]
            si = sidx[c]
            if si >= 0:
                for j in range(m):
                    sf[j] = spec[si, i0 + j]
                    am[j] = flux * sf[j]
            else:
                for j in range(m):
                    sf[j] = 1.0
                    am[j] = flux
            if not want_jac:
                # ---- visibility only: one fused loop per shape
                mode = 0
                if reduce:
                    if ncomp == 1:
                        mode = 3
                    elif c == 0:
                        mode = 1
                    elif c == ncomp - 1:
                        mode = 2
                gd = gen_d[gidx[c], i0 - r0 : i1 - r0] if kind == 3 else local
                _visibility_pass(kind, mode, o, acc, dc, wc, uc, vc, am, m, par[c], gd)
                continue
            # ---- visibility and derivatives: the phase factor reused by every column. Short
            # loops over the chunk (few arrays each, so that every one compiles to SIMD code).
            nshape = 0
            if kind == 0:
                for j in range(m):
                    s, co = sincos_turns(uc[j] * l0 + vc[j] * m0)
                    wr[j] = co
                    wi[j] = -s
            elif kind == 1:
                nshape = 1
                th = par[c, 3]
                h0 = hs[0]
                for j in range(m):
                    s, co = sincos_turns(uc[j] * l0 + vc[j] * m0)
                    q2 = uc[j] * uc[j] + vc[j] * vc[j]
                    d = exp_(circular_exponent(th, q2))
                    wr[j] = d * co
                    wi[j] = -d * s
                    h0[j] = circular_log_derivative(th, q2)
            elif kind == 2:
                nshape = 3
                fa = par[c, 3]
                rho = par[c, 4]
                sp = math.sin(par[c, 5])
                cp = math.cos(par[c, 5])
                h0 = hs[0]
                h1 = hs[1]
                h2 = hs[2]
                for j in range(m):
                    s, co = sincos_turns(uc[j] * l0 + vc[j] * m0)
                    qp, qn = elliptical_axes(uc[j], vc[j], sp, cp)
                    d = exp_(elliptical_exponent(fa, rho, qp, qn))
                    wr[j] = d * co
                    wi[j] = -d * s
                    h0[j], h1[j], h2[j] = elliptical_log_derivatives(fa, rho, qp, qn)
            else:
                nshape = gnum[c]
                gd = gen_d[gidx[c], i0 - r0 : i1 - r0]
                for j in range(m):
                    s, co = sincos_turns(uc[j] * l0 + vc[j] * m0)
                    pc[j] = co
                    ps[j] = s
                for j in range(m):
                    zr = gd[j].real
                    zi = gd[j].imag
                    wr[j] = zr * pc[j] + zi * ps[j]
                    wi[j] = zi * pc[j] - zr * ps[j]
            for j in range(m):
                o[j] += complex(am[j] * wr[j], am[j] * wi[j])
            col = cols[c, 0]
            if col >= 0:
                jr = jac[col, i0:i1]
                f = facs[c, 0]
                for j in range(m):
                    h = f * sf[j]
                    jr[j] += complex(h * wr[j], h * wi[j])
            for axis in range(2):
                col = cols[c, 1 + axis]
                if col < 0:
                    continue
                # -2 pi i x A W = 2 pi x A (Wi - i Wr), x = u (east) or v (north)
                jr = jac[col, i0:i1]
                x = uc if axis == 0 else vc
                f = _TWO_PI * facs[c, 1 + axis]
                for j in range(m):
                    h = f * am[j] * x[j]
                    jr[j] += complex(h * wi[j], -h * wr[j])
            for p in range(nshape):
                col = cols[c, 3 + p]
                if col < 0:
                    continue
                jr = jac[col, i0:i1]
                f = facs[c, 3 + p]
                if kind == 3:
                    gg = gen_g[gstart[c] + p, i0 - r0 : i1 - r0]
                    for j in range(m):
                        zr = gg[j].real
                        zi = gg[j].imag
                        h = f * am[j]
                        jr[j] += complex(h * (zr * pc[j] + zi * ps[j]), h * (zi * pc[j] - zr * ps[j]))
                else:
                    # dD/dp = D h_p for the Gaussians: the column is A h_p W
                    hp = hs[p]
                    for j in range(m):
                        h = f * am[j] * hp[j]
                        jr[j] += complex(h * wr[j], h * wi[j])
            if si >= 0:
                col = cols[c, 3 + nshape]
                if col >= 0:
                    # spectral index: A W ln(nu / nu0)
                    jr = jac[col, i0:i1]
                    f = facs[c, 3 + nshape]
                    for j in range(m):
                        h = f * am[j] * logr[si, i0 + j]
                        jr[j] += complex(h * wr[j], h * wi[j])
    total = 0.0
    if reduce:
        for j in range(chunk):
            total += acc[j]
    return total
