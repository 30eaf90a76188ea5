"""Instrument logic: against a scripted protocol (every exchange must be used) and against pyvisa-sim."""

from __future__ import annotations

import math

import numpy as np
import pytest
import skrf as rf
from pyvisa import constants
from pyvisa.errors import VisaIOError

from rfmeas.errors import InputError, InstrumentError
from rfmeas.instruments import (Instrument, InstrumentTimeout, Session, SweepPlan, TouchstoneStream, acquire,
                                available_profiles, load_profile, open_session, parse_profile, parse_sweep)
from rfmeas.instruments.guided import default_plan, manifest_text
from rfmeas.instruments.replies import format_trace, parse_point, parse_trace
from rfmeas.instruments.simulation import (DEFAULT_SIM_TRANSFORMER, SimFaults, Wiring, open_simulated_session,
                                           simulated_definition)
from rfmeas.instruments.touchstone_stream import INCOMPLETE_MARK, partial_path
from rfmeas.model import input_impedance, s_matrix

TIMEOUT = VisaIOError(constants.StatusCode.error_timeout)
LOST = VisaIOError(constants.StatusCode.error_connection_lost)


class ScriptedTransport:
    """A fake pyvisa resource that plays a fixed script of exchanges.

    Each entry is ("write", text), ("query", text, reply) or ("query", text, exception).
    Any exchange out of order fails; `check_done()` fails if the script is not used up.
    """

    def __init__(self, script):
        self.script = list(script)
        self.used = 0

    def _next(self, kind, message):
        if self.used >= len(self.script):
            pytest.fail(f"unexpected {kind} {message!r} after the script ended")
        entry = self.script[self.used]
        self.used += 1
        if entry[0] != kind or entry[1] != message:
            pytest.fail(f"exchange {self.used}: expected {entry[:2]!r}, got {(kind, message)!r}")
        return entry

    def write(self, message):
        self._next("write", message)

    def query(self, message):
        reply = self._next("query", message)[2]
        if isinstance(reply, BaseException):
            raise reply
        return reply

    def read(self):
        pytest.fail("read() is not part of any script here")

    def close(self):
        pass

    def check_done(self):
        assert self.used == len(self.script), f"unused exchanges: {self.script[self.used:]!r}"


@pytest.fixture
def scripted():
    transports = []

    def make(script, profile="lcr-scpi-generic", retries=None):
        transport = ScriptedTransport(script)
        transports.append(transport)
        return Instrument(Session(transport, "TEST::1"), load_profile(profile), retries)

    yield make
    for transport in transports:
        transport.check_done()


LCR_SETUP = [("query", "*IDN?", "ACME,LCR,1,2"), ("write", "*CLS"), ("write", "FUNC:IMP RX"),
             ("write", "TRIG:SOUR BUS"), ("query", "SYST:ERR?", '0,"No error"')]


def lcr_point(freq_text, reply):
    return [("write", f"FREQ {freq_text}"), ("write", "TRIG"), ("query", "FETC?", reply),
            ("query", "SYST:ERR?", '+0,"No error"')]


# --- scripted protocol ---------------------------------------------------------------

def test_lcr_sweep_writes_each_point(scripted, tmp_path):
    script = LCR_SETUP + lcr_point("1.000000e+05", "10.0,20.0,0") + lcr_point("2.000000e+05", "50,0")
    instrument = scripted(script)
    result = acquire(instrument, SweepPlan(1e5, 2e5, 2), tmp_path / "a.s1p")
    network = rf.Network(str(tmp_path / "a.s1p"))
    # scikit-rf converts the written S11 (50 ohm) back to Z
    np.testing.assert_allclose(network.z[:, 0, 0], [10 + 20j, 50 + 0j], rtol=1e-9, atol=1e-9)
    assert result.identity == "ACME,LCR,1,2" and result.points == 2
    assert not partial_path(tmp_path / "a.s1p").exists()


def test_timed_out_reading_is_retried(scripted):
    script = [("write", "FREQ 1.000000e+06"), ("write", "TRIG"), ("query", "FETC?", TIMEOUT),
              *lcr_point("1.000000e+06", "1.5,-3.25")]
    assert scripted(script, retries=1).measure_impedance(1e6) == complex(1.5, -3.25)


