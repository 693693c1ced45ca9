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

While the decoder runs, file descriptor 2 is redirected to catch the decoder's own messages
(beamshot.photo._decoder_messages); :meth:`DecodeAhead.settle` waits for the worker, and the
command calls it before it prints anything, so that no line of ours lands in that capture.
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

    def settle(self) -> None:
        """Wait until every load has ended (with a photo or an error); errors stay in the pending photos."""
        self._pool.shutdown(wait=True)


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
