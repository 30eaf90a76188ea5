"""`rfmeas compare BEFORE AFTER`: what changed between two analyses, and whether it is real."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Optional

import typer
from rich.markup import escape

from rfmeas.errors import InputError
from rfmeas.commands._common import handles_errors, print_json, stdout_console
from rfmeas.commands._common import db_option
from rfmeas.commands.history import print_notes

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


def analysis_of_record(store, record_id: int):
    """An Analysis of a stored record's own sweeps and manifest, written to a temporary folder
    (store.export, byte for byte) and analysed there; the folder is gone afterwards."""
    import tempfile

    from rfmeas.commands.analyze import run_analysis
    from rfmeas.history.store import FALLBACK_MANIFEST_NAME

    with tempfile.TemporaryDirectory(prefix="rfmeas-record-") as folder:
        written = store.export(record_id, folder)
        manifests = [p for p in written if p.parent == Path(folder).resolve() and p.suffix.lower() == ".toml"]
        manifests.sort(key=lambda p: p.name != FALLBACK_MANIFEST_NAME)
        if not manifests:
            raise InputError(f"record {record_id} keeps no manifest, so its sweeps cannot be plotted",
                             path=store.path)
        return run_analysis([manifests[0]])


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
                                            "and both fitted models (PNG, SVG or PDF); a stored record's "
                                            "sweeps come from the store."),
    ):
        """Compare two analyses: every shared quantity, whether it moved by more than 3σ, and a verdict."""
        from rfmeas.history.compare import compare_results
        from rfmeas.history.store import HistoryStore

        with HistoryStore(db) as store:
            after_result, after_label, after_id, after_analysis = load_side(after, store)
            before_result, before_label, before_id, before_analysis = load_side(
                before, store, other_unit=after_result.get("name"), other_id=after_id)
            if plot is not None:  # a stored side is analysed again from the sweeps the store keeps
                before_analysis = before_analysis or analysis_of_record(store, before_id)
                after_analysis = after_analysis or analysis_of_record(store, after_id)
            notes = list(store.notes)
        print_notes(notes)
        # an analysis made here is compared as such; a stored record as the JSON it was kept as
        comparison = compare_results(before_result if before_id is not None else before_analysis,
                                     after_result if after_id is not None else after_analysis)
        if plot is not None:
            from rfmeas.present.plots.compare import plot_comparison

            plot_comparison(before_analysis, after_analysis, plot, names=(before_label, after_label))
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
    from rfmeas.labels import bare_label

    return bare_label(key)  # the values carry their unit