def test_retries_are_bounded(scripted):
    once = [("write", "FREQ 1.000000e+06"), ("write", "TRIG"), ("query", "FETC?", TIMEOUT)]
    with pytest.raises(InstrumentTimeout, match=r"'FETC\?'.*1e\+06 Hz.*3 tries") as info:
        scripted(once * 3, retries=2).measure_impedance(1e6)
    assert info.value.exit_code == 3


def test_instrument_fault_in_error_queue(scripted):
    script = [("write", "FREQ 1.000000e+06"), ("write", "TRIG"), ("query", "FETC?", "1,2"),
              ("query", "SYST:ERR?", '-222,"Data out of range"')]
    with pytest.raises(InstrumentError, match=r"fault after 'FETC\?'.*-222"):
        scripted(script).measure_impedance(1e6)


def test_lost_connection_names_resource_and_command():
    class Lost(ScriptedTransport):
        def write(self, message):
            raise LOST

    with pytest.raises(InstrumentError, match=r"TEST::1: 'FREQ 1.000000e\+06' failed: The connection"):
        Instrument(Session(Lost([]), "TEST::1"), load_profile("lcr-scpi-generic")).measure_impedance(1e6)


def test_refused_connection_is_an_instrument_error():
    class Refusing(ScriptedTransport):
        def query(self, message):
            raise ConnectionRefusedError(111, "Connection refused")

    with pytest.raises(InstrumentError, match=r"TEST::2: '\*IDN\?' failed"):
        Instrument(Session(Refusing([]), "TEST::2"), load_profile("lcr-scpi-generic")).identify()


def test_empty_identification_is_refused(scripted):
    with pytest.raises(InstrumentError, match=r"empty reply to '\*IDN\?'"):
        scripted([("query", "*IDN?", "")]).identify()


def test_garbage_reply_names_the_command(scripted):
    script = [("write", "FREQ 1.000000e+06"), ("write", "TRIG"), ("query", "FETC?", "OVLD,abc")]
    with pytest.raises(InstrumentError, match=r"reply to 'FETC\?' is not 'R,X'.*'OVLD,abc'"):
        scripted(script).measure_impedance(1e6)


def test_vna_sequence(scripted, tmp_path):
    s11 = np.array([0.5 + 0.1j, -0.2 + 0.3j, 0.9 - 0.05j])
    script = [("query", "*IDN?", "ACME,VNA,1,2"), ("write", "*CLS"), ("query", "SYST:ERR?", "0,ok"),
              ("write", "SENS:FREQ:STAR 1.000000e+06"), ("write", "SENS:FREQ:STOP 1.000000e+08"),
              ("write", "SENS:SWE:POIN 3"), ("write", "SENS:SWE:TYPE LOG"), ("query", "SYST:ERR?", "0,ok"),
              ("write", "INIT:IMM"), ("query", "*OPC?", "1"),
              ("write", "CALC:PAR:SEL S11"), ("query", "CALC:DATA? SDATA", format_trace(s11, "s_trace_ri")),
              ("query", "SYST:ERR?", "0,ok")]
    acquire(scripted(script, "vna-scpi-trace"), SweepPlan(1e6, 1e8, 3, log=True), tmp_path / "v.s1p")
    network = rf.Network(str(tmp_path / "v.s1p"))
    np.testing.assert_allclose(network.f, [1e6, 1e7, 1e8])
    np.testing.assert_allclose(network.s[:, 0, 0], s11, rtol=1e-11)


def test_interrupt_keeps_partial_file(tmp_path):
    class Stopping(Instrument):
        calls = 0

        def identify(self):
            return "fake"

        def configure(self):
            pass

        def measure_impedance(self, f_Hz):
            self.calls += 1
            if self.calls == 4:
                raise KeyboardInterrupt
            return complex(50.0, 2 * math.pi * f_Hz * 1e-6)

    instrument = Stopping(Session(ScriptedTransport([]), "TEST::3"), load_profile("lcr-scpi-generic"))
    with pytest.raises(KeyboardInterrupt):
        acquire(instrument, SweepPlan(1e5, 1e6, 10), tmp_path / "x.s1p")
    partial = partial_path(tmp_path / "x.s1p")
    assert partial.read_text().startswith(INCOMPLETE_MARK)
    assert "interrupted by the user" in partial.read_text()
    assert len(rf.Network(str(partial)).f) == 3
    assert not (tmp_path / "x.s1p").exists()


