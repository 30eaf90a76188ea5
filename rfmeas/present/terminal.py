"""Terminal presentation of an analysis: rich tables in engineering notation."""

from __future__ import annotations

from rfmeas.usertext import markup as escape  # user text verbatim: control characters visible, no markup

from rfmeas.fit.result import LABELS, PARAMETER_KEYS
from rfmeas.units import format_engineering, format_with_error

_UNITS = {key: unit for key, _name, unit in PARAMETER_KEYS}


CIRCUIT_KEYS = ("primary_inductance_H", "secondary_inductance_H", "leakage_inductance_H", "effective_turns_ratio",
                "coupling_coefficient", "primary_capacitance_F", "secondary_capacitance_F",
                "interwinding_capacitance_F")
"""The equivalent circuit of the compact view: inductances, leakage, ratio, k and capacitances."""


def parameter_rows(analysis, keys=None) -> list[dict]:
    """One row per fitted parameter (or only `keys`): label, value text, relative error, note.

    The terminal table and the HTML report both show these rows (plain text, no markup).
    """
    estimates = analysis.fit.estimates
    rows = []
    for key in (keys if keys is not None else estimates):
        est = estimates.get(key)
        if est is None:
            continue
        unit = _UNITS[key]
        if not est.determined:
            held = "" if est.held_at is None else f" (held at {format_engineering(est.held_at, unit)})"
            rows.append({"label": LABELS[key], "key": key, "value": "not determined", "relative": "",
                         "note": est.note + held, "determined": False})
            continue
        rel = est.relative_stderr
        rel_text = "" if rel is None else (f"{rel * 100:.2g} %" if rel < 10 else "≫100 %")
        rows.append({"label": LABELS[key], "key": key, "value": estimate_text(est, unit), "relative": rel_text,
                     "note": "; ".join(n for n in (est.note, est.stderr_note) if n), "determined": True})
    return rows


def parameter_table(analysis, keys=None):
    """Every fitted parameter (or only `keys`, without the note column) as a rich table."""
    from rich.table import Table

    short = keys is not None
    rows = [(r["label"], r["value"] if r["determined"] else "[yellow]not determined[/]", r["relative"],
             escape(r["note"])) for r in parameter_rows(analysis, keys)]
    with_notes = not short or any(row[3] for row in rows)  # the short table drops an empty note column
    table = Table(title="Circuit" if short else "Equivalent circuit", title_justify="left", show_edge=False,
                  pad_edge=False)
    table.add_column("quantity")
    table.add_column("value ± standard error", justify="right", no_wrap=True)
    table.add_column("rel.", justify="right", no_wrap=True)
    if with_notes:
        table.add_column("note")
    for row in rows:
        table.add_row(*(row if with_notes else row[:3]))
    return table


def estimate_text(est, unit: str) -> str:
    """'12.31 ± 0.05 µH'; a determined value without a usable standard error gets '± ?' (never bare)."""
    if est.stderr is None:
        return f"{format_engineering(est.value, unit, 5)} ± ?"
    return format_with_error(est.value, est.stderr, unit)


def quality_line(fit) -> str:
    """The fit judged against the data's own noise, in one plain sentence (rich markup)."""
    return f"fit quality: {_grade_text(fit.quality)} — {escape(fit.quality.summary())}"


def _grade_text(quality) -> str:
    """The fit's grade in its colour (rich markup)."""
    colour = {"good": "green", "marginal": "yellow"}.get(quality.grade, "bold red")
    return f"[{colour}]{quality.grade}[/]"


def sweep_table(analysis):
    from rich.table import Table

    table = Table(title="Sweeps and fit quality", title_justify="left", show_edge=False, pad_edge=False)
    labels = [escape(q.label) for q in analysis.fit.sweeps]
    table.add_column("sweep", no_wrap=True, min_width=min(30, max(len(t) for t in labels)))
    table.add_column("connection")
    table.add_column("points", justify="right", no_wrap=True)
    table.add_column("range")
    table.add_column("rms misfit / data noise", justify="right")
    table.add_column("misfit ÷ noise", justify="right")
    missed = {m["sweep"] for m in analysis.fit.quality.missed}
    for q, label, sweep in zip(analysis.fit.sweeps, labels, analysis.measurement.sweeps):
        f = sweep.f_Hz
        ratio = f"{q.misfit_ratio:.3g}" + (" [bold red]missed[/]" if q.label in missed else "")
        table.add_row(label, escape(q.description), str(q.points),
                      f"{format_engineering(f[0], 'Hz', 3)} – {format_engineering(f[-1], 'Hz', 3)}",
                      f"{q.rms_residual:.2g} / {q.data_noise:.2g}", ratio)
    return table


