"""`rfmeas export`: the fitted transformer as a SPICE subcircuit and as a Touchstone model."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from rfmeas.commands._common import handles_errors, print_json, stdout_console
from rfmeas.usertext import markup


def register(app: typer.Typer) -> None:
    app.command("export")(export_command)


@handles_errors
def export_command(
    inputs: List[Path] = typer.Argument(..., help="A manifest (or its folder), or Touchstone files."),
    spice: Optional[Path] = typer.Option(None, "--spice", help="Write a SPICE subcircuit netlist here."),
    touchstone: Optional[Path] = typer.Option(None, "--touchstone", help="Write the fitted model's S parameters (.s2p) here."),
    name: str = typer.Option("XFMR", "--name", help="Subcircuit name."),
    sweep: Optional[str] = typer.Option(None, "--sweep", help="Model grid START:STOP:POINTS, log-spaced, e.g. "
                                        "100k:100M:401 (default: the measured range, 401 points)."),
    start: Optional[str] = typer.Option(None, "--start", hidden=True, help="Older spelling of --sweep's START."),
    stop: Optional[str] = typer.Option(None, "--stop", hidden=True, help="Older spelling of --sweep's STOP."),
    points: Optional[int] = typer.Option(None, "--points", hidden=True, help="Older spelling of --sweep's POINTS."),
    z0: float = typer.Option(50.0, "--z0", help="Reference impedance of the Touchstone model, ohms."),
    turns: Optional[str] = typer.Option(None, "--turns", help="Turns PRIMARY:SECONDARY for files without a manifest."),
    floating_secondary: bool = typer.Option(False, "--floating-secondary",
                                            help="SPICE subcircuit with four pins P_HI P_LO S_HI S_LO (an isolated "
                                                 "secondary) instead of P1 S1 GND."),
    json_output: bool = typer.Option(False, "--json", help="Print what was written as JSON."),
):
    """Fit the transformer and export the equivalent circuit for a circuit simulator."""
    import numpy as np

    from rfmeas import __version__
    from rfmeas.errors import InputError
    from rfmeas.present.export import model_touchstone_network, spice_subcircuit
    from rfmeas.io.atomic import atomic_write_text
    from rfmeas.io.touchstone import write_touchstone
    from rfmeas.units import format_engineering, parse_engineering
    from rfmeas.commands.analyze import run_analysis

    if spice is None and touchstone is None:
        raise InputError("say what to write: --spice FILE and/or --touchstone FILE")
    if sweep is not None:
        if start is not None or stop is not None or points is not None:
            raise InputError("give the model grid once: --sweep START:STOP:POINTS, without --start, --stop or --points")
        from rfmeas.instruments import parse_sweep

        plan = parse_sweep(sweep, log=True)
        start, stop, points = str(plan.start_Hz), str(plan.stop_Hz), plan.points
    points = 401 if points is None else points
    if points < 2 or points > 100_000:
        raise InputError(f"the model grid needs between 2 and 100000 points, not {points}")
    analysis = run_analysis(inputs, turns)
    params = analysis.fit.params
    held = [f"{key} not determined by the sweeps; held at "
            f"{format_engineering(e.held_at, '')} in this model"
            for key, e in analysis.fit.estimates.items() if not e.determined and e.held_at is not None]
    comments = [f"fitted by rfmeas {__version__} from '{analysis.name}'",
                "small-signal model only: no saturation, heating or insulation behaviour"] + held
    written = {}
    if spice is not None:
        atomic_write_text(spice, spice_subcircuit(params, name=name, comments=comments,
                                                           floating=floating_secondary))
        written["spice"] = str(spice)
    if touchstone is not None:
        if touchstone.suffix.lower() != ".s2p":
            raise InputError("the Touchstone model is a two-port: give a .s2p file name", touchstone)
        f_all = np.concatenate([s.f_Hz for s in analysis.measurement.sweeps])
        f_lo = parse_engineering(start) if start else float(f_all.min())
        f_hi = parse_engineering(stop) if stop else float(f_all.max())
        if not (0 < f_lo < f_hi):
            raise InputError(f"the model grid needs 0 < start < stop, not {f_lo:g} to {f_hi:g} Hz")
        network = model_touchstone_network(params, np.geomspace(f_lo, f_hi, points), z0_ohm=z0, name=name)
        write_touchstone(network, touchstone, comments=comments)
        written["touchstone"] = str(touchstone)
    if json_output:
        print_json({"name": analysis.name, "written": written, "model": params.to_dict(),
                    "held": held})
        return
    console = stdout_console()
    for kind, path in written.items():
        console.print(f"wrote {kind}: {markup(path)}")
    for line in held:
        console.print(f"[yellow]note:[/] {markup(line)}")
