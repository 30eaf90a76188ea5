"""`rfmeas acquire` and `rfmeas acquire-set` end to end against the simulated instrument."""

from __future__ import annotations

import json
import sys
import tomllib

import numpy as np
import pytest
import skrf as rf
from typer.testing import CliRunner

from rfmeas.instruments.simulation import DEFAULT_SIM_TRANSFORMER
from rfmeas.instruments.touchstone_stream import INCOMPLETE_MARK
from rfmeas.model import input_impedance, s_matrix

runner = CliRunner()


@pytest.fixture
def app():
    from rfmeas.cli import app as real_app

    return real_app


SIM = ["--resource", "sim", "--timeout", "5000"]  # see sim_acquire in test_instruments
SHORT_TIMEOUT = ["--timeout", "30"]  # where a staged silence makes one wait for it


def test_acquire_lcr_full_sweep(app, tmp_path):
    out = tmp_path / "pri_open.s1p"
    result = runner.invoke(app, ["acquire", *SIM, "--profile", "lcr-scpi-generic", "--sweep", "100k:30M:51",
                                 "--log", "-o", str(out), "--json"])
    assert result.exit_code == 0, result.stderr
    summary = json.loads(result.stdout)
    assert summary["points"] == 51 and summary["profile"] == "lcr-scpi-generic"
    network = rf.Network(str(out))
    np.testing.assert_allclose(network.z[:, 0, 0], input_impedance(DEFAULT_SIM_TRANSFORMER, network.f),
                               rtol=1e-8)
    assert INCOMPLETE_MARK not in out.read_text()
    assert not (tmp_path / "pri_open.partial.s1p").exists()


def test_acquire_vna_two_port_with_secondary_on_port1(app, tmp_path):
    out = tmp_path / "thru_rev.s2p"
    result = runner.invoke(app, ["acquire", *SIM, "-p", "vna-scpi-trace", "--sweep", "1M:10M:11", "--linear",
                                 "--sim-port1", "secondary", "-o", str(out)])
    assert result.exit_code == 0, result.stderr
    network = rf.Network(str(out))
    np.testing.assert_allclose(network.f, np.linspace(1e6, 1e7, 11))
    np.testing.assert_allclose(network.s, s_matrix(DEFAULT_SIM_TRANSFORMER, network.f, "secondary"),
                               rtol=1e-9, atol=1e-12)


def test_acquire_timeout_mid_sweep(app, tmp_path):
    out = tmp_path / "pri_open.s1p"
    result = runner.invoke(app, ["acquire", *SIM, "-p", "lcr-scpi-generic", "--sweep", "100k:30M:31", "--log",
                                 "-o", str(out), "--retries", "1", "--sim-fault", "silent@12", *SHORT_TIMEOUT])
    assert result.exit_code == 3
    assert "no reply to 'FETC?'" in result.stderr and "gave up after 2 tries" in result.stderr
    assert "pri_open.partial.s1p" in result.stderr
    assert not out.exists()
    partial = tmp_path / "pri_open.partial.s1p"
    assert partial.read_text().startswith(INCOMPLETE_MARK)
    network = rf.Network(str(partial))
    assert len(network.f) == 12
    np.testing.assert_allclose(network.z[:, 0, 0], input_impedance(DEFAULT_SIM_TRANSFORMER, network.f),
                               rtol=1e-8)


@pytest.mark.parametrize("profile, command", [("lcr-scpi-generic", "FETC?"), ("vna-scpi-trace", "CALC:DATA? SDATA")])
def test_acquire_garbage_reply(app, tmp_path, profile, command):
    result = runner.invoke(app, ["acquire", *SIM, "-p", profile, "--sweep", "1M:2M:5",
                                 "-o", str(tmp_path / "g.s1p"), "--sim-fault", "garbage@0"])
    assert result.exit_code == 3
    assert f"reply to '{command}' is not" in result.stderr


def test_acquire_list_json(app):
    result = runner.invoke(app, ["acquire", "--list", "--backend", "@sim", "--json"])
    assert result.exit_code == 0, result.stderr
    listing = json.loads(result.stdout)
    assert "GPIB0::8::INSTR" in listing["resources"]  # pyvisa-sim's bundled definitions
    assert {p["name"] for p in listing["profiles"]} >= {"lcr-scpi-generic", "vna-scpi-trace"}


