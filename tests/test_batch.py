"""`beamshot batch`: manifests (CSV, TOML), broken rows, resume, kill-and-resume, local pool vs Dask.

The photos are small synthetic beams (300x225, beamshot.synth) and pictures are off where they do
not matter, so the whole file runs in about a minute on two cores.
"""

from __future__ import annotations

import csv
import json
import math
import os
import shutil
import random
import signal
import subprocess
import sys
import time

import pytest
from click.testing import CliRunner

from beamshot.batch import (COLUMNS, JOURNAL_ENV, STATUS_DONE, STATUS_FAILED, STATUS_SKIPPED, Task, marker_key,
                            read_manifest, run_batch, run_item)
from beamshot.batch_cli import batch
from beamshot.errors import BeamshotError
from beamshot.request import Request
from beamshot.synth import HotspotSpillBeam, encode_jpeg, render_photo
from beamshot.vocabulary import FIGURES

from conftest import make_shot

#: ANSI/PLATO FL 1: beam distance is where the peak intensity gives 0.25 lx, d = sqrt(I / 0.25 lx).
FL1_LUX = 0.25
W, H = 300, 225


@pytest.fixture(scope="module")
def shots(tmp_path_factory):
    """Two small beam photos (a reflector beam and a wider one) and their ground truth."""
    folder = tmp_path_factory.mktemp("batch-photos")
    out = {}
    for name, pattern, seed in (
            ("narrow.jpg", HotspotSpillBeam(peak_cd=12000.0, hotspot_fwhm_deg=8.0, spill_fraction=0.02,
                                            cutoff_deg=30.0, edge_width_deg=0.6), 1),
            ("wide.jpg", HotspotSpillBeam(peak_cd=3000.0, hotspot_fwhm_deg=14.0, spill_fraction=0.05,
                                          cutoff_deg=35.0, edge_width_deg=0.6), 2)):
        scene, cam, truth = make_shot(pattern, width_px=W, height_px=H)
        (folder / name).write_bytes(encode_jpeg(render_photo(pattern, scene, cam, seed=seed), cam))
        out[name] = truth
    return folder, out


CSV_ROWS = """name,photos,distance_m,lux,meter_accuracy_percent,square
prototype 1,narrow.jpg,5,,,
prototype 2,narrow.jpg,4.5,300,3,
,wide.jpg,5,,,true
"""

TOML_ROWS = """[[item]]
name = "prototype 1"
photos = ["narrow.jpg"]
distance_m = 5

[[item]]
name = "prototype 2"
photos = "narrow.jpg"
distance_m = 4.5
lux = 300
meter_accuracy_percent = 3

[[item]]
photos = ["wide.jpg"]
distance_m = 5.0
square = true
"""


def _summary(out) -> list[dict]:
    with open(os.path.join(out, "summary.json"), encoding="utf-8") as fh:
        return json.load(fh)["items"]


def _figures(out) -> list[tuple]:
    """What must not depend on how the batch ran: name, row, key, folder and every figure."""
    return [(r["name"], r["row"], r["key"], r["folder"], r["figures"]) for r in _summary(out)]


@pytest.fixture(scope="module")
def local_run(shots, tmp_path_factory):
    """The CSV manifest run through the command with 2 local workers (pictures off)."""
    folder, _ = shots
    (folder / "three.csv").write_text(CSV_ROWS)
    out = tmp_path_factory.mktemp("local") / "out"
    res = CliRunner().invoke(batch, [str(folder / "three.csv"), "--out", str(out), "--workers", "2",
                                     "--pictures", "none"])
    assert res.exit_code == 0, res.output
    return out


