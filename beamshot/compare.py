"""Comparing 2-12 lights on equal footing: one exposure, one tone curve, one angular scale.

Each light is an analysis output folder (report.json + intensity-map.npz).  The beams are drawn
again from their calibrated maps I(theta, phi), never from the photos:

* wall view: a flat wall square to the light at ``D`` (default :data:`WALL_DISTANCE_M`);
  illuminance by the inverse-square and cosine laws (IES 9.1.1/9.1.2)
  ``E = I(theta, phi) cos^3(theta) / D^2``; display value ``V = sRGB(E / E_full)`` (IEC 61966-2-1
  encoding, clipped to 0-1) where ``E_full`` is the largest wall illuminance of the brightest
  light: one exposure for all, the brightest hotspot just at full scale;
* angular map: I in azimuthal-equidistant degrees about the axis, log10 scale from the brightest
  peak down :data:`MAP_DECADES` decades.

Absolute when every light is in cd; otherwise each map is divided by its own peak and every
picture and the JSON say so.  Figures: for each pair and figure, ``b - a`` against its combined
standard uncertainty (GUM 5.1.2, independent; with ``same_meter`` the lux-meter / camera-constant
term correlated, GUM 5.2.2, as in :mod:`beamshot.farfield`), significant beyond ``k`` = 2
(:data:`COVERAGE_K`, about 95 %, JCGM 100).  Bounds and figures not measured are not compared.
The format of ``comparison.json`` is documented in docs/compare.md.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import re
from dataclasses import dataclass, field

import numpy as np

from .beammap import BeamMap, directions
from .errors import BeamshotError
from .vocabulary import COLOUR_FIGURES, FIGURES, colour_figures_of, label as figure_label, term

__all__ = ["MIN_LIGHTS", "MAX_LIGHTS", "WALL_DISTANCE_M", "MAP_DECADES", "COVERAGE_K", "RATIO_FLOOR", "TILE_PX",
           "COMPARISON_SCHEMA", "COMPARISON_VERSION", "Light", "Comparison", "srgb_tone", "load_light",
           "resolve_labels", "wall_illuminance", "angular_intensity", "common_half_angle", "compare_figures",
           "build_comparison", "comparison_dict", "write_comparison", "compare"]

MIN_LIGHTS, MAX_LIGHTS = 2, 12
#: Distance of the virtual wall of the wall view, m (project choice: a room-length wall).
WALL_DISTANCE_M = 5.0
#: Decades shown by the common log scale of the angular maps (project choice).
MAP_DECADES = 3.0
#: Coverage factor of the significance test (JCGM 100: k = 2, about 95 %).
COVERAGE_K = 2.0
#: The ratio map only holds directions where both lights exceed this fraction of their own peak
#: (project choice: below it the ratio is a ratio of spill noise).
RATIO_FLOOR = 0.01
#: Pixels across one tile of the sheet (and of the arrays the tests read).
TILE_PX = 301
#: Common half angle: 1.1 x the widest spill edge (or field angle), within these limits, deg.
HALF_ANGLE_MARGIN = 1.1
HALF_ANGLE_LIMITS_DEG = (5.0, 60.0)

COMPARISON_SCHEMA = "beamshot.comparison"
COMPARISON_VERSION = "1.0"
COMPARISON_FILE = "comparison.json"
#: Figures in cd, lm or m need an absolute scale.
ABSOLUTE_UNITS = ("cd", "lm", "m")


def srgb_tone(relative_exposure):
    """Display value of a relative exposure ``L`` (0-1 full scale): the sRGB encoding of IEC 61966-2-1,
    ``V = 12.92 L`` for ``L <= 0.0031308``, else ``1.055 L^(1/2.4) - 0.055``, clipped to 0-1; NaN stays NaN.

    >>> round(float(srgb_tone(0.18)), 12)   # REFERENCES A12: sRGB encode 0.18
    0.4613561295
    """
    from .camera.response import srgb_encode

    x = np.asarray(relative_exposure, float)
    v = srgb_encode(np.clip(np.nan_to_num(x, nan=0.0), 0.0, 1.0))
    return np.where(np.isfinite(x), v, np.nan)


# ----------------------------------------------------------------------------- the lights
@dataclass(frozen=True)
class Light:
    """One analysis to compare: its label, where its report is, the report dict and the map."""

    label: str
    report_path: str
    report: dict = field(repr=False)
    beam: BeamMap = field(repr=False)

    @property
    def unit(self) -> str:
        return self.beam.unit

    @property
    def peak(self) -> float:
        """The map's largest finite value (cd or relative)."""
        v = self.beam.intensity[np.isfinite(self.beam.intensity)]
        return float(v.max()) if v.size else float("nan")

    @property
    def figures(self) -> dict:
        """The report's figures, and its colour figures (:data:`beamshot.vocabulary.COLOUR_FIGURES`) when
        colour was measured."""
        f = self.report.get("figures")
        return {**(f if isinstance(f, dict) else {}), **colour_figures_of(self.report)}

    @property
    def clipped(self) -> bool:
        return bool(np.any(self.beam.saturated))


