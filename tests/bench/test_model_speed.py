"""Model evaluation of the four-sweep set, rfmeas closed form against scikit-rf's circuit solver.

Reference: scikit-rf's skrf.circuit.Circuit (tests/reference/skrf_circuit.py)
in its fastest setting, auto_reduce=True, solving the same network; both are
timed side by side in this run and must agree to 1e-9.
"""

from __future__ import annotations

import numpy as np

from timing import median, timings_s
from fitting_helpers import REFERENCE_CIRCUIT, simulated_set
from reference import four_sweeps, model_response
from reference.skrf_circuit import simulate_four_sweeps
from rfmeas.fit.solver import SweepProblem
from rfmeas.model import TransformerParams
from rfmeas.model.params import PARAMETER_NAMES

POINTS = 1001
TARGET_RATIO = 50.0
TOLERANCE = 1e-9


def test_model_evaluation_against_scikit_rf_circuit():
    params = TransformerParams(**REFERENCE_CIRCUIT)
    f_Hz = np.logspace(5, 8, POINTS)
    descriptions = four_sweeps()

    def skrf_eval():
        return simulate_four_sweeps(params, f_Hz, auto_reduce=True)

    def public_eval():
        return {n: model_response(params, f_Hz, d) for n, d in descriptions.items()}

    # SweepProblem.predict: the fit's own path (one Y evaluation shared by the four sweeps)
    sweeps = list(simulated_set(params, f_Hz, sigma=0.0, forward_only=False).sweeps)
    problem = SweepProblem(sweeps, polarity=params.polarity)
    row = np.array([[getattr(params, n) for n in PARAMETER_NAMES]])

    def predict_eval():
        return problem.predict(row)

    reference = skrf_eval()
    public = public_eval()
    predicted = dict(zip(descriptions, predict_eval()))
    diff_public = max(float(np.max(np.abs(public[n] - reference[n]))) for n in descriptions)
    diff_predict = 0.0
    for n, d in descriptions.items():
        got = predicted[n][0]
        if n == "thru":  # predict stacks the sweep's elements S11, S21, S12, S22 last
            got = got[:, [0, 2, 1, 3]].reshape(-1, 2, 2)
        else:
            got = got[:, 0]
        diff_predict = max(diff_predict, float(np.max(np.abs(got - reference[n]))))

    t_skrf = median(timings_s(skrf_eval, repeats=15))
    t_public = median(timings_s(public_eval, repeats=200))
    t_predict = median(timings_s(predict_eval, repeats=200))
    ratio_public = t_skrf / t_public
    ratio_predict = t_skrf / t_predict
    print(f"\nmodel evaluation, four sweeps x {POINTS} points: "
          f"scikit-rf circuit (auto_reduce) {t_skrf * 1e3:.2f} ms; "
          f"rfmeas SweepProblem.predict {t_predict * 1e3:.3f} ms, ratio {ratio_predict:.0f}x, "
          f"max difference {diff_predict:.1e}; "
          f"rfmeas public model functions {t_public * 1e3:.3f} ms, ratio {ratio_public:.0f}x, "
          f"max difference {diff_public:.1e}")
    assert diff_public < TOLERANCE and diff_predict < TOLERANCE
    assert ratio_predict >= TARGET_RATIO
    assert ratio_public >= TARGET_RATIO
