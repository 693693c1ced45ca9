"""report.html: one self-contained page per analysis (and, via :mod:`.html_comparison`, per comparison).

The page holds the figures table (value ± 1σ standard uncertainty, unit, status, method and the
one-line definition from :mod:`beamshot.vocabulary`), the intensity map with angle rings, the
analysis' 50 % and 10 % contours and the spill edge plus iso-intensity lines at 1 % and 0.1 % of
the peak (colour-blind-safe perceptual map ``cividis``, scale in cd or relative to the peak), the
radial and plane profiles (inline SVG), the inputs (files with SHA-256, camera profile, distance,
options), every warning and the safety cautions.  Numbers come from the same dict that is written
to report.json (``BeamReport.to_dict``), and each figure's row carries them exactly in
``data-value`` / ``data-uncertainty`` attributes, so a reader or a test can check that the page
says what the JSON says.  The frame (escaping, CSS, no requests) is :mod:`.html_page`.
"""

from __future__ import annotations

import json

import numpy as np

from .. import vocabulary
from ..figure import Figure
from .plots import FROM_REPORT, ISO_LEVELS
from .html_page import esc, number_attr, page, png_data_uri, table, write_text_atomic

__all__ = ["HTML_FILE", "figure_rows", "report_html", "write_comparison_html", "write_report_html"]

HTML_FILE = "report.html"
#: Map picture: width in inches and resolution (about 800 px wide, sharp when shown 400-600 px wide).
MAP_WIDTH_IN, MAP_DPI = 5.4, 150


def write_comparison_html(out_dir):
    """comparison.html for a ``beamshot compare`` folder (see :mod:`.html_comparison`)."""
    from .html_comparison import write_comparison_html as write

    return write(out_dir)


# ------------------------------------------------------------------------------- figures table

def _value_text(f: dict) -> str:
    """``≈ 8.07 ± 0.41°`` from a figure's JSON dict (GUM rounding via :class:`Figure`), '—' if none."""
    if f.get("value") is None:
        return "—"
    fig = Figure(value=f["value"], uncertainty=f.get("uncertainty"), unit=f.get("unit", ""), method="",
                 status=f.get("status", "measured"))
    return fig.text()


def figure_rows(figures: dict, *, with_method: bool = True) -> list[str]:
    """One ``<tr>`` per figure (components indented under their figure), numbers exact in data-*."""
    rows = []
    for key, f in figures.items():
        t = vocabulary.term(key)
        status = f.get("status", "")
        cls = " ".join(c for c in ("part" if t.part_of else "", "missing" if f.get("value") is None else "") if c)
        attrs = (f'data-key="{esc(key)}" data-value="{number_attr(f.get("value"))}" '
                 f'data-uncertainty="{number_attr(f.get("uncertainty"))}" data-unit="{esc(f.get("unit", ""))}" '
                 f'data-status="{esc(status)}"')
        method = f.get("method") or ""
        if f.get("reason"):
            method = f"not measured: {f['reason']}" if f.get("value") is None else f"{method} ({f['reason']})"
        cells = [f'<td>{esc(t.label)}</td>',
                 f'<td class="num value">{esc(_value_text(f))}</td>',
                 f'<td class="unit">{esc(vocabulary.unit_text(f.get("unit", "")) or "—")}</td>',
                 f'<td><span class="status s-{esc(status)}">{esc(vocabulary.STATUS_WORDS.get(status, status))}</span></td>']
        if with_method:
            cells.append(f'<td class="method wide">{esc(method)}</td>')
        cells.append(f'<td class="def wide">{esc(t.definition)}</td>')
        rows.append(f'<tr class="{cls}" {attrs}>' + "".join(cells) + "</tr>")
    return rows


def _figures_section(d: dict) -> str:
    rows = figure_rows(d["figures"])
    return ('<section id="figures"><h2>Figures</h2>'
            '<p class="note">Value ± one standard uncertainty (1σ). Marks: ≈ estimate (rests on assumptions '
            'named in the method), ≥ lower bound, ≤ upper bound; “not measured” gives the reason.</p>'
            + table(["figure", "value ± 1σ", "unit", "status", "method", "definition"], rows, cls="figures rows2")
            + _budget_details(d["figures"]) + "</section>")


