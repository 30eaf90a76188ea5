"""Regressions of the hostile-input probe: each test reproduces one failure it found (a hang, an
internal error, a silent double count, unbounded work, markup or escapes reaching the terminal, a
library warning on stderr) and checks the one clear line that replaces it."""

from __future__ import annotations

import os
import shutil
import signal
import socket
import sys
import tempfile
import warnings
from contextlib import contextmanager
from pathlib import Path

import numpy as np
import pytest
import skrf as rf
from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.errors import InputError
from rfmeas.io import files, touchstone
from rfmeas.measurement.manifest import load_manifest, measurement_set_from_files
from rfmeas.io.strict import MAX_TOML_DEPTH, parse_toml
from rfmeas.io.touchstone import read_touchstone, write_touchstone
from rfmeas.measurement.sweep import MAX_SWEEPS, Sweep, thin_for_fit
from rfmeas.usertext import markup, plain

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data" / "coupler-after"
ONE_PORT = "# MHz S RI R 50\n1 0.1 0.2\n2 0.1 0.3\n3 0.2 0.3\n4 0.2 0.35\n"


def invoke(*args):
    result = CliRunner().invoke(app, [str(a) for a in args])
    return result.exit_code, result.stdout, result.stderr


def one_error_line(code, stdout, stderr, *words):
    """Exit 2 and exactly one stderr line holding every word; no traceback, no internal error."""
    assert code == 2, (code, stdout, stderr)
    lines = stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), stderr
    for word in words:
        assert word in lines[0], f"{word!r} not in {lines[0]!r}"
    assert "Traceback" not in stdout + stderr and "internal error" not in stderr
    return lines[0]


@contextmanager
def no_hang(seconds=30):
    """Fail (instead of blocking the suite) if the body takes longer than `seconds`."""
    def alarm(signum, frame):
        raise AssertionError(f"blocked for {seconds} s")

    old = signal.signal(signal.SIGALRM, alarm)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


def copy_sample(tmp_path, name="set") -> Path:
    folder = tmp_path / name
    shutil.copytree(SAMPLE, folder)
    return folder


# ---------------------------------------------------------------- hangs: regular files only

def test_a_fifo_on_the_command_line_is_refused_without_blocking(tmp_path):
    fifo = tmp_path / "sweep.s1p"
    os.mkfifo(fifo)
    with no_hang():
        one_error_line(*invoke("analyze", fifo), "sweep.s1p", "named pipe (FIFO)", "regular files only")


def test_a_fifo_named_by_a_manifest_is_refused_without_blocking(tmp_path):
    os.mkfifo(tmp_path / "pri.s1p")
    (tmp_path / "manifest.toml").write_text('[[sweep]]\nfile = "pri.s1p"\ntermination = "open"\n')
    with no_hang():
        one_error_line(*invoke("analyze", tmp_path), "pri.s1p", "named pipe (FIFO)")


@pytest.mark.parametrize("what", ["manifest", "fixture", "profile", "materials"])
def test_a_fifo_as_any_toml_input_is_refused_without_blocking(tmp_path, what):
    fifo = tmp_path / "input.toml"
    os.mkfifo(fifo)
    (tmp_path / "pri.s1p").write_text(ONE_PORT)
    args = {
        "manifest": ["analyze", fifo],
        "fixture": ["analyze", tmp_path / "manifest.toml"],
        "profile": ["acquire", "-r", "sim", "-p", "x", "-o", tmp_path / "out.s1p", "--profiles-dir", tmp_path],
        "materials": ["core", tmp_path / "pri.s1p", "--turns", "5", "--toroid", "12.7,7.1,4.9",
                      "--materials", fifo],
    }[what]
    if what == "fixture":
        (tmp_path / "manifest.toml").write_text(
            '[[sweep]]\nfile = "pri.s1p"\ntermination = "open"\nfixture = "input.toml"\n')
    with no_hang():
        code, stdout, stderr = invoke(*args)
    assert code == 2 and "Traceback" not in stderr and "internal error" not in stderr, stderr
    assert "input.toml" in stderr


def test_devices_sockets_and_folders_are_refused_before_opening(tmp_path):
    short = tempfile.TemporaryDirectory(dir="/tmp")  # a socket path must stay under 108 bytes
    sock_path = Path(short.name) / "s.s1p"
    server = socket.socket(socket.AF_UNIX)
    server.bind(str(sock_path))
    try:
        for path, kind in ((Path("/dev/zero"), "a device"), (sock_path, "a socket"),
                           (tmp_path, "a folder")):
            with no_hang(), pytest.raises(InputError, match=kind):
                files.read_regular_file(path, "Touchstone file")
    finally:
        server.close()
        short.cleanup()


