"""One vocabulary (issue 16, "Words"): every quantity people see is named from rfmeas.labels,
and every key of that table is a real key of the JSON contract."""

import json
import shutil
from pathlib import Path

import pytest
from rich.console import Console

from rfmeas import labels
from rfmeas.analysis import analyze_manifest

ROOT = Path(__file__).resolve().parents[1]
SCHEMA = json.loads((ROOT / "docs" / "schema" / "analysis.schema.json").read_text(encoding="utf-8"))
SAMPLE = ROOT / "sample_data" / "coupler-after"


def _schema_keys(section: str) -> set[str]:
    return set(SCHEMA["properties"][section]["properties"])


def test_every_table_key_is_a_json_key():
    assert set(labels.PARAMETER_LABELS) == _schema_keys("parameters")
    assert set(labels.FIGURE_LABELS) <= _schema_keys("figures")
    assert set(labels.OTHER_LABELS) <= _schema_keys("figures") | _schema_keys("parameters")
    # every figure but the terminations (a note, not a quantity) has its label
    assert _schema_keys("figures") - set(labels.FIGURE_LABELS) - set(labels.OTHER_LABELS) == {"terminations"}


def test_figure_detail_keys_are_keys_of_the_output(sample, tmp_path):
    # the demo set reads the primary on an LCR meter; a copy reads the secondary too
    unit = tmp_path / "unit"
    shutil.copytree(SAMPLE, unit)
    with open(unit / "manifest.toml", "a", encoding="utf-8") as fh:
        fh.write('\n[[reading]]\nfile = "pri_lcr.csv"\nwinding = "secondary"\n')
    details = set()
    for analysis in (sample, analyze_manifest(unit)):
        figures = analysis.to_dict()["figures"]
        details |= {key for entry in figures.values() if isinstance(entry, dict) for key in entry}
    assert set(labels.FIGURE_DETAIL_LABELS) <= details


def test_labels_are_distinct_and_words():
    texts = [text for text, _unit in labels.QUANTITIES.values()]
    assert len(texts) == len(set(texts))
    for text in texts:
        assert "_" not in text.replace("A_L", ""), text


@pytest.fixture(scope="module")
def sample():
    return analyze_manifest(SAMPLE)


def test_terminal_and_report_name_quantities_from_the_table(sample):
    from rfmeas.present.report.html import parameter_rows
    from rfmeas.present.terminal import figure_rows, parameter_table

    known = {text for text, _unit in labels.QUANTITIES.values()}
    table = parameter_table(sample)
    assert set(table.columns[0]._cells) <= known
    assert {row["label"] for row in parameter_rows(sample)} <= known
    for label, _value, _note in figure_rows(sample):
        if label.startswith("  from the ") or label.startswith("return loss ≥"):
            continue  # A_L of each winding (with its turns), and the band with its threshold
        label = label.strip()
        # the low-frequency limit carries its rule: "low-frequency limit (X ≥ 3·R)"
        assert label.split(" (X ≥")[0] in known, label


def test_the_issue_s_two_names_are_one(sample):
    # "reactance-rule limit" vs "low frequency limit", "lower corner −1 dB" vs "low frequency corner 1dB"
    from rfmeas.present.terminal import render_analysis

    console = Console(width=200, record=True)
    render_analysis(sample, console)
    text = console.export_text()
    for old in ("reactance-rule limit", "lower corner", "upper corner", "low frequency corner"):
        assert old not in text
    assert labels.label("low_frequency_corner_1dB_Hz") == "low-frequency corner −1 dB"


def test_unknown_and_dotted_keys_read_as_words():
    assert labels.label("figures.turns_ratio") == labels.FIGURE_LABELS["turns_ratio"][0]
    assert labels.label("some_new_thing_Hz") == "some new thing"
    assert labels.unit("primary_inductance_H") == "H"


def test_one_unit_lookup_for_every_key():
    # the table first, then the unit the key's name carries (docs/DESIGN.md: units in names)
    assert labels.unit("inductance_factor_nH_per_turn2") == "nH/turn²"
    assert labels.unit("design.source_impedance_ohm") == "Ω"
    assert labels.unit("ratio_tolerance_percent") == "%"
    assert labels.unit("return_loss_dB") == "dB"
    assert labels.unit("reactance_factor") == ""
    # where the value shows its unit, the label does not repeat it
    assert labels.bare_label("inductance_factor_nH_per_turn2") == "A_L"
    assert labels.bare_label("midband_insertion_loss_dB") == "mid-band insertion loss"
    assert labels.bare_label("primary_inductance_H") == labels.label("primary_inductance_H")