def _shape_section(d: dict) -> str:
    """Beam shape and artefacts (report.json ``shape``; docs/artefacts.md), when the report has them."""
    shape = d.get("shape")
    if not shape:
        return ""
    return ('<section id="shape"><h2>Beam shape and artefacts</h2>'
            '<p class="note">Rings, a centre hole, sectors and the principal axes of the hotspot and the spill; '
            'the ISO 11146 second-moment diameters and the ISO 13694 flatness, uniformity and edge steepness '
            'of the hotspot. An artefact the noise could hide is an upper bound (“not distinguishable from '
            'noise”). Fractions have no unit: 0.05 is 5 %.</p>'
            + table(["figure", "value ± 1σ", "unit", "status", "method", "definition"], figure_rows(shape),
                    cls="figures rows2") + "</section>")


_ZONE_WORDS = {"hotspot": "hotspot (inside 50 %)", "corona": "corona (10-50 %)", "spill": "spill (to the edge)"}
_COLOUR_KEYS = (("cct", "CCT", "K"), ("duv", "Duv", ""), ("u_prime", "u′", ""), ("v_prime", "v′", ""),
                ("x", "x", ""), ("y", "y", ""))


def _colour_cell(f: dict | None) -> str:
    if not f:
        return '<td class="num">—</td>'
    attrs = (f'data-value="{number_attr(f.get("value"))}" data-uncertainty="{number_attr(f.get("uncertainty"))}" '
             f'data-status="{esc(f.get("status", ""))}"')
    title = f' title="{esc(f["reason"])}"' if f.get("reason") else ""
    return f'<td class="num" {attrs}{title}>{esc(_value_text(f))}</td>'


def _colour_section(d: dict, tint_png: bytes | None) -> str:
    """Colour across the beam (report.json ``colour``; docs/colour.md), when it was asked for."""
    c = d.get("colour")
    if not c:
        return ""
    parts = ['<section id="colour"><h2>Colour across the beam</h2>']
    if not c.get("measured"):
        parts.append(f'<p class="note">Colour not measured: {esc(c.get("reason") or "")}</p>')
    else:
        rows = []
        for zone, z in (c.get("zones") or {}).items():
            cells = "".join(_colour_cell(z.get(k)) for k, _, _ in _COLOUR_KEYS)
            rows.append(f'<tr data-zone="{esc(zone)}"><td>{esc(_ZONE_WORDS.get(zone, zone))}</td>{cells}</tr>')
        parts.append(table(["zone"] + [f"{lab} ({u})" if u else lab for _, lab, u in _COLOUR_KEYS], rows,
                           cls="colour"))
        tint = c.get("tint") or {}
        facts = []
        for key, words in (("zones_max_delta_uv", "largest Δu′v′ between zones"),
                           ("map_max_delta_uv", "largest Δu′v′ across the map")):
            f = tint.get(key)
            if isinstance(f, dict):
                facts.append(f'<li data-key="{esc(key)}" data-value="{number_attr(f.get("value"))}">{esc(words)}: '
                             f'{esc(_value_text(f))}' + (f' ({esc(f["reason"])})' if f.get("reason") else "") + "</li>")
        transform = c.get("transform") or {}
        if transform.get("source"):
            facts.append(f"<li>colour transform: {esc(transform['source'])}; {esc(transform.get('white_balance', ''))}</li>")
        parts.append("<ul>" + "".join(facts) + "</ul>")
        if tint_png:
            parts.append(f'<figure><img src="{png_data_uri(tint_png)}" alt="tint map and u′v′ against angle">'
                         "<figcaption>Intensity, tint (Δu′v′ from the hotspot's colour) and the colour of each "
                         "ring on the CIE 1976 diagram with the Planckian locus.</figcaption></figure>")
    notes = list(c.get("notes") or []) + list(c.get("limits") or [])
    if notes:
        parts.append('<ul class="note">' + "".join(f"<li>{esc(n)}</li>" for n in notes) + "</ul>")
    parts.append("</section>")
    return "".join(parts)


