"""Figures of merit of a fitted transformer, with propagated standard errors, and the design check.

Results are typed: each figure is a frozen `Figure` (value, standard error, unit,
label, and the note saying why a value or its error is missing), gathered in
`Figures` (named access, iteration in reading order) with the `ReturnLossBand` and
the `Terminations`; `to_dict()` gives the JSON contract's `figures` section.

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
from dataclasses import dataclass, field, replace


from rfmeas.judge.design import DesignCheck, DesignFacts, check_design, is_design
from rfmeas.magnetics import effective_permeability, geometry_from_table, nH_per_turn2_to
from rfmeas.model.params import TransformerParams
from rfmeas.fit.result import checked_stderr
from rfmeas.measurement.sweep import DEFAULT_REACTANCE_FACTOR, DEFAULT_RETURN_LOSS_DB
from rfmeas.model.response import band_response, minimum_return_loss_dB, open_circuit_voltage_ratio, \
    reactance_limit_Hz, return_loss_dB, self_resonance_Hz
from rfmeas.units import format_engineering as eng
from rfmeas.labels import FIGURE_DETAIL_LABELS, FIGURE_LABELS  # the one vocabulary
from rfmeas.labels import label as label_of, symbols

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


class UnknownFigureError(KeyError):
    """A figure name that no figure carries (a programming error, not bad input)."""

    def __str__(self) -> str:
        return str(self.args[0])


@dataclass(frozen=True)
class Figure:
    """One figure of merit: value and standard error in `unit`, or why either is missing.

    `name` is its JSON key, `label` what people read. `note` says why there is no
    value (or no standard error) and any caveat; `stderr_note` why a standard error
    was dropped (rfmeas.fit.result.checked_stderr). `details` are the further JSON
    fields in order; a Figure among them (a winding's own figure) is a sub-figure.
    """

    name: str
    label: str
    unit: str
    value: float | None
    stderr: float | None = None
    note: str = ""
    stderr_note: str = ""
    details: tuple[tuple[str, object], ...] = ()
    note_at: int | None = field(default=None, repr=False)  # a late note's place among the details in JSON

    def detail(self, key: str, default=None):
        """One of the further fields (a sub-figure such as 'primary', or a number such as 'turns')."""
        return next((v for k, v in self.details if k == key), default)

    def with_note(self, note: str) -> "Figure":
        """The figure with `note` added to its own (joined by '; ')."""
        if not note:
            return self
        return replace(self, note="; ".join(n for n in (self.note, note) if n),
                       note_at=self.note_at if self.note else len(self.details))

    def with_details(self, **details) -> "Figure":
        """The figure with further fields (an existing field keeps its place and takes the new value)."""
        own = dict(self.details)
        own.update(details)
        return replace(self, details=tuple(own.items()))

    def to_dict(self) -> dict:
        d: dict = {"value": self.value, "stderr": self.stderr}
        if self.note and self.note_at is None:
            d["note"] = self.note
        if self.stderr_note:
            d["stderr_note"] = self.stderr_note
        for i, (key, v) in enumerate(self.details):
            if self.note and i == self.note_at:
                d["note"] = self.note
            d[key] = v.to_dict() if isinstance(v, Figure) else v
        if self.note and self.note_at is not None and self.note_at >= len(self.details):
            d["note"] = self.note
        return d


@dataclass(frozen=True)
class ReturnLossBand:
    """Where the return loss at the primary stays at or above `threshold_dB` (edges as Figures)."""

    start: Figure
    stop: Figure
    threshold_dB: float
    best_return_loss_dB: float
    source_ohm: float
    load_ohm: float
    note: str = ""

    def to_dict(self) -> dict:
        d = {"start_Hz": self.start.value, "stop_Hz": self.stop.value,
             "start_stderr_Hz": self.start.stderr, "stop_stderr_Hz": self.stop.stderr,
             "threshold_dB": self.threshold_dB, "best_return_loss_dB": self.best_return_loss_dB,
             "source_ohm": self.source_ohm, "load_ohm": self.load_ohm}
        if self.note:
            d["note"] = self.note
        return d


# the JSON contract's order of the figures section (docs/DESIGN.md); a figure added later follows them
_JSON_ORDER = ("inductance_factor_nH_per_turn2", "effective_permeability", "low_frequency_limit_Hz",
               "low_frequency_corner_1dB_Hz", "low_frequency_corner_3dB_Hz", "high_frequency_corner_1dB_Hz",
               "high_frequency_corner_3dB_Hz", "midband_insertion_loss_dB", "return_loss_band",
               "self_resonance_primary_Hz", "self_resonance_secondary_Hz", "turns_ratio", "terminations")


def _json_place(name: str) -> int:
    return _JSON_ORDER.index(name) if name in _JSON_ORDER else len(_JSON_ORDER)


@dataclass(frozen=True)
class Figures:
    """Every figure of one analysis: named access (``figures["turns_ratio"]``), iteration in the
    order people read them, the return-loss band and the terminations the figures assume."""

    figures: tuple[Figure, ...]
    return_loss_band: ReturnLossBand
    terminations: Terminations

    def __post_init__(self):
        names = [f.name for f in self.figures]
        unknown = [n for n in names if n not in FIGURE_LABELS]
        if unknown or len(set(names)) != len(names):
            raise ValueError(f"figures must be distinct known figures, not {names}")

    def __getitem__(self, name: str) -> Figure:
        for fig in self.figures:
            if fig.name == name:
                return fig
        raise UnknownFigureError(f"no figure named {name!r}; the figures are {', '.join(self.names)}"
                                 + (" (the return-loss band and the terminations are attributes)"
                                    if name in ("return_loss_band", "terminations") else ""))

    def __contains__(self, name) -> bool:
        return any(f.name == name for f in self.figures)

    def __iter__(self):
        order = list(FIGURE_LABELS)
        return iter(sorted(self.figures, key=lambda f: order.index(f.name)))

    def __len__(self) -> int:
        return len(self.figures)

    @property
    def names(self) -> list[str]:
        return [f.name for f in self]

    def to_dict(self) -> dict:
        parts = {f.name: f.to_dict() for f in self.figures}
        parts["return_loss_band"] = self.return_loss_band.to_dict()
        parts["terminations"] = self.terminations.to_dict()
        return {key: parts[key] for key in sorted(parts, key=_json_place)}


class _Builder:
    """Turns scalars into Figures, applying the rules about undetermined parameters."""

    def __init__(self, values, stderr, held: dict):
        self.values, self.stderr, self.held = values, stderr, held

    def missing(self, key) -> tuple[list[str], list[str]]:
        requires, needs = _NEEDS.get(key, ((), ()))
        if key.startswith("srf") and all(c in self.held for c in _CAPACITANCES):
            requires = requires + _CAPACITANCES
        return [n for n in requires if n in self.held], [n for n in needs if n in self.held]

    def reason(self, names) -> str:
        reasons = sorted({self.held[n][1] for n in names})
        return f"needs {symbols(names)}, not determined ({'; '.join(reasons)})"

    def obj(self, key, name: str, label: str = "", unit: str = "", scale: float = 1.0, **extra) -> Figure:
        """The Figure of scalar `key` as `name`; `extra` become its further fields (a 'note' there
        replaces the figure's own)."""
        if name in FIGURE_LABELS:
            label, unit = FIGURE_LABELS[name]
        value = self.values.get(key, math.nan)
        err = self.stderr.get(key)
        no_value, no_err = self.missing(key)
        note, stderr_note, shown, shown_err = "", "", None, None
        if no_value or not math.isfinite(value):
            if no_value:
                note = self.reason(no_value)
        else:
            shown = value * scale
            shown_err = None if (no_err or err is None) else abs(err * scale)
            if no_err:
                note = f"no standard error: {self.reason(no_err)}"
            else:  # never a bare confident number: 0, NaN or no standard error is said so
                shown_err, stderr_note = checked_stderr(shown, shown_err)
                stderr_note = stderr_note or ""
        late = "note" in extra and not note  # a note given here follows the further fields
        note = extra.pop("note", note)
        return Figure(name, label, unit, shown, shown_err, note, stderr_note, tuple(extra.items()),
                      len(extra) if late else None)


def _missing(name: str, note: str) -> Figure:
    label, unit = FIGURE_LABELS[name]
    return Figure(name, label, unit, None, None, note)


def _measured_range(measurement) -> tuple[float, float]:
    fs = [s.f_Hz for s in measurement.sweeps if s.f_Hz.size]
    return (min(float(f[0]) for f in fs), max(float(f[-1]) for f in fs)) if fs else (math.nan, math.nan)


def _mark_extrapolated(fig: Figure, span: tuple[float, float]) -> Figure:
    v = fig.value
    if v is not None and math.isfinite(span[0]):
        inside = span[0] <= v <= span[1]
        fig = fig.with_details(within_sweeps=inside)
        if not inside:
            fig = fig.with_note(f"outside the swept {eng(span[0], 'Hz')}–{eng(span[1], 'Hz')}: "
                                "extrapolated from the model")
    return fig


def _combined_key(prefix: str, primary_known: bool, secondary_known: bool, held: dict) -> str:
    """'<prefix>_mean' when both windings give the figure, else the one that does."""
    primary_known = primary_known and "L1_H" not in held
    secondary_known = secondary_known and "L2_H" not in held
    if primary_known and secondary_known:
        return f"{prefix}_mean"
    return f"{prefix}_secondary" if secondary_known else f"{prefix}_primary"


READINGS_AGREEMENT_PERCENT = 5.0
"""An LCR reading of a winding and the sweeps' fit of it should agree to a few per cent (common
practice); beyond this (and three of the fit's standard errors) a warning says so."""


def _readings_figures(measurement, from_fit: dict, warnings: list) -> dict:
    """A_L from each winding's LCR readings ([[reading]]), beside the sweeps' A_L of that winding.

    A_L = Ls/N² of the lowest-frequency reading (the meter's own accuracy is not known here:
    no standard error).
    """
    turns = {"primary": measurement.primary_turns, "secondary": measurement.secondary_turns}
    out = {}
    for reading in measurement.readings:
        n = turns[reading.winding]
        key = f"readings_{reading.winding}"
        label, unit = FIGURE_DETAIL_LABELS[key]
        if not n:
            out[key] = Figure(key, label, unit, None, None, f"needs the {reading.winding}'s turns")
            continue
        value = reading.inductance_H / n**2 * 1e9
        fit = from_fit.get(reading.winding)
        difference = None
        if fit is not None and fit.value:
            difference = 100.0 * (value / fit.value - 1.0)
            allowed = max(READINGS_AGREEMENT_PERCENT, 300.0 * (fit.stderr or 0.0) / fit.value)
            if abs(difference) > allowed:
                warnings.append(
                    f"A_L of the {reading.winding} from the LCR readings ({value:.4g} nH at "
                    f"{reading.frequency_Hz:g} Hz) and from the sweeps ({fit.value:.4g} nH) differ by "
                    f"{difference:+.2g} %: check the meter's lead compensation, the reading's frequency "
                    "(the core's µ may change between them) and the turns")
        out[key] = Figure(key, label, unit, value, None,
                          "no standard error: the meter's accuracy is not known to rfmeas",
                          details=(("turns", n), ("frequency_Hz", reading.frequency_Hz),
                                   ("inductance_H", reading.inductance_H), ("fit_difference_percent", difference),
                                   ("file", reading.label)))
    return out


def compute_figures(measurement, result, cannot_judge: tuple[str, ...] = ()) \
        -> tuple[Figures, DesignCheck | None, list[str]]:
    """(figures, design check, warnings) for a fitted measurement set; see docs/DESIGN.md 'JSON contract'.

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
    figures: list[Figure] = []

    # inductance factor, both windings
    name = "inductance_factor_nH_per_turn2"
    if n1 or n2:
        pri = b.obj("al_primary", "primary", "from the primary", "nH/turn²", turns=n1,
                    inductance_H=outcome.params.L1_H) if n1 else None
        sec = b.obj("al_secondary", "secondary", "from the secondary", "nH/turn²", turns=n2,
                    inductance_H=outcome.params.L2_H) if n2 else None
        al = b.obj(_combined_key("al", bool(n1), bool(n2), outcome.held), name, primary=pri, secondary=sec)
        agreement = None
        if pri and sec and pri.value and sec.value:
            agreement = 100.0 * (sec.value / pri.value - 1.0)
        tol = getattr(design, "ratio_tolerance_percent", 2.0) if design else 2.0
        # A_L goes as the square of the ratio error, hence twice the ratio tolerance
        agrees = None if agreement is None else abs(agreement) <= 2 * tol
        if agrees is False:
            warnings.append(
                f"A_L from the primary ({pri.value:.4g} nH) and the secondary ({sec.value:.4g} nH) "
                f"differ by {agreement:+.2g} %: the stated turns may be wrong or a winding does not sit "
                "fully on the core")
        scaled = {}
        for key in ("uH_per_100_turns", "mH_per_1000_turns"):
            label, unit = FIGURE_DETAIL_LABELS[key]
            conv = float(nH_per_turn2_to(1.0, unit))
            scaled[key] = Figure(key, label, unit, None if al.value is None else al.value * conv,
                                 None if al.stderr is None else al.stderr * conv)
        from_readings = _readings_figures(measurement, {"primary": pri, "secondary": sec}, warnings)
        figures.append(al.with_details(agreement_percent=agreement, agrees=agrees, **scaled, **from_readings))
    else:
        figures.append(_missing(name, "needs the turn counts ([transformer] turns)"))

    # effective permeability
    name = "effective_permeability"
    if geometry is not None and (n1 or n2):
        key = _combined_key("mu", bool(n1), bool(n2), outcome.held)
        figures.append(b.obj(
            key, name, primary=b.obj("mu_primary", "primary", "from the primary") if n1 else None,
            secondary=b.obj("mu_secondary", "secondary", "from the secondary") if n2 else None,
            core={"shape": geometry.shape, "description": geometry.description,
                  "effective_area_mm2": geometry.effective_area_m2 * 1e6,
                  "effective_length_mm": geometry.effective_length_m * 1e3},
            note="low-frequency value, µe = L·le/(µ0·N²·Ae)"))
    else:
        figures.append(_missing(name, "needs the core geometry ([core]) and turn counts" if geometry is None
                                else "needs turn counts"))

    # reactance rule
    lf_pri = b.obj("lf_primary", "primary", "from the primary", "Hz", impedance_ohm=terms.source_ohm)
    lf_sec = b.obj("lf_secondary", "secondary", "from the secondary", "Hz", impedance_ohm=terms.load_ohm)
    key = _combined_key("lf", True, True, outcome.held)
    if key == "lf_mean":
        key = "lf_max"
        set_by = "primary" if values["lf_primary"] >= values["lf_secondary"] else "secondary"
    else:
        set_by = key.removeprefix("lf_")
    lf = b.obj(key, "low_frequency_limit_Hz", set_by=set_by, primary=lf_pri, secondary=lf_sec,
               reactance_factor=terms.reactance_factor)
    if key != "lf_max":
        alone = f"from the {set_by} alone: the other winding's inductance is not determined"
        lf = replace(lf, note=alone) if lf.note else lf.with_note(alone)
    figures.append(lf.with_note(terms.note))

    # band from the fitted model
    for key, name in (("low_1dB", "low_frequency_corner_1dB_Hz"), ("low_3dB", "low_frequency_corner_3dB_Hz"),
                      ("high_1dB", "high_frequency_corner_1dB_Hz"), ("high_3dB", "high_frequency_corner_3dB_Hz")):
        fig = b.obj(key, name, source_ohm=terms.source_ohm, load_ohm=terms.load_ohm)
        if fig.value is None and not fig.note:
            fig = fig.with_note("beyond the evaluated range")
        figures.append(_mark_extrapolated(fig.with_note(terms.note), span))
    figures.append(b.obj("midband_loss", "midband_insertion_loss_dB", frequency_Hz=values["midband_Hz"],
                         **({"note": terms.note} if terms.note else {})))
    start = b.obj("rl_start", "start", "return loss band start", "Hz")
    stop = b.obj("rl_stop", "stop", "return loss band stop", "Hz")
    rl_note = start.note or stop.note
    if not rl_note and start.value is None and stop.value is None and values["best_rl"] < terms.return_loss_dB:
        rl_note = (f"the return loss never reaches {terms.return_loss_dB:g} dB "
                   f"(best {values['best_rl']:.3g} dB)")
    rl_band = ReturnLossBand(start, stop, terms.return_loss_dB, values["best_rl"], terms.source_ohm,
                             terms.load_ohm, rl_note)
    for winding in ("primary", "secondary"):
        fig = b.obj(f"srf_{winding}", f"self_resonance_{winding}_Hz")
        if fig.value is None and not fig.note:
            fig = fig.with_note("no resonance found")
        figures.append(_mark_extrapolated(fig, span))

    # turns ratio
    ratio = b.obj("ratio", "turns_ratio")
    n = values["ratio"]
    nearest_secondary = max(1, round(n1 * n)) if (n1 and ratio.value) else None
    nearest_primary = max(1, round(n2 / n)) if (n2 and ratio.value) else None
    ratio = ratio.with_details(
        effective=Figure("effective", "effective turns ratio", "", ratio.value, ratio.stderr),
        open_circuit_voltage_ratio=b.obj("ocv_ratio", "open_circuit_voltage_ratio", label_of("open_circuit_voltage_ratio"),
                                         frequency_Hz=values["midband_Hz"]),
        stated_ratio=(n2 / n1) if (n1 and n2) else None,
        nearest_secondary_turns=nearest_secondary, nearest_primary_turns=nearest_primary,
        design_ratio=design.target_turns_ratio if design else None)
    if n1 and n2 and ratio.value and (nearest_secondary != n2 or nearest_primary != n1):
        warnings.append(f"the windings act like {n1}:{nearest_secondary} "
                        f"(or {nearest_primary}:{n2}), not the stated {n1}:{n2}")
    figures.append(ratio)
    result_figures = Figures(tuple(figures), rl_band, terms)

    design_check = None
    if is_design(design):
        facts = DesignFacts(
            effective_ratio=ratio.value, primary_turns=n1, secondary_turns=n2,
            low_frequency_limit_Hz=result_figures["low_frequency_limit_Hz"].value,
            high_corner_3dB_Hz=result_figures["high_frequency_corner_3dB_Hz"].value,
            evaluated_top_Hz=values["evaluated_top_Hz"],
            high_limited_by="leakage" if values["leakage_corner_Hz"] <= values["capacitance_corner_Hz"]
            else "capacitance",
            midband_Hz=values["midband_Hz"], midband_return_loss_dB=values["midband_rl"],
            min_return_loss_dB=values.get("min_rl"), min_return_loss_at_Hz=values.get("min_rl_at_Hz"))
        design_check = check_design(facts, design, cannot_judge)
    return result_figures, design_check, warnings
