"""Hostile names through every command (property-based): rich markup, math text, NUL, ANSI escapes,
bidirectional overrides, HTML, very long names and bytes that are not UTF-8, as file names, unit
names, sweep labels, profile names and option values.

Whatever the name, a command either works or refuses with exit 2 and one line on stderr; nothing
raises, nothing prints a traceback or `internal error`, no control character reaches the terminal
raw, and the HTML report shows the name escaped.
"""

from __future__ import annotations

import json
import os
import re
import shutil
from pathlib import Path

from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from rfmeas.cli import app
from test_manifest_fuzz import toml_string  # control characters as \u escapes; a lone surrogate
# stays in and makes the manifest invalid UTF-8: that is a hostile input too

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data" / "coupler-after"
TOROID = ["--turns", "5", "--toroid", "12.7,7.1,4.9"]

FRAGMENTS = ["[/]", "[bold]", "[old]", "$x$", "$\\frac$", "\x00", "\x1b[31m", "\x1b]0;owned\x07", "\u202e",
             "<script>alert(1)</script>", "&amp;", '"', "'", "\\", "µ", "ß" * 40, "w" * 300,
             "\udcff\udcfe"]  # the last: bytes 0xff 0xfe of a file name that is not UTF-8
NAMES = st.lists(st.sampled_from(FRAGMENTS), min_size=1, max_size=3).map("".join)

RAW_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f\u202a-\u202e]")
EXAMPLES = 6
"""Drawn names per run (each drives every command once); README "Reliability" quotes it."""


def _fs_name(name: str, suffix: str) -> str:
    """`name` as a file name: no NUL or '/', at most about 200 bytes once encoded."""
    stem = name.replace("\x00", "").replace("/", "_") or "x"
    while len(os.fsencode(stem + suffix)) > 200:
        stem = stem[:-1]
    return stem + suffix


def _run(*args):
    result = CliRunner().invoke(app, [str(a) for a in args])
    return result


def _check(result, what: str, name: str):
    out, err = result.stdout, result.stderr
    assert result.exception is None or isinstance(result.exception, SystemExit), (what, repr(result.exception))
    assert "Traceback" not in out + err and "internal error" not in out + err, (what, err)
    assert result.exit_code in (0, 1, 2), (what, result.exit_code, err)
    if result.exit_code == 2 and what != "batch":  # batch reports each unit it could not analyse
        lines = err.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("error: "), (what, err)
    assert not RAW_CONTROL.search(out + err), (what, name, out + err)


@settings(max_examples=EXAMPLES, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(name=NAMES)
@example(name="[/]$x$<script>alert(1)</script>")
@example(name="\x1b[31m\u202e\udcff" + "w" * 300)
def test_every_command_with_a_hostile_name(tmp_path_factory, name):
    base = tmp_path_factory.mktemp("hostile")
    unit = base / _fs_name(name, "")
    shutil.copytree(SAMPLE, unit)
    sweep_name = _fs_name(name, ".s1p")
    sweep = unit / sweep_name
    (unit / "pri_open.s1p").rename(sweep)
    text = (unit / "manifest.toml").read_text(encoding="utf-8")
    text = text.replace('name = "ladder-line coupler, unit 3"', f"name = {toml_string(name)}")
    text = text.replace('file = "pri_open.s1p"', f"file = {toml_string(sweep_name)}\nlabel = {toml_string(name)}")
    (unit / "manifest.toml").write_bytes(text.encode("utf-8", "surrogateescape"))
    out = base / "out"
    out.mkdir()
    db = base / "history.sqlite3"
    report = out / "report.html"

    runs = {
        "analyze": ["analyze", unit, "--db", db],
        "analyze files": ["analyze", sweep, unit / "thru.s2p", "--no-record"],
        "analyze missing": ["analyze", unit / _fs_name(name, "-gone.s1p")],
        "report": ["report", unit, "-o", report],
        "core": ["core", sweep, *TOROID],
        "compare": ["compare", unit, SAMPLE, "--db", db],
        "export": ["export", unit, "--spice", out / _fs_name(name, ".cir")],
        "history": ["history", "--db", db],
        "history unit": ["history", name, "--db", db],
        "batch": ["batch", unit, "--workers", "1"],
        "plan": ["plan", "--source", name, "--load", "450", "--lowest", "1M", "--al", "1000"],
        "acquire profile": ["acquire", "-r", "sim", "-p", name, "-o", out / "x.s1p"],
        "acquire output": ["acquire", "-r", "sim", "-p", "vna-scpi-trace", "-o", out / _fs_name(name, ".s1p"),
                           "--sweep", "1M:10M:5"],
    }
    for what, args in runs.items():
        _check(_run(*args), what, name)

    if report.exists():
        html = report.read_text(encoding="utf-8")
        if "<script>" in name:
            assert "<script>alert(1)</script>" not in html and "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    analysed = _run("analyze", unit, "--json", "--no-record")
    if analysed.exit_code in (0, 1):
        assert json.loads(analysed.stdout)["name"] == name.strip()