def _qa_section(d: dict) -> str:
    """The figures judged against a beam specification (``analyze --spec``), when there is one."""
    q = d.get("qa")
    if not q:
        return ""
    rows = []
    for c in q.get("checks") or []:
        v = str(c.get("verdict", ""))
        rows.append(f'<tr data-qa="{esc(c.get("figure", ""))}" data-verdict="{esc(v)}">'
                    f'<td>{esc(vocabulary.label(str(c.get("figure", ""))))}</td>'
                    f'<td>{esc((c.get("limit") or {}).get("text", ""))}</td>'
                    f'<td><span class="status s-{esc(v.replace(" ", "_"))}">{esc(v)}</span></td>'
                    f'<td class="wide">{esc(c.get("why", ""))}</td></tr>')
    name = q.get("spec") or q.get("source") or "the specification"
    k = f'{q.get("coverage_factor", 2.0):g}'
    return (f'<section id="qa"><h2>Against the specification</h2><p class="verdict" data-verdict="{esc(q["verdict"])}">'
            f'{esc(name)}: <strong>{esc(str(q["verdict"]).upper())}</strong> — a figure passes only if its whole '
            f'interval value ± {esc(k)}·u lies inside its limit, fails only if it lies wholly outside, and is '
            'otherwise undecided (docs/spec.md).</p>' + table(["figure", "limit", "verdict", "why"], rows, cls="qa")
            + "</section>")


def _budget_details(figures: dict) -> str:
    parts = []
    for key, f in figures.items():
        b = f.get("budget")
        if not b:
            continue
        unit = vocabulary.unit_text(f.get("unit", ""))
        unit = unit if unit in ("°", "") else f" {unit}"
        items = "".join(f"<tr><td>{esc(src)}</td><td class=\"num\">{esc(_short(u))}{esc(unit)}</td></tr>"
                        for src, u in b.items())
        parts.append(f"<h3>{esc(vocabulary.label(key))}</h3><div class=\"scroll\"><table><tbody>{items}"
                     "</tbody></table></div>")
    if not parts:
        return ""
    return ("<details><summary>Uncertainty budgets (1σ contribution of each source)</summary>"
            + "".join(parts) + "</details>")


def _short(x) -> str:
    if x is None:
        return "—"
    return f"{x:.2g}" if abs(x) < 1e-3 or abs(x) >= 1e6 else f"{float(f'{x:.2g}'):g}"


# ------------------------------------------------------------------------------- pictures

def _map_png(report) -> bytes:
    """The map panel of beam.png (title, map, colour bar and legend, :mod:`beamshot.report.beam_picture`),
    for a page written without beam.png's drawing at hand; :func:`beamshot.report.output.write_report`
    passes the panel it drew for beam.png instead."""
    from .beam_picture import beam_pictures

    return beam_pictures(report)[1]


