"""The HTML report: self-contained, verdicts first, user text escaped, figures rendered generically."""

from __future__ import annotations

import dataclasses
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest

from rfmeas.units import format_with_error
from typer.testing import CliRunner

from rfmeas import __version__
from rfmeas.analysis import analyze_manifest
from rfmeas.judge.design import DesignCheck, Verdict
from rfmeas.measurement.sweep import DesignTarget
from rfmeas.cli import app
from rfmeas.errors import InputError
from rfmeas.present.report import render_report, write_report
from rfmeas.present.report.pdf import find_browser

ROOT = Path(__file__).resolve().parents[1]
MANIFEST = ROOT / "sample_data" / "coupler-before" / "manifest.toml"


class Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))


@pytest.fixture(scope="module")
def analysis():
    return analyze_manifest(MANIFEST)


@pytest.fixture(scope="module")
def judged(analysis):
    """The sample analysis (its real figures) with a hand-made failed design check."""
    check = DesignCheck((
        Verdict("turns_ratio_vs_design", "turns ratio", False, 2.8, 3.0, "", "6.7 % below the target",
                "add one secondary turn <now 14>"),
        Verdict("reactance", "reactance at lowest frequency", True, 250.6, 200.0, "Ω", "25 % above the limit",
                "")), DesignTarget(source_impedance_ohm=50, load_impedance_ohm=450))
    return dataclasses.replace(analysis, design_check=check)


@pytest.fixture(scope="module")
def judged_html(judged):
    return render_report(judged, generated="test")


def test_report_is_self_contained(judged_html):
    parser = Tags()
    parser.feed(judged_html)
    tags = parser.tags
    assert not any(tag in ("script", "link", "iframe", "object", "embed") for tag, _ in tags)
    images = [attrs for tag, attrs in tags if tag == "img"]
    assert len(images) >= 6
    assert all(a["src"].startswith("data:image/png;base64,") for a in images)
    assert not re.search(r"(src|href)=\"(https?:)?//", judged_html)
    assert "url(" not in judged_html  # no fonts or images pulled in by the stylesheet


def test_report_order_verdicts_first(judged_html):
    order = [judged_html.find(marker) for marker in (
        'id="verdicts"', 'id="parameters"', 'id="figures"', 'id="warnings"', 'id="plots"',
        'id="measurements"', 'id="software"', 'id="cautions"')]
    assert -1 not in order and order == sorted(order)


def test_report_content(judged, judged_html):
    assert "Design check failed: turns ratio" in judged_html
    assert "✗ FAIL" in judged_html and "✓ pass" in judged_html
    assert "250.6 Ω" in judged_html and "200 Ω" in judged_html
    from html import escape

    from rfmeas.present.terminal import figure_rows

    rows = figure_rows(judged)
    assert len(rows) > 10
    for label, value, note in rows:  # the same rows the terminal shows
        assert escape(label) in judged_html and escape(value) in judged_html
        assert escape(note) in judged_html
    assert "acts like 5:14" in judged_html
    l1 = judged.fit.estimates["primary_inductance_H"]
    assert format_with_error(l1.value, l1.stderr, "H") in judged_html  # L1 with its standard error
    for sweep in judged.measurement.sweeps:
        assert sweep.sha256 and sweep.sha256 in judged_html
    for phrase in ("small-signal", "insulation", "saturation", "heating", "energised", "local codes"):
        assert phrase in judged_html
    assert f"rfmeas {__version__}" in judged_html


def test_user_text_is_escaped(analysis):
    hostile = "<script>alert('x')</script> & <b>bold</b>"
    evil = dataclasses.replace(analysis, measurement=dataclasses.replace(
        analysis.measurement, name=hostile, notes=hostile), warnings=(hostile,),
        design_check=DesignCheck((Verdict("hostile", hostile, False, 1, 2, "", "", hostile),), DesignTarget()))
    html = render_report(evil, plots=[], generated="test")  # no plots: only the text matters here
    assert "<script>" not in html and "<b>bold</b>" not in html
    assert "&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; &lt;b&gt;bold&lt;/b&gt;" in html


def test_report_without_design_check_still_has_verdicts(analysis):
    import dataclasses

    html = render_report(dataclasses.replace(analysis, design_check=None), plots=[], generated="test")
    assert 'id="verdicts"' in html and "fit converged" in html and "not checked" in html




def test_write_report_is_atomic_and_reports_bad_folders(tmp_path, judged):
    with pytest.raises(InputError) as err:
        write_report(judged, tmp_path / "missing" / "r.html")
    assert "missing" in str(err.value)
    assert not (tmp_path / "missing").exists()


def test_report_command_writes_report_plots_and_pdf(tmp_path):
    out = tmp_path / "unit.html"
    result = CliRunner().invoke(app, ["report", str(MANIFEST), "-o", str(out), "--plots", str(tmp_path / "p"),
                                      "--pdf"])
    assert result.exit_code == 0, result.output
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    names = sorted(p.name for p in (tmp_path / "p").iterdir())
    assert "smith.png" in names and "smith.svg" in names and "response.pdf" in names
    assert len(names) == 3 * 7  # seven plots (4 sweeps, response, spectra, Smith) in three formats
    assert str(out) in result.stdout.replace("\n", "")
    if find_browser() is None:
        assert "PDF skipped" in result.stdout
    else:
        assert out.with_suffix(".pdf").read_bytes().startswith(b"%PDF")


def test_analyze_options_keep_json_clean(tmp_path):
    import json

    out = tmp_path / "a.html"
    result = CliRunner().invoke(app, ["analyze", str(MANIFEST), "--json", "--report", str(out)])
    assert result.exit_code in (0, 1), result.output  # 1 when a design check fails
    json.loads(result.stdout)  # stdout is only the JSON; where the report went is said on stderr
    assert out.exists() and str(out) in result.stderr.replace("\n", "")

