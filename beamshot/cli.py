"""Command line: parse options, call the library, print, exit codes (0 ok, 2 input problem)."""

from __future__ import annotations

import json
import os
import sys
import time

import click

from . import __version__
from .errors import BeamshotError
from .vocabulary import label

__all__ = ["main", "cli"]



def _fail(message: str) -> None:
    click.echo(f"beamshot: error: {message}", err=True)
    sys.exit(2)


def _print_figures(report) -> None:
    for key, fig in report.figures.items():
        click.echo(f"  {label(key, indent=True):26s} {fig.text(3)}")
    for w in report.warnings:
        click.echo(f"  ! {w}")


class _Command(click.Command):
    """A command whose unknown-option message suggests the options that start with what was typed
    (``--lux`` -> ``--lux-at-peak``), before click's spelling-based guesses."""

    def parse_args(self, ctx, args):
        try:
            return super().parse_args(ctx, args)
        except click.NoSuchOption as exc:
            names = sorted({n for p in self.get_params(ctx) for n in (*p.opts, *p.secondary_opts)
                            if n.startswith("--")})
            starting = [n for n in names if n.startswith(exc.option_name)]
            if starting:
                exc.possibilities = starting
            raise


class _Group(click.Group):
    command_class = _Command
    group_class = type


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="beamshot")
def cli():
    """Calibrated beam figures from photos of a flashlight beam on a white wall.

    Caution: do not look into the beam or aim it at people, animals, vehicles or aircraft;
    powerful lights can scorch materials close to the lens.
    """


@cli.command()
@click.argument("photos", nargs=-1, required=True, type=click.Path(dir_okay=False))
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
@click.option("--response", default=None,
              help="Tone curve: srgb, linear, s-curve or gamma:<exponent> [default: the camera profile's, sRGB].")
@click.option("--camera", default=None, help="Camera profile: a name (see 'beamshot camera list') or a JSON file.")
@click.option("--dark", type=click.Path(dir_okay=False), default=None,
              help="Dark frame (lens capped, same settings), subtracted per pixel from every photo.")
@click.option("--geometry", type=click.Path(dir_okay=False), default=None,
              help="Photo of the printed wall target from the same tripod position (room lights on).")
@click.option("--wall-points", default=None,
              help="Four or more known wall points: 'x,y=X,Y;...' (image px = wall mm) or a JSON file.")
@click.option("--target-scale", type=float, default=1.0, show_default=True,
              help="Measured length of the target's 100 mm scale bar, divided by 100.")
@click.option("--square", "assume_square", is_flag=True,
              help="The light is aimed square to the wall: do not estimate its tilt.")
@click.option("--head-diameter", "head_mm", type=float, default=None,
              help="Diameter of the light's head (mm), for the far-field check.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Folder for report.json, profile.csv and beam.png.")
@click.option("--json", "as_json", is_flag=True, help="Print the report as JSON instead of a table.")
def analyze(photos, distance_m, distance_u, ambient, flat, lux_at_peak, meter_accuracy, reflectance, no_exif_scale,
            focal_35mm, hfov, camera_distance, response, camera, dark, geometry, wall_points, target_scale,
            assume_square, head_mm, out_dir, as_json):
    """Analyse PHOTOS of a beam on a white wall: calibrated figures, report files.

    Several photos are a bracket (same scene, different exposures) and are merged first.
    The camera stands beside the light square to the wall, or anywhere with --geometry.
    """
    from .analysis import analyze as run
    from .report.output import write_report

    try:
        report = run(list(photos) if len(photos) > 1 else photos[0], distance_m=distance_m, distance_uncertainty_m=distance_u, ambient=ambient, flat=flat,
                     lux_at_peak=lux_at_peak, lux_meter_accuracy=meter_accuracy, reflectance=reflectance,
                     use_exif_scale=not no_exif_scale, focal_35mm=focal_35mm, hfov_deg=hfov,
                     camera_distance_m=camera_distance, response=response, head_diameter_mm=head_mm,
                     camera=camera, dark=dark, geometry=geometry, wall_points=wall_points,
                     target_scale=target_scale, assume_square=assume_square)
        written = write_report(report, out_dir) if out_dir else []
    except BeamshotError as exc:
        _fail(str(exc))
    if as_json:
        click.echo(json.dumps(report.to_dict(), indent=2, ensure_ascii=False))
        return
    names = ", ".join(os.path.basename(p) for p in photos)
    click.echo(f"{names} at {distance_m:g} m")
    click.echo(f"  tone curve: {report.settings['response']}; {report.calibration.get('response_source', 'assumed')}")
    _print_figures(report)
    marks = {f.status for f in report.figures.values()}
    if "estimate" in marks:
        click.echo("  ≈ marks an estimate: most of its uncertainty comes from an assumption (see the warnings)")
    if marks & {"lower_bound", "upper_bound"}:
        click.echo("  ≥ / ≤ mark a bound: the true value is at least / at most this (see the figure's reason)")
    if written:
        click.echo(f"wrote {', '.join(written)}")
    else:
        click.echo("no files written; give --out DIR for report.json, profile.csv and beam.png")


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
    click.echo("\n≈ marks an estimate: most of its uncertainty comes from an assumption (here the assumed tone "
               "curve and lens shading of an uncalibrated camera); see each report's warnings")
    click.echo(f"done in {time.perf_counter() - start:.1f} s; open {out_dir}/*/beam.png")


