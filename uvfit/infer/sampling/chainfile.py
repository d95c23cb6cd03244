"""The HDF5 chain file: emcee's HDF5 backend in the group CHAIN_GROUP, plus uvfit's attributes.

Attributes of the group: ``uvfit_names`` (JSON list of the free parameter names), ``uvfit_seed``
and ``uvfit_meta`` (JSON: mode, systematic, data), next to emcee's own (``iteration``,
``nwalkers``, ...). emcee stores the sampler's random state after every step, so a resumed chain
continues the same random sequence. Everything that writes, resumes or reads a chain file is here.
"""

import functools
import json
import os

import numpy as np

from ...errors import UvfitError

#: name of the group inside the HDF5 chain file
CHAIN_GROUP = "uvfit_chain"


def read_chain_attrs(path):
    import h5py

    try:
        with h5py.File(path, "r") as f:
            if CHAIN_GROUP not in f:
                raise UvfitError(
                    f"{path} holds no uvfit chain",
                    "give the chain file written by an earlier sampling run (`chain`)",
                )
            g = f[CHAIN_GROUP]
            attrs = {k: g.attrs[k] for k in g.attrs}
    except OSError as exc:
        raise UvfitError(
            f"cannot read the chain file {path} ({exc})",
            "give an HDF5 chain file written by an earlier sampling run, or start a new one with `force`",
        ) from None
    try:
        names = json.loads(attrs.get("uvfit_names", "[]"))
        info = {
            "names": names,
            "seed": int(attrs.get("uvfit_seed", 0)),
            "iteration": int(attrs.get("iteration", 0)),
            "n_walkers": int(attrs.get("nwalkers", 0)),
            "meta": json.loads(attrs.get("uvfit_meta", "{}")),
        }
        ok = (
            isinstance(names, list)
            and all(isinstance(n, str) for n in names)
            and isinstance(info["meta"], dict)
            and info["iteration"] >= 0
            and info["n_walkers"] >= 0
            and info["seed"] >= 0
        )
    except (TypeError, ValueError, OverflowError, RecursionError):
        ok = False
    if not ok:
        raise UvfitError(
            f"the attributes of the chain file {path} are damaged (uvfit_names, "
            "uvfit_seed, uvfit_meta, iteration or nwalkers)",
            "start a new chain with `force`",
        )
    return info


def write_chain_attrs(path, names, seed, meta):
    import h5py

    with h5py.File(path, "a") as f:
        g = f[CHAIN_GROUP]
        g.attrs["uvfit_names"] = json.dumps(list(names))
        g.attrs["uvfit_seed"] = int(seed)
        g.attrs["uvfit_meta"] = json.dumps(meta or {})


def chain_info(path):
    """What an existing chain file holds: names, seed, iteration, n_walkers, meta."""
    return read_chain_attrs(path)


def check_chain_file(chain_path, resume=False, force=False):
    """Refuse what a run would refuse about its chain file; the steps already in it (0 if new).

    ``resume`` needs an existing chain file; without it an existing file needs ``force``, and its
    folder must exist. Commands call this before any long work.
    """
    if resume:
        if chain_path is None:
            raise UvfitError("`resume` needs the chain file to continue", "give it with `chain=FILE.h5`")
        if not os.path.exists(chain_path):
            raise UvfitError(
                f"there is no chain file {chain_path} to resume", "run once without `resume` to start the chain"
            )
        return read_chain_attrs(chain_path)["iteration"]
    if chain_path is not None:
        if os.path.exists(chain_path) and not force:
            raise UvfitError(
                f"the chain file {chain_path} exists already",
                "pass `resume` to continue it, or `force` to start it again",
            )
        if not os.path.isdir(os.path.dirname(os.path.abspath(chain_path))):
            raise UvfitError(f"the folder for the chain file {chain_path} does not exist", "create it first")
    return 0