def test_csv_batch_figures_follow_the_inputs(local_run, shots):
    """The batch's figures: done for every row, the lux-scaled row's peak from E D^2, the angles near
    the synthetic truth."""
    _, truth = shots
    rows = _summary(local_run)
    assert [r["status"] for r in rows] == [STATUS_DONE] * 3
    assert [r["name"] for r in rows] == ["prototype 1", "prototype 2", "wide.jpg"]
    p2 = rows[1]["figures"]
    # inverse-square law at the peak, I = E D^2 (ANSI/PLATO FL 1 peak beam intensity from a lux reading)
    assert p2["peak_intensity"]["value"] == pytest.approx(300 * 4.5 ** 2, rel=1e-4)
    assert p2["peak_intensity"]["status"] == "measured"
    # ANSI/PLATO FL 1 beam distance, sqrt(I / 0.25 lx)
    assert p2["beam_distance"]["value"] == pytest.approx(math.sqrt(300 * 4.5 ** 2 / FL1_LUX), rel=1e-4)
    # the hotspot angle of the rendered beams (IES 50 % full angle; the synthetic ground truth) within 3 sigma
    for r, name in ((rows[0], "narrow.jpg"), (rows[2], "wide.jpg")):
        f = r["figures"]["hotspot_angle"]
        assert abs(f["value"] - truth[name]["hotspot_angle_deg"]) < 3 * f["uncertainty"], (name, f)
    # every figure of the vocabulary is a column, and each report set is whole (pictures off: no beam.png)
    header = (local_run / "summary.csv").read_text(encoding="utf-8").splitlines()[0].split(",")
    for key in FIGURES:
        assert {key, f"{key}_uncertainty", f"{key}_unit", f"{key}_status"} <= set(header)
    for r in rows:
        assert sorted(os.listdir(os.path.join(local_run, r["folder"]))) == ["intensity-map.npz", "profile.csv", "report.html", "report.json"]


def test_compare_after_the_batch_uses_every_item_with_a_report(local_run, shots, tmp_path):
    # the batch run again with --compare: nothing analysed again, the three items compared by name
    folder, _ = shots
    out = tmp_path / "out"
    shutil.copytree(local_run, out)
    res = CliRunner().invoke(batch, [str(folder / "three.csv"), "--out", str(out), "--pictures", "none", "--compare"])
    assert res.exit_code == 0, res.output
    assert "3 skipped" in res.output and "sheet.png" in res.output
    data = json.loads((out / "comparison" / "comparison.json").read_text(encoding="utf-8"))
    assert [x["label"] for x in data["lights"]] == ["prototype 1", "prototype 2", "wide.jpg"]
    # one item is not a comparison: refused in one line, exit 2, the batch itself done
    (folder / "one.csv").write_text("photos,distance_m\nnarrow.jpg,5\n")
    res = CliRunner().invoke(batch, [str(folder / "one.csv"), "--out", str(tmp_path / "one"), "--pictures", "none",
                                     "--compare"])
    assert res.exit_code == 2 and "--compare: 1 item(s) have a report set" in res.output
    assert (tmp_path / "one" / "summary.csv").exists()


def test_toml_gives_the_same_summary_as_csv(local_run, shots, tmp_path):
    folder, _ = shots
    (folder / "three.toml").write_text(TOML_ROWS)
    out = tmp_path / "out"
    res = run_batch(folder / "three.toml", out, workers=2, pictures=False)
    assert res.failed == 0
    assert _figures(out) == _figures(local_run)


def test_one_and_two_workers_give_identical_results(local_run, shots, tmp_path):
    folder, _ = shots
    out = tmp_path / "out"
    run_batch(folder / "three.csv", out, workers=1, pictures=False)
    assert _figures(out) == _figures(local_run)
    for r in _summary(out):  # the whole figure records, budgets included, not only the summary's columns
        with open(os.path.join(out, r["folder"], "report.json")) as a, \
                open(os.path.join(local_run, r["folder"], "report.json")) as b:
            assert json.load(a)["figures"] == json.load(b)["figures"]


def test_dask_cluster_gives_the_local_pool_results(local_run, shots, tmp_path):
    distributed = pytest.importorskip("distributed", reason="the 'distributed' package (beamshot[cluster], in the "
                                      "test extra) is not installed")
    folder, _ = shots
    out = tmp_path / "out"
    with distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1, dashboard_address=None) \
            as cluster:
        res = run_batch(folder / "three.csv", out, scheduler=cluster.scheduler_address, pictures=False)
    assert res.failed == 0 and res.count(STATUS_DONE) == 3
    assert {o.pid for o in res.outcomes.values()} - {os.getpid()}  # ran in the cluster's worker processes
    assert _figures(out) == _figures(local_run)


