"""Command line: parse options, call the library, print, exit codes.

Exit codes (also in the README): 0 done; 1 a comparison found a real difference (``far-field``),
or a figure failed its specification (``qa``); 4 ``qa`` could not decide every figure (undecided or
not measured; docs/spec.md); 2 an input problem: one line on stderr naming the problem and the fix,
no traceback (click's own usage errors too, in at most three lines); 3 an internal error: a
one-line apology on stderr naming the log file that holds the traceback; 130 interrupted (Ctrl-C);
143 terminated (SIGTERM) while the output set was being written.

Only click and small modules of our own are imported at start-up: numpy, OpenCV and the analysis
are imported inside the commands (matplotlib and SciPy only where a command draws with or fits by
them), so ``beamshot --help`` is quick.
"""

from __future__ import annotations

import functools
import os
import sys
import time

import click

from . import __version__
from .errors import BeamshotError
from .vocabulary import label, term

__all__ = ["main", "cli", "EXIT_OK", "EXIT_DIFFERENCE", "EXIT_INPUT", "EXIT_INTERNAL", "EXIT_INTERRUPTED",
           "EXIT_TERMINATED", "crash_log_dir"]

EXIT_OK = 0
EXIT_DIFFERENCE = 1
EXIT_INPUT = 2
EXIT_INTERNAL = 3
EXIT_INTERRUPTED = 130
EXIT_TERMINATED = 143

#: International foot and yard (NIST SP 811, appendix B): 1 ft = 0.3048 m, 1 yd = 0.9144 m.
M_PER_FT = 0.3048
M_PER_YD = 0.9144


def crash_log_dir() -> str:
    """Folder for internal-error logs: ``$XDG_CACHE_HOME/beamshot/logs`` (default ``~/.cache``)."""
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return os.path.join(base, "beamshot", "logs")


def _write_crash_log(exc: BaseException, argv) -> str | None:
    """Write the traceback of an internal error to a time-stamped file; returns its path (None if
    neither the cache folder nor the system temp folder can be written)."""
    import tempfile
    import traceback

    stamp = time.strftime("%Y%m%d-%H%M%S")
    name = f"crash-{stamp}-{os.getpid()}.log"
    text = (f"beamshot {__version__}, Python {sys.version.split()[0]}, {sys.platform}\n"
            f"command: beamshot {' '.join(str(a) for a in argv)}\n\n"
            + "".join(traceback.format_exception(type(exc), exc, exc.__traceback__)))
    for folder in (crash_log_dir(), tempfile.gettempdir()):
        try:
            os.makedirs(folder, exist_ok=True)
            path = os.path.join(folder, name)
            # arguments from a file system with non-UTF-8 names hold lone surrogates: escaped, not fatal
            with open(path, "w", encoding="utf-8", errors="backslashreplace") as fh:
                fh.write(text)
            return path
        except OSError:
            continue
    return None


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _error(message: str) -> None:
    click.echo(f"beamshot: error: {_one_line(message)}", err=True)


#: Notes about old spellings, printed when the command ends without an input problem (an exit 2
#: is exactly one line: the error).
_NOTES: list[str] = []


def _note(message: str) -> None:
    _NOTES.append(f"note: {_one_line(message)}")


def _flush_notes(show: bool) -> None:
    if show:
        for line in _NOTES:
            click.echo(line, err=True)
    _NOTES.clear()


def _fail(message: str):
    """An input problem: exit 2 with ``message`` (one line naming the fix)."""
    raise BeamshotError(message)


class _Option(click.Option):
    """An option whose ``show_default`` text is printed as ``[default: text]`` like every other
    default (click puts a string default in parentheses)."""

    def get_help_extra(self, ctx):
        extra = super().get_help_extra(ctx)
        if isinstance(self.show_default, str):
            extra["default"] = self.show_default
        return extra


option = functools.partial(click.option, cls=_Option)


def _defaulted(ctx, name: str) -> bool:
    """Whether a parameter kept its default (so the library's own default applies)."""
    from click.core import ParameterSource

    return ctx.get_parameter_source(name) in (ParameterSource.DEFAULT, None)


class _Command(click.Command):
    """A command whose unknown-option message suggests the options that start with what was typed
    (``--lux-a`` -> ``--lux-at``), before click's spelling-based guesses."""

    def parse_args(self, ctx, args):
        try:
            return super().parse_args(ctx, args)
        except click.NoSuchOption as exc:
            names = sorted({n for p in self.get_params(ctx) for n in (*p.opts, *p.secondary_opts)
                            if n.startswith("--") and not getattr(p, "hidden", False)})
            starting = [n for n in names if n.startswith(exc.option_name)]
            if starting:
                exc.possibilities = starting
            raise