def resume_backend(chain_path, names, n_walkers, seed):
    """Open an existing chain to continue it: (backend, n_walkers, seed, notes).

    Refuses a chain run on other free parameters, with another number of walkers, or empty; the
    chain's own seed is kept (a note says so when ``seed`` differs).
    """

    notes = []
    info = read_chain_attrs(chain_path)
    if info["names"] != names:
        raise UvfitError(
            f"the chain in {chain_path} was run on other free parameters ({', '.join(info['names'])})",
            "resume with the same model file, or start a new chain with `force`",
        )
    if n_walkers is not None and int(n_walkers) != info["n_walkers"]:
        raise UvfitError(
            f"the chain in {chain_path} has {info['n_walkers']} walkers, not {n_walkers}",
            "drop `walkers` when resuming",
        )
    if info["iteration"] < 1:
        raise UvfitError(f"the chain in {chain_path} is empty", "start it again with `force`")
    n_walkers = info["n_walkers"]
    if int(seed) != info["seed"]:
        notes.append(f"the chain continues its own random sequence (seed {info['seed']}); `seed={seed}` is not used")
    seed = info["seed"]
    backend = _backend_class()(chain_path, name=CHAIN_GROUP)
    return backend, n_walkers, seed, notes


@functools.cache
def _backend_class():
    """emcee's HDF5 backend, whose failed step (a full disk, a lost file system) becomes a clear
    error: emcee raises the step counter last, so the steps before it stay complete and readable."""
    import emcee

    class ChainBackend(emcee.backends.HDFBackend):
        def save_step(self, state, accepted):
            try:
                super().save_step(state, accepted)
            except OSError as exc:
                try:
                    done = int(self.iteration)
                except Exception:  # the file itself is gone or unreadable
                    done = None
                kept = f"it keeps its {done} complete steps" if done is not None else "it may be damaged"
                raise UvfitError(
                    f"cannot write the next step to the chain file {self.filename} ({exc.strerror or exc}); {kept}",
                    "free disk space, then continue with `resume`",
                ) from None

    return ChainBackend


def new_backend(chain_path, n_walkers, n_dim, names, seed, meta):
    """A fresh chain file (an existing one is replaced: the caller checked ``force``) with its
    attributes written; None without a path."""
    if chain_path is None:
        return None

    if os.path.exists(chain_path):
        os.unlink(chain_path)
    backend = _backend_class()(chain_path, name=CHAIN_GROUP)
    backend.reset(n_walkers, n_dim)
    write_chain_attrs(chain_path, names, seed, meta)
    return backend


def chain_group(path):
    """The HDF5 group holding the emcee chain: the sampler's own, else the first that has one."""
    import h5py

    try:
        with h5py.File(path, "r") as handle:
            if CHAIN_GROUP in handle:
                return CHAIN_GROUP
            for name in sorted(handle):
                if isinstance(handle[name], h5py.Group) and "chain" in handle[name]:
                    return name
    except OSError as exc:
        raise UvfitError(
            f"chain file {path} is not an HDF5 file ({exc})", "give the HDF5 chain written by 'uvfit sample'"
        ) from None
    raise UvfitError(f"chain file {path} holds no sampler chain", "give the HDF5 chain written by 'uvfit sample'")


def read_chain(path, discard=0, thin=1):
    """Flat posterior samples (n, n_parameters) from an emcee HDF5 backend file."""
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise UvfitError(f"chain file {path} does not exist", "check the path")
    import emcee

    try:
        backend = emcee.backends.HDFBackend(path, name=chain_group(path), read_only=True)
        if int(backend.iteration) == 0:
            raise UvfitError(
                f"chain file {path} is empty: it holds no samples (no step of the sampler was stored)",
                "give a chain written by a sampling run that made at least one step",
            )
        samples = backend.get_chain(discard=int(discard), thin=int(thin), flat=True)
    except UvfitError:
        raise
    except (OSError, KeyError, AttributeError, ValueError) as exc:
        raise UvfitError(
            f"chain file {path} is not a readable sampler chain ({exc})",
            "give the HDF5 chain written by 'uvfit sample'",
        ) from None
    if samples is None or samples.size == 0:
        raise UvfitError(
            f"chain file {path} has no samples left after discarding {discard} steps",
            "check the chain, or the discard recorded in the posterior JSON",
        )
    return np.asarray(samples)
