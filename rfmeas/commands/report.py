"""`rfmeas report`: one self-contained HTML page of an analysis, plus plot files and a PDF on request."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from rfmeas.commands._common import handles_errors, print_json, stderr_console, stdout_console
from rfmeas.usertext import markup


def register(app: typer.Typer) -> None:
    app.command("report")(report_command)


def write_outputs(analysis, report: Optional[Path] = None, plots_dir: Optional[Path] = None,
                  pdf: bool = False) -> dict:
    """Write the report, the plot files and the PDF that were asked for; returns what was written."""
    from rfmeas.present.report.html import write_report
    from rfmeas.present.report.plots import analysis_plots, close_plots, export_plots

    written = {"report": None, "pdf": None, "pdf_skipped": None, "plots": []}
    if report is None and plots_dir is None:
        return written
    plots = analysis_plots(analysis)
    try:
        if plots_dir is not None:
            written["plots"] = [str(p) for p in export_plots(analysis, plots_dir, plots=plots)]
        if report is not None:
            written["report"] = str(write_report(analysis, report, plots))
    finally:
        close_plots(plots)
    if pdf and report is not None:
        from rfmeas.present.report.pdf import find_browser, print_pdf

        if find_browser() is None:
            written["pdf_skipped"] = "no PDF renderer found (install chromium)"
        else:
            written["pdf"] = str(print_pdf(report, Path(report).with_suffix(".pdf")))
    return written


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
    manifest: Path = typer.Argument(..., help="The measurement set's manifest (.toml or its folder)."),
    output: Path = typer.Option(Path("report.html"), "-o", "--output", help="The HTML file to write."),
    plots_dir: Optional[Path] = typer.Option(None, "--plots", help="Also write every plot as PNG, SVG and PDF into this folder."),
    pdf: bool = typer.Option(False, "--pdf", help="Also print the report to PDF beside it (needs chromium)."),
    json_output: bool = typer.Option(False, "--json", help="Print what was written as JSON on stdout."),
):
    """Write one self-contained HTML report of a measurement set: verdicts, numbers, plots, provenance."""
    from rfmeas.analysis import analyze_manifest

    analysis = analyze_manifest(manifest)
    written = write_outputs(analysis, output, plots_dir, pdf)
    if json_output:
        print_json(dict(written, name=analysis.name, design_passed=analysis.design_passed))
    else:
        tell(written, stdout_console())
    if written["pdf_skipped"] and json_output:
        stderr_console().print(f"PDF skipped: {markup(written['pdf_skipped'])}")