def _profiles_svg(report, figures: dict, noise=FROM_REPORT) -> str:
    from ..profile import plane_profile
    from .html_profiles import svg_chart

    beam = report.beam
    relative = beam.unit != "cd"
    p = report.profile
    mean = np.asarray(p.mean, float)
    peak = float(np.nanmax(mean)) if np.any(np.isfinite(mean)) else 1.0
    scale = 1.0 / peak if relative and peak > 0 else 1.0
    ylabel = "intensity (relative to peak)" if relative else "intensity (cd)"
    cover = np.asarray(p.theta_deg)[np.isfinite(mean)]
    reach = float(cover.max()) if cover.size else float(np.degrees(beam.theta[-1]))
    marks = []
    for key in ("hotspot_angle", "field_angle", "spill_angle"):
        f = figures.get(key) or {}
        if f.get("value") is not None:
            marks.append((float(f["value"]), vocabulary.label(key)))
    spill = figures.get("spill_angle", {}).get("value")
    full_max = min(2 * reach, 1.25 * spill) if spill else 2 * reach
    if noise is FROM_REPORT:
        from .plots import report_noise_floor

        noise = report_noise_floor(report)
    level = noise.mean_level * scale if noise is not None else None
    radial = svg_chart([("azimuthal mean", 2 * np.asarray(p.theta_deg), mean * scale)], floor=level,
                       xlabel="full cone angle (°), twice the angle from the axis", ylabel=ylabel, log_y=True,
                       x_range=(0.0, max(full_max, 1.0)), marks=marks, title="radial profile (log scale)",
                       gid="radial-profile")
    h_ang, h_val = plane_profile(beam, 0.0)
    v_ang, v_val = plane_profile(beam, 90.0)
    half = max(full_max / 2, 0.5)
    planes = svg_chart([("horizontal (right +)", h_ang, h_val * scale), ("vertical (up +)", v_ang, v_val * scale)],
                       xlabel="angle from the beam axis (°)", ylabel=ylabel, log_y=False, x_range=(-half, half),
                       title="horizontal and vertical planes (linear scale)", gid="plane-profiles")
    return radial, planes, level


def _pictures_section(report, d: dict, picture: bool, map_png: bytes | None = None, noise=FROM_REPORT) -> str:
    if not picture:
        return ('<section id="pictures"><h2>Map and profiles</h2><p class="note">Pictures were turned off for '
                'this analysis (no map or profile drawn); the numbers are in the table above and in profile.csv '
                'and intensity-map.npz beside this page.</p></section>')
    uri = png_data_uri(map_png if map_png is not None else _map_png(report))
    unit_note = ("intensity in cd" if report.beam.unit == "cd"
                 else "intensity relative to the peak (no absolute scale)")
    radial, planes, level = _profiles_svg(report, d["figures"], noise)
    below = (f" Values below the detection level of the dark wall beyond the spill ({_short(level)}"
             f"{' cd' if report.beam.unit == 'cd' else ' of the peak'}: its median + 3σ) are not drawn."
             if level else "")
    clipped = (" The photo is clipped (overexposed) in the hatched area of the map: there the profiles show the "
               "clipped level, not the beam." if np.any(report.beam.saturated) else "")
    return ('<section id="pictures"><h2>Map and profiles</h2><div class="pictures two">'
            f'<figure><img src="{uri}" alt="intensity map of the beam with angle rings and contours" '
            f'width="{int(MAP_WIDTH_IN * MAP_DPI)}"><figcaption>Intensity I(θ, φ) seen from behind the light, '
            f'{esc(unit_note)}, logarithmic colour scale (cividis). Rings mark full cone angles; solid and dashed '
            'lines the 50 % and 10 % contours; dotted white lines are iso-intensity lines at '
            f'{_iso_words()} of the peak where the map reaches them above its noise floor.</figcaption></figure>'
            f'<div><figure>{radial}<figcaption>Mean over azimuth at each angle, with the hotspot, field and '
            f'spill angles.{esc(below)}{esc(clipped)}</figcaption></figure><figure>{planes}<figcaption>Cuts through the beam '
            'axis in the wall\'s horizontal and vertical planes.</figcaption></figure></div>'
            '</div></section>')


def _iso_words() -> str:
    """'1 % and 0.1 %': the iso-intensity levels the map draws (:data:`~beamshot.report.plots.ISO_LEVELS`)."""
    words = [f"{lv * 100:g} %" for lv in sorted(ISO_LEVELS, reverse=True)]
    return ", ".join(words[:-1]) + " and " + words[-1] if len(words) > 1 else "".join(words)


# ------------------------------------------------------------------------------- inputs, warnings

def _facts(pairs: list[tuple[str, object]]) -> str:
    items = "".join(f"<dt>{esc(k)}</dt><dd>{v}</dd>" for k, v in pairs if v not in (None, ""))
    return f'<dl class="facts">{items}</dl>'


