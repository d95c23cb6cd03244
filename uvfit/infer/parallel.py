"""Independent pieces of work (bootstrap simulations, starts, jackknife subsets, profile points,
forecast trials) run in several processes.

:func:`run_pieces` maps a module-level function over a list of items with
``concurrent.futures.ProcessPoolExecutor``. What every piece needs (the data, the fitted models)
is sent once per process through the pool's initializer, not with every item; each process runs
its numerical work on one BLAS thread (:func:`uvfit._blas.single_threaded`), so two processes on
two cores do not fight over them. Results come back in the order of the items, whatever the
number of processes, and every random step draws from a seed fixed by the item, never by the
process that runs it: the numbers do not depend on ``procs``.
"""

from concurrent.futures import ProcessPoolExecutor
from typing import Any, Callable, List, Optional, Sequence

_SHARED: Any = None
_BLAS_GUARD: Any = None


def check_procs(procs: Any) -> int:
    """``procs`` as an int >= 1; a UvfitError naming it otherwise."""
    from ..errors import UvfitError

    try:
        n = int(procs)
    except (TypeError, ValueError):
        raise UvfitError(f"procs must be a whole number of at least 1 (got {procs!r})") from None
    if isinstance(procs, bool) or n != procs or n < 1:
        raise UvfitError(f"procs must be a whole number of at least 1 (got {procs})", "use `procs=1` or more")
    return n


def _init(shared: Any) -> None:
    global _SHARED, _BLAS_GUARD
    from .._blas import single_threaded

    _SHARED = shared
    _BLAS_GUARD = single_threaded()
    _BLAS_GUARD.__enter__()  # for the life of the worker process


def _call(func: Callable[[Any, Any], Any], item: Any) -> Any:
    return func(_SHARED, item)


def run_pieces(
    func: Callable[[Any, Any], Any],
    items: Sequence[Any],
    shared: Any = None,
    procs: int = 1,
    progress: Optional[Callable[[int], None]] = None,
    sizes: Optional[Sequence[int]] = None,
) -> List[Any]:
    """``[func(shared, item) for item in items]``, in ``procs`` processes when more than one.

    ``func`` must be a module-level function (it is sent to the processes by name). ``progress``:
    called with 1 (or ``sizes[j]`` for piece j) as each piece finishes, in the order they finish.
    With ``procs`` 1, or a single item, everything runs in this process.
    """
    items = list(items)
    steps = [1] * len(items) if sizes is None else [int(n) for n in sizes]
    procs = min(check_procs(procs), max(len(items), 1))
    if procs <= 1:
        out = []
        for item, step in zip(items, steps):
            out.append(func(shared, item))
            if progress:
                progress(step)
        return out
    import multiprocessing

    results: List[Any] = [None] * len(items)
    with ProcessPoolExecutor(
        max_workers=procs, mp_context=multiprocessing.get_context(), initializer=_init, initargs=(shared,)
    ) as pool:
        futures = {pool.submit(_call, func, item): j for j, item in enumerate(items)}
        from concurrent.futures import as_completed

        for fut in as_completed(futures):
            j = futures[fut]
            results[j] = fut.result()
            if progress:
                progress(steps[j])
    return results
