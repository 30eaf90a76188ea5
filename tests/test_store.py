"""History store: round trip, byte-exact export, crash safety, schema versions, references."""

import hashlib
import os
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

import rfmeas
from rfmeas.errors import InputError
from rfmeas.history.store import SCHEMA_VERSION, HistoryStore, default_db_path, design_status, record_analysis

ROOT = Path(__file__).resolve().parents[1]
MANIFEST = '[transformer]\nname = "bench unit 7"\n\n[[sweep]]\nfile = "pri_open.s1p"\n'
# Touchstone text with CRLF, a trailing space and a non-ASCII comment: export must keep every byte.
SWEEP = b"! measured \xc2\xb5 test\r\n# MHz S RI R 50 \r\n1 0.1 0.2\r\n2 0.3 0.4\r\n"


def result_for(name, L1_H=10e-6, passed=True):
    return {"name": name, "parameters": {"primary_inductance_H": {"value": L1_H, "stderr": 1e-8}},
            "figures": {}, "design_check": {"passed": passed}, "fit": {"converged": True}, "warnings": []}


def add(store, name="bench unit 7", **kw):
    sources = [("unit7.toml", MANIFEST.encode()), ("pri_open.s1p", SWEEP)]
    return store.record(name, MANIFEST, sources, result_for(name, **kw))


@pytest.fixture
def store(tmp_path):
    with HistoryStore(tmp_path / "h.sqlite3") as s:
        yield s


def test_round_trip_keeps_everything(store):
    rid = add(store)
    rec = store.get(rid)
    assert rec.unit == "bench unit 7"
    assert rec.manifest_text == MANIFEST
    assert rec.result == result_for("bench unit 7")
    assert rec.software_version == rfmeas.__version__
    assert [f.path for f in rec.files] == ["unit7.toml", "pri_open.s1p"]
    assert rec.files[1].content == SWEEP
    assert rec.files[1].sha256 == hashlib.sha256(SWEEP).hexdigest()
    assert rec.recorded_utc.endswith("+00:00")
    d = rec.to_dict()
    assert d["files"][1] == {"path": "pri_open.s1p", "sha256": hashlib.sha256(SWEEP).hexdigest(),
                             "size_bytes": len(SWEEP)}


def test_identical_files_are_stored_once(store):
    add(store)
    add(store)
    conn = sqlite3.connect(store.path)
    assert conn.execute("SELECT count(*) FROM blobs").fetchone()[0] == 2
    assert conn.execute("SELECT count(*) FROM files").fetchone()[0] == 4


def test_list_previous_and_status(store):
    a = add(store, L1_H=10e-6)
    b = add(store, name="other unit", passed=False)
    c = add(store, L1_H=12e-6)
    assert [s.id for s in store.list()] == [c, b, a]
    assert [s.id for s in store.list("bench unit 7")] == [c, a]
    assert [s.id for s in store.list(limit=1)] == [c]
    assert store.list("other unit")[0].design_status == "fail"
    assert store.list()[0].file_count == 2
    assert store.previous(c).id == a
    assert store.previous(a) is None


def test_references(store):
    a = add(store)
    b = add(store, name="other unit")
    c = add(store)
    d = add(store)
    assert store.resolve(f"@{b}").id == b
    assert store.resolve(f"@{d}~").id == c
    assert store.resolve(f"@{d}~2").id == a
    assert store.resolve("@latest").id == d
    assert store.resolve("@latest:other unit").id == b
    assert store.resolve("@latest:bench unit 7~").id == c
    assert store.resolve("@prev", other_id=c).id == a
    assert store.resolve("@prev", other_unit="bench unit 7").id == d
    for bad in ("@zz", "12", "@latest:nobody", f"@{a}~", "@999"):
        with pytest.raises(InputError):
            store.resolve(bad)
    with pytest.raises(InputError):
        store.resolve("@prev")


def test_export_reproduces_bytes_and_refuses_overwrite(store, tmp_path):
    rid = add(store)
    out = tmp_path / "out"
    written = store.export(rid, out)
    assert sorted(p.name for p in written) == ["pri_open.s1p", "unit7.toml"]
    assert (out / "pri_open.s1p").read_bytes() == SWEEP
    assert (out / "unit7.toml").read_bytes() == MANIFEST.encode()
    with pytest.raises(InputError, match="exists"):
        store.export(rid, out)
    store.export(rid, out, overwrite=True)
    assert (out / "pri_open.s1p").read_bytes() == SWEEP