class _Group(click.Group):
    """The command group; its ``main`` wraps the whole dispatch so that nothing escapes as a
    traceback and every exit code means one thing (see the module docstring)."""

    command_class = _Command
    group_class = type

    def main(self, args=None, prog_name=None, complete_var=None, standalone_mode=True, **extra):
        argv = list(sys.argv[1:] if args is None else args)
        try:
            rv = super().main(argv, prog_name or "beamshot", complete_var, standalone_mode=False, **extra)
            code = rv if isinstance(rv, int) and not isinstance(rv, bool) else EXIT_OK
        except click.exceptions.NoArgsIsHelpError as exc:
            exc.show()
            code = exc.exit_code
        except click.UsageError as exc:
            _show_usage_error(exc)
            code = exc.exit_code
        except click.ClickException as exc:
            _error(exc.format_message())
            code = exc.exit_code
        except (click.Abort, KeyboardInterrupt):
            code = EXIT_INTERRUPTED
        except BeamshotError as exc:
            _error(str(exc))
            code = EXIT_INPUT
        except SystemExit:
            raise
        except Exception as exc:  # noqa: BLE001 - an internal error: apologise, keep the traceback in a log
            path = _write_crash_log(exc, argv)
            where = f"the details are in {path}" if path else \
                f"no log could be written ({type(exc).__name__}: {_one_line(exc)})"
            click.echo(f"beamshot: internal error - sorry, this is a fault in beamshot, not in your input; {where}; "
                       "please include that file when you report it", err=True)
            code = EXIT_INTERNAL
        except BaseException as exc:
            from .report.output import Terminated

            if not isinstance(exc, Terminated):
                raise
            code = EXIT_TERMINATED
        _flush_notes(code != EXIT_INPUT)
        if not standalone_mode:
            return code
        sys.exit(code)


def _show_usage_error(exc: click.UsageError) -> None:
    """Click's usage error as one line: the error and where the help is."""
    ctx = exc.ctx
    where = f" (see '{ctx.command_path} --help')" if ctx is not None else ""
    _error(exc.format_message() + where)


def _print_figures(report, *, units: str = "metric") -> None:
    click.echo(f"  {'figure':26s} measured (± standard uncertainty)")
    for key, fig in report.figures.items():
        extra = ""
        if units == "imperial" and key == "beam_distance" and fig.value is not None:
            extra = "  (" + _imperial(fig.value, fig.uncertainty) + ")"
        click.echo(f"  {label(key, indent=True):26s} {fig.text(3)}{extra}")
    _print_shape(report)
    for w in report.warnings:
        click.echo(f"  ! {w}")


def _print_shape(report) -> None:
    """The beam shape and artefact figures that have a value (docs/artefacts.md); rings listed."""
    shape = getattr(report, "shape_figures", None) or {}
    shown = {k: f for k, f in shape.items() if f.value is not None}
    if not shown:
        return
    click.echo(f"  {'beam shape and artefacts':26s} (bounds: not distinguishable from noise)")
    for key, fig in shown.items():
        text = f"{fig.value:.0f}" if key == "ring_count" else fig.text(3)
        click.echo(f"  {'  ' + label(key):36s} {text}")
    rings = shape.get("ring_score")
    if rings is not None and "rings found: " in rings.method:
        click.echo("      rings: " + rings.method.split("rings found: ", 1)[1].split("; ring score")[0])


def _imperial(value_m: float, u_m: float | None = None) -> str:
    """A distance in feet and yards, rounded as the metric value is (GUM 7.2.6 via the figure's rule).

    >>> _imperial(100.0)
    '328 ft, 109 yd'
    """
    from .figure import _number, value_with_uncertainty

    parts = []
    for per, unit in ((M_PER_FT, "ft"), (M_PER_YD, "yd")):
        if u_m:
            v, u = value_with_uncertainty(value_m / per, u_m / per)
            parts.append(f"{v} ± {u} {unit}")
        else:
            parts.append(f"{_number(value_m / per, 3)} {unit}")
    return ", ".join(parts)


def _meter_accuracy_fraction(value: float, option: str) -> float:
    """``--meter-accuracy`` in percent (the maker's ±, used as one standard uncertainty); a value
    below 1 is the old fraction spelling, read as such with a note."""
    if value != value or value <= 0:
        _fail(f"{option} takes the meter's specified accuracy in percent, e.g. {option} 5 for ±5 %")
    if value < 1:
        _note(f"{option} {value:g} is read as a fraction ({100 * value:g} %), the old spelling kept for one "
              f"release; give percent, e.g. {option} {100 * value:g}")
        return value
    if value > 50:
        _fail(f"{option} {value:g} % is not a lux meter's accuracy; give the maker's ± in percent, e.g. 5")
    return value / 100.0


def _pixel_pair(text: str, option: str) -> tuple[float, float]:
    try:
        xy = tuple(float(v) for v in text.split(","))
        if len(xy) != 2 or not all(abs(v) < 1e9 for v in xy):
            raise ValueError
    except ValueError:
        _fail(f"{option} takes X,Y in pixels of the photo (x right, y down), e.g. {option} 2016,1512")
    return xy