def test_a_file_swapped_for_a_fifo_after_the_check_does_not_block(tmp_path, monkeypatch):
    fifo = tmp_path / "late.s1p"
    os.mkfifo(fifo)
    # The check saw a regular file; the open must still not block, and fstat catches the swap.
    monkeypatch.setattr(files, "check_regular_file", lambda path, what: os.stat(__file__))
    with no_hang(), pytest.raises(InputError, match="named pipe"):
        files.read_regular_file(fifo, "Touchstone file")


def test_one_size_rule_for_every_reader(tmp_path):
    big = tmp_path / "big.toml"
    with open(big, "wb") as fh:
        fh.truncate(files.MAX_TOML_BYTES + 1)
    for read in (lambda: load_manifest(big), lambda: files.read_regular_file(big, "profile")):
        with pytest.raises(InputError, match="too large for a"):
            read()


# ---------------------------------------------------------------- internal errors -> one line

def test_a_toml_manifest_nested_a_thousand_levels_deep(tmp_path):
    manifest = tmp_path / "manifest.toml"
    manifest.write_text("a = " + "[" * 1000 + "]" * 1000 + "\n")
    one_error_line(*invoke("analyze", manifest), "manifest.toml", "nest")
    # Inline tables too; and nesting inside strings or comments does not count.
    with pytest.raises(InputError, match="nest more than"):
        parse_toml("a = " + "{b = " * 500 + "1" + "}" * 500, "x.toml")
    deep_text = "[" * (MAX_TOML_DEPTH + 5)
    assert parse_toml(f'a = "{deep_text}" # {deep_text}\nb = [[1]]', "x.toml")["a"] == deep_text


def test_a_recursion_error_from_the_parser_is_reworded(monkeypatch):
    def recurse(text):
        raise RecursionError("maximum recursion depth exceeded")

    monkeypatch.setattr("rfmeas.io.strict.tomllib.loads", recurse)
    with pytest.raises(InputError, match="nested too deeply"):
        parse_toml("a = 1", "x.toml")


@pytest.mark.parametrize("key", ["source_impedance_ohm", "load_impedance_ohm", "lowest_frequency_Hz",
                                 "reactance_factor", "return_loss_dB"])
@pytest.mark.parametrize("value", ["1e-300", "1e300"])
def test_extreme_design_numbers_are_refused_naming_the_key(tmp_path, key, value):
    folder = copy_sample(tmp_path)
    text = (folder / "manifest.toml").read_text()
    lines = [line for line in text.splitlines() if not line.startswith(key)]
    at = lines.index("[design]") + 1
    lines.insert(at, f"{key} = {value}")
    (folder / "manifest.toml").write_text("\n".join(lines) + "\n")
    one_error_line(*invoke("analyze", folder, "--no-record"), "manifest.toml", f"design.{key}",
                   "plausible range")


def test_extreme_turns_and_design_options_are_refused(tmp_path):
    folder = copy_sample(tmp_path)
    text = (folder / "manifest.toml").read_text().replace("primary_turns = 5", "primary_turns = 1e300")
    (folder / "manifest.toml").write_text(text)
    one_error_line(*invoke("analyze", folder), "transformer.primary_turns", "plausible range")
    one_error_line(*invoke("analyze", SAMPLE, "--no-record", "--plan", "1e300:450:1M"), "--plan source")
    one_error_line(*invoke("analyze", SAMPLE, "--no-record", "--plan", "50:450:1e-300"), "--plan lowest")
    one_error_line(*invoke("analyze", SAMPLE, "--no-record", "--return-loss", "1e300"), "--return-loss")
    for option, value in (("--source", "1e-300"), ("--load", "1e300"), ("--lowest", "1e-300"),
                          ("--al", "1e300")):
        args = {"--source": "50", "--load": "450", "--lowest": "1M", "--al": "1000"}
        args[option] = value
        flat = [x for pair in args.items() for x in pair]
        one_error_line(*invoke("plan", *flat), option, "plausible range")
    one_error_line(*invoke("plan", "--source", "50", "--load", "450", "--lowest", "1M", "--al", "1000",
                           "--max-turns", "100000000"), "--max-turns")


@pytest.mark.parametrize("row, words", [
    ("2.5 1e300 0", ("magnitude 1e+300", "passive")),
    ("1e300 0.1 0.2", ("outside", "Hz")),
])
def test_extreme_values_in_a_sweep_are_refused_naming_the_file(tmp_path, row, words):
    path = tmp_path / "wild.s1p"
    path.write_text(ONE_PORT.replace("# MHz", "# Hz") + row + "\n" if "1e300 0.1" in row
                    else ONE_PORT + row + "\n")
    one_error_line(*invoke("analyze", path), "wild.s1p", *words)


