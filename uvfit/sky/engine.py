"""The visibility engine: how a SkyModel turns parameters into visibilities and a Jacobian.

Two paths give the same numbers (tests compare them to ~1e-12 relative):

``numba``  compiled kernels (``uvfit.sky._kernels``): all components in one pass over the rows,
           chunk by chunk, no temporary array per term; the phase factor of each component is
           computed once per row (sine and cosine together, reduced in turns) and reused by the
           visibility and by every derivative. Shapes that name a built-in kernel
           (``Shape.kernel``: point, circular and elliptical Gaussian) are evaluated entirely in the
           kernel; any other shape, a newly registered one included, gives its structure and
           derivatives from its own numpy code (in blocks of rows), and the kernel applies flux,
           position and spectral index: a new shape needs nothing in the engine. Compiled on first use (``cache=True``: the compiled code
           is kept in numba's cache directory, the package's own or a user-wide one when that is
           read-only), never at import.
``numpy``  the reference path: ``Component.evaluate`` per component, in blocks of rows so that
           temporaries stay bounded for very large inputs.

Choice: ``set_engine(name)`` / the ``using(name)`` context manager, else the environment
variable ``UVFIT_ENGINE`` (``numba``, ``numpy`` or ``auto``, the default: numba when it can be
imported, otherwise numpy).
"""

import contextlib
import os

import numpy as np

from ..errors import ModelError

#: environment variable that selects the path
ENGINE_VARIABLE = "UVFIT_ENGINE"
ENGINES = ("numba", "numpy")
#: rows per block where numpy temporaries are made (numpy path, shapes without a kernel)
BLOCK = 1 << 16

_chosen = None
_from_env = None
_numba_ok = None
_kernels = None

#: kernel kind of each built-in kernel (``Shape.kernel``); 3: the shape's own numpy code
_KIND = {"point": 0, "gaussian": 1, "elliptical_gaussian": 2}
_GENERIC = 3
_DEG = np.pi / 180.0


def numba_available():
    """True when numba can be imported (checked once, on first use)."""
    global _numba_ok
    if _numba_ok is None:
        try:
            import numba  # noqa: F401

            _numba_ok = True
        except Exception:  # pragma: no cover - depends on the installation
            _numba_ok = False
    return _numba_ok


def set_engine(name):
    """Select the engine for this process: "numba", "numpy", or None / "auto" (back to the
    environment variable's choice)."""
    global _chosen, _from_env
    if name is None or str(name).lower() == "auto":
        _chosen = None
        _from_env = None
        return
    _chosen = _check(str(name).lower())


@contextlib.contextmanager
def using(name):
    """``with using("numpy"): ...`` evaluates with that engine inside the block."""
    global _chosen
    before = _chosen
    set_engine(name)
    try:
        yield
    finally:
        _chosen = before


def _check(name):
    if name not in ENGINES:
        raise ModelError(
            f"unknown visibility engine '{name}'",
            f"use one of {', '.join(ENGINES)} (or auto), e.g. {ENGINE_VARIABLE}=numpy",
        )
    if name == "numba" and not numba_available():
        raise ModelError(
            "the numba engine was asked for but numba cannot be imported",
            f"install numba (pip install numba) or set {ENGINE_VARIABLE}=numpy",
        )
    return name


def current():
    """Name of the engine that the next evaluation uses (the environment variable is read when
    first needed; ``set_engine(None)`` reads it again)."""
    global _from_env
    if _chosen is not None:
        return _chosen
    if _from_env is None:
        env = os.environ.get(ENGINE_VARIABLE, "").strip().lower()
        if env in ("", "auto"):
            _from_env = "numba" if numba_available() else "numpy"
        else:
            _from_env = _check(env)
    return _from_env


def kernels():
    """The compiled-kernel module (imported, not compiled, on first call)."""
    global _kernels
    if _kernels is None:
        from . import _kernels as k

        _kernels = k
    return _kernels