def _plain(v) -> str:
    """A setting's value as escaped text (lists and objects as compact JSON)."""
    if v is None:
        return "—"
    if isinstance(v, (dict, list)):
        return f"<code>{esc(json.dumps(v, ensure_ascii=False))}</code>"
    if isinstance(v, bool):
        return "yes" if v else "no"
    return esc(v)


def _ambient_text(amb) -> str:
    """The light-off photo as words: its file and, when its exposure differs, the ratio applied."""
    if not amb:
        return "—"
    if not isinstance(amb, dict):
        return esc(amb)
    ratio = amb.get("exposure_ratio")
    extra = f" (exposure ratio {ratio:g}, scaled to the beam photo)" if isinstance(ratio, (int, float)) and ratio != 1 \
        else " (same exposure as the beam photo)" if ratio == 1 else ""
    return esc(str(amb.get("file", "")) + extra)


def exposure_text(t_s: float) -> str:
    """An exposure time as cameras write it: '1/14 s' for a short one that is such a fraction (within
    0.5 %, common practice), else 3 significant figures ('0.3 s', '2.5 s').

    >>> exposure_text(0.0714286), exposure_text(0.004), exposure_text(2.5), exposure_text(0.3)
    ('1/14 s', '1/250 s', '2.5 s', '0.3 s')
    """
    t = float(t_s)
    if 0 < t < 0.5:
        n = round(1.0 / t)
        if n >= 2 and abs(n * t - 1.0) <= 0.005:
            return f"1/{n} s"
    return f"{t:.3g} s"


def _inputs_section(d: dict) -> str:
    rows = []
    for i in d.get("inputs", []):
        exif = i.get("exif") or {}
        bits = []
        if exif.get("make") or exif.get("model"):
            bits.append(" ".join(str(x) for x in (exif.get("make"), exif.get("model")) if x))
        if exif.get("exposure_time_s"):
            bits.append(exposure_text(exif["exposure_time_s"]))
        if exif.get("f_number"):
            bits.append(f"f/{exif['f_number']:g}")
        if exif.get("iso"):
            bits.append(f"ISO {exif['iso']:g}")
        if exif.get("focal_35mm_mm"):
            bits.append(f"{exif['focal_35mm_mm']:g} mm (35 mm eq.)")
        size = f"{i.get('width')}×{i.get('height')}" if i.get("width") else ""
        rows.append(f"<tr><td data-label=\"role\">{esc(i.get('role', ''))}</td>"
                    f"<td class=\"file\" data-label=\"file\">{esc(i.get('name', ''))}</td>"
                    f"<td data-label=\"SHA-256\"><span class=\"hash\">{esc(i.get('sha256', ''))}</span></td>"
                    f"<td data-label=\"pixels\">{esc(size)}</td><td data-label=\"exposure\">{esc(', '.join(bits))}</td></tr>")
    s = d.get("settings", {})
    cal = d.get("calibration", {})
    prof = cal.get("camera_profile") or {}
    scale = cal.get("absolute_scale") or {}
    dist = s.get("distance_m")
    facts = _facts([
        ("distance to the wall", esc(f"{dist:g} m ± {s.get('distance_uncertainty_m', 0):g} m") if dist else None),
        ("camera", esc(s.get("camera_position", ""))),
        ("camera profile", esc(f"{prof.get('name', '')} ({'calibrated' if prof.get('calibrated') else 'not calibrated'})")
         if prof else None),
        ("tone curve", esc(f"{cal.get('response', s.get('response', ''))}"
                           + (f" ({cal['response_source']})" if cal.get("response_source") else ""))),
        ("flat field", esc(cal.get("flat_field", ""))),
        ("light-off photo", _ambient_text(cal.get("ambient"))),
        ("dark frame", esc(cal.get("dark_frame", ""))),
        ("photos merged", esc(cal["hdr_merge"]) if isinstance(cal.get("hdr_merge"), str)
         else _plain(cal.get("hdr_merge"))),
        ("absolute scale", esc(scale.get("description", "none: figures relative to the peak"))),
        ("wall mapping", esc((cal.get("wall_mapping") or {}).get("method", ""))),
    ])
    opts = "".join(f"<tr><td><code>{esc(k)}</code></td><td>{_plain(v)}</td></tr>" for k, v in s.items())
    terms = cal.get("uncertainty_terms") or []
    term_rows = [f"<tr><td>{esc(t.get('source'))}</td><td>{esc(t.get('size'))}</td><td>{esc(t.get('acts'))}</td>"
                 f"<td>{'assumed' if t.get('assumption') else 'measured or given'}</td></tr>" for t in terms]
    return ('<section id="inputs"><h2>Inputs</h2>'
            + table(["role", "file", "SHA-256", "pixels", "exposure"], rows, cls="inputs stack")
            + "<h3>Calibration and set-up</h3>" + facts
            + "<h3>Options and settings</h3>"
            + f'<div class="scroll"><table class="settings"><tbody>{opts}</tbody></table></div>'
            + ("<h3>Sources of uncertainty</h3>" + table(["source", "size", "how it acts", "kind"], term_rows)
               if term_rows else "")
            + "</section>")


