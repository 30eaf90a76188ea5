"""Bad input through the real command line: exit code 2, one line on stderr that names the
file and the problem, never a traceback; and a write that fails half-way leaves the
previous output file as it was."""

from __future__ import annotations

import errno
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import skrf as rf
from typer.testing import CliRunner

import rfmeas.io.atomic
from rfmeas.cli import app
from rfmeas.errors import InputError
from rfmeas.io.touchstone import read_touchstone, write_touchstone

ROOT = Path(__file__).resolve().parents[1]
GOOD_ONE_PORT = "# MHz S RI R 50\n1 0.1 0.2\n2 0.1 0.3\n3 0.2 0.3\n"

# file name -> (content, words the one error line must hold besides the file name)
BAD_FILES = {
    "empty.s1p": ("", ("empty",)),
    "prose.s1p": ("These are my notes on the winding.\n", ("not a Touchstone file",)),
    "columns.s1p": ("# MHz S RI R 50\n1 0.1 0.2 0.3\n2 0.1 0.2\n", ("numbers", "needs 3")),
    "nan.s1p": ("# MHz S RI R 50\n1 0.1 0.2\n2 nan 0.2\n3 0.1 0.2\n", ("nan",)),
    "option.s1p": ("# MHz S RI R 50 FAST\n1 0.1 0.2\n2 0.1 0.2\n3 0.1 0.2\n", ("unknown option", "FAST")),
    "binary.s2p": ("\x00\x01\x02junk", ("binary",)),
}


def invoke(*args):
    result = CliRunner().invoke(app, [str(a) for a in args])
    return result.exit_code, result.stdout, result.stderr


def assert_one_error_line(code, stdout, stderr, name, *words):
    assert code == 2, (stdout, stderr)
    lines = stderr.strip().splitlines()
    assert len(lines) == 1, stderr
    line = lines[0]
    assert line.startswith("error: ") and name in line, line
    for word in words:
        assert word in line, f"{word!r} not in {line!r}"
    assert "Traceback" not in stdout + stderr
    assert "internal error" not in line


@pytest.mark.parametrize("name", sorted(BAD_FILES))
def test_bad_touchstone_files(tmp_path, name):
    content, words = BAD_FILES[name]
    (tmp_path / name).write_text(content, encoding="latin-1")
    assert_one_error_line(*invoke("analyze", tmp_path / name), name, *words)


@pytest.mark.parametrize("name", sorted(BAD_FILES))
def test_bad_touchstone_files_named_by_a_manifest(tmp_path, name):
    content, words = BAD_FILES[name]
    (tmp_path / name).write_text(content, encoding="latin-1")
    (tmp_path / "manifest.toml").write_text(f'[[sweep]]\nfile = "{name}"\ntermination = "open"\n')
    assert_one_error_line(*invoke("analyze", tmp_path / "manifest.toml"), name, *words)


def test_a_folder_without_manifest(tmp_path):
    folder = tmp_path / "unit7"
    folder.mkdir()
    assert_one_error_line(*invoke("analyze", folder), "unit7", "without a manifest.toml")


def test_a_missing_touchstone_file(tmp_path):
    assert_one_error_line(*invoke("analyze", tmp_path / "gone.s1p"), "gone.s1p", "not found")


def test_a_missing_manifest(tmp_path):
    assert_one_error_line(*invoke("analyze", tmp_path / "gone.toml"), "gone.toml", "file not found", "no such manifest")


def test_a_manifest_with_an_unknown_key(tmp_path):
    (tmp_path / "pri.s1p").write_text(GOOD_ONE_PORT)
    manifest = tmp_path / "manifest.toml"
    manifest.write_text('[transformer]\nname = "x"\nturns = 3\n[[sweep]]\nfile = "pri.s1p"\ntermination = "open"\n')
    assert_one_error_line(*invoke("analyze", manifest), "manifest.toml", "unknown key 'turns'", "[transformer]")


def test_a_manifest_with_a_typo_in_a_sweep(tmp_path):
    (tmp_path / "pri.s1p").write_text(GOOD_ONE_PORT)
    manifest = tmp_path / "manifest.toml"
    manifest.write_text('[[sweep]]\nfile = "pri.s1p"\ntermnation = "open"\n')
    assert_one_error_line(*invoke("analyze", manifest), "manifest.toml", "unknown key 'termnation'", "sweep 1")


def test_bad_options_without_a_manifest(tmp_path):
    (tmp_path / "pri.s1p").write_text(GOOD_ONE_PORT)
    assert_one_error_line(*invoke("analyze", tmp_path / "pri.s1p", "--turns", "3-9"), "--turns", "3:9")
    assert_one_error_line(*invoke("analyze", tmp_path / "pri.s1p", "--termination", "ground"), "--termination")


def _sparse_junk(path: Path, size_bytes: int = 100 * 2**20) -> Path:
    with open(path, "wb") as fh:
        fh.truncate(size_bytes)  # sparse: no disk space used, yet stat() says 100 MB
    return path