@click.group("beamshot", cls=_Group, context_settings={"help_option_names": ["-h", "--help"], "show_default": True})
@click.version_option(__version__, prog_name="beamshot")
def cli():
    """Calibrated beam figures from photos of a flashlight beam on a white wall.

    Caution: do not look into the beam or aim it at people, animals, vehicles or aircraft;
    powerful lights can scorch materials close to the lens.

    Exit codes: 0 done; 1 far-field found a real difference, or qa a figure outside its
    limits; 4 qa could not decide every figure; 2 an input problem (one line naming the fix);
    3 an internal error (the message names a log file); 130 interrupted; 143 terminated.
    """


@cli.command(short_help="Calibrated figures and report files from photos of a beam.")
@click.argument("photos", nargs=-1, required=True, type=click.Path(dir_okay=False))
@option("--distance", "distance_m", type=float, required=True, help="Light-to-wall distance in metres.")
@option("--distance-uncertainty", "distance_u", type=float, default=0.02,
        help="Standard uncertainty of the distance in metres.")
@option("--ambient", type=click.Path(dir_okay=False), default=None,
        help="Photo with the light off, same camera settings, subtracted first.")
@option("--flat", type=click.Path(dir_okay=False), default=None,
        help="Photo of an evenly lit white target for vignetting correction.")
@option("--lux", "lux", type=float, default=None, metavar="LX",
        help="Lux-meter reading on the wall (lx), at the hotspot's peak or at --lux-at.")
@option("--lux-at", "lux_at", default=None, metavar="X,Y", show_default="the peak",
        help="Where the meter was held: pixel X,Y of the first beam photo (x right, y down).")
@option("--lux-at-peak", "lux_at_peak", type=float, default=None, metavar="LX", hidden=True,
        help="Old spelling of --lux (a reading at the peak); kept for one release.")
@option("--meter-accuracy", type=float, default=5, metavar="PERCENT",
        help="The lux meter's specified accuracy, ± in percent (used as one standard uncertainty).")
@option("--reflectance", type=float, default=0.85,
        help="Wall reflectance for the exposure-metadata estimate (without a lux reading).")
@option("--no-exif-scale", is_flag=True, help="Do not estimate absolute figures from exposure metadata.")
@option("--focal-35mm", type=float, default=None, help="35 mm-equivalent focal length (mm) if EXIF lacks it.")
@option("--hfov", type=float, default=None, help="Horizontal field of view of the photo (degrees).")
@option("--camera-distance", type=float, default=None, show_default="the light-to-wall distance",
        help="Camera-to-wall distance (m) if the camera is not beside the light.")
@option("--response", default=None, show_default="the camera profile's, else srgb",
        help="Tone curve: srgb, linear, s-curve or gamma:<exponent>.")
@option("--camera", default=None, show_default="uncalibrated, sRGB",
        help="Camera profile: a name (see 'beamshot camera list') or a JSON file.")
@option("--dark", type=click.Path(dir_okay=False), default=None,
        help="Dark frame (lens capped, same settings), subtracted per pixel from every photo.")
@option("--geometry", type=click.Path(dir_okay=False), default=None,
        help="Photo of the printed wall target from the same tripod position (room lights on).")
@option("--wall-points", default=None,
        help="Four or more known wall points: 'x,y=X,Y;...' (image px = wall mm) or a JSON file.")
@option("--scale-bar-mm", type=float, default=100, metavar="MM",
        help="Measured length of the printed target's 100 mm scale bar, in mm.")
@option("--target-scale", type=float, default=None, hidden=True,
        help="Old spelling: scale bar length / 100 mm; use --scale-bar-mm (kept for one release).")
@option("--square", "assume_square", is_flag=True,
        help="The light is aimed square to the wall: do not estimate its tilt.")
@option("--head-diameter", "head_mm", type=float, default=None,
        help="Diameter of the light's head (mm), for the far-field check.")
@option("--name", "light_name", default=None, show_default="the photo's file name",
        help="Name of the light, used in titles and reports.")
@option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
        help="Folder for the report files: report.json, report.html, beam.png, profile.csv, intensity-map.npz "
             "(an older set there is replaced whole).")
@option("--json", "as_json", is_flag=True,
        help="Print the report as JSON instead of a table, without the profile arrays.")
@option("--json-full", "as_json_full", is_flag=True,
        help="Print the whole report as JSON, profile arrays included (as report.json).")
@option("--units", type=click.Choice(["metric", "imperial"]), default="metric",
        help="Units of printed distances: imperial adds feet and yards (the report keeps metres).")
@option("--colour", "colour", is_flag=True,
        help="Also measure colour across the beam: chromaticity, CCT and Duv of hotspot, corona and spill, "
             "tint uniformity, and tint.png (see docs/colour.md).")
@option("--spec", "spec_file", type=click.Path(dir_okay=False), default=None, metavar="FILE",
        help="Also judge the figures against a beam specification (TOML, docs/spec.md): pass, fail or "
             "undecided per figure, in the table, report.json and report.html ('beamshot qa' gives an exit code).")
