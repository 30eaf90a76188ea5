"""`rfmeas report`: one self-contained HTML page of an analysis, plus plot files and a PDF on request."""

from __future__ import annotations

from contextlib import contextmanager
from pathlib import Path
from typing import List, Optional

import typer

from rfmeas.commands._common import handles_errors, print_json, stderr_console, stdout_console
from rfmeas.usertext import markup


def register(app: typer.Typer) -> None:
    app.command("report")(report_command)


def write_outputs(analysis, report: Optional[Path] = None, plots_dir: Optional[Path] = None,
                  pdf: bool = False) -> dict:
    """Write the report, the plot files and the PDF that were asked for; returns what was written.

    The steps show a progress bar on stderr (never on stdout, which --json keeps clean).
    """
    from rfmeas.present.report.html import write_report
    from rfmeas.present.report.plots import analysis_plots, close_plots, export_plots

    written = {"report": None, "pdf": None, "pdf_skipped": None, "plots": []}
    if report is None and plots_dir is None:
        return written
    steps = 1 + (plots_dir is not None) + (report is not None) + (pdf and report is not None)
    with _steps(steps) as step:
        step("drawing the plots")
        plots = analysis_plots(analysis)
        try:
            if plots_dir is not None:
                step("writing the plot files")
                written["plots"] = [str(p) for p in export_plots(analysis, plots_dir, plots=plots)]
            if report is not None:
                step("writing the report")
                written["report"] = str(write_report(analysis, report, plots))
        finally:
            close_plots(plots)
        if pdf and report is not None:
            from rfmeas.present.report.pdf import find_browser, print_pdf

            if find_browser() is None:
                written["pdf_skipped"] = "no PDF renderer found (install chromium)"
            else:
                step("printing the PDF")
                written["pdf"] = str(print_pdf(report, Path(report).with_suffix(".pdf")))
    return written


@contextmanager
def _steps(total: int):
    """A progress bar on stderr over `total` named steps; yields `step(description)`."""
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    with Progress(TextColumn("{task.description}"), BarColumn(), TextColumn("{task.completed}/{task.total}"),
                  TimeElapsedColumn(), console=stderr_console(), transient=True) as progress:
        task = progress.add_task("", total=total)
        started = []

        def step(description: str) -> None:
            if started:
                progress.advance(task)
            started.append(description)
            progress.update(task, description=description)

        yield step
        progress.update(task, completed=total)


def tell(written: dict, console) -> None:
    """Say where the outputs are, one line each."""
    if written["report"]:
        console.print(f"report: {markup(written['report'])}")
    if written["pdf"]:
        console.print(f"PDF: {markup(written['pdf'])}")
    if written["pdf_skipped"]:
        console.print(f"PDF skipped: {markup(written['pdf_skipped'])}")
    if written["plots"]:
        folder = Path(written["plots"][0]).parent
        console.print(f"plots: {len(written['plots'])} files in {markup(folder)}")


@handles_errors
def report_command(
    inputs: List[Path] = typer.Argument(..., help="A manifest (.toml or its folder), or Touchstone files with --turns (as for analyze)."),
    output: Path = typer.Option(Path("report.html"), "-o", "--output", help="The HTML file to write."),
    plots_dir: Optional[Path] = typer.Option(None, "--plots", help="Also write every plot as PNG, SVG and PDF into this folder."),
    pdf: bool = typer.Option(False, "--pdf", help="Also print the report to PDF beside it (needs chromium)."),
    json_output: bool = typer.Option(False, "--json", help="Print what was written as JSON on stdout."),
    turns: Optional[str] = typer.Option(None, "--turns", help="Turns PRIMARY:SECONDARY for files without a manifest, e.g. 3:9."),
    termination: Optional[str] = typer.Option(None, "--termination", help="One-port files without a manifest: what the other winding sees (open, short, or ohms; default open)."),
    port1: str = typer.Option("primary", "--port1", help="One-port files without a manifest: the winding on port 1."),
):
    """Write one self-contained HTML report of a measurement set: verdicts, numbers, plots, provenance."""
    from rfmeas.commands.analyze import run_analysis

    analysis = run_analysis(inputs, turns, termination, port1)
    written = write_outputs(analysis, output, plots_dir, pdf)
    if json_output:
        print_json(dict(written, name=analysis.name, design_passed=analysis.design_passed))
    else:
        tell(written, stdout_console())
    if written["pdf_skipped"] and json_output:
        stderr_console().print(f"PDF skipped: {markup(written['pdf_skipped'])}")
