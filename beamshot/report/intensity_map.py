"""The calibrated intensity map I(theta, phi) as a file of the output set: ``intensity-map.npz``.

report.json holds the figures and the azimuthal-mean profile; comparisons, exports and
re-renderings need the whole map.  The file is a NumPy ``.npz`` archive (uncompressed, no
pickled objects) with these arrays:

=================  ==========  ============================================================
``theta_deg``      (n_theta,)  polar angle of each row's cell centre from the beam axis, deg
``phi_deg``        (n_phi,)    azimuth of each column's cell centre, deg, counter-clockwise
                               from the right as seen from behind the light
``intensity``      (n_theta,   luminous intensity, float32; cd when ``unit`` is ``"cd"``,
                   n_phi)      otherwise relative (linear camera units x m^2); NaN where the
                               photo does not cover the direction
``saturated``      same        True where the photo was clipped
``footprint_deg``  (n, 2)      outline of the photo's view, azimuthal-equidistant degrees
                               (theta cos phi, theta sin phi); empty when unknown
``unit``           ()          ``"cd"`` or ``"relative"``
``distance_m``     ()          light-to-wall distance of the analysis, m
``format``         ()          ``"beamshot.intensity-map 1.0"``
=================  ==========  ============================================================
"""

from __future__ import annotations

import os
import zipfile

import numpy as np

from ..errors import BeamshotError

__all__ = ["MAP_FILE", "MAP_FORMAT", "write_intensity_map", "read_intensity_map"]

MAP_FILE = "intensity-map.npz"
MAP_FORMAT = "beamshot.intensity-map 1.0"


def write_intensity_map(beam, path) -> None:
    """Write a :class:`beamshot.beammap.BeamMap` to ``path`` (see the module docstring)."""
    fp = beam.footprint_deg
    with open(path, "wb") as fh:
        np.savez(fh, theta_deg=np.degrees(beam.theta), phi_deg=np.degrees(beam.phi),
                 intensity=np.asarray(beam.intensity, np.float32), saturated=np.asarray(beam.saturated, bool),
                 footprint_deg=np.zeros((0, 2)) if fp is None else np.asarray(fp, float),
                 unit=np.array(beam.unit), distance_m=np.array(float(beam.distance_m)), format=np.array(MAP_FORMAT))


def read_intensity_map(path):
    """Read an ``intensity-map.npz`` (or the one in a report folder) back into a BeamMap.

    Refuses, in one line, a file that is missing, not an archive of ours, or of a newer format.
    """
    from ..beammap import BeamMap

    path = os.fspath(path)
    if os.path.isdir(path):
        path = os.path.join(path, MAP_FILE)
    elif os.path.basename(path) == "report.json":
        path = os.path.join(os.path.dirname(path), MAP_FILE)
    if not os.path.isfile(path):
        raise BeamshotError(f"{path}: no intensity map there; analyse again with 'beamshot analyze ... --out DIR' "
                            "(sets written before the map was added have none)")
    try:
        with np.load(path, allow_pickle=False) as z:
            fmt = str(z["format"])
            if not fmt.startswith("beamshot.intensity-map "):
                raise KeyError("format")
            major = fmt.split()[-1].split(".")[0]
            if major != MAP_FORMAT.split()[-1].split(".")[0]:
                raise BeamshotError(f"{path}: intensity map format {fmt} is newer than this beamshot reads; "
                                    "update beamshot")
            theta = np.radians(np.asarray(z["theta_deg"], float))
            phi = np.radians(np.asarray(z["phi_deg"], float))
            inten = np.asarray(z["intensity"], float)
            sat = np.asarray(z["saturated"], bool)
            fp = np.asarray(z["footprint_deg"], float)
            unit = str(z["unit"])
            dist = float(z["distance_m"])
    except BeamshotError:
        raise
    except (OSError, ValueError, KeyError, zipfile.BadZipFile, EOFError) as exc:
        raise BeamshotError(f"{path}: not a beamshot intensity map ({type(exc).__name__}); "
                            "give the folder written by 'beamshot analyze ... --out DIR'") from None
    if (theta.ndim != 1 or phi.ndim != 1 or inten.shape != (theta.size, phi.size) or sat.shape != inten.shape
            or theta.size < 2 or phi.size < 2 or unit not in ("cd", "relative")):
        raise BeamshotError(f"{path}: intensity map arrays do not fit together; write the set again")
    return BeamMap(theta=theta, phi=phi, intensity=inten, saturated=sat, distance_m=dist, unit=unit,
                   footprint_deg=fp if fp.size else None)
