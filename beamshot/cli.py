"""Command line: parse options, call the library, print, exit codes (0 ok, 2 input problem)."""

from __future__ import annotations

import json
import os
import sys
import time

import click

from . import __version__
from .errors import BeamshotError

__all__ = ["main", "cli"]

_FIGURE_LABELS = {
    "peak_intensity": "peak intensity",
    "beam_distance": "beam distance (0.25 lx)",
    "hotspot_angle": "hotspot angle (50 %)",
    "hotspot_angle_horizontal": "  horizontal",
    "hotspot_angle_vertical": "  vertical",
    "field_angle": "field angle (10 %)",
    "spill_angle": "spill angle (edge)",
    "spill_angle_horizontal": "  horizontal",
    "spill_angle_vertical": "  vertical",
    "hotspot_flux": "hotspot flux",
    "spill_flux": "spill flux",
    "beam_flux": "beam flux (in edge)",
    "ra": "Ra spill/hotspot",
    "hotspot_offset": "hotspot offset",
}


def _fail(message: str) -> None:
    click.echo(f"beamshot: error: {message}", err=True)
    sys.exit(2)


def _print_figures(report) -> None:
    for key, fig in report.figures.items():
        click.echo(f"  {_FIGURE_LABELS.get(key, key):26s} {fig.text(3)}")
    for w in report.warnings:
        click.echo(f"  ! {w}")


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="beamshot")
def cli():
    """Calibrated beam figures from photos of a flashlight beam on a white wall.

    Caution: do not look into the beam or aim it at people, animals, vehicles or aircraft;
    powerful lights can scorch materials close to the lens.
    """


@cli.command()
@click.argument("photo", type=click.Path(dir_okay=False))
@click.option("--distance", "distance_m", type=float, required=True, help="Light-to-wall distance in metres.")
@click.option("--distance-uncertainty", "distance_u", type=float, default=None,
              help="Standard uncertainty of the distance in metres [default 0.02].")
@click.option("--ambient", type=click.Path(dir_okay=False), default=None,
              help="Photo with the light off, same camera settings, subtracted first.")
@click.option("--flat", type=click.Path(dir_okay=False), default=None,
              help="Photo of an evenly lit white target for vignetting correction.")
@click.option("--lux-at-peak", type=float, default=None, help="Lux-meter reading at the hotspot on the wall (lx).")
@click.option("--meter-accuracy", type=float, default=None,
              help="Relative 1-sigma accuracy of the lux meter [default 0.05].")
@click.option("--reflectance", type=float, default=None,
              help="Wall reflectance for the exposure-metadata estimate [default 0.85].")
@click.option("--no-exif-scale", is_flag=True, help="Do not estimate absolute figures from exposure metadata.")
@click.option("--focal-35mm", type=float, default=None, help="35 mm-equivalent focal length (mm) if EXIF lacks it.")
@click.option("--hfov", type=float, default=None, help="Horizontal field of view of the photo (degrees).")
@click.option("--camera-distance", type=float, default=None,
              help="Camera-to-wall distance (m) if the camera is not beside the light.")
@click.option("--response", default="srgb", show_default=True, help="Tone curve: srgb, linear or gamma:<exponent>.")
@click.option("--head-diameter", "head_mm", type=float, default=None,
              help="Diameter of the light's head (mm), for the far-field check.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Folder for report.json, profile.csv and beam.png.")
@click.option("--json", "as_json", is_flag=True, help="Print the report as JSON instead of a table.")
def analyze(photo, distance_m, distance_u, ambient, flat, lux_at_peak, meter_accuracy, reflectance, no_exif_scale,
            focal_35mm, hfov, camera_distance, response, head_mm, out_dir, as_json):
    """Analyse PHOTO, a beam on a white wall shot square to the wall beside the light."""
    from .analysis import analyze as run
    from .report.output import write_report

    try:
        report = run(photo, distance_m=distance_m, distance_uncertainty_m=distance_u, ambient=ambient, flat=flat,
                     lux_at_peak=lux_at_peak, lux_meter_accuracy=meter_accuracy, reflectance=reflectance,
                     use_exif_scale=not no_exif_scale, focal_35mm=focal_35mm, hfov_deg=hfov,
                     camera_distance_m=camera_distance, response=response, head_diameter_mm=head_mm)
        written = write_report(report, out_dir) if out_dir else []
    except BeamshotError as exc:
        _fail(str(exc))
    if as_json:
        click.echo(json.dumps(report.to_dict(), indent=2, ensure_ascii=False))
        return
    click.echo(f"{os.path.basename(photo)} at {distance_m:g} m")
    _print_figures(report)
    if written:
        click.echo(f"wrote {', '.join(written)}")


@cli.command()
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default="beamshot-demo", show_default=True,
              help="Folder for the demo photos and reports.")
def demo(out_dir):
    """Render an invented three-prototype comparison, analyse it, compare with the truth."""
    from .analysis import analyze as run
    from .demo import write_demo_photos
    from .report.output import write_report

    start = time.perf_counter()
    try:
        photos_dir = os.path.join(out_dir, "photos")
        lights = write_demo_photos(photos_dir)
        click.echo(f"rendered {len(lights)} synthetic beam photos (+ light-off frames) into {photos_dir}")
        rows = []
        for light in lights:
            report = run(light["photo"], distance_m=light["distance_m"], ambient=light["ambient"],
                         lux_at_peak=light["lux_at_peak"])
            write_report(report, os.path.join(out_dir, light["name"]))
            rows.append((light, report))
    except BeamshotError as exc:
        _fail(str(exc))
    truth_keys = (("peak_intensity", "peak_cd", "cd"), ("hotspot_angle", "hotspot_angle_deg", "deg"),
                  ("field_angle", "field_angle_deg", "deg"), ("spill_angle", "spill_angle_deg", "deg"),
                  ("ra", "ra", ""), ("beam_flux", "beam_flux_lm", "lm"))
    for light, report in rows:
        click.echo(f"\n{light['label']}  ({light['name']}, lux meter {light['lux_at_peak']:g} lx "
                   f"at {light['distance_m']:g} m)")
        click.echo(f"  {'figure':18s} {'measured':>24s} {'truth':>10s} {'error':>8s}")
        for key, tkey, unit in truth_keys:
            fig = report.figures[key]
            truth = light["truth"].get(tkey)
            if fig.value is None or truth is None:
                click.echo(f"  {key:18s} {fig.text(3):>24s}")
                continue
            err = (fig.value - truth) / truth
            click.echo(f"  {key:18s} {fig.text(3):>24s} {truth:>10.4g} {err:>+8.1%}")
        click.echo(f"  report: {os.path.join(out_dir, light['name'])}/")
    click.echo(f"\ndone in {time.perf_counter() - start:.1f} s; open {out_dir}/*/beam.png")


def main():
    cli(prog_name="beamshot")


if __name__ == "__main__":  # pragma: no cover
    main()