# ---------------------------------------------------------------------------------------- plans
class Plan:
    """Everything about a model's structure the kernel needs, built once per structure and kept
    by the model (``SkyModel.plan``, rebuilt when ``SkyModel.structure_key`` changes). It holds
    indices and numbers only, no reference to the model's objects.

    ``gather`` / ``scale``: par = values[gather] * scale, shaped (n_components, 6);
    ``root``: index of the parameter each one equals through its ties; ``free``: indices of the
    free parameters; ``cols`` / ``facs``: Jacobian column and unit factor per component slot.
    """

    def __init__(self, model):
        params = model.parameters
        names = list(params)
        index = {n: i for i, n in enumerate(names)}
        free_names = model.free_names
        col_of = {n: j for j, n in enumerate(free_names)}
        rpu = model.rad_per_unit
        comps = model.components
        nc = len(comps)
        self.n_params = len(names)
        self.n_free = len(free_names)
        self.free = np.array([index[n] for n in free_names], dtype=np.int64)
        self.root = np.array([index[model.root(n)] for n in names], dtype=np.int64)
        self.kinds = np.zeros(nc, dtype=np.int64)
        gather = np.zeros((nc, 6), dtype=np.int64)
        scale = np.zeros((nc, 6))
        nslot = max([len(c.parameter_names()) for c in comps] + [1])
        self.cols = np.full((nc, nslot), -1, dtype=np.int64)
        self.facs = np.zeros((nc, nslot))
        self.spectral = []  # (component index, reference frequency, spectral-index position)
        self.generic = []  # component indices evaluated by their shape's numpy code
        self.local_index = []  # per component: {local name: value index}
        self.gstart = np.zeros(nc, dtype=np.int64)
        self.gnum = np.zeros(nc, dtype=np.int64)
        self.gidx = np.full(nc, -1, dtype=np.int64)
        ng_rows = 0
        for c, comp in enumerate(comps):
            local = comp.parameter_names()
            li = {ln: index[f"{comp.name}.{ln}"] for ln in local}
            self.local_index.append(li)
            kind = _KIND.get(comp.shape.kernel, _GENERIC)
            self.kinds[c] = kind
            shape_names = list(comp.shape.parameter_names())
            gather[c, 0], scale[c, 0] = li["flux"], 1.0
            gather[c, 1], scale[c, 1] = li["east"], rpu
            gather[c, 2], scale[c, 2] = li["north"], rpu
            if kind == _GENERIC:
                self.gidx[c] = len(self.generic)
                self.generic.append(c)
                self.gstart[c] = ng_rows
                self.gnum[c] = len(shape_names)
                ng_rows += len(shape_names)
            else:
                for k, sn in enumerate(shape_names):
                    gather[c, 3 + k] = li[sn]
                    scale[c, 3 + k] = comp._factor(comp.shape.parameter_kind(sn), rpu)
            for s, ln in enumerate(local):
                j = col_of.get(model.root(f"{comp.name}.{ln}"))
                if j is None:
                    continue
                self.cols[c, s] = j
                if ln == "flux" or ln == "spectral_index":
                    self.facs[c, s] = 1.0
                elif ln in ("east", "north"):
                    self.facs[c, s] = rpu
                else:
                    self.facs[c, s] = comp._factor(comp.shape.parameter_kind(ln), rpu)
            if comp.spectral:
                self.spectral.append((c, comp.reference_frequency, li["spectral_index"]))
        self.tied = bool(np.any(self.root != np.arange(len(names))))
        self.fixed_index = np.array([i for i, n in enumerate(names) if n not in col_of], dtype=np.int64)
        self.fixed_names = [names[i] for i in self.fixed_index]
        self.no_spectrum = np.full(nc, -1, dtype=np.int64)
        self.gather = gather.ravel()
        self.scale = scale.ravel()
        self.n_generic_rows = ng_rows
        self.nc = nc


def plan_of(model):
    """The model's plan for its current structure (built on first use, kept by the model)."""
    return model.plan(Plan)


