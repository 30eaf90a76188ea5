"""A damaged, foreign or read-only history store: one clear line, exit 2, and nothing else lost.

The failures once seen: 'database disk image is malformed' and records whose
JSON is not an object ("'list' object has no attribute 'get'") ended as
internal errors in `history`, `compare` and `history --export`; a read-only
store lost the analysis ('attempt to write a readonly database').
"""

import json
import os
import shutil
import sqlite3
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest
from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.history.store import HistoryStore

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data" / "coupler-before"
SWEEP = b"# MHz S RI R 50\n1 0.1 0.2\n2 0.3 0.4\n"


def result_for(name, L1_H=10e-6):
    return {"name": name, "parameters": {"primary_inductance_H": {"value": L1_H, "stderr": 1e-8}},
            "figures": {}, "design_check": {"passed": True}, "warnings": []}


def filled_store(db, n=4):
    with HistoryStore(db) as s:
        for i in range(n):
            s.record("unit", "[transformer]\n", [("a.s1p", SWEEP + str(i).encode())], result_for("unit", 1e-5 * (i + 1)))
    conn = sqlite3.connect(db)
    conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    conn.close()


def malformed_store(db):
    """A store whose header is intact but whose table pages are overwritten: 'malformed'."""
    filled_store(db, 30)
    data = bytearray(db.read_bytes())
    page = int.from_bytes(data[16:18], "big")
    for offset in range(page, len(data), page):  # every page but the first (the schema)
        data[offset + 8:offset + 400] = b"\xa5" * 392
    db.write_bytes(bytes(data))


def invoke(*args):
    res = CliRunner().invoke(app, [str(a) for a in args])
    assert res.exception is None or isinstance(res.exception, SystemExit), res.exception
    return res


def assert_one_clear_line(res, *words):
    lines = [line for line in res.stderr.splitlines() if line.strip()]
    assert res.exit_code == 2, res.output
    assert len(lines) == 1 and lines[0].startswith("error:"), res.stderr
    assert "internal error" not in res.stderr and "Traceback" not in res.stderr
    for word in words:
        assert word in lines[0], lines[0]


@pytest.mark.parametrize("make", ["malformed", "not sqlite", "empty pages"])
def test_broken_store_gives_one_line_in_every_command(tmp_path, make):
    db = tmp_path / "h.sqlite3"
    if make == "malformed":
        malformed_store(db)
    elif make == "not sqlite":
        db.write_bytes(b"PK\x03\x04 this is a zip archive, not a database" * 50)
    else:
        db.write_bytes(b"SQLite format 3\x00" + b"\x00" * 4080)
    for args in (["history", "--db", db], ["history", "--db", db, "--json"], ["compare", "@1", "@2", "--db", db],
                 ["compare", "@prev", "@latest", "--db", db], ["history", "--export", "1", tmp_path / "out", "--db", db]):
        assert_one_clear_line(invoke(*args), str(db))
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())


def test_analyze_with_a_broken_store_still_prints_the_analysis(tmp_path):
    db = tmp_path / "h.sqlite3"
    malformed_store(db)
    before = db.read_bytes()
    res = invoke("analyze", SAMPLE, "--json", "--db", db)
    assert_one_clear_line(res, "not kept")
    assert json.loads(res.stdout)["name"]  # the analysis is there, whole, on stdout
    assert db.read_bytes() == before  # the damaged file is left for the user to look at


def test_damaged_records_are_skipped_with_a_note(tmp_path):
    db = tmp_path / "h.sqlite3"
    filled_store(db, 5)
    conn = sqlite3.connect(db)
    conn.execute("UPDATE records SET result_json = '[1, 2, 3]' WHERE id = 2")
    conn.execute("UPDATE records SET result_json = '{\"name\": ' WHERE id = 4")
    conn.execute("UPDATE records SET result_json = '\"text\"' WHERE id = 5")
    conn.commit()
    conn.close()
    res = invoke("history", "--db", db, "--json")
    assert res.exit_code == 0, res.output
    data = json.loads(res.stdout)
    assert [r["id"] for r in data["records"]] == [3, 1]
    assert len(data["notes"]) == 3 and all("skipped" in n for n in data["notes"])
    res = invoke("history", "--db", db)
    assert res.exit_code == 0 and "record 2 is damaged" in res.stderr and "JSON list" in res.stderr
    # @latest passes over the damaged newest records; @prev over the damaged one between
    res = invoke("compare", "@prev", "@latest", "--db", db, "--json")
    assert res.exit_code == 0, res.output
    assert json.loads(res.stdout)["before"].startswith("@1") and json.loads(res.stdout)["after"].startswith("@3")
    res = invoke("history", "--export", "3", tmp_path / "good", "--db", db)
    assert res.exit_code == 0 and (tmp_path / "good" / "a.s1p").read_bytes() == SWEEP + b"2"
    assert_one_clear_line(invoke("history", "--export", "2", tmp_path / "bad", "--db", db), "record 2 is damaged")
    assert_one_clear_line(invoke("compare", "@4", "@3", "--db", db), "record 4 is damaged")


