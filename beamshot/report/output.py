"""Write a BeamReport to a folder as one set: report.json, profile.csv, intensity-map.npz, beam.png,
tint.png (with colour), report.html.

A reader of ``--out`` sees the old set or the new set, never a mix, and nothing of ours is
left beside it:

1. Under a lock (``.beamshot-lock-<key>`` beside ``--out``, held with ``flock`` so a killed
   run cannot leave it held), leftovers of earlier runs for the same ``--out`` are tidied: a
   temporary folder is removed, and a set left aside by a run that died between two renames
   is put back (or removed when the new set already stands).  Our temporary folders for other
   outputs are removed when they are older than :data:`STALE_AFTER_S`.
2. The whole set is written into ``.beamshot-tmp-<key>-<pid>-<random>`` in ``--out``'s parent
   (same file system, so renames are atomic), each file flushed to disk.
3. The new folder takes the place of ``--out`` in one step: on Linux the two folders are
   exchanged atomically (``renameat2(RENAME_EXCHANGE)``), so ``--out`` never disappears; where
   that is not available, the old folder is renamed aside to ``.beamshot-old-<key>-...`` and
   the new one renamed into place (a run killed between the two renames leaves no ``--out``
   until the next run puts the old set back).  The old set is then deleted.

``<key>`` is a short hash of ``--out``'s folder name, so each output has its own lock and
leftovers.  The temporary folder is removed on every exit path: ``finally`` blocks, SIGTERM
turned into :class:`Terminated` while writing, SIGINT (KeyboardInterrupt) likewise, and the
signals held back during the swap and clean-up.  Two runs writing the same ``--out``: the
later one waits up to :data:`LOCK_WAIT_S` for the earlier to finish and then replaces its set
whole; after that it is refused with the reason.  An existing ``--out`` holding files that
beamshot did not write is refused, never replaced.
"""

from __future__ import annotations

import contextlib
import csv
import errno
import hashlib
import json
import math
import os
import re
import secrets
import stat
import shutil
import signal
import sys
import threading
import time

from typing import TYPE_CHECKING

from ..errors import BeamshotError, read_user_file

if TYPE_CHECKING:  # imported lazily: the command line imports this module's Terminated at start
    from .model import BeamReport

__all__ = ["REPORT_FILES", "STALE_AFTER_S", "LOCK_WAIT_S", "Terminated", "write_report", "write_json",
           "write_profile_csv", "read_report_json", "output_key", "write_set"]

REPORT_FILES = ("report.json", "profile.csv", "intensity-map.npz", "beam.png", "tint.png", "report.html")
#: Our temporary and set-aside folders of *other* outputs are removed once older than this (s).
STALE_AFTER_S = 24 * 3600.0
#: How long a run waits for another run writing the same --out before refusing (s).
LOCK_WAIT_S = 30.0
#: Environment switch (diagnostics and the kill test): "rename" forces the two-rename swap.
SWAP_ENV = "BEAMSHOT_SWAP"

_TMP = ".beamshot-tmp-"
_OLD = ".beamshot-old-"
_LOCK = ".beamshot-lock-"
_OURS = re.compile(r"^\.beamshot-(tmp|old)-([0-9a-f]{12})-(\d+)-([0-9a-f]{8})$")


class Terminated(BaseException):
    """SIGTERM received while an output set was being written (the CLI exits 143 quietly)."""


def write_json(report: BeamReport, path, data: dict | None = None) -> None:
    """report.json; ``data``: ``report.to_dict()`` when the caller has it already."""
    with open(path, "w", encoding="utf-8") as fh:
        json.dump(report.to_dict() if data is None else data, fh, indent=2, ensure_ascii=False, allow_nan=False)
        fh.write("\n")


def read_report_json(path) -> dict:
    """Read a report.json, refusing another schema or a newer major version."""
    from .model import SCHEMA_NAME, SCHEMA_VERSION

    raw = read_user_file(path, "give the report.json inside it")
    try:
        data = json.loads(raw.decode("utf-8"))
    except (ValueError, RecursionError):  # bad UTF-8 or JSON, a number past Python's digit limit, deep nesting
        raise BeamshotError(f"{path}: not a beamshot report.json (a photo or another file?); run "
                            "'beamshot analyze ... --out DIR' first and give DIR/report.json") from None
    if not isinstance(data, dict) or data.get("schema") != SCHEMA_NAME:
        raise BeamshotError(f"{path}: not a beamshot report; give the report.json written by "
                            "'beamshot analyze ... --out DIR'")
    major = str(data.get("schema_version", "")).split(".")[0]
    if not (major.isascii() and major.isdigit()):
        raise BeamshotError(f"{path}: the report has no readable schema_version, so beamshot did not write it; "
                            "give the report.json written by 'beamshot analyze ... --out DIR'")
    if int(major) > int(SCHEMA_VERSION.split(".")[0]):
        raise BeamshotError(f"{path}: written by a newer beamshot (schema {data['schema_version']}); upgrade beamshot")
    return data


