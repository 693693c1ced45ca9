"""How many threads one analysis may use beside its main thread.

An analysis runs some of its work on a small thread pool (linearising strips, the uncertainty
budget's re-measurements); on a 2-core machine that is one analysis on both cores.  A batch
already runs one worker process per core, so there every analysis keeps to one thread: more would
only make the workers compete (measured in benchmarks/bench_batch.py).  ``BEAMSHOT_THREADS``
(an integer >= 1) caps the pools; batch workers set it to 1.
"""

from __future__ import annotations

import os

__all__ = ["THREADS_ENV", "pool_size"]

THREADS_ENV = "BEAMSHOT_THREADS"


def pool_size(cap: int) -> int:
    """Threads for a pool that would use at most ``cap``: the cores, and ``BEAMSHOT_THREADS`` if set."""
    n = max(1, min(cap, os.cpu_count() or 1))
    try:
        limit = int(os.environ.get(THREADS_ENV, "") or 0)
    except ValueError:
        limit = 0
    return min(n, limit) if limit >= 1 else n
