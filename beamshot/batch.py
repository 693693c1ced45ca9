"""Many analyses from one manifest: planned, keyed, run on local processes or a Dask cluster, resumable.

- :func:`read_manifest` reads a CSV or TOML manifest (one analysis per row; :data:`COLUMNS`).
- :func:`plan` turns each row into a :class:`~beamshot.request.Request` (``Request.from_options``,
  the same path as ``beamshot analyze``) and an :class:`Item` with its key: the SHA-256 of the input
  files' bytes and the normalised options.
- :func:`run_batch` analyses the items not yet done, on a local process pool (one worker per core) or,
  given a scheduler address, on an existing Dask ``distributed`` cluster; then writes the summary.
- :func:`run_item` is what a worker does for one item: analyse, write the report set
  (:func:`beamshot.report.output.write_report`, whole-set replacement), then make the item's
  done-marker.

Layout of the output folder ``DIR``::

    DIR/summary.csv, DIR/summary.json      every item: status, reason, each figure
    DIR/items/<name-or-row>-<key12>/       report.json, report.html, beam.png, profile.csv, intensity-map.npz (one set)
    DIR/items/<name-or-row>-<key12>.done.json   the done-marker, holding the item's full key

Exactly once: an item counts as done when its marker exists and holds its key.  The marker is made
after the report set is in place, from a complete temporary file, by ``os.link`` - an atomic step
that fails when the marker already exists - so a completed item is never completed a second time,
and an item killed before its marker is redone whole on the next run.
"""

from __future__ import annotations

import contextlib
import csv
import hashlib
import io
import json
import os
import re
import secrets
import sys
import time
import traceback
from dataclasses import dataclass, field

from . import __version__
from .errors import BeamshotError, read_user_file

__all__ = ["COLUMNS", "KEY_FORMAT", "STATUS_DONE", "STATUS_SKIPPED", "STATUS_FAILED", "JOURNAL_ENV", "Row",
           "Item", "Task", "Outcome", "BatchResult", "read_manifest", "plan", "run_batch", "run_item",
           "summary_rows", "write_summary", "default_workers"]

#: Manifest columns (CSV header names, TOML keys) and what each holds.
COLUMNS: dict[str, str] = {
    "photos": "beam photo(s): several are a bracket (CSV: separated by ';'; TOML: a list)",
    "distance_m": "light-to-wall distance, m (required)",
    "ambient": "photo with the light off",
    "dark": "dark frame (lens capped)",
    "flat": "photo of an evenly lit white target",
    "lux": "lux-meter reading on the wall, lx (at the peak, or at lux_at)",
    "lux_at": "where the meter was held: X,Y pixel of the first beam photo",
    "camera": "camera profile: a name or a JSON file",
    "name": "the light's name (titles, reports, the item's folder)",
    "distance_uncertainty_m": "standard uncertainty of the distance, m",
    "camera_distance_m": "camera-to-wall distance, m, if the camera is not beside the light",
    "meter_accuracy_percent": "the lux meter's specified accuracy, +/- percent",
    "response": "tone curve: srgb, linear, s-curve or gamma:G",
    "focal_35mm": "35 mm-equivalent focal length, mm, if EXIF lacks it",
    "hfov_deg": "horizontal field of view, degrees",
    "geometry": "photo of the printed wall target",
    "wall_points": "four or more wall points 'x,y=X,Y;...' or a JSON file",
    "scale_bar_mm": "measured length of the target's 100 mm scale bar, mm",
    "square": "the light is square to the wall (true/false)",
    "head_diameter_mm": "diameter of the light's head, mm (far-field warning)",
    "reflectance": "wall reflectance for the exposure-metadata estimate",
    "no_exif_scale": "keep figures relative without a lux reading (true/false)",
    "colour": "also measure colour across the beam (true/false; docs/colour.md)",
}
_PATH_COLUMNS = ("ambient", "dark", "flat", "geometry")
_FLOAT_COLUMNS = ("distance_m", "lux", "distance_uncertainty_m", "camera_distance_m", "meter_accuracy_percent",
                  "focal_35mm", "hfov_deg", "scale_bar_mm", "head_diameter_mm", "reflectance")
_BOOL_COLUMNS = ("square", "no_exif_scale", "colour")
_TRUE = ("true", "yes", "1", "y")
_FALSE = ("false", "no", "0", "n", "")

