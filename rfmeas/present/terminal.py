"""Terminal presentation of an analysis: rich tables in engineering notation."""

from __future__ import annotations

from rfmeas.usertext import markup as escape  # user text verbatim: control characters visible, no markup

from rfmeas.fit.result import LABELS, PARAMETER_KEYS
from rfmeas.units import format_engineering, format_with_error

_UNITS = {key: unit for key, _name, unit in PARAMETER_KEYS}


def parameter_table(analysis):
    from rich.table import Table

    table = Table(title="Equivalent circuit", title_justify="left", show_edge=False, pad_edge=False)
    table.add_column("quantity")
    table.add_column("value ± standard error", justify="right")
    table.add_column("rel.", justify="right")
    table.add_column("note", overflow="fold")
    for key, est in analysis.fit.estimates.items():
        unit = _UNITS[key]
        if not est.determined:
            held = "" if est.held_at is None else f" (held at {format_engineering(est.held_at, unit)})"
            table.add_row(LABELS[key], "[yellow]not determined[/]", "", escape(est.note + held))
            continue
        rel = est.relative_stderr
        rel_text = "" if rel is None else (f"{rel * 100:.2g} %" if rel < 10 else "≫100 %")
        table.add_row(LABELS[key], estimate_text(est, unit), rel_text,
                      escape("; ".join(n for n in (est.note, est.stderr_note) if n)))
    return table


def estimate_text(est, unit: str) -> str:
    """'12.31 ± 0.05 µH'; a determined value without a usable standard error gets '± ?' (never bare)."""
    if est.stderr is None:
        return f"{format_engineering(est.value, unit, 5)} ± ?"
    return format_with_error(est.value, est.stderr, unit)


def quality_line(fit) -> str:
    """The fit judged against the data's own noise, in one plain sentence (rich markup)."""
    q = fit.quality
    colour = {"good": "green", "marginal": "yellow"}.get(q.grade, "bold red")
    return f"fit quality: [{colour}]{q.grade}[/] — {escape(q.summary())}"


def sweep_table(analysis):
    from rich.table import Table

    table = Table(title="Sweeps and fit quality", title_justify="left", show_edge=False, pad_edge=False)
    for col, justify in (("sweep", "left"), ("connection", "left"), ("points", "right"),
                         ("range", "left"), ("rms misfit", "right"), ("data noise", "right"),
                         ("misfit / noise", "right")):
        table.add_column(col, justify=justify)
    missed = {m["sweep"] for m in analysis.fit.quality.missed}
    for q, sweep in zip(analysis.fit.sweeps, analysis.measurement.sweeps):
        f = sweep.f_Hz
        ratio = f"{q.misfit_ratio:.3g}" + (" [bold red]missed[/]" if q.label in missed else "")
        table.add_row(escape(q.label), escape(q.description), str(q.points),
                      f"{format_engineering(f[0], 'Hz', 3)} – {format_engineering(f[-1], 'Hz', 3)}",
                      f"{q.rms_residual:.2g}", f"{q.data_noise:.2g}", ratio)
    return table


def render_analysis(analysis, console) -> None:
    """Print the whole analysis: header, parameters, figures, design check, fit quality, warnings."""
    fit = analysis.fit
    console.print(f"[bold]{escape(analysis.name)}[/]  ({len(analysis.measurement.sweeps)} sweeps, "
                  f"{fit.points} fitted values)")
    if analysis.measurement.notes:
        console.print(f"[dim]{escape(analysis.measurement.notes)}[/]")
    console.print()
    console.print(parameter_table(analysis))
    if not fit.quality.stderr_describes_error:
        console.print("[bold red]The fit is poor: these standard errors do not describe the error.[/] "
                      "The model misses the data far beyond their noise; treat every number as unconfirmed.")
    console.print("[dim]Standard errors come from the trace noise and the fit alone; calibration and "
                  "jig errors come on top. The T-model view uses the proportional leakage split "
                  "(Ll1 = L1(1−k), Ll2 = L2(1−k)): the terminals cannot tell how leakage divides.[/]")
    console.print()
    _render_figures(analysis, console)
    _render_verdicts(analysis, console)
    console.print(sweep_table(analysis))
    state = "[green]converged[/]" if fit.converged else "[red]did not converge[/]"
    console.print(f"fit {state} in {fit.elapsed_s * 1000:.0f} ms; rms misfit {fit.rms_residual:.2g}")
    console.print(quality_line(fit))
    warnings = analysis.all_warnings
    for title, lines in (("[bold yellow]warnings[/]", warnings), ("[bold]advice[/]", analysis.advice)):
        if lines:
            console.print()
            console.print(title)
            for line in lines:
                console.print(f"  • {escape(line)}")


# ---- figures and the design check --------------------------------------------------------------

def _value_text(fig, digits: int = 4) -> str:
    """'3.21 ± 0.02 MHz' of a Figure; '—' without a value; '± ?' without a standard error."""
    if fig is None or fig.value is None:
        return "—"
    unit = fig.unit if fig.unit == "Hz" else ""
    if not fig.stderr:  # None or 0: no standard error, which the note explains
        return format_engineering(fig.value, unit, digits) + " ± ?"
    return format_with_error(fig.value, fig.stderr, unit)