@pytest.mark.parametrize("args, message", [
    (["acquire", "--resource", "sim"], "needs --profile, --output"),
    (["acquire", *SIM, "-p", "nope", "-o", "x.s1p"], "no instrument profile named 'nope'"),
    (["acquire", *SIM, "-p", "lcr-scpi-generic", "-o", "x.s2p"], "one-port readings"),
    (["acquire", *SIM, "-p", "lcr-scpi-generic", "-o", "x.txt"], "must end in .s1p or .s2p"),
    (["acquire", *SIM, "-p", "lcr-scpi-generic", "-o", "x.s1p", "--sweep", "1M:1k:3"], "must be above start"),
    (["acquire", *SIM, "-p", "lcr-scpi-generic", "-o", "x.s1p", "--sim-fault", "boom"], "silent@N"),
])
def test_acquire_bad_input_exits_2(app, tmp_path, monkeypatch, args, message):
    monkeypatch.chdir(tmp_path)
    result = runner.invoke(app, args)
    assert result.exit_code == 2
    assert message in result.stderr


def test_user_profile_from_env(app, tmp_path, monkeypatch):
    folder = tmp_path / "profiles"
    folder.mkdir()
    (folder / "mine.toml").write_text(
        'name = "bench-meter"\nkind = "lcr"\n[commands]\nidentify = "*IDN?"\n'
        'set_frequency = "FREQ {frequency_Hz:.9e}"\nread = "MEAS?"\n[reply]\nformat = "ls_rs"\n')
    monkeypatch.setenv("RFMEAS_PROFILES", str(folder))
    out = tmp_path / "m.s1p"
    result = runner.invoke(app, ["acquire", *SIM, "-p", "bench-meter", "--sweep", "200k:1M:5", "-o", str(out),
                                 "--sim-termination", "short"])
    assert result.exit_code == 0, result.stderr
    network = rf.Network(str(out))
    z_model = input_impedance(DEFAULT_SIM_TRANSFORMER, network.f, "primary", "short")
    np.testing.assert_allclose(network.z[:, 0, 0], z_model, rtol=1e-8)

    (folder / "bad.toml").write_text('name = "x"\nkind = "lcr"\nbaud = 9600\n')
    result = runner.invoke(app, ["acquire", *SIM, "-p", "bench-meter", "-o", str(out)])
    assert result.exit_code == 2
    assert "bad.toml" in result.stderr and "unknown key 'baud'" in result.stderr


# --- guided session --------------------------------------------------------------------

def guided(app, manifest, keys, *extra):
    return runner.invoke(app, ["acquire-set", str(manifest), *SIM, *extra], input="".join(keys))


def json_after_echo(stdout: str):
    """CliRunner echoes scripted input onto stdout; the JSON summary follows it."""
    return json.loads(stdout[stdout.index("{\n"):])


def test_guided_session_vna(app, tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "rfmeas.analysis", None)  # make the analysis import fail
    manifest = tmp_path / "unit7" / "set.toml"
    keys = ["bench unit 7\n", "3\n", "9\n", "\n", "\n", "\n", "\n", "y\n"]
    result = guided(app, manifest, keys, "-p", "vna-scpi-trace", "--sweep", "100k:30M:21", "--json")
    assert result.exit_code == 0, result.stderr
    assert "Connect the primary to port 1 and leave the secondary open." in result.stderr
    assert "short the secondary" in result.stderr
    assert "Connect the primary to port 1 and the secondary to port 2." in result.stderr
    assert "analysis is unavailable" in result.stderr
    data = tomllib.loads(manifest.read_text())
    assert data["transformer"] == {"name": "bench unit 7", "primary_turns": 3, "secondary_turns": 9}
    assert [s["file"] for s in data["sweep"]] == ["pri_open.s1p", "pri_short.s1p", "sec_open.s1p", "thru.s2p"]
    for sweep in data["sweep"]:
        network = rf.Network(str(manifest.parent / sweep["file"]))
        if "port2" in sweep:
            expected = s_matrix(DEFAULT_SIM_TRANSFORMER, network.f, sweep["port1"])
            np.testing.assert_allclose(network.s, expected, rtol=1e-9, atol=1e-12)
        else:
            expected = input_impedance(DEFAULT_SIM_TRANSFORMER, network.f, sweep["port1"], sweep["termination"])
            np.testing.assert_allclose(network.z[:, 0, 0], expected, rtol=1e-8)
    summary = json_after_echo(result.stdout)
    assert summary["manifest"] == str(manifest) and summary["analysis"] is None


