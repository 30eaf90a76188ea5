"""`rfmeas analyze`: fit one transformer's sweeps and print the equivalent circuit."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from ._common import handles_errors, print_json, stdout_console


def register(app: typer.Typer) -> None:
    app.command("analyze")(analyze_command)


@handles_errors
def analyze_command(
    inputs: List[Path] = typer.Argument(..., help="A manifest (.toml or its folder), or Touchstone files for a quick look."),
    json_output: bool = typer.Option(False, "--json", help="Print the JSON result on stdout and nothing else."),
    turns: Optional[str] = typer.Option(None, "--turns", help="Turns PRIMARY:SECONDARY for files without a manifest, e.g. 3:9."),
    termination: str = typer.Option("open", "--termination", help="One-port files without a manifest: what the other winding sees (open, short, or ohms)."),
    port1: str = typer.Option("primary", "--port1", help="One-port files without a manifest: the winding on port 1."),
    record: bool = typer.Option(True, "--record/--no-record", help="Keep this analysis in the history store (with its raw files)."),
    db: Optional[Path] = typer.Option(None, "--db", help="History store file (default: RFMEAS_DB or the user's data folder)."),
):
    """Fit the equivalent circuit to all sweeps of one transformer at once."""
    from ..errors import EXIT_DESIGN_FAILED

    analysis = run_analysis(inputs, turns, termination, port1)
    record_id = None
    if record:
        from ..store import HistoryStore, record_analysis

        with HistoryStore(db) as store:
            record_id = record_analysis(store, analysis)
    if json_output:
        print_json(analysis.to_dict())
    else:
        from ..terminal import render_analysis

        console = stdout_console()
        render_analysis(analysis, console)
        if record_id is not None:
            console.print(f"[dim]recorded in the history as @{record_id}[/]")
    if analysis.design_passed is False:
        raise typer.Exit(EXIT_DESIGN_FAILED)


def run_analysis(inputs, turns=None, termination="open", port1="primary"):
    """Analyse a manifest (path or folder) or a list of Touchstone files."""
    from ..analysis import analyze_files, analyze_manifest
    from ..errors import InputError
    from ..io.manifest import parse_turns

    first = Path(inputs[0])
    if first.suffix.lower() == ".toml" or first.is_dir():
        if len(inputs) > 1:
            raise InputError("give one manifest, or Touchstone files without a manifest", first)
        return analyze_manifest(first)
    if port1 not in ("primary", "secondary"):
        raise InputError(f"--port1 must be primary or secondary, not {port1!r}")
    return analyze_files(inputs, parse_turns(turns) if turns else None, termination, port1)