def write_profile_csv(report: BeamReport, path) -> None:
    """Radial profile plus the horizontal and vertical plane profiles, one row per polar angle."""
    import numpy as np

    from ..profile import plane_profile

    p = report.profile
    h_ang, h_val = plane_profile(report.beam, 0.0)
    v_ang, v_val = plane_profile(report.beam, 90.0)
    n = len(p.theta_deg)
    unit = "cd" if report.beam.unit == "cd" else "rel"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["theta_deg", f"mean_{unit}", f"std_{unit}", f"min_{unit}", f"max_{unit}", "cells",
                    f"right_{unit}", f"left_{unit}", f"up_{unit}", f"down_{unit}"])

        def col(values) -> list[str]:  # as Python floats (the values exactly): '' where not finite
            return ["" if not math.isfinite(x) else f"{x:.6g}" for x in np.asarray(values, float)[:n].tolist()]

        h_val, v_val = np.asarray(h_val, float), np.asarray(v_val, float)
        columns = [[f"{x:.3f}" for x in np.asarray(p.theta_deg, float).tolist()], col(p.mean), col(p.std),
                   col(p.min), col(p.max), [int(c) for c in np.asarray(p.count)[:n].tolist()],
                   col(h_val[n:2 * n]), col(h_val[n - 1::-1] if n else h_val[:0]), col(v_val[n:2 * n]),
                   col(v_val[n - 1::-1] if n else v_val[:0])]
        w.writerows(zip(*columns))


# ---------------------------------------------------------------- one set, replaced at once

def output_key(out_dir) -> str:
    """The 12-hex-digit key of an output folder's name, used in our lock and leftover names.

    >>> output_key("reports/proto-a") == output_key("proto-a")
    True
    """
    return hashlib.sha1(os.path.basename(os.path.abspath(os.fspath(out_dir))).encode("utf-8", "surrogateescape")
                        ).hexdigest()[:12]


def _fail_os(out_dir: str, exc: OSError, doing: str):
    if isinstance(exc, PermissionError) or exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
        return BeamshotError(f"{out_dir}: cannot {doing} ({exc.strerror or exc}); choose a folder you can write to")
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        return BeamshotError(f"{out_dir}: cannot {doing} (the disk is full); free some space or choose another --out")
    return BeamshotError(f"{out_dir}: cannot {doing} ({exc.strerror or exc}); choose another --out")


def _is_our_set(path: str) -> tuple[bool, list[str]]:
    """Whether an existing folder is a beamshot output set (only our file names; report.json ours)."""
    names = sorted(os.listdir(path))
    foreign = [n for n in names if n not in REPORT_FILES]
    if foreign:
        return False, foreign
    if "report.json" in names:
        try:
            with open(os.path.join(path, "report.json"), "rb") as fh:
                data = json.loads(fh.read(4_000_000).decode("utf-8"))
            if not (isinstance(data, dict) and data.get("schema") == "beamshot.report"):
                return False, ["report.json (not a beamshot report)"]
        except (OSError, ValueError):
            return False, ["report.json (not a beamshot report)"]
    return True, []


def _rmtree(path: str) -> None:
    shutil.rmtree(path, ignore_errors=True)


def _fsync_dir(path: str) -> None:
    with contextlib.suppress(OSError, AttributeError):
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def _fsync_files(folder: str) -> None:
    for name in os.listdir(folder):
        with open(os.path.join(folder, name), "rb+") as fh:
            os.fsync(fh.fileno())


_RENAME_EXCHANGE = 2
_AT_FDCWD = -100


def _exchange(a: str, b: str) -> bool:
    """Swap two paths atomically (Linux renameat2 RENAME_EXCHANGE); False where not available."""
    if os.environ.get(SWAP_ENV) == "rename" or not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return False
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    if fn(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.EINVAL, errno.ENOSYS, errno.EOPNOTSUPP, errno.ENOTSUP):
        return False  # the file system cannot exchange: fall back to two renames
    raise OSError(err, os.strerror(err), a)


