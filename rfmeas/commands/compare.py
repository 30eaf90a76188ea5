"""`rfmeas compare BEFORE AFTER`: what changed between two analyses, and whether it is real."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Optional

import typer
from rich.markup import escape

from rfmeas.errors import InputError
from rfmeas.commands._common import handles_errors, print_json, stdout_console
from rfmeas.commands.history import db_option, print_notes

_SWEEP_SUFFIX = re.compile(r"^\.s\d+p$", re.IGNORECASE)


def load_side(side: str, store, other_unit: str | None = None, other_id: int | None = None):
    """(result dict, label, record id or None, Analysis or None) for a manifest (or its folder),
    a sweep file or a store reference."""
    from rfmeas.history.store import is_reference

    if is_reference(side):
        rec = store.resolve(side, other_unit=other_unit, other_id=other_id)
        return rec.result, f"@{rec.id} ({rec.unit}, {rec.recorded_utc})", rec.id, None
    path = Path(side)
    if path.is_dir():
        path = path / "manifest.toml"
    if not path.is_file():
        raise InputError("no such file (give a manifest, a sweep file or a store reference like @12)", path=side)
    suffix = path.suffix.lower()
    if suffix != ".toml" and not _SWEEP_SUFFIX.match(suffix):
        raise InputError("not a manifest (.toml) or Touchstone sweep (.s1p, .s2p)", path=side)
    from rfmeas.commands.analyze import run_analysis

    analysis = run_analysis([path])
    return analysis.to_dict(), str(side), None, analysis


def register(app: typer.Typer) -> None:
    @app.command("compare")
    @handles_errors
    def compare(
        before: str = typer.Argument(..., help="Manifest, sweep file or store reference (@12, @12~, "
                                               "@latest:UNIT, @prev = the stored record before AFTER)."),
        after: str = typer.Argument(..., help="Manifest, sweep file or store reference."),
        db: Optional[Path] = db_option(),
        json_out: bool = typer.Option(False, "--json", help="Print JSON on stdout."),
        plot: Optional[Path] = typer.Option(None, "--plot", help="Write an overlay of both measurements "
                                            "and both fitted models (PNG, SVG or PDF; manifests and sweeps only)."),
    ):
        """Compare two analyses: every shared quantity, whether it moved by more than 3σ, and a verdict."""
        from rfmeas.history.compare import compare_results
        from rfmeas.history.store import HistoryStore

        with HistoryStore(db) as store:
            after_result, after_label, after_id, after_analysis = load_side(after, store)
            before_result, before_label, _, before_analysis = load_side(
                before, store, other_unit=after_result.get("name"), other_id=after_id)
            notes = list(store.notes)
        print_notes(notes)
        # an analysis made here is compared as such; a stored record as the JSON it was kept as
        comparison = compare_results(before_analysis or before_result, after_analysis or after_result)
        if plot is not None:
            if before_analysis is None or after_analysis is None:
                raise InputError("--plot needs the sweeps: give manifests or sweep files, not store references")
            from rfmeas.present.plots.compare import plot_comparison

            plot_comparison(before_analysis, after_analysis, plot)
        if json_out:
            print_json({"before": before_label, "after": after_label, **comparison.to_dict(), "notes": notes})
            return
        _print_comparison(comparison, before_label, after_label)


def _print_comparison(comparison, before_label: str, after_label: str) -> None:
    from rich.table import Table

    from rfmeas.history.compare import format_quantity

    console = stdout_console()
    table = Table(title=escape(f"before: {before_label}\nafter:  {after_label}"))
    table.add_column("quantity", overflow="fold")
    for column, justify in (("before", "right"), ("after", "right"), ("change", "right"), ("significant", "left")):
        table.add_column(column, justify=justify)
    words = {True: "yes", False: "no", None: "not judged"}
    for key, c in comparison.changes.items():
        change = "—" if c.change_percent is None else f"{c.change_percent:+.2f} %"
        table.add_row(_label(key), format_quantity(key, c.before, c.before_stderr),
                      format_quantity(key, c.after, c.after_stderr),
                      change, words[c.significant])
    console.print(table)
    for sentence in comparison.verdict:
        console.print(f"• {escape(sentence)}")
    console.print(f"rule: {comparison.rule}", style="dim")


def _label(key: str) -> str:
    """A person's name for a result key, from the one vocabulary (rfmeas.labels)."""
    from rfmeas.labels import label

    return label(key)