def test_broken_rows_fail_alone(shots, tmp_path):
    folder, _ = shots
    manifest = tmp_path / "broken.csv"
    manifest.write_text(f"name,photos,distance_m,meter_accuracy_percent\nprototype 1,{folder / 'narrow.jpg'},5\n"
                        f"prototype 2,{folder / 'missing.jpg'},5\nprototype 3,{folder / 'narrow.jpg'},0\n"
                        f"prototype 4,{folder / 'wide.jpg'},five\nprototype 5,{folder / 'wide.jpg'},5\n"
                        f"prototype 6,{folder / 'wide.jpg'},5,0.05\n")
    out = tmp_path / "out"
    res = CliRunner().invoke(batch, [str(manifest), "--out", str(out), "--pictures", "none"])
    assert res.exit_code == 2
    assert f"4 of 6 items failed: see {out / 'summary.csv'}" in res.output
    rows = {r["name"]: r for r in csv.DictReader((out / "summary.csv").read_text(encoding="utf-8").splitlines())}
    assert [rows[f"prototype {i}"]["status"] for i in range(1, 7)] == \
        [STATUS_DONE, STATUS_FAILED, STATUS_FAILED, STATUS_FAILED, STATUS_DONE, STATUS_FAILED]
    assert "missing.jpg: no such file" in rows["prototype 2"]["reason"]
    assert "distance must be a finite positive number, not 0 m" in rows["prototype 3"]["reason"]
    assert "distance_m 'five' is not a number" in rows["prototype 4"]["reason"]
    assert "0.05 looks like a fraction; write 5 for +/-5 %" in rows["prototype 6"]["reason"]
    for r in rows.values():
        assert "\n" not in r["reason"]
        assert (r["peak_intensity"] != "") == (r["status"] == STATUS_DONE)


def test_unknown_column_is_refused_in_one_line(shots, tmp_path):
    folder, _ = shots
    manifest = tmp_path / "m.csv"
    manifest.write_text(f"photos,distance_m,paint\n{folder / 'narrow.jpg'},5,red\n")  # (colour is a column now)
    with pytest.raises(BeamshotError, match="unknown column 'paint'; the known columns are photos, distance_m") as e:
        read_manifest(manifest)
    assert "\n" not in str(e.value) and all(c in str(e.value) for c in COLUMNS)
    (tmp_path / "m.toml").write_text('[[item]]\nphotos = "a.jpg"\ndistance_m = 5\nfocal = 26\n')
    with pytest.raises(BeamshotError, match="unknown column 'focal'"):
        read_manifest(tmp_path / "m.toml")
    # through the command: nothing is run and nothing written
    res = CliRunner().invoke(batch, [str(manifest), "--out", str(tmp_path / "out")])
    assert isinstance(res.exception, BeamshotError) and not (tmp_path / "out").exists()


def test_command_exit_codes_through_the_beamshot_group(shots, tmp_path):
    """Run alone (python -m beamshot.batch_cli), an input problem is one line and exit 2."""
    from beamshot.batch_cli import main

    (tmp_path / "m.csv").write_text("photos,distance_m,colour\na.jpg,5,red\n")
    assert main([str(tmp_path / "m.csv"), "--out", str(tmp_path / "out")]) == 2
    assert main([str(tmp_path / "m.csv"), "--out", str(tmp_path / "o"), "--workers", "2",
                 "--scheduler", "tcp://127.0.0.1:1"]) == 2


