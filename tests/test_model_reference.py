"""rfmeas.model's closed form against two outside solvers of the same network.

The references are ngspice (AC analysis of the coupled-inductor netlist with a
`K` element, or of the T-form when the core is lossy) and scikit-rf's circuit
solver (skrf.circuit.Circuit). Agreement is required to 1e-6 relative; both
reach about 1e-12 in practice.
"""

from __future__ import annotations

import json
import math
import warnings
from pathlib import Path

import numpy as np
import pytest
import skrf as rf

from rfmeas.model.params import TransformerParams
from tests.reference import OnePort, SimulatorError, TwoPort, four_sweeps, model_response
from tests.reference.skrf_circuit import simulate_four_sweeps, simulate_skrf
from tests.reference.spice import run_ngspice, simulate_spice, spice_available, spice_netlist

RTOL = 1e-6
ATOL = 1e-10  # |S| <= 1 for these passive networks; guards points where S crosses zero

no_spice = pytest.mark.skipif(not spice_available(), reason="ngspice is not installed")

# 10 kHz to 300 MHz: below the magnetising corner, the passband, the
# self-resonances and above them
F_HZ = np.geomspace(1e4, 3e8, 37)

PF = 1e-12
PARAMS = {
    "1:1 k=0.9 lossless bare": TransformerParams(10e-6, 10e-6, 0.9),
    "1:3 k=0.999 lossy typical C": TransformerParams(
        30e-6, 270e-6, 0.999, R1_ohm=0.05, R2_ohm=0.25, Rc_ohm=1500.0,
        C1_F=3 * PF, C2_F=6 * PF, C12_F=3 * PF),
    "1:3 k=0.9 lossy bare": TransformerParams(5e-6, 45e-6, 0.9, R1_ohm=0.1, R2_ohm=0.4, Rc_ohm=300.0),
    "4:1 k=0.999 lossless typical C": TransformerParams(
        16e-6, 1e-6, 0.999, R1_ohm=0.2, R2_ohm=0.02, C1_F=4 * PF, C2_F=1 * PF, C12_F=2 * PF),
    "4:1 k=0.9 lossy typical C": TransformerParams(
        64e-6, 4e-6, 0.9, R1_ohm=0.3, R2_ohm=0.03, Rc_ohm=5000.0,
        C1_F=8 * PF, C2_F=2 * PF, C12_F=1 * PF),
    "1:1 k=0.999 lossy C12 only": TransformerParams(2e-6, 2e-6, 0.999, Rc_ohm=80.0, C12_F=10 * PF),
}

SWEEPS = {
    "primary open": OnePort("primary", "open"),
    "primary short": OnePort("primary", "short"),
    "primary 200 ohm": OnePort("primary", 200.0),
    "secondary open": OnePort("secondary", "open"),
    "secondary short": OnePort("secondary", "short"),
    "secondary 200 ohm": OnePort("secondary", 200.0),
    "two-port primary 50/50": TwoPort("primary", 50.0, 50.0),
    "two-port primary 50/75": TwoPort("primary", 50.0, 75.0),
    "two-port secondary 50/75": TwoPort("secondary", 50.0, 75.0),
}

CASES = [pytest.param(PARAMS[p], SWEEPS[s], id=f"{p}, {s}") for p in PARAMS for s in SWEEPS]


@pytest.mark.parametrize(("params", "sweep"), CASES)
def test_model_matches_skrf_circuit(params, sweep):
    # reference: scikit-rf's circuit solver (skrf.circuit.Circuit)
    reference = simulate_skrf(params, F_HZ, sweep)
    np.testing.assert_allclose(model_response(params, F_HZ, sweep), reference, rtol=RTOL, atol=ATOL)


@pytest.mark.spice
@no_spice
@pytest.mark.parametrize(("params", "sweep"), CASES)
def test_model_matches_ngspice(params, sweep):
    # reference: ngspice AC analysis (coupled-inductor K netlist, T-form if Rc is finite)
    reference = simulate_spice(params, F_HZ, sweep)
    np.testing.assert_allclose(model_response(params, F_HZ, sweep), reference, rtol=RTOL, atol=ATOL)


LOSSLESS = [name for name, p in PARAMS.items() if math.isinf(p.Rc_ohm)]
LOSSY = [name for name, p in PARAMS.items() if not math.isinf(p.Rc_ohm)]


@pytest.mark.spice
@no_spice
@pytest.mark.parametrize("name", LOSSLESS)
@pytest.mark.parametrize("sweep", [SWEEPS["secondary short"], SWEEPS["two-port primary 50/75"]],
                         ids=["secondary short", "two-port"])
def test_spice_forms_agree_for_a_lossless_core(name, sweep):
    # ngspice: K=k coupled inductors against the T-form with a K=1 pair and with E/F sources
    coupled = simulate_spice(PARAMS[name], F_HZ, sweep, form="coupled")
    for form in ("tee", "tee-controlled"):
        np.testing.assert_allclose(simulate_spice(PARAMS[name], F_HZ, sweep, form=form), coupled,
                                   rtol=RTOL, atol=ATOL, err_msg=form)


