"""`rfmeas batch`: analyse many units in parallel; pass/fail, yield and spread of the lot."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer
from rich.markup import escape

from rfmeas.errors import EXIT_BAD_INPUT, EXIT_INTERRUPTED
from rfmeas.commands._common import (db_option, handles_errors, print_json, record_option, report_error, stderr_console,
                                     stdout_console)


def register(app: typer.Typer) -> None:
    @app.command("batch")
    @handles_errors
    def batch(
        targets: List[str] = typer.Argument(..., metavar="FOLDER_OR_GLOB...",
                                            help="Folders (every *.toml below), glob patterns or manifests."),
        workers: Optional[int] = typer.Option(None, "--workers", min=1, help="Worker processes (default: all cores)."),
        csv_path: Optional[Path] = typer.Option(None, "--csv", metavar="FILE", help="Also write one CSV row per unit."),
        overwrite: bool = typer.Option(False, "--overwrite", help="Replace an existing --csv file."),
        json_out: bool = typer.Option(False, "--json", help="Print JSON on stdout."),
        record: bool = record_option("each unit's analysis"),
        db: Optional[Path] = db_option(),
    ):
        """Analyse every unit; exit 1 if any failed its design check, 2 if any could not be analysed."""
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

        from rfmeas.commands._csvfile import check_csv_target, write_csv
        from rfmeas.history import batch as batch_module

        check_csv_target(csv_path, overwrite)
        paths = batch_module.find_manifests(targets)
        columns = (TextColumn("analysing"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn())
        finished = [0]

        def progress(done, total, outcome):
            finished[0] = done
            bar.update(task, completed=done)

        try:
            with Progress(*columns, console=stderr_console()) as bar:
                task = bar.add_task("analysing", total=len(paths))
                result = batch_module.run_batch(paths, workers=workers, progress=progress,
                                                analyse=batch_module.analyse_manifest, record=record, db=db)
        except KeyboardInterrupt:
            stderr_console().print(f"interrupted after {finished[0]} of {len(paths)} units; the workers are "
                                   "stopped and nothing was written", markup=False)
            raise typer.Exit(EXIT_INTERRUPTED) from None
        for unit in result.units:
            if unit.error:
                report_error(unit.error)
        not_kept = [unit.record_error for unit in result.units if unit.record_error]
        for message in not_kept:
            report_error(f"{message} (--no-record skips keeping it)")
        if csv_path is not None:
            write_csv(csv_path, result.to_csv(), overwrite)
        if json_out:
            print_json(result.to_dict())
        else:
            _print_summary(result)
            kept = sorted(unit.record_id for unit in result.units if unit.record_id is not None)
            if kept:
                ids = ", ".join(f"@{i}" for i in kept) if len(kept) <= 10 else f"@{kept[0]} to @{kept[-1]}"
                stdout_console().print(f"[dim]recorded {len(kept)} unit(s) in the history: {ids}[/]")
        raise typer.Exit(EXIT_BAD_INPUT if not_kept else result.exit_code)


def _print_summary(result) -> None:
    from rich.table import Table

    from rfmeas.history.compare import format_quantity
    from rfmeas.labels import bare_label as label  # the values carry their unit

    console = stdout_console()
    units = Table(title="units")
    for column in ("manifest", "unit", "design check"):
        units.add_column(column)
    for u in result.units:
        units.add_row(escape(u.path), escape(u.name or "—"), u.status if not u.error else "error (see above)")
    console.print(units)
    spread = Table(title="spread over the lot")
    for column, justify in (("quantity", "left"), ("units", "right"), ("mean", "right"), ("std", "right"),
                            ("min", "right"), ("max", "right")):
        spread.add_column(column, justify=justify)
    for key, s in result.spread.items():
        spread.add_row(label(key), str(s.count), *(format_quantity(key, v) for v in (s.mean, s.std, s.min, s.max)))
    if result.spread:
        console.print(spread)
    c = result.counts
    y = result.yield_fraction
    judged = result.counted_for_yield
    console.print(f"passed {c['pass']}, failed {c['fail']}, not judged {c['not judged']}, could not be analysed "
                  f"{c['error']}, no design check {c['no design']}; yield "
                  + ("— (no unit has a design check)" if y is None else f"{c['pass']}/{judged} = {100 * y:.1f} %"))