@click.pass_context
def analyze(ctx, photos, distance_m, distance_u, ambient, flat, lux, lux_at, lux_at_peak, meter_accuracy, reflectance,
            no_exif_scale, focal_35mm, hfov, camera_distance, response, camera, dark, geometry, wall_points,
            scale_bar_mm, target_scale, assume_square, head_mm, light_name, out_dir, as_json, as_json_full, units,
            colour, spec_file):
    """Analyze PHOTOS of a beam on a white wall: calibrated figures, report files.

    Caution: do not look into the beam or aim it at people, animals, vehicles or aircraft.

    Several photos are a bracket (same scene, different exposures) and are merged first.
    The camera stands beside the light square to the wall, or anywhere with --geometry.
    """
    if lux_at_peak is not None:
        if lux is not None:
            _fail("give --lux or its old spelling --lux-at-peak, not both")
        _note("--lux-at-peak is now --lux (add --lux-at X,Y for a reading away from the peak); "
              "the old spelling works for one more release")
        lux = lux_at_peak
    point = None
    if lux_at is not None:
        if lux is None:
            _fail("--lux-at needs the reading taken there: give --lux LX too")
        point = _pixel_pair(lux_at, "--lux-at")
    if target_scale is not None:
        if not _defaulted(ctx, "scale_bar_mm"):
            _fail("give --scale-bar-mm or its old spelling --target-scale, not both")
        _note(f"--target-scale is now --scale-bar-mm (the bar's measured length in mm; here "
              f"{100 * target_scale:g}); the old spelling works for one more release")
    else:
        if scale_bar_mm != scale_bar_mm or scale_bar_mm <= 0:
            _fail("--scale-bar-mm takes the measured length of the target's 100 mm bar in mm, e.g. 99.5")
        target_scale = scale_bar_mm / 100.0
    if as_json and as_json_full:
        _fail("give --json (compact) or --json-full (with the profile arrays), not both")
    if geometry is None and (target_scale != 1.0 or not _defaulted(ctx, "scale_bar_mm")):
        _note("the scale bar's length is used only with the printed target (--geometry); ignored here")
    spec = None
    if spec_file is not None:  # read first: a bad spec is refused before the analysis runs
        from .spec import read_spec

        spec = read_spec(spec_file)
    if units != "metric" and (as_json or as_json_full):
        _note("--units changes the printed table only; report.json keeps metres")
    kw = {}
    if point is not None:
        kw["lux_point_px"] = point

    meter_u = None if _defaulted(ctx, "meter_accuracy") else _meter_accuracy_fraction(meter_accuracy, "--meter-accuracy")
    from .decode_ahead import decode_ahead

    # the photos decode on a second thread while the analysis modules import (beamshot/decode_ahead.py)
    ahead, (beam, ambient, flat, dark) = decode_ahead(list(photos), ambient, flat, dark)
    try:
        from .analysis import analyze as run
        from .report.output import write_report
    except BaseException:
        ahead.settle(interrupted=True)
        raise
    ahead.settle()  # before anything else runs or prints: the decoder's stderr capture has ended
    report = run(beam if len(beam) > 1 else beam[0], distance_m=distance_m,
                 distance_uncertainty_m=None if _defaulted(ctx, "distance_u") else distance_u,
                 ambient=ambient, flat=flat, lux_at_peak=lux, lux_meter_accuracy=meter_u,
                 reflectance=None if _defaulted(ctx, "reflectance") else reflectance,
                 use_exif_scale=not no_exif_scale, focal_35mm=focal_35mm, hfov_deg=hfov,
                 camera_distance_m=camera_distance, response=response, head_diameter_mm=head_mm,
                 camera=camera, dark=dark, geometry=geometry, wall_points=wall_points,
                 target_scale=target_scale, assume_square=assume_square, light_name=light_name,
                 **({"colour": True} if colour else {}), **kw)
    if spec is not None:
        from dataclasses import replace

        from .qa import judge_report

        report = replace(report, qa=judge_report(spec, report, spec_file))
    written = write_report(report, out_dir) if out_dir else []
    where = (f"wrote {', '.join(written)}" if written else
             "no files written; give --out DIR for report.json, report.html, beam.png and the rest")
    if as_json or as_json_full:
        import json

        data = report.to_dict()
        if not as_json_full:
            data.pop("profile", None)
        click.echo(json.dumps(data, indent=2, ensure_ascii=False))
        if written:  # stdout stays pure JSON; without --out the JSON printed is the whole output
            click.echo(where, err=True)
        return
    names = ", ".join(os.path.basename(p) for p in photos)
    at = f"{distance_m:g} m" + (f" ({distance_m / M_PER_FT:.1f} ft)" if units == "imperial" else "")
    click.echo(f"{light_name}: {names} at {at}" if light_name else f"{names} at {at}")
    click.echo(f"  tone curve: {report.settings['response']}; {report.calibration.get('response_source', 'assumed')}")
    _print_figures(report, units=units)
    if report.colour is not None:
        from .colour.table import colour_lines

        for line in colour_lines(report.colour):
            click.echo(line)
    if report.qa is not None:
        q = report.qa
        counts = {v: sum(1 for c in q["checks"] if c["verdict"] == v) for v in ("pass", "fail", "undecided",
                                                                                "not measured")}
        click.echo(f"  specification {q['spec'] or spec_file}: {q['verdict'].upper()} (" +
                   ", ".join(f"{n} {v}" for v, n in counts.items() if n) + f"; k = {q['coverage_factor']:g})")
        for c in q["checks"]:
            if c["verdict"] != "pass":
                click.echo(f"    {c['verdict']:<12} {c['figure']}: {c['why']}")
    marks = {f.status for f in report.figures.values()}
    if "estimate" in marks:
        click.echo("  ≈ marks an estimate: most of its uncertainty comes from an assumption (see the warnings)")
    if marks & {"lower_bound", "upper_bound"}:
        click.echo("  ≥ / ≤ mark a bound: the true value is at least / at most this (see the figure's reason)")
    click.echo(where)


