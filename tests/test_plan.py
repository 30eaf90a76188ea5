"""Turns planner: designs worked by hand, ranking, budgets and the `plan` command.

Rules under test (common practice): turns ratio n = N2/N1 = sqrt(R_load/R_source); each
winding's reactance at the lowest frequency ≥ factor × the impedance it works into
(primary: source, secondary: load), L = A_L·N², so N_min = sqrt(factor·R/(2π·f·A_L)).
"""

import dataclasses
import json
import math

import pytest
from typer.testing import CliRunner

from rfmeas.errors import InputError
from rfmeas.judge.plan import plan_turns


def turns(pair):
    return pair.primary_turns, pair.secondary_turns


# --- designs worked by hand (common practice) --------------------------------

def test_design_1_to_9_50_to_450_ohm():
    # Common practice. 50 Ω → 450 Ω from 1.8 MHz, A_L = 2000 nH, factor 4:
    #   n = sqrt(450/50) = 3
    #   L1 ≥ 4·50/(2π·1.8e6) = 200/11.310e6 = 17.684 µH → N1 ≥ sqrt(17.684/2.000) = sqrt(8.842) = 2.974 → 3
    #   L2 ≥ 4·450/(2π·1.8e6) = 1800/11.310e6 = 159.15 µH → N2 ≥ sqrt(79.58) = 8.921 → 9
    #   3:9 is exact; L1 = 2 µH·9 = 18 µH, L2 = 2 µH·81 = 162 µH
    #   rule holds from 4·50/(2π·18e-6) = 200/113.10e-6 = 1.7684 MHz (the secondary gives the same)
    #   LF −3 dB corner: (50 ∥ 450/9)/(2π·18 µH) = 25/113.10e-6 = 221.0 kHz
    plan = plan_turns(50, 450, 1.8e6, 2000)
    assert plan.turns_ratio == pytest.approx(3.0)
    assert plan.minimum_primary_inductance_H == pytest.approx(17.684e-6, rel=1e-4)
    assert plan.minimum_secondary_inductance_H == pytest.approx(159.15e-6, rel=1e-4)
    assert plan.minimum_turns_primary_exact == pytest.approx(2.974, abs=1e-3)
    assert plan.minimum_turns_secondary_exact == pytest.approx(8.921, abs=1e-3)
    assert (plan.minimum_turns_primary, plan.minimum_turns_secondary) == (3, 9)
    s = plan.suggested
    assert turns(s) == (3, 9)
    assert s.ratio_error_percent == pytest.approx(0.0, abs=1e-12)
    assert s.primary_inductance_H == pytest.approx(18e-6)
    assert s.secondary_inductance_H == pytest.approx(162e-6)
    assert s.low_frequency_limit_Hz == pytest.approx(1.7684e6, rel=1e-4)
    assert s.low_frequency_corner_Hz == pytest.approx(221.0e3, rel=1e-3)
    # the next exact pairs, fewest turns first
    assert [turns(p) for p in plan.alternatives] == [(4, 12), (5, 15), (6, 18), (7, 21), (8, 24)]


def test_design_1_to_1_50_ohm():
    # Common practice. 50 Ω → 50 Ω from 1 MHz, A_L = 1000 nH:
    #   n = 1; L ≥ 4·50/(2π·1e6) = 200/6.2832e6 = 31.831 µH → N ≥ sqrt(31.831) = 5.642 → 6 on each side
    #   L1 = L2 = 1 µH·36 = 36 µH; rule holds from 200/(2π·36e-6) = 200/226.19e-6 = 884.2 kHz
    #   LF corner (50 ∥ 50)/(2π·36 µH) = 25/226.19e-6 = 110.5 kHz
    plan = plan_turns(50, 50, 1e6, 1000)
    assert plan.turns_ratio == 1.0
    assert plan.minimum_turns_primary_exact == pytest.approx(5.642, abs=1e-3)
    assert turns(plan.suggested) == (6, 6)
    assert plan.suggested.primary_inductance_H == pytest.approx(36e-6)
    assert plan.suggested.low_frequency_limit_Hz == pytest.approx(884.2e3, rel=1e-4)
    assert plan.suggested.low_frequency_corner_Hz == pytest.approx(110.5e3, rel=1e-3)


