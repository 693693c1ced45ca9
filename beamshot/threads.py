"""How many threads one analysis may use beside its main thread.

An analysis runs some of its work on a small thread pool (linearising strips, the uncertainty
budget's re-measurements); on a 2-core machine that is one analysis on both cores.  A batch
already runs one worker process per core, so there every analysis keeps to one thread: more would
only make the workers compete (measured in benchmarks/bench_batch.py).  ``BEAMSHOT_THREADS``
(an integer >= 1) caps the pools; batch workers set it to 1.

BLAS (the OpenBLAS under numpy and scipy) starts a thread per core for a matrix product and keeps
them spinning between products.  The analysis's products are small (a map's 540 x 180 cells by 36
sectors, 3 x 3 homographies), so those threads gain nothing and, spinning, took as much CPU as the
analysis itself and the core the budget's pool wanted; :func:`one_blas_thread` runs a block with
BLAS on one thread (threadpoolctl).  Its products give the same numbers on any number of threads
(each output element is one thread's sum); a large least-squares solve may not (the bracket's
response recovery), so the stages that run one are left alone.
"""

from __future__ import annotations

import os
import threading
from contextlib import contextmanager

__all__ = ["THREADS_ENV", "pool_size", "one_blas_thread"]

THREADS_ENV = "BEAMSHOT_THREADS"


def pool_size(cap: int) -> int:
    """Threads for a pool that would use at most ``cap``: the cores, and ``BEAMSHOT_THREADS`` if set."""
    n = max(1, min(cap, os.cpu_count() or 1))
    try:
        limit = int(os.environ.get(THREADS_ENV, "") or 0)
    except ValueError:
        limit = 0
    return min(n, limit) if limit >= 1 else n


_BLAS: list = []  # [threadpoolctl.ThreadpoolController or None], made on first use
_BLAS_LOCK = threading.Lock()


def _blas_controller():
    with _BLAS_LOCK:
        if not _BLAS:
            try:
                from threadpoolctl import ThreadpoolController

                _BLAS.append(ThreadpoolController())  # finds the BLAS libraries loaded by now
            except Exception:  # noqa: BLE001 - without threadpoolctl (or an odd BLAS) the block runs as it is
                _BLAS.append(None)
        return _BLAS[0]


@contextmanager
def one_blas_thread():
    """Run the block with BLAS on one thread, restored after (see the module docstring)."""
    controller = _blas_controller()
    if controller is None:
        yield
        return
    with controller.limit(limits=1, user_api="blas"):
        yield