def _decimals(text: str) -> int:
    """Decimal places of the first number in a figure's text ('≈ 8.02 ± 0.15°' -> 2)."""
    import re

    m = re.search(r"[\d,]+(?:\.(\d+))?", text)
    return len(m.group(1) or "") if m else 0


@cli.command(short_help="Render, analyze and check an invented comparison of optic prototypes.")
@option("--out", "out_dir", type=click.Path(file_okay=False), default="beamshot-demo",
        help="Folder for the demo photos and reports.")
def demo(out_dir):
    """Render an invented comparison of optic prototypes, analyze it, compare with the truth."""
    from .analysis import analyze as run
    from .demo import write_demo_photos
    from .report.output import write_report

    from .demo import DEMO_LIGHTS

    start = time.perf_counter()
    ours = {"photos", "comparison"} | {light.name for light in DEMO_LIGHTS}
    if os.path.isdir(out_dir):
        foreign = sorted(set(os.listdir(out_dir)) - ours)
        if foreign:
            raise BeamshotError(f"{out_dir}: holds files the demo did not write ({', '.join(foreign[:3])}"
                                f"{', ...' if len(foreign) > 3 else ''}); choose another --out or empty that folder")
    elif os.path.lexists(out_dir):
        raise BeamshotError(f"{out_dir}: exists and is not a folder; choose another --out")
    photos_dir = os.path.join(out_dir, "photos")
    try:
        lights = write_demo_photos(photos_dir)
    except OSError as exc:
        raise BeamshotError(f"{out_dir}: cannot write the demo there ({exc.strerror or exc}); choose a folder you "
                            "can write to") from None
    click.echo(f"rendered {len(lights)} synthetic beam photos (+ light-off frames) into {photos_dir}")
    rows = []
    for light in lights:
        report = run(light["photo"], distance_m=light["distance_m"], ambient=light["ambient"],
                     lux_at_peak=light["lux_at_peak"], light_name=light["label"],
                     **({"colour": True} if "hotspot_cct_k" in light["truth"] else {}))
        write_report(report, os.path.join(out_dir, light["name"]))
        rows.append((light, report))
    truth_keys = (("peak_intensity", "peak_cd"), ("hotspot_angle", "hotspot_angle_deg"),
                  ("field_angle", "field_angle_deg"), ("spill_angle", "spill_angle_deg"),
                  ("ra", "ra"), ("beam_flux", "beam_flux_lm"))
    for light, report in rows:
        click.echo(f"\n{light['label']}  ({light['name']}, lux meter {light['lux_at_peak']:g} lx "
                   f"at {light['distance_m']:g} m)")
        click.echo(f"  {'figure':26s} {'measured (± standard uncertainty)':34s} {'truth':>12s} {'error':>7s}")
        for key, tkey in truth_keys:
            fig = report.figures[key]
            truth = light["truth"].get(tkey)
            if fig.value is None or truth is None:
                click.echo(f"  {label(key):26s} {fig.text(3):34s}")
                continue
            unit = term(key).unit
            truth_text = f"{truth:,.{_decimals(fig.text(3))}f}" + ("°" if unit == "deg" else f" {unit}" if unit else "")
            err = (fig.value - truth) / truth
            click.echo(f"  {label(key):26s} {fig.text(3):34s} {truth_text:>12s} {err:>+7.1%}")
        if report.colour is not None and report.colour["measured"]:
            for zone in ("hotspot", "spill"):
                fig = report.colour["zones"][zone]["cct"]
                truth = light["truth"].get(f"{zone}_cct_k")
                if fig["value"] is not None and truth:
                    from .colour.table import figure_text

                    got, want = figure_text(fig, 4), f"{truth:,.0f} K"
                    click.echo(f"  {zone + ' CCT':26s} {got:34s} {want:>12s} {fig['value'] / truth - 1:>+7.1%}")
        click.echo(f"  report: {os.path.join(out_dir, light['name'])}{os.sep}")
    click.echo("\n≈ marks an estimate: most of its uncertainty comes from an assumption (here the assumed tone "
               "curve and lens shading of an uncalibrated camera); see each report's warnings")
    from .compare import compare as run_compare

    folders = [os.path.join(out_dir, light["name"]) for light, _ in rows]
    run_compare(folders, out_dir=os.path.join(out_dir, "comparison"))
    click.echo(f"compared at one exposure (beamshot compare {' '.join(folders)} --out "
               f"{os.path.join(out_dir, 'comparison')}): {os.path.join(out_dir, 'comparison', 'sheet.png')}")
    click.echo(f"done in {time.perf_counter() - start:.1f} s; open {os.path.join(out_dir, '*', 'report.html')} "
               f"or {os.path.join(out_dir, 'comparison', 'comparison.html')}")