@cli.command()
@click.option("--paper", type=click.Choice(["a4", "letter"]), default="a4", show_default=True)
@click.option("--out", "stem", default="beamshot-target", show_default=True,
              help="File name without extension; writes .pdf and .png.")
def target(paper, stem):
    """Write the printable wall target (fiducial markers and a scale bar) as PDF and PNG."""
    from .target import write_target

    try:
        written = write_target(stem, paper)
    except BeamshotError as exc:
        _fail(str(exc))
    except OSError as exc:
        _fail(f"cannot write the target ({exc.strerror})")
    click.echo(f"wrote {', '.join(written)}")
    click.echo("print at 100 % (no 'fit to page'), measure the 100 mm scale bar, pin the sheet upright with "
               "its cross at the aim point, photograph it from the tripod with room lights on, then remove it")


@cli.command("far-field")
@click.argument("near", type=click.Path(dir_okay=False))
@click.argument("far", type=click.Path(dir_okay=False))
def far_field(near, far):
    """Compare two report.json files of one light at two distances (is the wall far enough?)."""
    from .farfield import compare_distances
    from .report.output import read_report_json

    try:
        result = compare_distances(read_report_json(near), read_report_json(far))
    except BeamshotError as exc:
        _fail(str(exc))
    for line in result["lines"]:
        click.echo(line)
    if not result["consistent"]:
        sys.exit(1)


@cli.group()
def camera():
    """Calibrate a camera once, keep what was learned in a profile, and inspect profiles."""


