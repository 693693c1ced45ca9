"""Write a BeamReport to a folder: report.json, profile.csv, beam.png.

Files are written into a temporary folder beside the target and moved into place only
when all of them succeeded, so a failed run leaves nothing partial behind.
"""

from __future__ import annotations

import csv
import json
import os
import shutil
import tempfile

import numpy as np

from ..errors import BeamshotError, read_user_file
from ..profile import plane_profile
from .model import BeamReport
from .plots import beam_figure

__all__ = ["REPORT_FILES", "write_report", "write_json", "write_profile_csv", "read_report_json"]

REPORT_FILES = ("report.json", "profile.csv", "beam.png")


def write_json(report: BeamReport, path) -> None:
    with open(path, "w", encoding="utf-8") as fh:
        json.dump(report.to_dict(), fh, indent=2, ensure_ascii=False, allow_nan=False)
        fh.write("\n")


def read_report_json(path) -> dict:
    """Read a report.json, refusing another schema or a newer major version."""
    from .model import SCHEMA_NAME, SCHEMA_VERSION

    raw = read_user_file(path, "give the report.json inside it")
    try:
        data = json.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError):
        raise BeamshotError(f"{path}: not a beamshot report.json (a photo or another file?); run "
                            "'beamshot analyze ... --out DIR' first and give DIR/report.json") from None
    if not isinstance(data, dict) or data.get("schema") != SCHEMA_NAME:
        raise BeamshotError(f"{path}: not a beamshot report")
    major = str(data.get("schema_version", "")).split(".")[0]
    if not major.isdigit():
        raise BeamshotError(f"{path}: the report has no readable schema_version; it was not written by beamshot")
    if int(major) > int(SCHEMA_VERSION.split(".")[0]):
        raise BeamshotError(f"{path}: written by a newer beamshot (schema {data['schema_version']}); upgrade beamshot")
    return data


def write_profile_csv(report: BeamReport, path) -> None:
    """Radial profile plus the horizontal and vertical plane profiles, one row per polar angle."""
    p = report.profile
    h_ang, h_val = plane_profile(report.beam, 0.0)
    v_ang, v_val = plane_profile(report.beam, 90.0)
    n = len(p.theta_deg)
    unit = "cd" if report.beam.unit == "cd" else "rel"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["theta_deg", f"mean_{unit}", f"std_{unit}", f"min_{unit}", f"max_{unit}", "cells",
                    f"right_{unit}", f"left_{unit}", f"up_{unit}", f"down_{unit}"])

        def fmt(x):
            return "" if not np.isfinite(x) else f"{x:.6g}"

        for i in range(n):
            w.writerow([f"{p.theta_deg[i]:.3f}", fmt(p.mean[i]), fmt(p.std[i]), fmt(p.min[i]), fmt(p.max[i]),
                        int(p.count[i]), fmt(h_val[n + i]), fmt(h_val[n - 1 - i]), fmt(v_val[n + i]), fmt(v_val[n - 1 - i])])


def write_report(report: BeamReport, out_dir, *, picture: bool = True) -> list[str]:
    """Write all report files into ``out_dir`` (created if needed); returns their paths."""
    out_dir = os.fspath(out_dir)
    parent = os.path.dirname(os.path.abspath(out_dir)) or "."
    try:
        os.makedirs(parent, exist_ok=True)
    except OSError as exc:
        raise BeamshotError(f"{out_dir}: cannot create the output folder ({exc.strerror})") from None
    if os.path.exists(out_dir) and not os.path.isdir(out_dir):
        raise BeamshotError(f"{out_dir}: exists and is not a folder; choose another --out")
    tmp = tempfile.mkdtemp(prefix=".beamshot-", dir=parent)
    try:
        write_json(report, os.path.join(tmp, "report.json"))
        write_profile_csv(report, os.path.join(tmp, "profile.csv"))
        if picture:
            beam_figure(report, os.path.join(tmp, "beam.png"))
        os.makedirs(out_dir, exist_ok=True)
        written = []
        for name in sorted(os.listdir(tmp)):
            dst = os.path.join(out_dir, name)
            os.replace(os.path.join(tmp, name), dst)
            written.append(dst)
        return written
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
