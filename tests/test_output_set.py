"""One output set, replaced at once (beamshot/report/output.py): a reader of --out sees the old set
or the new set, never a mix, and no temporary folder is left behind.

The kill test runs ``beamshot analyze PHOTO --distance D --out X`` over an older report and
kills it (SIGKILL, every fourth time SIGTERM) after a random delay over the whole run's measured
duration (one in each of N equal slices, so the writing phase is hit), with a fixed seed.  By
default it makes 8 kills (about 55 s here, with runs of 5-9 s); set ``BEAMSHOT_KILL_TEST_KILLS=50``
for the issue's 50 (about 6.5 min).  Odd-numbered kills force the two-rename
swap (``BEAMSHOT_SWAP=rename``, the fallback where the file system cannot exchange two folders),
the others use the atomic exchange.
"""

from __future__ import annotations

import hashlib
import json
import os
import random
import shutil
import signal
import subprocess
import sys
import threading
import time

import numpy as np
import pytest

from beamshot.errors import BeamshotError
from beamshot.report import output
from beamshot.report.output import REPORT_FILES, write_report

#: The set written without --colour (tint.png comes only with colour).
PLAIN_FILES = tuple(f for f in REPORT_FILES if f != "tint.png")
from beamshot.synth import encode_jpeg, render_photo

from conftest import make_shot

KILLS = int(os.environ.get("BEAMSHOT_KILL_TEST_KILLS", "8"))
SEED = 20261203


@pytest.fixture(scope="module")
def two_photos(tmp_path_factory, reflector_beam):
    """Two small synthetic photos of one beam (different noise seeds): the old set and the new set."""
    folder = tmp_path_factory.mktemp("photos")
    scene, cam, _ = make_shot(reflector_beam, width_px=320, height_px=240)
    paths = []
    for seed in (1, 2):
        p = folder / f"beam-{seed}.jpg"
        p.write_bytes(encode_jpeg(render_photo(reflector_beam, scene, cam, seed=seed), cam))
        paths.append(p)
    return paths


@pytest.fixture(scope="module")
def reports(two_photos):
    from beamshot import analyze

    return [analyze(str(p), distance_m=5.0, lux_at_peak=480.0) for p in two_photos]


def _ours(parent) -> list[str]:
    return sorted(n for n in os.listdir(parent) if n.startswith(".beamshot-"))


def test_new_set_replaces_the_old_one_whole(tmp_path, reports):
    out = tmp_path / "X"
    write_report(reports[0], out)
    assert sorted(os.listdir(out)) == sorted(PLAIN_FILES)
    # a set without a picture replaces the files as a set: no beam.png of the old set stays (the page stays, without pictures)
    written = write_report(reports[1], out, picture=False)
    assert sorted(os.listdir(out)) == ["intensity-map.npz", "profile.csv", "report.html", "report.json"]
    assert sorted(os.path.basename(p) for p in written) == ["intensity-map.npz", "profile.csv", "report.html", "report.json"]
    data = json.loads((out / "report.json").read_text())
    assert data["inputs"][0]["sha256"] == reports[1].inputs[0]["sha256"]
    assert _ours(tmp_path) == []


def test_intensity_map_round_trips_and_bad_maps_are_one_line(tmp_path, reports):
    from beamshot.errors import BeamshotError
    from beamshot.report.intensity_map import read_intensity_map

    out = tmp_path / "M"
    write_report(reports[0], out, picture=False)
    back = read_intensity_map(out / "report.json")
    beam = reports[0].beam
    assert back.unit == beam.unit and back.distance_m == beam.distance_m
    np.testing.assert_allclose(back.theta, beam.theta, rtol=1e-12)
    np.testing.assert_allclose(back.phi, beam.phi, rtol=1e-12)
    # float32 holds 7 significant digits, more than the figures' 6
    np.testing.assert_allclose(back.intensity, beam.intensity, rtol=1e-6)
    assert np.array_equal(np.isnan(back.intensity), np.isnan(beam.intensity))
    assert np.array_equal(back.saturated, beam.saturated)
    bad = tmp_path / "bad.npz"
    for blob in (b"", b"PK\x03\x04 not really", (out / "report.json").read_bytes()):
        bad.write_bytes(blob)
        with pytest.raises(BeamshotError) as err:
            read_intensity_map(bad)
        assert "\n" not in str(err.value) and str(bad) in str(err.value)
    with pytest.raises(BeamshotError, match="no intensity map"):
        read_intensity_map(tmp_path / "nowhere")


def test_a_folder_with_other_files_is_refused_and_left_alone(tmp_path, reports):
    out = tmp_path / "notes"
    out.mkdir()
    (out / "todo.txt").write_text("mine")
    with pytest.raises(BeamshotError, match="did not write.*todo.txt.*choose another --out"):
        write_report(reports[0], out, picture=False)
    assert os.listdir(out) == ["todo.txt"]
    # a report.json that is not ours is not ours either
    (out / "todo.txt").unlink()
    (out / "report.json").write_text('{"something": "else"}')
    with pytest.raises(BeamshotError, match="not a beamshot report"):
        write_report(reports[0], out, picture=False)
    assert _ours(tmp_path) == []


