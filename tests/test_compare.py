"""Comparison of two results: the 3-sigma rule and the plain-words verdict."""

import math

import pytest

from rfmeas.history.compare import RULE, compare_results, format_quantity, judge
from rfmeas.judge.design import overall, status_word


def q(value, stderr):
    return {"value": value, "stderr": stderr}


def check_json(f_low_Hz, f_high_Hz, lowest_Hz=1.8e6, highest_Hz=None):
    """A design_check as DesignCheck.to_dict() writes it (the checks the comparison reads)."""
    checks = [{"name": "low_frequency_limit", "passed": f_low_Hz <= lowest_Hz, "value": f_low_Hz,
               "limit": lowest_Hz, "unit": "Hz"}]
    if highest_Hz is not None:
        checks.append({"name": "high_frequency_corner", "passed": f_high_Hz >= highest_Hz, "value": f_high_Hz,
                       "limit": highest_Hz, "unit": "Hz"})
    for c in checks:
        c["state"] = status_word(c["passed"])
    passed = overall(c["passed"] for c in checks)
    return {"passed": passed, "status": status_word(passed), "not_judged_reasons": [], "checks": checks,
            "target": {"target_turns_ratio": 3.0, "lowest_frequency_Hz": lowest_Hz,
                       "highest_frequency_Hz": highest_Hz}}


def result(name, L1_H, L2_H, ratio, f_low_Hz, f_high_Hz, highest_Hz=None):
    return {
        "name": name,
        "parameters": {
            "primary_inductance_H": q(L1_H, 0.2e-6),
            "secondary_inductance_H": q(L2_H, 1e-6),
            "effective_turns_ratio": q(ratio, 0.005),
            "interwinding_capacitance_F": q(None, None),  # not determined: reported, not judged
        },
        "figures": {"low_frequency_limit_Hz": q(f_low_Hz, 20e3),
                    "high_frequency_corner_3dB_Hz": q(f_high_Hz, None),
                    "note": "text is skipped"},
        "design_check": check_json(f_low_Hz, f_high_Hz, highest_Hz=highest_Hz),
        "fit": {}, "warnings": [],
    }


BEFORE = result("unit 7", 20e-6, 171e-6, 2.925, 2.0e6, 28e6)
# L1 moves by 0.1 µH (well under one sigma of the difference, ~0.28 µH); L2 by 9 µH (~6 sigma);
# the ratio by 0.07 (~10 sigma) and its error against the design's 3.0 from -2.5 % to -0.2 %.
AFTER = result("unit 7", 20.1e-6, 180e-6, 2.994, 1.5e6, 35e6)


def test_sigma_rule_separates_real_changes():
    c = compare_results(BEFORE, AFTER)
    assert c.changes["secondary_inductance_H"].significant is True
    assert c.changes["effective_turns_ratio"].significant is True
    assert c.changes["ratio_error_percent"].significant is True
    assert c.changes["primary_inductance_H"].significant is False
    assert c.changes["high_frequency_corner_3dB_Hz"].significant is None
    assert c.changes["interwinding_capacitance_F"].significant is None
    assert c.changes["interwinding_capacitance_F"].change_percent is None
    assert "note" not in c.changes
    assert c.changes["secondary_inductance_H"].change_percent == pytest.approx((180 - 171) / 171 * 100)


def test_judge_boundary():
    # |Δ| = 3·sqrt(3² + 4²) = 15 exactly is not "more than" three sigma.
    assert judge(100.0, 115.0, 3.0, 4.0).significant is False
    assert judge(100.0, 115.1, 3.0, 4.0).significant is True
    assert judge(0.0, 1.0, 0.1, 0.1).change_percent is None


def test_verdict_sentences():
    verdict = compare_results(BEFORE, AFTER).verdict
    text = "\n".join(verdict)
    assert "Low-frequency limit improved (2 MHz → 1.5 MHz, -25.0 %)." in verdict
    assert "Low-frequency limit: the design asks for at most 1.8 MHz: now met (missed before)." in verdict
    assert "High-frequency corner −3 dB improved (28 MHz → 35 MHz, +25.0 %), not judged" in text
    assert "Turns-ratio error improved (2.5 % → 0.2 % off the design ratio)." in verdict
    moved = text.split("significantly:")[1]
    assert "secondary inductance L2 (+5.3 %)" in moved and "primary inductance" not in moved
    assert "different units" not in text