def test_a_100_MB_junk_file_is_refused(tmp_path):
    junk = _sparse_junk(tmp_path / "junk.s2p")
    assert_one_error_line(*invoke("analyze", junk), "junk.s2p", "100 MB")


def test_a_100_MB_manifest_is_refused(tmp_path):
    junk = _sparse_junk(tmp_path / "manifest.toml")
    assert_one_error_line(*invoke("analyze", junk), "manifest.toml", "too large")


def _run_cli(*args, timeout_s=60):
    """The CLI as a user runs it; the timeout only guards against a hang."""
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run([sys.executable, "-m", "rfmeas.cli", *map(str, args)], capture_output=True,
                          text=True, timeout=timeout_s, cwd=ROOT, env=env)


def test_a_real_process_refuses_bad_input(tmp_path):
    bad = tmp_path / "prose.s1p"
    bad.write_text("These are my notes on the winding.\n")
    done = _run_cli("analyze", bad)
    assert_one_error_line(done.returncode, done.stdout, done.stderr, "prose.s1p", "not a Touchstone file")


def test_a_real_process_refuses_a_100_MB_junk_file(tmp_path):
    done = _run_cli("analyze", _sparse_junk(tmp_path / "junk.s1p"))
    assert_one_error_line(done.returncode, done.stdout, done.stderr, "junk.s1p", "100 MB")


def test_not_a_transformer_is_one_line_and_exit_2(tmp_path):
    """Every sweep a dead short: refused with the reason, no numbers printed."""
    f = np.logspace(5, 8, 21)
    for name in ("pri_open", "sec_open"):
        write_touchstone(rf.Network(frequency=rf.Frequency.from_f(f, unit="Hz"), s=-np.ones(f.size), z0=50),
                         tmp_path / f"{name}.s1p")
    (tmp_path / "manifest.toml").write_text(
        '[[sweep]]\nfile = "pri_open.s1p"\ntermination = "open"\n'
        '[[sweep]]\nfile = "sec_open.s1p"\nport1 = "secondary"\ntermination = "open"\n')
    code, stdout, stderr = invoke("analyze", tmp_path)
    assert_one_error_line(code, stdout, stderr, "manifest.toml", "does not look like a two-winding transformer",
                          "pri_open.s1p", "short circuit")
    assert stdout == ""


# ---------------------------------------------------------------- a crash half-way through a write

def _network():
    f = np.logspace(5, 8, 11)
    return rf.Network(frequency=rf.Frequency.from_f(f, unit="Hz"), s=np.full(f.size, 0.5 + 0.1j), z0=50)


def _half_then_fail(exc):
    """An os.write that writes half the data, then fails like a full disk or a kill."""
    real_write = os.write

    def write(fd, data):
        real_write(fd, bytes(data[: max(1, len(data) // 2)]))
        raise exc

    return write


def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


@pytest.mark.parametrize("failure", ["replace", "disk full", "killed"])
def test_write_touchstone_keeps_the_previous_file(tmp_path, monkeypatch, failure):
    target = tmp_path / "model.s1p"
    target.write_text(GOOD_ONE_PORT)
    if failure == "replace":
        monkeypatch.setattr(rfmeas.io.atomic.os, "replace", _raise(OSError(errno.EIO, "I/O error")))
    else:
        exc = OSError(errno.ENOSPC, "No space left on device") if failure == "disk full" else KeyboardInterrupt()
        monkeypatch.setattr(rfmeas.io.atomic.os, "write", _half_then_fail(exc))
    with pytest.raises((InputError, KeyboardInterrupt)):
        write_touchstone(_network(), target)
    monkeypatch.undo()
    assert target.read_text() == GOOD_ONE_PORT
    assert read_touchstone(target).network.f.size == 3
    assert _leftovers(tmp_path) == []


def _raise(exc):
    def fail(*args, **kwargs):
        raise exc

    return fail


@pytest.mark.parametrize("failure", ["replace", "disk full"])
def test_the_json_output_keeps_the_previous_file(tmp_path, monkeypatch, failure):
    """`rfmeas demo --out` writes one JSON file per sample set; a failed write leaves the old one."""
    previous = '{"name": "the run before"}\n'
    for name in ("coupler-before.json", "coupler-after.json"):
        (tmp_path / name).write_text(previous)
    if failure == "replace":
        monkeypatch.setattr(rfmeas.io.atomic.os, "replace", _raise(OSError(errno.EIO, "I/O error")))
    else:
        monkeypatch.setattr(rfmeas.io.atomic.os, "write",
                            _half_then_fail(OSError(errno.ENOSPC, "No space left on device")))
    code, stdout, stderr = invoke("demo", "--out", tmp_path)
    monkeypatch.undo()
    assert_one_error_line(code, stdout, stderr, ".json", "cannot write the file")
    for name in ("coupler-before.json", "coupler-after.json"):
        assert (tmp_path / name).read_text() == previous
    assert _leftovers(tmp_path) == []
