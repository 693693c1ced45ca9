"""The frame shared by beamshot's HTML pages: escaping, embedded images, inline CSS, one page.

A page is one self-contained file: CSS inline, images as ``data:`` URIs (PNG in base64) or
inline SVG, no script, no font or link that loads anything, and a Content-Security-Policy that
forbids every request except ``data:`` images (so nothing leaves the file even if a mail client
or browser would follow one).  It reads from disk and when mailed.

Every text that comes from a user or a file (file names, light names, labels, warnings, option
values) goes through :func:`esc` (``html.escape`` with quotes), so a name such as
``<script>&`` is shown as written and never becomes markup.
"""

from __future__ import annotations

import base64
import html
import json
import re

from ..atomic_file import write_text_atomic  # the pages are written whole

__all__ = ["CSP", "esc", "number_attr", "page", "png_data_uri", "table", "write_text_atomic"]

#: Nothing may be fetched: images only from data: URIs, styles only inline, no scripts, no frames.
CSP = "default-src 'none'; img-src data:; style-src 'unsafe-inline'; base-uri 'none'; form-action 'none'"

#: Own palette (Okabe-Ito hues for the status marks, which are also written in words).
_CSS = """
:root { --ink:#1f2430; --muted:#5b6270; --paper:#fbfaf6; --card:#ffffff; --rule:#d9d6cc;
        --accent:#1b5e6f; --band:#eef3f2; --warn:#8a4b00; --warnbg:#fff4e0; --caution:#7a1f3d;
        --cautionbg:#fbeef2; }
* { box-sizing: border-box; }
html { -webkit-text-size-adjust: 100%; text-size-adjust: 100%; }
body { margin: 0; background: var(--paper); color: var(--ink);
       font: 16px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, "Noto Sans", sans-serif; }
header.top { background: var(--accent); color: #fff; padding: 1.1rem 1rem 0.9rem; }
header.top h1 { margin: 0; font-size: 1.45rem; line-height: 1.2; overflow-wrap: anywhere; }
header.top p { margin: 0.3rem 0 0; opacity: 0.92; font-size: 0.95rem; overflow-wrap: anywhere; }
main { max-width: 1120px; margin: 0 auto; padding: 0.5rem 0.9rem 2rem; }
section { background: var(--card); border: 1px solid var(--rule); border-radius: 6px;
          margin: 1rem 0; padding: 0.6rem 0.9rem 0.9rem; }
h2 { font-size: 1.15rem; margin: 0.3rem 0 0.6rem; color: var(--accent); }
h3 { font-size: 1rem; margin: 0.9rem 0 0.4rem; }
p, li { overflow-wrap: anywhere; }
.note { color: var(--muted); font-size: 0.9rem; }
.scroll { overflow-x: auto; -webkit-overflow-scrolling: touch; max-width: 100%; }
table { border-collapse: collapse; width: 100%; font-size: 0.93rem; }
th, td { text-align: left; vertical-align: top; padding: 0.35rem 0.55rem; border-bottom: 1px solid var(--rule); }
thead th { background: var(--band); font-weight: 600; white-space: nowrap; }
td.num { text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }
td.def, td.method { min-width: 14rem; color: var(--muted); font-size: 0.88rem; }
table.figures td:first-child { min-width: 9rem; }
tr.part td:first-child { padding-left: 1.6rem; font-size: 0.9rem; }
tr.missing td { color: var(--muted); }
code, .hash { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace; font-size: 0.85em;
              overflow-wrap: anywhere; word-break: break-all; }
.status { display: inline-block; padding: 0 0.45em; border-radius: 0.8em; font-size: 0.82rem;
          white-space: nowrap; border: 1.5px solid; }
.s-measured { border-color: #0072b2; color: #004f7c; }
.s-estimate { border-color: #e69f00; color: #7a5400; border-style: dashed; }
.s-lower_bound, .s-upper_bound { border-color: #cc79a7; color: #7d2f5c; border-style: dotted; }
.s-not_measured { border-color: #9a9a9a; color: #5b6270; }
.v-significant { font-weight: 700; color: #7d2f5c; }
.v-not-distinguishable { color: #004f7c; }
.v-not-compared { color: var(--muted); }
figure { margin: 0.4rem 0 0.8rem; }
figure img, figure svg { display: block; width: 100%; max-width: 100%; height: auto; }
figcaption { color: var(--muted); font-size: 0.88rem; margin-top: 0.3rem; }
.pictures { display: grid; grid-template-columns: 1fr; gap: 0.6rem 1.2rem; }
@media (min-width: 900px) {
  .pictures.two { grid-template-columns: minmax(0, 1fr) minmax(0, 1fr); }
  header.top { padding: 1.4rem 2rem 1.1rem; }
  main { padding: 0.5rem 2rem 2rem; }
}
ul.warnings li { background: var(--warnbg); color: var(--warn); border-left: 4px solid #e69f00;
                 padding: 0.35rem 0.6rem; margin: 0.35rem 0; list-style: none; }
ul.warnings { padding: 0; margin: 0; }
section.cautions { background: var(--cautionbg); border-color: #e3b8c6; }
section.cautions h2 { color: var(--caution); }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 0.2rem 0.9rem; margin: 0; }
dl.facts dt { color: var(--muted); }
dl.facts dd { margin: 0; overflow-wrap: anywhere; }
@media (max-width: 640px) {
  table.rows2 thead { display: none; }
  table.rows2 tr { display: grid; grid-template-columns: minmax(0, 1fr) auto; column-gap: 0.6rem;
                   border-bottom: 1px solid var(--rule); padding: 0.35rem 0; }
  table.rows2 td { border: 0; padding: 0.05rem 0.2rem; min-width: 0; }
  table.rows2 td.wide { grid-column: 1 / -1; }
  table.rows2 td:empty { display: none; }
  table.rows2 td:first-child { font-weight: 600; min-width: 0; }
  table.figures tr.part td:first-child { padding-left: 1rem; font-weight: 400; }
  table.figures td.unit { display: none; }
  table.figures td.method::before { content: "method: "; font-style: italic; }
  table.figures td.def::before { content: "means: "; font-style: italic; }
  table.stack thead { display: none; }
  table.stack tr { display: block; border-bottom: 1px solid var(--rule); padding: 0.3rem 0; }
  table.stack td { display: block; border: 0; padding: 0.05rem 0.2rem; }
  table.stack td[data-label]::before { content: attr(data-label) ": "; color: var(--muted); }
}
@media (max-width: 520px) {
  dl.facts { grid-template-columns: 1fr; }
  dl.facts dd { margin-bottom: 0.4rem; }
  body { font-size: 15px; }
}
table.settings td:first-child code { white-space: nowrap; word-break: normal; overflow-wrap: normal; }
table.compare-figures td:first-child, table.compare-figures th:first-child { position: sticky; left: 0;
  background: var(--card); z-index: 1; box-shadow: 1px 0 0 var(--rule); }
table.compare-figures thead th:first-child { background: var(--band); }
.narrow-only { display: none; }
details summary { cursor: pointer; color: var(--accent); margin: 0.4rem 0; }
footer { color: var(--muted); font-size: 0.82rem; text-align: center; padding: 1rem; }
@media (max-width: 640px) { .narrow-only { display: block; } }
"""


