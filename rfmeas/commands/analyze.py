"""`rfmeas analyze`: fit one transformer's sweeps and print the equivalent circuit."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from rfmeas.commands._common import (db_option, handles_errors, print_json, record_option, refuse_not_kept,
                                     stdout_console)


def register(app: typer.Typer) -> None:
    app.command("analyze")(analyze_command)


def _design_target(design, plan: str | None, return_loss: str | None):
    """The manifest's design with --plan's source, load and band, and --return-loss's threshold."""
    from dataclasses import replace

    from rfmeas.errors import InputError
    from rfmeas.limits import check_range
    from rfmeas.measurement.sweep import DesignTarget
    from rfmeas.units import parse_engineering

    target = design or DesignTarget()
    if plan is not None:
        parts = plan.split(":")
        if len(parts) not in (3, 4):
            raise InputError(f"--plan must look like SOURCE:LOAD:LOWEST[:HIGHEST] (e.g. 50:450:3.5M:30M), "
                             f"not {plan!r}")
        names = ("source", "load", "lowest", "highest")
        keys = ("source_impedance_ohm", "load_impedance_ohm", "lowest_frequency_Hz", "highest_frequency_Hz")
        values = {}
        for name, key, text in zip(names, keys, parts):
            try:
                values[name] = parse_engineering(text)
            except InputError as exc:
                raise InputError(f"--plan {name}: {exc.message}") from None
            if not values[name] > 0:
                raise InputError(f"--plan {name} must be positive, not {text!r}")
            check_range(key, values[name], f"--plan {name}")
        if "highest" in values and values["highest"] <= values["lowest"]:
            raise InputError("--plan: the highest frequency must be above the lowest")
        target = replace(target, source_impedance_ohm=values["source"], load_impedance_ohm=values["load"],
                         lowest_frequency_Hz=values["lowest"], highest_frequency_Hz=values.get("highest"))
    if return_loss is not None:
        try:
            threshold_dB = parse_engineering(return_loss)
        except InputError as exc:
            raise InputError(f"--return-loss: {exc.message}") from None
        if not threshold_dB > 0:
            raise InputError(f"--return-loss must be a positive number of dB, not {return_loss!r}")
        check_range("return_loss_dB", threshold_dB, "--return-loss")
        target = replace(target, return_loss_dB=threshold_dB)
    return target



@handles_errors
def analyze_command(
    inputs: List[Path] = typer.Argument(..., help="A manifest (.toml or its folder), or Touchstone files for a quick look."),
    json_output: bool = typer.Option(False, "--json", help="Print the JSON result on stdout and nothing else."),
    full: bool = typer.Option(False, "--full", help="Show every parameter, figure, sweep and note (default: verdicts, key figures and the circuit)."),
    turns: Optional[str] = typer.Option(None, "--turns", help="Turns PRIMARY:SECONDARY for files without a manifest, e.g. 3:9."),
    termination: Optional[str] = typer.Option(None, "--termination", help="One-port files without a manifest: what the other winding sees (open, short, or ohms; default open)."),
    port1: str = typer.Option("primary", "--port1", help="One-port files without a manifest: the winding on port 1."),
    plan: Optional[str] = typer.Option(None, "--plan", help="Check against a target SOURCE:LOAD:LOWEST[:HIGHEST] (ohms, ohms, Hz, Hz; e.g. 50:450:3.5M:30M) instead of the manifest's [design]."),
    return_loss: Optional[str] = typer.Option(None, "--return-loss", help="Return-loss threshold in dB for the band and its check (default 15, or the manifest's return_loss_dB)."),
    record: bool = record_option(),
    db: Optional[Path] = db_option(),
    report: Optional[Path] = typer.Option(None, "--report", help="Also write the HTML report to this file."),
    plots_dir: Optional[Path] = typer.Option(None, "--plots", help="Also write every plot as PNG, SVG and PDF into this folder."),
    csv_path: Optional[Path] = typer.Option(None, "--csv", metavar="FILE", help="Also write the parameters and figures as CSV (one row per quantity, with units)."),
    overwrite: bool = typer.Option(False, "--overwrite", help="Replace an existing --csv file."),
):
    """Fit the equivalent circuit to all sweeps of one transformer at once."""
    from rfmeas.commands._csvfile import check_csv_target
    from rfmeas.errors import EXIT_DESIGN_FAILED

    check_csv_target(csv_path, overwrite)
    analysis = run_analysis(inputs, turns, termination, port1, plan, return_loss)
    record_id, not_kept = None, None
    if record:  # the analysis is still shown when the store fails; the store's problem ends the run
        from rfmeas.history.store import keep_analysis

        record_id, not_kept = keep_analysis(analysis, db)
    if json_output:
        print_json(analysis.to_dict())
    else:
        from rfmeas.present.terminal import render_analysis

        console = stdout_console()
        render_analysis(analysis, console, full=full)
        if record_id is not None:
            console.print(f"[dim]recorded in the history as @{record_id}[/]")
        if report is None and plots_dir is None:
            console.print("[dim]pictures: --report FILE writes the HTML report with every plot, "
                          "--plots FOLDER the plot files.[/]")
    if report is not None or plots_dir is not None:
        from rfmeas.commands._common import stderr_console
        from rfmeas.commands.report import tell, write_outputs

        tell(write_outputs(analysis, report, plots_dir), stderr_console() if json_output else stdout_console())
    if csv_path is not None:
        from rfmeas.commands._csvfile import write_csv
        from rfmeas.present.csvout import analysis_csv
        from rfmeas.usertext import markup

        write_csv(csv_path, analysis_csv(analysis.to_dict()), overwrite)
        if not json_output:
            stdout_console().print(f"CSV: {markup(csv_path)}")
    if not_kept is not None:
        refuse_not_kept(not_kept)
    from rfmeas.judge.design import design_fails

    if design_fails(analysis.design_status):  # failed, or could not be judged
        raise typer.Exit(EXIT_DESIGN_FAILED)


def run_analysis(inputs, turns=None, termination=None, port1="primary", plan=None, return_loss=None):
    """Analyse a manifest (path or folder) or a list of Touchstone files, with an optional target."""
    from dataclasses import replace

    from rfmeas.analysis import analyze
    from rfmeas.commands._common import resolve_measurement

    measurement = resolve_measurement(inputs, turns, termination, port1)
    if plan is not None or return_loss is not None:
        measurement = replace(measurement, design=_design_target(measurement.design, plan, return_loss))
        if plan is not None:
            from rfmeas.judge.design import check_design_units

            check_design_units(measurement, ("--plan lowest", "--plan highest"))
    return analyze(measurement)
