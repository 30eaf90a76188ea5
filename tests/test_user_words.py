"""No internal names in what a user reads (issue 16, "Words"): the CLI's output on the sample
data and on a few mistakes never shows a program name such as 'L2_H', '(null)' or
'stderr_before', nor a formula written in code ('sqrt(')."""

import html
import re
from pathlib import Path

import pytest
from typer.testing import CliRunner

from rfmeas.cli import app

SAMPLES = Path(__file__).resolve().parents[1] / "sample_data"
# a word ending in a unit suffix (L1_H, R1_ohm, low_frequency_limit_Hz, ...), JSON null, code formulas
INTERNAL = re.compile(r"\b[A-Za-z][A-Za-z0-9]*_(?:H|ohm|Hz|F|dB|percent)\b|\(null\)|stderr_before|\bNone\b|sqrt\(")

CASES = {
    "analyze": lambda tmp: ["analyze", SAMPLES / "coupler-after", "--no-record"],
    "analyze, design missed": lambda tmp: ["analyze", SAMPLES / "coupler-before", "--no-record"],
    "analyze, one file": lambda tmp: ["analyze", SAMPLES / "coupler-after" / "pri_open.s1p", "--no-record"],
    "compare": lambda tmp: ["compare", SAMPLES / "coupler-before", SAMPLES / "coupler-after"],
    "batch": lambda tmp: ["batch", SAMPLES / "coupler-before", SAMPLES / "coupler-after", "--workers", "1"],
    "core": lambda tmp: ["core", SAMPLES / "unknown-core"],
    "plan": lambda tmp: ["plan", "--source", "50", "--load", "200", "--lowest", "1.8M", "--al", "400"],
    "export": lambda tmp: ["export", SAMPLES / "coupler-after", "--spice", tmp / "x.cir"],
    "missing file": lambda tmp: ["analyze", tmp / "nope.toml"],
    "bad turns": lambda tmp: ["analyze", SAMPLES / "coupler-after" / "pri_open.s1p", "--turns", "x"],
    "bad plan": lambda tmp: ["analyze", SAMPLES / "coupler-after", "--plan", "50:0:1M"],
    "core of a two-port": lambda tmp: ["core", SAMPLES / "coupler-after" / "thru.s2p"],
}


@pytest.mark.parametrize("case", list(CASES))
def test_cli_output_has_no_internal_names(case, tmp_path):
    args = [str(a) for a in CASES[case](tmp_path)]
    res = CliRunner().invoke(app, args, env={"COLUMNS": "200"})
    assert res.exception is None or isinstance(res.exception, SystemExit), res.exception
    text = res.stdout + (res.stderr or "")
    assert text.strip(), case
    assert not INTERNAL.findall(text), (case, sorted(set(INTERNAL.findall(text))))


def test_report_text_has_no_internal_names(tmp_path):
    out = tmp_path / "r.html"
    res = CliRunner().invoke(app, ["report", str(SAMPLES / "coupler-before"), "-o", str(out)])
    assert res.exit_code in (0, 1), res.output
    page = out.read_text(encoding="utf-8")
    body = re.sub(r"<(script|style)\b.*?</\1>", " ", page, flags=re.S)
    text = html.unescape(re.sub(r"<[^>]+>", " ", body))
    assert not INTERNAL.findall(text), sorted(set(INTERNAL.findall(text)))
