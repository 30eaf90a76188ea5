"""What a record keeps of an analysis: an exported record can be analysed again, names never collide.

The failures once seen: a sweep from outside the manifest's folder was kept by
its bare name, so the exported manifest pointed at a file that was not there;
two different files of the same name were refused as "given twice" (and the
analysis was not kept).
"""

import json
import shutil
from pathlib import Path

from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.history.store import HistoryStore, _renamed_manifest

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data" / "coupler-before"


def run(*args):
    res = CliRunner().invoke(app, [str(a) for a in args])
    assert res.exception is None or isinstance(res.exception, SystemExit), res.exception
    return res


def parameters(res):
    assert res.exit_code in (0, 1), res.output
    return {k: v["value"] for k, v in json.loads(res.stdout)["parameters"].items()}


def test_sweeps_from_outside_the_manifest_folder_round_trip(tmp_path):
    unit, a, b, c = (tmp_path / n for n in ("unit", "a", "b", "c"))
    for folder in (unit, a, b, c):
        folder.mkdir()
    shutil.copy(SAMPLE / "pri_open.s1p", unit / "pri_open.s1p")
    shutil.copy(SAMPLE / "pri_short.s1p", a / "sweep.s1p")  # two different files, one name
    shutil.copy(SAMPLE / "sec_open.s1p", b / "sweep.s1p")
    shutil.copy(SAMPLE / "thru.s2p", c / "pri_open.s2p")
    text = (SAMPLE / "manifest.toml").read_text()
    text = (text.replace('file = "pri_short.s1p"', 'file = "../a/sweep.s1p"   # kept beside the jig')
                .replace('file = "sec_open.s1p"', "file = '../b/sweep.s1p'")
                .replace('file = "thru.s2p"', f'file = "{c / "pri_open.s2p"}"'))
    (unit / "manifest.toml").write_text(text)
    db = tmp_path / "h.sqlite3"
    original = parameters(run("analyze", unit, "--json", "--db", db))
    with HistoryStore(db) as store:
        rec = store.latest()
    names = sorted(f.path for f in rec.files)
    assert names == ["external/pri_open.s2p", "external/sweep-2.s1p", "external/sweep.s1p",
                     "manifest.toml", "pri_open.s1p"]
    assert "# kept beside the jig" in rec.manifest_text  # edited in place, comments kept
    res = run("history", "--export", rec.id, tmp_path / "redo", "--db", db)
    assert res.exit_code == 0, res.output
    assert (tmp_path / "redo" / "external" / "sweep.s1p").read_bytes() == (a / "sweep.s1p").read_bytes()
    assert (tmp_path / "redo" / "external" / "sweep-2.s1p").read_bytes() == (b / "sweep.s1p").read_bytes()
    again = parameters(run("analyze", tmp_path / "redo", "--json", "--no-record"))
    assert again == original


def test_bare_files_of_the_same_name_are_kept_and_can_be_analysed_again(tmp_path):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    shutil.copy(SAMPLE / "pri_open.s1p", tmp_path / "a" / "open.s1p")
    # a second, different reading under the same name (identical data would be refused as a repeat)
    (tmp_path / "b" / "open.s1p").write_bytes(b"! second reading\n" + (SAMPLE.parent / "coupler-after" /
                                                                        "pri_open.s1p").read_bytes())
    shutil.copy(SAMPLE / "thru.s2p", tmp_path / "b" / "thru.s2p")
    db = tmp_path / "h.sqlite3"
    files = [tmp_path / "a" / "open.s1p", tmp_path / "b" / "open.s1p", tmp_path / "b" / "thru.s2p"]
    original = parameters(run("analyze", *files, "--turns", "5:14", "--json", "--db", db))
    with HistoryStore(db) as store:
        rec = store.latest()
    assert sorted(f.path for f in rec.files) == ["manifest.toml", "open-2.s1p", "open.s1p", "thru.s2p"]
    res = run("history", "--export", rec.id, tmp_path / "redo", "--db", db)
    assert res.exit_code == 0, res.output
    again = parameters(run("analyze", tmp_path / "redo", "--json", "--no-record"))
    assert again == original


def test_the_same_file_listed_twice_is_kept_once(tmp_path):
    from rfmeas.measurement.manifest import load_manifest
    from rfmeas.history.store import record_sources

    shutil.copytree(SAMPLE, tmp_path / "unit")
    text = (tmp_path / "unit" / "manifest.toml").read_text()
    (tmp_path / "unit" / "manifest.toml").write_text(text.replace('file = "sec_open.s1p"', 'file = "./pri_open.s1p"')
                                                     .replace('port1 = "secondary"\ntermination = "open"',
                                                              'port1 = "primary"\ntermination = "open"'))
    try:
        measurement = load_manifest(tmp_path / "unit")
    except Exception as exc:  # a branch that refuses a repeated sweep outright is fine too
        assert "twice" in str(exc) or "same" in str(exc)
        return
    manifest_text, sources = record_sources(measurement)
    assert [n for n, _ in sources].count("pri_open.s1p") == 1
    assert manifest_text == (tmp_path / "unit" / "manifest.toml").read_text()


def test_manifest_written_anew_when_its_file_lines_cannot_be_matched():
    import tomllib

    text = 'sweep = [{file = "../a.s1p", port1 = "primary", termination = "open"}]\n[transformer]\nname = "x"\n'
    out = _renamed_manifest(text, [("../a.s1p", "external/a.s1p")])
    doc = tomllib.loads(out)
    assert doc["sweep"] == [{"file": "external/a.s1p", "port1": "primary", "termination": "open"}]
    assert doc["transformer"] == {"name": "x"}


def test_test_jigs_from_elsewhere_are_kept_with_the_record(tmp_path):
    unit = tmp_path / "unit"
    shutil.copytree(SAMPLE, unit)
    shutil.copytree(ROOT / "fixtures" / "clip-leads", tmp_path / "jigs" / "clip-leads")
    shutil.copytree(ROOT / "fixtures" / "clip-leads", tmp_path / "other" / "clip-leads")  # same folder name
    (tmp_path / "other" / "clip-leads" / "fixture.toml").write_text(
        (tmp_path / "other" / "clip-leads" / "fixture.toml").read_text().replace("49.9", "50.1"))
    text = (unit / "manifest.toml").read_text()
    text = text.replace('termination = "open"\n', 'termination = "open"\nfixture = "../jigs/clip-leads"\n', 1)
    text = text.replace('termination = "short"\n', 'termination = "short"\nfixture = "../other/clip-leads/fixture.toml"\n', 1)
    (unit / "manifest.toml").write_text(text)
    db = tmp_path / "h.sqlite3"
    original = parameters(run("analyze", unit, "--json", "--db", db))
    with HistoryStore(db) as store:
        rec = store.latest()
    names = {f.path for f in rec.files}
    assert {"fixtures/clip-leads/fixture.toml", "fixtures/clip-leads/open.s1p",
            "fixtures/clip-leads-2/fixture.toml", "fixtures/clip-leads-2/load.s1p"} <= names
    res = run("history", "--export", rec.id, tmp_path / "redo", "--db", db)
    assert res.exit_code == 0, res.output
    assert "50.1" in (tmp_path / "redo" / "fixtures" / "clip-leads-2" / "fixture.toml").read_text()
    again = parameters(run("analyze", tmp_path / "redo", "--json", "--no-record"))
    assert again == original
