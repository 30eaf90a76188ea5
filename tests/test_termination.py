"""The Termination type: parsing, admittance, description and JSON value."""

import json
import math

import numpy as np
import pytest

from rfmeas.errors import InputError
from rfmeas.model.circuit import input_impedance, termination_admittance
from rfmeas.model.params import TransformerParams
from rfmeas.model.termination import Termination
from rfmeas.measurement.sweep import Sweep


@pytest.mark.parametrize("value, expected", [
    ("open", Termination.open()), (" Short ", Termination.short()), (470, Termination.load(470.0)),
    ("1k", Termination.load(1000.0)), ("200 ohm", Termination.load(200.0)), ("50Ω", Termination.load(50.0)),
])
def test_manifest_and_cli_values_are_parsed(value, expected):
    assert Termination.parse(value, "sweep 1", "m.toml") == expected


@pytest.mark.parametrize("value", ["ground", "-5", 0, -50, True, math.nan, math.inf, "", [50], None])
def test_bad_values_are_the_projects_error_naming_where_and_file(value):
    with pytest.raises(InputError) as info:
        Termination.parse(value, "sweep 3", "m.toml")
    assert info.value.path == "m.toml" and "sweep 3.termination" in info.value.message


def test_a_load_needs_a_positive_finite_resistance():
    for bad in (0.0, -1.0, math.inf, None):
        with pytest.raises(ValueError):
            Termination("load", bad)
    with pytest.raises(ValueError):
        Termination("open", 50.0)
    with pytest.raises(ValueError):
        Termination("ground")


def test_admittance_description_and_json_value():
    assert Termination.open().admittance_S() == 0.0
    assert np.isinf(Termination.short().admittance_S())
    assert Termination.load(200.0).admittance_S() == pytest.approx(1 / 200.0)
    assert [t.describe() for t in (Termination.open(), Termination.short(), Termination.load(50))] \
        == ["open", "shorted", "loaded by 50 Ω"]
    # the JSON values are exactly what the manifest and the analysis JSON always held
    assert [t.to_json() for t in (Termination.open(), Termination.short(), Termination.load(1e3))] \
        == ["open", "short", 1000.0]
    for t in (Termination.open(), Termination.short(), Termination.load(2200.0)):
        assert Termination.parse(json.loads(json.dumps(t.to_json()))) == t
        assert Termination.parse(str(t)) == t


def test_legacy_values_give_the_same_admittance():
    assert termination_admittance("open") == 0.0
    assert np.isinf(termination_admittance("short"))
    assert termination_admittance(75.0) == termination_admittance(Termination.load(75.0)) == pytest.approx(1 / 75)


def test_a_loaded_winding_reads_as_the_parallel_of_the_reflected_load():
    # ideal transformer limit (k → 1, no losses, no capacitance, large L): Zin → R·(L1/L2);
    # the turns-ratio-squared impedance transformation is a textbook result (common practice)
    params = TransformerParams(L1_H=1e-3, L2_H=4e-3, k=1 - 1e-9, R1_ohm=1e-9, R2_ohm=1e-9, Rc_ohm=1e15,
                               C1_F=1e-18, C2_F=1e-18, C12_F=1e-18)
    z = input_impedance(params, np.array([1e6]), "primary", Termination.load(400.0))
    assert abs(z[0]) == pytest.approx(100.0, rel=1e-3)


def test_a_sweep_holds_a_termination_and_keeps_its_json():
    import skrf as rf

    net = rf.Network(frequency=rf.Frequency(1, 10, 5, unit="MHz"), s=np.zeros((5, 1, 1)), z0=50.0)
    sweep = Sweep(network=net, port1="primary", termination=1000.0, label="x")
    assert sweep.termination == Termination.load(1000.0)
    assert sweep.to_dict()["termination"] == 1000.0
    assert sweep.describe() == "primary on port 1, secondary loaded by 1000 Ω"
    assert Sweep(network=net, port1="secondary", label="y").to_dict()["termination"] == "open"
    net2 = rf.Network(frequency=rf.Frequency(1, 10, 5, unit="MHz"), s=np.zeros((5, 2, 2)), z0=50.0)
    two = Sweep(network=net2, port1="primary", port2="secondary", label="t")
    assert two.termination is None and two.to_dict()["termination"] is None
