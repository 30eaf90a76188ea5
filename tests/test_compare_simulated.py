"""Before and after one added secondary turn: a simulated rework seen through the real fit.

Sweeps come from scikit-rf's circuit solver (tests/reference/skrf_circuit.py) with
VNA-like noise; the same core (A_L fixed), so L2 scales with the square of the
secondary turns (L = A_L·N², common practice) while L1 stays put.
"""

from __future__ import annotations

import numpy as np
import pytest
from typer.testing import CliRunner

from fitting_helpers import REFERENCE_CIRCUIT, simulated_set
from rfmeas.analysis import analyze
from rfmeas.history.compare import compare_results
from rfmeas.model import TransformerParams

F_HZ = np.logspace(5, 8, 301)
BEFORE = TransformerParams(**REFERENCE_CIRCUIT)                 # 5:15 turns
AFTER = BEFORE.replace(L2_H=BEFORE.L2_H * (16 / 15) ** 2)       # one turn added: 5:16


def test_one_added_secondary_turn_is_significant_in_L2_and_ratio_only():
    before = analyze(simulated_set(BEFORE, F_HZ, rng=np.random.default_rng(21), name="unit 4"))
    after = analyze(simulated_set(AFTER, F_HZ, rng=np.random.default_rng(22), name="unit 4"))
    comparison = compare_results(before.to_dict(), after.to_dict()).to_dict()
    changes = comparison["changes"]
    assert changes["secondary_inductance_H"]["significant"] is True
    assert changes["secondary_inductance_H"]["change_percent"] == \
        pytest.approx(((16 / 15) ** 2 - 1) * 100, abs=0.5)
    assert changes["effective_turns_ratio"]["significant"] is True
    assert changes["primary_inductance_H"]["significant"] is False
    assert abs(changes["primary_inductance_H"]["change_percent"]) < 0.1


def test_compare_command_on_two_sample_sets_writes_an_overlay(tmp_path):
    from rfmeas.cli import app

    plot = tmp_path / "overlay.png"
    result = CliRunner().invoke(app, ["compare", "sample_data/coupler-before", "sample_data/coupler-after",
                                      "--json", "--plot", str(plot)])
    assert result.exit_code == 0, result.stdout + result.stderr
    import json

    data = json.loads(result.stdout)
    assert data["changes"]["effective_turns_ratio"]["significant"] is True
    assert any("Turns-ratio error improved" in v for v in data["verdict"])
    assert plot.stat().st_size > 10_000
