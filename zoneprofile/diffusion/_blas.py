"""Run the small dense linear algebra of a fit on one BLAS thread.

The matrices of a boundary fit are a few hundred wide: a multi-threaded BLAS
spends more time waking and synchronising threads than computing, and on a
busy machine it can be 10–50× slower than one thread. :func:`single_thread`
sets every OpenBLAS loaded in the process (numpy's and scipy's copies) to one
thread for the duration of a ``with`` block and restores the previous count.
Without OpenBLAS it does nothing.
"""

from __future__ import annotations

import contextlib
import ctypes

_SETTERS = ("openblas_set_num_threads", "openblas_set_num_threads64_", "scipy_openblas_set_num_threads64_",
            "scipy_openblas_set_num_threads")
_GETTERS = ("openblas_get_num_threads", "openblas_get_num_threads64_", "scipy_openblas_get_num_threads64_",
            "scipy_openblas_get_num_threads")
_LIBS = None


def _openblas_libs():
    global _LIBS
    if _LIBS is not None:
        return _LIBS
    libs = []
    try:
        with open("/proc/self/maps", encoding="utf-8") as fh:
            paths = {line.split()[-1] for line in fh if "openblas" in line.lower() and line.rstrip().endswith(".so")
                     or "openblas" in line.lower() and ".so" in line.split()[-1]}
    except OSError:
        paths = set()
    for path in sorted(paths):
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        setter = next((getattr(lib, s) for s in _SETTERS if hasattr(lib, s)), None)
        getter = next((getattr(lib, g) for g in _GETTERS if hasattr(lib, g)), None)
        if setter is not None and getter is not None:
            getter.restype = ctypes.c_int
            libs.append((setter, getter))
    _LIBS = libs
    return libs


@contextlib.contextmanager
def single_thread():
    """Limit OpenBLAS to one thread inside the block."""
    import scipy.linalg  # noqa: F401  (make sure scipy's BLAS is loaded before looking)

    libs = _openblas_libs()
    previous = []
    for setter, getter in libs:
        try:
            previous.append(int(getter()))
            setter(1)
        except Exception:  # pragma: no cover - exotic builds
            previous.append(None)
    try:
        yield
    finally:
        for (setter, _getter), n in zip(libs, previous):
            if n is not None:
                setter(n)