def warnings_section(warnings: list[str]) -> str:
    if not warnings:
        return '<section id="warnings"><h2>Warnings</h2><p class="note">None.</p></section>'
    items = "".join(f"<li>{esc(w)}</li>" for w in warnings)
    return f'<section id="warnings"><h2>Warnings ({len(warnings)})</h2><ul class="warnings">{items}</ul></section>'


def cautions_section(cautions) -> str:
    items = "".join(f"<li>{esc(c)}</li>" for c in cautions)
    return f'<section id="cautions" class="cautions"><h2>Safety</h2><ul>{items}</ul></section>'


# ------------------------------------------------------------------------------- the page

def report_html(report, *, picture: bool = True, map_png: bytes | None = None, tint_png: bytes | None = None,
                data: dict | None = None, noise=FROM_REPORT) -> str:
    """The whole report page as text.  With ``picture=False`` no map or profile is drawn (says so);
    ``map_png``, the map panel already drawn for beam.png (:func:`beamshot.report.plots.beam_pictures`),
    saves drawing it again; ``data``, ``report.to_dict()`` when the caller has it already; ``noise``,
    its :func:`~beamshot.report.plots.report_noise_floor` likewise."""
    from .model import CAUTIONS

    d = report.to_dict() if data is None else data
    s = d.get("settings", {})
    beams = [i.get("name", "") for i in d.get("inputs", []) if i.get("role") == "beam"]
    name = s.get("light_name")
    title = name or (beams[0] if beams else "beam")
    sub = [f"photo {beams[0]}" + (f" (+{len(beams) - 1} bracket photos)" if len(beams) > 1 else "")
           if beams and name else "",
           f"wall at {s['distance_m']:g} m" if s.get("distance_m") else "",
           "absolute scale (cd)" if report.beam.unit == "cd" else "relative scale (no cd)"]
    sections = [_figures_section(d), _qa_section(d), _pictures_section(report, d, picture, map_png, noise),
                _shape_section(d), _colour_section(d, tint_png if picture else None),
                warnings_section(d.get("warnings", [])), _inputs_section(d), cautions_section(CAUTIONS)]
    tool = d.get("tool", {})
    footer = (f"beamshot {tool.get('version', '')} · report schema {d.get('schema_version', '')} · "
              f"{d.get('created_utc', '')} · the same numbers are in report.json beside this page")
    return page(f"{title}: beam report", " · ".join(x for x in sub if x), sections, footer)


def write_report_html(report, path, *, picture: bool = True, map_png: bytes | None = None,
                      tint_png: bytes | None = None, data: dict | None = None, noise=FROM_REPORT) -> None:
    """Write :func:`report_html` to ``path`` (UTF-8)."""
    write_text_atomic(path, report_html(report, picture=picture, map_png=map_png, tint_png=tint_png, data=data,
                                        noise=noise))