def test_design_1_to_4_at_7_MHz_on_a_low_al_core():
    # Common practice. 50 Ω → 200 Ω from 7 MHz, A_L = 50 nH:
    #   n = sqrt(4) = 2
    #   L1 ≥ 200/(2π·7e6) = 200/43.982e6 = 4.5473 µH → N1 ≥ sqrt(4547.3/50) = sqrt(90.95) = 9.537 → 10
    #   L2 ≥ 800/43.982e6 = 18.189 µH → N2 ≥ 2·9.537 = 19.07 → 20
    #   10:20 exact; L1 = 50 nH·100 = 5 µH, L2 = 50 nH·400 = 20 µH
    plan = plan_turns(50, 200, 7e6, 50)
    assert plan.turns_ratio == pytest.approx(2.0)
    assert plan.minimum_turns_primary_exact == pytest.approx(9.537, abs=1e-3)
    assert plan.minimum_turns_secondary_exact == pytest.approx(19.073, abs=1e-3)
    assert turns(plan.suggested) == (10, 20)
    assert plan.suggested.primary_inductance_H == pytest.approx(5e-6)
    assert plan.suggested.secondary_inductance_H == pytest.approx(20e-6)


def test_design_step_down_50_to_12_5_ohm():
    # Common practice. 50 Ω → 12.5 Ω from 3.5 MHz, A_L = 300 nH (the secondary has fewer turns):
    #   n = sqrt(12.5/50) = 0.5
    #   L1 ≥ 200/(2π·3.5e6) = 200/21.991e6 = 9.0946 µH → N1 ≥ sqrt(9094.6/300) = sqrt(30.32) = 5.506 → 6
    #   L2 ≥ 50/21.991e6 = 2.2736 µH → N2 ≥ sqrt(7.579) = 2.753 → 3
    #   6:3 exact (5:3 would leave the primary short of its minimum)
    plan = plan_turns(50, 12.5, 3.5e6, 300)
    assert plan.turns_ratio == pytest.approx(0.5)
    assert plan.minimum_turns_primary_exact == pytest.approx(5.506, abs=1e-3)
    assert plan.minimum_turns_secondary_exact == pytest.approx(2.753, abs=1e-3)
    assert turns(plan.suggested) == (6, 3)
    assert turns(plan.alternatives[0]) == (8, 4)


def test_design_1_to_16_near_the_turn_limit_ranks_by_error_then_turns():
    # Common practice. 50 Ω → 800 Ω from 500 kHz, A_L = 400 nH, at most 60 turns:
    #   n = sqrt(16) = 4
    #   L1 ≥ 200/(2π·5e5) = 200/3.1416e6 = 63.662 µH → N1 ≥ sqrt(63662/400) = sqrt(159.2) = 12.62 → 13
    #   N2 ≥ 4·12.62 = 50.46 → 51, but the exact pair on 13 primary turns is 13:52
    #   exact pairs within 60 turns: 13:52, 14:56, 15:60; then the smallest errors:
    #   15:59 → 59/15 = 3.9333 (−1.667 %), 14:55 → 3.9286 (−1.786 %), 14:57 → 4.0714 (+1.786 %);
    #   13:51 and 13:53 are 1.923 % off
    plan = plan_turns(50, 800, 500e3, 400)
    assert plan.minimum_turns_primary_exact == pytest.approx(12.62, abs=0.005)
    assert (plan.minimum_turns_primary, plan.minimum_turns_secondary) == (13, 51)
    assert turns(plan.suggested) == (13, 52)
    assert [turns(p) for p in plan.alternatives] == [(14, 56), (15, 60), (15, 59), (14, 55), (14, 57)]
    assert plan.alternatives[2].ratio_error_percent == pytest.approx(-1.667, abs=1e-3)
    assert plan.alternatives[4].ratio_error_percent == pytest.approx(1.786, abs=1e-3)


def test_irrational_ratio_uses_the_tolerance_then_fewest_turns():
    # Common practice. 50 Ω → 75 Ω from 1.8 MHz, A_L = 2000 nH: n = sqrt(1.5) = 1.22474;
    #   N1 ≥ 2.974 → 3, N2 ≥ sqrt(4·75/(2π·1.8e6)/2e-6) = sqrt(13.26) = 3.642 → 4.
    #   No pair of 19 turns or fewer is within 1 % (4:5 +2.06 %, 5:6 −2.02 %, ...);
    #   9:11 = 1.22222 is −0.206 %, the smallest within 1 %.
    plan = plan_turns(50, 75, 1.8e6, 2000)
    assert turns(plan.suggested) == (9, 11)
    assert plan.suggested.ratio_error_percent == pytest.approx(-0.206, abs=1e-3)
    # With no tolerance the pure smallest error wins, whatever the turns: check by brute force.
    strict = plan_turns(50, 75, 1.8e6, 2000, ratio_tolerance_percent=0.0, max_turns=30)
    best = min(abs(b / a - math.sqrt(1.5)) for a in range(3, 31) for b in range(4, 31))
    assert abs(strict.suggested.turns_ratio - math.sqrt(1.5)) == pytest.approx(best, rel=1e-12)


