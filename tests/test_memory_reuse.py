"""Batch workers: freed buffers kept for the next photo (beamshot.memory_reuse) and thread pools capped (beamshot.threads)."""

from __future__ import annotations

import platform
import subprocess
import sys

import pytest

CHILD = r"""
import resource, sys
import cv2
import numpy as np
if sys.argv[1] == "keep":
    from beamshot.memory_reuse import keep_freed_memory
    assert keep_freed_memory() and keep_freed_memory()  # idempotent
ramp = np.broadcast_to((np.arange(4000) % 256).astype(np.uint8)[None, :, None], (3000, 4000, 3))
ok, jpeg = cv2.imencode(".jpg", np.ascontiguousarray(ramp))
def photo():  # a worker's cycle: a 12 MP photo decoded (a 36 MB image), used and freed
    return int(cv2.imdecode(jpeg, cv2.IMREAD_COLOR)[::500, ::500].sum())
photo()
r0 = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
for _ in range(3):
    photo()
print((resource.getrusage(resource.RUSAGE_SELF).ru_minflt - r0) / 3)
"""


@pytest.mark.skipif(platform.system() != "Linux" or platform.libc_ver()[0] != "glibc", reason="glibc malloc only")
def test_a_freed_photo_buffer_is_reused_without_page_faults():
    # a decoded 12 MP photo is 36 MB, 8,800 pages of 4 KiB: fresh mmap pages every time by default
    # (glibc's mmap threshold is at most 32 MB, mallopt(3)), and from the heap once kept
    def faults(mode):
        out = subprocess.run([sys.executable, "-c", CHILD, mode], capture_output=True, text=True, check=True)
        return float(out.stdout.strip())

    plain, kept = faults("plain"), faults("keep")
    assert plain > 8000
    assert kept < 0.05 * plain


def test_thread_pools_follow_the_cores_and_the_environment_cap(monkeypatch):
    # a pool never exceeds its cap or the cores; BEAMSHOT_THREADS caps it further (batch workers set 1)
    import os

    from beamshot.threads import THREADS_ENV, pool_size

    monkeypatch.delenv(THREADS_ENV, raising=False)
    cores = os.cpu_count() or 1
    assert pool_size(4) == min(4, cores) and pool_size(1) == 1
    monkeypatch.setenv(THREADS_ENV, "1")
    assert pool_size(4) == 1
    for bad in ("0", "-3", "many", ""):
        monkeypatch.setenv(THREADS_ENV, bad)
        assert pool_size(4) == min(4, cores)
