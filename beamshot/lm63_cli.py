"""``beamshot lm63 write|read``: the measured beam as an IES LM-63 file, and a file summarised.

Registered in ``beamshot.cli`` like ``batch``; imports only click at start-up.  Exit codes: 0
done, 2 an input problem (one line), 3 an internal error.  ``lm63 read`` prints where a file
departs from the LM-63-2002 type C layout but still exits 0 (it read the file).
"""

from __future__ import annotations

import sys

import click

__all__ = ["lm63", "main"]


@click.group("lm63")
def lm63():
    """Write the measured beam as an IES LM-63 photometric file, or read one (docs/lm63.md)."""


@lm63.command("write", short_help="Write an analysis folder's I(theta, phi) as an LM-63-2002 file.")
@click.argument("folder", type=click.Path())
@click.option("--out", "out_path", required=True, type=click.Path(dir_okay=False), metavar="FILE",
              help="The .ies file to write (replaced whole).")
@click.option("--vertical-step", type=click.FloatRange(min=0.01, max=10.0), default=None, metavar="DEG",
              help="Vertical angle step, degrees (default: the finest the photo resolves, docs/lm63.md).")
@click.option("--testlab", default=None, metavar="TEXT", help="Who measured ([TESTLAB]; default 'not stated').")
@click.option("--manufacturer", default=None, metavar="TEXT", help="The light's maker ([MANUFAC]; default 'not stated').")
@click.option("--lumcat", default=None, metavar="TEXT", help="Catalogue number of the light ([LUMCAT]).")
@click.option("--luminaire", default=None, metavar="TEXT", help="The light ([LUMINAIRE]; default: its name in the report).")
@click.option("--lamp", default=None, metavar="TEXT", help="The emitter ([LAMP]).")
def lm63_write(folder, out_path, vertical_step, testlab, manufacturer, lumcat, luminaire, lamp):
    """Write the intensity map of FOLDER (written by 'beamshot analyze --out') as a type C
    LM-63-2002 file: vertical angle 0 on the beam axis, horizontal angle 0 to the right and 90 up
    as seen from behind the light; directions beyond the photo are written as 0 and the file says
    where.  A relative map (no absolute scale) is refused."""
    from .lm63 import export_folder

    facts = dict(testlab=testlab, manufacturer=manufacturer, lumcat=lumcat, luminaire=luminaire, lamp=lamp)
    p, notes = export_folder(folder, out_path, vertical_step_deg=vertical_step, facts=facts)
    step = p.vertical_deg[1] - p.vertical_deg[0]
    cover = p.keyword("_COVERAGE")
    click.echo(f"wrote {out_path}: {len(p.vertical_deg)} vertical angles (step {step:g} deg), "
               f"{len(p.horizontal_deg)} horizontal angles (0-360 deg); {cover[0] if cover else ''}")
    click.echo(f"  flux in the file {p.flux_lm():.4g} lm; peak {p.peak()[0]:.5g} cd")
    for n in notes:
        click.echo(f"  ! {n}")


@lm63.command("read", short_help="Summarise an LM-63 file and check its layout.")
@click.argument("file", type=click.Path(dir_okay=False))
@click.option("--json", "as_json", is_flag=True, help="Print the summary as JSON.")
@click.option("--report", "report_path", default=None, type=click.Path(), metavar="PATH",
              help="Compare with the report.json (or analysis folder) the file was written from.")