def test_resume_skips_done_items_and_redoes_a_changed_row(shots, tmp_path):
    folder, _ = shots
    manifest = folder / "resume.csv"
    manifest.write_text("name,photos,distance_m\nprototype 1,narrow.jpg,5\nprototype 2,wide.jpg,5\n"
                        "prototype 3,narrow.jpg,6\n")
    out = tmp_path / "out"
    first = run_batch(manifest, out, workers=2, pictures=False)
    assert first.count(STATUS_DONE) == 3
    first_figures = _figures(out)
    stamps = {it.row: os.stat(os.path.join(it.folder, "report.json")).st_mtime_ns for it in first.items}
    again = run_batch(manifest, out, workers=2, pictures=False)
    assert [again.outcomes[r].status for r in (1, 2, 3)] == [STATUS_SKIPPED] * 3
    assert {it.row: os.stat(os.path.join(it.folder, "report.json")).st_mtime_ns for it in again.items} == stamps
    assert _figures(out) == first_figures  # the skipped items' figures are read back from their reports
    manifest.write_text("name,photos,distance_m\nprototype 1,narrow.jpg,5\nprototype 2,wide.jpg,5.5\n"
                        "prototype 3,narrow.jpg,6\n")
    changed = run_batch(manifest, out, workers=2, pictures=False)
    assert [changed.outcomes[r].status for r in (1, 2, 3)] == [STATUS_SKIPPED, STATUS_DONE, STATUS_SKIPPED]
    # a report set deleted by hand: its marker no longer counts, the item is done again
    import shutil

    shutil.rmtree(changed.items[2].folder)
    redo = run_batch(manifest, out, workers=1, pictures=False)
    assert [redo.outcomes[r].status for r in (1, 2, 3)] == [STATUS_SKIPPED, STATUS_SKIPPED, STATUS_DONE]
    assert marker_key(changed.items[2].marker) == changed.items[2].key
    p2 = _summary(out)[1]["figures"]["peak_intensity"]
    with open(os.path.join(first.items[1].folder, "report.json"), encoding="utf-8") as fh:
        old = json.load(fh)["figures"]["peak_intensity"]
    # same photo, exposure-metadata scale: I = E D^2 scales with the distance squared (inverse-square law)
    assert p2["value"] == pytest.approx(old["value"] * (5.5 / 5.0) ** 2, rel=1e-3)


def test_internal_error_in_a_worker_is_caught_for_that_item(tmp_path):
    """A fault inside the analysis (here a photo that is neither a path nor a Photo) fails that item
    with its message; the worker does not raise."""
    req = Request.from_options(12345, distance_m=5.0)
    folder = str(tmp_path / "items" / "x-000")
    os.makedirs(tmp_path / "items")
    o = run_item(Task(1, "x", "k" * 64, folder, folder + ".done.json", req, False))
    assert o.status == STATUS_FAILED and o.reason.startswith("internal error (TypeError")
    assert "Traceback" in o.details and not os.path.exists(folder + ".done.json")


KILL_ITEMS = 12
KILLS = 3


def test_killed_three_times_and_resumed_does_every_item_once(shots, tmp_path):
    folder, _ = shots
    lines = ["name,photos,distance_m"] + [f"unit {i:02d},{'narrow' if i % 2 else 'wide'}.jpg,{4 + 0.25 * i:g}"
                                          for i in range(KILL_ITEMS)]
    manifest = folder / "twelve.csv"
    manifest.write_text("\n".join(lines) + "\n")
    out = tmp_path / "out"
    journal = tmp_path / "journal.txt"
    env = dict(os.environ, **{JOURNAL_ENV: str(journal)})
    cmd = [sys.executable, "-m", "beamshot.batch_cli", str(manifest), "--out", str(out), "--workers", "2",
           "--pictures", "none"]
    rng = random.Random(12)  # fixed seed: how far each run gets before it is killed

    def journal_lines():
        return len(journal.read_text().splitlines()) if journal.exists() else 0

    codes = []
    for _ in range(KILLS):
        # kill after 1-6 more worker events (start/written/done: within the first two or three items)
        # plus up to 0.3 s, so that kills land while items are being analysed or written (an item takes
        # about 0.25 s without pictures: a longer wait let the third run finish before its kill)
        target = journal_lines() + rng.randint(1, 6)
        proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        deadline = time.monotonic() + 120
        while journal_lines() < target and proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.02)
        time.sleep(rng.uniform(0.0, 0.3))
        proc.send_signal(signal.SIGKILL)  # the batch's main process only: its workers must die with it
        codes.append(proc.wait())
    final = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=240)
    assert final.returncode == 0, final.stderr
    assert codes == [-signal.SIGKILL] * KILLS  # each run was killed before it finished
    time.sleep(0.5)  # a worker left behind by a killed run would write after this
    events = [ln.split() for ln in journal.read_text().splitlines()]
    rows = _summary(out)
    assert len(rows) == KILL_ITEMS and {r["status"] for r in rows} <= {STATUS_DONE, STATUS_SKIPPED}
    items = os.path.join(out, "items")
    for r in rows:
        key = r["key"]
        assert marker_key(os.path.join(out, r["folder"]) + ".done.json") == key
        mine = [e[1] for e in events if e[0] == key]
        assert mine.count("done") <= 1 and "again" not in mine, (r["name"], mine)
        if "done" in mine:  # nothing started on an item after it was done
            assert "start" not in mine[mine.index("done"):], (r["name"], mine)
        assert mine.count("start") >= 1
        # one whole set from one run: only our files, written together (a mix would span runs, seconds apart)
        path = os.path.join(out, r["folder"])
        assert sorted(os.listdir(path)) == ["intensity-map.npz", "profile.csv", "report.html", "report.json"]
        times = [os.stat(os.path.join(path, n)).st_mtime for n in ("profile.csv", "report.json")]
        assert max(times) - min(times) < 1.5  # a restarted run needs longer than this to write again
        assert r["figures"]["hotspot_angle"]["value"] is not None
    leftovers = [n for n in os.listdir(items) if n.startswith((".beamshot-tmp-", ".beamshot-old-"))
                 or n.endswith(".tmp")]
    assert leftovers == []
    assert len([n for n in os.listdir(items) if n.endswith(".done.json")]) == KILL_ITEMS
    # the kills interrupted work: some item was started again after a kill (redone whole)
    assert sum(1 for e in events if e[1] == "start") > KILL_ITEMS
    # a last run: everything is already done
    again = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=120)
    assert again.returncode == 0 and f"{KILL_ITEMS} already done (skipped), nothing to analyse" in again.stderr