def _report_path(path: str) -> str:
    p = os.fspath(path)
    if os.path.isdir(p):
        q = os.path.join(p, "report.json")
        if not os.path.isfile(q):
            raise BeamshotError(f"{p}: no report.json in this folder; give a folder written by "
                                "'beamshot analyze ... --out DIR'")
        return q
    if not os.path.exists(p):
        raise BeamshotError(f"{p}: no such file or folder; check the path")
    return p


def load_light(path, label: str | None = None) -> Light:
    """Read an analysis folder (or its report.json) and the intensity map beside it; one-line refusals."""
    from .farfield import check_report
    from .report.intensity_map import read_intensity_map
    from .report.output import read_report_json

    rp = _report_path(path)
    report = read_report_json(rp)
    check_report(report, rp)
    beam = read_intensity_map(os.path.dirname(os.path.abspath(rp)))
    if label is None:
        name = (report.get("settings") or {}).get("light_name")
        label = name if isinstance(name, str) and name.strip() else \
            os.path.basename(os.path.dirname(os.path.abspath(rp))) or "light"
    return Light(label=" ".join(str(label).split()) or "light", report_path=rp, report=report, beam=beam)


def resolve_labels(n: int, labels) -> list[str | None]:
    """One label per light from ``--label`` (all or none), else None (the report's name is used)."""
    labels = list(labels or ())
    if labels and len(labels) != n:
        raise BeamshotError(f"{len(labels)} --label for {n} reports; give one --label per report, in order, "
                            "or none (the lights' names are used)")
    return labels or [None] * n


def _unique_labels(lights: list[Light], notes: list[str]) -> list[Light]:
    """Lights sharing a label get ' #2', ' #3'... in order, with one note naming them."""
    from dataclasses import replace

    seen: dict[str, int] = {}
    out, renamed = [], []
    for light in lights:
        k = seen.get(light.label, 0) + 1
        seen[light.label] = k
        if k > 1:
            light = replace(light, label=f"{light.label} #{k}")
            renamed.append(light.label)
        out.append(light)
    if renamed:
        shown = ", ".join(f"'{r}'" for r in renamed[:4]) + (", ..." if len(renamed) > 4 else "")
        notes.append(f"lights with the same name are numbered in the order given ({shown}); give --label to name them")
    return out


# ----------------------------------------------------------------------------- rendering
def wall_illuminance(beam: BeamMap, half_width_m: float, wall_distance_m: float = WALL_DISTANCE_M,
                     n: int = TILE_PX) -> np.ndarray:
    """``E = I cos^3(theta) / D^2`` on a square wall grid ``(n, n)``, row 0 at the top, x right, y up.

    The wall is square to the beam axis at ``wall_distance_m``; the grid spans
    ``-half_width_m ... +half_width_m``.  Unit: lx for a map in cd (map unit / m^2 otherwise);
    NaN where the map does not cover the direction.
    """
    a = np.linspace(-half_width_m, half_width_m, n)
    xx, yy = np.meshgrid(a, a[::-1])
    theta = np.arctan(np.hypot(xx, yy) / wall_distance_m)
    phi = np.arctan2(yy, xx)
    inten = beam.sample(directions(theta, phi))
    return inten * np.cos(theta) ** 3 / wall_distance_m**2


def angular_intensity(beam: BeamMap, half_angle_deg: float, n: int = TILE_PX) -> np.ndarray:
    """I in azimuthal-equidistant angles ``(n, n)`` about the axis, row 0 at the top (up positive).

    Directions outside the photo's outline are NaN (the same sampling as the report picture).
    """
    from .report.plots import _azimuthal_grid

    _, vals = _azimuthal_grid(beam, half_angle_deg, n)
    return vals[::-1]  # the grid's row 0 is at the bottom (y up); pictures and tiles have it at the top