@pytest.mark.parametrize("args", [(50, 450, 1.8e6, 2000), (50, 75, 1e6, 100), (50, 12.5, 3.5e6, 300),
                                  (25, 100, 14e6, 20)])
def test_every_pair_meets_the_rule_at_the_lowest_frequency(args):
    # Common practice: X_L = 2π·f·L ≥ factor·R for both windings at the lowest frequency.
    source, load, f_low, al_nH = args
    plan = plan_turns(*args)
    for pair in (plan.suggested, *plan.alternatives):
        assert pair.primary_turns >= plan.minimum_turns_primary
        assert pair.secondary_turns >= plan.minimum_turns_secondary
        assert 2 * math.pi * f_low * pair.primary_inductance_H >= 4 * source * (1 - 1e-12)
        assert 2 * math.pi * f_low * pair.secondary_inductance_H >= 4 * load * (1 - 1e-12)
        assert pair.low_frequency_limit_Hz <= f_low * (1 + 1e-12)
        assert pair.primary_inductance_H == pytest.approx(al_nH * 1e-9 * pair.primary_turns**2)


def test_reactance_factor_scales_the_minimum_inductance():
    # Common practice: L_min = factor·R/(2π·f); factor 8 → twice the inductance of factor 4,
    # so sqrt(2) times the turns: 2.974·1.41421 = 4.205 → 5.
    plan = plan_turns(50, 450, 1.8e6, 2000, reactance_factor=8)
    assert plan.minimum_turns_primary_exact == pytest.approx(2.9735 * math.sqrt(2), rel=1e-4)
    assert turns(plan.suggested) == (5, 15)


# --- high-frequency budgets [derived] -----------------------------------------

def test_budgets_for_the_1_to_9_design():
    # [derived] Suggested 3:9 → reflected load 450·(3/9)² = 50 Ω; top frequency 30 MHz:
    #   series leakage into 50 + 50 Ω: Ll ≤ 100/(2π·30e6) = 100/188.50e6 = 530.5 nH
    #   shunt capacitance across 50 ∥ 50 = 25 Ω: C ≤ 1/(2π·30e6·25) = 1/4.7124e9 = 212.2 pF
    plan = plan_turns(50, 450, 1.8e6, 2000, highest_frequency_Hz=30e6)
    b = plan.budget
    assert b.reflected_load_ohm == pytest.approx(50.0)
    assert b.max_leakage_inductance_H == pytest.approx(530.5e-9, rel=1e-4)
    assert b.max_shunt_capacitance_F == pytest.approx(212.2e-12, rel=1e-4)
    assert plan_turns(50, 450, 1.8e6, 2000).budget is None


def test_budgets_put_the_corner_at_the_highest_frequency():
    # [derived] Each budget alone makes the loaded response 3 dB down at exactly f_high:
    # series L: H = RL'/(Rs + RL' + jωL); shunt C: H = Zp/(Rs + Zp), Zp = RL' ∥ 1/(jωC).
    rs, rl, f_high = 50.0, 75.0, 50e6
    plan = plan_turns(rs, rl, 1.8e6, 2000, highest_frequency_Hz=f_high)
    b = plan.budget
    ratio = plan.suggested.primary_turns / plan.suggested.secondary_turns
    rl_ref = rl * ratio**2
    assert b.reflected_load_ohm == pytest.approx(rl_ref)
    w = 2 * math.pi * f_high
    dc = rl_ref / (rs + rl_ref)
    h_leak = rl_ref / (rs + rl_ref + 1j * w * b.max_leakage_inductance_H)
    zp = 1 / (1 / rl_ref + 1j * w * b.max_shunt_capacitance_F)
    h_cap = zp / (rs + zp)
    assert abs(h_leak) / dc == pytest.approx(1 / math.sqrt(2), rel=1e-9)
    assert abs(h_cap) / dc == pytest.approx(1 / math.sqrt(2), rel=1e-9)


# --- results and bad input ----------------------------------------------------