def lm63_read(file, as_json, report_path):
    """Read the LM-63 file FILE and print its keywords, angles, peak, flux and the 50 % / 10 %
    cone angles, and where it departs from the LM-63-2002 type C layout; with --report, the same
    figures beside the report's."""
    from .errors import BeamshotError
    from .lm63 import read_lm63, structure_problems

    p = read_lm63(file)
    peak, pv, ph = p.peak()
    why_not = None
    try:
        flux = p.flux_lm()
        a50, a10 = p.cone_angle_deg(0.5), p.cone_angle_deg(0.1)
    except BeamshotError as exc:  # horizontal angles the integrals do not cover: say why, still summarise
        flux = a50 = a10 = None
        why_not = str(exc)
    problems = structure_problems(p)
    doc = {"file": file, "format": p.format_line or None, "keywords": [list(k) for k in p.keywords],
           "photometric_type": {1: "C", 2: "B", 3: "A"}[p.photometric_type], "lumens_per_lamp": p.lumens_per_lamp,
           "candela_multiplier": p.multiplier, "vertical_deg": [float(p.vertical_deg[0]), float(p.vertical_deg[-1]),
                                                                 len(p.vertical_deg)],
           "horizontal_deg": [float(p.horizontal_deg[0]), float(p.horizontal_deg[-1]), len(p.horizontal_deg)],
           "peak_cd": peak, "peak_at_deg": {"vertical": pv, "horizontal": ph}, "flux_lm": flux,
           "cone_angle_50_deg": a50, "cone_angle_10_deg": a10, "layout_problems": problems,
           "not_integrated": why_not}
    if report_path:
        doc["against_report"] = _against_report(p, report_path, a50, a10) if flux is not None else None
        doc["against_report_note"] = _other_photo_note(p, report_path)
    if as_json:
        import json

        click.echo(json.dumps(doc, indent=1))
        return
    click.echo(f"{file}: {p.format_line or 'no format line (LM-63-1986)'}, type "
               f"{doc['photometric_type']}, TILT={p.tilt}")
    for k, t in p.keywords:
        click.echo(f"  [{k}] {t}" if k else f"  {t}")
    click.echo(f"  vertical angles {p.vertical_deg[0]:g}-{p.vertical_deg[-1]:g} deg ({len(p.vertical_deg)}), "
               f"horizontal {p.horizontal_deg[0]:g}-{p.horizontal_deg[-1]:g} deg ({len(p.horizontal_deg)})")
    click.echo(f"  lumens per lamp {p.lumens_per_lamp:g}" + (" (absolute photometry)" if p.lumens_per_lamp == -1 else "")
               + f", candela multiplier {p.multiplier:g}")
    click.echo(f"  peak {peak:.5g} cd at vertical {pv:g} deg, horizontal {ph:g} deg")
    if flux is not None:
        click.echo(f"  flux {flux:.5g} lm (whole file)")
    else:
        click.echo(f"  flux not integrated: {why_not}")
    for frac, a in ((50, a50), (10, a10)):
        if a is not None:
            click.echo(f"  cone of equal solid angle at {frac} % of the peak: {a:.4g} deg full angle")
    if problems:
        click.echo("  departs from the LM-63-2002 type C layout: " + "; ".join(problems))
    else:
        click.echo("  follows the LM-63-2002 type C layout")
    rows = doc.get("against_report")
    if rows:
        from .figure import value_with_uncertainty

        click.echo(f"  beside {report_path}:")
        if doc.get("against_report_note"):
            click.echo(f"  note: {doc['against_report_note']}")
        click.echo(f"    {'figure':26s} {'report':>22s} {'file':>10s}  difference / u")
        for r in rows:
            rep = " ± ".join(value_with_uncertainty(r["report"], r["uncertainty"])) if r["uncertainty"] else \
                f"{r['report']:.5g}"
            z = "" if r["z"] is None else f"{r['z']:+.2f}"
            click.echo(f"    {r['label']:26s} {rep:>22s} {r['file']:>10.5g}  {z}")


def _other_photo_note(p, report_path) -> str | None:
    """A note when the file's [TEST] names another photo (by its sha256) than the report's first input."""
    import os
    import re

    from .report.output import read_report_json

    path = os.path.join(report_path, "report.json") if os.path.isdir(report_path) else report_path
    inputs = read_report_json(path).get("inputs") or []
    theirs = str((inputs[0] if inputs and isinstance(inputs[0], dict) else {}).get("sha256", ""))
    test = " ".join(t for k, t in p.keywords if k == "TEST")
    m = re.search(r"sha256 ([0-9a-f]{12})", test)
    if m and theirs and not theirs.startswith(m.group(1)):
        return (f"the file was written from another photo (sha256 {m.group(1)}) than this report's "
                f"({theirs[:12]}): the differences below compare two measurements")
    return None


def _against_report(p, report_path, a50, a10) -> list[dict]:
    """The file's peak, flux within the spill edge's cone and 50 % / 10 % cone angles beside the
    report's peak intensity, beam flux, hotspot and field angles (z: difference over the report's u)."""
    import os

    from .report.output import read_report_json

    path = os.path.join(report_path, "report.json") if os.path.isdir(report_path) else report_path
    report = read_report_json(path)
    figs = report.get("figures") or {}

    def val(key):
        f = figs.get(key) if isinstance(figs.get(key), dict) else {}
        return f.get("value"), f.get("uncertainty")

    spill, _ = val("spill_angle")
    pairs = [("peak_intensity", "peak intensity (cd)", p.peak()[0]),
             ("beam_flux", "beam flux in the edge (lm)", None if spill is None else p.flux_lm(spill / 2)),
             ("hotspot_angle", "hotspot angle / 50 % cone", a50), ("field_angle", "field angle / 10 % cone", a10)]
    rows = []
    for key, lab, mine in pairs:
        v, u = val(key)
        if v is None or mine is None:
            continue
        rows.append({"figure": key, "label": lab, "report": v, "uncertainty": u, "file": mine,
                     "z": (mine - v) / u if u else None})
    return rows


def main(argv=None) -> int:
    """Run the command alone (``python -m beamshot.lm63_cli``) with the exit codes of ``beamshot``."""
    from .cli import _Group

    group = _Group("beamshot")
    group.add_command(lm63)
    return group.main(["lm63", *(sys.argv[1:] if argv is None else argv)], standalone_mode=False)


if __name__ == "__main__":
    sys.exit(main())
