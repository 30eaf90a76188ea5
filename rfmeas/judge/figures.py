"""Figures of merit of a fitted transformer, with propagated standard errors, and the design check.

Every figure is computed from the fitted circuit values by one function of the
parameter vector, so its standard error follows by first-order propagation
with the fit's covariance (rfmeas.fit.propagation, the routine rfmeas.fit.result
uses for the parameters). A figure that needs a parameter the fit could not determine gets
no standard error (or no value) and a note saying which.

Formulas:
- A_L = L/N² (each winding's open-circuit inductance and turn count);
- µe = L·le/(µ0·N²·Ae) with le, Ae from rfmeas.magnetics (IEC 60205 forms);
- reactance rule: lowest frequency where 2π·f·L ≥ factor·R, f = factor·R/(2π·L),
  primary against the source, secondary against the load (common practice);
- corners and return-loss band: rfmeas.model.response on the fitted model between
  the design's source and load resistances.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass

import numpy as np

from rfmeas.judge.design import DesignFacts, check_design, is_design
from rfmeas.magnetics import effective_permeability, geometry_from_table, nH_per_turn2_to
from rfmeas.model.params import TransformerParams
from rfmeas.fit.result import checked_stderr
from rfmeas.measurement.sweep import DEFAULT_REACTANCE_FACTOR, DEFAULT_RETURN_LOSS_DB
from rfmeas.model.response import band_response, minimum_return_loss_dB, open_circuit_voltage_ratio, \
    reactance_limit_Hz, return_loss_dB, self_resonance_Hz
from rfmeas.units import format_engineering as eng
from rfmeas.units import format_with_error

log = logging.getLogger(__name__)

DEFAULT_SOURCE_OHM = 50.0
_CAPACITANCES = ("C1_F", "C2_F", "C12_F")

# figure scalar -> (parameters without which it has no value, parameters without which it has no stderr)
_NEEDS = {
    "al_primary": (("L1_H",), ()),
    "al_secondary": (("L2_H",), ()),
    "mu_primary": (("L1_H",), ()),
    "mu_secondary": (("L2_H",), ()),
    "lf_primary": (("L1_H",), ()),
    "lf_secondary": (("L2_H",), ()),
    "al_mean": (("L1_H", "L2_H"), ()),
    "mu_mean": (("L1_H", "L2_H"), ()),
    "lf_max": (("L1_H", "L2_H"), ()),
    "ratio": (("L1_H", "L2_H"), ()),
    "ocv_ratio": (("L1_H", "L2_H"), ("k",)),
    "low_1dB": (("L1_H", "L2_H"), ("k",)),
    "low_3dB": (("L1_H", "L2_H"), ("k",)),
    "high_1dB": (("L1_H", "L2_H", "k"), _CAPACITANCES),
    "high_3dB": (("L1_H", "L2_H", "k"), _CAPACITANCES),
    "midband_loss": (("L1_H", "L2_H"), ("k", "R1_ohm", "R2_ohm", "Rc_ohm")),
    "rl_start": (("L1_H", "L2_H"), ("k",)),
    "rl_stop": (("L1_H", "L2_H", "k"), _CAPACITANCES),
    "min_rl": (("L1_H", "L2_H", "k"), _CAPACITANCES),
    "srf_primary": (("L1_H", "L2_H"), ("k",) + _CAPACITANCES),
    "srf_secondary": (("L1_H", "L2_H"), ("k",) + _CAPACITANCES),
}


@dataclass(frozen=True)
class Terminations:
    """What the figures are computed against: the design's, or the defaults (with a note)."""

    source_ohm: float
    load_ohm: float
    reactance_factor: float
    return_loss_dB: float
    lowest_Hz: float | None
    highest_Hz: float | None
    note: str

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def terminations_for(design, effective_ratio: float) -> Terminations:
    """The design's source and load, or 50 Ω and 50·n² (a matched load for the measured ratio)."""
    source = getattr(design, "source_impedance_ohm", None)
    load = getattr(design, "load_impedance_ohm", None)
    notes = []
    if source is None:
        source = DEFAULT_SOURCE_OHM
        notes.append(f"no design source impedance: {DEFAULT_SOURCE_OHM:g} Ω assumed")
    if load is None:
        load = source * effective_ratio**2
        notes.append(f"no design load impedance: {eng(load, 'Ω')} assumed "
                     f"({eng(source, 'Ω')}·n², matched to the measured ratio)")
    return Terminations(
        source_ohm=float(source), load_ohm=float(load),
        reactance_factor=float(getattr(design, "reactance_factor", None) or DEFAULT_REACTANCE_FACTOR),
        return_loss_dB=float(getattr(design, "return_loss_dB", None) or DEFAULT_RETURN_LOSS_DB),
        lowest_Hz=getattr(design, "lowest_frequency_Hz", None),
        highest_Hz=getattr(design, "highest_frequency_Hz", None),
        note="; ".join(notes))


