"""comparison.html: one self-contained page for a ``beamshot compare`` folder, built from its comparison.json.

The shape of comparison.json is documented in docs/compare.md (schema ``beamshot.comparison``,
major version 1).  The page holds the notes (conversions the reader must know), the pictures of
the folder embedded as ``data:`` URIs (sheet, profiles, difference map, reach, beam cards), the
figures of every light side by side (value ± 1σ and status, numbers exact in ``data-*``
attributes), every pairwise difference with its combined uncertainty, coverage factor and
verdict, the common exposure, the lights' sources and the safety cautions.  All labels, paths
and notes are escaped; a picture name that is not a plain file name inside the folder is not
read.  The frame (CSS, no requests) is :mod:`.html_page`.
"""

from __future__ import annotations

import json
import os

from .. import vocabulary
from ..errors import BeamshotError, read_user_file
from ..figure import Figure
from .html_page import esc, number_attr, page, png_data_uri, table, write_text_atomic

__all__ = ["COMPARISON_HTML", "COMPARISON_JSON", "comparison_html", "read_comparison_json", "write_comparison_html"]

COMPARISON_JSON = "comparison.json"
COMPARISON_HTML = "comparison.html"
SCHEMA_NAME = "beamshot.comparison"
SCHEMA_MAJOR = 1
#: A picture larger than this is not embedded (a sheet of 12 lights stays well below it).
MAX_PICTURE_BYTES = 25_000_000
_VERDICT_CLASS = {"significant": "v-significant", "not distinguishable": "v-not-distinguishable",
                  "not compared": "v-not-compared"}


def read_comparison_json(out_dir) -> dict:
    """The comparison.json of a compare folder, refusing another schema or a newer major version."""
    path = os.path.join(os.fspath(out_dir), COMPARISON_JSON)
    raw = read_user_file(path, "give the folder written by 'beamshot compare ... --out DIR'")
    try:
        data = json.loads(raw.decode("utf-8"))
    except (ValueError, RecursionError):
        raise BeamshotError(f"{path}: not a beamshot comparison.json; run 'beamshot compare ... --out DIR' again") from None
    if not isinstance(data, dict) or data.get("schema") != SCHEMA_NAME:
        raise BeamshotError(f"{path}: not a beamshot comparison; give the folder written by 'beamshot compare'")
    major = str(data.get("schema_version", "")).split(".")[0]
    if not (major.isascii() and major.isdigit()):
        raise BeamshotError(f"{path}: the comparison has no readable schema_version; run 'beamshot compare' again")
    if int(major) > SCHEMA_MAJOR:
        raise BeamshotError(f"{path}: written by a newer beamshot (schema {data['schema_version']}); upgrade beamshot")
    return data


def _num(x):
    return float(x) if isinstance(x, (int, float)) and not isinstance(x, bool) else None


def _list(x) -> list:
    return x if isinstance(x, list) else []


def _dict(x) -> dict:
    return x if isinstance(x, dict) else {}


def _picture(out_dir: str, name) -> str | None:
    """The data: URI of a PNG named in the JSON, if it is a plain file name of the folder; else None."""
    if not isinstance(name, str) or not name or name != os.path.basename(name) or name.startswith(".") \
            or "\\" in name or "/" in name:
        return None
    path = os.path.join(out_dir, name)
    try:
        if not os.path.isfile(path) or os.path.getsize(path) > MAX_PICTURE_BYTES:
            return None
        with open(path, "rb") as fh:
            return png_data_uri(fh.read())
    except (OSError, ValueError):
        return None


def _figure_text(f: dict) -> str:
    value = _num(f.get("value"))
    if value is None:
        return "not measured"
    status = f.get("status") if f.get("status") in ("measured", "estimate", "lower_bound", "upper_bound") else "measured"
    return Figure(value=value, uncertainty=_num(f.get("uncertainty")), unit=str(f.get("unit", "")), method="",
                  status=status).text()


def _figures_table(lights: list[dict]) -> str:
    keys = []
    for li in lights:
        for k in _dict(li.get("figures")):
            if k not in keys:
                keys.append(k)
    order = list(vocabulary.FIGURES)
    keys.sort(key=lambda k: order.index(k) if k in order else len(order))
    rows = []
    for key in keys:
        t = vocabulary.term(key)
        cells = []
        for i, li in enumerate(lights):
            f = _dict(_dict(li.get("figures")).get(key))
            status = str(f.get("status", "not_measured" if not f else ""))
            cells.append(f'<td class="num" data-light="{i}" data-key="{esc(key)}" '
                         f'data-value="{number_attr(_num(f.get("value")))}" '
                         f'data-uncertainty="{number_attr(_num(f.get("uncertainty")))}" data-status="{esc(status)}">'
                         f'{esc(_figure_text(f) if f else "—")}<br><span class="status s-{esc(status)}">'
                         f'{esc(vocabulary.STATUS_WORDS.get(status, status))}</span></td>')
        cls = "part" if t.part_of else ""
        rows.append(f'<tr class="{cls}"><td>{esc(t.label)}</td>{"".join(cells)}</tr>')
    head = ["figure"] + [str(li.get("label", f"light {i + 1}")) for i, li in enumerate(lights)]
    why = []
    for i, li in enumerate(lights):
        for key in keys:
            f = _dict(_dict(li.get("figures")).get(key))
            if f.get("reason"):
                why.append(f"<li><strong>{esc(li.get('label', f'light {i + 1}'))}</strong>, "
                           f"{esc(vocabulary.label(key))}: {esc(f['reason'])}</li>")
    folded = (f"<details><summary>Why a figure is not measured or only a bound ({len(why)})</summary>"
              f'<ul class="reasons">{"".join(why)}</ul></details>' if why else "")
    return table(head, rows, cls="compare-figures") + folded