def test_worse_and_unchanged():
    before = result("unit 7", 20e-6, 171e-6, 2.925, 2.0e6, 28e6, highest_Hz=30e6)
    worse = result("unit 8", 20e-6, 171e-6, 2.82, 2.5e6, 20e6, highest_Hz=30e6)
    verdict = compare_results(before, worse).verdict
    assert "Low-frequency limit got worse (2 MHz → 2.5 MHz, +25.0 %)." in verdict
    assert "Low-frequency limit: the design asks for at most 1.8 MHz: still missed." in verdict
    assert "High-frequency corner −3 dB: the design asks for at least 30 MHz: still missed." in verdict
    assert "Turns-ratio error got worse (2.5 % → 6 % off the design ratio)." in verdict
    assert verdict[0].startswith("These are results of different units")
    same = compare_results(BEFORE, BEFORE)
    assert "No fitted parameter changed significantly." in same.verdict
    assert "Low-frequency limit unchanged (2 MHz → 2 MHz, +0.0 %)." in same.verdict


def test_ratio_error_derived_from_fitted_ratio_and_design():
    before = {"name": "u", "parameters": {"effective_turns_ratio": q(2.85, 0.01)}}
    after = {"name": "u", "parameters": {"effective_turns_ratio": q(3.03, 0.01)}}
    c = compare_results(before, after, design={"turns_ratio": 3.0})
    change = c.changes["ratio_error_percent"]
    assert change.before == pytest.approx(-5.0) and change.after == pytest.approx(1.0)
    assert change.significant is True


def test_tolerates_sparse_results():
    c = compare_results({"name": "a"}, {"name": "a", "figures": {"low_frequency_limit_Hz": 1e6}})
    assert c.changes == {}
    assert c.verdict == ("The two results have no quantity in common to compare.",)
    plain = compare_results({"figures": {"x_Hz": 1.0}}, {"figures": {"x_Hz": 2.0}})
    assert plain.changes["x_Hz"].significant is None


def test_to_dict_is_json_shaped():
    d = compare_results(BEFORE, AFTER).to_dict()
    assert set(d) == {"before_name", "after_name", "changes", "verdict", "rule"}
    assert d["rule"] == RULE
    assert set(d["changes"]["primary_inductance_H"]) >= {"before", "after", "change_percent", "significant"}
    assert isinstance(d["verdict"], list)


def test_format_quantity():
    assert format_quantity("primary_inductance_H", 2.2e-6) == "2.2 µH"
    assert format_quantity("core_loss_resistance_ohm", 1500.0) == "1.5 kΩ"
    assert format_quantity("ratio_error_percent", -1.234) == "-1.234 %"
    assert format_quantity("coupling_coefficient", 0.99871) == "0.9987"
    assert format_quantity("x_H", None) == "—"
    assert not math.isnan(judge(1.0, 2.0, None, 0.1).change_percent)


# --- the compare command: two stored records need no fit ----------------------------------

def test_compare_command_on_stored_records(tmp_path):
    import json

    from typer.testing import CliRunner

    from rfmeas.history.store import HistoryStore
    from rfmeas.cli import app

    db = tmp_path / "h.sqlite3"
    with HistoryStore(db) as s:
        first = s.record("unit 7", None, [("a.s1p", b"x")], BEFORE)
        second = s.record("unit 7", None, [("a.s1p", b"y")], AFTER)
    runner = CliRunner()
    res = runner.invoke(app, ["compare", f"@{first}", f"@{second}", "--db", str(db), "--json"])
    assert res.exit_code == 0, res.output
    data = json.loads(res.stdout)
    assert data["changes"]["secondary_inductance_H"]["significant"] is True
    assert data["changes"]["primary_inductance_H"]["significant"] is False
    assert data["before"].startswith(f"@{first} ")
    assert data == json.loads(runner.invoke(app, ["compare", "@prev", "@latest:unit 7", "--db", str(db),
                                                  "--json"]).stdout)
    res = runner.invoke(app, ["compare", f"@{first}", f"@{second}", "--db", str(db)])
    assert res.exit_code == 0
    assert "Low-frequency limit improved" in res.stdout and "secondary inductance L2" in res.stdout
    for args, message in ((["@99", f"@{second}"], "no record 99"),
                          ([f"@{first}", "@prev"], "@prev needs"),
                          ([f"@{first}", str(tmp_path / "missing.toml")], "no such file"),
                          ([f"@{first}", str(db)], "not a manifest")):
        res = runner.invoke(app, ["compare", *args, "--db", str(db)])
        assert res.exit_code == 2 and message in res.stderr, (args, res.output)