@contextlib.contextmanager
def _lock(parent: str, key: str, out_dir: str):
    """Hold ``.beamshot-lock-<key>`` in ``parent``: flock where available (released by the kernel when
    a run is killed), else an O_EXCL file naming the holder's pid."""
    path = os.path.join(parent, _LOCK + key)
    deadline = time.monotonic() + LOCK_WAIT_S
    try:
        import fcntl
    except ImportError:  # pragma: no cover - not POSIX
        fcntl = None
    while True:
        if fcntl is not None:
            # SIGTERM and SIGINT wait while the file is made and locked, until the block that removes
            # it is entered: a run stopped in between left the lock file behind
            _mask_signals(True)
            held = False
            try:
                fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
                try:
                    fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                except BlockingIOError:
                    os.close(fd)
                else:
                    try:
                        same = os.path.samestat(os.fstat(fd), os.stat(path))
                    except FileNotFoundError:
                        same = False
                    if same:  # not a file the previous holder removed while we waited
                        os.write(fd, f"{os.getpid()}\n".encode())
                        held = True
                    else:
                        os.close(fd)
                        continue
            finally:
                if not held:
                    _mask_signals(False)
            if held:
                break
        else:  # pragma: no cover - not POSIX
            try:
                fd = os.open(path, os.O_RDWR | os.O_CREAT | os.O_EXCL, 0o644)
                os.write(fd, f"{os.getpid()}\n".encode())
                break
            except FileExistsError:
                if time.time() - os.path.getmtime(path) > 600:
                    with contextlib.suppress(OSError):
                        os.remove(path)
                    continue
        if time.monotonic() > deadline:
            raise BeamshotError(f"{out_dir}: another beamshot run is writing this folder (lock {path}); "
                                "wait for it to finish or choose another --out")
        time.sleep(0.05)
    try:
        _mask_signals(False)  # (held since the lock was taken, on POSIX)
        yield
    finally:
        with contextlib.suppress(OSError):
            os.remove(path)
        os.close(fd)


def _tidy(parent: str, key: str, out: str) -> None:
    """Put right what earlier runs left (called under the lock of ``key``)."""
    now = time.time()
    olds = []
    for name in os.listdir(parent):
        m = _OURS.match(name)
        if m is None:
            continue
        path = os.path.join(parent, name)
        if m.group(2) == key:
            if m.group(1) == "tmp":
                _rmtree(path)  # a run for this output died (we hold its lock): its folder is stale
            else:
                olds.append(path)
        else:
            with contextlib.suppress(OSError):
                if now - os.lstat(path).st_mtime > STALE_AFTER_S:
                    _rmtree(path)
    if olds:
        olds.sort(key=lambda p: os.lstat(p).st_mtime)
        if not os.path.lexists(out):
            # died between "old aside" and "new into place": the old set goes back
            os.rename(olds.pop(), out)
        for p in olds:
            _rmtree(p)


def _mask_signals(block: bool) -> None:
    if hasattr(signal, "pthread_sigmask") and threading.current_thread() is threading.main_thread():
        signal.pthread_sigmask(signal.SIG_BLOCK if block else signal.SIG_UNBLOCK, {signal.SIGTERM, signal.SIGINT})


@contextlib.contextmanager
def _sigterm_as_exception():
    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def handler(signum, frame):
        raise Terminated()

    previous = signal.signal(signal.SIGTERM, handler)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def write_report(report: BeamReport, out_dir, *, picture: bool = True) -> list[str]:
    """Write all report files into ``out_dir`` as one set, replacing an older set whole; returns
    their paths.  Refuses (:class:`BeamshotError`) a folder holding files beamshot did not write."""
    from . import beam_picture
    from .html import HTML_FILE, write_report_html
    from .intensity_map import MAP_FILE, write_intensity_map
    from .plots import FROM_REPORT, report_noise_floor

    def fill(tmp: str) -> None:
        data = report.to_dict()  # once for report.json and the page (about 16 ms)
        write_json(report, os.path.join(tmp, "report.json"), data)
        write_profile_csv(report, os.path.join(tmp, "profile.csv"))
        write_intensity_map(report.beam, os.path.join(tmp, MAP_FILE))
        map_png = None
        noise = FROM_REPORT
        if picture:  # one drawing: beam.png, and its map panel for the page; one noise floor for both
            noise = report_noise_floor(report)
            png, map_png = beam_picture.beam_pictures(report, noise=noise)
            with open(os.path.join(tmp, "beam.png"), "wb") as fh:
                fh.write(png)
        tint_png = None
        if picture and getattr(report, "colour", None) is not None:  # only when colour was asked for
            from .colour_plots import tint_figure

            tint_figure(report, os.path.join(tmp, "tint.png"), noise=noise)
            with open(os.path.join(tmp, "tint.png"), "rb") as fh:
                tint_png = fh.read()
        # the page is always written (without pictures it holds the tables and says so)
        write_report_html(report, os.path.join(tmp, HTML_FILE), picture=picture, map_png=map_png, tint_png=tint_png,
                          data=data, noise=noise)

    return write_set(out_dir, fill, is_ours=_is_our_set, writer="beamshot", doing="write the report files there")