def render_analysis(analysis, console, full: bool = False) -> None:
    """Print the analysis for a terminal: verdicts first, then the key figures, then the circuit;
    `full` adds every parameter, figure, sweep and note (what `analyze --full` shows)."""
    fit = analysis.fit
    console.print(f"[bold]{escape(analysis.name)}[/]  ({len(analysis.measurement.sweeps)} sweeps, "
                  f"{fit.points} fitted values)")
    if analysis.measurement.notes:
        console.print(f"[dim]{escape(analysis.measurement.notes)}[/]")
    console.print()
    _render_verdicts(analysis, console, full)
    if full:
        _render_full(analysis, console)
    else:
        _render_compact(analysis, console)
    warnings = analysis.all_warnings
    for title, lines in (("[bold yellow]warnings[/]", warnings), ("[bold]advice[/]", analysis.advice if full else ())):
        if lines:
            console.print()
            console.print(title)
            _bullets(console, [("  •", escape(line)) for line in lines])
    if not full:
        advice = analysis.advice
        more = f", and {len(advice)} piece{'s' if len(advice) > 1 else ''} of advice on the measurement" \
            if advice else ""
        console.print()
        console.print(f"[dim]--full shows every parameter, figure and sweep{more}.[/]")


def _poor_fit_line(analysis, console) -> None:
    if not analysis.fit.quality.stderr_describes_error:
        console.print("[bold red]The fit is poor: these standard errors do not describe the error.[/] "
                      "The model misses the data far beyond their noise; treat every number as unconfirmed.")


def _render_compact(analysis, console) -> None:
    """The key figures and the circuit in two short tables."""
    console.print(key_figures_table(analysis))
    console.print()
    console.print(parameter_table(analysis, CIRCUIT_KEYS))
    _poor_fit_line(analysis, console)


def _render_full(analysis, console) -> None:
    fit = analysis.fit
    console.print(parameter_table(analysis))
    _poor_fit_line(analysis, console)
    console.print("[dim]Standard errors come from the trace noise and the fit alone; calibration and "
                  "jig errors come on top. The T-model view uses the proportional leakage split "
                  "(Ll1 = L1(1−k), Ll2 = L2(1−k)): the terminals cannot tell how leakage divides.[/]")
    console.print()
    _render_figures(analysis, console)
    console.print(sweep_table(analysis))
    state = "[green]converged[/]" if fit.converged else "[red]did not converge[/]"
    console.print(f"fit {state} in {fit.elapsed_s * 1000:.0f} ms; rms misfit {fit.rms_residual:.2g}")
    console.print(quality_line(fit))


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
            row(fig.label, fig, _agreement_note(fig))
            for side in ("primary", "secondary"):
                sub = fig.detail(side)
                if sub is not None and sub.value is not None:
                    row(f"  from the {side} ({sub.detail('turns')} turns)", sub)
            for side in ("primary", "secondary"):
                sub = fig.detail(f"readings_{side}")
                if sub is not None:
                    row(f"  {sub.label}", sub, _readings_note(sub))
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
            row(fig.label, fig, ", ".join(_ratio_notes(analysis, fig)))
            ocv = fig.detail("open_circuit_voltage_ratio")
            row(ocv.label, ocv)
        else:
            row(fig.label, fig)
    return rows


def _readings_note(sub) -> str:
    """Where an LCR-reading A_L was read, and how far the sweeps' fit is from it."""
    if sub.value is None:
        return sub.note
    diff = sub.detail("fit_difference_percent")
    at = f"at {format_engineering(sub.detail('frequency_Hz'), 'Hz')}"
    return at if diff is None else f"{at}; {diff:+.2g} % against the sweeps' value"


def _agreement_note(fig) -> str:
    """How well A_L from each winding agrees ('' when only one winding gives it)."""
    agree = fig.detail("agreement_percent")
    if agree is None:
        return ""
    return f"windings agree to {agree:+.2g} %" + ("" if fig.detail("agrees") else " — check the turns")


def _ratio_notes(analysis, fig) -> list[str]:
    """What the turns ratio acts like, and the design's ratio."""
    notes = []
    if fig.detail("nearest_secondary_turns") is not None:
        notes.append(f"acts like {analysis.measurement.primary_turns}:{fig.detail('nearest_secondary_turns')}")
    if fig.detail("design_ratio"):
        notes.append(f"design 1:{format_engineering(fig.detail('design_ratio'))}")
    return notes


def figures_table(analysis):
    from rich.table import Table

    table = Table(title="Figures", title_justify="left", show_edge=False, pad_edge=False)
    table.add_column("figure")
    table.add_column("value ± standard error", justify="right", no_wrap=True)
    table.add_column("note")
    for label, value, note in figure_rows(analysis):
        table.add_row(label, value, escape(note))
    return table