def _profile_for_update(name: str, out: str | None):
    """The profile a calibration step updates: ``out`` (a file) if given, else the named one."""
    from .camera.profile import CameraProfile, find_profile, load_profile

    target = out if out is not None else name
    if find_profile(target) is not None:
        return load_profile(target)
    import datetime as dt

    return CameraProfile(name=name, created_utc=dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds"))


def _file_records(photos) -> list[dict]:
    return [{"name": p.name, "sha256": p.sha256, "width": p.shape[1], "height": p.shape[0]} for p in photos]


def _save(profile, out):
    from .camera.profile import save_profile

    try:
        path = save_profile(profile, out)
    except OSError as exc:
        _fail(f"cannot write the profile ({exc.strerror})")
    click.echo(f"saved camera profile '{profile.name}' to {path}")


@camera.command("response")
@click.argument("photos", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option("--name", required=True, help="Profile name (created or updated).")
@click.option("--method", type=click.Choice(["debevec", "robertson"]), default="debevec", show_default=True)
@click.option("--times", default=None, help="Exposure times in seconds, comma-separated, if EXIF lacks them.")
@click.option("--out", "out", type=click.Path(dir_okay=False), default=None, help="Write the profile to this file.")
def camera_response(photos, name, method, times, out):
    """Recover the response curve from a bracket (5-9 photos of a still scene, tripod)."""
    from .camera.bracket import recover_response
    from .photo import load_photo

    try:
        t = None if times is None else [float(x) for x in times.split(",")]
    except ValueError:
        _fail("--times takes numbers in seconds separated by commas, e.g. 0.01,0.02,0.04")
    try:
        loaded = [load_photo(p) for p in photos]
        fit = recover_response(loaded, method=method, times=t)
        profile = _profile_for_update(name, out)
    except BeamshotError as exc:
        _fail(str(exc))
    profile = profile.with_step("response", _file_records(loaded), response=fit.response,
                                response_quality=fit.quality(), make=loaded[0].exif.make,
                                model=loaded[0].exif.model)
    click.echo(f"response from {len(loaded)} photos ({fit.method}): frames agree within "
               f"{fit.consistency_rms:.2%} (RMS) after linearisation")
    for w in fit.warnings:
        click.echo(f"  ! {w}")
    _save(profile, out)


@camera.command("flat")
@click.argument("photos", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option("--name", required=True, help="Profile name (created or updated).")
@click.option("--dark", type=click.Path(dir_okay=False), default=None, help="Dark frame subtracted first.")
@click.option("--out", "out", type=click.Path(dir_okay=False), default=None, help="Write the profile to this file.")
def camera_flat(photos, name, dark, out):
    """Fit the vignetting model to photos of an evenly lit white target filling the view."""
    import numpy as np

    from .camera.flatfield import fit_flat_field
    from .camera.linearize import linearize
    from .photo import load_photo

    try:
        profile = _profile_for_update(name, out)
        loaded = [load_photo(p) for p in photos]
        for p in loaded[1:]:
            if p.shape != loaded[0].shape:
                raise BeamshotError(f"{p.name}: {p.shape[1]}x{p.shape[0]} differs from {loaded[0].name}")
        lum = np.mean([linearize(p, profile.response).luminance for p in loaded], axis=0)
        if dark is not None:
            d = load_photo(dark)
            if d.shape != loaded[0].shape:
                raise BeamshotError(f"{d.name}: the dark frame is {d.shape[1]}x{d.shape[0]}, "
                                    f"the flat {loaded[0].shape[1]}x{loaded[0].shape[0]}")
            lum = lum - linearize(d, profile.response).luminance
        ff = fit_flat_field(lum)
    except BeamshotError as exc:
        _fail(str(exc))
    ff = type(ff)(coefficients=ff.coefficients, residual_rms=ff.residual_rms, shape=loaded[0].shape)
    r2 = 1.0
    corner = 1.0 / (1 + sum(c * r2 ** (k + 1) for k, c in enumerate(ff.coefficients)))
    profile = profile.with_step("flat", _file_records(loaded), flat=ff)
    click.echo(f"flat field from {len(loaded)} photo(s): corners at {corner:.0%} of the centre; "
               f"model residual {ff.residual_rms:.2%} RMS")
    _save(profile, out)


@camera.command("flat-from-turns")
@click.argument("photos", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option("--name", required=True, help="Profile name (created or updated).")
@click.option("--focal-35mm", type=float, default=None, help="35 mm-equivalent focal length (mm) if EXIF lacks it.")
@click.option("--hfov", type=float, default=None, help="Horizontal field of view of the photos (degrees).")
@click.option("--out", "out", type=click.Path(dir_okay=False), default=None, help="Write the profile to this file.")
def camera_flat_from_turns(photos, name, focal_35mm, hfov, out):
    """Lens shading from two or more photos of one beam, the camera turned on the tripod between them."""
    from .camera.linearize import linearize
    from .camera.turned_flat import RECOMMENDED_TURN_DEG, TurnedPhoto, fit_turned_flat
    from .photo import load_photo
    from .wall_setup import focal_for

    try:
        if len(photos) < 2:
            raise BeamshotError("give at least two photos of the same beam, with the camera turned "
                                f"{RECOMMENDED_TURN_DEG} deg on the tripod between them")
        if focal_35mm is not None and focal_35mm <= 0 or hfov is not None and not 0 < hfov < 180:
            raise BeamshotError("--focal-35mm takes a focal length in mm (e.g. 26), --hfov an angle below 180 deg")
        profile = _profile_for_update(name, out)
        loaded = [load_photo(p) for p in photos]
        first = loaded[0]
        for p in loaded[1:]:
            if p.shape != first.shape:
                raise BeamshotError(f"{p.name}: {p.shape[1]}x{p.shape[0]} differs from {first.name} "
                                    f"{first.shape[1]}x{first.shape[0]}; use one camera and zoom for all photos")
            if focal_35mm is None and hfov is None and p.exif.focal_35mm_mm != first.exif.focal_35mm_mm:
                raise BeamshotError(f"{p.name}: the focal length ({p.exif.focal_35mm_mm} mm equiv.) differs from "
                                    f"{first.name} ({first.exif.focal_35mm_mm}); keep the zoom fixed")
        f_px, _, f_src = focal_for(first, focal_35mm, hfov)
        if f_px is None:
            raise BeamshotError(f"{first.name}: no focal length in EXIF; give --focal-35mm or --hfov")
        resp = profile.response
        if any(p.linear for p in loaded):
            from .camera.response import parse_response

            resp = parse_response("linear")
        turned = []
        for p in loaded:
            img = linearize(p, resp)
            if profile.black_level:
                img = img.with_values(img.rgb - float(profile.black_level))
            turned.append(TurnedPhoto.from_linear(p.name, img))
        fit = fit_turned_flat(turned, f_px)
    except BeamshotError as exc:
        _fail(str(exc))
    profile = profile.with_step("flat-from-turns", _file_records(loaded), details=fit.summary(), flat=fit.flat)
    click.echo(f"flat field from {len(loaded)} turned photos (focal length {f_px:.0f} px from {f_src}):")
    for t in fit.turns:
        click.echo(f"  turn {t.from_name} -> {t.to_name}: {t.angle_deg:.2f} deg (pan {t.pan_deg:+.2f}, "
                   f"tilt {t.tilt_deg:+.2f}, roll {t.roll_deg:+.2f} - weakly fixed by a round beam), "
                   f"exposure ratio {t.exposure_ratio:.3f}")
    radii = (0.2, 0.4, 0.6, 0.8)
    v = fit.falloff(radii + (1.0,))
    click.echo("  fall-off V: " + ", ".join(f"{x:.0%} at r {r:g}" for r, x in zip(radii, v)) +
               f", corners {v[-1]:.0%} (r = fraction of the half-diagonal; data reach r {fit.max_radius:.2f}, "
               f"where V is uncertain by {fit.uncertainty_at_max_radius:.1%})")
    click.echo(f"  fit residual {fit.residual_rms_samples:.2%} RMS per sample, {fit.flat.residual_rms:.2%} RMS in "
               f"blocks; {fit.samples} samples; terms b1..b{fit.terms}")
    for w in fit.warnings:
        click.echo(f"  ! {w}")
    _save(profile, out)


@camera.command("scale")
@click.argument("photo", type=click.Path(dir_okay=False))
@click.option("--lux", type=float, required=True, help="Lux-meter reading on the wall at the metered point.")
@click.option("--at", "at", default=None, help="Metered point as X,Y pixels in the photo [default: centre].")
@click.option("--meter-accuracy", type=float, default=0.05, show_default=True, help="Relative 1-sigma of the meter.")
@click.option("--name", required=True, help="Profile name (created or updated).")
@click.option("--out", "out", type=click.Path(dir_okay=False), default=None, help="Write the profile to this file.")
def camera_scale(photo, lux, at, meter_accuracy, name, out):
    """Keep the camera's absolute constant from one photo of a lit wall and a lux reading."""
    from .camera.constant import camera_constant
    from .camera.linearize import linearize
    from .photo import load_photo

    try:
        xy = None
        if at is not None:
            try:
                xy = tuple(float(v) for v in at.split(","))
                if len(xy) != 2:
                    raise ValueError
            except ValueError:
                raise BeamshotError("--at takes X,Y in pixels, e.g. 2016,1512") from None
        profile = _profile_for_update(name, out)
        p = load_photo(photo)
        img = linearize(p, profile.response)
        if profile.flat is not None:
            img = img.divided_by(profile.flat.evaluate(img.shape))
        k, rel, notes = camera_constant(img, p.exif, lux, xy, meter_accuracy=meter_accuracy, name=p.name)
    except BeamshotError as exc:
        _fail(str(exc))
    profile = profile.with_step("scale", _file_records([p]), scale_constant=k, scale_uncertainty=rel,
                                scale_notes=notes)
    click.echo(f"camera constant K = {k:.5g} lx (± {rel:.1%}); E = K v N^2 / (t S)")
    if "warning" in notes:
        click.echo(f"  ! {notes['warning']}")
    _save(profile, out)


@camera.command("show")
@click.argument("name")
def camera_show(name):
    """Print a camera profile (a name or a file)."""
    from .camera.profile import load_profile

    try:
        profile = load_profile(name)
    except BeamshotError as exc:
        _fail(str(exc))
    click.echo(json.dumps(profile.to_dict(), indent=2))


@camera.command("list")
def camera_list():
    """List the camera profiles that can be used with --camera."""
    from .camera.profile import list_profiles

    for name, path in list_profiles():
        click.echo(f"{name:28s} {path}")


def main():
    cli(prog_name="beamshot")


if __name__ == "__main__":  # pragma: no cover
    main()