#: Bumped when the meaning of a key changes (old markers then no longer match).
KEY_FORMAT = 1
STATUS_DONE = "done"
STATUS_SKIPPED = "skipped-already-done"
STATUS_FAILED = "failed"
#: Diagnostics (the kill test): a file to which each worker appends "<key> <event> <pid>" lines
#: (events: start, written, done, again) with O_APPEND, one write per line.
JOURNAL_ENV = "BEAMSHOT_BATCH_JOURNAL"
_HASH_CHUNK = 1 << 20
_LOCK_NAME = ".beamshot-batch-lock"


# ---------------------------------------------------------------- the manifest

@dataclass(frozen=True)
class Row:
    """One manifest row: its number (1 = the first item) and its values as given (strings in CSV)."""

    row: int
    values: dict


def read_manifest(path) -> list[Row]:
    """The rows of a CSV (``.csv``) or TOML (``.toml``) manifest.  Refuses, in one line, a manifest
    that cannot be read, has no rows, or names a column that is not in :data:`COLUMNS`."""
    path = os.fspath(path)
    raw = read_user_file(path, "give the manifest file (.csv or .toml)")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise BeamshotError(f"{path}: not a text file; give a CSV or TOML manifest (see docs/batch.md)") from None
    ext = os.path.splitext(path)[1].lower()
    if ext == ".toml":
        rows = _toml_rows(path, text)
    elif ext in (".csv", ".txt"):
        rows = _csv_rows(path, text)
    else:
        raise BeamshotError(f"{path}: the manifest must end in .csv or .toml (see docs/batch.md)")
    if not rows:
        raise BeamshotError(f"{path}: the manifest lists no items; add one row per analysis (see docs/batch.md)")
    for r in rows:
        unknown = [k for k in r.values if k not in COLUMNS]
        if unknown:
            raise BeamshotError(f"{path}: unknown column {unknown[0]!r}; the known columns are "
                                + ", ".join(COLUMNS))
    return rows


def _csv_rows(path: str, text: str) -> list[Row]:
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        header = next(reader, None)
        if header is None:
            return []
        header = [h.strip() for h in header]
        unknown = [h for h in header if h not in COLUMNS]
        if unknown:
            shown = unknown[0] if unknown[0] else "(an empty header cell)"
            raise BeamshotError(f"{path}: unknown column {shown!r}; the known columns are " + ", ".join(COLUMNS))
        dup = sorted({h for h in header if header.count(h) > 1})
        if dup:
            raise BeamshotError(f"{path}: column {dup[0]!r} appears twice in the header; keep one")
        rows = []
        for cells in reader:
            if not any(c.strip() for c in cells):
                continue  # blank line
            if len(cells) > len(header):
                raise BeamshotError(f"{path}: line {reader.line_num} has {len(cells)} cells, the header "
                                    f"{len(header)}; quote cells that hold commas (\"x,y\")")
            values = {h: c.strip() for h, c in zip(header, cells) if c.strip() != ""}
            rows.append(Row(len(rows) + 1, values))
        return rows
    except csv.Error as exc:
        raise BeamshotError(f"{path}: not a readable CSV file ({exc}); see docs/batch.md") from None


def _toml_rows(path: str, text: str) -> list[Row]:
    try:
        import tomllib
    except ImportError:  # Python 3.10
        try:
            import tomli as tomllib
        except ImportError:
            raise BeamshotError("TOML manifests need Python 3.11 or the 'tomli' package (pip install tomli); "
                                "or write the manifest as CSV") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise BeamshotError(f"{path}: not valid TOML ({exc}); see docs/batch.md") from None
    other = [k for k in data if k != "item"]
    if other:
        raise BeamshotError(f"{path}: unknown table or key {other[0]!r} at the top; list the analyses as "
                            "[[item]] tables (see docs/batch.md)")
    items = data.get("item", [])
    if not isinstance(items, list) or not all(isinstance(i, dict) for i in items):
        raise BeamshotError(f"{path}: 'item' must be an array of tables ([[item]]); see docs/batch.md")
    return [Row(i + 1, dict(values)) for i, values in enumerate(items)]


# ---------------------------------------------------------------- planning: rows -> items with keys

@dataclass(frozen=True)
class Item:
    """One analysis of the batch.  ``error`` is set when the row cannot become a valid request."""

    row: int
    name: str
    key: str
    folder: str
    marker: str
    request: object = None
    error: str | None = None
    already_done: bool = False
    #: measure colour across the beam (the manifest's ``colour`` column)
    colour: bool = False


def _is_listlike(v) -> bool:
    return isinstance(v, (list, tuple))


class _RowError(Exception):
    pass