def value_vector(model, plan, theta):
    """All parameter values (model units) in parameter order, ``theta`` and ties applied."""
    vals = np.empty(plan.n_params)
    params = model.parameters
    if plan.fixed_names:
        vals[plan.fixed_index] = [params[n].value for n in plan.fixed_names]
    if theta is None:
        vals[plan.free] = [params[n].value for n in model.free_names]
    else:
        theta = np.asarray(theta, dtype=float).ravel()
        if theta.size != plan.n_free:
            raise ModelError(f"got {theta.size} free-parameter values for {plan.n_free} free parameters")
        vals[plan.free] = theta
    return vals[plan.root] if plan.tied else vals


_EMPTY_F = np.zeros((0, 0))
_EMPTY_C = np.zeros((0, 0), dtype=complex)


_EMPTY_C1 = np.zeros(0, dtype=complex)
_EMPTY_R1 = np.zeros(0)


def evaluate_numba(model, u, v, frequency, theta, gradient, data=None, weight=None):
    """(vis, jac or None) with the compiled kernel; u, v: equal-shaped float arrays. With ``data``
    and ``weight`` (flat, one per row): the float sum weight |data - V|^2 instead."""
    k = kernels()
    plan = plan_of(model)
    vals = value_vector(model, plan, theta)
    shape = u.shape
    uf = np.ascontiguousarray(u).reshape(-1)
    vf = np.ascontiguousarray(v).reshape(-1)
    n = uf.size
    par = (vals[plan.gather] * plan.scale).reshape(plan.nc, 6)
    reduce = data is not None
    if reduce:
        data = np.ascontiguousarray(data, dtype=complex).reshape(-1)
        weight = np.ascontiguousarray(weight, dtype=float).reshape(-1)
        if data.size != n or weight.size != n:
            raise ModelError(f"data and weights need one value per row ({n}); got {data.size} and {weight.size}")
        out = _EMPTY_C1
        gradient = False
    else:
        data, weight, local = _EMPTY_C1, _EMPTY_R1, _EMPTY_C1
        out = np.zeros(n, dtype=complex)
    jac = np.zeros((plan.n_free, n), dtype=complex) if gradient else _EMPTY_C
    chunk = min(k.CHUNK, max(n, 1))
    scratch = np.empty((k.SCRATCH_ROWS if gradient else (3 if reduce else 2), chunk))
    if reduce:
        local = np.empty(chunk, dtype=complex)
    sidx = plan.no_spectrum
    spec = logr = _EMPTY_F
    if plan.spectral and frequency is not None:
        sidx = sidx.copy()
        nu = np.broadcast_to(np.asarray(frequency, dtype=float), shape).reshape(-1)
        spec = np.empty((len(plan.spectral), n))
        logr = np.empty((len(plan.spectral), n))
        for r, (c, nu0, ia) in enumerate(plan.spectral):
            np.log(nu / nu0, out=logr[r])
            np.exp(vals[ia] * logr[r], out=spec[r])
            sidx[c] = r
    total = 0.0
    if not plan.generic:
        total = k.evaluate(
            uf,
            vf,
            0,
            n,
            plan.kinds,
            par,
            sidx,
            spec,
            logr,
            plan.gidx,
            plan.gstart,
            plan.gnum,
            _EMPTY_C,
            _EMPTY_C,
            plan.cols,
            plan.facs,
            out,
            jac,
            bool(gradient),
            scratch,
            data,
            weight,
            local,
        )
    else:
        comps = model.components
        rpu = model.rad_per_unit
        shape_p = []
        for c in plan.generic:
            li = plan.local_index[c]
            shape_p.append(comps[c].shape_values({ln: vals[i] for ln, i in li.items()}, rpu))
        ng = len(plan.generic)
        for b0 in range(0, n, BLOCK):
            b1 = min(b0 + BLOCK, n)
            ub, vb = uf[b0:b1], vf[b0:b1]
            gen_d = np.empty((ng, b1 - b0), dtype=complex)
            gen_g = np.empty((plan.n_generic_rows, b1 - b0), dtype=complex) if gradient else _EMPTY_C
            for g, c in enumerate(plan.generic):
                shp = comps[c].shape
                if gradient:
                    d, grads = shp.structure_gradient(ub, vb, shape_p[g])
                    row = plan.gstart[c]
                    for p, name in enumerate(shp.parameter_names()):
                        gen_g[row + p] = grads[name]
                else:
                    d = shp.structure(ub, vb, shape_p[g])
                gen_d[g] = d
            total += k.evaluate(
                uf,
                vf,
                b0,
                b1,
                plan.kinds,
                par,
                sidx,
                spec,
                logr,
                plan.gidx,
                plan.gstart,
                plan.gnum,
                gen_d,
                gen_g,
                plan.cols,
                plan.facs,
                out,
                jac,
                bool(gradient),
                scratch,
                data,
                weight,
                local,
            )
    if reduce:
        return float(total)
    vis = out.reshape(shape)
    if not gradient:
        return vis, None
    if len(shape) == 1:
        return vis, jac.T
    return vis, np.moveaxis(jac.reshape((plan.n_free,) + shape), 0, -1)


