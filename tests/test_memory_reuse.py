"""Freed buffers kept for the next photo in a batch worker (beamshot.memory_reuse)."""

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
