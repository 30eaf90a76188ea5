"""The "no internal error" guarantee: every command over a corpus of broken inputs (tests/broken_inputs.py)
and a list of bad options ends with exit code 1 or 2, never a traceback, never `internal error`,
and never blocks (each run is guarded by an alarm)."""

from __future__ import annotations

import os
import re
import signal
from pathlib import Path

import pytest
from typer.testing import CliRunner

from broken_inputs import SAMPLE, build_corpus
from rfmeas.cli import app

TOROID = ["--turns", "5", "--toroid", "12.7,7.1,4.9"]
SWEEP_FILE = SAMPLE / "pri_open.s1p"

# How each command takes an input file: (name, args given the input path and an output folder).
USES = [
    ("analyze", lambda p, out: ["analyze", p, "--no-record"]),
    ("analyze --json", lambda p, out: ["analyze", p, "--json", "--no-record"]),
    ("report", lambda p, out: ["report", p, "-o", out / "r.html"]),
    ("core", lambda p, out: ["core", p, *TOROID]),
    ("compare", lambda p, out: ["compare", p, SAMPLE, "--db", out / "db.sqlite3"]),
    ("export", lambda p, out: ["export", p, "--spice", out / "x.cir"]),
    ("batch", lambda p, out: ["batch", p, "--workers", "1"]),
    ("acquire --profile", lambda p, out: ["acquire", "-r", "sim", "-p", p, "-o", out / "x.s1p"]),
]

PLAN = ["plan", "--source", "50", "--load", "450", "--lowest", "1M", "--al", "1000"]

# Bad options and arguments, given an output folder.
BAD_OPTIONS = {
    "analyze --turns 3-9": lambda out: ["analyze", SWEEP_FILE, "--turns", "3-9"],
    "analyze --turns 0:5": lambda out: ["analyze", SWEEP_FILE, "--turns", "0:5"],
    "analyze --turns 1000000000:1": lambda out: ["analyze", SWEEP_FILE, "--turns", "1000000000:1"],
    "analyze --termination ground": lambda out: ["analyze", SWEEP_FILE, "--termination", "ground"],
    "analyze --termination -5": lambda out: ["analyze", SWEEP_FILE, "--termination", "-5"],
    "analyze --port1 tertiary": lambda out: ["analyze", SWEEP_FILE, "--port1", "tertiary"],
    "analyze --plan x": lambda out: ["analyze", SAMPLE, "--plan", "x"],
    "analyze --plan 50:450": lambda out: ["analyze", SAMPLE, "--plan", "50:450"],
    "analyze --plan 1e300:450:1M": lambda out: ["analyze", SAMPLE, "--plan", "1e300:450:1M"],
    "analyze --plan 50:450:1e-300": lambda out: ["analyze", SAMPLE, "--plan", "50:450:1e-300"],
    "analyze --plan high below low": lambda out: ["analyze", SAMPLE, "--plan", "50:450:30M:1M"],
    "analyze --return-loss -3": lambda out: ["analyze", SAMPLE, "--return-loss", "-3"],
    "analyze --return-loss 1e300": lambda out: ["analyze", SAMPLE, "--return-loss", "1e300"],
    "analyze manifest plus file": lambda out: ["analyze", SAMPLE / "manifest.toml", SWEEP_FILE],
    "analyze same file twice": lambda out: ["analyze", SWEEP_FILE, SWEEP_FILE],
    "analyze --db folder": lambda out: ["analyze", SAMPLE, "--db", out],
    "analyze --report into a missing folder": lambda out: ["analyze", SAMPLE, "--no-record",
                                                           "--report", out / "no" / "such" / "r.html"],
    "plan --source abc": lambda out: [*PLAN, "--source", "abc"],
    "plan --source 0": lambda out: [*PLAN, "--source", "0"],
    "plan --source 1e300": lambda out: [*PLAN, "--source", "1e300"],
    "plan --load 1e-300": lambda out: [*PLAN, "--load", "1e-300"],
    "plan --lowest nan": lambda out: [*PLAN, "--lowest", "nan"],
    "plan --al -1": lambda out: [*PLAN, "--al", "-1"],
    "plan --al 1e300": lambda out: [*PLAN, "--al", "1e300"],
    "plan --al-unit furlong": lambda out: [*PLAN, "--al-unit", "furlong"],
    "plan --max-turns 0": lambda out: [*PLAN, "--max-turns", "0"],
    "plan --max-turns 1e8": lambda out: [*PLAN, "--max-turns", "100000000"],
    "plan --highest below": lambda out: [*PLAN, "--highest", "100k"],
    "plan --reactance-factor inf": lambda out: [*PLAN, "--reactance-factor", "inf"],
    "core --turns 0": lambda out: ["core", SWEEP_FILE, "--turns", "0", "--toroid", "12.7,7.1,4.9"],
    "core --toroid 1,2": lambda out: ["core", SWEEP_FILE, "--turns", "5", "--toroid", "1,2"],
    "core --toroid ID above OD": lambda out: ["core", SWEEP_FILE, "--turns", "5", "--toroid", "7,12,4"],
    "core --toroid 1e300": lambda out: ["core", SWEEP_FILE, "--turns", "5", "--toroid", "1e300,1,1"],
    "core --effective 0,0": lambda out: ["core", SWEEP_FILE, "--turns", "5", "--effective", "0,0"],
    "core --method sideways": lambda out: ["core", SWEEP_FILE, *TOROID, "--method", "sideways"],
    "core --loss-at x": lambda out: ["core", SWEEP_FILE, *TOROID, "--loss-at", "x"],
    "core --plot .xyz": lambda out: ["core", SWEEP_FILE, *TOROID, "--plot", out / "p.xyz"],
    "core no size": lambda out: ["core", SWEEP_FILE, "--turns", "5"],
    "export --points 1": lambda out: ["export", SAMPLE, "--spice", out / "x.cir", "--points", "1"],
    "export --points 1e9": lambda out: ["export", SAMPLE, "--spice", out / "x.cir", "--points", "1000000000"],
    "export --z0 -50": lambda out: ["export", SAMPLE, "--touchstone", out / "x.s2p", "--z0", "-50"],
    "export --z0 1e300": lambda out: ["export", SAMPLE, "--touchstone", out / "x.s2p", "--z0", "1e300"],
    "export stop below start": lambda out: ["export", SAMPLE, "--touchstone", out / "x.s2p", "--start", "10M",
                                            "--stop", "1M"],
    "export .s1p model": lambda out: ["export", SAMPLE, "--touchstone", out / "x.s1p"],
    "export into a missing folder": lambda out: ["export", SAMPLE, "--spice", out / "no" / "x.cir"],
    "export nothing": lambda out: ["export", SAMPLE],
    "history --limit 0": lambda out: ["history", "--limit", "0"],
    "history --export 999": lambda out: ["history", "--export", "999", out / "dir"],
    "history --db junk": lambda out: ["history", "--db", SWEEP_FILE],
    "history --db folder": lambda out: ["history", "--db", out],
    "compare @999 @998": lambda out: ["compare", "@999", "@998"],
    "compare missing": lambda out: ["compare", out / "a.toml", out / "b.toml"],
    "compare bad reference": lambda out: ["compare", "@x!", "@latest:"],
    "batch no match": lambda out: ["batch", str(out / "nothing*" / "*.toml")],
    "batch --workers 0": lambda out: ["batch", SAMPLE, "--workers", "0"],
    "acquire bad extension": lambda out: ["acquire", "-r", "sim", "-p", "vna-scpi-trace", "-o", out / "x.txt"],
    "acquire bad sweep": lambda out: ["acquire", "-r", "sim", "-p", "vna-scpi-trace", "-o", out / "x.s1p",
                                      "--sweep", "1M:100k:10"],
    "acquire unknown profile": lambda out: ["acquire", "-r", "sim", "-p", "no-such", "-o", out / "x.s1p"],
    "acquire-set not toml": lambda out: ["acquire-set", out / "m.txt", "-r", "sim", "-p", "vna-scpi-trace"],
    "core --materials fifo": lambda out: ["core", SWEEP_FILE, *TOROID, "--materials", _fifo(out)],
    "core --materials deep": lambda out: ["core", SWEEP_FILE, *TOROID, "--materials",
                                          _write(out / "m.toml", "a = " + "[" * 999 + "]" * 999)],
    "core --materials binary": lambda out: ["core", SWEEP_FILE, *TOROID, "--materials",
                                            _write(out / "m.toml", "\udcff\x00")],
    "core --materials missing": lambda out: ["core", SWEEP_FILE, *TOROID, "--materials", out / "none.toml"],
    "acquire --profiles-dir fifo": lambda out: ["acquire", "-r", "sim", "-p", "x", "-o", out / "x.s1p",
                                                "--profiles-dir", _fifo(out)],
    "acquire --profile deep": lambda out: ["acquire", "-r", "sim", "-o", out / "x.s1p", "-p",
                                           _write(out / "p.toml", "a = " + "{b = " * 999 + "1" + "}" * 999)],
    "unknown command": lambda out: ["frobnicate"],
    "unknown option": lambda out: ["analyze", SAMPLE, "--frobnicate"],
    "missing argument": lambda out: ["report"],
}