def _half_angle_of(light: Light) -> float | None:
    for key in ("spill_angle", "field_angle", "hotspot_angle"):
        f = light.figures.get(key) or {}
        v = f.get("value")
        if isinstance(v, (int, float)) and v > 0:
            return float(v) / 2.0 * (1.0 if key == "spill_angle" else 1.6)
    return None


def common_half_angle(lights: list[Light]) -> float:
    """Half angle of the common angular scale (deg): :data:`HALF_ANGLE_MARGIN` x the widest spill edge
    (or 1.6 x the field or hotspot half angle where no edge was measured), within
    :data:`HALF_ANGLE_LIMITS_DEG` and the widest map."""
    halves = [h for h in (_half_angle_of(x) for x in lights) if h]
    widest_map = max(float(np.degrees(x.beam.theta[-1])) for x in lights)
    h = HALF_ANGLE_MARGIN * max(halves) if halves else widest_map
    lo, hi = HALF_ANGLE_LIMITS_DEG
    return float(np.clip(min(h, widest_map), lo, hi))


# ----------------------------------------------------------------------------- figures
def _figure_entry(f) -> dict:
    if not isinstance(f, dict):
        return {"value": None, "uncertainty": None, "unit": "", "status": "not_measured", "label": "",
                "reason": "not in the report"}
    return {k: f.get(k) for k in ("value", "uncertainty", "unit", "status", "reason")}


def _figure_triple(f: dict):
    return float(f["value"]), float(f["uncertainty"]), dict(f.get("budget") or {})


def compare_figures(lights: list[Light], *, same_meter: bool = False, k: float = COVERAGE_K) -> list[dict]:
    """For every pair (a before b) and figure: difference, combined 1-sigma uncertainty and verdict."""
    from .farfield import SHARED_SCALE_TERMS, _same_instrument, combined_sigma

    keys = [key for key in (*FIGURES, *COLOUR_FIGURES) if any(key in x.figures for x in lights)]
    out = []
    for i in range(len(lights)):
        for j in range(i + 1, len(lights)):
            a, b = lights[i], lights[j]
            shared = tuple(t for t in SHARED_SCALE_TERMS if same_meter and _same_instrument(a.report, b.report, t))
            for key in keys:
                fa, fb = a.figures.get(key) or {}, b.figures.get(key) or {}
                entry = {"figure": key, "label": _full_label(key), "unit": term(key).unit, "a": a.label,
                         "b": b.label, "difference": None, "combined_uncertainty": None, "k": k,
                         "verdict": "not compared", "reason": None}
                reason = _not_comparable(fa, fb, a.label, b.label)
                if reason is None:
                    ta, tb = _figure_triple(fa), _figure_triple(fb)
                    diff = tb[0] - ta[0]
                    sigma = combined_sigma(ta, tb, shared)
                    if not (np.isfinite(sigma) and sigma > 0 and np.isfinite(diff)):
                        reason = "no usable uncertainty in either report"
                    else:
                        entry.update(difference=diff, combined_uncertainty=sigma,
                                     verdict="significant" if abs(diff) > k * sigma else "not distinguishable")
                entry["reason"] = reason
                out.append(entry)
    return out


def _full_label(key: str) -> str:
    """The vocabulary's label, with the parent figure's for the horizontal / vertical parts."""
    t = term(key)
    return f"{figure_label(t.part_of)}, {t.label}" if t.part_of else t.label


def _not_comparable(fa: dict, fb: dict, la: str, lb: str) -> str | None:
    """Why a pair of figure dicts cannot be compared, or None when both are values with uncertainties."""
    for f, who in ((fa, la), (fb, lb)):
        st = f.get("status")
        if f.get("value") is None or st == "not_measured" or not f:
            return f"not measured for {who}" + (f" ({f['reason']})" if f.get("reason") else "")
    for f, who in ((fa, la), (fb, lb)):
        st = f.get("status")
        if st in ("lower_bound", "upper_bound"):
            which = "a lower" if st == "lower_bound" else "an upper"
            return (f"only {which} bound for {who}: a bound is not a value with an uncertainty, "
                    "so a difference to it cannot be tested")
    for f, who in ((fa, la), (fb, lb)):
        if f.get("uncertainty") is None:
            return f"no uncertainty for {who}"
    if fa.get("unit") != fb.get("unit"):
        return f"units differ ({fa.get('unit')!r} and {fb.get('unit')!r})"
    return None