def _plain_note(note: str, shared: str) -> str:
    """A figure's note without the terminations note (which is said once, under the table)."""
    if shared:
        note = note.replace("; " + shared, "").replace(shared, "")
    return note.strip("; ")


def figure_rows(analysis) -> list[tuple[str, str, str]]:
    """(label, value ± standard error, note) for every figure, in reading order, as plain text.

    The terminal table and the HTML report both show these rows.
    """
    f = analysis.figures
    if f is None:
        return []
    shared = f.terminations.note
    rows: list[tuple[str, str, str]] = []

    def row(label, fig, note=""):
        own = fig.note if fig is not None else ""
        why = [own] if note and own.startswith("no standard error") else []  # said even beside another note
        stderr_note = fig.stderr_note if fig is not None else ""
        note = "; ".join(n for n in [note or own] + why + [stderr_note] if n)
        rows.append((label, _value_text(fig), _plain_note(note, shared)))

    for fig in f:
        name = fig.name
        if name == "inductance_factor_nH_per_turn2":
            if fig.value is None:
                row("A_L", fig)
                continue
            agree = fig.detail("agreement_percent")
            row(fig.label, fig, "" if agree is None else
                f"windings agree to {agree:+.2g} %" + ("" if fig.detail("agrees") else " — check the turns"))
            for side in ("primary", "secondary"):
                sub = fig.detail(side)
                if sub is not None and sub.value is not None:
                    row(f"  from the {side} ({sub.detail('turns')} turns)", sub)
            for key in ("uH_per_100_turns", "mH_per_1000_turns"):
                sub = fig.detail(key)
                row(f"  {sub.label}", sub)
        elif name == "low_frequency_limit_Hz":
            row(f"{fig.label} (X ≥ {fig.detail('reactance_factor', 4):g}·R)", fig,
                f"set by the {fig.detail('set_by')}; primary {_value_text(fig.detail('primary'))}, "
                f"secondary {_value_text(fig.detail('secondary'))}; {fig.note}")
        elif name == "midband_insertion_loss_dB":
            row(fig.label, fig, f"at {format_engineering(fig.detail('frequency_Hz'), 'Hz')}"
                if fig.value is not None else "")
            rl = f.return_loss_band
            band = "—" if rl.start.value is None and rl.stop.value is None else \
                f"{format_engineering(rl.start.value, 'Hz')} – {format_engineering(rl.stop.value, 'Hz')}"
            rows.append((f"return loss ≥ {rl.threshold_dB:g} dB", band, _plain_note(rl.note, shared)))
        elif name == "turns_ratio":
            notes = []
            if fig.detail("nearest_secondary_turns") is not None:
                notes.append(f"acts like {analysis.measurement.primary_turns}:{fig.detail('nearest_secondary_turns')}")
            if fig.detail("design_ratio"):
                notes.append(f"design 1:{format_engineering(fig.detail('design_ratio'))}")
            row(fig.label, fig, ", ".join(notes))
            ocv = fig.detail("open_circuit_voltage_ratio")
            row(ocv.label, ocv)
        else:
            row(fig.label, fig)
    return rows


def figures_table(analysis):
    from rich.table import Table

    table = Table(title="Figures", title_justify="left", show_edge=False, pad_edge=False)
    table.add_column("figure")
    table.add_column("value ± standard error", justify="right")
    table.add_column("note", overflow="fold")
    for label, value, note in figure_rows(analysis):
        table.add_row(label, value, escape(note))
    return table


def verdict_table(check):
    """The design check's verdicts (a rfmeas.judge.design.DesignCheck) as a rich table."""
    from rich.table import Table

    title = {"pass": "PASS", "fail": "FAIL"}.get(check.status, "NOT JUDGED")
    table = Table(title="Design check: " + title, title_justify="left", show_edge=False, pad_edge=False)
    for col in ("check", "verdict", "value", "limit", "margin", "what to change"):
        table.add_column(col, overflow="fold")
    for v in check.verdicts:
        verdict = {"pass": "[green]pass[/]", "fail": "[bold red]FAIL[/]"}.get(v.state, "[yellow]not judged[/]")
        unit = v.unit
        table.add_row(escape(v.label), verdict, format_engineering(v.value, unit), format_engineering(v.limit, unit),
                      escape(v.margin), escape(v.advice))
    return table


def _render_figures(analysis, console) -> None:
    if analysis.figures is not None:
        console.print(figures_table(analysis))
        note = analysis.figures.terminations.note
        if note:
            console.print(f"[dim]{escape(note)}[/]")
        console.print()


def _render_verdicts(analysis, console) -> None:
    check = analysis.design_check
    if check is not None:
        console.print(verdict_table(check))
        for reason in check.not_judged:
            console.print(f"[yellow]not judged:[/] {escape(reason)}")
        console.print()
