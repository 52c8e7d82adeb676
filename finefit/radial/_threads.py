"""Run the dense linear algebra of the solver with one BLAS thread.

The solver's matrices are small (~350 x 350).  Threaded OpenBLAS gains nothing on them
and, when the cores are busy with other work, its spinning threads slow every call down
by one to two orders of magnitude (measured on a loaded 2-core machine).  The context
manager below caps the OpenBLAS libraries bundled with numpy and scipy at one thread and
restores the previous setting on exit.  It is a no-op where those libraries or their
thread-control entry points cannot be found.
"""

from __future__ import annotations

import ctypes
import glob
import os
from collections.abc import Iterator
from contextlib import contextmanager

_SETTERS = (
    ("scipy_openblas_set_num_threads64_", "scipy_openblas_get_num_threads64_"),
    ("scipy_openblas_set_num_threads", "scipy_openblas_get_num_threads"),
    ("openblas_set_num_threads64_", "openblas_get_num_threads64_"),
    ("openblas_set_num_threads", "openblas_get_num_threads"),
)

_controls: list[tuple[object, object]] | None = None


def _find_controls() -> list[tuple[object, object]]:
    """(setter, getter) pairs of the OpenBLAS copies shipped with numpy and scipy."""
    found: list[tuple[object, object]] = []
    try:
        import numpy
        import scipy
    except ImportError:  # pragma: no cover
        return found
    dirs = set()
    for mod in (numpy, scipy):
        base = os.path.dirname(os.path.dirname(os.path.abspath(mod.__file__)))
        dirs.add(os.path.join(base, mod.__name__ + ".libs"))
    for d in sorted(dirs):
        for path in sorted(glob.glob(os.path.join(d, "*openblas*"))):
            try:
                lib = ctypes.CDLL(path)
            except OSError:
                continue
            for set_name, get_name in _SETTERS:
                if hasattr(lib, set_name) and hasattr(lib, get_name):
                    setter, getter = getattr(lib, set_name), getattr(lib, get_name)
                    setter.restype = None
                    getter.restype = ctypes.c_int
                    found.append((setter, getter))
                    break
    return found


@contextmanager
def single_threaded_blas() -> Iterator[None]:
    """Cap OpenBLAS at one thread inside the block (restored afterwards)."""
    global _controls
    if _controls is None:
        try:
            _controls = _find_controls()
        except Exception:  # never let thread tuning break a computation
            _controls = []
    saved = []
    for setter, getter in _controls:
        try:
            n = int(getter())  # type: ignore[operator]
            setter(ctypes.c_int(1))  # type: ignore[operator]
            saved.append((setter, n))
        except Exception:
            continue
    try:
        yield
    finally:
        for setter, n in saved:
            try:
                setter(ctypes.c_int(n))  # type: ignore[operator]
            except Exception:
                pass
