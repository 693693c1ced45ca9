"""``beamshot qa SPEC SOURCE...``: check reports against a beam specification (parse, run, print).

Registered in ``beamshot.cli`` like ``batch``; imports only click at start-up.  Exit codes
(docs/spec.md): 0 every figure of every unit passes; 1 a figure fails; 4 nothing fails but
something is undecided or not measured; 2 an input problem (a bad spec, an unreadable report);
3 an internal error.
"""

from __future__ import annotations

import os
import sys

import click

__all__ = ["qa", "main"]

#: Above this many units the table is one line per unit unless --detail is given.
_DETAIL_UP_TO = 3


def _value_text(check) -> str:
    from .figure import value_with_uncertainty

    if check.value is None:
        return "—"
    unit = check.limit.unit
    u_txt = "°" if unit == "deg" else (f" {unit}" if unit else "")
    mark = {"lower_bound": "≥ ", "upper_bound": "≤ ", "estimate": "≈ "}.get(check.status or "", "")
    if check.uncertainty:
        v, u = value_with_uncertainty(check.value, check.uncertainty)
        return f"{mark}{v} ± {u}{u_txt}"
    from .figure import _number

    return f"{mark}{_number(check.value, 4)}{u_txt}"


def _interval_text(check) -> str:
    if check.interval is None:
        return "—"
    a, b = check.interval
    unit = check.limit.unit
    u_txt = "°" if unit == "deg" else (f" {unit}" if unit else "")

    from .figure import _number

    def f(x):
        return ("∞" if x > 0 else "-∞") if x in (float("inf"), float("-inf")) else _number(x, 4)

    return f"{f(a)} … {f(b)}{u_txt}"


def print_result(result, *, detail: bool) -> None:
    """The printed table: per unit its verdict, and with ``detail`` one row per figure."""
    from .spec import known_figures

    terms = known_figures()

    def label(key):
        return terms[key].label if key in terms else key

    spec = result.spec
    k = spec.coverage_factor
    click.echo(f"spec {spec.name or os.path.basename(spec.source or 'spec')}: {len(spec.limits)} limit(s); "
               f"judged on value ± {k:g}·u")
    for unit in result.units:
        head = f"[{unit.verdict.upper()}] {unit.name}"
        if detail:
            click.echo("")
            click.echo(f"{head}   ({unit.source})")
            if unit.note:
                click.echo(f"  ! {unit.note}")
            click.echo(f"  {'figure':26s} {'limit':16s} {'measured':20s} {f'interval (k={k:g})':24s} verdict")
            for c in unit.checks:
                click.echo(f"  {label(c.limit.figure)[:26]:26s} {c.limit.text:16s} {_value_text(c):20s} "
                           f"{_interval_text(c):24s} {c.verdict}")
                if c.verdict != "pass" and c.why != unit.note:
                    click.echo(f"  {'':26s} {c.why}")
        else:
            bad = [f"{c.limit.figure} {c.verdict}" for c in unit.checks if c.verdict != "pass"]
            click.echo(f"{head}: {unit.note}" if unit.note else f"{head}" + (f": {', '.join(bad)}" if bad else ""))
    counts = result.counts()
    click.echo("")
    click.echo(f"{len(result.units)} unit(s): {counts['pass']} pass, {counts['fail']} fail, {counts['undecided']} "
               f"undecided, {counts['not measured']} not measured -> {result.verdict.upper()} "
               f"(exit {result.exit_code})")


def _check_writable(path: str) -> None:
    from .errors import BeamshotError

    if os.path.isdir(path):
        raise BeamshotError(f"--result {path}: is a folder; give a file name such as {os.path.join(path, 'qa.json')}")
    from .atomic_file import can_write_beside

    why = can_write_beside(path)
    if why is not None:
        raise BeamshotError(f"--result {path}: cannot be written there ({why}); choose a folder you can write to")


def _write_json(path: str, doc: dict) -> None:
    import json

    from .errors import BeamshotError

    if os.path.isdir(path):
        raise BeamshotError(f"--result {path}: is a folder; give a file name such as {os.path.join(path, 'qa.json')}")
    from .atomic_file import write_text_atomic

    try:
        write_text_atomic(path, json.dumps(doc, indent=1, ensure_ascii=False, allow_nan=False) + "\n")
    except OSError as exc:
        raise BeamshotError(f"--result {path}: cannot be written ({exc.strerror or exc}); choose another place") \
            from None


@click.command("qa")
@click.argument("spec_file", metavar="SPEC", type=click.Path(dir_okay=False))
@click.argument("sources", metavar="SOURCE...", nargs=-1, type=click.Path())
@click.option("--result", "result_path", default=None, metavar="FILE",
              help="Also write the result as JSON to FILE.")
@click.option("--k", "coverage", type=click.FloatRange(min=0.1, max=5.0), default=None, metavar="K",
              help="Coverage factor of the interval value ± K·u, instead of the spec's (default 2, about 95 %).")
@click.option("--detail/--brief", default=None,
              help="One row per figure (default up to 3 units), or one line per unit (default above).")
@click.pass_context
def qa(ctx, spec_file, sources, result_path, coverage, detail):
    """Check reports against the beam specification SPEC (a TOML file, docs/spec.md).

    SOURCE is a report.json, an analysis folder, a folder of them, or a batch summary
    (summary.json / summary.csv, or the batch's --out folder).  Each figure passes only if its
    whole interval value ± k·u is inside the limit, fails only if it is wholly outside, and is
    otherwise undecided; a figure the report lacks is not measured.  Without SOURCE the spec is
    only checked and printed.  Exit code: 0 all pass, 1 any fail, 4 undecided or not measured,
    2 bad input.
    """
    from .qa import check_sources
    from .spec import read_spec

    spec = read_spec(spec_file)
    if not sources:
        click.echo(f"spec {spec.name or spec_file}: {len(spec.limits)} limit(s), judged on value ± "
                   f"{spec.coverage_factor:g}·u")
        from .spec import known_figures

        terms = known_figures()
        for lim in spec.limits:
            click.echo(f"  {terms[lim.figure].label:26s} {lim.text}")
        return
    if result_path:  # a result file that cannot be written is refused before any verdict is printed
        _check_writable(result_path)
    result = check_sources(spec, sources, k=coverage)
    print_result(result, detail=len(result.units) <= _DETAIL_UP_TO if detail is None else detail)
    if result_path:
        _write_json(result_path, result.to_dict())
        click.echo(f"wrote {result_path}")
    ctx.exit(result.exit_code)


def main(argv=None) -> int:
    """Run the command alone (``python -m beamshot.qa_cli``) with the exit codes of ``beamshot``."""
    from .cli import _Group

    group = _Group("beamshot")
    group.add_command(qa)
    return group.main(["qa", *(sys.argv[1:] if argv is None else argv)], standalone_mode=False)


if __name__ == "__main__":
    sys.exit(main())
