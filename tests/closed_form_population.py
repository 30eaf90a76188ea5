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
primary inductance of the coupled pair, a model the fit does not contain,
evaluated from the coupled-inductor Z matrix; checked against scikit-rf's
circuit solver in tests/test_fit_robust.py).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fitting_helpers import add_vna_noise, sweep_from_s
from reference import OnePort, TwoPort, four_sweeps, model_response
from rfmeas.model.params import TransformerParams
from rfmeas.sweep import MeasurementSet


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


def whole_primary_y(params: TransformerParams, f_Hz):
    """Y elements with Rc across the whole primary inductance of the coupled pair.

    Coupled inductors L1, L2, M (Z = jω[[L1, M], [M, L2]]), Rc from the inner
    primary node to ground, R1 and R2 in series outside, C1, C2, C12 at the
    terminals (topology as in rfmeas.model.circuit otherwise).
    """
    w = 2 * np.pi * np.asarray(f_Hz, float)
    jw = 1j * w
    L1, L2, k = params.L1_H, params.L2_H, params.k
    M = params.polarity * k * math.sqrt(L1 * L2)
    det = jw * jw * (L1 * L2 - M * M)
    # inverse of the inductance Z matrix, plus Rc on the primary node
    a11 = jw * L2 / det + 1.0 / params.Rc_ohm
    a12 = -jw * M / det
    a22 = jw * L1 / det
    dy = a11 * a22 - a12 * a12
    z11 = a22 / dy + params.R1_ohm
    z22 = a11 / dy + params.R2_ohm
    z12 = -a12 / dy
    dz = z11 * z22 - z12 * z12
    c1, c2, c12 = params.C1_F, params.C2_F, params.C12_F
    y11 = z22 / dz + jw * (c1 + c12)
    y22 = z11 / dz + jw * (c2 + c12)
    y12 = -z12 / dz - jw * c12
    return y11, y12, y22


def whole_primary_response(params: TransformerParams, f_Hz, sweep) -> np.ndarray:
    from rfmeas.model.circuit import (driving_point_admittance, pack_s, reflection_from_admittance,
                                      s_from_y, termination_admittance)

    y11, y12, y22 = whole_primary_y(params, f_Hz)
    if sweep.port1 == "secondary":
        y11, y22 = y22, y11
    if isinstance(sweep, OnePort):
        yin = driving_point_admittance(y11, y12, y22, termination_admittance(sweep.termination))
        return reflection_from_admittance(yin, sweep.z0_ohm)
    return pack_s(*s_from_y(y11, y12, y22, sweep.z0_port1_ohm, sweep.z0_port2_ohm))


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
