"""Full fit of the four-sweep, 1001-point set: median under 50 ms (2-core machine).

The set is simulated by scikit-rf's circuit solver with 1e-3 rms VNA noise
(tests/fitting_helpers.simulated_set). Set RFMEAS_BENCH_PROFILE=1 to print a
cProfile of the fits.
"""

from __future__ import annotations

import cProfile
import os
import pstats

import numpy as np
import pytest

from fitting_helpers import REFERENCE_CIRCUIT, simulated_set
from rfmeas.analysis import analyze
from rfmeas.fit import fit_sweeps
from rfmeas.model import TransformerParams
from timing import median, percentile, timings_s

POINTS = 1001
REPEATS = 20
TARGET_MEDIAN_S = 0.050


def test_full_fit_of_four_sweeps():
    params = TransformerParams(**REFERENCE_CIRCUIT)
    measurement = simulated_set(params, np.logspace(5, 8, POINTS), rng=np.random.default_rng(1))
    sweeps = list(measurement.sweeps)
    outcome = fit_sweeps(sweeps)
    assert outcome.converged
    assert outcome.params.L1_H == pytest.approx(params.L1_H, rel=0.01)

    fit_times = timings_s(lambda: fit_sweeps(sweeps), REPEATS)
    analyze_times = timings_s(lambda: analyze(measurement), REPEATS)
    print(f"\nfull fit, four sweeps x {POINTS} points: fit_sweeps median {median(fit_times) * 1e3:.1f} ms, "
          f"p90 {percentile(fit_times, 90) * 1e3:.1f} ms ({outcome.evaluations} model evaluations, "
          f"{len(outcome.free)} free parameters); analyze median {median(analyze_times) * 1e3:.1f} ms, "
          f"p90 {percentile(analyze_times, 90) * 1e3:.1f} ms; target median < {TARGET_MEDIAN_S * 1e3:.0f} ms")
    if os.environ.get("RFMEAS_BENCH_PROFILE"):
        profiler = cProfile.Profile()
        profiler.enable()
        for _ in range(REPEATS):
            fit_sweeps(sweeps)
        profiler.disable()
        pstats.Stats(profiler).sort_stats("tottime").print_stats(15)
    assert median(fit_times) < TARGET_MEDIAN_S
