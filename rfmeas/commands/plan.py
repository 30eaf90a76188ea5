"""`rfmeas plan`: whole-turn windings for a broadband transformer on a core of known A_L."""

from __future__ import annotations

import typer

from rfmeas.commands._common import handles_errors, print_json, stdout_console


def _number(option: str, text: str, key: str | None = None) -> float:
    """The option's value; with `key`, checked against its plausible range (rfmeas.limits)."""
    from rfmeas.errors import InputError
    from rfmeas.limits import check_range
    from rfmeas.units import parse_engineering

    try:
        value = parse_engineering(text)
    except InputError as exc:
        raise InputError(f"{option}: {exc.message}") from None
    return value if key is None else check_range(key, value, option)


def _render(plan) -> None:
    from rich import box
    from rich.table import Table

    from rfmeas.units import format_engineering as eng

    console = stdout_console()
    console.print(
        f"{eng(plan.source_impedance_ohm, 'Ω')} → {eng(plan.load_impedance_ohm, 'Ω')}: "
        f"turns ratio 1 : {plan.turns_ratio:.4g} (secondary : primary = √(load/source)); "
        f"A_L {plan.al_nH_per_turn2:.4g} nH/turn²")
    console.print(
        f"Minimum turns: primary {plan.minimum_turns_primary} ({plan.minimum_turns_primary_exact:.3g}, "
        f"L ≥ {eng(plan.minimum_primary_inductance_H, 'H')}), "
        f"secondary {plan.minimum_turns_secondary} ({plan.minimum_turns_secondary_exact:.3g}, "
        f"L ≥ {eng(plan.minimum_secondary_inductance_H, 'H')})")
    table = Table(title="Whole-turn windings, best first", box=box.SIMPLE_HEAD, pad_edge=False)
    for heading in ("", "N1", "N2", "N2/N1", "error", "L1", "L2", "rule from", "LF −3 dB"):
        table.add_column(heading, justify="left" if heading == "" else "right", no_wrap=True)
    for label, pair in [("best", plan.suggested)] + [("", p) for p in plan.alternatives]:
        table.add_row(label, str(pair.primary_turns), str(pair.secondary_turns), f"{pair.turns_ratio:.4g}",
                      f"{pair.ratio_error_percent:+.2f} %", eng(pair.primary_inductance_H, "H"),
                      eng(pair.secondary_inductance_H, "H"), eng(pair.low_frequency_limit_Hz, "Hz"),
                      eng(pair.low_frequency_corner_Hz, "Hz"))
    console.print(table)
    console.print("'rule from': lowest frequency at which both windings still meet the reactance rule; "
                  "'LF −3 dB': magnetising corner of the primary with source and reflected load in parallel.")
    console.print(
        f"Rule: each winding's reactance at {eng(plan.lowest_frequency_Hz, 'Hz')} is at least "
        f"{plan.reactance_factor:g} × the impedance it works into (primary: source, secondary: load), "
        f"L = A_L·N²; pairs ranked by ratio error (below {plan.ratio_tolerance_percent:g} % counts as equal), "
        "then fewer turns (common practice).")
    if plan.budget is not None:
        b = plan.budget
        console.print(
            f"To reach {eng(b.highest_frequency_Hz, 'Hz')} (−3 dB, referred to the primary, load seen as "
            f"{eng(b.reflected_load_ohm, 'Ω')}): leakage inductance ≤ {eng(b.max_leakage_inductance_H, 'H')}, "
            f"total shunt capacitance ≤ {eng(b.max_shunt_capacitance_F, 'F')} (each alone).")


def register(app: typer.Typer) -> None:
    @app.command("plan")
    @handles_errors
    def plan_command(
        source: str = typer.Option(..., "--source", help="Impedance the primary works into, ohms (e.g. 50)."),
        load: str = typer.Option(..., "--load", help="Impedance the secondary works into, ohms (e.g. 450)."),
        lowest: str = typer.Option(..., "--lowest", help="Lowest frequency of use, Hz (e.g. 1.8M)."),
        al: str = typer.Option(..., "--al", help="Core inductance factor A_L, in --al-unit."),
        highest: str | None = typer.Option(None, "--highest",
                                           help="Highest frequency of use, Hz: adds leakage and capacitance budgets."),
        reactance_factor: str = typer.Option("4", "--reactance-factor",
                                             help="Required winding reactance / impedance at the lowest frequency."),
        al_unit: str = typer.Option("nH", "--al-unit", help="Unit of --al: nH (per turn²), uH/100 or mH/1000."),
        max_turns: int = typer.Option(60, "--max-turns", help="Largest turn count to consider per winding."),
        as_json: bool = typer.Option(False, "--json", help="Print the plan as JSON only."),
    ):
        """Plan the turns of a broadband transformer: ratio, minimum turns, whole-turn choices."""
        from rfmeas.limits import check_range
        from rfmeas.magnetics.permeability import al_to_nH_per_turn2
        from rfmeas.judge.plan import plan_turns

        plan = plan_turns(
            source_impedance_ohm=_number("--source", source, "source_impedance_ohm"),
            load_impedance_ohm=_number("--load", load, "load_impedance_ohm"),
            lowest_frequency_Hz=_number("--lowest", lowest, "lowest_frequency_Hz"),
            al_nH_per_turn2=check_range("al_nH_per_turn2", al_to_nH_per_turn2(_number("--al", al), al_unit),
                                        "--al (in nH/turn²)"),
            reactance_factor=_number("--reactance-factor", reactance_factor, "reactance_factor"),
            highest_frequency_Hz=None if highest is None else _number("--highest", highest, "highest_frequency_Hz"),
            max_turns=int(check_range("max_turns", max_turns, "--max-turns")),
        )
        if as_json:
            print_json(plan.to_dict())
        else:
            _render(plan)