# --- replies -------------------------------------------------------------------------

def test_point_formats():
    # Z = Rs + j 2 pi f Ls (series inductor, textbook reactance X_L = omega L)
    assert parse_point("1e-5,1.0", "ls_rs", 1e6, "FETC?") == pytest.approx(complex(1.0, 2 * math.pi * 10.0))
    # |Z| = 100 ohm at +90 degrees is pure reactance j100 (polar form)
    assert parse_point("100,90", "z_theta_deg", 1e6, "FETC?") == pytest.approx(100j, abs=1e-12)
    assert parse_point("3,4,0,extra", "r_x", 1e6, "FETC?") == complex(3, 4)
    with pytest.raises(InstrumentError, match="overload"):
        parse_point("9.9e37,1", "r_x", 1e6, "FETC?")
    with pytest.raises(InstrumentError, match=r"'FETC\?'"):
        parse_point("7", "r_x", 1e6, "FETC?")


def test_trace_formats():
    s = np.array([0.5 * np.exp(1j * 0.3), 0.01 * np.exp(-2j)])
    for fmt in ("s_trace_ri", "s_trace_ma", "s_trace_db"):
        np.testing.assert_allclose(parse_trace(format_trace(s, fmt), fmt, 2, "CALC:DATA?"), s, rtol=1e-10)
    # -6.0206 dB is a linear magnitude of 0.5 (20 log10 0.5)
    assert abs(parse_trace("-6.0206,0", "s_trace_db", 1, "X")[0]) == pytest.approx(0.5, rel=1e-5)
    with pytest.raises(InstrumentError, match=r"'CALC:DATA\?' has 3 numbers; expected 4"):
        parse_trace("1,2,3", "s_trace_ri", 2, "CALC:DATA?")


# --- profiles ------------------------------------------------------------------------

MINIMAL = """
name = "mine"
kind = "lcr"
[commands]
identify = "*IDN?"
set_frequency = "F {frequency_Hz:.3f}"
read = "R?"
[reply]
format = "z_theta_deg"
"""


def test_shipped_profiles_load():
    profiles = available_profiles()
    assert profiles["lcr-scpi-generic"].kind == "lcr"
    assert profiles["vna-scpi-trace"].reply_format == "s_trace_ri"


@pytest.mark.parametrize("change, message", [
    (("[reply]", "[reply]\ncolour = 1"), "unknown key 'colour' in \\[reply\\]"),
    (("kind = \"lcr\"", "kind = \"lcr\"\nmodel = 1"), "unknown key 'model' in the profile"),
    (("read = \"R?\"", "read = \"R?\"\nfetch = \"X\""), "unknown key 'fetch' in \\[commands\\]"),
    (("{frequency_Hz:.3f}", "{freq}"), "uses \\{freq\\}"),
    (("{frequency_Hz:.3f}", "{frequency_Hz:d}"), "cannot be filled in"),
    (("z_theta_deg", "s_trace_ri"), "takes one of r_x"),
    (("read = \"R?\"\n", ""), "needs \\[commands\\] read"),
])
def test_profile_validation_names_key_and_file(change, message):
    text = MINIMAL.replace(*change)
    with pytest.raises(InputError, match=message) as info:
        parse_profile(text, "my/mine.toml")
    assert info.value.path == "my/mine.toml"


def test_user_profiles_from_folder_and_env(tmp_path, monkeypatch):
    (tmp_path / "a.toml").write_text(MINIMAL)
    assert load_profile("mine", tmp_path).reply_format == "z_theta_deg"
    monkeypatch.setenv("RFMEAS_PROFILES", str(tmp_path))
    assert load_profile("mine").set_frequency == "F {frequency_Hz:.3f}"
    with pytest.raises(InputError, match="no instrument profile named 'other'.*mine"):
        load_profile("other")