def _nan(value):
    return math.nan if value is None else float(value)


def figure_scalars(params: TransformerParams, terms: Terminations, primary_turns, secondary_turns,
                   geometry) -> dict[str, float]:
    """Every scalar figure of `params` (NaN where it does not exist); a pure function of the circuit."""
    out = {}
    if primary_turns:
        out["al_primary"] = params.L1_H / primary_turns**2 * 1e9
        if geometry is not None:
            out["mu_primary"] = float(effective_permeability(params.L1_H, primary_turns, geometry))
    if secondary_turns:
        out["al_secondary"] = params.L2_H / secondary_turns**2 * 1e9
        if geometry is not None:
            out["mu_secondary"] = float(effective_permeability(params.L2_H, secondary_turns, geometry))
    out["lf_primary"] = float(reactance_limit_Hz(params.L1_H, terms.source_ohm, terms.reactance_factor))
    out["lf_secondary"] = float(reactance_limit_Hz(params.L2_H, terms.load_ohm, terms.reactance_factor))
    out["ratio"] = params.effective_turns_ratio
    band = band_response(params, terms.source_ohm, terms.load_ohm, terms.return_loss_dB)
    out["midband_Hz"] = band.midband_Hz
    out["midband_loss"] = -band.midband_gain_dB
    out["midband_rl"] = float(return_loss_dB(params, band.midband_Hz, terms.source_ohm, terms.load_ohm))
    out["ocv_ratio"] = float(open_circuit_voltage_ratio(params, band.midband_Hz))
    for key in ("low_1dB", "low_3dB", "high_1dB", "high_3dB"):
        out[key] = _nan(getattr(band, f"{key}_Hz"))
    out["rl_start"] = _nan(band.return_loss_start_Hz)
    out["rl_stop"] = _nan(band.return_loss_stop_Hz)
    out["best_rl"] = band.best_return_loss_dB
    out["evaluated_top_Hz"] = band.estimates.high_Hz * 100 if math.isfinite(band.estimates.high_Hz) \
        else band.estimates.magnetising_Hz * 1e8
    out["leakage_corner_Hz"] = band.estimates.leakage_Hz
    out["capacitance_corner_Hz"] = band.estimates.capacitance_Hz
    if terms.lowest_Hz and terms.highest_Hz:
        out["min_rl"], out["min_rl_at_Hz"] = minimum_return_loss_dB(
            params, terms.source_ohm, terms.load_ohm, terms.lowest_Hz, terms.highest_Hz)
    out["srf_primary"] = _nan(self_resonance_Hz(params, "primary"))
    out["srf_secondary"] = _nan(self_resonance_Hz(params, "secondary"))
    return out


def propagate(outcome, func) -> tuple[dict[str, float], dict[str, float | None]]:
    """Values of `func(params) -> dict` at the fit, and first-order standard errors from its covariance
    (rfmeas.fit.propagation, the one propagation routine)."""
    from rfmeas.fit.propagation import propagate_all

    done = propagate_all(outcome, func)
    return {k: p.value for k, p in done.items()}, {k: p.stderr for k, p in done.items()}