# ----------------------------------------------------------------------------- the comparison
@dataclass(frozen=True)
class Comparison:
    """Everything a comparison produced (the pictures are drawn from it by report.compare_plots)."""

    lights: list[Light]
    absolute: bool
    notes: list[str]
    exposure: dict
    differences: list[dict]
    #: per light: wall display values (sRGB, 0-1; NaN outside the photo), shape (TILE_PX, TILE_PX)
    wall_tiles: list[np.ndarray] = field(repr=False)
    #: per light: intensity in the map scale's unit (cd, or fraction of the light's own peak)
    angular_tiles: list[np.ndarray] = field(repr=False)
    #: log2(I_a / I_b) for exactly two lights (NaN where not both above RATIO_FLOOR), else None
    ratio_tile: np.ndarray | None = field(repr=False, default=None)
    created_utc: str = ""

    @property
    def scales(self) -> list[float]:
        """The factor each light's map was multiplied by for the pictures (1, or 1 / own peak)."""
        return [1.0 if self.absolute else 1.0 / x.peak for x in self.lights]


def build_comparison(lights: list[Light], *, wall_distance_m: float = WALL_DISTANCE_M, same_meter: bool = False,
                     tile_px: int = TILE_PX) -> Comparison:
    """Put ``lights`` on one exposure, tone curve and angular scale; compare their figures."""
    n = len(lights)
    if not MIN_LIGHTS <= n <= MAX_LIGHTS:
        raise BeamshotError(f"{n} light{'s' if n != 1 else ''} given; compare takes {MIN_LIGHTS} to {MAX_LIGHTS} "
                            "analysis folders")
    if not (np.isfinite(wall_distance_m) and 0.5 <= wall_distance_m <= 100.0):
        raise BeamshotError(f"--wall-distance {wall_distance_m:g} m: give a wall distance from 0.5 to 100 m")
    notes: list[str] = []
    lights = _unique_labels(list(lights), notes)
    for x in lights:
        if not (np.isfinite(x.peak) and x.peak > 0):
            raise BeamshotError(f"{x.report_path}: the intensity map holds no light; analyse that photo again")
    absolute = all(x.unit == "cd" for x in lights)
    if not absolute:
        rel = [x.label for x in lights if x.unit != "cd"]
        notes.append(f"not every light is in cd ({', '.join(rel)} relative: no lux reading, camera constant or "
                     "exposure metadata): every map is normalised to its own peak, so the pictures compare beam "
                     "shapes, not brightness")
    estimated = [x.label for x in lights if x.unit == "cd" and _scale_kind(x) == "exposure_metadata"]
    if absolute and estimated:
        notes.append(f"the absolute scale of {', '.join(estimated)} is estimated from exposure metadata (about "
                     "±28 %): brightness differences in the pictures carry that uncertainty")
    grids = {(round(np.degrees(x.beam.d_theta), 6), len(x.beam.phi)) for x in lights}
    if len(grids) > 1:
        shown = "; ".join(f"{x.label}: {np.degrees(x.beam.d_theta):g}° x {360 / len(x.beam.phi):g}°" for x in lights)
        notes.append(f"the maps are on different grids ({shown}): every picture samples each map at the same "
                     "directions (bilinear), so they are compared on one grid")
    reach = [float(np.degrees(x.beam.theta[-1] + x.beam.d_theta / 2)) for x in lights]
    half = common_half_angle(lights)
    short = [f"{x.label} ({r:.0f}°)" for x, r in zip(lights, reach) if r < half - 1e-6]
    if short:
        notes.append(f"some maps end before the common half angle of {half:.0f}°: {', '.join(short)}; beyond "
                     "their end they are drawn as not covered, never as dark")
    dists = [float((x.report.get("settings") or {}).get("distance_m") or x.beam.distance_m) for x in lights]
    if max(dists) > 1.1 * min(dists):
        notes.append("the lights were measured at different wall distances (" +
                     ", ".join(f"{x.label} {d:g} m" for x, d in zip(lights, dists)) +
                     "): intensity does not depend on distance in the far field; check it with 'beamshot far-field'")
    clipped = [x.label for x in lights if x.clipped]
    if clipped:
        notes.append(f"the photo of {', '.join(clipped)} was clipped: the brightest part of its map is only a lower "
                     "bound and is drawn too dark")
    if same_meter:
        notes.append("--same-meter: the lux meter's calibration (or the same camera profile's constant) is taken as "
                     "the same error in every report and cancels in the differences; every other term is independent")
    else:
        notes.append("every uncertainty term is counted independently in each light (conservative); give "
                     "--same-meter when one lux meter or one camera constant scaled all of them")

    scales = [1.0 if absolute else 1.0 / x.peak for x in lights]
    wall_half = wall_distance_m * float(np.tan(np.radians(half)))
    walls = [wall_illuminance(x.beam, wall_half, wall_distance_m, tile_px) * s for x, s in zip(lights, scales)]
    tops = [float(np.nanmax(w)) if np.any(np.isfinite(w)) else 0.0 for w in walls]
    brightest = int(np.argmax(tops))
    e_full = tops[brightest]
    if not e_full > 0:
        raise BeamshotError("no light reaches the common wall view; the maps hold no light near their axes")
    wall_tiles = [srgb_tone(w / e_full) for w in walls]
    angular = [angular_intensity(x.beam, half, tile_px) * s for x, s in zip(lights, scales)]
    top_i = max(x.peak * s for x, s in zip(lights, scales))
    exposure = {
        "rule": "the largest wall illuminance of the brightest light is full scale; one exposure for every light"
                + ("" if absolute else " (each map first normalised to its own peak)"),
        "tone_curve": "sRGB encoding, IEC 61966-2-1 (display value = sRGB(E / full_scale), clipped to 0-1)",
        "wall_distance_m": wall_distance_m,
        "full_scale": e_full if absolute else None,
        "full_scale_unit": "lx" if absolute else "fraction of each light's own peak / m^2",
        "full_scale_light": lights[brightest].label,
        "normalised_to_each_peak": not absolute,
        "half_angle_deg": half,
        "wall_half_width_m": wall_half,
        "map_scale": {"kind": "log10", "top": top_i if absolute else 1.0, "decades": MAP_DECADES,
                      "unit": "cd" if absolute else "fraction of peak"},
        "same_meter": bool(same_meter),
        "tile_px": tile_px,
    }
    ratio = None
    if n == 2:
        a, b = (angular[0] / (lights[0].peak * scales[0]), angular[1] / (lights[1].peak * scales[1]))
        with np.errstate(divide="ignore", invalid="ignore"):
            ok = (a > RATIO_FLOOR) & (b > RATIO_FLOOR)
            ratio = np.where(ok, np.log2(angular[0] / angular[1]), np.nan)
    return Comparison(lights=lights, absolute=absolute, notes=notes, exposure=exposure,
                      differences=compare_figures(lights, same_meter=same_meter), wall_tiles=wall_tiles,
                      angular_tiles=angular, ratio_tile=ratio,
                      created_utc=dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds"))


def _scale_kind(light: Light):
    """The report's ``calibration.absolute_scale.kind`` (None when absent)."""
    return ((light.report.get("calibration") or {}).get("absolute_scale") or {}).get("kind")


def _slug(text: str) -> str:
    s = re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")
    if len(s) > 32:  # cut at a word boundary where there is one
        cut = s[:33].rsplit("-", 1)[0]
        s = cut if len(cut) >= 12 else s[:32]
    return s or "light"


def card_names(comp: Comparison) -> list[str]:
    """File names of the lights' cards: ``card-<n>-<label slug>.png``."""
    return [f"card-{i}-{_slug(x.label)}.png" for i, x in enumerate(comp.lights, start=1)]


def comparison_dict(comp: Comparison, out_dir: str, *, reach: bool = True) -> dict:
    """The JSON form of a comparison (docs/compare.md); report paths relative to ``out_dir``."""
    from .report.model import CAUTIONS, rounded

    cards = card_names(comp)
    lights = []
    for x, card in zip(comp.lights, cards):
        figs = {}
        for key, f in x.figures.items():
            e = _figure_entry(f)
            e["label"] = _full_label(key) if key in FIGURES else figure_label(key)
            figs[key] = e
        settings = x.report.get("settings") or {}
        lights.append({"label": x.label,
                       "report": os.path.relpath(os.path.abspath(x.report_path), os.path.abspath(out_dir)),
                       "unit": x.unit, "distance_m": settings.get("distance_m", x.beam.distance_m),
                       "scale": _scale_kind(x),
                       "clipped": x.clipped, "card": card, "figures": figs})
    cautions = list(CAUTIONS)
    for x in comp.lights:
        for c in x.report.get("cautions") or ():
            if isinstance(c, str) and c not in cautions:
                cautions.append(c)
    return rounded({
        "schema": COMPARISON_SCHEMA, "schema_version": COMPARISON_VERSION, "created_utc": comp.created_utc,
        "absolute": comp.absolute, "notes": list(comp.notes), "exposure": comp.exposure, "lights": lights,
        "differences": comp.differences,
        "pictures": {"sheet": "sheet.png", "profiles": "profiles.png",
                     "difference": "difference.png" if comp.ratio_tile is not None else None,
                     "reach": "reach.png" if reach and comp.absolute else None, "cards": cards},
        "cautions": cautions,
    })


# ----------------------------------------------------------------------------- writing the set
#: Files a comparison folder may hold (besides the cards): ours, or the HTML page's.
_SET_FILES = ("comparison.json", "sheet.png", "profiles.png", "difference.png", "reach.png", "comparison.html")
_CARD = re.compile(r"^card-\d+-[a-z0-9-]+\.png$")


def _is_comparison_set(path: str) -> tuple[bool, list[str]]:
    names = sorted(os.listdir(path))
    foreign = [n for n in names if n not in _SET_FILES and not _CARD.match(n)]
    if foreign:
        return False, foreign
    if COMPARISON_FILE in names:
        try:
            with open(os.path.join(path, COMPARISON_FILE), "rb") as fh:
                data = json.loads(fh.read(20_000_000).decode("utf-8"))
            if not (isinstance(data, dict) and data.get("schema") == COMPARISON_SCHEMA):
                return False, [f"{COMPARISON_FILE} (not a beamshot comparison)"]
        except (OSError, ValueError):
            return False, [f"{COMPARISON_FILE} (not a beamshot comparison)"]
    return True, []


def write_comparison(comp: Comparison, out_dir) -> list[str]:
    """Write comparison.json, the pictures and comparison.html into ``out_dir`` as one set,
    replacing an older set whole (:func:`beamshot.report.output.write_set`)."""
    from .report.output import write_set

    out_arg = os.fspath(out_dir)
    out = os.path.realpath(os.path.abspath(out_arg))
    inputs = [os.path.realpath(os.path.dirname(os.path.abspath(x.report_path))) for x in comp.lights]
    if out in inputs:
        raise BeamshotError(f"{out_arg}: is one of the analysis folders being compared; choose a new folder for --out")
    return write_set(out_dir, lambda tmp: _write_files(comp, tmp, out_arg), is_ours=_is_comparison_set,
                     writer="beamshot compare", doing="write the comparison there")


def _write_files(comp: Comparison, folder: str, out_arg: str) -> None:
    from .report.card import card_figure
    from .report.compare_plots import difference_figure, profiles_figure, reach_overlay_figure, sheet_figure

    data = comparison_dict(comp, out_arg)
    with open(os.path.join(folder, COMPARISON_FILE), "w", encoding="utf-8") as fh:
        json.dump(data, fh, indent=2, ensure_ascii=False, allow_nan=False)
        fh.write("\n")
    sheet_figure(comp, os.path.join(folder, "sheet.png"))
    profiles_figure(comp, os.path.join(folder, "profiles.png"))
    if comp.ratio_tile is not None:
        difference_figure(comp, os.path.join(folder, "difference.png"))
    if data["pictures"]["reach"]:
        reach_overlay_figure(comp, os.path.join(folder, "reach.png"))
    for i, name in enumerate(data["pictures"]["cards"]):
        card_figure(comp, i, os.path.join(folder, name))
    from .report.html import write_comparison_html

    write_comparison_html(folder)  # last: the page reads the files above


def compare(paths, *, labels=None, out_dir=None, wall_distance_m: float = WALL_DISTANCE_M,
            same_meter: bool = False) -> Comparison:
    """Load 2-12 analysis folders, compare them, and write the set to ``out_dir`` (if given)."""
    paths = list(paths)
    if not MIN_LIGHTS <= len(paths) <= MAX_LIGHTS:
        raise BeamshotError(f"{len(paths)} report{'s' if len(paths) != 1 else ''} given; compare takes "
                            f"{MIN_LIGHTS} to {MAX_LIGHTS} analysis folders")
    names = resolve_labels(len(paths), labels)
    lights = [load_light(p, lab) for p, lab in zip(paths, names)]
    comp = build_comparison(lights, wall_distance_m=wall_distance_m, same_meter=same_meter)
    if out_dir is not None:
        write_comparison(comp, out_dir)
    return comp