def test_sweep_parsing():
    plan = parse_sweep("100k:30M:201", log=True)
    assert (plan.start_Hz, plan.stop_Hz, plan.points) == (1e5, 3e7, 201)
    f = plan.frequencies_Hz()
    assert f[0] == pytest.approx(1e5) and f[-1] == pytest.approx(3e7)
    assert np.allclose(f[1:] / f[:-1], f[1] / f[0])
    for bad in ("100k:30M", "30M:100k:11", "0:1M:3", "1k:1M:many"):
        with pytest.raises(InputError):
            parse_sweep(bad)


# --- Touchstone stream ---------------------------------------------------------------

def test_stream_two_port_order_matches_scikit_rf(tmp_path):
    s = np.array([[0.1 + 0.2j, 0.3 - 0.1j], [0.7 + 0.0j, -0.4 + 0.5j]])  # [[S11, S12], [S21, S22]]
    stream = TouchstoneStream(tmp_path / "t.s2p", 2, comments=["test"]).open()
    stream.write_row(1e6, s)
    stream.write_row(2e6, s * 0.5)
    assert partial_path(tmp_path / "t.s2p").read_text().startswith(INCOMPLETE_MARK)
    path = stream.finish()
    assert INCOMPLETE_MARK not in path.read_text()
    network = rf.Network(str(path))  # scikit-rf's reader: v1 two-port rows are S11 S21 S12 S22
    np.testing.assert_allclose(network.s[0], s, rtol=1e-11)
    np.testing.assert_allclose(network.s[1], 0.5 * s, rtol=1e-11)


# --- pyvisa-sim ----------------------------------------------------------------------

PLAN = SweepPlan(1e5, 3e7, 41, log=True)


def sim_acquire(tmp_path, profile_name, wiring, faults=SimFaults(), name=None, plan=PLAN):
    profile = load_profile(profile_name)
    # A short timeout only where a fault makes one wait for it: under load pyvisa-sim can need more than
    # 30 ms for a long trace, and a reply cut by a timeout leaves its tail for the next read.
    timeout_ms = 30 if faults.silent_from is not None else 5000
    session = open_simulated_session(profile, plan, wiring, faults=faults, timeout_ms=timeout_ms)
    out = tmp_path / (name or f"sim.s{wiring.ports}p")
    try:
        return acquire(Instrument(session, profile), plan, out)
    finally:
        session.close()


@pytest.mark.parametrize("termination", ["open", "short", "200"])
def test_lcr_sim_round_trip(tmp_path, termination):
    wiring = Wiring("primary", termination)
    result = sim_acquire(tmp_path, "lcr-scpi-generic", wiring)
    network = rf.Network(result.path)  # read back with scikit-rf, converted to Z by scikit-rf
    z_model = input_impedance(DEFAULT_SIM_TRANSFORMER, network.f, "primary", termination)
    np.testing.assert_allclose(network.z[:, 0, 0], z_model, rtol=1e-8)


def test_lcr_sim_low_frequency_is_the_primary_inductance(tmp_path):
    network = rf.Network(sim_acquire(tmp_path, "lcr-scpi-generic", Wiring()).path)
    # well below self-resonance an open-circuit winding is R1 + j omega L1 (X_L = omega L, textbook);
    # omega^2 L C ~ 1e-4 at 100 kHz here, so 1 % covers the capacitance
    L_H = network.z[0, 0, 0].imag / (2 * math.pi * network.f[0])
    assert L_H == pytest.approx(DEFAULT_SIM_TRANSFORMER.L1_H, rel=0.01)


def test_vna_sim_round_trip_two_port(tmp_path):
    result = sim_acquire(tmp_path, "vna-scpi-trace", Wiring(ports=2))
    network = rf.Network(result.path)
    np.testing.assert_allclose(network.s, s_matrix(DEFAULT_SIM_TRANSFORMER, network.f), rtol=1e-9, atol=1e-12)
    # the simulated transformer is reciprocal, and scikit-rf agrees (S21 = S12)
    np.testing.assert_allclose(network.s[:, 1, 0], network.s[:, 0, 1], rtol=1e-9)


