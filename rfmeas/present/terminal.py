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
        value = format_engineering(est.value, unit) if unit else f"{est.value:.5g}"
        return f"{value} ± ?"
    if unit:
        return format_with_error(est.value, est.stderr, unit)
    return f"{est.value:.5g} ± {est.stderr:.2g}"


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
    from rfmeas.judge.figures import terminal_renderers

    for extra in terminal_renderers():
        extra(analysis, console)
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