def test_guided_session_skip_and_stop(app, tmp_path):
    manifest = tmp_path / "set.toml"
    keys = ["\n", "\n", "\n", "\n", "s\n", "q\n"]  # name (default), no turns, measure, skip, stop
    result = guided(app, manifest, keys, "-p", "lcr-scpi-generic", "--sweep", "1M:2M:3", "--no-analyze")
    assert result.exit_code == 0, result.stderr
    data = tomllib.loads(manifest.read_text())
    assert data["transformer"] == {"name": "set"}
    assert data["sweep"] == [{"file": "pri_open.s1p", "port1": "primary", "termination": "open"}]
    assert not (tmp_path / "pri_short.s1p").exists()


def test_guided_session_retry_and_stop_after_fault(app, tmp_path, monkeypatch):
    from rfmeas.instruments import simulation

    real_open = simulation.open_simulated_session
    connections = []

    def flaky(profile, plan, wiring, faults, timeout_ms):
        connections.append(wiring)
        # the 2nd and 4th connections (sweep 2 first try, sweep 3) stop answering at once
        silent = simulation.SimFaults(silent_from=0) if len(connections) in (2, 4) else faults
        return real_open(profile, plan, wiring, faults=silent, timeout_ms=timeout_ms)

    monkeypatch.setattr(simulation, "open_simulated_session", flaky)
    manifest = tmp_path / "set.toml"
    keys = ["u\n", "\n", "\n", "\n", "\n", "r\n", "\n", "q\n"]
    result = guided(app, manifest, keys, "-p", "lcr-scpi-generic", "--sweep", "1M:2M:3", "--retries", "0",
                    "--no-analyze", *SHORT_TIMEOUT)
    assert result.exit_code == 3
    assert result.stderr.count("measurement failed") == 2
    data = tomllib.loads(manifest.read_text())
    assert [s["file"] for s in data["sweep"]] == ["pri_open.s1p", "pri_short.s1p"]
    assert (tmp_path / "sec_open.partial.s1p").exists()


def test_guided_session_keeps_what_was_taken_when_input_ends(app, tmp_path):
    manifest = tmp_path / "set.toml"
    keys = ["u\n", "\n", "\n", "\n"]  # name, turns, first sweep; then the input ends (as Ctrl-C at a prompt)
    result = guided(app, manifest, keys, "-p", "lcr-scpi-generic", "--sweep", "1M:2M:3")
    assert result.exit_code == 130
    assert [s["file"] for s in tomllib.loads(manifest.read_text())["sweep"]] == ["pri_open.s1p"]


def test_guided_session_refuses_existing_manifest(app, tmp_path):
    manifest = tmp_path / "set.toml"
    manifest.write_text("[transformer]\nname = 'keep me'\n")
    result = guided(app, manifest, [], "-p", "lcr-scpi-generic")
    assert result.exit_code == 2 and "--overwrite" in result.stderr
    assert "keep me" in manifest.read_text()


def test_guided_session_then_analysis(app, tmp_path):
    pytest.importorskip("rfmeas.analysis")
    manifest = tmp_path / "set.toml"
    keys = ["sim unit\n", "3\n", "9\n", "\n", "\n", "\n", "\n"]
    result = guided(app, manifest, keys, "-p", "vna-scpi-trace", "--sweep", "100k:30M:201", "--analyze",
                    "--json")
    assert result.exit_code == 0, result.stderr
    parameters = json_after_echo(result.stdout)["analysis"]["parameters"]
    assert parameters["primary_inductance_H"]["value"] == pytest.approx(DEFAULT_SIM_TRANSFORMER.L1_H, rel=0.02)