class _Builder:
    """Turns scalars into figure objects, applying the rules about undetermined parameters."""

    def __init__(self, values, stderr, held: dict):
        self.values, self.stderr, self.held = values, stderr, held

    def missing(self, key) -> tuple[list[str], list[str]]:
        requires, needs = _NEEDS.get(key, ((), ()))
        if key.startswith("srf") and all(c in self.held for c in _CAPACITANCES):
            requires = requires + _CAPACITANCES
        return [n for n in requires if n in self.held], [n for n in needs if n in self.held]

    def reason(self, names) -> str:
        reasons = sorted({self.held[n][1] for n in names})
        return f"needs {', '.join(names)}, not determined ({'; '.join(reasons)})"

    def obj(self, key, scale: float = 1.0, **extra) -> dict:
        value = self.values.get(key, math.nan)
        err = self.stderr.get(key)
        no_value, no_err = self.missing(key)
        d = {"value": None, "stderr": None}
        if no_value or not math.isfinite(value):
            if no_value:
                d["note"] = self.reason(no_value)
        else:
            d["value"] = value * scale
            d["stderr"] = None if (no_err or err is None) else abs(err * scale)
            if no_err:
                d["note"] = f"no standard error: {self.reason(no_err)}"
            else:  # never a bare confident number: 0, NaN or no standard error is said so
                d["stderr"], why = checked_stderr(d["value"], d["stderr"])
                if why:
                    d["stderr_note"] = why
        d.update(extra)
        return d


def _measured_range(measurement) -> tuple[float, float]:
    fs = [s.f_Hz for s in measurement.sweeps if s.f_Hz.size]
    return (min(float(f[0]) for f in fs), max(float(f[-1]) for f in fs)) if fs else (math.nan, math.nan)


def _mark_extrapolated(fig: dict, span: tuple[float, float]) -> dict:
    v = fig.get("value")
    if v is not None and math.isfinite(span[0]):
        inside = span[0] <= v <= span[1]
        fig["within_sweeps"] = inside
        if not inside:
            fig["note"] = (fig.get("note", "") + "; " if fig.get("note") else "") + \
                f"outside the swept {eng(span[0], 'Hz')}–{eng(span[1], 'Hz')}: extrapolated from the model"
    return fig


def _combined_key(prefix: str, primary_known: bool, secondary_known: bool, held: dict) -> str:
    """'<prefix>_mean' when both windings give the figure, else the one that does."""
    primary_known = primary_known and "L1_H" not in held
    secondary_known = secondary_known and "L2_H" not in held
    if primary_known and secondary_known:
        return f"{prefix}_mean"
    return f"{prefix}_secondary" if secondary_known else f"{prefix}_primary"