@cli.command(short_help="Write the printable wall target (PDF and PNG).")
@option("--paper", type=click.Choice(["a4", "letter"]), default="a4",
        help="Paper size the target is printed on (print at 100 %, no 'fit to page').")
@option("--out", "out", type=click.Path(), default=".",
        help="Folder for target.pdf and target.png (created when it ends in '/'). Old meaning, kept for one "
             "release with a note: a path that does not exist and does not end in '/' is a file-name stem "
             "(STEM.pdf, STEM.png).")
def target(paper, out):
    """Write the printable wall target (fiducial markers and a scale bar) as PDF and PNG."""
    from .target import write_target

    folder, stem = out, "target"
    if not os.path.isdir(out) and not out.endswith((os.sep, "/")):
        if os.path.lexists(out):
            _fail(f"{out}: exists and is not a folder; give a folder for --out")
        folder, stem = os.path.dirname(out) or ".", os.path.basename(out)
        _note(f"--out {out} does not exist, so it is read as a file-name stem as before this release "
              f"({stem}.pdf, {stem}.png); for the folder meaning create it first or write '{out}/'")
    try:
        os.makedirs(folder, exist_ok=True)
        written = write_target(folder, paper, stem=stem)
    except OSError as exc:
        _fail(f"{folder}: cannot write the target ({exc.strerror or exc}); choose a folder you can write to")
    click.echo(f"wrote {', '.join(written)}")
    click.echo("print at 100 % (no 'fit to page'), measure the 100 mm scale bar (give it as --scale-bar-mm), pin "
               "the sheet upright with its cross at the aim point, photograph it from the tripod with room lights "
               "on, then remove it")


@cli.command("far-field", short_help="Check the far field: one light's reports at two distances.")
@click.argument("near", type=click.Path(dir_okay=False))
@click.argument("far", type=click.Path(dir_okay=False))
@click.pass_context
def far_field(ctx, near, far):
    """Compare two report.json files of one light at two distances (is the wall far enough?).

    Exit code 0: the two agree; 1: they differ by more than their uncertainties (move the wall
    farther); 2: an input problem.
    """
    from .farfield import compare_distances
    from .report.output import read_report_json

    result = compare_distances(read_report_json(near), read_report_json(far), names=(near, far))
    for line in result["lines"]:
        click.echo(line)
    if not result["consistent"]:
        ctx.exit(EXIT_DIFFERENCE)


@cli.group(short_help="Calibrate a camera once and keep it in a profile.")
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
        _fail(f"cannot write the profile ({exc.strerror or exc}); give --out FILE in a folder you can write to")
    click.echo(f"saved camera profile '{profile.name}' to {path}")


_PROFILE_OUT_HELP = "Write the profile to this file instead of the profile folder ('beamshot camera list')."


@camera.command("response", short_help="Tone curve from a bracket of a still scene.")
@click.argument("photos", nargs=-1, required=True, type=click.Path(dir_okay=False))
@option("--name", required=True, help="Profile name (created or updated).")
@option("--method", type=click.Choice(["debevec", "robertson"]), default="debevec",
        help="Response recovery method: Debevec & Malik 1997 or Robertson et al. 2003.")
@option("--times", default=None, show_default="from EXIF",
        help="Exposure times in seconds, comma-separated, if EXIF lacks them.")
@option("--out", "out", type=click.Path(dir_okay=False), default=None, help=_PROFILE_OUT_HELP)
def camera_response(photos, name, method, times, out):
    """Recover the response curve from a bracket (5-9 photos of a still scene, tripod)."""
    from .camera.bracket import recover_response
    from .photo import load_photo

    try:
        t = None if times is None else [float(x) for x in times.split(",")]
    except ValueError:
        _fail("--times takes numbers in seconds separated by commas, e.g. 0.01,0.02,0.04")
    loaded = [load_photo(p) for p in photos]
    fit = recover_response(loaded, method=method, times=t)
    profile = _profile_for_update(name, out)
    profile = profile.with_step("response", _file_records(loaded), response=fit.response,
                                response_quality=fit.quality(), make=loaded[0].exif.make,
                                model=loaded[0].exif.model)
    click.echo(f"response from {len(loaded)} photos ({fit.method}): frames agree within "
               f"{fit.consistency_rms:.2%} (RMS) after linearization")
    for w in fit.warnings:
        click.echo(f"  ! {w}")
    _save(profile, out)