def test_export_writes_manifest_text_when_not_among_sources(store, tmp_path):
    rid = store.record("u", MANIFEST, [("sub/a.s1p", SWEEP)], result_for("u"))
    store.export(rid, tmp_path / "o")
    assert (tmp_path / "o" / "manifest.toml").read_text() == MANIFEST
    assert (tmp_path / "o" / "sub" / "a.s1p").read_bytes() == SWEEP


def test_export_refuses_paths_outside_folder(store, tmp_path):
    rid = store.record("u", None, [("../escape.s1p", SWEEP)], result_for("u"))
    with pytest.raises(InputError, match="outside"):
        store.export(rid, tmp_path / "o")
    assert not (tmp_path / "escape.s1p").exists()


def test_bad_sources_are_refused_and_nothing_is_written(store):
    with pytest.raises(InputError, match="twice"):
        store.record("u", None, [("a.s1p", b"1"), ("a.s1p", b"2")], result_for("u"))
    with pytest.raises(InputError, match="bytes"):
        store.record("u", None, [("a.s1p", "text")], result_for("u"))
    assert store.list() == []


def test_non_finite_numbers_are_kept_as_null(store):
    rid = store.record("u", None, [], {"name": "u", "parameters": {"k": {"value": 0.99, "stderr": float("nan")}}})
    assert store.get(rid).result["parameters"]["k"] == {"value": 0.99, "stderr": None}


def test_interrupted_write_rolls_back(store):
    a = add(store)
    conn = store._connect()
    with pytest.raises(KeyboardInterrupt):  # Ctrl-C after the rows are written, before COMMIT
        with store._transaction(conn):
            store._insert(conn, "u", None, [("a.s1p", "0" * 64, b"1")], "{}", "x")
            raise KeyboardInterrupt
    assert [s.id for s in store.list()] == [a]
    assert add(store) == a + 1