# pairs of forms of one simulator that must agree: ngspice's ideal transformer as a K=1 pair
# against one of E/F controlled sources (lossy core); scikit-rf's coupled inductors from their
# Z matrix against its T-form with an ideal transformer (lossless core)
FORM_PAIRS = [
    *(pytest.param(simulate_spice, name, "tee", "tee-controlled", marks=[pytest.mark.spice, no_spice],
                   id=f"ngspice, {name}") for name in LOSSY),
    *(pytest.param(simulate_skrf, name, "coupled", "tee", id=f"skrf, {name}") for name in LOSSLESS),
]


@pytest.mark.parametrize(("simulate", "name", "form_a", "form_b"), FORM_PAIRS)
def test_forms_of_one_simulator_agree(simulate, name, form_a, form_b):
    sweep = SWEEPS["two-port secondary 50/75"]
    np.testing.assert_allclose(simulate(PARAMS[name], F_HZ, sweep, form=form_b),
                               simulate(PARAMS[name], F_HZ, sweep, form=form_a),
                               rtol=RTOL, atol=ATOL)


def _nearly_ideal(n):
    """1:n, 100 H and k within 1e-10 of 1: at 10 kHz jwLm = 6.3 Mohm and jwLl1 = 0.6 mohm,
    an ideal transformer between 50 ohm ports to about 1e-5."""
    return TransformerParams(L1_H=100.0, L2_H=100.0 * n * n, k=1.0 - 1e-10)


def _ideal_checks(simulate):
    f = np.array([1e4])
    # ideal 1:N between two 50 ohm ports: S11 = (1 - N²)/(1 + N²), S21 = 2N/(1 + N²);
    # N = 2 gives -0.600 and 0.800 (REFERENCES.md, derived from the ideal-transformer relations)
    s = simulate(_nearly_ideal(2.0), f, TwoPort("primary", 50.0, 50.0))[0]
    np.testing.assert_allclose(s, [[-0.6, 0.8], [0.8, 0.6]], atol=1e-4)
    # with port 2 referenced to N² · 50 ohm the ideal transformer is matched: S11 = 0, S21 = 1
    s = simulate(_nearly_ideal(3.0), f, TwoPort("primary", 50.0, 450.0))[0]
    np.testing.assert_allclose(s, [[0.0, 1.0], [1.0, 0.0]], atol=1e-4)
    # a 1:3 ideal transformer loaded by 450 ohm shows 50 ohm at its primary: S11 = 0
    s11 = simulate(_nearly_ideal(3.0), f, OnePort("primary", 450.0))
    np.testing.assert_allclose(s11, [0.0], atol=1e-4)


def test_skrf_reference_reproduces_the_ideal_transformer():
    _ideal_checks(simulate_skrf)


@pytest.mark.spice
@no_spice
def test_spice_reference_reproduces_the_ideal_transformer():
    _ideal_checks(simulate_spice)


def test_spice_netlist_uses_the_coupled_inductor_element():
    params = PARAMS["4:1 k=0.999 lossless typical C"]
    netlist = spice_netlist(params, [1e6, 2e6], SWEEPS["primary open"])
    assert "K12 L1 L2 0.999" in netlist
    assert netlist.count("ac lin 1 ") == 2
    with pytest.raises(ValueError, match="Rc_ohm = inf"):
        spice_netlist(PARAMS["1:3 k=0.9 lossy bare"], [1e6], SWEEPS["primary open"], form="coupled")


@pytest.mark.spice
@no_spice
def test_spice_failure_is_reported():
    with pytest.raises(SimulatorError, match="ngspice failed"):
        run_ngspice("* broken deck\nR1 a 0\n.control\nac lin 1 1e6 1e6\nwrite out.raw v(a)\n.endc\n.end\n")


def test_four_sweep_set_matches_the_model():
    # scikit-rf's circuit solver, the four sweeps of a usual measurement set
    params = PARAMS["1:3 k=0.999 lossy typical C"]
    results = simulate_four_sweeps(params, F_HZ)
    assert set(results) == {"pri_open", "pri_short", "sec_open", "thru"}
    for name, sweep in four_sweeps().items():
        np.testing.assert_allclose(results[name], model_response(params, F_HZ, sweep),
                                   rtol=RTOL, atol=ATOL, err_msg=name)


SAMPLE_DATA = Path(__file__).resolve().parents[1] / "sample_data"


@pytest.mark.parametrize("folder", ["coupler-before", "coupler-after"])
def test_sample_data_matches_its_true_circuit(folder):
    # the sample sets are ngspice output plus 1e-3 rms additive and 0.1 % proportional noise
    # (scripts/make_sample_data.py), so the model at the true values leaves about 1.4e-3 rms
    truth = json.loads((SAMPLE_DATA / "truth.json").read_text(encoding="utf-8"))
    params = TransformerParams(**truth[folder])
    for name, sweep in four_sweeps().items():
        path = SAMPLE_DATA / folder / f"{name}.s{2 if isinstance(sweep, TwoPort) else 1}p"
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # the joined thru segments repeat 10 MHz
            network = rf.Network(str(path))
        model = model_response(params, network.f, sweep)
        if isinstance(sweep, TwoPort):
            measured = network.s[:, :, 0]
            model = model[:, :, 0]
            assert not np.any(network.s[:, :, 1]), "forward-only file: S12 and S22 are zeros"
        else:
            measured = network.s[:, 0, 0]
        rms = np.sqrt(np.mean(np.abs(measured - model) ** 2))
        assert 1.0e-3 < rms < 2.0e-3, f"{path.name}: residual {rms:.2e} rms"