def write_set(out_dir, fill, *, is_ours, writer: str, doing: str) -> list[str]:
    """Write one set of files into ``out_dir`` whole: ``fill(folder)`` writes them into a new
    temporary folder beside it, which then replaces ``out_dir`` atomically (renameat2 exchange, or
    two renames put right by the next run), under a lock, keeping the folder's permissions.
    ``is_ours(path) -> (bool, foreign names)`` says whether an existing folder may be replaced;
    ``writer`` names the command in the refusal, ``doing`` the action in a file-system error.
    Returns the paths of the files written."""
    out_arg = os.fspath(out_dir)
    out = os.path.abspath(out_arg)
    if os.path.islink(out):
        out = os.path.realpath(out)
    parent, base = os.path.split(out)
    if not base:
        raise BeamshotError(f"{out_arg}: give a folder below the file-system root for --out")
    try:
        os.makedirs(parent, exist_ok=True)
    except OSError as exc:
        raise _fail_os(out_arg, exc, "create the output folder") from None
    if os.path.lexists(out) and not os.path.isdir(out):
        raise BeamshotError(f"{out_arg}: exists and is not a folder; choose another --out")
    cwd = os.path.realpath(os.getcwd())
    if os.path.isdir(out) and (cwd == os.path.realpath(out) or cwd.startswith(os.path.realpath(out) + os.sep)):
        raise BeamshotError(f"{out_arg}: is the current folder or holds it; give a new folder for --out, "
                            "e.g. --out reports/proto-1")
    key = output_key(out)
    tmp = None
    with _sigterm_as_exception():
        try:
            with _lock(parent, key, out_arg):
                _mask_signals(True)
                try:
                    _tidy(parent, key, out)
                finally:
                    _mask_signals(False)
                if os.path.isdir(out):
                    ours, foreign = is_ours(out)
                    if not ours:
                        shown = ", ".join(foreign[:3]) + (", ..." if len(foreign) > 3 else "")
                        raise BeamshotError(f"{out_arg}: holds files {writer} did not write ({shown}); "
                                            "choose another --out or empty that folder")
                while tmp is None:
                    candidate = os.path.join(parent, f"{_TMP}{key}-{os.getpid()}-{secrets.token_hex(4)}")
                    try:
                        os.mkdir(candidate)
                        tmp = candidate
                    except FileExistsError:
                        continue
                fill(tmp)
                _fsync_files(tmp)
                if os.path.isdir(out):  # the new set keeps the folder's permissions (a private folder stays private)
                    os.chmod(tmp, stat.S_IMODE(os.stat(out).st_mode))
                _mask_signals(True)
                try:
                    if not os.path.isdir(out):
                        os.rename(tmp, out)
                        tmp = None
                    elif _exchange(tmp, out):
                        pass  # tmp now holds the old set; removed below
                    else:
                        aside = os.path.join(parent, f"{_OLD}{key}-{os.getpid()}-{secrets.token_hex(4)}")
                        os.rename(out, aside)
                        os.rename(tmp, out)
                        tmp = aside
                    _fsync_dir(parent)
                    if tmp is not None:
                        _rmtree(tmp)
                        tmp = None
                finally:
                    _mask_signals(False)
        except OSError as exc:
            raise _fail_os(out_arg, exc, doing) from None
        finally:
            if tmp is not None:
                _mask_signals(True)
                _rmtree(tmp)
                _mask_signals(False)
    return [os.path.join(out_arg, name) for name in sorted(os.listdir(out))]