def test_record_with_missing_or_altered_file_content(tmp_path):
    db = tmp_path / "h.sqlite3"
    filled_store(db, 3)
    conn = sqlite3.connect(db)
    sha = conn.execute("SELECT sha256 FROM files WHERE record_id = 2").fetchone()[0]
    conn.execute("DELETE FROM blobs WHERE sha256 = ?", (sha,))
    sha = conn.execute("SELECT sha256 FROM files WHERE record_id = 3").fetchone()[0]
    conn.execute("UPDATE blobs SET content = x'00' WHERE sha256 = ?", (sha,))
    conn.commit()
    conn.close()
    assert_one_clear_line(invoke("history", "--export", "2", tmp_path / "x", "--db", db), "is missing")
    assert_one_clear_line(invoke("history", "--export", "3", tmp_path / "y", "--db", db), "sha256")
    with HistoryStore(db) as s:
        assert s.latest().id == 1 and len(s.notes) == 2


# --- read-only stores, tested as an unprivileged user ----------------------------------------

def _as_nobody(args, cwd):
    """Run `python -m rfmeas.cli ARGS` as the user 'nobody' (root drops its rights with setpriv)."""
    env = {"PATH": "/usr/bin:/bin", "PYTHONPATH": str(ROOT), "HOME": str(cwd), "OMP_NUM_THREADS": "1",
           "OPENBLAS_NUM_THREADS": "1"}
    cmd = ["setpriv", "--reuid=65534", "--regid=65534", "--clear-groups", sys.executable, "-m", "rfmeas.cli",
           *map(str, args)]
    return subprocess.run(cmd, capture_output=True, text=True, env=env, cwd=cwd, timeout=120)


@pytest.fixture
def world_readable_dir():
    if os.geteuid() != 0 or shutil.which("setpriv") is None:
        pytest.skip("needs root to run a command as an unprivileged user")
    folder = Path(tempfile.mkdtemp(prefix="rfmeas-ro-"))
    folder.chmod(0o755)
    probe = _as_nobody(["--help"], folder)
    if probe.returncode != 0:
        shutil.rmtree(folder)
        pytest.skip(f"the unprivileged user cannot run rfmeas from here: {probe.stderr.strip()[-200:]}")
    yield folder
    shutil.rmtree(folder)


@pytest.mark.parametrize("wal_files", [True, False])
def test_store_in_a_read_only_folder_is_readable(world_readable_dir, wal_files):
    store_dir = world_readable_dir / "store"
    store_dir.mkdir(mode=0o755)
    db = store_dir / "h.sqlite3"
    filled_store(db, 3)
    if wal_files:  # another connection open: the -wal and -shm files exist, owned by root
        holder = sqlite3.connect(db)
        holder.execute("SELECT 1 FROM records").fetchone()
    for p in store_dir.iterdir():
        p.chmod(0o644)
    try:
        res = _as_nobody(["history", "--db", db, "--json"], world_readable_dir)
        assert res.returncode == 0, res.stderr
        assert [r["id"] for r in json.loads(res.stdout)["records"]] == [3, 2, 1]
        res = _as_nobody(["history", "--export", "2", world_readable_dir / "out", "--db", db], store_dir.parent)
        assert res.returncode == 2 and res.stderr.startswith("error:")  # the folder is not the user's to write
        out = world_readable_dir / "out"
        out.mkdir()
        out.chmod(0o777)
        res = _as_nobody(["history", "--export", "2", out, "--db", db], world_readable_dir)
        assert res.returncode == 0, res.stderr
        assert (out / "a.s1p").read_bytes() == SWEEP + b"1"
    finally:
        if wal_files:
            holder.close()


def test_analyze_with_a_read_only_store_keeps_the_analysis(world_readable_dir):
    store_dir = world_readable_dir / "store"
    store_dir.mkdir(mode=0o755)
    db = store_dir / "h.sqlite3"
    filled_store(db, 1)
    for p in store_dir.iterdir():
        p.chmod(0o644)
    before = db.read_bytes()
    res = _as_nobody(["analyze", SAMPLE, "--json", "--db", db], world_readable_dir)
    assert res.returncode == 2, res.stderr
    assert json.loads(res.stdout)["name"]
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "read-only" in lines[0] and "not kept" in lines[0], res.stderr
    assert db.read_bytes() == before


def test_compare_of_records_whose_sections_are_damaged(tmp_path):
    db = tmp_path / "h.sqlite3"
    with HistoryStore(db) as s:
        s.record("unit", None, [], result_for("unit"))
        s.record("unit", None, [], {"name": "unit", "parameters": [1, 2], "figures": "none",
                                    "design_check": [True]})
    res = invoke("compare", "@1", "@2", "--db", db, "--json")
    assert res.exit_code == 0, res.output
    assert json.loads(res.stdout)["changes"] == {}


def test_a_tiny_foreign_file_is_not_taken_over(tmp_path):
    db = tmp_path / "notes.txt"
    db.write_bytes(b"x")
    res = invoke("analyze", SAMPLE, "--json", "--db", db)
    assert_one_clear_line(res, "not an SQLite database", "not kept")
    assert db.read_bytes() == b"x"


def test_a_fifo_as_the_store_is_refused_without_blocking(tmp_path):
    fifo = tmp_path / "h.sqlite3"
    os.mkfifo(fifo)
    res = subprocess.run([sys.executable, "-m", "rfmeas.cli", "history", "--db", str(fifo)], capture_output=True,
                         text=True, timeout=60, env=dict(os.environ, PYTHONPATH=str(ROOT)))
    assert res.returncode == 2 and "not a regular file" in res.stderr
