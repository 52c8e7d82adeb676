"""BLAS threads for the engine and the fit: one thread unless the user asks for more.

The engine's matrices are small (J blocks of tens to a few hundred states, eigh of a
29 x 29 block in 0.1-0.2 ms). Threaded OpenBLAS gains nothing on them, and when the
cores are busy with other work its spinning threads slow each call down 2-12 times
(measured on a shared 2-core machine; ``benchmarks/bench_commands.py``). Every entry
point (the command line, the ``Session`` API, the workspace's fit worker) and the
coarse engine calls (building a model, a whole solution, the fit) run inside
:func:`engine_threads`. The setting is process-wide while any such block runs and
the previous one is restored when the last block ends. ``FINEFIT_BLAS_THREADS=n``
overrides the count.
"""

from __future__ import annotations

import functools
import os
import sys
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import TypeVar

F = TypeVar("F", bound=Callable)

_lock = threading.Lock()
_depth = 0
_limiters: list = []
_scipy_capped = False


def engine_thread_count() -> int:
    """BLAS threads for the engine: ``FINEFIT_BLAS_THREADS`` if it is a positive integer, else 1."""
    text = os.environ.get("FINEFIT_BLAS_THREADS", "").strip()
    try:
        n = int(text)
    except ValueError:
        return 1
    return n if n >= 1 else 1


def _limit() -> None:
    """Cap the BLAS libraries loaded now (numpy's; scipy's once scipy.linalg is loaded).

    scipy is not imported for this (0.1-0.3 s): a command that never needs scipy never
    pays for it. When scipy's BLAS appears later, the next engine block caps it too.
    """
    global _scipy_capped
    try:
        import numpy  # noqa: F401 - numpy and scipy each bring their own OpenBLAS
        from threadpoolctl import threadpool_limits

        _scipy_capped = "scipy.linalg" in sys.modules
        _limiters.append(threadpool_limits(limits=engine_thread_count(), user_api="blas"))
    except Exception:  # never let thread tuning break a computation
        pass


@contextmanager
def engine_threads() -> Iterator[None]:
    """Run the block with the engine's BLAS thread count; nested blocks cost nothing."""
    global _depth
    with _lock:
        if _depth == 0 or (not _scipy_capped and "scipy.linalg" in sys.modules):
            _limit()
        _depth += 1
    try:
        yield
    finally:
        with _lock:
            _depth -= 1
            if _depth == 0:
                while _limiters:
                    try:
                        _limiters.pop().restore_original_limits()
                    except Exception:
                        pass


def with_engine_threads(fn: F) -> F:
    """Decorator form of :func:`engine_threads`."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        with engine_threads():
            return fn(*args, **kwargs)

    return wrapper  # type: ignore[return-value]
