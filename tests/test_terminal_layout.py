"""`rfmeas analyze` on an 80-column terminal: compact by default, --full for everything, no line
wider than the terminal, no word broken across lines, and it says where the pictures are."""

from __future__ import annotations

import io
import json
import re
from pathlib import Path

import pytest
from rich.console import Console
from typer.testing import CliRunner

from rfmeas.cli import app

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data"
BEFORE = SAMPLE / "coupler-before"
runner = CliRunner()

CASES = {
    "before": [str(BEFORE)],
    "after": [str(SAMPLE / "coupler-after")],
    # two one-port sweeps, no turns, against a plan: the fit cannot see the secondary -> not judged
    "not judged": [str(BEFORE / "pri_open.s1p"), str(BEFORE / "sec_open.s1p"), "--plan", "50:450:3.5M:30M"],
}
SCREEN_ROWS = 24  # a classic terminal's height (common practice)
_RULES = re.compile(r"[│┃━╇─]+")


def _run(args, columns: int):
    result = runner.invoke(app, ["analyze", *args, "--no-record"], env={"COLUMNS": str(columns)})
    assert result.exit_code in (0, 1), result.stderr
    return result.stdout


def _words(text: str) -> list[str]:
    """The words of a rendered screen: table rules are separators; the fit's timing varies between runs."""
    lines = [line for line in text.splitlines() if not line.startswith("fit converged in")]
    return _RULES.sub(" ", "\n".join(lines)).split()


@pytest.mark.parametrize("full", [False, True], ids=["compact", "full"])
@pytest.mark.parametrize("case", list(CASES))
def test_analyze_fits_80_columns_without_breaking_words(case, full):
    args = CASES[case] + (["--full"] if full else [])
    narrow = _run(args, 80)
    wide = _run(args, 400)  # nothing wraps at 400 columns: its words are the whole words
    assert narrow.strip()
    too_wide = [line for line in narrow.splitlines() if len(line) > 80]
    assert not too_wide, too_wide
    whole = set(_words(wide))
    # a word folded mid-word ("sour" + "ce)") leaves pieces that are no word of the wide screen;
    # a cut marked with an ellipsis is allowed (only the design check's one-line labels use it)
    broken = [w for w in _words(narrow) if w not in whole and not w.endswith("…")]
    assert not broken, broken


@pytest.mark.parametrize("case", ["before", "after"])
def test_compact_view_is_a_screenful_or_two_verdicts_first(case):
    out = _run(CASES[case], 80)
    assert len(out.splitlines()) <= 2.5 * SCREEN_ROWS
    order = [out.index(title) for title in ("Design check:", "Key figures", "Circuit")]
    assert order == sorted(order)
    for label in ("A_L", "low-frequency limit", "high-frequency corner −3 dB", "turns ratio", "fit quality",
                  "L1", "L2", "leakage", "coupling k", "C1", "C2", "C12"):
        assert label in out, label
    assert "Sweeps and fit quality" not in out and "--full" in out
    full = _run(CASES[case] + ["--full"], 80)
    assert "Sweeps and fit quality" in full and "core-loss resistance Rc" in full
    assert len(full.splitlines()) > len(out.splitlines())


def test_compact_view_says_what_to_change_for_a_failed_check():
    out = " ".join(_run(CASES["before"], 80).split())
    assert "Design check: FAIL" in out and "wind 15 turns on the secondary" in out
    # passed checks get their one line in the table only; --full says each margin
    assert "8.4 % below the limit" not in out
    assert "8.4 % below the limit" in " ".join(_run(CASES["before"] + ["--full"], 80).split())


def test_terminal_names_the_picture_options_or_the_written_paths(tmp_path):
    out = _run(CASES["after"], 80)
    assert "--report FILE" in out and "--plots FOLDER" in out
    report = tmp_path / "unit.html"
    out = _run(CASES["after"] + ["--report", str(report), "--plots", str(tmp_path / "plots")], 200)
    assert report.is_file() and str(report) in out and "plots:" in out
    assert "--report FILE" not in out


def test_json_stdout_stays_json_while_writing_a_report(tmp_path):
    result = runner.invoke(app, ["analyze", *CASES["after"], "--no-record", "--json",
                                 "--report", str(tmp_path / "r.html")])
    assert result.exit_code == 0, result.stderr
    assert json.loads(result.stdout)["name"]
    assert str(tmp_path / "r.html") in result.stderr


def test_writing_a_report_shows_progress_on_stderr(tmp_path, monkeypatch):
    from rfmeas.analysis import analyze_manifest
    from rfmeas.commands import report as report_module

    buffer = io.StringIO()
    monkeypatch.setattr(report_module, "stderr_console",
                        lambda: Console(file=buffer, force_terminal=True, width=80))
    written = report_module.write_outputs(analyze_manifest(SAMPLE / "coupler-after"), tmp_path / "r.html",
                                          tmp_path / "plots")
    assert written["report"] and written["plots"]
    shown = buffer.getvalue()
    for step in ("drawing the plots", "writing the plot files", "writing the report"):
        assert step in shown, step
