"""Decode a command's photos on a second thread while the analysis modules are still importing.

A `beamshot analyze` process spends about 0.1 s importing the analysis and report modules after
numpy, OpenCV and Pillow are in, and about as long decoding a 12 MP JPEG; OpenCV's decoder
releases the GIL, so the two overlap on two cores (measured in benchmarks/bench_analysis.py's
whole-process table).  :func:`decode_ahead` imports beamshot.photo (numpy, OpenCV, Pillow) on the
calling thread first, so that no module is imported by two threads at once, then loads the photos
one after another on a worker thread.  Each :class:`PendingPhoto` stands for one path wherever a
path or a :class:`~beamshot.photo.Photo` is taken (beamshot.prepare.load_input): ``result()``
gives the Photo, or raises the same BeamshotError the load would have raised, at the point the
analysis would have loaded it, so the order of errors does not change.

While the decoder runs, file descriptor 2 of the whole process is redirected to catch the
decoder's own messages (beamshot.photo._decoder_messages), so anything written to stderr by the
other thread meanwhile would be lost: the command calls :meth:`DecodeAhead.settle` right after the
imports (the work the decode overlaps), before the analysis runs and anything is printed.  On an
interruption (Ctrl-C) the photos not yet begun are dropped and only the one decoding is waited
for, through a second Ctrl-C too: leaving the interpreter while OpenCV decodes on the worker
aborts the process.  The worker may import a decoder's own modules lazily (rawpy, Pillow's
plugins) while the main thread imports beamshot's; Python's per-module import locks keep that
safe.
"""

from __future__ import annotations

import os
from concurrent.futures import Future, ThreadPoolExecutor

__all__ = ["PendingPhoto", "DecodeAhead", "decode_ahead"]


class PendingPhoto:
    """A photo being loaded on the worker thread; ``result()`` gives the Photo or raises."""

    def __init__(self, path, future: Future):
        self.path = path
        self._future = future

    def result(self):
        return self._future.result()

    def __fspath__(self) -> str:  # still usable as the path it stands for
        return os.fspath(self.path)


class DecodeAhead:
    """The worker and the photos it loads, in the order given."""

    def __init__(self, paths):
        from .photo import load_photo  # numpy, OpenCV and Pillow imported here, on the calling thread

        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="beamshot-decode")
        self.pending = [PendingPhoto(p, self._pool.submit(load_photo, p)) for p in paths]
        self._pool.shutdown(wait=False)

    def settle(self, *, interrupted: bool = False) -> None:
        """Wait until every load has ended (with a photo or an error); errors stay in the pending
        photos.  ``interrupted``: drop the loads not yet begun.  The running load is waited for
        even through KeyboardInterrupts; one that came during the wait is raised after it."""
        caught = None
        while True:
            try:
                self._pool.shutdown(wait=True, cancel_futures=interrupted)
                break
            except KeyboardInterrupt as exc:
                interrupted, caught = True, exc
        if caught is not None:
            raise caught


def decode_ahead(*groups):
    """Start loading every path of ``groups`` (each None, a path or a sequence of paths); returns
    ``(DecodeAhead, groups)`` with each path replaced by its :class:`PendingPhoto`."""
    flat = []
    for g in groups:
        if g is None:
            continue
        flat.extend(g if isinstance(g, (list, tuple)) else [g])
    ahead = DecodeAhead(flat)
    it = iter(ahead.pending)
    out = []
    for g in groups:
        if g is None:
            out.append(None)
        elif isinstance(g, (list, tuple)):
            out.append([next(it) for _ in g])
        else:
            out.append(next(it))
    return ahead, out
