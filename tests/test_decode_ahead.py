"""Photos decoded on a second thread while the analysis imports (beamshot/decode_ahead.py): the
same photos, the same errors at the same point, and the decoder's own messages still kept off
the terminal."""

from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest

from beamshot.decode_ahead import PendingPhoto, decode_ahead
from beamshot.errors import BeamshotError
from beamshot.photo import load_photo
from beamshot.prepare import load_input
from beamshot.synth import SynthCamera, encode_jpeg


def _jpeg(tmp_path, name: str, seed: int) -> str:
    pixels = np.random.default_rng(seed).integers(0, 255, (60, 80, 3), dtype=np.uint8)
    path = tmp_path / name
    path.write_bytes(encode_jpeg(pixels, SynthCamera(width_px=80, height_px=60)))
    return str(path)


def _damaged(tmp_path) -> str:
    """A JPEG with an unexpected restart marker inside its scan: libjpeg prints 'Corrupt JPEG data'
    on file descriptor 2 and fills in the rest (ITU-T T.81 B.2: markers in the entropy-coded data)."""
    pixels = np.random.default_rng(2).integers(0, 255, (300, 400, 3), dtype=np.uint8)
    data = encode_jpeg(pixels, SynthCamera(width_px=400, height_px=300))
    sos = data.find(b"\xff\xda")
    mid = sos + (len(data) - sos) // 2
    path = tmp_path / "damaged.jpg"
    path.write_bytes(data[:mid] + b"\xff\xd3" + data[mid + 2:])
    return str(path)


def test_pending_photos_are_the_photos_loaded_in_the_order_given(tmp_path):
    a, b, c = (_jpeg(tmp_path, f"{k}.jpg", k) for k in range(3))
    ahead, (beam, ambient, flat, dark) = decode_ahead([a, b], None, c, None)
    ahead.settle()
    assert ambient is None and dark is None and isinstance(flat, PendingPhoto)
    for pending, path in zip([*beam, flat], [a, b, c]):
        got, ref = load_input(pending, "photo"), load_photo(path)
        assert got.name == ref.name and got.sha256 == ref.sha256
        np.testing.assert_array_equal(got.bgr, ref.bgr)
        assert os.fspath(pending) == path


def test_a_load_error_is_raised_where_the_photo_is_used(tmp_path):
    good = _jpeg(tmp_path, "good.jpg", 1)
    ahead, (beam,) = decode_ahead([str(tmp_path / "missing.jpg"), good])
    ahead.settle()  # the worker went on to the next photo
    with pytest.raises(BeamshotError, match="no such file"):
        beam[0].result()
    assert beam[1].result().name == "good.jpg"


def test_the_command_line_still_refuses_a_damaged_jpeg_in_one_line(tmp_path):
    # the decoder's stderr capture and the command's own error line must not mix
    out = subprocess.run([sys.executable, "-m", "beamshot", "analyze", _damaged(tmp_path), "--distance", "5"],
                         capture_output=True, text=True, timeout=120)
    assert out.returncode == 2
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1 and "damaged" in lines[0] and "Corrupt" in lines[0]


def test_an_interrupted_command_drops_the_photos_not_yet_begun(tmp_path):
    # Ctrl-C: the command waits only for the photo being decoded, the others are cancelled
    from concurrent.futures import CancelledError

    pixels = np.random.default_rng(9).integers(0, 255, (1500, 2000, 3), dtype=np.uint8)
    data = encode_jpeg(pixels, SynthCamera(width_px=2000, height_px=1500))
    paths = []
    for k in range(6):  # each takes tens of milliseconds to decode: far longer than settling takes
        (tmp_path / f"{k}.jpg").write_bytes(data)
        paths.append(str(tmp_path / f"{k}.jpg"))
    ahead, (beam,) = decode_ahead(paths)
    ahead.settle(interrupted=True)
    done, dropped = 0, 0
    for pending in beam:
        try:
            pending.result()
            done += 1
        except CancelledError:
            dropped += 1
    assert done + dropped == 6 and dropped >= 1