def verdict_table(check):
    """The design check's verdicts (a rfmeas.judge.design.DesignCheck) as a rich table, one line per
    check; the margins and what to change follow as prose (`_render_verdicts`)."""
    from rich.table import Table

    title = {"pass": "PASS", "fail": "FAIL"}.get(check.status, "NOT JUDGED")
    table = Table(title="Design check: " + title, title_justify="left", show_edge=False, pad_edge=False)
    from rich.text import Text

    # one line per check: the label gives way (cut with an ellipsis) and is said in full below
    rows = [(_verdict_word(v), Text(v.label, no_wrap=True, overflow="ellipsis"), _verdict_number(v, v.value),
             _verdict_number(v, v.limit)) for v in check.verdicts]
    # numbers are never cut: their columns are as wide as their widest cell; a long label gives way
    value_width = max([len("value")] + [len(r[2]) for r in rows])
    limit_width = max([len("limit")] + [len(r[3]) for r in rows])
    table.add_column("verdict", no_wrap=True, min_width=len("not judged"))
    table.add_column("check")
    table.add_column("value", justify="right", no_wrap=True, min_width=value_width)
    table.add_column("limit", justify="right", no_wrap=True, min_width=limit_width)
    for row in rows:
        table.add_row(*row)
    return table


def _verdict_word(v) -> str:
    return {"pass": "[green]pass[/]", "fail": "[bold red]FAIL[/]"}.get(v.state, "[yellow]not judged[/]")


def _verdict_number(v, x) -> str:
    return "—" if x is None else format_engineering(x, v.unit)


def _render_figures(analysis, console) -> None:
    if analysis.figures is not None:
        console.print(figures_table(analysis))
        note = analysis.figures.terminations.note
        if note:
            console.print(f"[dim]{escape(note)}[/]")
        console.print()


def _render_verdicts(analysis, console, full: bool = True) -> None:
    """The verdicts first: one line per check, then each failed check's margin and what to change
    (every check's with `full`), then why anything was not judged."""
    check = analysis.design_check
    if check is None:
        console.print("[dim]No design to check: give a \\[design] table in the manifest, or --plan.[/]")
        console.print()
        return
    console.print(verdict_table(check))
    shown = [v for v in check.verdicts if v.state == "fail" or (full and v.state == "pass")]
    _bullets(console, [(_verdict_word(v), f"{escape(v.label)}: {escape(v.margin)}" +
                        ("" if v.advice in ("", "nothing to change") else f"; {escape(v.advice)}"))
                       for v in shown])
    _bullets(console, [("[yellow]not judged:[/]", escape(reason)) for reason in check.not_judged])
    console.print()


def _bullets(console, items) -> None:
    """(marker, text) lines with the text's wrapped lines indented under its first (rich markup)."""
    from rich.table import Table

    if not items:
        return
    grid = Table.grid(padding=(0, 1), pad_edge=False)
    grid.add_column(no_wrap=True)
    grid.add_column()
    for marker, text in items:
        grid.add_row(marker, text)
    console.print(grid)


# ---- the compact view's key figures ------------------------------------------------------------

KEY_FIGURES = ("inductance_factor_nH_per_turn2", "low_frequency_limit_Hz", "high_frequency_corner_3dB_Hz",
               "turns_ratio")
"""A_L, the low-frequency limit, the upper corner and the turns ratio (against the design)."""


def key_figures_table(analysis):
    """The figures a practitioner reads first, and the fit's quality, as a short rich table."""
    from rich.table import Table

    table = Table(title="Key figures", title_justify="left", show_edge=False, pad_edge=False)
    table.add_column("figure")
    table.add_column("value ± standard error", justify="right", no_wrap=True)
    table.add_column("note")
    figures = analysis.figures
    for name in KEY_FIGURES if figures is not None else ():
        if name not in figures:
            continue
        fig = figures[name]
        notes = []
        if name == "inductance_factor_nH_per_turn2" and _agreement_note(fig):
            notes.append(_agreement_note(fig))
        elif name == "low_frequency_limit_Hz" and fig.detail("set_by"):
            notes.append(f"set by the {fig.detail('set_by')}")
        elif name == "turns_ratio":
            notes += _ratio_notes(analysis, fig)
        if fig.value is None and fig.note:
            notes.append(fig.note)
        table.add_row(fig.label, _value_text(fig), escape(", ".join(notes)))
    table.add_row("fit quality", _grade_text(analysis.fit.quality), escape(analysis.fit.quality.summary()))
    return table
