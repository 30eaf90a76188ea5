"""Typed results end to end: Figure, Figures, DesignCheck and Comparison keep the JSON contract
(docs/DESIGN.md, "JSON contract"), and pass or fail is read from DesignCheck everywhere."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import pytest

from rfmeas.analysis import analyze_files, analyze_manifest
from rfmeas.history.batch import summarise
from rfmeas.history.compare import compare_results
from rfmeas.history.store import HistoryStore, design_status as stored_status, record_analysis
from rfmeas.io.jsonio import dumps_json
from rfmeas.judge.design import DesignCheck, design_fails, design_status, not_judged
from rfmeas.judge.figures import Figure, Figures, ReturnLossBand, UnknownFigureError

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data"
# The key layout of `figures` and `design_check` as written before these sections were typed
# (made from the untyped code on the sample sets); keys present only sometimes (a note, A_L from
# LCR readings when the manifest has them) are left out below.
KEYS = json.loads((Path(__file__).parent / "data" / "result_keys.json").read_text(encoding="utf-8"))
SOMETIMES = {"note", "stderr_note", "within_sweeps", "readings_primary", "readings_secondary"}


@pytest.fixture(scope="module")
def before():
    return analyze_manifest(SAMPLE / "coupler-before")


@pytest.fixture(scope="module")
def after():
    return analyze_manifest(SAMPLE / "coupler-after")


@pytest.fixture(scope="module")
def thru():
    return analyze_files([SAMPLE / "coupler-before" / "thru.s2p"])


def _keys(x):
    """The nested key layout of a JSON value, in order, without the keys present only sometimes."""
    if x == "list":  # a list of plain values, as the layout file writes it
        return "list"
    if isinstance(x, dict):
        return [(k, _keys(v)) for k, v in x.items() if k not in SOMETIMES]
    if isinstance(x, list):
        return [_keys(v) for v in x] if x and isinstance(x[0], dict) else "list"
    return None


@pytest.mark.parametrize("case", ["before", "after", "thru"])
def test_to_dict_keeps_the_key_layout_of_the_untyped_json(case, request):
    analysis = request.getfixturevalue(case)
    data = json.loads(dumps_json(analysis.to_dict()))
    for section in ("figures", "design_check"):
        assert _keys(data[section]) == _keys(KEYS[case][section]), section


def test_to_dict_is_plain_json_and_the_objects_stay_typed(before):
    assert isinstance(before.figures, Figures) and isinstance(before.design_check, DesignCheck)
    data = before.to_dict()
    text = json.dumps(data["figures"], allow_nan=True)  # plain Python all the way down
    assert json.loads(text) == json.loads(dumps_json(before.figures.to_dict()))
    assert data["design_check"] == before.design_check.to_dict()
    assert data["figures"]["return_loss_band"] == before.figures.return_loss_band.to_dict()
    assert data["figures"]["terminations"] == before.figures.terminations.to_dict()
    for fig in before.figures:
        assert data["figures"][fig.name] == fig.to_dict()


def test_figure_to_dict_places_a_late_note_where_it_was_added():
    fig = Figure("self_resonance_primary_Hz", "self-resonance", "Hz", 1e7, 1e3, details=(("a", 1),))
    noted = fig.with_note("first").with_details(b=2).with_note("second")
    assert list(noted.to_dict()) == ["value", "stderr", "a", "note", "b"]
    assert noted.to_dict()["note"] == "first; second"
    early = Figure("turns_ratio", "ratio", "", 3.0, None, "own", "why", (("x", Figure("x", "x", "", 1.0)),))
    assert early.to_dict() == {"value": 3.0, "stderr": None, "note": "own", "stderr_note": "why",
                               "x": {"value": 1.0, "stderr": None}}
    assert list(early.to_dict()) == ["value", "stderr", "note", "stderr_note", "x"]


def test_figures_iterate_in_reading_order_and_write_in_contract_order(before):
    names = [f.name for f in before.figures]
    assert names[:3] == ["inductance_factor_nH_per_turn2", "effective_permeability", "low_frequency_limit_Hz"]
    assert names.index("low_frequency_corner_3dB_Hz") < names.index("low_frequency_corner_1dB_Hz")
    assert list(before.figures.to_dict()) == [k for k, _ in KEYS["before"]["figures"].items()]


def test_unknown_figure_names_raise_a_clear_error(before):
    with pytest.raises(UnknownFigureError, match=r"no figure named 'low_frequency_limit'; the figures are "
                                                 r"inductance_factor_nH_per_turn2, "):
        before.figures["low_frequency_limit"]
    with pytest.raises(KeyError, match="the return-loss band and the terminations are attributes"):
        before.figures["return_loss_band"]
    assert "low_frequency_limit" not in before.figures and "turns_ratio" in before.figures
    with pytest.raises(ValueError, match="distinct known figures"):
        Figures((Figure("made_up_Hz", "x", "Hz", 1.0),), before.figures.return_loss_band,
                before.figures.terminations)


def test_return_loss_band_edges_are_figures(before):
    band = before.figures.return_loss_band
    assert isinstance(band, ReturnLossBand) and isinstance(band.start, Figure)
    d = band.to_dict()
    assert (d["start_Hz"], d["start_stderr_Hz"]) == (band.start.value, band.start.stderr)
    assert d["start_Hz"] < d["stop_Hz"]


# ---- pass or fail, decided once ---------------------------------------------------------------

def _not_judged(analysis):
    check = analysis.design_check
    withheld = tuple(not_judged(v, "made for this test") for v in check.verdicts)
    return dataclasses.replace(analysis, design_check=dataclasses.replace(
        check, verdicts=withheld, not_judged=("made for this test",)))


def test_pass_fail_is_the_same_in_analysis_batch_store_and_compare(before, after, thru, tmp_path):
    cases = {"fail": before, "pass": after, "no design": thru, "not judged": _not_judged(after)}
    with HistoryStore(tmp_path / "h.sqlite") as store:
        for expected, analysis in cases.items():
            check = analysis.design_check
            assert analysis.design_status == expected
            assert analysis.design_passed == (None if check is None else check.passed)
            assert design_status(check) == expected  # the typed check
            data = json.loads(dumps_json(analysis.to_dict()))
            assert stored_status(data) == expected  # the JSON it writes, read back
            assert summarise("u.toml", analysis).status == expected
            assert summarise("u.toml", data).status == expected
            record_analysis(store, dataclasses.replace(
                analysis, measurement=dataclasses.replace(analysis.measurement, name=expected)))
            assert store.list(expected)[0].design_status == expected
            assert design_fails(expected) == (expected in ("fail", "not judged"))
    for old, new in ((before, after), (after, _not_judged(after))):
        sentence = f"Design check: {old.design_status} before, {new.design_status} after."
        assert sentence in compare_results(old, new).verdict  # typed sides
        assert sentence in compare_results(old.to_dict(), new.to_dict()).verdict  # stored sides


def test_compare_reads_each_sides_verdicts_not_its_own_rule(before, after):
    """The 'met / missed' of a target is what each side's check said, even against its own numbers."""
    typed = compare_results(before, after)
    assert typed.to_dict() == compare_results(before.to_dict(), after.to_dict()).to_dict()
    flipped = after.design_check.to_dict()
    for c in flipped["checks"]:
        if c["name"] == "low_frequency_limit":
            c.update(passed=False, state="fail")
    stored_after = dict(after.to_dict(), design_check=flipped)
    verdict = compare_results(before.to_dict(), stored_after).verdict
    assert any(s.startswith("Low-frequency limit: the design asks for at most") and s.endswith("now missed (met before).")
               for s in verdict)


def test_old_stored_records_still_read_from_dicts(after):
    old = dict(after.to_dict(), design_check={"ratio": {"passed": True}, "lowest": {"passed": False}})
    assert stored_status(old) == "fail" and summarise("u.toml", old).status == "fail"
    assert "Design check: fail before, pass after." in compare_results(old, after).verdict