def compute_figures(measurement, result, cannot_judge: tuple[str, ...] = ()) -> tuple[dict, dict | None, list[str]]:
    """(figures, design_check, warnings) for a fitted measurement set; see docs/DESIGN.md 'JSON contract'.

    With reasons in `cannot_judge` (rfmeas.fit.checks.review_fit) the design check is not judged.
    """
    outcome = result.outcome
    design = measurement.design
    n1, n2 = measurement.primary_turns, measurement.secondary_turns
    geometry = geometry_from_table(measurement.core, measurement.manifest_path) if measurement.core else None
    terms = terminations_for(design, outcome.params.effective_turns_ratio)
    warnings: list[str] = []

    def scalars(params):
        d = figure_scalars(params, terms, n1, n2, geometry)
        if n1 and n2:
            d["al_mean"] = (d["al_primary"] + d["al_secondary"]) / 2
            if geometry is not None:
                d["mu_mean"] = (d["mu_primary"] + d["mu_secondary"]) / 2
        d["lf_max"] = max(d["lf_primary"], d["lf_secondary"])
        return d

    values, stderr = propagate(outcome, scalars)
    b = _Builder(values, stderr, dict(outcome.held))
    span = _measured_range(measurement)
    figures: dict = {}
    terms_note = {"note": terms.note} if terms.note else {}

    # inductance factor, both windings
    if n1 or n2:
        pri = b.obj("al_primary", turns=n1, inductance_H=outcome.params.L1_H) if n1 else None
        sec = b.obj("al_secondary", turns=n2, inductance_H=outcome.params.L2_H) if n2 else None
        key = _combined_key("al", bool(n1), bool(n2), outcome.held)
        al = b.obj(key, primary=pri, secondary=sec)
        agreement = None
        if pri and sec and pri["value"] and sec["value"]:
            agreement = 100.0 * (sec["value"] / pri["value"] - 1.0)
        al["agreement_percent"] = agreement
        tol = getattr(design, "ratio_tolerance_percent", 2.0) if design else 2.0
        # A_L goes as the square of the ratio error, hence twice the ratio tolerance
        al["agrees"] = None if agreement is None else abs(agreement) <= 2 * tol
        if al["agrees"] is False:
            warnings.append(
                f"A_L from the primary ({pri['value']:.4g} nH) and the secondary ({sec['value']:.4g} nH) "
                f"differ by {agreement:+.2g} %: the stated turns may be wrong or a winding does not sit "
                "fully on the core")
        for unit, name in (("uH/100", "uH_per_100_turns"), ("mH/1000", "mH_per_1000_turns")):
            conv = float(nH_per_turn2_to(1.0, unit))
            al[name] = {"value": None if al["value"] is None else al["value"] * conv,
                        "stderr": None if al["stderr"] is None else al["stderr"] * conv}
        figures["inductance_factor_nH_per_turn2"] = al
    else:
        figures["inductance_factor_nH_per_turn2"] = {"value": None, "stderr": None,
                                                     "note": "needs the turn counts ([transformer] turns)"}

    # effective permeability
    if geometry is not None and (n1 or n2):
        key = _combined_key("mu", bool(n1), bool(n2), outcome.held)
        figures["effective_permeability"] = b.obj(
            key, primary=b.obj("mu_primary") if n1 else None, secondary=b.obj("mu_secondary") if n2 else None,
            core={"shape": geometry.shape, "description": geometry.description,
                  "effective_area_mm2": geometry.effective_area_m2 * 1e6,
                  "effective_length_mm": geometry.effective_length_m * 1e3},
            note="low-frequency value, µe = L·le/(µ0·N²·Ae)")
    else:
        figures["effective_permeability"] = {
            "value": None, "stderr": None,
            "note": "needs the core geometry ([core]) and turn counts" if geometry is None else "needs turn counts"}

    # reactance rule
    lf_pri = b.obj("lf_primary", impedance_ohm=terms.source_ohm)
    lf_sec = b.obj("lf_secondary", impedance_ohm=terms.load_ohm)
    key = _combined_key("lf", True, True, outcome.held)
    if key == "lf_mean":
        key = "lf_max"
        set_by = "primary" if values["lf_primary"] >= values["lf_secondary"] else "secondary"
    else:
        set_by = key.removeprefix("lf_")
    lf = b.obj(key, set_by=set_by, primary=lf_pri, secondary=lf_sec,
               reactance_factor=terms.reactance_factor)
    if key != "lf_max":
        lf["note"] = f"from the {set_by} alone: the other winding's inductance is not determined"
    if terms.note:
        lf["note"] = (lf["note"] + "; " if lf.get("note") else "") + terms.note
    figures["low_frequency_limit_Hz"] = lf

    # band from the fitted model
    for key, name in (("low_1dB", "low_frequency_corner_1dB_Hz"), ("low_3dB", "low_frequency_corner_3dB_Hz"),
                      ("high_1dB", "high_frequency_corner_1dB_Hz"), ("high_3dB", "high_frequency_corner_3dB_Hz")):
        fig = b.obj(key, source_ohm=terms.source_ohm, load_ohm=terms.load_ohm)
        if fig["value"] is None and "note" not in fig:
            fig["note"] = "beyond the evaluated range"
        if terms.note:
            fig["note"] = (fig.get("note", "") + "; " if fig.get("note") else "") + terms.note
        figures[name] = _mark_extrapolated(fig, span)
    figures["midband_insertion_loss_dB"] = b.obj("midband_loss", frequency_Hz=values["midband_Hz"],
                                                 **terms_note)
    start, stop = b.obj("rl_start"), b.obj("rl_stop")
    rl_band = {"start_Hz": start["value"], "stop_Hz": stop["value"],
               "start_stderr_Hz": start["stderr"], "stop_stderr_Hz": stop["stderr"],
               "threshold_dB": terms.return_loss_dB, "best_return_loss_dB": values["best_rl"],
               "source_ohm": terms.source_ohm, "load_ohm": terms.load_ohm}
    if "note" in start or "note" in stop:
        rl_band["note"] = start.get("note") or stop.get("note")
    elif start["value"] is None and stop["value"] is None and values["best_rl"] < terms.return_loss_dB:
        rl_band["note"] = (f"the return loss never reaches {terms.return_loss_dB:g} dB "
                           f"(best {values['best_rl']:.3g} dB)")
    figures["return_loss_band"] = rl_band
    for winding in ("primary", "secondary"):
        fig = b.obj(f"srf_{winding}")
        if fig["value"] is None and "note" not in fig:
            fig["note"] = "no resonance found"
        figures[f"self_resonance_{winding}_Hz"] = _mark_extrapolated(fig, span)

    # turns ratio
    ratio = b.obj("ratio")
    n = values["ratio"]
    ratio.update(
        effective={"value": ratio["value"], "stderr": ratio["stderr"]},
        open_circuit_voltage_ratio=b.obj("ocv_ratio", frequency_Hz=values["midband_Hz"]),
        stated_ratio=(n2 / n1) if (n1 and n2) else None,
        nearest_secondary_turns=max(1, round(n1 * n)) if (n1 and ratio["value"]) else None,
        nearest_primary_turns=max(1, round(n2 / n)) if (n2 and ratio["value"]) else None,
        design_ratio=design.target_turns_ratio if design else None)
    if n1 and n2 and ratio["value"] and (ratio["nearest_secondary_turns"] != n2
                                         or ratio["nearest_primary_turns"] != n1):
        warnings.append(f"the windings act like {n1}:{ratio['nearest_secondary_turns']} "
                        f"(or {ratio['nearest_primary_turns']}:{n2}), not the stated {n1}:{n2}")
    figures["turns_ratio"] = ratio
    figures["terminations"] = terms.to_dict()

    design_check = None
    if is_design(design):
        facts = DesignFacts(
            effective_ratio=ratio["value"], primary_turns=n1, secondary_turns=n2,
            low_frequency_limit_Hz=figures["low_frequency_limit_Hz"]["value"],
            high_corner_3dB_Hz=figures["high_frequency_corner_3dB_Hz"]["value"],
            evaluated_top_Hz=values["evaluated_top_Hz"],
            high_limited_by="leakage" if values["leakage_corner_Hz"] <= values["capacitance_corner_Hz"]
            else "capacitance",
            midband_Hz=values["midband_Hz"], midband_return_loss_dB=values["midband_rl"],
            min_return_loss_dB=values.get("min_rl"), min_return_loss_at_Hz=values.get("min_rl_at_Hz"))
        design_check = check_design(facts, design, cannot_judge).to_dict()
    return figures, design_check, warnings