def test_a_dollar_in_file_and_unit_names_reaches_the_report_as_text(tmp_path):
    folder = copy_sample(tmp_path)
    odd = "p$\\frac$.s1p"
    (folder / "pri_open.s1p").rename(folder / odd)
    text = (folder / "manifest.toml").read_text().replace('"pri_open.s1p"', '"p$\\\\frac$.s1p"')
    text = text.replace('name = "ladder-line coupler, unit 3"', 'name = "unit $x$ [/] <b>"')
    (folder / "manifest.toml").write_text(text)
    report = tmp_path / "report.html"
    code, stdout, stderr = invoke("report", folder, "-o", report)
    assert code in (0, 1), stderr
    html = report.read_text(encoding="utf-8")
    assert "p$\\frac$.s1p" in html and "unit $x$ [/] &lt;b&gt;" in html and "<b>\"" not in html


# ---------------------------------------------------------------- evidence counted twice

def test_the_same_sweep_listed_twice_is_refused_naming_both(tmp_path):
    folder = copy_sample(tmp_path)
    with open(folder / "manifest.toml", "a") as fh:
        fh.write('\n[[sweep]]\nfile = "./pri_open.s1p"\nport1 = "primary"\ntermination = "open"\n')
    line = one_error_line(*invoke("analyze", folder, "--no-record"), "sweep 5 ('./pri_open.s1p')",
                          "sweep 1 ('pri_open.s1p')", "same file")
    assert "standard error" in line


def test_a_byte_identical_copy_taken_the_same_way_is_refused(tmp_path):
    folder = copy_sample(tmp_path)
    shutil.copy(folder / "pri_open.s1p", folder / "pri_open_again.s1p")
    with open(folder / "manifest.toml", "a") as fh:
        fh.write('\n[[sweep]]\nfile = "pri_open_again.s1p"\nport1 = "primary"\ntermination = "open"\n')
    one_error_line(*invoke("analyze", folder, "--no-record"), "pri_open_again.s1p", "pri_open.s1p",
                   "same data")
    one_error_line(*invoke("analyze", folder / "pri_open.s1p", folder / "pri_open_again.s1p", "--no-record"),
                   "same data")


def test_identical_data_taken_two_ways_is_kept_with_a_warning(tmp_path):
    path = tmp_path / "a.s1p"
    path.write_text(ONE_PORT)
    shutil.copy(path, tmp_path / "b.s1p")
    (tmp_path / "manifest.toml").write_text(
        '[[sweep]]\nfile = "a.s1p"\ntermination = "open"\n'
        '[[sweep]]\nfile = "b.s1p"\nport1 = "secondary"\ntermination = "open"\n')
    m = load_manifest(tmp_path / "manifest.toml")
    assert any("same data as sweep 1" in w for w in m.sweeps[1].warnings)


# ---------------------------------------------------------------- unbounded work

def test_too_many_sweeps_are_refused_before_any_file_is_read(tmp_path):
    entries = "".join(f'[[sweep]]\nfile = "missing{i}.s1p"\ntermination = "open"\n'
                      for i in range(MAX_SWEEPS + 1))
    (tmp_path / "manifest.toml").write_text(entries)
    one_error_line(*invoke("analyze", tmp_path), f"{MAX_SWEEPS + 1} sweeps", f"at most {MAX_SWEEPS}")
    many = [tmp_path / f"f{i}.s1p" for i in range(MAX_SWEEPS + 1)]
    with pytest.raises(InputError, match="sweeps listed"):
        measurement_set_from_files(many)


def test_a_sweep_over_the_point_cap_is_refused_while_parsing(tmp_path, monkeypatch):
    monkeypatch.setattr(touchstone, "MAX_POINTS", 3)
    path = tmp_path / "long.s1p"
    path.write_text(ONE_PORT)
    with pytest.raises(InputError, match="line 5: more than 3 frequency points"):
        read_touchstone(path)


def _sweep(points):
    f = np.logspace(5, 8, points)
    net = rf.Network(frequency=rf.Frequency.from_f(f, unit="Hz"), s=np.full(points, 0.1 + 0.2j), z0=50)
    return Sweep(network=net, port1="primary", termination="open", label="x")