def _text(col: str, v) -> str:
    if isinstance(v, str):
        return v.strip()
    if isinstance(v, (bool, dict)) or _is_listlike(v):
        raise _RowError(f"{col} must be text, not {v!r}")
    return str(v)


def _float(col: str, v) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float, str)):
        raise _RowError(f"{col} must be a number, not {v!r}")
    try:
        return float(v)
    except ValueError:
        raise _RowError(f"{col} {v!r} is not a number") from None


def _bool(col: str, v) -> bool:
    if isinstance(v, bool):
        return v
    s = str(v).strip().lower()
    if s in _TRUE:
        return True
    if s in _FALSE:
        return False
    raise _RowError(f"{col} must be true or false, not {v!r}")


def _pair(col: str, v) -> tuple[float, float]:
    parts = list(v) if _is_listlike(v) else (str(v).split(",") if isinstance(v, str) else None)
    try:
        if parts is None or len(parts) != 2 or any(isinstance(p, bool) for p in parts):
            raise ValueError
        xy = tuple(float(p) for p in parts)
    except (TypeError, ValueError):
        raise _RowError(f"{col} takes X,Y in pixels of the first beam photo, e.g. \"2016,1512\", not {v!r}") from None
    return xy


def _resolve(base: str, p: str) -> str:
    return os.path.normpath(os.path.join(base, os.path.expanduser(p)))


def _file_hash(path: str, cache: dict) -> str:
    """SHA-256 of a file's bytes (cached per run); a missing or unreadable file is a row error."""
    if path in cache:
        return cache[path]
    h = hashlib.sha256()
    try:
        with open(path, "rb") as fh:
            while chunk := fh.read(_HASH_CHUNK):
                h.update(chunk)
    except FileNotFoundError:
        raise _RowError(f"{path}: no such file; check the path (relative paths start at the manifest's folder)") \
            from None
    except IsADirectoryError:
        raise _RowError(f"{path}: is a folder; give a photo file") from None
    except OSError as exc:
        raise _RowError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    cache[path] = h.hexdigest()
    return cache[path]


def _slug(text: str) -> str:
    s = re.sub(r"[^A-Za-z0-9._-]+", "-", text).strip("-.")
    return s[:40] or "item"


def _normalise(row: Row, base: str, hashes: dict, profiles: dict) -> tuple[dict, dict]:
    """A row's keyword options for ``Request.from_options`` and the plain-data record its key is made of."""
    from .camera.profile import find_profile, load_profile

    v = row.values
    kw: dict = {}
    rec: dict = {"options": {}, "files": {}}
    opt = rec["options"]
    if "photos" not in v:
        raise _RowError("no photos given; the photos column names the beam photo(s)")
    photos = v["photos"]
    names = [_text("photos", p) for p in photos] if _is_listlike(photos) else \
        [p.strip() for p in _text("photos", photos).split(";")]
    names = [p for p in names if p]
    if not names:
        raise _RowError("no photos given; the photos column names the beam photo(s)")
    paths = [_resolve(base, p) for p in names]
    rec["files"]["photos"] = [_file_hash(p, hashes) for p in paths]
    kw["photo"] = paths if len(paths) > 1 else paths[0]
    for col in _PATH_COLUMNS:
        if col in v:
            p = _resolve(base, _text(col, v[col]))
            rec["files"][col] = _file_hash(p, hashes)
            kw[col] = p
    for col in _FLOAT_COLUMNS:
        if col in v:
            opt[col] = _float(col, v[col])
    for col in _BOOL_COLUMNS:
        if col in v:
            opt[col] = _bool(col, v[col])
    for col in ("name", "response"):
        if col in v:
            opt[col] = _text(col, v[col])
    if "lux_at" in v:
        opt["lux_at"] = list(_pair("lux_at", v["lux_at"]))
    if "wall_points" in v:
        text = _text("wall_points", v["wall_points"])
        p = _resolve(base, text)
        if "=" not in text and os.path.isfile(p):
            rec["files"]["wall_points"] = _file_hash(p, hashes)
            kw["wall_points"] = p
        else:
            opt["wall_points"] = text
            kw["wall_points"] = text
    if "camera" in v:
        given = _text("camera", v["camera"])
        looks_like_file = os.path.sep in given or given.endswith(".json")
        ref = _resolve(base, given) if looks_like_file else given
        if ref not in profiles:
            profiles[ref] = load_profile(ref)  # a one-line BeamshotError if missing or bad
        kw["camera"] = profiles[ref]
        found = find_profile(ref)
        if found is not None:
            rec["files"]["camera"] = _file_hash(found, hashes)
        else:
            opt["camera"] = ref  # the built-in default profile, by name
    for col, arg in (("distance_m", "distance_m"), ("lux", "lux_at_peak"),
                     ("distance_uncertainty_m", "distance_uncertainty_m"), ("camera_distance_m", "camera_distance_m"),
                     ("focal_35mm", "focal_35mm"), ("hfov_deg", "hfov_deg"), ("head_diameter_mm", "head_diameter_mm"),
                     ("reflectance", "reflectance"), ("response", "response"), ("name", "light_name")):
        if col in opt:
            kw[arg] = opt[col]
    if "meter_accuracy_percent" in opt:
        pct = opt["meter_accuracy_percent"]
        if 0 < pct < 1:  # the analyze command reads such a value as a fraction; here it is refused
            raise _RowError(f"meter_accuracy_percent takes percent: {pct:g} looks like a fraction; "
                            f"write {100 * pct:g} for +/-{100 * pct:g} %")
        kw["lux_meter_accuracy"] = pct / 100.0
    if "scale_bar_mm" in opt:
        kw["target_scale"] = opt["scale_bar_mm"] / 100.0
    if "square" in opt:
        kw["assume_square"] = opt["square"]
    if "no_exif_scale" in opt:
        kw["use_exif_scale"] = not opt["no_exif_scale"]
    if opt.get("colour"):
        kw["colour"] = True  # for analysis.run, not the request (plan() takes it out)
    if "lux_at" in opt:
        kw["lux_point_px"] = tuple(opt["lux_at"])
    kw.setdefault("distance_m", None)
    return kw, rec