def evaluate_numpy(model, u, v, frequency, theta, gradient):
    """(vis, jac or None) by the reference path: each component's own numpy code, in blocks."""
    vals = model.values(theta)
    names = model.free_names
    index = {n: j for j, n in enumerate(names)}
    shape = u.shape
    uf = u.reshape(-1)
    vf = v.reshape(-1)
    n = uf.size
    nu = None
    if frequency is not None:
        nu = (
            np.broadcast_to(np.asarray(frequency, dtype=float), shape).reshape(-1)
            if np.ndim(frequency)
            else float(frequency)
        )
    vis = np.zeros(n, dtype=complex)
    jac = np.zeros((n, len(names)), dtype=complex) if gradient else None
    columns = []
    for comp in model.components:
        local = {ln: vals[f"{comp.name}.{ln}"] for ln in comp.parameter_names()}
        cols = {ln: index.get(model.root(f"{comp.name}.{ln}")) for ln in comp.parameter_names()}
        columns.append((comp, local, cols))
    for b0 in range(0, max(n, 1), BLOCK):
        b1 = min(b0 + BLOCK, n)
        ub, vb = uf[b0:b1], vf[b0:b1]
        fb = nu[b0:b1] if isinstance(nu, np.ndarray) else nu
        for comp, local, cols in columns:
            vc, grads = comp.evaluate(ub, vb, fb, local, model.rad_per_unit, gradient=gradient)
            vis[b0:b1] += vc
            if gradient:
                for ln, d in grads.items():
                    j = cols[ln]
                    if j is not None:
                        jac[b0:b1, j] += d
    vis = vis.reshape(shape)
    if gradient:
        jac = jac.reshape(shape + (len(names),))
    return vis, jac


def misfit(model, u, v, data, weight, frequency=None, theta=None):
    """sum weight |data - V_model|^2 over the rows, without an array of model visibilities on the
    compiled path (the numpy path forms them, in blocks)."""
    u = np.asarray(u, dtype=float)
    v = np.asarray(v, dtype=float)
    if u.shape != v.shape:
        u, v = np.broadcast_arrays(u, v)
    if current() == "numba" and model.components:
        return evaluate_numba(model, u, v, frequency, theta, False, data, weight)
    vis = evaluate_numpy(model, u, v, frequency, theta, False)[0].reshape(-1)
    data = np.asarray(data, dtype=complex).reshape(-1)
    weight = np.asarray(weight, dtype=float).reshape(-1)
    if data.size != vis.size or weight.size != vis.size:
        raise ModelError(f"data and weights need one value per row ({vis.size}); got {data.size} and {weight.size}")
    d = data - vis
    return float(np.sum(weight * (d.real**2 + d.imag**2)))


def evaluate(model, u, v, frequency=None, theta=None, gradient=False):
    """(vis, jac or None) of ``model`` with the current engine."""
    u = np.asarray(u, dtype=float)
    v = np.asarray(v, dtype=float)
    if u.shape != v.shape:
        u, v = np.broadcast_arrays(u, v)
    if current() == "numba":
        return evaluate_numba(model, u, v, frequency, theta, gradient)
    return evaluate_numpy(model, u, v, frequency, theta, gradient)