_SURROGATES = re.compile("[\ud800-\udfff]")


def esc(value) -> str:
    """Text from anywhere, safe in HTML text and in quoted attributes (``html.escape``, quotes too).

    A file name that is not valid UTF-8 (its bytes kept as lone surrogates by ``os.fsdecode``)
    shows U+FFFD for each such byte instead of failing when the page is written.

    >>> esc('<script>alert("x")</script> & co')
    '&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; co'
    >>> esc("bad" + chr(0xDCFF) + "name.jpg") == "bad" + chr(0xFFFD) + "name.jpg"
    True
    """
    text = "" if value is None else str(value)
    if not text.isascii():
        text = _SURROGATES.sub("\ufffd", text)
    return html.escape(text, quote=True)


def number_attr(x) -> str:
    """A number as written in the JSON (``json.dumps``), for ``data-*`` attributes; '' for None."""
    if x is None or isinstance(x, bool) or not isinstance(x, (int, float)):
        return ""
    return json.dumps(x)


def png_data_uri(data: bytes) -> str:
    """A ``data:image/png;base64,...`` URI of PNG bytes (refuses anything that is not a PNG)."""
    if not data.startswith(b"\x89PNG\r\n\x1a\n"):
        raise ValueError("not a PNG")
    return "data:image/png;base64," + base64.b64encode(data).decode("ascii")


def table(head: list[str], rows: list[str], *, cls: str = "") -> str:
    """A table in a horizontally scrolling box; ``head`` are escaped, ``rows`` are ready ``<tr>`` markup."""
    th = "".join(f"<th scope=\"col\">{esc(h)}</th>" for h in head)
    c = f' class="{esc(cls)}"' if cls else ""
    return f'<div class="scroll"><table{c}><thead><tr>{th}</tr></thead><tbody>{"".join(rows)}</tbody></table></div>'


def page(title: str, subtitle: str, sections: list[str], footer: str) -> str:
    """The whole document; ``title``/``subtitle``/``footer`` are plain text (escaped here), sections markup."""
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        f"<meta http-equiv=\"Content-Security-Policy\" content=\"{CSP}\">\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
        "<meta name=\"referrer\" content=\"no-referrer\">\n"
        f"<title>{esc(title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
        f"<header class=\"top\"><h1>{esc(title)}</h1>"
        + (f"<p>{esc(subtitle)}</p>" if subtitle else "")
        + "</header>\n<main>\n" + "\n".join(sections) + "\n</main>\n"
        f"<footer>{esc(footer)}</footer>\n</body>\n</html>\n"
    )
