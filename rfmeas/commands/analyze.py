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
    report: Optional[Path] = typer.Option(None, "--report", help="Also write the HTML report to this file."),
    plots_dir: Optional[Path] = typer.Option(None, "--plots", help="Also write every plot as PNG, SVG and PDF into this folder."),
):
    """Fit the equivalent circuit to all sweeps of one transformer at once."""
    from ..analysis import analyze_files, analyze_manifest
    from ..errors import EXIT_DESIGN_FAILED, InputError
    from ..io.manifest import parse_turns

    first = inputs[0]
    is_manifest = first.suffix.lower() == ".toml" or first.is_dir()
    if is_manifest:
        if len(inputs) > 1:
            raise InputError("give one manifest, or Touchstone files without a manifest", first)
        analysis = analyze_manifest(first)
    else:
        if port1 not in ("primary", "secondary"):
            raise InputError(f"--port1 must be primary or secondary, not {port1!r}")
        analysis = analyze_files(inputs, parse_turns(turns) if turns else None, termination, port1)
    if json_output:
        print_json(analysis.to_dict())
    else:
        from ..terminal import render_analysis

        render_analysis(analysis, stdout_console())
    if report is not None or plots_dir is not None:
        from ._common import stderr_console
        from .report import tell, write_outputs

        tell(write_outputs(analysis, report, plots_dir), stderr_console() if json_output else stdout_console())
    if analysis.design_passed is False:
        raise typer.Exit(EXIT_DESIGN_FAILED)