def test_the_current_folder_is_never_swapped(tmp_path, reports, monkeypatch):
    out = tmp_path / "X"
    out.mkdir()
    monkeypatch.chdir(out)
    with pytest.raises(BeamshotError, match="current folder"):
        write_report(reports[0], ".", picture=False)
    assert os.listdir(out) == [] and _ours(tmp_path) == []


def unwritable_folder() -> str:
    """A folder this process cannot create entries in: /sys refuses them even to root (EPERM)."""
    try:
        os.mkdir("/sys/.beamshot-probe")
    except OSError as exc:
        if isinstance(exc, PermissionError):
            return "/sys"
        pytest.skip(f"no read-only folder found ({exc})")
    os.rmdir("/sys/.beamshot-probe")
    pytest.skip("/sys is writable here")


def test_unwritable_out_is_one_line_naming_the_fix(reports):
    unwritable_folder()
    with pytest.raises(BeamshotError, match="choose a folder you can write to") as info:
        write_report(reports[0], "/sys/beamshot-test-out", picture=False)
    assert "\n" not in str(info.value)


def test_died_between_the_two_renames_is_put_right(tmp_path, reports):
    out = tmp_path / "X"
    write_report(reports[0], out, picture=False)
    key = output.output_key(out)
    aside = tmp_path / f".beamshot-old-{key}-999999-0123abcd"
    os.rename(out, aside)  # the first rename of the fallback swap done, the second never happened
    output._tidy(str(tmp_path), key, str(out))
    assert sorted(os.listdir(out)) == ["intensity-map.npz", "profile.csv", "report.html", "report.json"] and _ours(tmp_path) == []
    # and when the new set already stands, a set-aside old one is removed by the next run
    shutil.copytree(out, aside)
    write_report(reports[1], out, picture=False)
    assert _ours(tmp_path) == []
    assert json.loads((out / "report.json").read_text())["inputs"][0]["sha256"] == reports[1].inputs[0]["sha256"]


def test_stale_leftovers_are_cleaned_ours_by_name_only(tmp_path, reports):
    out = tmp_path / "X"
    key = output.output_key(out)
    other = "0" * 12 if key != "0" * 12 else "1" * 12
    same_key_tmp = tmp_path / f".beamshot-tmp-{key}-999999-00000000"  # a run for X that died
    old_other = tmp_path / f".beamshot-tmp-{other}-999999-00000001"  # another output, two days old
    fresh_other = tmp_path / f".beamshot-tmp-{other}-999999-00000002"  # another output, maybe running
    not_ours = tmp_path / ".beamshot-notes"
    for p in (same_key_tmp, old_other, fresh_other, not_ours):
        p.mkdir()
    two_days = time.time() - 2 * 24 * 3600
    os.utime(old_other, (two_days, two_days))
    os.utime(not_ours, (two_days, two_days))
    write_report(reports[0], out, picture=False)
    assert _ours(tmp_path) == sorted([fresh_other.name, not_ours.name])


def test_second_writer_waits_then_wins_or_is_refused(tmp_path, reports, monkeypatch):
    fcntl = pytest.importorskip("fcntl")
    out = tmp_path / "X"
    write_report(reports[0], out, picture=False)
    lock = tmp_path / f".beamshot-lock-{output.output_key(out)}"
    fd = os.open(lock, os.O_RDWR | os.O_CREAT)
    fcntl.flock(fd, fcntl.LOCK_EX)  # another run is writing X
    try:
        monkeypatch.setattr(output, "LOCK_WAIT_S", 0.3)
        with pytest.raises(BeamshotError, match="another beamshot run is writing"):
            write_report(reports[1], out, picture=False)
        monkeypatch.setattr(output, "LOCK_WAIT_S", 10.0)
        threading.Timer(0.4, lambda: (os.remove(lock), fcntl.flock(fd, fcntl.LOCK_UN))).start()
        write_report(reports[1], out, picture=False)  # waits for the first, then replaces its set
    finally:
        time.sleep(0.5)
        os.close(fd)
    assert json.loads((out / "report.json").read_text())["inputs"][0]["sha256"] == reports[1].inputs[0]["sha256"]
    assert _ours(tmp_path) == []


def test_sigterm_while_writing_leaves_the_old_set_and_no_leftovers(tmp_path, reports, monkeypatch):
    from beamshot.report import beam_picture

    handler_before = signal.getsignal(signal.SIGTERM)
    out = tmp_path / "X"
    write_report(reports[0], out, picture=False)
    before = (out / "report.json").read_bytes()

    def killed_while_drawing(report, **_):
        os.kill(os.getpid(), signal.SIGTERM)
        time.sleep(2.0)  # the handler raises during the sleep
        raise AssertionError("SIGTERM was not turned into an exception")

    monkeypatch.setattr(beam_picture, "draw_beam_picture", killed_while_drawing)
    with pytest.raises(output.Terminated):
        write_report(reports[1], out)
    assert (out / "report.json").read_bytes() == before and _ours(tmp_path) == []
    assert signal.getsignal(signal.SIGTERM) is handler_before  # the handler was put back


