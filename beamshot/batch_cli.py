"""``beamshot batch MANIFEST --out DIR``: the command around :mod:`beamshot.batch` (parse, run, print).

The command is registered in ``beamshot.cli`` (``cli.add_command(batch)``); ``python -m
beamshot.batch_cli MANIFEST --out DIR`` runs it alone with the same exit codes.  Progress goes to
stderr: a bar on a terminal (tqdm), plain lines otherwise (``[3/40] prototype-1 done in 1.2 s``).
"""

from __future__ import annotations

import os
import sys

import click

__all__ = ["batch", "main"]


class _Progress:
    """Progress on stderr: a tqdm bar on a terminal, else one line per item that was analysed or
    failed (items already done are counted in one line)."""

    def __init__(self):
        self.total = None
        self.count = 0
        self.bar = None
        self.tty = sys.stderr.isatty()

    def start(self, total: int) -> None:
        self.total = total
        if self.tty:
            try:
                from tqdm import tqdm
            except ImportError:
                return
            self.bar = tqdm(total=total, file=sys.stderr, unit="item", dynamic_ncols=True, leave=True)

    def _line(self, text: str) -> None:
        if self.bar is not None:
            self.bar.write(text, file=sys.stderr)
        else:
            click.echo(text, err=True)

    def __call__(self, outcome, item) -> None:
        from .batch import STATUS_DONE, STATUS_FAILED

        self.count += 1
        where = f"[{self.count}/{self.total}] {item.name}" + ("" if item.name.startswith("row ") else
                                                               f" (row {item.row})")
        if outcome.status == STATUS_DONE:
            text = f"{where} done in {outcome.seconds:.1f} s"
            if self.bar is None:
                self._line(text)
        elif outcome.status == STATUS_FAILED:
            self._line(f"{where} failed: {outcome.reason}")
        elif outcome.seconds is None and outcome.reason is None:
            pass  # already done before this run: counted in the first line, not listed
        else:
            self._line(f"{where} skipped: {outcome.reason}")
        if self.bar is not None:
            self.bar.set_postfix_str(item.name[:24], refresh=False)
            self.bar.update(1)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


@click.command("batch")
@click.argument("manifest", type=click.Path(dir_okay=False))
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False), metavar="DIR",
              help="Folder for the items' report sets (DIR/items/...) and summary.csv / summary.json.")
@click.option("--workers", type=click.IntRange(min=1), default=None, metavar="N",
              help="Local worker processes (default: one per core).")
@click.option("--scheduler", default=None, metavar="ADDRESS",
              help="Run on an existing Dask cluster at ADDRESS (e.g. tcp://host:8786); needs beamshot[cluster].")
@click.option("--pictures", type=click.Choice(["all", "none"]), default="all", show_default=True,
              help="none: draw no pictures (beam.png; report.html without them), faster on slow machines.")
@click.option("--compare", "with_compare", is_flag=True,
              help="Also compare the items (2 to 12) at one exposure into DIR/comparison (see 'beamshot compare').")
@click.pass_context
def batch(ctx, manifest, out_dir, workers, scheduler, pictures, with_compare):
    """Analyze every row of MANIFEST (CSV or TOML, one analysis per row) into --out DIR.

    Runs on all local cores (or a Dask cluster with --scheduler); resumable: items already done
    with the same photos and options are skipped.  Writes DIR/summary.csv and DIR/summary.json.
    Exit code 2 if any item failed (the summary names each one and why).
    """
    from .batch import STATUS_DONE, STATUS_FAILED, STATUS_SKIPPED, default_workers, run_batch
    from .errors import BeamshotError

    if workers is not None and scheduler:
        raise BeamshotError("give --workers (local processes) or --scheduler (a Dask cluster), not both")
    progress = _Progress()

    def on_plan(items):
        todo = sum(1 for it in items if it.error is None and not it.already_done)
        done = sum(1 for it in items if it.already_done)
        where = f"the Dask cluster at {scheduler}" if scheduler else \
            f"{min(workers or default_workers(), todo)} local worker(s)"
        parts = [f"{len(items)} item(s) in {manifest}"]
        bad = sum(1 for it in items if it.error is not None)
        if done:
            parts.append(f"{done} already done (skipped)")
        if bad:
            parts.append(f"{bad} refused (bad input; the summary says why)")
        parts.append(f"{todo} to analyse on {where}" if todo else "nothing to analyse")
        click.echo(", ".join(parts), err=True)
        progress.start(len(items))

    try:
        result = run_batch(manifest, out_dir, workers=workers, scheduler=scheduler, pictures=pictures == "all",
                           progress=progress, on_plan=on_plan)
    finally:
        progress.close()
    n = len(result.items)
    summary_csv = os.path.join(out_dir, "summary.csv")
    click.echo(f"{n} item(s): {result.count(STATUS_DONE)} done, {result.count(STATUS_SKIPPED)} skipped (already "
               f"done), {result.count(STATUS_FAILED)} failed; wrote {summary_csv} and "
               f"{os.path.join(out_dir, 'summary.json')}")
    if with_compare:
        from .batch import compare_items

        try:
            folder = compare_items(os.path.abspath(out_dir), result.items, result.outcomes)
            click.echo(f"compared at one exposure: {os.path.join(folder, 'sheet.png')}")
        except BeamshotError as exc:
            click.echo(f"beamshot: error: {exc}", err=True)
            ctx.exit(2)
    if result.failed:
        click.echo(f"{result.failed} of {n} items failed: see {summary_csv}", err=True)
        ctx.exit(2)


def main(argv=None) -> int:
    """Run the command alone (``python -m beamshot.batch_cli``) with the exit codes of ``beamshot``."""
    from .cli import _Group

    group = _Group("beamshot")
    group.add_command(batch)
    return group.main(["batch", *(sys.argv[1:] if argv is None else argv)], standalone_mode=False)


if __name__ == "__main__":
    sys.exit(main())
