"""``beamshot compare`` and ``beamshot reach``: the commands around :mod:`beamshot.compare` and
:mod:`beamshot.reach` (parse, call the library, print).

Registered in ``beamshot.cli`` (``cli.add_command``); only click is imported here at start-up,
the library inside the commands, so ``beamshot --help`` stays quick.  Exit codes as ``beamshot``:
0 done (a comparison that finds differences is still done), 2 an input problem in one line.
"""

from __future__ import annotations

import os

import click

__all__ = ["compare", "reach"]


@click.command("compare")
@click.argument("reports", nargs=-1, required=True, type=click.Path(), metavar="REPORT_OR_FOLDER...")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False), metavar="DIR",
              help="Folder for comparison.json, sheet.png, profiles.png, difference.png (two lights), reach.png "
                   "and one card per light; an older comparison there is replaced whole.")
@click.option("--label", "labels", multiple=True, metavar="TEXT",
              help="Name of each light, once per report in the same order (default: the name given at "
                   "'analyze --name', else the folder's name).")
@click.option("--wall-distance", "wall_distance_m", type=float, default=5.0, show_default=True, metavar="M",
              help="Distance of the virtual wall the beams are drawn on, m.")
@click.option("--same-meter", is_flag=True,
              help="One lux meter (or one camera profile's constant) scaled every report: its calibration error "
                   "cancels in the differences.")
def compare(reports, out_dir, labels, wall_distance_m, same_meter):
    """Compare 2-12 lights on equal footing: one exposure, one tone curve, one angular scale.

    Each REPORT_OR_FOLDER is a folder written by 'beamshot analyze ... --out DIR' (or its
    report.json); the folder must hold intensity-map.npz.  See docs/compare.md.
    """
    from .compare import compare as run_compare
    from .figure import value_with_uncertainty

    comp = run_compare(reports, labels=labels, out_dir=out_dir, wall_distance_m=wall_distance_m,
                       same_meter=same_meter)
    ex = comp.exposure
    click.echo(f"{len(comp.lights)} lights: " + ", ".join(x.label for x in comp.lights))
    if comp.absolute:
        click.echo(f"one exposure, walls re-drawn at {ex['wall_distance_m']:g} m: full scale {ex['full_scale']:.3g} lx "
                   f"(the brightest, {ex['full_scale_light']}), sRGB tone curve")
    else:
        click.echo("normalised to each light's own peak (not every report is in cd): shapes, not brightness")
    sig = [d for d in comp.differences if d["verdict"] == "significant"]
    same = [d for d in comp.differences if d["verdict"] == "not distinguishable"]
    click.echo(f"figures: {len(sig)} significant differences (beyond k = 2), {len(same)} not distinguishable, "
               f"{len(comp.differences) - len(sig) - len(same)} not compared (bounds or not measured)")
    for d in sig:
        unit = {"deg": "°", "": ""}.get(d["unit"], " " + d["unit"])
        diff, u = value_with_uncertainty(d["difference"], d["combined_uncertainty"])  # GUM 7.2.6 rounding
        sign = "+" if d["difference"] >= 0 and not diff.startswith("-") else ""
        click.echo(f"  {d['label']}: {d['b']} vs {d['a']}: {sign}{diff} ± {u}{unit} "
                   f"({abs(d['difference']) / d['combined_uncertainty']:.1f} σ)")
    for n in comp.notes:
        click.echo(f"  note: {n}")
    click.echo(f"wrote {os.path.join(out_dir, 'comparison.json')} and its pictures")


@click.command("reach")
@click.argument("report", type=click.Path(), metavar="REPORT_OR_FOLDER")
@click.option("--height", "height_m", type=float, default=1.5, show_default=True, metavar="M",
              help="Height of the light above flat ground, m.")
@click.option("--tilt", "tilt_deg", type=float, default=3.0, show_default=True, metavar="DEG",
              help="Downward tilt of the beam axis, degrees.")
@click.option("--out", "out_png", type=click.Path(dir_okay=False), default=None, metavar="FILE.png",
              help="Write the picture (axis illuminance against distance, and the ground from above).")
@click.option("--label", default=None, metavar="TEXT", help="Name of the light (default: from the report).")
def reach(report, height_m, tilt_deg, out_png, label):
    """How far and how wide a light reaches: illuminance on the beam axis against distance, with the
    0.25 lx beam distance (ANSI/PLATO FL 1) and the 1 lx point, and on flat ground from above."""
    from .compare import load_light
    from .errors import BeamshotError
    from .reach import reach_of
    from .report.reach_plots import reach_figure

    if not (height_m == height_m and 0.05 <= height_m <= 100):
        raise BeamshotError(f"--height {height_m:g}: give the light's height above the ground, 0.05 to 100 m")
    if not (tilt_deg == tilt_deg and -10 <= tilt_deg <= 80):
        raise BeamshotError(f"--tilt {tilt_deg:g}: give the downward tilt in degrees, -10 to 80")
    if out_png is not None and not out_png.lower().endswith(".png"):
        raise BeamshotError(f"--out {out_png}: give a file name ending in .png")
    light = load_light(report, label)
    if out_png is not None:  # a place that cannot be written is refused before anything is printed
        folder = os.path.dirname(os.path.abspath(out_png))
        try:
            os.makedirs(folder, exist_ok=True)
        except OSError as exc:
            raise BeamshotError(f"--out {out_png}: its folder cannot be made ({exc.strerror or exc}); "
                                "choose another place") from None
        from .atomic_file import can_write_beside

        why = can_write_beside(out_png)
        if why is not None:
            raise BeamshotError(f"--out {out_png}: cannot be written there ({why}); choose a folder you can write to")
    peak = _peak_figure(light.figures.get("peak_intensity"))
    r = reach_of(light.beam, peak, height_m=height_m, tilt_deg=tilt_deg)
    click.echo(f"{light.label}: peak intensity {peak.text()}")
    click.echo(f"  beam distance (0.25 lx, ANSI/PLATO FL 1): {r.beam_distance.text()}")
    click.echo(f"  1 lx on the axis: {r.bright_distance.text()}")
    if out_png is not None:
        tmp = os.path.join(folder, f".beamshot-tmp-{os.getpid()}-{os.path.basename(out_png)}")
        try:
            reach_figure(r, light.label, tmp)
            os.replace(tmp, out_png)
        except OSError as exc:
            raise BeamshotError(f"--out {out_png}: cannot be written ({exc.strerror or exc}); choose another place") \
                from None
        finally:
            if os.path.exists(tmp):
                os.remove(tmp)
        click.echo(f"wrote {out_png}")


def _peak_figure(d):
    from .figure import Figure, not_measured

    if not isinstance(d, dict) or d.get("value") is None:
        return not_measured("cd", "from the report", (d or {}).get("reason") or "not in the report")
    return Figure(float(d["value"]), None if d.get("uncertainty") is None else float(d["uncertainty"]),
                  d.get("unit") or "", d.get("method") or "", status=d.get("status") or "measured",
                  reason=d.get("reason"), budget=tuple((d.get("budget") or {}).items()))
