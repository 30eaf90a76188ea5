"""A quick random population of plausible transformers, simulated in closed form.

Ranges follow issue 12's description of plausible hand-wound units (drawn
log-uniformly): L1 2 µH–2 mH; turns ratio √(L2/L1) 1:4 to 5:1 both ways;
1 − k 5e-4–5e-2; R1 0.01–1 Ω and R2 scaled with the ratio; C1, C2 1–20 pF,
C12 0.5–20 pF; core-loss corner Rc/(2π·Lm) 0.3–30 MHz; sweeps from 10, 50 or
100 kHz to 30, 50 or 100 MHz with 401–1601 points, log or linear; complex noise
3e-4–3e-3 per component; forward-only thru.

Two core-loss placements: "branch" (Rc across the magnetising branch, the
fit's own model, evaluated with rfmeas.model, which agrees with ngspice to
1e-12 in tests/test_model_reference.py) and "whole" (Rc across the whole
primary inductance of the coupled pair, which the fit's usual model cannot
represent; evaluated by rfmeas.model with core_loss="primary", which agrees
with ngspice in tests/test_fit_robust.py).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from fitting_helpers import add_vna_noise, sweep_from_s
from reference import OnePort, TwoPort, four_sweeps, model_response
from rfmeas.model.params import TransformerParams
from rfmeas.measurement.sweep import MeasurementSet


@dataclass(frozen=True)
class Case:
    params: TransformerParams
    placement: str          # "branch" or "whole"
    f_Hz: np.ndarray
    sigma: float
    measurement: MeasurementSet


def _log_uniform(rng, lo, hi):
    return float(math.exp(rng.uniform(math.log(lo), math.log(hi))))


def random_params(rng) -> TransformerParams:
    L1 = _log_uniform(rng, 2e-6, 2e-3)
    n = _log_uniform(rng, 0.25, 5.0) if rng.random() < 0.5 else 1.0 / _log_uniform(rng, 0.25, 5.0)
    n = min(max(n, 0.2), 5.0)
    L2 = L1 * n * n
    k = 1.0 - _log_uniform(rng, 5e-4, 5e-2)
    R1 = _log_uniform(rng, 0.01, 1.0)
    R2 = R1 * n * _log_uniform(rng, 0.5, 2.0)
    fc = _log_uniform(rng, 0.3e6, 30e6)
    Rc = 2 * math.pi * k * L1 * fc
    return TransformerParams(L1_H=L1, L2_H=L2, k=k, R1_ohm=R1, R2_ohm=R2, Rc_ohm=Rc,
                             C1_F=_log_uniform(rng, 1e-12, 20e-12), C2_F=_log_uniform(rng, 1e-12, 20e-12),
                             C12_F=_log_uniform(rng, 0.5e-12, 20e-12), polarity=1)


def random_grid(rng) -> np.ndarray:
    start = float(rng.choice([10e3, 50e3, 100e3]))
    stop = float(rng.choice([30e6, 50e6, 100e6]))
    points = int(rng.integers(401, 1602))
    if rng.random() < 0.5:
        return np.logspace(math.log10(start), math.log10(stop), points)
    return np.linspace(start, stop, points)


def whole_primary_response(params: TransformerParams, f_Hz, sweep) -> np.ndarray:
    """The sweep with Rc across the whole primary inductance (rfmeas.model's "primary"
    placement, checked against ngspice in tests/test_fit_robust.py)."""
    return model_response(replace(params, core_loss="primary"), f_Hz, sweep)


def make_case(rng, placement: str = "branch", sweeps=None) -> Case:
    params = random_params(rng)
    f = random_grid(rng)
    sigma = _log_uniform(rng, 3e-4, 3e-3)
    sweeps = sweeps or four_sweeps()
    simulate = model_response if placement == "branch" else whole_primary_response
    out = []
    for name, d in sweeps.items():
        s = add_vna_noise(simulate(params, f, d), sigma, rng)
        out.append(sweep_from_s(name, d, f, s, forward_only=isinstance(d, TwoPort)))
    return Case(params, placement, f, sigma, MeasurementSet(name="random unit", sweeps=tuple(out)))


def sweep_set(names) -> dict:
    """A subset of the usual four sweeps by name."""
    return {n: d for n, d in four_sweeps().items() if n in names}


def population(seed: int, count: int, placement: str = "branch", sweeps=None) -> list[Case]:
    rng = np.random.default_rng(seed)
    return [make_case(rng, placement, sweeps) for _ in range(count)]


KEY_TOLERANCES = {
    "primary_inductance_H": 0.01, "secondary_inductance_H": 0.01,
    "leakage_inductance_H": 0.03, "effective_turns_ratio": 0.005,
}
CAPACITANCE_KEYS = ("primary_capacitance_F", "secondary_capacitance_F", "interwinding_capacitance_F")


def true_values(p: TransformerParams) -> dict:
    return {
        "primary_inductance_H": p.L1_H, "secondary_inductance_H": p.L2_H,
        "leakage_inductance_H": p.leakage_inductance_H, "effective_turns_ratio": p.effective_turns_ratio,
        "coupling_coefficient": p.k, "primary_capacitance_F": p.C1_F,
        "secondary_capacitance_F": p.C2_F, "interwinding_capacitance_F": p.C12_F,
    }