def test_plan_to_dict_has_the_fixed_keys_and_is_plain():
    plan = plan_turns(50, 450, 1.8e6, 2000, highest_frequency_Hz=30e6)
    with pytest.raises(dataclasses.FrozenInstanceError):
        plan.turns_ratio = 2.0
    d = plan.to_dict()
    for key in ("turns_ratio", "minimum_turns_primary", "minimum_turns_secondary", "suggested",
                "alternatives", "inputs", "high_frequency_budget"):
        assert key in d
    for key in ("primary_turns", "secondary_turns", "ratio_error_percent", "primary_inductance_H",
                "secondary_inductance_H", "low_frequency_limit_Hz"):
        assert key in d["suggested"]
    assert d["suggested"]["primary_turns"] == 3
    assert d["inputs"]["inductance_factor_nH_per_turn2"] == 2000.0
    assert len(d["alternatives"]) == 5
    assert json.loads(json.dumps(d, allow_nan=False)) == d


@pytest.mark.parametrize("kwargs, word", [
    ({"source_impedance_ohm": 0}, "source"),
    ({"load_impedance_ohm": -50}, "load"),
    ({"lowest_frequency_Hz": 0}, "lowest"),
    ({"al_nH_per_turn2": float("nan")}, "A_L"),
    ({"reactance_factor": 0}, "reactance"),
    ({"highest_frequency_Hz": 1e6}, "highest"),
    ({"highest_frequency_Hz": 1.8e6}, "highest"),
    ({"max_turns": 0}, "turns"),
    ({"al_nH_per_turn2": 0.5}, "A_L"),  # would need more than 60 turns
])
def test_bad_inputs_are_input_errors(kwargs, word):
    args = {"source_impedance_ohm": 50, "load_impedance_ohm": 450, "lowest_frequency_Hz": 1.8e6,
            "al_nH_per_turn2": 2000, **kwargs}
    with pytest.raises(InputError, match=word):
        plan_turns(**args)


# --- the command ----------------------------------------------------------------

@pytest.fixture(scope="module")
def app():
    from rfmeas.cli import app

    return app


BASE = ["plan", "--source", "50", "--load", "450", "--lowest", "1.8M", "--al", "2000"]


def run(app, args):
    return CliRunner().invoke(app, args)


def test_cli_table(app):
    result = run(app, BASE + ["--highest", "30M"])
    assert result.exit_code == 0, result.stderr
    out = result.stdout
    assert "17.68 µH" in out and "159.2 µH" in out      # minimum inductances (hand-worked above)
    assert "18 µH" in out and "162 µH" in out           # the 3:9 pair
    assert "1.768 MHz" in out and "221 kHz" in out
    assert "530.5 nH" in out and "212.2 pF" in out      # budgets
    assert "Rule:" in out and "4 ×" in out
    lines = [line.split() for line in out.splitlines()]
    assert ["best", "3", "9"] == next(row[:3] for row in lines if row[:1] == ["best"])


def test_cli_json_only_json(app):
    result = run(app, BASE + ["--highest", "30M", "--json"])
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    assert data["turns_ratio"] == pytest.approx(3.0)
    assert (data["suggested"]["primary_turns"], data["suggested"]["secondary_turns"]) == (3, 9)
    assert data["high_frequency_budget"]["max_shunt_capacitance_F"] == pytest.approx(212.2e-12, rel=1e-4)


def test_cli_engineering_notation_and_al_units(app):
    reference = json.loads(run(app, BASE + ["--json"]).stdout)
    same = [
        ["--lowest", "1800k"], ["--lowest", "1.8MHz"], ["--al", "2k"],
        ["--al", "20000", "--al-unit", "uH/100"], ["--al", "2000", "--al-unit", "mH/1000"],
    ]
    for override in same:
        args = list(BASE)
        option = override[0]
        args[args.index(option) + 1] = override[1]
        args += override[2:] + ["--json"]
        result = run(app, args)
        assert result.exit_code == 0, (override, result.stderr)
        assert json.loads(result.stdout)["suggested"] == reference["suggested"], override


@pytest.mark.parametrize("args, word", [
    (["--load", "4x50"], "--load"),
    (["--highest", "1M"], "highest"),
    (["--al-unit", "pH"], "unit"),
    (["--source", "-50"], "source"),
])
def test_cli_bad_input_is_one_line_and_exit_2(app, args, word):
    full = list(BASE)
    if args[0] in full:
        full[full.index(args[0]) + 1] = args[1]
    else:
        full += args
    result = run(app, full)
    assert result.exit_code == 2
    assert result.stdout == ""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error:") and word in lines[0]