def test_vna_sim_round_trip_one_port_secondary(tmp_path):
    result = sim_acquire(tmp_path, "vna-scpi-trace", Wiring("secondary", "open"))
    network = rf.Network(result.path)
    z_model = input_impedance(DEFAULT_SIM_TRANSFORMER, network.f, "secondary", "open")
    np.testing.assert_allclose(network.z[:, 0, 0], z_model, rtol=1e-8)


def test_sim_timeout_mid_sweep_leaves_readable_partial(tmp_path):
    with pytest.raises(InstrumentTimeout, match=r"'FETC\?'.*partial data \(17 of 41 points\)") as info:
        sim_acquire(tmp_path, "lcr-scpi-generic", Wiring(), SimFaults(silent_from=17))
    assert info.value.exit_code == 3
    network = rf.Network(str(partial_path(tmp_path / "sim.s1p")))
    assert len(network.f) == 17
    z_model = input_impedance(DEFAULT_SIM_TRANSFORMER, network.f)
    np.testing.assert_allclose(network.z[:, 0, 0], z_model, rtol=1e-8)


@pytest.mark.parametrize("profile, command", [("lcr-scpi-generic", "FETC?"), ("vna-scpi-trace", "CALC:DATA? SDATA")])
def test_sim_garbage_names_the_command(tmp_path, profile, command):
    with pytest.raises(InstrumentError) as info:
        sim_acquire(tmp_path, profile, Wiring(), SimFaults(garbage_at=0, garbage="#?ERR"))
    assert f"reply to '{command}'" in str(info.value) and "'#?ERR'" in str(info.value)


def test_sim_rejects_a_sweep_it_was_not_built_for(tmp_path):
    profile = load_profile("vna-scpi-trace")
    session = open_simulated_session(profile, PLAN, Wiring(), timeout_ms=30)
    with pytest.raises(InstrumentError, match="fault after 'SENS:SWE:POIN"):
        acquire(Instrument(session, profile), SweepPlan(1e6, 2e6, 5), tmp_path / "y.s1p")


def test_undefined_sim_resource_fails_identification():
    # pyvisa-sim opens any resource name and answers '' to everything
    session = open_session("GPIB0::99::INSTR", "@sim", timeout_ms=30)
    with pytest.raises(InstrumentError, match="empty reply"):
        with pytest.warns(UserWarning):
            Instrument(session, load_profile("lcr-scpi-generic")).identify()


def test_sim_definition_lists_every_reading():
    definition = simulated_definition(load_profile("lcr-scpi-generic"), SweepPlan(1e6, 2e6, 3), Wiring())
    queries = [d["q"] for d in definition["devices"]["simulated"]["dialogues"]]
    assert {"FREQ 1.000000e+06", "FREQ 1.500000e+06", "FREQ 2.000000e+06"} <= set(queries)


def test_manifest_text_parses_as_the_design_format():
    import tomllib

    data = tomllib.loads(manifest_text("unit 7", default_plan("vna"), 3, 9))
    assert data["transformer"] == {"name": "unit 7", "primary_turns": 3, "secondary_turns": 9}
    assert data["sweep"][1] == {"file": "pri_short.s1p", "port1": "primary", "termination": "short"}
    assert data["sweep"][3] == {"file": "thru.s2p", "port1": "primary", "port2": "secondary"}
    with pytest.raises(InputError):
        manifest_text("x", [])


def test_a_sweep_of_more_points_than_can_be_read_back_is_refused_before_any_work():
    # once seen: `acquire --sweep 1M:10M:1000000000` built a billion-point grid and hung
    from rfmeas.errors import InputError
    from rfmeas.instruments.sweep import parse_sweep
    from rfmeas.io.touchstone import MAX_POINTS

    with pytest.raises(InputError, match="at most"):
        parse_sweep("1M:10M:1000000000")
    assert parse_sweep(f"1M:10M:{MAX_POINTS}").points == MAX_POINTS