def test_long_sweeps_are_thinned_for_the_fit_with_a_note():
    short, long_ = _sweep(50), _sweep(1001)
    out = thin_for_fit([short, long_], per_sweep=101, total=10_000)
    assert out[0] is short
    kept = out[1].f_Hz
    assert kept.size <= 101 and kept[0] == long_.f_Hz[0] and kept[-1] == long_.f_Hz[-1]
    assert np.all(np.isin(kept, long_.f_Hz)) and np.all(np.diff(kept) > 0)
    assert any("1,001 points" in w and "one point in" in w for w in out[1].warnings)
    # the total budget is shared between the sweeps
    both = thin_for_fit([_sweep(1001), _sweep(1001)], per_sweep=10_000, total=400)
    assert all(s.f_Hz.size <= 200 for s in both)


# ---------------------------------------------------------------- terminal text

@pytest.mark.parametrize("text, shown", [
    ("backup[old]/x.s1p", "backup[old]/x.s1p"),
    ("a[/]b.s1p", "a[/]b.s1p"),
    ("[bold]x", "[bold]x"),
    ("red\x1b[31mx", "red\\x1b[31mx"),
    ("nul\x00x", "nul\\x00x"),
    ("two\nlines", "two\\nlines"),
    ("bidi\u202ex", "bidi\\u202ex"),
    (os.fsdecode(b"latin\xff.s1p"), "latin\\xff.s1p"),
])
def test_user_text_is_shown_verbatim_and_visible(text, shown):
    from rich.console import Console

    assert plain(text) == shown
    console = Console(record=True, width=200, file=open(os.devnull, "w"))
    console.print(f"[bold]{markup(text)}[/]")
    assert console.export_text().strip() == shown


def test_error_lines_on_a_terminal_are_not_read_as_markup(monkeypatch, capsys):
    from rfmeas.commands._common import report_error

    monkeypatch.setattr(sys.stderr, "isatty", lambda: True)
    report_error("backup[old]/x.s1p: [/] file not found\x1b[2J")
    err = capsys.readouterr().err
    assert "backup[old]/x.s1p: [/] file not found\\x1b[2J" in err and "\x1b[2J" not in err


def test_markup_and_escapes_in_paths_reach_stderr_verbatim(tmp_path):
    for name in ("backup[old]", "b[/]", "e\x1b[31m"):
        line = one_error_line(*invoke("analyze", tmp_path / name / "x.s1p"), "not found")
        assert plain(name) in line and "\x1b" not in line


def test_control_characters_in_names_are_refused(tmp_path):
    (tmp_path / "pri.s1p").write_text(ONE_PORT)
    (tmp_path / "manifest.toml").write_text(
        '[transformer]\nname = "unit\\u001b[31m7"\n[[sweep]]\nfile = "pri.s1p"\ntermination = "open"\n')
    one_error_line(*invoke("analyze", tmp_path), "transformer.name", "control character", "\\x1b")


# ---------------------------------------------------------------- warnings never reach a user

def test_library_warnings_go_to_the_log_not_the_terminal(monkeypatch):
    import rfmeas.analysis

    def noisy(measurement):
        warnings.warn("overflow encountered in multiply", RuntimeWarning)
        raise InputError("stop here")

    monkeypatch.setattr(rfmeas.analysis, "analyze", noisy)
    with warnings.catch_warnings():
        warnings.simplefilter("always")
        code, stdout, stderr = invoke("analyze", SAMPLE, "--no-record")
    assert code == 2 and "RuntimeWarning" not in stderr + stdout and "overflow" not in stderr


def _readers():
    from rfmeas.measurement.fixture import load_fixture
    from rfmeas.instruments.profiles import load_profile_file
    from rfmeas.io.readings import load_readings
    from rfmeas.magnetics.materials import load_materials

    return {
        "sweep.s1p": read_touchstone, "manifest.toml": load_manifest, "fixture.toml": load_fixture,
        "profile.toml": load_profile_file, "materials.toml": lambda p: load_materials(p, use_environment=False),
        "readings.csv": load_readings, "readings.toml": load_readings,
    }


@pytest.mark.parametrize("name", sorted(_readers()))
def test_every_reader_refuses_a_fifo_and_deep_toml(tmp_path, name):
    read = _readers()[name]
    fifo = tmp_path / name
    os.mkfifo(fifo)
    with no_hang(), pytest.raises(InputError, match="named pipe") as info:
        read(fifo)
    assert info.value.path == str(fifo)
    if name.endswith(".toml"):
        deep = tmp_path / "deep" / name
        deep.parent.mkdir()
        deep.write_text("a = " + "[" * 1000 + "]" * 1000 + "\n")
        with pytest.raises(InputError, match="nest"):
            read(deep)
