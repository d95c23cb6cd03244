"""Running with one BLAS thread where the work is many small matrix operations.

A least-squares step on a few thousand rows and a handful of parameters (an SVD of a tall, thin
Jacobian) takes well under a millisecond on one core; OpenBLAS spreading it over several threads
makes it 10 to 100 times slower when the cores are busy (measured on a loaded 2-core machine:
0.3 ms single-threaded against 30 ms threaded). :func:`single_threaded` sets every OpenBLAS
library loaded in the process to one thread and restores the previous count afterwards. It finds
the libraries through /proc/self/maps (Linux); elsewhere, or for other BLAS libraries, it does
nothing. Results do not change, only the time they take.
"""

import contextlib
import ctypes

_SETTERS = (
    "scipy_openblas_set_num_threads64_",
    "scipy_openblas_set_num_threads",
    "openblas_set_num_threads64_",
    "openblas_set_num_threads",
)
_GETTERS = (
    "scipy_openblas_get_num_threads64_",
    "scipy_openblas_get_num_threads",
    "openblas_get_num_threads64_",
    "openblas_get_num_threads",
)


def _libraries():
    """[(set, get)] functions of the OpenBLAS libraries loaded in this process."""
    try:
        with open("/proc/self/maps", "r", encoding="utf-8", errors="replace") as handle:
            paths = sorted({line.split()[-1] for line in handle if "openblas" in line.lower() and ".so" in line})
    except OSError:
        return []
    found = []
    for path in paths:
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        setter = next((getattr(lib, n) for n in _SETTERS if hasattr(lib, n)), None)
        getter = next((getattr(lib, n) for n in _GETTERS if hasattr(lib, n)), None)
        if setter is not None and getter is not None:
            setter.argtypes, setter.restype = [ctypes.c_int], None
            getter.argtypes, getter.restype = [], ctypes.c_int
            found.append((setter, getter))
    return found


@contextlib.contextmanager
def single_threaded():
    """Context manager: every loaded OpenBLAS on one thread inside, as before outside."""
    libs = []
    try:
        import numpy  # noqa: F401  (make sure the libraries are loaded)
        import scipy.linalg  # noqa: F401

        libs = _libraries()
    except Exception:  # never let a speed tweak break a run
        libs = []
    before = []
    for setter, getter in libs:
        try:
            before.append((setter, int(getter())))
            setter(1)
        except Exception:
            pass
    try:
        yield len(before)
    finally:
        for setter, n in before:
            try:
                setter(max(1, n))
            except Exception:
                pass
