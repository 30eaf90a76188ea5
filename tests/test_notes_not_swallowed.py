"""Problems the tool used to drop silently now reach the user as a note."""

import dataclasses

import numpy as np
import skrf as rf

from rfmeas.fit import core_spectrum
from rfmeas.fit.checks import method_warnings
from rfmeas.io.touchstone import write_touchstone
from rfmeas.magnetics import toroid_geometry
from rfmeas.measurement.sweep import MeasurementSet, Sweep
from test_core import NIZN, simulate


def test_a_dropped_method_advice_is_said():
    # S11 = −1 everywhere is a dead short: Z = 0, so no method can be advised on
    freq = rf.Frequency(1, 10, 11, unit="MHz")
    short = Sweep(network=rf.Network(frequency=freq, s=-np.ones((11, 1, 1)), z0=50.0), port1="primary",
                  termination="open", label="dead.s1p")
    notes = method_warnings(MeasurementSet(name="x", sweeps=(short,)))
    assert len(notes) == 1 and notes[0].startswith("dead.s1p: no advice on the measurement method")
    assert "no finite, non-zero impedance" in notes[0]


def test_an_unconverged_dispersion_fit_is_a_warning(tmp_path, monkeypatch):
    path = tmp_path / "winding.s1p"
    write_touchstone(simulate(NIZN), path)
    geometry = toroid_geometry(*NIZN["core"])
    converged = core_spectrum.analyze_core_file(path, turns=NIZN["turns"], geometry=geometry)
    assert converged.model.converged
    assert not any("before converging" in w for w in converged.warnings)

    real_fit = core_spectrum._Problem.fit

    def starved(self, name, theta0, lower, upper, budget=100):
        # one evaluation per parameter: too few; a start that is already the optimum (a previous
        # fit given as a seed) may still satisfy the solver, so the budget's stop is what it reports
        trial = real_fit(self, name, theta0, lower, upper, budget=1)
        return dataclasses.replace(trial, converged=False)

    monkeypatch.setattr(core_spectrum._Problem, "fit", starved)
    starved_analysis = core_spectrum.analyze_core_file(path, turns=NIZN["turns"], geometry=geometry)
    assert not starved_analysis.model.converged
    assert any(w.startswith("the dispersion fit: the solver stopped at its evaluation budget")
               for w in starved_analysis.warnings)
    assert "before converging" in starved_analysis.model.to_dict()["reason"]
