"""`rfmeas core`: permeability spectrum, relaxation and likely material class of an unknown core."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from ._common import handles_errors, print_json, stdout_console
from ..usertext import markup


def _numbers(option: str, text: str, count: int) -> list[float]:
    from ..errors import InputError
    from ..units import parse_engineering

    parts = [p for p in text.replace(";", ",").split(",") if p.strip()]
    if count and len(parts) != count:
        raise InputError(f"{option} needs {count} comma-separated numbers, not {text!r}")
    try:
        return [parse_engineering(p) for p in parts]
    except InputError as exc:
        raise InputError(f"{option}: {exc.message}") from None


def _geometry(toroid: str | None, effective: str | None):
    from ..errors import InputError
    from ..magnetics import effective_geometry, toroid_geometry

    if toroid and effective:
        raise InputError("give the core either as --toroid or as --effective, not both")
    if toroid:
        return toroid_geometry(*_numbers("--toroid", toroid, 3))
    if effective:
        return effective_geometry(*_numbers("--effective", effective, 2))
    return None


def render_core(analysis, console=None) -> None:
    """The core analysis as tables: summary, spectrum at a few frequencies, material class."""
    from rich import box
    from rich.table import Table

    from ..units import format_engineering as eng
    from ..units import format_with_error

    console = console or stdout_console()
    console.print(f"Core: {analysis.geometry.description}, {analysis.turns} turns, "
                  f"{analysis.method} measurement against {analysis.z0_ohm:g} Ω")
    summary = Table(title="Summary", box=box.SIMPLE_HEAD, pad_edge=False, show_header=False)
    summary.add_column("", no_wrap=True)
    summary.add_column("", no_wrap=True)
    summary.add_row("initial permeability µi",
                    format_with_error(analysis.initial_permeability, analysis.initial_permeability_stderr))
    summary.add_row("relaxation frequency (µ″ peak)",
                    format_with_error(analysis.relaxation_frequency_Hz, analysis.relaxation_frequency_stderr_Hz,
                                      "Hz"))
    summary.add_row("(µi − 1)·fr (Snoek product)",
                    eng((analysis.initial_permeability - 1) * analysis.relaxation_frequency_Hz, "Hz", 3))
    m = analysis.model
    form = m.name + (f", α = {m.alpha:.3f} ± {m.alpha_stderr:.3f}" if m.name == "broadened" else "")
    summary.add_row("relaxation model", form)
    summary.add_row("winding resistance Rw",
                    format_with_error(analysis.series_resistance_ohm, analysis.series_resistance_stderr_ohm, "Ω"))
    summary.add_row("winding capacitance Cw",
                    format_with_error(analysis.self_capacitance_F, analysis.self_capacitance_stderr_F, "F"))
    summary.add_row("self-resonance", eng(analysis.self_resonance_Hz, "Hz"))
    band = analysis.trustworthy_band_Hz
    summary.add_row("trustworthy band", "none" if band is None else f"{eng(band[0], 'Hz')} – {eng(band[1], 'Hz')}")
    console.print(summary)
    console.print(f"Model: {m.reason}.")

    spectrum = Table(title="Spectrum", box=box.SIMPLE_HEAD, pad_edge=False)
    for heading in ("frequency", "µ′", "µ″", "tan δ", "tan δ/µi", "trustworthy"):
        spectrum.add_column(heading, justify="right", no_wrap=True)
    rows = {p.frequency_Hz: p for p in analysis.loss_factor}
    for fq in _table_frequencies(analysis):
        mr, mi = (float(v) for v in analysis.spectrum_at(fq))
        p = rows.get(fq)
        tan_d = mi / mr if mr > 0 else float("nan")
        k = min(range(analysis.f_Hz.size), key=lambda i: abs(analysis.f_Hz[i] - fq))
        spectrum.add_row(eng(fq, "Hz"), f"{mr:.4g}", f"{mi:.4g}", f"{tan_d:.3g}",
                         f"{tan_d / analysis.initial_permeability:.3g}" if p is None or p.tan_delta_over_mu is None
                         else format_with_error(p.tan_delta_over_mu, p.tan_delta_over_mu_stderr),
                         "yes" if analysis.trustworthy[k] else "no")
    console.print(spectrum)

    match = analysis.material_class
    if match is not None:
        console.print(f"Material class: [bold]{match.best.material.name}[/] — {match.confidence_level} "
                      f"(confidence {match.confidence:.2f}). {match.explanation}.")
        if match.alternatives:
            console.print("Alternatives: " + "; ".join(
                f"{a.material.name} (distance {a.distance:.2f})" for a in match.alternatives))
        console.print("A generic class, not a brand: confirm with a datasheet before relying on it.")
    for warning in analysis.warnings:
        console.print(f"[yellow]warning:[/] {markup(warning)}")


def _table_frequencies(analysis) -> list[float]:
    """The loss-factor frequencies plus decades across the sweep (at most eight rows)."""
    import math

    f = analysis.f_Hz
    decades = [10.0**k for k in range(math.ceil(math.log10(f[0])), math.floor(math.log10(f[-1])) + 1)]
    chosen = sorted({p.frequency_Hz for p in analysis.loss_factor if f[0] <= p.frequency_Hz <= f[-1]}
                    | set(decades))
    return chosen[:8]


def register(app: typer.Typer) -> None:
    app.command("core")(core_command)


@handles_errors
def core_command(
    sweep: Path = typer.Argument(..., help="A one-port .s1p sweep of the winding, an .s2p with --method, "
                                           "or a manifest (.toml or its folder) with a [core] table."),
    turns: Optional[int] = typer.Option(None, "--turns", help="Turns of the test winding."),
    toroid: Optional[str] = typer.Option(None, "--toroid", help="Ring core OD,ID,HEIGHT in mm, e.g. 12.7,7.1,4.9."),
    effective: Optional[str] = typer.Option(None, "--effective",
                                            help="Datasheet effective area and path length AE_MM2,LE_MM."),
    method: Optional[str] = typer.Option(None, "--method",
                                         help="How an .s2p was measured: reflection (S11), series-through "
                                              "or shunt-through (S21)."),
    loss_at: Optional[str] = typer.Option(None, "--loss-at",
                                          help="Frequencies for tan δ/µi, e.g. 1M,10M (default: decades in "
                                               "the trustworthy band)."),
    materials: Optional[Path] = typer.Option(None, "--materials",
                                             help="Your own material-class table (TOML), added to the shipped one."),
    dc_resistance: Optional[str] = typer.Option(None, "--dc-resistance",
                                                help="What an ohmmeter across the bare core shows: conductive "
                                                     "(MnZn-like) or insulating (NiZn-like)."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write the µ′, µ″ plot (PNG, SVG or PDF)."),
    json_output: bool = typer.Option(False, "--json", help="Print the JSON result on stdout and nothing else."),
):
    """Identify an unknown core from a test winding: µi, relaxation, loss factor, material class."""
    from ..core import analyze_core_file
    from ..errors import InputError
    from ..materials import RESISTIVITY

    if dc_resistance is not None and dc_resistance not in RESISTIVITY:
        raise InputError(f"--dc-resistance must be one of {', '.join(RESISTIVITY)}, not {dc_resistance!r}")
    if turns is not None and turns <= 0:
        raise InputError(f"--turns must be a positive whole number, not {turns}")
    loss = None if loss_at is None else _numbers("--loss-at", loss_at, 0)
    analysis = analyze_core_file(sweep, turns=turns, geometry=_geometry(toroid, effective), method=method,
                                 loss_frequencies_Hz=loss, materials_file=materials, dc_resistance=dc_resistance)
    if plot is not None:
        from ..plots.permeability import plot_permeability

        plot_permeability(analysis, plot)
    if json_output:
        print_json(analysis.to_dict())
    else:
        render_core(analysis)
        if plot is not None:
            stdout_console().print(f"Plot written to {markup(plot)}")