def item_key(record: dict, *, pictures: bool) -> str:
    """The item's key: SHA-256 of its normalised record (input files' hashes, options), the pictures
    choice, the key format and beamshot's version, as canonical JSON."""
    payload = {"format": KEY_FORMAT, "beamshot": __version__, "pictures": bool(pictures), **record}
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=True)
    return hashlib.sha256(text.encode("ascii")).hexdigest()


def plan(manifest, out_dir, *, pictures: bool = True) -> list[Item]:
    """Every row of the manifest as an :class:`Item`: a validated request and its key, or the one-line
    reason the row cannot run; ``already_done`` when its marker holds its key and its report is there."""
    from .request import Request

    manifest = os.fspath(manifest)
    rows = read_manifest(manifest)
    base = os.path.dirname(os.path.abspath(manifest))
    items_dir = os.path.join(os.path.abspath(os.fspath(out_dir)), "items")
    hashes: dict = {}
    profiles: dict = {}
    items: list[Item] = []
    seen: dict[str, int] = {}
    for r in rows:
        given_name = r.values.get("name")
        label = str(given_name).strip() if isinstance(given_name, (str, int, float)) and \
            not isinstance(given_name, bool) and str(given_name).strip() else None
        stem = label if label else f"row-{r.row}"
        try:
            kw, rec = _normalise(r, base, hashes, profiles)
            photo = kw.pop("photo")
            colour = bool(kw.pop("colour", False))
            request = Request.from_options(photo, **kw).validated()
        except (_RowError, BeamshotError) as exc:
            items.append(Item(r.row, label or _default_name(r), "", "", "", error=_one_line(exc)))
            continue
        key = item_key(rec, pictures=pictures)
        folder = os.path.join(items_dir, f"{_slug(stem)}-{key[:12]}")
        if folder in seen:
            items.append(Item(r.row, label or _default_name(r), key, folder, folder + ".done.json",
                              error=f"repeats row {seen[folder]} (same photos, options and name); remove one"))
            continue
        seen[folder] = r.row
        marker = folder + ".done.json"
        done = _is_done(marker, folder, key)
        items.append(Item(r.row, label or _default_name(r), key, folder, marker, request, None, done, colour))
    return items


def _default_name(r: Row) -> str:
    photos = r.values.get("photos")
    first = photos[0] if _is_listlike(photos) and photos else (photos.split(";")[0] if isinstance(photos, str) else "")
    return os.path.basename(str(first).strip()) or f"row {r.row}"


def _one_line(exc) -> str:
    return " ".join(str(exc).split())


# ---------------------------------------------------------------- one item, in a worker

@dataclass(frozen=True)
class Task:
    """What a worker is sent for one item (plain data, picklable)."""

    row: int
    name: str
    key: str
    folder: str
    marker: str
    request: object
    pictures: bool = True
    journal: str | None = None
    colour: bool = False


