"""Plausibility checks around the fit: does this look like a two-winding transformer?

`check_sweeps` runs before the fit on the measured sweeps alone; it names a
sweep that looks like a dead short, an open lead, a matched load, an
uncalibrated or wrong file, a sweep above self-resonance, a wrong frequency
unit, a swapped pair of files or an unconnected port 2. It raises FitError
only when no sweep is left that a fit could use. `check_fit` runs after the
fit and reads its quality figures: non-convergence, most sweeps missed, one
sweep fitted far worse than the others, a coupling or inductance pressed
against its range, and inductances that contradict the turn counts of the
manifest. Both return plain sentences, naming the sweep where there is one.
`review_fit` adds what the design check needs as data: whether the fitted
circuit looks like no two-winding transformer at all, and every reason the
design cannot be judged (that, a poor fit, a partial sweep).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rfmeas.errors import FitError, InputError
from rfmeas.fit.solver import BOUNDS
from rfmeas.fit.start import inductance_at_low_frequency
from rfmeas.fit.result import FitResult
from rfmeas.fit.rules import (EDGE_TOLERANCE_LOG, GOOD_MISFIT_RATIO, MISSED_RMS, RESIDUAL_OUTLIER_FACTOR,
                              RESIDUAL_OUTLIER_FLOOR, SYSTEMATIC_CORRELATION)
from rfmeas.measurement.sweep import MeasurementSet, Sweep
from rfmeas.model.termination import Termination

NOT_A_TRANSFORMER = "this does not look like a two-winding transformer"

# --- thresholds (S units unless named otherwise)

STANDARD_DISTANCE = 0.05
"""A one-port reading within this of S11 = −1 (or +1) looks like a short (or an open): |Z| below
about 1.3 Ω (or above about 2 kΩ) in a 50 Ω system, far outside what the sweep resolves of a
winding. VNA trace noise is about 1e-3 (common practice), so noise alone never gets this close
to a standard by accident and never leaves it either."""

WHOLE_BAND_FRACTION = 0.9
"""'Over the whole band' allows a few glitched points: at least this share of the points."""

PASSIVE_LIMIT = 1.05
"""|S| of a passive device is at most 1; calibration drift and noise of a small VNA leave a
few percent at worst (common practice). Beyond this the VNA was not calibrated or the file
is not what the manifest says."""

CAPACITIVE_FRACTION = 0.95
"""A winding whose reactance is negative at this share of the points is capacitive over the
whole sweep: the sweep starts above its self-resonance."""

LOWEST_PLAUSIBLE_Hz = 1.0
"""A sweep that ends below 1 Hz is no inductance measurement (LCR meters start at 20 Hz or so,
common practice)."""

HIGHEST_PLAUSIBLE_START_Hz = 10e9
HIGHEST_PLAUSIBLE_STOP_Hz = 100e9
"""A sweep that starts above 10 GHz or ends above 100 GHz is beyond any instrument used on wound
transformers (common practice); the usual cause is a file in Hz or MHz whose option line says GHz
or is missing (a missing option line means GHz)."""

SHORT_OPEN_RATIO_MAX = 0.5
"""The short-circuit inductance is L·(1 − k²) (JIS C 5602, via "Short-circuit inductance",
Wikipedia). A ratio above 0.5 means k below 0.7, rare for windings on one closed core (common
practice); a ratio at or above 1 is impossible for the same winding."""

TRANSMISSION_FLOOR = 0.03
"""A two-port sweep whose |S21| stays below this (−30 dB) at every point passes nothing: a
coupled winding passes far more somewhere in its band (common practice)."""

TURNS_RATIO_TOLERANCE = 0.15
"""√(L2/L1) differs from Ns/Np by a few percent on a closed core because of leakage and flux
outside the core (common practice); beyond 15 % the turn counts or the sweep labels are wrong."""


# --------------------------------------------------------------------------- before the fit


def review_sweeps(measurement: MeasurementSet) -> tuple[list[str], list[str]]:
    """(warnings about sweeps that do not look like what the manifest says, labels of the sweeps
    no fit can use); FitError if none is usable."""
    warnings: list[str] = []
    unusable: dict[str, list[str]] = {}   # reason -> labels of the sweeps it makes unusable
    for sweep in measurement.sweeps:
        notes, usable = _check_one(sweep)
        warnings.extend(f"{sweep.label}: {n}" for n in notes)
        if not usable:
            unusable.setdefault(notes[0], []).append(sweep.label)
    warnings.extend(_check_open_short_pairs(measurement.sweeps))
    labels = [label for group in unusable.values() for label in group]
    if measurement.sweeps and len(labels) == len(measurement.sweeps):
        path = measurement.manifest_path or measurement.sweeps[0].path
        reasons = "; ".join(f"{', '.join(group)}: {reason}" for reason, group in unusable.items())
        raise FitError(f"{NOT_A_TRANSFORMER}: {reasons}", path=path)
    return warnings, labels


def check_sweeps(measurement: MeasurementSet) -> list[str]:
    """The warnings of `review_sweeps`."""
    return review_sweeps(measurement)[0]


def _check_one(sweep: Sweep) -> tuple[list[str], bool]:
    """(plain-words findings, whether a fit can use the sweep at all) for one sweep."""
    f_Hz = sweep.f_Hz
    frequency_note = _frequency_range(f_Hz)
    if frequency_note:
        return [frequency_note], False
    s = sweep.measured()
    magnitude = np.abs(s)
    if np.median(magnitude) > PASSIVE_LIMIT:
        return [f"|S| is above {PASSIVE_LIMIT:g} at most points (up to {magnitude.max():.3g}): "
                "not a passive measurement; was the VNA calibrated, and is this the right file?"], False
    notes = []
    if np.any(magnitude > PASSIVE_LIMIT):
        share = float(np.mean(np.any(magnitude > PASSIVE_LIMIT, axis=1)))
        notes.append(f"|S| exceeds {PASSIVE_LIMIT:g} at {share:.0%} of the points (up to "
                     f"{magnitude.max():.3g}), which a passive device cannot do: check the calibration")
    if sweep.is_two_port:
        return notes + _two_port_notes(s), not _dead_transmission(s)
    s11 = sweep.equivalent_reflection()
    if _near(s11, -1.0):
        if sweep.termination.is_short:
            return ["looks like a dead short over the whole sweep: no leakage inductance shows; sweep "
                    "higher, or check that port 1 itself is not shorted"] + notes, False
        return [_SHORT_NOTE] + notes, False
    if _near(s11, 1.0):
        return [_OPEN_NOTE] + notes, False
    if not sweep.termination.is_load and _near(s11, 0.0):
        return [f"looks like a {sweep.z0_ohm[0]:g} Ω load, not a winding (S11 ≈ 0 over the whole sweep): "
                "is the transformer on port 1, and is the other winding really "
                f"{sweep.termination.describe()}?"] + notes, False
    z_ohm = sweep.impedance_ohm()
    # the message says the sweep starts above resonance: so must the data (its low end capacitive)
    if np.mean(np.imag(z_ohm) < 0) >= CAPACITIVE_FRACTION and np.median(np.imag(z_ohm[:3])) < 0:
        return [f"the winding is capacitive over the whole sweep ({f_Hz[0]:.3g}–{f_Hz[-1]:.3g} Hz): the "
                "sweep starts above its self-resonance, so its inductance cannot show; start the sweep "
                "lower"] + notes, False
    return notes, True


_SHORT_NOTE = ("looks like a short circuit, not a winding (S11 ≈ −1 over the whole sweep): "
               "shorted turn or wrong termination? (A sweep that ends far below where the winding's "
               "reactance reaches a few ohms reads the same.)")
_OPEN_NOTE = ("looks like an open circuit (S11 ≈ +1 over the whole sweep): broken or unsoldered lead? "
              "(A winding above about 2 kΩ over the whole sweep reads the same.)")


def _near(s11: np.ndarray, standard: float) -> bool:
    return bool(np.mean(np.abs(s11 - standard) < STANDARD_DISTANCE) >= WHOLE_BAND_FRACTION)


def _frequency_range(f_Hz: np.ndarray) -> str | None:
    start, stop = float(f_Hz[0]), float(f_Hz[-1])
    span = f"the sweep runs from {start:.3g} to {stop:.3g} Hz"
    if stop < LOWEST_PLAUSIBLE_Hz:
        return f"{span}, far below any inductance measurement: wrong frequency unit in the file's option line?"
    if start > HIGHEST_PLAUSIBLE_START_Hz or stop > HIGHEST_PLAUSIBLE_STOP_Hz:
        return (f"{span}, far above any transformer measurement: wrong frequency unit in the file's "
                "option line (a missing option line means GHz)?")
    return None


def _dead_transmission(s: np.ndarray) -> bool:
    return bool(np.all(np.abs(s[:, 1]) < TRANSMISSION_FLOOR))


def _two_port_notes(s: np.ndarray) -> list[str]:
    if not _dead_transmission(s):
        return []
    return [f"|S21| stays below {TRANSMISSION_FLOOR:g} ({20 * math.log10(TRANSMISSION_FLOOR):.0f} dB) over "
            f"the whole sweep (at most {np.abs(s[:, 1]).max():.2g}): nothing reaches port 2; "
            "is port 2 connected?"]


def _check_open_short_pairs(sweeps) -> list[str]:
    """A 'short' sweep must show far less low-frequency inductance than the 'open' sweep of its winding."""
    out = []
    for winding in ("primary", "secondary"):
        opens = _usable_inductances(sweeps, winding, Termination.open())
        shorts = _usable_inductances(sweeps, winding, Termination.short())
        if not opens or not shorts:
            continue
        l_open_H = float(np.median([l for _, l in opens]))
        for short, l_short_H in shorts:
            ratio = l_short_H / l_open_H
            if ratio <= SHORT_OPEN_RATIO_MAX:
                continue
            open_labels = ", ".join(s.label for s, _ in opens)
            if ratio >= 1.0:
                out.append(f"{short.label}: with the other winding shorted it measures {l_short_H:.3g} H, "
                           f"not less than {l_open_H:.3g} H with it open ({open_labels}): are the open and "
                           "short files swapped in the manifest, or does the open sweep start above the "
                           "winding's self-resonance?")
            else:
                k = math.sqrt(1.0 - ratio)
                out.append(f"{short.label}: with the other winding shorted it still measures {ratio:.0%} of "
                           f"the open-circuit inductance ({open_labels}), i.e. coupling k ≈ {k:.2f}: is the "
                           "short really on the other winding, or are the files swapped?")
    return out


def _usable_inductances(sweeps, winding: str, termination: Termination) -> list[tuple[Sweep, float]]:
    out = []
    for s in sweeps:
        if s.is_two_port or s.port1 != winding or s.termination != termination:
            continue
        if not _check_one(s)[1]:
            continue
        z_ohm = s.impedance_ohm()
        l_H = inductance_at_low_frequency(s.f_Hz, z_ohm)
        if l_H is not None:
            out.append((s, l_H))
    return out


# --------------------------------------------------------------------------- after the fit


@dataclass(frozen=True)
class FitReview:
    """What the checks after the fit found: warnings, and the verdicts' doubts as data.

    not_a_transformer   the reason, when the fitted circuit describes none of the sweeps
                        (None otherwise)
    cannot_judge        every reason no design verdict may be given (empty: judge)
    """

    warnings: tuple[str, ...]
    not_a_transformer: str | None
    cannot_judge: tuple[str, ...]

    def to_dict(self) -> dict:
        return {"warnings": list(self.warnings), "not_a_transformer": self.not_a_transformer,
                "cannot_judge": list(self.cannot_judge)}


def review_fit(measurement: MeasurementSet, result: FitResult) -> FitReview:
    """The checks after the fit; `measurement` holds the sweeps that were fitted (analyze leaves
    out unusable ones)."""
    missed = _missed_sweeps(result)
    warnings = []
    warnings.extend(_convergence(result))
    warnings.extend(missed)
    warnings.extend(_residual_outliers(result))  # sweeps found unusable were left out of this fit
    warnings.extend(_edges(result))
    warnings.extend(_turns_ratio(measurement, result))
    not_a_transformer = missed[0] if missed else None
    reasons = []
    if not_a_transformer:
        reasons.append(not_a_transformer)
    if result.quality.grade == "poor":
        ratio = result.quality.misfit_ratio
        reasons.append("the fit is poor: " + (f"the model misses the data by {ratio:.3g}× their own noise"
                                              if math.isfinite(ratio) else "its misfit is not a finite number"))
    partial = [s.label for s in measurement.sweeps if s.partial]
    if partial:
        reasons.append(f"{', '.join(partial)}: {'is an incomplete sweep' if len(partial) == 1 else 'are incomplete sweeps'} "
                       "(the file is marked as interrupted): measure it again to completion for a verdict")
    return FitReview(tuple(warnings), not_a_transformer, tuple(reasons))


def check_fit(measurement: MeasurementSet, result: FitResult) -> list[str]:
    """Warnings about a fit that should not be believed as it stands, naming the suspect sweep."""
    return list(review_fit(measurement, result).warnings)


def _worst_sweep(result: FitResult):
    return max(result.sweeps, key=lambda q: q.rms_residual) if result.sweeps else None


def _convergence(result: FitResult) -> list[str]:
    finite = math.isfinite(result.rms_residual) and math.isfinite(result.residual_variance)
    if result.converged and finite:
        return []
    if not finite:
        reason = "the residuals are not finite numbers"
    elif "maximum number of function evaluations" in result.message.lower():
        reason = f"the solver ran out of evaluations ({result.evaluations}) before settling"
    else:
        reason = f"the solver stopped: {result.message}"
    worst = _worst_sweep(result)
    hint = f"; the worst-fitted sweep is {worst.label} ({worst.rms_residual:.3g} rms)" if worst else ""
    return [f"no converged fit: {reason}{hint}. The numbers are the solver's last try, not a result; "
            "check the sweeps named in the other warnings"]


def _missed_sweeps(result: FitResult) -> list[str]:
    missed = [q for q in result.sweeps if q.rms_residual > MISSED_RMS]
    if not result.sweeps or len(missed) * 2 <= len(result.sweeps):
        return []
    worst = _worst_sweep(result)
    return [f"{NOT_A_TRANSFORMER} as the manifest describes it: the fitted circuit misses {len(missed)} of "
            f"{len(result.sweeps)} sweeps by more than {MISSED_RMS:g} rms (worst {worst.label}, "
            f"{worst.rms_residual:.3g}), so the numbers describe none of them; check the sweeps named above"]


def _residual_outliers(result: FitResult) -> list[str]:
    qualities = list(result.sweeps)
    if len(qualities) < 2:
        return []
    out = []
    for q in qualities:
        others = [o.rms_residual for o in qualities if o is not q]
        typical = float(np.median(others))
        if q.rms_residual <= RESIDUAL_OUTLIER_FLOOR or q.rms_residual <= RESIDUAL_OUTLIER_FACTOR * typical:
            continue
        times = q.rms_residual / typical if typical > 0 else math.inf
        # measured against its own noise, a sweep the model misses is suspect; one it fits is just noisy
        if q.misfit_ratio > GOOD_MISFIT_RATIO or not math.isfinite(q.misfit_ratio):
            pattern = ", following a pattern along frequency" if q.residual_correlation > SYSTEMATIC_CORRELATION \
                else ""
            out.append(f"{q.label}: suspect sweep: the fit misses it {times:.0f} times worse than the others "
                       f"({q.rms_residual:.3g} rms{pattern}): it may be swapped "
                       "with another file or mislabelled in the manifest (port1, port2, termination)")
        else:
            out.append(f"{q.label}: {times:.0f} times noisier than the other sweeps ({q.rms_residual:.3g} rms): "
                       "check the connection and the instrument settings for this sweep")
    return out


def _edges(result: FitResult) -> list[str]:
    out = []
    params = result.params
    # distance in log(1 − k), the scale on which the fit moves the coupling
    gap = 1.0 - min(params.k, 1 - 1e-12)
    lo_gap, hi_gap = (1.0 - v for v in BOUNDS["k"])
    if abs(math.log(gap / hi_gap)) < EDGE_TOLERANCE_LOG:
        out.append(f"the coupling k came out at the top of its range ({params.k:.7f}): the leakage is too "
                   "small to show in these sweeps; a short-circuit sweep to a higher frequency would show it")
    elif abs(math.log(gap / lo_gap)) < EDGE_TOLERANCE_LOG:
        out.append(f"the coupling k came out at the bottom of its range ({params.k:.2f}): the windings barely "
                   "couple; is the other winding connected, and are the sweeps labelled right?")
    for name, label in (("L1_H", "primary"), ("L2_H", "secondary")):
        value = getattr(params, name)
        low, high = BOUNDS[name]
        if abs(math.log(value / low)) < EDGE_TOLERANCE_LOG or abs(math.log(high / value)) < EDGE_TOLERANCE_LOG:
            out.append(f"the {label} inductance came out at the edge of its range ({value:.3g} H): no winding "
                       "measures that; the sweeps do not describe a transformer as the manifest says")
    return out


def _turns_ratio(measurement: MeasurementSet, result: FitResult) -> list[str]:
    np_turns, ns_turns = measurement.primary_turns, measurement.secondary_turns
    if not np_turns or not ns_turns:
        return []
    estimate = result.estimates.get("effective_turns_ratio")
    if estimate is None or not estimate.determined or not estimate.value:
        return []
    expected = ns_turns / np_turns
    measured = float(estimate.value)
    if abs(measured / expected - 1.0) <= TURNS_RATIO_TOLERANCE:
        return []
    return [f"the turn counts in the manifest say {_ratio_text(np_turns, ns_turns)} but the windings measure "
            f"1:{measured:.3g} (√(L2/L1)): a miscounted winding, or primary and secondary sweeps swapped?"]


def _ratio_text(np_turns: int, ns_turns: int) -> str:
    """'1:3' for 3:9; '5:14 (1:2.8)' when the primary is not one turn after reducing."""
    g = math.gcd(np_turns, ns_turns)
    a, b = np_turns // g, ns_turns // g
    return f"1:{b}" if a == 1 else f"{a}:{b} (1:{b / a:.3g})"


METHOD_ADVICE_GAIN = 3.0
"""Suggest a two-port method when it would resolve a reflection sweep this many times better."""


def method_warnings(measurement: MeasurementSet) -> list[str]:
    """For each one-port reflection sweep: a sentence when a two-port method would measure it better."""
    from rfmeas.model.methods import method_advice

    out = []
    for sweep in measurement.sweeps:
        if sweep.is_two_port or sweep.is_through_method:
            continue
        try:
            advice = method_advice(sweep.impedance_ohm(), sweep.z0_ohm[0])
        except InputError as exc:  # a dropped advice is said, with its reason
            out.append(f"{sweep.label}: no advice on the measurement method ({exc.message})")
            continue
        if advice.best != "reflection" and advice.gain_over_reflection >= METHOD_ADVICE_GAIN:
            out.append(f"{sweep.label}: {advice.sentence} (method = \"{advice.best}\" in the manifest)")
    return out