# ---- terminal presentation -------------------------------------------------------------------

def _value_text(fig: dict | None, unit: str = "", digits: int = 4) -> str:
    if not fig or fig.get("value") is None:
        return "—"
    err = fig.get("stderr")
    if not err:  # None or 0: no standard error, which the note explains
        return (eng(fig["value"], unit) if unit else f"{fig['value']:.{digits}g}") + " ± ?"
    if unit:
        return format_with_error(fig["value"], err, unit)
    return f"{fig['value']:.{digits}g} ± {err:.2g}"


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
    if not f:
        return []
    shared = f.get("terminations", {}).get("note", "")
    rows: list[tuple[str, str, str]] = []

    def row(label, fig, unit="", note=""):
        own = (fig or {}).get("note", "")
        why = [own] if note and own.startswith("no standard error") else []  # said even beside another note
        note = "; ".join(n for n in [note or own] + why + [(fig or {}).get("stderr_note", "")] if n)
        rows.append((label, _value_text(fig, unit), _plain_note(note, shared)))

    al = f.get("inductance_factor_nH_per_turn2", {})
    if al.get("value") is not None:
        agree = al.get("agreement_percent")
        row("A_L (nH/turn²)", al, "", "" if agree is None else
            f"windings agree to {agree:+.2g} %" + ("" if al.get("agrees") else " — check the turns"))
        for side in ("primary", "secondary"):
            sub = al.get(side)
            if sub and sub.get("value") is not None:
                row(f"  from the {side} ({sub['turns']} turns)", sub)
        row("  in µH per 100 turns", al["uH_per_100_turns"])
        row("  in mH per 1000 turns", al["mH_per_1000_turns"])
    else:
        row("A_L", al)
    row("effective permeability µe", f.get("effective_permeability"))
    lf = f.get("low_frequency_limit_Hz", {})
    row(f"reactance-rule limit (X ≥ {lf.get('reactance_factor', 4):g}·R)", lf, "Hz",
        f"set by the {lf.get('set_by')}; primary {_value_text(lf.get('primary'), 'Hz')}, "
        f"secondary {_value_text(lf.get('secondary'), 'Hz')}; {lf.get('note', '')}")
    for key, label in (("low_frequency_corner_3dB_Hz", "lower corner −3 dB"),
                       ("low_frequency_corner_1dB_Hz", "lower corner −1 dB"),
                       ("high_frequency_corner_1dB_Hz", "upper corner −1 dB"),
                       ("high_frequency_corner_3dB_Hz", "upper corner −3 dB")):
        row(label, f.get(key), "Hz")
    mid = f.get("midband_insertion_loss_dB", {})
    row("mid-band insertion loss (dB)", mid, "",
        f"at {eng(mid.get('frequency_Hz'), 'Hz')}" if mid.get("value") is not None else "")
    rl = f.get("return_loss_band", {})
    band = "—" if rl.get("start_Hz") is None and rl.get("stop_Hz") is None else \
        f"{eng(rl.get('start_Hz'), 'Hz')} – {eng(rl.get('stop_Hz'), 'Hz')}"
    rows.append((f"return loss ≥ {rl.get('threshold_dB', DEFAULT_RETURN_LOSS_DB):g} dB", band, _plain_note(rl.get("note", ""), shared)))
    row("self-resonance, primary (secondary open)", f.get("self_resonance_primary_Hz"), "Hz")
    row("self-resonance, secondary (primary open)", f.get("self_resonance_secondary_Hz"), "Hz")
    tr = f.get("turns_ratio", {})
    notes = []
    if tr.get("nearest_secondary_turns") is not None:
        notes.append(f"acts like {analysis.measurement.primary_turns}:{tr['nearest_secondary_turns']}")
    if tr.get("design_ratio"):
        notes.append(f"design 1:{tr['design_ratio']:.4g}")
    row("turns ratio √(L2/L1)", tr, "", ", ".join(notes))
    row("open-circuit voltage ratio", tr.get("open_circuit_voltage_ratio"))
    return rows