@camera.command("flat", short_help="Lens shading from photos of an evenly lit white target.")
@click.argument("photos", nargs=-1, required=True, type=click.Path(dir_okay=False))
@option("--name", required=True, help="Profile name (created or updated).")
@option("--dark", type=click.Path(dir_okay=False), default=None, help="Dark frame subtracted first.")
@option("--out", "out", type=click.Path(dir_okay=False), default=None, help=_PROFILE_OUT_HELP)
def camera_flat(photos, name, dark, out):
    """Fit the vignetting model to photos of an evenly lit white target filling the view."""
    import numpy as np

    from .camera.flatfield import fit_flat_field
    from .camera.linearize import linearize
    from .photo import load_photo

    profile = _profile_for_update(name, out)
    loaded = [load_photo(p) for p in photos]
    for p in loaded[1:]:
        if p.shape != loaded[0].shape:
            _fail(f"{p.name}: {p.shape[1]}x{p.shape[0]} differs from {loaded[0].name}; "
                  "take all flat photos with one camera and zoom")
    lum = np.mean([linearize(p, profile.response).luminance for p in loaded], axis=0)
    if dark is not None:
        d = load_photo(dark)
        if d.shape != loaded[0].shape:
            _fail(f"{d.name}: the dark frame is {d.shape[1]}x{d.shape[0]}, the flat "
                  f"{loaded[0].shape[1]}x{loaded[0].shape[0]}; take the dark frame with the same camera settings")
        lum = lum - linearize(d, profile.response).luminance
    ff = fit_flat_field(lum)
    ff = type(ff)(coefficients=ff.coefficients, residual_rms=ff.residual_rms, shape=loaded[0].shape)
    r2 = 1.0
    corner = 1.0 / (1 + sum(c * r2 ** (k + 1) for k, c in enumerate(ff.coefficients)))
    profile = profile.with_step("flat", _file_records(loaded), flat=ff)
    click.echo(f"flat field from {len(loaded)} photo(s): corners at {corner:.0%} of the centre; "
               f"model residual {ff.residual_rms:.2%} RMS")
    _save(profile, out)


@camera.command("flat-from-turns", short_help="Lens shading from beam photos with the camera turned.")
@click.argument("photos", nargs=-1, required=True, type=click.Path(dir_okay=False))
@option("--name", required=True, help="Profile name (created or updated).")
@option("--focal-35mm", type=float, default=None, help="35 mm-equivalent focal length (mm) if EXIF lacks it.")
@option("--hfov", type=float, default=None, help="Horizontal field of view of the photos (degrees).")
@option("--out", "out", type=click.Path(dir_okay=False), default=None, help=_PROFILE_OUT_HELP)
def camera_flat_from_turns(photos, name, focal_35mm, hfov, out):
    """Lens shading from two or more photos of one beam, the camera turned on the tripod between them."""
    from .camera.linearize import linearize
    from .camera.turned_flat import RECOMMENDED_TURN_DEG, TurnedPhoto, fit_turned_flat
    from .photo import load_photo
    from .wall_setup import focal_for

    if len(photos) < 2:
        _fail("give at least two photos of the same beam, with the camera turned "
              f"{RECOMMENDED_TURN_DEG} deg on the tripod between them")
    if focal_35mm is not None and focal_35mm <= 0 or hfov is not None and not 0 < hfov < 180:
        _fail("--focal-35mm takes a focal length in mm (e.g. 26), --hfov an angle below 180 deg")
    profile = _profile_for_update(name, out)
    loaded = [load_photo(p) for p in photos]
    first = loaded[0]
    for p in loaded[1:]:
        if p.shape != first.shape:
            _fail(f"{p.name}: {p.shape[1]}x{p.shape[0]} differs from {first.name} "
                  f"{first.shape[1]}x{first.shape[0]}; use one camera and zoom for all photos")
        if focal_35mm is None and hfov is None and p.exif.focal_35mm_mm != first.exif.focal_35mm_mm:
            _fail(f"{p.name}: the focal length ({p.exif.focal_35mm_mm} mm equiv.) differs from "
                  f"{first.name} ({first.exif.focal_35mm_mm}); keep the zoom fixed")
    f_px, _, f_src = focal_for(first, focal_35mm, hfov)
    if f_px is None:
        _fail(f"{first.name}: no focal length in EXIF; give --focal-35mm or --hfov")
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