def test_the_documented_example_manifests_describe_the_same_batch(shots, tmp_path):
    """docs/examples/batch-manifest.csv and .toml: every row plans (valid options), and the two give
    the same items (same keys), once the photos they name exist."""
    from beamshot.batch import plan

    folder, _ = shots
    docs = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "docs", "examples")
    keys = []
    for ext in ("csv", "toml"):
        with open(os.path.join(docs, f"batch-manifest.{ext}"), encoding="utf-8") as fh:
            text = fh.read()
        (tmp_path / f"m.{ext}").write_text(text)
        for r in read_manifest(tmp_path / f"m.{ext}"):
            photos = r.values["photos"]
            for p in (photos if isinstance(photos, list) else photos.split(";")) + \
                    [r.values[c] for c in ("ambient",) if c in r.values]:
                (tmp_path / p).parent.mkdir(parents=True, exist_ok=True)
                (tmp_path / p).write_bytes((folder / "narrow.jpg").read_bytes())
        items = plan(tmp_path / f"m.{ext}", tmp_path / "out")
        assert [it.error for it in items] == [None] * 3
        keys.append([(it.name, it.key) for it in items])
    assert keys[0] == keys[1]


def test_scheduler_problems_stop_the_batch_in_one_line(shots, tmp_path, monkeypatch):
    """Without the distributed package, or with a scheduler that cannot be reached, nothing runs."""
    folder, _ = shots
    manifest = tmp_path / "m.csv"
    manifest.write_text(f"photos,distance_m\n{folder / 'narrow.jpg'},5\n")
    monkeypatch.setitem(sys.modules, "distributed", None)  # import distributed -> ImportError
    with pytest.raises(BeamshotError, match=r"pip install beamshot\[cluster\]"):
        run_batch(manifest, tmp_path / "out", scheduler="tcp://127.0.0.1:1")
    monkeypatch.undo()
    distributed = pytest.importorskip("distributed", reason="the 'distributed' package is not installed")

    def refuse(address, **kw):
        raise OSError(f"Timed out trying to connect to {address}")

    monkeypatch.setattr(distributed, "Client", refuse)
    with pytest.raises(BeamshotError, match="cannot reach the Dask scheduler at tcp://127.0.0.1:1"):
        run_batch(manifest, tmp_path / "out", scheduler="tcp://127.0.0.1:1")
    assert not os.path.exists(tmp_path / "out" / "summary.csv")