# ---------------------------------------------------------------- the kill test

def _set_of(folder) -> dict | None:
    """What a folder holds: the three files' bytes, or None when one is missing."""
    try:
        return {name: (folder / name).read_bytes() for name in PLAIN_FILES}
    except (FileNotFoundError, NotADirectoryError):
        return None


def _beamshot(args, env=None, **kw):
    return subprocess.Popen([sys.executable, "-m", "beamshot", *args], env={**os.environ, **(env or {})},
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, **kw)


def test_kill_at_random_moments_leaves_old_or_new_set(tmp_path, two_photos):
    photo_old, photo_new = (str(p) for p in two_photos)
    parent = tmp_path / "work"
    parent.mkdir()
    out = parent / "X"
    args_new = ["analyze", photo_new, "--distance", "5", "--lux", "480", "--out", str(out)]

    # the older report; then a run that is not killed, timed with warm caches (kills are spread over
    # a whole run's duration)
    assert _beamshot(["analyze", photo_old, "--distance", "5", "--lux", "480", "--out", str(out)]).wait() == 0
    t0 = time.perf_counter()
    assert _beamshot(["analyze", photo_new, "--distance", "5", "--out", str(tmp_path / "timed")]).wait() == 0
    run_s = time.perf_counter() - t0
    pristine = tmp_path / "pristine"
    shutil.copytree(out, pristine)
    old = _set_of(pristine)
    sha_new = hashlib.sha256(open(photo_new, "rb").read()).hexdigest()

    def is_new(s):
        """All three files of one new run, each complete: report.json of the new photo, a whole CSV
        and a whole PNG, none of them the old file (checked by content, not against a reference
        run, so that the test holds while the plotting code changes)."""
        if s is None or any(s[k] == old[k] for k in PLAIN_FILES):
            return False
        try:
            rep = json.loads(s["report.json"])
        except ValueError:
            return False
        rows = s["profile.csv"].decode().splitlines()
        return (rep["inputs"][0]["sha256"] == sha_new and s["profile.csv"].endswith(b"\n")
                and len(rows) == len(old["profile.csv"].decode().splitlines())
                and s["beam.png"].startswith(b"\x89PNG\r\n\x1a\n") and s["beam.png"].endswith(b"IEND\xaeB`\x82"))

    rng = random.Random(SEED)
    # stratified random moments: one in each of KILLS equal slices of the run (plus 5 %), in random order
    delays = [(k + rng.random()) / KILLS * 1.05 * run_s for k in range(KILLS)]
    rng.shuffle(delays)
    counts = {"old": 0, "new": 0, "between renames (old set aside)": 0, "leftovers before the next run": 0,
              "in the writing phase": 0, "SIGTERM handled (exit 143)": 0}
    for i in range(KILLS):
        if os.path.lexists(out):
            shutil.rmtree(out)
        shutil.copytree(pristine, out)
        env = {"BEAMSHOT_SWAP": "rename"} if i % 2 else {}
        sig = signal.SIGTERM if i % 4 == 3 else signal.SIGKILL
        proc = _beamshot(args_new, env=env)
        time.sleep(delays[i])
        if proc.poll() is None:
            proc.send_signal(sig)
        rc = proc.wait()
        stderr = proc.stderr.read().decode()
        proc.stderr.close()
        assert "Traceback" not in stderr, stderr
        left = _ours(parent)
        now = _set_of(out)
        if now == old:
            counts["old"] += 1
        elif is_new(now):
            counts["new"] += 1
        else:
            # only the fallback swap has a moment with no X: the old set must be whole, set aside
            assert now is None and env, (f"kill {i}: X holds a mix or a partial set: "
                                         f"{ {k: now[k] == old[k] for k in now} } (True: the old file)")
            asides = [n for n in left if n.startswith(".beamshot-old-")]
            assert len(asides) == 1 and _set_of(parent / asides[0]) == old
            counts["between renames (old set aside)"] += 1
        if rc == 143:
            counts["SIGTERM handled (exit 143)"] += 1
            assert left == [], f"kill {i}: a SIGTERM'd run left {left}"
        if left or rc == 143 or (is_new(now) and rc != 0):  # lock or folder of ours, SIGTERM caught, or after the swap
            counts["in the writing phase"] += 1
        if left:
            counts["leftovers before the next run"] += 1
            # the next normal run puts things right and leaves nothing of its own
            assert _beamshot(args_new).wait() == 0
            assert _ours(parent) == [] and is_new(_set_of(out))
    print(f"\nkill test: {KILLS} kills over runs of {run_s:.1f} s: {counts}")
    assert counts["in the writing phase"] >= 1, counts


def test_a_replaced_set_keeps_the_folders_permissions(tmp_path, reports):
    # the swap puts a new folder in place; it takes the old folder's mode (POSIX permission bits)
    import stat

    out = tmp_path / "private"
    write_report(reports[0], out, picture=False)
    os.chmod(out, 0o700)
    write_report(reports[1], out, picture=False)
    assert stat.S_IMODE(os.stat(out).st_mode) == 0o700