@dataclass
class Outcome:
    """What a worker sends back for one item."""

    row: int
    status: str
    reason: str | None = None
    seconds: float | None = None
    stage_seconds: dict = field(default_factory=dict)
    pid: int | None = None
    peak_mb: float | None = None
    details: str | None = None
    #: CPU seconds of the worker process (all its threads) spent on this item
    cpu_seconds: float | None = None


def marker_key(marker: str) -> str | None:
    """The key held by a done-marker (None if there is none or it cannot be read)."""
    try:
        with open(marker, encoding="utf-8") as fh:
            data = json.load(fh)
        return data.get("key") if isinstance(data, dict) else None
    except (OSError, ValueError):
        return None


def _is_done(marker: str, folder: str, key: str) -> bool:
    """An item is done when its marker holds its key and its report set is in place."""
    return marker_key(marker) == key and os.path.isfile(os.path.join(folder, "report.json"))


def _fsync_dir(path: str) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(path, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def _make_marker(task: Task, record: dict) -> bool:
    """Make the item's done-marker from a complete temporary file; False if a marker holding this key
    was already there (another run finished the item first).  ``os.link`` creates the marker in one
    step and never over an existing one; where hard links are not available, ``os.replace``."""
    parent = os.path.dirname(task.marker)
    tmp = os.path.join(parent, f".{os.path.basename(task.marker)}.{os.getpid()}-{secrets.token_hex(4)}.tmp")
    with open(tmp, "w", encoding="utf-8") as fh:
        json.dump(record, fh, indent=1)
        fh.write("\n")
        fh.flush()
        os.fsync(fh.fileno())
    try:
        try:
            os.link(tmp, task.marker)
        except FileExistsError:
            if marker_key(task.marker) == task.key:
                return False
            os.replace(tmp, task.marker)  # a marker of another key (astronomically unlikely): ours wins
        except (OSError, AttributeError, NotImplementedError):
            if marker_key(task.marker) == task.key:
                return False
            os.replace(tmp, task.marker)  # no hard links on this file system
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.remove(tmp)
    _fsync_dir(parent)
    return True


def _journal(task: Task, event: str) -> None:
    if not task.journal:
        return
    fd = os.open(task.journal, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
    try:
        os.write(fd, f"{task.key} {event} {os.getpid()} {time.time():.6f}\n".encode())
    finally:
        os.close(fd)


def _peak_mb() -> float | None:
    """This process's peak resident memory (VmHWM), MB; None where /proc is not available."""
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return float(line.split()[1]) / 1024.0
    except OSError:
        pass
    return None


def run_item(task: Task) -> Outcome:
    """Analyse one item and write its report set and done-marker.  Never raises for the item's own
    problems: an input problem or an internal error comes back as a failed :class:`Outcome`."""
    from .analysis import run
    from .memory_reuse import keep_freed_memory
    from .report.output import write_report

    keep_freed_memory()  # once per worker process: the next item reuses this one's freed buffers
    t0, c0 = time.perf_counter(), time.process_time()

    def skipped(reason):
        return Outcome(task.row, STATUS_SKIPPED, reason, pid=os.getpid(), peak_mb=_peak_mb())

    try:
        if _is_done(task.marker, task.folder, task.key):
            return skipped("finished by another run")
        _journal(task, "start")
        report = run(task.request, colour=True) if task.colour else run(task.request)
        if _is_done(task.marker, task.folder, task.key):
            return skipped("finished by another run")
        write_report(report, task.folder, picture=task.pictures)
        _journal(task, "written")
        seconds = round(time.perf_counter() - t0, 4)
        made = _make_marker(task, {"key": task.key, "row": task.row, "name": task.name,
                                   "finished_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
                                   "seconds": seconds, "beamshot": __version__})
        _journal(task, "done" if made else "again")
        if not made:
            return skipped("finished by another run at the same time")
        return Outcome(task.row, STATUS_DONE, None, seconds, dict(report.stage_seconds), os.getpid(), _peak_mb(),
                       cpu_seconds=round(time.process_time() - c0, 4))
    except BeamshotError as exc:
        return Outcome(task.row, STATUS_FAILED, _one_line(exc), round(time.perf_counter() - t0, 4),
                       pid=os.getpid(), peak_mb=_peak_mb())
    except Exception as exc:  # noqa: BLE001 - an internal error stops this item only
        return Outcome(task.row, STATUS_FAILED,
                       f"internal error ({type(exc).__name__}: {_one_line(exc)}); a fault in beamshot, please report "
                       "it with summary.json", round(time.perf_counter() - t0, 4), pid=os.getpid(),
                       peak_mb=_peak_mb(), details="".join(traceback.format_exception(type(exc), exc,
                                                                                       exc.__traceback__)))


# ---------------------------------------------------------------- running many

def default_workers() -> int:
    """One worker per core this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _worker_init(parent_pid: int, threads: int = 0) -> None:
    """A local worker dies with the batch (Linux PR_SET_PDEATHSIG), so a killed batch leaves no worker
    finishing an item behind the next run's back.  With ``threads`` >= 1 its analyses keep to that
    many threads (beamshot.threads; OpenCV's own pool too): one worker per core needs no more."""
    if threads >= 1:
        from .threads import THREADS_ENV

        os.environ[THREADS_ENV] = str(threads)
        with contextlib.suppress(Exception):
            import cv2

            cv2.setNumThreads(threads)
    if sys.platform.startswith("linux"):
        with contextlib.suppress(Exception):
            import ctypes
            import signal

            ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL)  # PR_SET_PDEATHSIG = 1
            if os.getppid() != parent_pid:  # the batch died before the call above
                os._exit(1)


@dataclass
class BatchResult:
    """What a batch did: every item with its outcome, and the summary files written."""

    items: list
    outcomes: dict
    summary_csv: str
    summary_json: str
    workers: int | str

    @property
    def failed(self) -> int:
        return sum(1 for o in self.outcomes.values() if o.status == STATUS_FAILED)

    def count(self, status: str) -> int:
        return sum(1 for o in self.outcomes.values() if o.status == status)


@contextlib.contextmanager
def _batch_lock(out_dir: str):
    """One batch at a time per output folder (flock, released by the kernel if the batch is killed)."""
    path = os.path.join(out_dir, _LOCK_NAME)
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        try:
            import fcntl

            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except ImportError:  # pragma: no cover - not POSIX
            pass
        except BlockingIOError:
            raise BeamshotError(f"{out_dir}: another batch is writing this folder; wait for it to finish "
                                "or choose another --out") from None
        yield
    finally:
        os.close(fd)


def _clean_marker_temps(items_dir: str) -> None:
    """Remove temporary marker files of runs that were killed (we hold the batch lock)."""
    for name in os.listdir(items_dir):
        if name.startswith(".") and name.endswith(".tmp") and ".done.json." in name:
            with contextlib.suppress(OSError):
                os.remove(os.path.join(items_dir, name))


def _run_local(tasks: list[Task], workers: int, report) -> None:
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from concurrent.futures.process import BrokenProcessPool

    pending = list(tasks)
    for attempt in range(2):  # a worker that dies (out of memory...) breaks the pool: one more round
        broken: list[Task] = []
        n = min(workers, len(pending))
        # the cores shared out: one worker per core analyses on one thread
        ex = ProcessPoolExecutor(max_workers=n, mp_context=multiprocessing.get_context("spawn"),
                                 initializer=_worker_init, initargs=(os.getpid(), max(1, default_workers() // n)))
        try:
            futures = {ex.submit(run_item, t): t for t in pending}
            for fut in as_completed(futures):
                t = futures[fut]
                try:
                    report(fut.result())
                except BrokenProcessPool:
                    if attempt == 0:
                        broken.append(t)
                    else:
                        report(Outcome(t.row, STATUS_FAILED, "a worker process died while this item was being analysed "
                                       "(out of memory?); try --workers 1"))
                except Exception as exc:  # noqa: BLE001 - e.g. the task could not be sent
                    report(Outcome(t.row, STATUS_FAILED, f"internal error ({type(exc).__name__}: {_one_line(exc)})"))
        except BaseException:
            ex.shutdown(wait=False, cancel_futures=True)
            raise
        ex.shutdown(wait=True)
        if not broken:
            return
        pending = sorted(broken, key=lambda t: t.row)


def _dask_client(address: str):
    """A ``distributed.Client`` connected to the scheduler at ``address`` (one-line errors)."""
    try:
        import distributed
    except ImportError:
        raise BeamshotError("--scheduler needs the 'distributed' package: pip install beamshot[cluster]") from None
    try:
        return distributed.Client(address, timeout="10s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise BeamshotError(f"cannot reach the Dask scheduler at {address} ({_one_line(exc)}); check the address "
                            "(e.g. tcp://host:8786) and that the scheduler is running") from None


def _run_dask(tasks: list[Task], client, report) -> None:
    import distributed

    futures = {client.submit(run_item, t, pure=False): t for t in tasks}
    for fut in distributed.as_completed(list(futures)):
        t = futures[fut]
        try:
            report(fut.result())
        except Exception as exc:  # noqa: BLE001 - a worker died, the task could not be run
            report(Outcome(t.row, STATUS_FAILED, f"the cluster could not run this item ({type(exc).__name__}: "
                           f"{_one_line(exc)})"))


def run_batch(manifest, out_dir, *, workers: int | None = None, scheduler: str | None = None,
              pictures: bool = True, progress=None, on_plan=None) -> BatchResult:
    """Analyse every item of ``manifest`` not yet done into ``out_dir``; write the summary.

    ``progress(outcome, item)`` is called for each item as it finishes (and first for the items
    skipped or refused at planning); ``on_plan(items)`` once the manifest is planned.  Raises
    :class:`BeamshotError` (nothing run) for a manifest that cannot be read, an output folder that
    cannot be written, or a cluster that cannot be reached.
    """
    out = os.path.abspath(os.fspath(out_dir))
    items = plan(manifest, out, pictures=pictures)
    items_dir = os.path.join(out, "items")
    try:
        os.makedirs(items_dir, exist_ok=True)
    except OSError as exc:
        raise BeamshotError(f"{out_dir}: cannot create the output folder ({exc.strerror or exc}); "
                            "choose a folder you can write to") from None
    by_row = {it.row: it for it in items}
    outcomes: dict[int, Outcome] = {}

    def report(outcome: Outcome) -> None:
        outcomes[outcome.row] = outcome
        if progress is not None:
            progress(outcome, by_row[outcome.row])

    journal = os.environ.get(JOURNAL_ENV) or None
    tasks = [Task(it.row, it.name, it.key, it.folder, it.marker, it.request, pictures, journal, it.colour)
             for it in items if it.error is None and not it.already_done]
    with _batch_lock(out), contextlib.ExitStack() as stack:
        client = None
        if scheduler and tasks:  # connect first: an unreachable cluster stops the batch before it starts
            client = _dask_client(scheduler)
            stack.callback(client.close)
        if on_plan is not None:
            on_plan(items)
        _clean_marker_temps(items_dir)
        for it in items:  # a marker whose report set was deleted: the item is done again
            if it.error is None and not it.already_done and os.path.lexists(it.marker):
                with contextlib.suppress(OSError):
                    os.remove(it.marker)
        for it in items:
            if it.error is not None:
                report(Outcome(it.row, STATUS_FAILED, it.error))
            elif it.already_done:
                report(Outcome(it.row, STATUS_SKIPPED, None))
        if client is not None:
            _run_dask(tasks, client, report)
        elif tasks:
            _run_local(tasks, workers or default_workers(), report)
        csv_path, json_path = write_summary(out, items, outcomes)
    return BatchResult(items, outcomes, csv_path, json_path, scheduler or (workers or default_workers()))


# ---------------------------------------------------------------- the comparison

#: Folder of a batch's comparison sheet (``--compare``), beside the summary.
COMPARISON_DIR = "comparison"


def compare_items(out_dir: str, items: list[Item], outcomes: dict) -> str:
    """Compare every item with a report set (done now or before), in manifest order, with
    ``beamshot compare`` into ``out_dir/comparison``; returns that folder.  Refuses (one line)
    fewer than two or more than twelve such items."""
    from .compare import MAX_LIGHTS, MIN_LIGHTS, compare

    ready = [it for it in items if outcomes.get(it.row) is not None
             and outcomes[it.row].status in (STATUS_DONE, STATUS_SKIPPED) and os.path.isdir(it.folder)]
    if not MIN_LIGHTS <= len(ready) <= MAX_LIGHTS:
        raise BeamshotError(f"--compare: {len(ready)} item(s) have a report set; compare takes {MIN_LIGHTS} to "
                            f"{MAX_LIGHTS} (run 'beamshot compare' on a selection of DIR/items/*)")
    folder = os.path.join(out_dir, COMPARISON_DIR)
    compare([it.folder for it in ready], labels=[it.name for it in ready], out_dir=folder)
    return folder


# ---------------------------------------------------------------- the summary

_FIGURE_PARTS = ("value", "uncertainty", "unit", "status")


def summary_rows(out_dir: str, items: list[Item], outcomes: dict) -> list[dict]:
    """One record per item (manifest order): name, row, status, reason, folder, key, seconds and
    every figure's value, uncertainty, unit and status read back from the item's report.json."""
    from .report.output import read_report_json
    from .vocabulary import FIGURES

    records = []
    for it in items:
        o = outcomes.get(it.row) or Outcome(it.row, STATUS_FAILED, "not run (the batch stopped first)")
        rec = {"name": it.name, "row": it.row, "status": o.status, "reason": o.reason or "",
               # a failed row's folder was never written: name none rather than one that does not exist
               "folder": os.path.relpath(it.folder, out_dir) if it.folder and os.path.isdir(it.folder) else "",
               "key": it.key,
               "seconds": o.seconds, "stage_seconds": o.stage_seconds or None, "figures": {}}
        if o.details:
            rec["details"] = o.details
        if o.status in (STATUS_DONE, STATUS_SKIPPED):
            try:
                data = read_report_json(os.path.join(it.folder, "report.json"))
            except BeamshotError as exc:
                rec.update(status=STATUS_FAILED, reason=f"report unreadable after the run: {_one_line(exc)}")
                data = {}
            figs = data.get("figures", {}) if isinstance(data, dict) else {}
            if rec["stage_seconds"] is None and isinstance(data, dict):
                rec["stage_seconds"] = (data.get("tool") or {}).get("stage_seconds")
            for key in FIGURES:
                f = figs.get(key) or {}
                rec["figures"][key] = {p: f.get(p) for p in _FIGURE_PARTS}
            rec["colour"] = _colour_cells((data.get("colour") if isinstance(data, dict) else None))
        records.append(rec)
    return records


#: Colour columns of the summary (empty for items analysed without colour): each zone's CCT and Duv and
#: the largest tint difference between zones, as ``<column>``, ``<column>_uncertainty``, ``..._status``.
COLOUR_COLUMNS = ("hotspot_cct_k", "corona_cct_k", "spill_cct_k", "hotspot_duv", "corona_duv", "spill_duv",
                  "zones_max_delta_uv")


def _colour_cells(colour: dict | None) -> dict:
    """The summary's colour cells from a report's ``colour`` section (all None without colour)."""
    empty = {c: {"value": None, "uncertainty": None, "status": None} for c in COLOUR_COLUMNS}
    if not isinstance(colour, dict) or not colour.get("measured"):
        return empty
    out = {}
    for c in COLOUR_COLUMNS:
        if c == "zones_max_delta_uv":
            f = (colour.get("tint") or {}).get(c) or {}
        else:
            zone, what = c.split("_", 1)
            f = ((colour.get("zones") or {}).get(zone) or {}).get("cct" if what == "cct_k" else "duv") or {}
        out[c] = {p: f.get(p) for p in ("value", "uncertainty", "status")}
    return out


def _atomic_write(path: str, text: str) -> None:
    from .atomic_file import write_text_atomic

    write_text_atomic(path, text, newline="")


def write_summary(out_dir: str, items: list[Item], outcomes: dict) -> tuple[str, str]:
    """``summary.csv`` (one row per item; figure columns ``<key>``, ``<key>_uncertainty``,
    ``<key>_unit``, ``<key>_status``) and ``summary.json`` (the same with each figure's label),
    each replaced atomically.  Returns their paths."""
    from .vocabulary import FIGURES

    records = summary_rows(out_dir, items, outcomes)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    head = ["name", "row", "status", "reason", "folder"]
    for key in FIGURES:
        head += [key, f"{key}_uncertainty", f"{key}_unit", f"{key}_status"]
    for c in COLOUR_COLUMNS:
        head += [c, f"{c}_uncertainty", f"{c}_status"]
    w.writerow(head)

    def cell(x):
        return "" if x is None else (f"{x:.6g}" if isinstance(x, float) else str(x))

    for r in records:
        line = [r["name"], r["row"], r["status"], r["reason"], r["folder"]]
        for key in FIGURES:
            f = r["figures"].get(key) or {}
            line += [cell(f.get(p)) for p in _FIGURE_PARTS]
        colour = r.get("colour") or {}
        for c in COLOUR_COLUMNS:
            f = colour.get(c) or {}
            line += [cell(f.get(p)) for p in ("value", "uncertainty", "status")]
        w.writerow(line)
    counts = {s: sum(1 for r in records if r["status"] == s) for s in (STATUS_DONE, STATUS_SKIPPED, STATUS_FAILED)}
    doc = {"beamshot": __version__, "items_total": len(records), "counts": counts,
           "figures": {k: {"label": t.label, "unit": t.unit, "part_of": t.part_of} for k, t in FIGURES.items()},
           "items": records}
    csv_path = os.path.join(out_dir, "summary.csv")
    json_path = os.path.join(out_dir, "summary.json")
    _atomic_write(csv_path, buf.getvalue())
    _atomic_write(json_path, json.dumps(doc, indent=1, ensure_ascii=False, allow_nan=False) + "\n")
    return csv_path, json_path