def test_store_survives_process_killed_mid_write(tmp_path):
    db = tmp_path / "h.sqlite3"
    with HistoryStore(db) as s:
        first = add(s)
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    child = subprocess.Popen([sys.executable, str(ROOT / "tests" / "helpers" / "kill_writer.py"), str(db),
                              str(40_000_000)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env, text=True)
    try:
        line = child.stdout.readline()
        assert line.strip() == "in-transaction", child.stderr.read()
        # The uncommitted pages spilled into the WAL: the kill really lands mid-write.
        assert Path(f"{db}-wal").stat().st_size > 1_000_000
        child.send_signal(signal.SIGKILL)
    finally:
        child.wait(timeout=30)
        child.stdout.close()
        child.stderr.close()
    assert child.returncode == -signal.SIGKILL
    conn = sqlite3.connect(db)
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    conn.close()
    with HistoryStore(db) as s:
        assert [r.id for r in s.list()] == [first]
        assert s.get(first).files[1].content == SWEEP
        assert s.list("half unit") == []
        assert add(s) == first + 1  # still writable


def test_newer_schema_is_refused(tmp_path):
    db = tmp_path / "h.sqlite3"
    conn = sqlite3.connect(db)
    conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    conn.close()
    with pytest.raises(InputError, match="newer"):
        HistoryStore(db).list()


def test_not_a_database_is_refused(tmp_path):
    db = tmp_path / "h.sqlite3"
    db.write_bytes(b"this is a text file, not a database" * 100)
    with pytest.raises(InputError, match="not a readable history store"):
        HistoryStore(db).list()


def test_migrates_a_version_1_store(tmp_path):
    db = tmp_path / "h.sqlite3"
    conn = sqlite3.connect(db)
    # The version 1 layout written out by hand: file contents inline in `files`.
    conn.executescript("""
        CREATE TABLE records (id INTEGER PRIMARY KEY AUTOINCREMENT, unit TEXT NOT NULL,
            recorded_utc TEXT NOT NULL, manifest_text TEXT, result_json TEXT NOT NULL,
            software_version TEXT NOT NULL);
        CREATE TABLE files (record_id INTEGER NOT NULL REFERENCES records(id) ON DELETE CASCADE,
            rel_path TEXT NOT NULL, sha256 TEXT NOT NULL, content BLOB NOT NULL,
            PRIMARY KEY (record_id, rel_path));
        CREATE INDEX records_unit ON records (unit, id);
        PRAGMA user_version = 1;
    """)
    digest = hashlib.sha256(SWEEP).hexdigest()
    for _ in range(2):
        cur = conn.execute("INSERT INTO records (unit, recorded_utc, manifest_text, result_json, software_version) "
                           "VALUES ('old unit', '2024-01-01T00:00:00+00:00', ?, '{\"name\": \"old unit\"}', '0.0.1')",
                           (MANIFEST,))
        conn.execute("INSERT INTO files VALUES (?, 'pri_open.s1p', ?, ?)", (cur.lastrowid, digest, SWEEP))
    conn.commit()
    conn.close()
    with HistoryStore(db) as s:
        assert s.schema_version == SCHEMA_VERSION
        rec = s.get(2)
        assert rec.files[0].content == SWEEP and rec.files[0].sha256 == digest
        assert rec.result == {"name": "old unit"}
        assert s.previous(2).id == 1
        new = add(s)
        assert new == 3
    conn = sqlite3.connect(db)
    assert conn.execute("SELECT count(*) FROM blobs").fetchone()[0] == 2  # the old sweep kept once


def test_default_path_follows_env(monkeypatch, tmp_path):
    monkeypatch.setenv("RFMEAS_DB", str(tmp_path / "x.db"))
    assert default_db_path() == tmp_path / "x.db"
    assert HistoryStore().path == tmp_path / "x.db"
    monkeypatch.delenv("RFMEAS_DB")
    if sys.platform.startswith("linux"):
        monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
        assert default_db_path() == tmp_path / "data" / "rfmeas" / "history.sqlite3"
        monkeypatch.delenv("XDG_DATA_HOME")
        assert default_db_path() == Path.home() / ".local" / "share" / "rfmeas" / "history.sqlite3"


def test_no_io_until_used(tmp_path):
    HistoryStore(tmp_path / "deep" / "h.sqlite3")
    assert not (tmp_path / "deep").exists()


def test_design_status_rules():
    assert design_status({}) == "no design"
    assert design_status({"design_check": {"passed": True}}) == "pass"
    assert design_status({"design_check": {"lowest": {"passed": True}, "ratio": {"passed": False}}}) == "fail"
    assert design_status({"design_check": {"note": "x"}}) == "no design"


def test_record_analysis_takes_manifest_from_sources(store):
    class FakeAnalysis:
        sources = [("unit7.toml", MANIFEST.encode()), ("pri_open.s1p", SWEEP)]

        def to_dict(self):
            return result_for("bench unit 7")

    rec = store.get(record_analysis(store, FakeAnalysis()))
    assert rec.unit == "bench unit 7" and rec.manifest_text == MANIFEST


# --- the history command ------------------------------------------------------------------

def test_history_command_lists_and_exports(tmp_path, monkeypatch):
    import json

    from typer.testing import CliRunner

    from rfmeas.cli import app

    db = tmp_path / "h.sqlite3"
    with HistoryStore(db) as s:
        a = add(s)
        add(s, name="other unit", passed=False)
    runner = CliRunner()
    res = runner.invoke(app, ["history", "--db", str(db), "--json"])
    assert res.exit_code == 0, res.output
    data = json.loads(res.stdout)
    assert [r["unit"] for r in data["records"]] == ["other unit", "bench unit 7"]
    assert data["records"][0]["design_status"] == "fail"
    monkeypatch.setenv("RFMEAS_DB", str(db))  # the env var stands in for --db
    res = runner.invoke(app, ["history", "bench unit 7"])
    assert res.exit_code == 0 and "bench unit 7" in res.stdout and "other unit" not in res.stdout
    res = runner.invoke(app, ["history", "--export", str(a), str(tmp_path / "out")])
    assert res.exit_code == 0, res.output
    assert (tmp_path / "out" / "pri_open.s1p").read_bytes() == SWEEP
    res = runner.invoke(app, ["history", "--export", str(a), str(tmp_path / "out")])
    assert res.exit_code == 2 and "exists already" in res.stderr
    res = runner.invoke(app, ["history", "--export", "99", str(tmp_path / "out2")])
    assert res.exit_code == 2 and "no record 99" in res.stderr