def _differences_tables(diffs: list[dict]) -> str:
    """One table per pair of lights (b − a), in the JSON's order; more than three pairs fold away."""
    pairs: dict[tuple[str, str], list[str]] = {}
    for d in diffs:
        d = _dict(d)
        key = str(d.get("figure", ""))
        label = d.get("label") or vocabulary.label(key)
        unit = str(d.get("unit", vocabulary.term(key).unit))
        diff, u = _num(d.get("difference")), _num(d.get("combined_uncertainty"))
        if diff is None:
            text = "—"
        else:
            text = Figure(value=diff, uncertainty=u, unit=unit, method="").text()
            if diff > 0 and any(ch in "123456789" for ch in text.split("±")[0]):
                text = "+" + text  # a rise is signed; a difference that rounds to zero is not
        verdict = str(d.get("verdict", ""))
        k = _num(d.get("k"))
        pairs.setdefault((str(d.get("a", "")), str(d.get("b", ""))), []).append(
            f'<tr data-figure="{esc(key)}" data-difference="{number_attr(diff)}" '
            f'data-combined-uncertainty="{number_attr(u)}" data-verdict="{esc(verdict)}">'
            f'<td>{esc(label)}</td><td class="num">{esc(text)}</td>'
            f'<td class="{_VERDICT_CLASS.get(verdict, "")}">{esc(verdict)}</td>'
            f'<td class="num">{esc(f"k = {k:g}" if k is not None else "")}</td>'
            f'<td class="method wide">{esc(d.get("reason") or "")}</td></tr>')
    out = []
    for i, ((a, b), rows) in enumerate(pairs.items()):
        opened = " open" if len(pairs) <= 3 or i == 0 else ""
        out.append(f"<details{opened}><summary><strong>{esc(b)}</strong> − <strong>{esc(a)}</strong></summary>"
                   + table(["figure", "b − a ± u_c (1σ)", "verdict", "coverage", "why not compared"], rows,
                           cls="differences rows2") + "</details>")
    return "".join(out)


def _clipped_text(clipped) -> str:
    if clipped is None:
        return "—"
    return "yes: its brightest part is a lower bound" if clipped else "no"


#: Unit suffixes of JSON keys (docs/report-schema.md convention: the unit is in the key's name).
_KEY_UNITS = (("_m", " m"), ("_deg", "°"), ("_px", " px"), ("_lx", " lx"))


def _wall_text(data: dict) -> str:
    """'5 m': the common wall distance the comparison re-draws every beam at."""
    d = _num(_dict(data.get("exposure")).get("wall_distance_m"))
    return f"{d:g} m" if d is not None else "one wall distance"


def _facts(d: dict) -> str:
    items = []
    for k, v in d.items():
        k = str(k)
        for suffix, unit in _KEY_UNITS:
            if k.endswith(suffix) and _num(v) is not None:
                k, v = k[: -len(suffix)], f"{_num(v):g}{unit}"
                break
        if isinstance(v, dict):
            v = ", ".join(f"{a}: {b}" for a, b in v.items())
        elif isinstance(v, bool):
            v = "yes" if v else "no"
        elif v is None:
            v = "—"
        items.append(f"<dt>{esc(str(k).replace('_', ' '))}</dt><dd>{esc(v)}</dd>")
    return f'<dl class="facts">{"".join(items)}</dl>'


def _figure_block(uri: str | None, name, alt: str, caption: str) -> str:
    if uri is None:
        return f'<p class="note">The picture {esc(name)} is not in the folder (or is not a PNG); it is left out.</p>'
    return f'<figure><img src="{uri}" alt="{esc(alt)}"><figcaption>{esc(caption)}</figcaption></figure>'