@camera.command("scale", short_help="The camera's absolute constant from a lux reading.")
@click.argument("photo", type=click.Path(dir_okay=False))
@option("--lux", type=float, required=True, metavar="LX", help="Lux-meter reading on the wall at the metered point.")
@option("--at", "at", default=None, metavar="X,Y", show_default="the photo's centre",
        help="Metered point: pixel X,Y of the photo (x right, y down).")
@option("--meter-accuracy", type=float, default=5, metavar="PERCENT",
        help="The lux meter's specified accuracy, ± in percent (used as one standard uncertainty).")
@option("--name", required=True, help="Profile name (created or updated).")
@option("--out", "out", type=click.Path(dir_okay=False), default=None, help=_PROFILE_OUT_HELP)
def camera_scale(photo, lux, at, meter_accuracy, name, out):
    """Keep the camera's absolute constant from one photo of a lit wall and a lux reading."""
    from .camera.constant import camera_constant
    from .camera.linearize import linearize
    from .photo import load_photo

    xy = None if at is None else _pixel_pair(at, "--at")
    accuracy = _meter_accuracy_fraction(meter_accuracy, "--meter-accuracy")
    profile = _profile_for_update(name, out)
    p = load_photo(photo)
    img = linearize(p, profile.response)
    if profile.flat is not None:
        img = img.divided_by(profile.flat.evaluate(img.shape))
    k, rel, notes = camera_constant(img, p.exif, lux, xy, meter_accuracy=accuracy, name=p.name)
    profile = profile.with_step("scale", _file_records([p]), scale_constant=k, scale_uncertainty=rel,
                                scale_notes=notes)
    _save(profile, out)  # first: a profile refused on saving prints no constant
    click.echo(f"camera constant K = {k:.5g} lx (± {rel:.1%}); E = K v N^2 / (t S)")
    if "warning" in notes:
        click.echo(f"  ! {notes['warning']}")


@camera.command("colour-chart", short_help="Colour matrix from a photo of a reference chart.")
@click.argument("photo", type=click.Path(dir_okay=False))
@option("--patches", required=True, type=click.Path(dir_okay=False),
        help="CSV with the columns x,y,size,X,Y,Z: each patch's centre and box side (px, photo as shown) and its "
             "reference XYZ under the light.")
@option("--name", required=True, help="Profile name (created or updated).")
@option("--out", "out", type=click.Path(dir_okay=False), default=None, help=_PROFILE_OUT_HELP)
def camera_colour_chart(photo, patches, name, out):
    """Fit the camera RGB -> XYZ matrix from a chart photographed under the light (fixed white balance),
    for absolute colour with analyze --colour (docs/colour.md)."""
    from .camera.linearize import linearize
    from .colour.chart import fit_chart_matrix, patch_rgb, read_chart_table
    from .photo import load_photo

    profile = _profile_for_update(name, out)
    p = load_photo(photo)
    img = linearize(p, profile.response)
    if profile.flat is not None:
        img = img.divided_by(profile.flat.evaluate(img.shape))
    boxes, xyz = read_chart_table(patches)
    fit = fit_chart_matrix(patch_rgb(img, boxes), xyz)
    profile = profile.with_step("colour chart", _file_records([p]), details={"residual_rms_uv": fit["residual_rms_uv"]},
                                colour_matrix=fit)
    _save(profile, out)
    click.echo(f"colour matrix from {fit['patches']} patches: residual {fit['residual_rms_uv']:.4f} in u'v' (RMS)")


@camera.command("show", short_help="Print a camera profile.")
@click.argument("name")
def camera_show(name):
    """Print a camera profile (a name or a file)."""
    import json

    from .camera.profile import load_profile

    click.echo(json.dumps(load_profile(name).to_dict(), indent=2))


@camera.command("list", short_help="List the camera profiles.")
def camera_list():
    """List the camera profiles that can be used with --camera."""
    from .camera.profile import list_profiles

    for name, path in list_profiles():
        click.echo(f"{name:28s} {path}")


from .batch_cli import batch as _batch  # noqa: E402 - imports only click; the engine loads inside the command

_batch.short_help = "Analyze every row of a manifest on all cores, resumably."
cli.add_command(_batch)

from .compare_cli import compare as _compare, reach as _reach  # noqa: E402 - imports only click

_compare.short_help = "Compare 2-12 lights at one common exposure."
_reach.short_help = "How far and wide a light reaches: axis and ground illuminance."
cli.add_command(_compare)
cli.add_command(_reach)

from .qa_cli import qa as _qa  # noqa: E402 - imports only click; the checks load inside the command

_qa.short_help = "Check reports against a beam specification: pass, fail, undecided."
cli.add_command(_qa)

from .lm63_cli import lm63 as _lm63  # noqa: E402 - imports only click; numpy loads inside the commands

_lm63.short_help = "Write the measured beam as an IES LM-63 file, or read one."
cli.add_command(_lm63)


def main(argv=None):
    """The ``beamshot`` console script: runs the command line and exits with its code."""
    cli.main(argv, prog_name="beamshot")


if __name__ == "__main__":  # pragma: no cover
    main()