def figures_table(analysis):
    from rich.markup import escape
    from rich.table import Table

    table = Table(title="Figures", title_justify="left", show_edge=False, pad_edge=False)
    table.add_column("figure")
    table.add_column("value ± standard error", justify="right")
    table.add_column("note", overflow="fold")
    for label, value, note in figure_rows(analysis):
        table.add_row(label, value, escape(note))
    return table


def verdict_table(analysis):
    from rich.markup import escape
    from rich.table import Table

    check = analysis.design_check
    title = {"pass": "PASS", "fail": "FAIL"}.get(analysis.design_status, "NOT JUDGED")
    table = Table(title="Design check: " + title, title_justify="left", show_edge=False, pad_edge=False)
    for col in ("check", "verdict", "value", "limit", "margin", "what to change"):
        table.add_column(col, overflow="fold")
    for c in check["checks"]:
        verdict = {True: "[green]pass[/]", False: "[bold red]FAIL[/]"}.get(c["passed"], "[yellow]not judged[/]")
        unit = c["unit"]
        fmt = (lambda v: eng(v, unit)) if unit == "Hz" else (lambda v: f"{v:.4g}{' ' + unit if unit else ''}")
        table.add_row(escape(c["label"]), verdict, fmt(c["value"]), fmt(c["limit"]), escape(c["margin"]),
                      escape(c["advice"]))
    return table


def _render_figures(analysis, console) -> None:
    if analysis.figures:
        console.print(figures_table(analysis))
        note = analysis.figures.get("terminations", {}).get("note")
        if note:
            from rich.markup import escape

            console.print(f"[dim]{escape(note)}[/]")
        console.print()


def _render_verdicts(analysis, console) -> None:
    if analysis.design_check:
        from rich.markup import escape

        console.print(verdict_table(analysis))
        for reason in analysis.design_check.get("not_judged_reasons") or ():
            console.print(f"[yellow]not judged:[/] {escape(reason)}")
        console.print()


def terminal_renderers() -> list:
    """Extra sections for rfmeas.present.terminal.render_analysis: the figures, then the design verdicts."""
    return [_render_figures, _render_verdicts]