def _fifo(folder: Path) -> Path:
    path = folder / "fifo.toml"
    os.mkfifo(path)
    return path


def _write(path: Path, text: str) -> Path:
    path.write_bytes(text.encode("utf-8", "surrogateescape"))
    return path


FORBIDDEN = re.compile(r"internal error|Traceback|RuntimeWarning|MarkupError")


def run(args, seconds=120):
    """One command in-process; an alarm turns a hang into a failure."""
    def alarm(signum, frame):
        raise AssertionError(f"blocked: rfmeas {' '.join(map(str, args))}")

    old = signal.signal(signal.SIGALRM, alarm)
    signal.alarm(seconds)
    try:
        result = CliRunner().invoke(app, [str(a) for a in args])
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
    return result


def check(result, what):
    text = result.stdout + result.stderr
    assert not FORBIDDEN.search(text), f"{what}:\n{text[-2000:]}"
    assert result.exit_code in (1, 2), f"{what}: exit {result.exit_code}\n{text[-2000:]}"
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        raise AssertionError(f"{what}: raised {result.exception!r}")


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    return build_corpus(tmp_path_factory.mktemp("corpus"))


def test_the_corpus_is_what_the_readme_says(corpus):
    # README "Reliability" quotes these figures; change both together.
    assert len(corpus) == 44
    assert len(USES) == 8 and len(BAD_OPTIONS) == 68


@pytest.mark.parametrize("use", [name for name, _ in USES])
def test_every_command_refuses_every_broken_input(corpus, use, tmp_path, monkeypatch):
    monkeypatch.setenv("RFMEAS_DB", str(tmp_path / "db.sqlite3"))
    make = dict(USES)[use]
    failures = []
    for name, path in corpus.items():
        out = tmp_path / re.sub(r"\W", "_", name)
        out.mkdir()
        try:
            check(run(make(Path(path), out)), f"{use} {name}")
        except AssertionError as exc:
            failures.append(str(exc))
    assert not failures, "\n\n".join(failures)


@pytest.mark.parametrize("case", sorted(BAD_OPTIONS))
def test_every_bad_option_is_refused(case, tmp_path):
    check(run(BAD_OPTIONS[case](tmp_path)), case)
