"""History: a note per record (schema step 3), batch and acquire-set keeping their analyses, and
compare --plot drawn from the sweeps the store keeps."""

from __future__ import annotations

import json
import shutil
import sqlite3
import tomllib
from pathlib import Path

import pytest
from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.history import store as store_module
from rfmeas.history.store import SCHEMA_VERSION, HistoryStore, manifest_notes

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"
runner = CliRunner()


def _sample_notes(name: str) -> str:
    return tomllib.loads((SAMPLE / name / "manifest.toml").read_text())["transformer"]["notes"]


def _store_at_version_2(path: Path, manifest_text: str | None) -> None:
    """A store as the previous schema made it, with one record."""
    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("BEGIN IMMEDIATE")
    store_module._migrate_to_1(conn)
    store_module._migrate_to_2(conn)
    conn.execute("PRAGMA user_version = 2")
    conn.execute("INSERT INTO records (unit, recorded_utc, manifest_text, result_json, software_version) "
                 "VALUES ('u1', '2026-01-01T00:00:00+00:00', ?, '{\"name\": \"u1\"}', '0.0.9')", (manifest_text,))
    conn.execute("COMMIT")
    conn.close()


def test_migration_adds_the_note_filled_from_the_manifest(tmp_path):
    path = tmp_path / "old.sqlite3"
    _store_at_version_2(path, '[transformer]\nname = "u1"\nnotes = "first winding"\n')
    with HistoryStore(path) as store:
        assert store.schema_version == SCHEMA_VERSION == 3
        [row] = store.list()
        assert row.note == "first winding" and row.to_dict()["note"] == "first winding"
        assert store.get(row.id).note == "first winding"


def test_migration_of_records_without_readable_notes(tmp_path):
    for i, text in enumerate((None, "not = [toml", '[transformer]\nname = "x"\n')):
        path = tmp_path / f"old{i}.sqlite3"
        _store_at_version_2(path, text)
        with HistoryStore(path) as store:
            assert [r.note for r in store.list()] == [None]


def test_note_from_manifest_given_and_set(tmp_path):
    with HistoryStore(tmp_path / "h.sqlite3") as store:
        a = store.record("u", '[transformer]\nnotes = "  as wound  "\n', [], {"name": "u"})
        b = store.record("u", '[transformer]\nnotes = "as wound"\n', [], {"name": "u"}, note="rewound")
        c = store.record("u", None, [], {"name": "u"})
        assert [store.get(i).note for i in (a, b, c)] == ["as wound", "rewound", None]
        store.set_note(c, "third try")
        store.set_note(a, "  ")
        assert [r.note for r in store.list()] == ["third try", "rewound", None]
        with pytest.raises(Exception, match="no record 99"):
            store.set_note(99, "x")
    assert manifest_notes('[transformer]\nnotes = 3\n') is None


def test_history_shows_the_notes_of_before_and_after(tmp_path):
    db = tmp_path / "h.sqlite3"
    for name in ("coupler-before", "coupler-after"):
        result = runner.invoke(app, ["analyze", str(SAMPLE / name), "--db", str(db), "--json"])
        assert result.exit_code in (0, 1), result.stderr
    listed = runner.invoke(app, ["history", "--db", str(db), "--json"])
    notes = [r["note"] for r in json.loads(listed.stdout)["records"]]
    assert notes == [_sample_notes("coupler-after"), _sample_notes("coupler-before")]
    table = runner.invoke(app, ["history", "--db", str(db)]).stdout
    assert "note" in table and "rewound" in table and "loosely" in table
    changed = runner.invoke(app, ["history", "--db", str(db), "--set-note", "1", "before the rewind"])
    assert changed.exit_code == 0, changed.stderr
    assert "before the rewind" in runner.invoke(app, ["history", "--db", str(db)]).stdout
    missing = runner.invoke(app, ["history", "--db", str(db), "--set-note", "7", "x"])
    assert missing.exit_code == 2 and "no record 7" in missing.stderr


@pytest.fixture
def lot(tmp_path):
    folder = tmp_path / "lot"
    for name in ("coupler-before", "coupler-after"):
        shutil.copytree(SAMPLE / name, folder / name)
    return folder


