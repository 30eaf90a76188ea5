"""Each sweep predicts its own measured S elements (Sweep.predict), and the fit uses that same model.

Checked against scikit-rf's circuit solver (skrf.circuit.Circuit, tests/reference) for every
kind of sweep: one-port reflection with each termination, the series- and shunt-through
methods, full two-port and forward-only two-port files. Then: the fit's stacked evaluation
(SweepProblem.predict, shared grids, thinned points) gives the same numbers, and on the sample
sets the model a plot draws is exactly the one the fit compared with the data.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import skrf as rf
from skrf.circuit import Circuit

from rfmeas.analysis import analyze_manifest
from rfmeas.fit.solver import SweepProblem
from rfmeas.measurement.manifest import load_manifest
from rfmeas.measurement.sweep import Sweep
from rfmeas.model.params import TransformerParams
from rfmeas.present.plots.sweeps import model_sweeps
from tests.reference import OnePort, TwoPort
from tests.reference.skrf_circuit import simulate_skrf

ROOT = Path(__file__).resolve().parents[1]
F_HZ = np.geomspace(1e4, 3e8, 41)
RTOL, ATOL = 1e-6, 1e-10  # as tests/test_model_reference.py: two solvers of one network
PF = 1e-12
PARAMS = {
    "1:3 lossy": TransformerParams(30e-6, 270e-6, 0.999, R1_ohm=0.05, R2_ohm=0.25, Rc_ohm=1500.0,
                                   C1_F=3 * PF, C2_F=6 * PF, C12_F=3 * PF),
    "4:1 lossless": TransformerParams(16e-6, 1e-6, 0.99, R1_ohm=0.2, R2_ohm=0.02, C1_F=4 * PF, C2_F=PF,
                                      C12_F=2 * PF),
}


def _network(ports: int, z0=50.0) -> rf.Network:
    freq = rf.Frequency.from_f(F_HZ, unit="Hz")
    return rf.Network(frequency=freq, s=np.zeros((F_HZ.size, ports, ports), complex), z0=z0)


def _winding_impedance(params, port1, termination):
    # reference: the winding impedance from scikit-rf's one-port reflection, Z = z0 (1 + Γ)/(1 − Γ)
    g = simulate_skrf(params, F_HZ, OnePort(port1, termination, 50.0))
    return 50.0 * (1 + g) / (1 - g)


def _through_s21(method, z):
    # reference: scikit-rf's two-port of one series impedance or one shunt admittance, 50-ohm ports
    freq = rf.Frequency.from_f(F_HZ, unit="Hz")
    if method == "series-through":
        element = Circuit.SeriesImpedance(freq, z, "z", 50.0)
    else:
        element = Circuit.ShuntAdmittance(freq, 1.0 / z, "y", 50.0)
    return element.s[:, 1, 0]


ONE_PORT = [(port1, term, method) for port1 in ("primary", "secondary") for term in ("open", "short", 200.0)
            for method in ("reflection", "series-through", "shunt-through")]


@pytest.mark.parametrize("name", PARAMS)
@pytest.mark.parametrize(("port1", "termination", "method"), ONE_PORT)
def test_one_port_sweeps_match_skrf(name, port1, termination, method):
    params = PARAMS[name]
    sweep = Sweep(_network(1 if method == "reflection" else 2), port1, termination, method=method)
    got = sweep.predict(params)
    assert got.shape == (F_HZ.size, 1)
    if method == "reflection":
        expected = simulate_skrf(params, F_HZ, OnePort(port1, termination, 50.0))
    else:
        expected = _through_s21(method, _winding_impedance(params, port1, termination))
    np.testing.assert_allclose(got[:, 0], expected, rtol=RTOL, atol=ATOL)


@pytest.mark.parametrize("name", PARAMS)
@pytest.mark.parametrize("port1", ["primary", "secondary"])
@pytest.mark.parametrize("columns", ["full", "forward-only", "S12 unmeasured"])
def test_two_port_sweeps_match_skrf(name, port1, columns):
    params = PARAMS[name]
    other = "secondary" if port1 == "primary" else "primary"
    sweep = Sweep(_network(2, z0=[50.0, 75.0]), port1, None, port2=other,
                  forward_only=columns == "forward-only",
                  unmeasured=("S12",) if columns == "S12 unmeasured" else ())
    got = sweep.predict(params)
    s = simulate_skrf(params, F_HZ, TwoPort(port1, 50.0, 75.0))
    index = {"S11": (0, 0), "S21": (1, 0), "S12": (0, 1), "S22": (1, 1)}
    expected = np.stack([s[:, index[e][0], index[e][1]] for e in sweep.elements], axis=1)
    assert sweep.elements == {"full": ("S11", "S21", "S12", "S22"), "forward-only": ("S11", "S21"),
                              "S12 unmeasured": ("S11", "S21", "S22")}[columns]
    np.testing.assert_allclose(got, expected, rtol=RTOL, atol=ATOL)


def _random_params(rng, count):
    out = []
    for _ in range(count):
        out.append(TransformerParams(
            L1_H=10 ** rng.uniform(-7, -3), L2_H=10 ** rng.uniform(-7, -3), k=1 - 10 ** rng.uniform(-4, -0.5),
            R1_ohm=10 ** rng.uniform(-3, 0), R2_ohm=10 ** rng.uniform(-3, 0), Rc_ohm=10 ** rng.uniform(1, 5),
            C1_F=10 ** rng.uniform(-13, -10), C2_F=10 ** rng.uniform(-13, -10), C12_F=10 ** rng.uniform(-13, -10),
            polarity=int(rng.choice([1, -1])), core_loss=str(rng.choice(["magnetizing", "primary"]))))
    return out


def _sample_sweeps():
    sweeps = []
    for folder in ("coupler-before", "coupler-after"):
        sweeps += list(load_manifest(ROOT / "sample_data" / folder / "manifest.toml").sweeps)
    # the sample sets hold reflections and a full thru; add the other kinds on the same grid
    net2 = sweeps[0].network
    two = rf.Network(frequency=net2.frequency, s=np.zeros((net2.f.size, 2, 2), complex), z0=50.0)
    sweeps += [Sweep(two, "secondary", 47.0, method="series-through"),
               Sweep(two, "primary", "short", method="shunt-through"),
               Sweep(two, "secondary", None, port2="primary", forward_only=True)]
    return sweeps


def test_the_fit_evaluates_the_sweeps_own_model():
    # a seeded population over the range a user can bring, both core-loss placements and polarities
    sweeps = _sample_sweeps()
    rng = np.random.default_rng(20261202)
    population = _random_params(rng, 24)
    for subset in (None, 60):
        for polarity in (1, -1):
            for core_loss in ("magnetizing", "primary"):
                chosen = [p.replace(polarity=polarity, core_loss=core_loss) for p in population]
                problem = SweepProblem(sweeps, polarity, sigma=[np.ones(len(s.elements)) for s in sweeps],
                                       subset=subset)
                problem.core_loss = core_loss
                stacked = problem.predict(np.array([p.values() for p in chosen]))
                for sweep, index, model in zip(sweeps, problem.index, stacked):
                    assert model.shape == (len(chosen), index.size, len(sweep.elements))
                    for row, params in zip(model, chosen):
                        direct = sweep.predict(params, f_Hz=sweep.f_Hz[index])
                        np.testing.assert_allclose(row, direct, rtol=1e-9, atol=1e-12)  # rounding of the stacked call


@pytest.mark.parametrize("folder", ["coupler-before", "coupler-after"])
def test_plotted_model_is_what_the_fit_compared(folder):
    analysis = analyze_manifest(ROOT / "sample_data" / folder)
    models = model_sweeps(analysis)
    for sweep, model, residual in zip(analysis.measurement.sweeps, models, analysis.fit.outcome.residuals):
        # the fit's residual is model − measured: the plotted model minus the data must give it back
        np.testing.assert_allclose(model - sweep.measured(), residual, rtol=1e-9, atol=1e-12)


def test_core_loss_placement_is_part_of_the_sweeps_model():
    params = PARAMS["1:3 lossy"]
    sweep = Sweep(_network(1), "primary", "short")
    moved = sweep.predict(params.replace(core_loss="primary"))
    assert np.max(np.abs(moved - sweep.predict(params))) > 1e-3
