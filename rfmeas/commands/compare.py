"""`rfmeas compare BEFORE AFTER`: what changed between two analyses, and whether it is real."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Optional

import typer

from ..errors import InputError
from ._common import handles_errors, print_json, stdout_console
from .history import db_option

_SWEEP_SUFFIX = re.compile(r"^\.s\d+p$", re.IGNORECASE)


def load_side(side: str, store, other_unit: str | None = None, other_id: int | None = None):
    """(result dict, label, record id or None) for a manifest, a sweep file or a store reference."""
    from ..store import is_reference

    if is_reference(side):
        rec = store.resolve(side, other_unit=other_unit, other_id=other_id)
        return rec.result, f"@{rec.id} ({rec.unit}, {rec.recorded_utc})", rec.id
    path = Path(side)
    if not path.is_file():
        raise InputError("no such file (give a manifest, a sweep file or a store reference like @12)", path=side)
    suffix = path.suffix.lower()
    if suffix != ".toml" and not _SWEEP_SUFFIX.match(suffix):
        raise InputError("not a manifest (.toml) or Touchstone sweep (.s1p, .s2p)", path=side)
    from .. import analysis

    if suffix == ".toml":
        return analysis.analyze_manifest(path).to_dict(), str(path), None
    return analysis.analyze_files([path]).to_dict(), str(path), None


def register(app: typer.Typer) -> None:
    @app.command("compare")
    @handles_errors
    def compare(
        before: str = typer.Argument(..., help="Manifest, sweep file or store reference (@12, @12~, "
                                               "@latest:UNIT, @prev = the stored record before AFTER)."),
        after: str = typer.Argument(..., help="Manifest, sweep file or store reference."),
        db: Optional[Path] = db_option(),
        json_out: bool = typer.Option(False, "--json", help="Print JSON on stdout."),
    ):
        """Compare two analyses: every shared quantity, whether it moved by more than 3σ, and a verdict."""
        from ..compare import compare_results
        from ..store import HistoryStore

        with HistoryStore(db) as store:
            after_result, after_label, after_id = load_side(after, store)
            before_result, before_label, _ = load_side(before, store, other_unit=after_result.get("name"),
                                                       other_id=after_id)
        comparison = compare_results(before_result, after_result)
        if json_out:
            print_json({"before": before_label, "after": after_label, **comparison.to_dict()})
            return
        _print_comparison(comparison, before_label, after_label)


def _print_comparison(comparison, before_label: str, after_label: str) -> None:
    from rich.table import Table

    from ..compare import format_quantity

    console = stdout_console()
    table = Table(title=f"before: {before_label}\nafter:  {after_label}")
    table.add_column("quantity", overflow="fold")
    for column, justify in (("before", "right"), ("after", "right"), ("change", "right"), ("significant", "left")):
        table.add_column(column, justify=justify)
    words = {True: "yes", False: "no", None: "not judged"}
    for key, c in comparison.changes.items():
        change = "—" if c.change_percent is None else f"{c.change_percent:+.2f} %"
        table.add_row(key, format_quantity(key, c.before, c.before_stderr),
                      format_quantity(key, c.after, c.after_stderr),
                      change, words[c.significant])
    console.print(table)
    for sentence in comparison.verdict:
        console.print(f"• {sentence}")
    console.print(f"rule: {comparison.rule}", style="dim")
