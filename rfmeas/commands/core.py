"""`rfmeas core`: permeability spectrum, relaxation and likely material class of an unknown core."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from rfmeas.commands._common import handles_errors, print_json, stdout_console
from rfmeas.usertext import markup


def _numbers(option: str, text: str, count: int) -> list[float]:
    from rfmeas.errors import InputError
    from rfmeas.units import parse_engineering

    parts = [p for p in text.replace(";", ",").split(",") if p.strip()]
    if count and len(parts) != count:
        raise InputError(f"{option} needs {count} comma-separated numbers, not {text!r}")
    try:
        return [parse_engineering(p) for p in parts]
    except InputError as exc:
        raise InputError(f"{option}: {exc.message}") from None


def _geometry(toroid: str | None, effective: str | None, two_hole: str | None = None, rod: str | None = None):
    from rfmeas.errors import InputError
    from rfmeas.magnetics.geometry import effective_geometry, rod_geometry, toroid_geometry, two_hole_geometry

    given = [(name, text) for name, text in (("--toroid", toroid), ("--effective", effective),
                                             ("--two-hole", two_hole), ("--rod", rod)) if text]
    if len(given) > 1:
        raise InputError("give the core one way only: " + " or ".join(name for name, _ in given))
    if not given:
        return None
    name, text = given[0]
    builder, count = {"--toroid": (toroid_geometry, 3), "--effective": (effective_geometry, 2),
                      "--two-hole": (two_hole_geometry, 5), "--rod": (rod_geometry, 2)}[name]
    return builder(*_numbers(name, text, count))


def _turn_counts(text: str | None) -> list[int]:
    from rfmeas.errors import InputError

    if text is None:
        return []
    counts = []
    for part in text.replace(";", ",").split(","):
        try:
            n = int(part.strip())
        except ValueError:
            raise InputError(f"--turns takes whole numbers, one per sweep (e.g. 1,2), not {text!r}") from None
        if n <= 0:
            raise InputError(f"--turns must be positive whole numbers, not {text!r}")
        counts.append(n)
    return counts


def _error_model(directivity, source_match, tracking):
    from rfmeas.magnetics.dispersion import DEFAULT_VNA_ERRORS, VnaErrorModel

    if directivity is None and source_match is None and tracking is None:
        return None
    d = DEFAULT_VNA_ERRORS
    return VnaErrorModel(d.directivity_db if directivity is None else directivity,
                         d.source_match_db if source_match is None else source_match,
                         d.tracking_db if tracking is None else tracking)


def render_core(analysis, console=None) -> None:
    """The core analysis as tables: summary, spectrum at a few frequencies, material class."""
    from rich import box
    from rich.table import Table

    from rfmeas.units import format_engineering as eng
    from rfmeas.units import format_with_error

    console = console or stdout_console()
    console.print(f"Core: {analysis.geometry.description}, {analysis.turns} turns, "
                  f"{analysis.method} measurement against {analysis.z0_ohm:g} Ω")
    summary = Table(title="Summary", box=box.SIMPLE_HEAD, pad_edge=False, show_header=False)
    summary.add_column("", no_wrap=True)
    summary.add_column("", no_wrap=False)
    mu_text = format_with_error(analysis.initial_permeability, analysis.initial_permeability_stderr) \
        if analysis.initial_permeability_stderr is not None else f"{eng(analysis.initial_permeability)} (uncertain)"
    if analysis.initial_permeability_source == "plateau":
        lo, hi = analysis.plateau_band_Hz
        mu_text += f"  (plateau of µ′, {eng(lo, 'Hz')} – {eng(hi, 'Hz')}, {analysis.plateau_points} points)"
    else:
        mu_text += "  (model extrapolation: the data hold no plateau)"
    summary.add_row("initial permeability µi", mu_text)
    summary.add_row("A_L", eng(analysis.inductance_factor_H_per_turn2, "H", 4) + "/turn²")
    material_mu = analysis._material_permeability()
    if material_mu is not None and material_mu["value"] is not None:
        summary.add_row("material µi (open core)", f"{eng(material_mu['value'])}  (estimate from Nd)")
    peak = analysis.loss_peak
    summary.add_row("µ″ peak", "not inside the sweep" if peak.frequency_Hz is None else
                    f"{eng(peak.frequency_Hz, 'Hz', 3)} (from the {peak.source})")
    if peak.frequency_Hz is not None:
        summary.add_row("(µi − 1)·f at the peak (Snoek product)",
                        eng((analysis.initial_permeability - 1) * peak.frequency_Hz, "Hz", 3))
    m = analysis.model
    summary.add_row("dispersion model", f"{m.name} (misfit {m.misfit:.2f}× the VNA error model"
                    + (", POOR)" if m.poor else ")"))
    leads = analysis.leads
    summary.add_row("test leads", "not removed" if not leads.determined else
                    f"{format_with_error(leads.inductance_H, leads.inductance_stderr_H, 'H')}, "
                    f"{eng(leads.resistance_ohm, 'Ω', 3)} ({leads.source})")
    summary.add_row("series resistance Rs", _value(m.series_resistance_ohm, m.series_resistance_stderr_ohm, "Ω"))
    summary.add_row("winding capacitance Cw", _value(m.winding_capacitance_F, m.winding_capacitance_stderr_F, "F"))
    summary.add_row("self-resonance", eng(analysis.self_resonance_Hz, "Hz"))
    band = analysis.trustworthy_band_Hz
    summary.add_row("trustworthy band", "none" if band is None else f"{eng(band[0], 'Hz')} – {eng(band[1], 'Hz')}")
    console.print(summary)
    console.print(f"Model: {m.reason}.")
    for other in analysis.other_windings:
        mu = other["initial_permeability"]
        value = "not determined" if mu["value"] is None else f"{eng(mu['value'])} ({mu['source']})"
        label = str(other["label"])
        label = f"{other['turns']} turns" + ("" if label == f"{other['turns']} turns" else f" ({label})")
        console.print(f"Also measured: {markup(label)}: µi {value}")
    if analysis.lcr is not None:
        lcr = analysis.lcr
        value = "none" if lcr.initial_permeability is None else format_with_error(
            lcr.initial_permeability, lcr.initial_permeability_stderr)
        console.print(f"LCR readings ({markup(lcr.path)}, {lcr.turns} turns): µi {value} from "
                      f"{lcr.readings_used} reading(s)")

    spectrum = Table(title="Spectrum", box=box.SIMPLE_HEAD, pad_edge=False)
    for heading in ("frequency", "µ′", "µ″", "tan δ", "tan δ/µi", "trustworthy"):
        spectrum.add_column(heading, justify="right", no_wrap=True)
    rows = {p.frequency_Hz: p for p in analysis.loss_factor}
    for fq in _table_frequencies(analysis):
        mr, mi = (float(v) for v in analysis.spectrum_at(fq))
        p = rows.get(fq)
        tan_d = mi / mr if mr > 0 else float("nan")
        k = min(range(analysis.f_Hz.size), key=lambda i: abs(analysis.f_Hz[i] - fq))
        spectrum.add_row(eng(fq, "Hz"), eng(mr), eng(mi), eng(tan_d, "", 3),
                         eng(tan_d / analysis.initial_permeability, "", 3) if p is None or p.tan_delta_over_mu is None
                         or p.tan_delta_over_mu_stderr is None
                         else format_with_error(p.tan_delta_over_mu, p.tan_delta_over_mu_stderr),
                         "yes" if analysis.trustworthy[k] else "no")
    console.print(spectrum)

    match = analysis.material_class
    if match is not None:
        console.print(f"Material class: [bold]{markup(match.best.material.name)}[/] — {match.confidence_level} "
                      f"(confidence {match.confidence:.2f}). {match.explanation}.")
        for limit in getattr(match, "limits", ()):
            console.print(f"  held back: {markup(limit)}")
        if match.alternatives:
            console.print("Alternatives: " + "; ".join(
                f"{a.material.name} (distance {a.distance:.2f})" for a in match.alternatives))
        console.print("A generic class, not a brand: confirm with a datasheet before relying on it.")
    for warning in analysis.warnings:
        console.print(f"[yellow]warning:[/] {markup(warning)}")


def _value(value, stderr, unit):
    from rfmeas.units import format_engineering as eng
    from rfmeas.units import format_with_error

    if stderr is None:
        return "0 (at its bound: not determined)" if abs(value) < 1e-15 else f"{eng(value, unit, 3)} (not determined)"
    return format_with_error(value, stderr, unit)


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


def render_readings(result, console=None) -> None:
    """LCR readings alone: µ′, µ″ and A_L per reading, µi from the low-loss ones."""
    from rich import box
    from rich.table import Table

    from rfmeas.units import format_engineering as eng
    from rfmeas.units import format_with_error

    console = console or stdout_console()
    console.print(f"Core: {result.geometry.description}, {result.turns} turns, LCR readings "
                  f"({markup(result.form)}) from {markup(result.path)}")
    table = Table(box=box.SIMPLE_HEAD, pad_edge=False)
    for heading in ("frequency", "µ′", "µ″", "A_L"):
        table.add_column(heading, justify="right", no_wrap=True)
    for f, mr, mi, al in zip(result.f_Hz, result.mu_real, result.mu_imag, result.inductance_factor_H_per_turn2):
        table.add_row(eng(f, "Hz"), eng(mr), eng(mi, "", 3), eng(al, "H", 4) + "/turn²")
    console.print(table)
    value = "none" if result.initial_permeability is None else format_with_error(
        result.initial_permeability, result.initial_permeability_stderr)
    console.print(f"initial permeability µi: {value} (from {result.readings_used} low-loss reading(s))")
    for warning in result.warnings:
        console.print(f"[yellow]warning:[/] {markup(warning)}")


@handles_errors
def core_command(
    sweeps: Optional[list[Path]] = typer.Argument(
        None, help="One-port .s1p sweeps of test windings on the same core (one turn count each, see "
                   "--turns), an .s2p with --method, or a manifest (.toml or its folder)."),
    turns: Optional[str] = typer.Option(None, "--turns", help="Turns of each test winding, in the order of the "
                                                              "sweeps, e.g. 8 or 1,2."),
    toroid: Optional[str] = typer.Option(None, "--toroid", help="Ring core OD,ID,HEIGHT in mm, e.g. 12.7,7.1,4.9."),
    effective: Optional[str] = typer.Option(None, "--effective",
                                            help="Datasheet effective area and path length AE_MM2,LE_MM."),
    two_hole: Optional[str] = typer.Option(None, "--two-hole",
                                           help="Two-hole core WIDTH,HEIGHT,LENGTH,HOLE_DIAMETER,HOLE_SPACING in mm."),
    rod: Optional[str] = typer.Option(None, "--rod", help="Rod DIAMETER,LENGTH in mm (gives the apparent µ)."),
    leads_short: Optional[Path] = typer.Option(None, "--leads-short",
                                               help="A sweep of the test leads shorted where the winding goes."),
    lead_inductance: Optional[str] = typer.Option(None, "--lead-inductance",
                                                  help="Series inductance of the test leads, e.g. 30n."),
    lead_resistance: Optional[str] = typer.Option(None, "--lead-resistance",
                                                  help="Series resistance of the test leads, e.g. 50m."),
    readings: Optional[Path] = typer.Option(None, "--readings",
                                            help="LCR readings of a winding (CSV or TOML: Ls/Rs, Lp/Rp, L/Q or "
                                                 "|Z|/θ); its turns are the last --turns value."),
    directivity: Optional[float] = typer.Option(None, "--directivity",
                                                help="VNA residual directivity after calibration, dB (default −40)."),
    source_match: Optional[float] = typer.Option(None, "--source-match",
                                                 help="VNA residual source match, dB (default −35)."),
    tracking: Optional[float] = typer.Option(None, "--tracking",
                                             help="VNA residual tracking error, ± dB (default 0.05)."),
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
    csv_path: Optional[Path] = typer.Option(None, "--csv", metavar="FILE",
                                            help="Also write the permeability spectrum as CSV (one row per point)."),
    overwrite: bool = typer.Option(False, "--overwrite", help="Replace an existing --csv file."),
):
    """Identify an unknown core from test windings: µi, dispersion, loss factor, material class."""
    from dataclasses import replace

    from rfmeas.fit.core_spectrum import analyze_core_file, analyze_readings_file, given_leads
    from rfmeas.magnetics.dispersion import DEFAULT_VNA_ERRORS
    from rfmeas.errors import InputError
    from rfmeas.magnetics.materials import RESISTIVITY
    from rfmeas.units import parse_engineering
    from rfmeas.commands._csvfile import check_csv_target

    check_csv_target(csv_path, overwrite)
    if dc_resistance is not None and dc_resistance not in RESISTIVITY:
        raise InputError(f"--dc-resistance must be one of {', '.join(RESISTIVITY)}, not {dc_resistance!r}")
    sweeps = list(sweeps or [])
    if not sweeps and readings is None:
        raise InputError("give a sweep (or a manifest) of the winding, or --readings with LCR readings")
    two_ports = [p for p in sweeps if Path(p).suffix.lower() == ".s2p"]
    if two_ports and method is None:
        raise InputError("a two-port sweep: say how it was measured with --method reflection (S11), "
                         "series-through or shunt-through (S21)", two_ports[0])
    counts = _turn_counts(turns)
    geometry = _geometry(toroid, effective, two_hole, rod)
    errors = _error_model(directivity, source_match, tracking)
    leads = None
    if lead_inductance is not None or lead_resistance is not None:
        if leads_short is not None:
            raise InputError("give the leads either as --leads-short or as --lead-inductance/--lead-resistance")
        leads = given_leads(None if lead_inductance is None else parse_engineering(lead_inductance),
                            None if lead_resistance is None else parse_engineering(lead_resistance))
    loss = None if loss_at is None else _numbers("--loss-at", loss_at, 0)
    readings_turns = None
    if readings is not None:
        if geometry is None:
            raise InputError("LCR readings need the core size as an option (--toroid, --effective, ...)")
        if not counts:
            raise InputError("LCR readings need the winding's turns (--turns N)")
        readings_turns = counts[-1]
        if not sweeps:
            if csv_path is not None:
                raise InputError("--csv writes the spectrum of a sweep; LCR readings alone have none")
            if leads is None and leads_short is not None:
                from rfmeas.fit.core_spectrum import leads_from_short_file

                leads, _ = leads_from_short_file(leads_short, errors or DEFAULT_VNA_ERRORS)
            lcr = analyze_readings_file(readings, readings_turns, geometry, leads)
            if json_output:
                print_json(lcr.to_dict())
            else:
                render_readings(lcr)
            return
        if len(counts) == len(sweeps) + 1:
            counts = counts[:-1]
    if len(counts) > 1 and len(counts) != len(sweeps):
        raise InputError(f"{len(sweeps)} sweep(s) but {len(counts)} turn counts: give one per sweep (--turns 1,2)")
    if len(sweeps) > 1 and len(counts) != len(sweeps):
        raise InputError(f"{len(sweeps)} sweeps need one turn count each (--turns 1,2,...)")
    analysis = analyze_core_file(sweeps[0], turns=counts[0] if counts else None, geometry=geometry, method=method,
                                 errors=errors, loss_frequencies_Hz=loss, materials_file=materials,
                                 dc_resistance=dc_resistance, extra_files=sweeps[1:], extra_turns=counts[1:],
                                 leads_short=leads_short, leads=leads)
    if readings is not None:
        # the readings take the leads the sweeps' analysis used (typed, or read once from --leads-short)
        lcr_leads = leads if leads is not None else (analysis.leads if leads_short is not None else None)
        analysis = replace(analysis, lcr=analyze_readings_file(readings, readings_turns, geometry, lcr_leads))
    if plot is not None:
        from rfmeas.present.plots.permeability import plot_permeability

        plot_permeability(analysis, plot)
    if csv_path is not None:
        from rfmeas.commands._csvfile import write_csv
        from rfmeas.present.csvout import spectrum_csv

        write_csv(csv_path, spectrum_csv(analysis.to_dict()), overwrite)
    if json_output:
        print_json(analysis.to_dict())
    else:
        render_core(analysis)
        if plot is not None:
            stdout_console().print(f"Plot written to {markup(plot)}")
        if csv_path is not None:
            stdout_console().print(f"CSV: {markup(csv_path)}")

