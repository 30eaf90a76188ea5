"""`rfmeas history`: list stored analyses, or export one's inputs back to files."""

from __future__ import annotations

from pathlib import Path
from typing import Optional, Tuple

import typer
from rich.markup import escape

from rfmeas.commands._common import db_option, handles_errors, print_json, stderr_console, stdout_console


def register(app: typer.Typer) -> None:
    @app.command("history")
    @handles_errors
    def history(
        unit: Optional[str] = typer.Argument(None, help="Only this unit's records."),
        db: Optional[Path] = db_option(),
        json_out: bool = typer.Option(False, "--json", help="Print JSON on stdout."),
        limit: int = typer.Option(50, "--limit", min=1, help="Show at most N records, newest first."),
        export: Optional[Tuple[int, Path]] = typer.Option(
            None, "--export", metavar="ID FOLDER", help="Write record ID's manifest and sweep files into FOLDER."),
        overwrite: bool = typer.Option(False, "--overwrite", help="With --export: overwrite existing files."),
        force: bool = typer.Option(False, "--force", hidden=True, help="Older spelling of --overwrite."),
        set_note: Optional[Tuple[int, str]] = typer.Option(
            None, "--set-note", metavar="ID TEXT",
            help="Give record ID a note (\"\" clears it); the list shows it beside the record."),
    ):
        """List the stored analyses (newest first), or export one's raw inputs byte for byte."""
        from rfmeas.history.store import HistoryStore

        with HistoryStore(db) as store:
            if set_note is not None:
                record_id, text = set_note
                store.set_note(record_id, text)
                if json_out:
                    print_json({"record": record_id, "note": text.strip() or None})
                else:
                    stdout_console().print(f"record {record_id}: note " + (f"set to {text.strip()!r}"
                                                                            if text.strip() else "cleared"),
                                           markup=False)
                return
            if export is not None:
                record_id, folder = export
                written = store.export(record_id, folder, overwrite=overwrite or force)
                if json_out:
                    print_json({"record": record_id, "files": [str(p) for p in written]})
                else:
                    stdout_console().print(f"record {record_id}: wrote {len(written)} file(s) to {folder}")
                return
            rows = store.list(unit, limit=limit)
            if json_out:
                print_json({"db": str(store.path), "records": [r.to_dict() for r in rows],
                            "notes": list(store.notes)})
                return
            print_notes(store.notes)
            _print_table(rows, store.path, unit)


def print_notes(notes) -> None:
    """The store's notes (damaged records passed over), one line each on stderr."""
    console = stderr_console()
    for note in notes:
        console.print(f"note: {note}", markup=False)


def _print_table(rows, path, unit) -> None:
    from rich.table import Table

    console = stdout_console()
    if not rows:
        console.print(f"no records{f' of unit {unit!r}' if unit else ''} in {path}")
        return
    table = Table(title=escape(f"history ({path})"))
    for column, justify in (("id", "right"), ("unit", "left"), ("recorded (UTC)", "left"),
                            ("design", "left"), ("fit", "left"), ("files", "right"), ("rfmeas", "left")):
        table.add_column(column, justify=justify)
    show_notes = any(r.note for r in rows)
    if show_notes:
        table.add_column("note", overflow="fold")
    for r in rows:
        grade = r.fit_grade or "—"
        if r.fit_grade == "poor":
            grade = "[bold red]poor[/]"
        table.add_row(str(r.id), escape(r.unit), r.recorded_utc, r.design_status, grade, str(r.file_count),
                      r.software_version, *([escape(r.note or "")] if show_notes else []))
    console.print(table)