def test_batch_records_each_unit(lot, tmp_path):
    db = tmp_path / "lot.sqlite3"
    result = runner.invoke(app, ["batch", str(lot), "--workers", "1", "--db", str(db), "--json"])
    assert result.exit_code == 1, result.stderr  # the unit before the rewind fails its design check
    units = json.loads(result.stdout)["units"]
    ids = [u["record_id"] for u in units]
    assert all(isinstance(i, int) for i in ids) and len(set(ids)) == 2
    with HistoryStore(db) as store:
        for unit, record_id in zip(units, ids):
            record = store.get(record_id)
            assert record.result["name"] == unit["name"]
            # the stored result is the analysis the batch summed up
            assert record.result["parameters"]["primary_inductance_H"]["value"] == \
                unit["values"]["primary_inductance_H"]
            assert record.note == _sample_notes(Path(unit["path"]).parent.name)
            assert {f.path for f in record.files} >= {"manifest.toml", "thru.s2p"}


def test_batch_records_from_worker_processes(lot, tmp_path):
    db = tmp_path / "lot.sqlite3"
    result = runner.invoke(app, ["batch", str(lot), "--workers", "2", "--db", str(db), "--json"])
    assert result.exit_code == 1, result.stderr
    with HistoryStore(db) as store:
        assert len(store.list()) == 2


def test_batch_no_record_keeps_nothing(lot, tmp_path):
    db = tmp_path / "lot.sqlite3"
    result = runner.invoke(app, ["batch", str(lot), "--workers", "1", "--db", str(db), "--no-record", "--json"])
    assert result.exit_code == 1, result.stderr
    assert all(u["record_id"] is None for u in json.loads(result.stdout)["units"])
    assert not db.exists()


def test_batch_store_failure_is_reported(lot, tmp_path):
    bad = tmp_path / "a-folder.sqlite3"
    bad.mkdir()
    result = runner.invoke(app, ["batch", str(lot), "--workers", "1", "--db", str(bad)])
    assert result.exit_code == 2
    assert result.stderr.count("not kept in the history") == 2


def test_acquire_set_records_its_analysis(tmp_path):
    from tests.test_acquire_cli import SIM, json_after_echo

    db = tmp_path / "h.sqlite3"
    manifest = tmp_path / "set.toml"
    keys = "sim unit\n3\n9\n\n\n\n\n"
    result = runner.invoke(app, ["acquire-set", str(manifest), *SIM, "-p", "vna-scpi-trace", "--sweep",
                                 "100k:30M:201", "--analyze", "--json", "--db", str(db)], input=keys)
    assert result.exit_code == 0, result.stderr
    summary = json_after_echo(result.stdout)
    with HistoryStore(db) as store:
        record = store.get(summary["record_id"])
    assert record.unit == "sim unit"
    assert record.result["parameters"] == summary["analysis"]["parameters"]
    # the sweeps just taken are kept byte for byte
    for f in record.files:
        if f.path.endswith((".s1p", ".s2p")):
            assert f.content == (tmp_path / f.path).read_bytes()


def test_acquire_set_no_record(tmp_path):
    from tests.test_acquire_cli import SIM, json_after_echo

    db = tmp_path / "h.sqlite3"
    keys = "sim unit\n3\n9\n\n\n\n\n"
    result = runner.invoke(app, ["acquire-set", str(tmp_path / "set.toml"), *SIM, "-p", "vna-scpi-trace",
                                 "--sweep", "100k:30M:101", "--analyze", "--json", "--db", str(db), "--no-record"],
                           input=keys)
    assert result.exit_code == 0, result.stderr
    assert json_after_echo(result.stdout)["record_id"] is None and not db.exists()


def test_compare_plot_from_stored_records(tmp_path):
    db = tmp_path / "h.sqlite3"
    for name in ("coupler-before", "coupler-after"):
        runner.invoke(app, ["analyze", str(SAMPLE / name), "--db", str(db), "--json"])
    stored = tmp_path / "stored.svg"
    result = runner.invoke(app, ["compare", "@1", "@2", "--db", str(db), "--plot", str(stored), "--json"])
    assert result.exit_code == 0, result.stderr
    # the same overlay as from the manifests on disk: the store kept the sweeps byte for byte
    on_disk = tmp_path / "disk.svg"
    result = runner.invoke(app, ["compare", str(SAMPLE / "coupler-before"), str(SAMPLE / "coupler-after"),
                                 "--plot", str(on_disk), "--json"])
    assert result.exit_code == 0, result.stderr
    text = stored.read_text()
    for tag in ("before", "after"):
        assert f'id="data:{tag}:' in text and f'id="model:{tag}:' in text

    def paths(svg: str) -> list[str]:
        import re

        return re.findall(r'<g id="(?:data|model):[^"]+">\s*<path d="([^"]+)"', svg)

    assert paths(text) and paths(text) == paths(on_disk.read_text())