def comparison_html(data: dict, out_dir) -> str:
    """The comparison page as text, from a comparison.json dict and the folder holding its pictures."""
    out_dir = os.fspath(out_dir)
    lights = [_dict(li) for li in _list(data.get("lights"))]
    labels = [str(li.get("label", f"light {i + 1}")) for i, li in enumerate(lights)]
    absolute = bool(data.get("absolute"))
    pics = _dict(data.get("pictures"))
    scale_text = ("absolute: every light in cd, one common exposure" if absolute
                  else "normalised: each light relative to its own peak (brightness not compared)")
    sections = []
    notes = [str(n) for n in _list(data.get("notes"))]
    if notes:
        sections.append('<section id="notes"><h2>Read first</h2><ul class="warnings">'
                        + "".join(f"<li>{esc(n)}</li>" for n in notes) + "</ul></section>")
    pictures = [_figure_block(_picture(out_dir, pics.get("sheet")), pics.get("sheet"), "beams side by side",
                              "Every beam drawn again from its intensity map with one exposure, one tone curve "
                              "and one angular scale: the wall as a person would see it, re-drawn at a common "
                              f"distance of {_wall_text(data)} (whatever distance each photo was taken at), and "
                              "the angular map.")]
    pictures.append(_figure_block(_picture(out_dir, pics.get("profiles")), pics.get("profiles"), "overlaid profiles",
                                  "Radial profiles (linear and log) and the horizontal and vertical planes, "
                                  + ("in cd." if absolute else "each normalised to its peak.")))
    if pics.get("difference"):
        pictures.append(_figure_block(_picture(out_dir, pics["difference"]), pics["difference"],
                                      "difference map", "Ratio of the two maps in angle space (log₂ a / b), "
                                      "where both hold a value above their floor."))
    if pics.get("reach"):
        pictures.append(_figure_block(_picture(out_dir, pics["reach"]), pics["reach"], "reach",
                                      "What the beams do at distance."))
    sections.append('<section id="pictures"><h2>Beams at one exposure</h2>' + "".join(pictures) + "</section>")
    sections.append('<section id="figures"><h2>Figures</h2><p class="note">Value ± one standard uncertainty '
                    '(1σ); ≈ estimate, ≥ lower bound, ≤ upper bound.</p>'
                    + (f'<p class="note{"" if len(lights) > 3 else " narrow-only"}">The table scrolls sideways: '
                       f'{len(lights)} lights, the figure names stay in place.</p>' if len(lights) > 1 else "")
                    + _figures_table(lights) + "</section>")
    diffs = _list(data.get("differences"))
    sections.append('<section id="differences"><h2>Differences</h2><p class="note">b − a with the combined '
                    'standard uncertainty u_c; significant when |b − a| &gt; k·u_c, otherwise not '
                    'distinguishable. Bounds and figures that are not measured are not compared.</p>'
                    + (_differences_tables(diffs) if diffs else '<p class="note">None.</p>') + "</section>")
    light_rows = [f'<tr><td data-label="label">{esc(lab)}</td><td data-label="report"><code>'
                  f'{esc(li.get("report", ""))}</code></td><td data-label="unit">{esc(li.get("unit", ""))}</td>'
                  f'<td data-label="photo taken at">{esc(li.get("distance_m", ""))}'
                  f'{" m" if _num(li.get("distance_m")) is not None else ""}</td>'
                  f'<td data-label="scale">{esc(li.get("scale", ""))}</td>'
                  f'<td data-label="clipped">{_clipped_text(li.get("clipped"))}</td></tr>'
                  for lab, li in zip(labels, lights)]
    sections.append('<section id="inputs"><h2>Lights and rendering</h2>'
                    + table(["label", "report", "unit", "photo taken at", "scale", "clipped"], light_rows, cls="stack")
                    + "<h3>Common exposure</h3>" + _facts(_dict(data.get("exposure"))) + "</section>")
    cards = [c for c in _list(pics.get("cards"))]
    if cards:
        blocks = [_figure_block(_picture(out_dir, c), c, f"beam card {i + 1}", str(c)) for i, c in enumerate(cards)]
        sections.append('<section id="cards"><details><summary>Beam cards (one picture per light, for sharing)'
                        '</summary><div class="pictures two">' + "".join(blocks) + "</div></details></section>")
    cautions = [str(c) for c in _list(data.get("cautions"))]
    if not cautions:
        from .model import CAUTIONS

        cautions = list(CAUTIONS)
    sections.append('<section id="cautions" class="cautions"><h2>Safety</h2><ul>'
                    + "".join(f"<li>{esc(c)}</li>" for c in dict.fromkeys(cautions)) + "</ul></section>")
    title = "Comparison: " + ", ".join(labels) if labels else "Comparison"
    sub = f"{len(lights)} lights · {scale_text}"
    footer = (f"beamshot comparison schema {data.get('schema_version', '')} · {data.get('created_utc', '')} · "
              "the same numbers are in comparison.json beside this page")
    return page(title, sub, sections, footer)


def write_comparison_html(out_dir) -> str:
    """Write ``comparison.html`` into a compare folder from its comparison.json; returns its path."""
    data = read_comparison_json(out_dir)
    path = os.path.join(os.fspath(out_dir), COMPARISON_HTML)
    try:
        write_text_atomic(path, comparison_html(data, out_dir))
    except OSError as exc:
        raise BeamshotError(f"{path}: cannot write the comparison page ({exc.strerror or exc}); "
                            "choose a folder you can write to") from None
    return path
