"""A simulated instrument for demos and tests: pyvisa-sim answering from rfmeas.model.

pyvisa-sim replies are static per command, so the definition is generated at
run time for one sweep of one wiring (which winding is on port 1, what the
other winding sees). Each reading is keyed on the command that makes it
unique: writing an LCR profile's `set_frequency` text for a frequency queues
that frequency's reading, which the following `read` query returns; a VNA
profile's `select` (or `read`) text for a parameter queues that trace. Other
profile commands are accepted silently; an unknown command puts a SCPI
'-100,"Command error"' into the error queue, read by `check_error`.

Only profiles shaped like the shipped ones can be simulated (an LCR profile
with no `wait` query between setting the frequency and reading).
"""

from __future__ import annotations

import json
import shutil
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rfmeas.errors import InputError
from rfmeas.model import TransformerParams, input_impedance, reflection, s_matrix
from rfmeas.model.termination import Termination
from rfmeas.instruments.acquisition import ONE_PORT, TWO_PORT, Z0_OHM, commanded_frequency_Hz
from rfmeas.instruments.profiles import Profile
from rfmeas.instruments.replies import format_point, format_trace
from rfmeas.instruments.session import Session
from rfmeas.instruments.sweep import SweepPlan

SIM_RESOURCE = "sim"
SIM_RESOURCE_NAME = "TCPIP0::rfmeas-sim::inst0::INSTR"
SIM_TIMEOUT_MS = 200

# An invented demo transformer: 20 µH primary, 180 µH secondary (1:3), well coupled.
DEFAULT_SIM_TRANSFORMER = TransformerParams(
    L1_H=20e-6, L2_H=180e-6, k=0.99, R1_ohm=0.1, R2_ohm=0.3, Rc_ohm=20e3,
    C1_F=2e-12, C2_F=1e-12, C12_F=0.5e-12,
)

_NO_ERROR = '0,"No error"'
_COMMAND_ERROR = '-100,"Command error"'


@dataclass(frozen=True)
class Wiring:
    """How the transformer is connected: `port1` winding on port 1 and either
    `termination` on the other winding (one port: 'open', 'short' or ohms) or
    the other winding on port 2 (`ports` = 2)."""

    port1: str = "primary"
    termination: str = "open"
    ports: int = 1

    def __post_init__(self):
        if self.port1 not in ("primary", "secondary"):
            raise InputError(f"simulated port 1 winding must be primary or secondary (got '{self.port1}')")
        if self.ports not in (1, 2):
            raise InputError(f"a simulated sweep has 1 or 2 ports (got {self.ports})")
        try:
            Termination.parse(self.termination, "simulated")
        except InputError:
            raise InputError(f"simulated termination must be open, short or a resistance in ohms "
                             f"(got '{self.termination}')") from None


@dataclass(frozen=True)
class SimFaults:
    """Faults to stage: from reading `silent_from` on (0-based) nothing answers;
    reading `garbage_at` answers `garbage`. A reading is one LCR point or one VNA trace."""

    silent_from: int | None = None
    garbage_at: int | None = None
    garbage: str = "#!?OVLD"


def _reading_reply(index: int, text: str, faults: SimFaults):
    if faults.silent_from is not None and index >= faults.silent_from:
        return None
    if faults.garbage_at is not None and index == faults.garbage_at:
        return faults.garbage
    return text


def _dialogue(query: str, reply: str | None) -> dict:
    return {"q": query} if reply is None else {"q": query, "r": reply}


def simulated_definition(profile: Profile, plan: SweepPlan, wiring: Wiring = Wiring(),
                         params: TransformerParams = DEFAULT_SIM_TRANSFORMER,
                         faults: SimFaults = SimFaults()) -> dict:
    """The pyvisa-sim definition (as a dict) of an instrument measuring `params` over `plan`."""
    replies: dict[str, str | None] = {profile.identify: f"rfmeas,simulated {profile.kind},0,{profile.name}"}
    for command in profile.setup:
        replies[command] = None
    if profile.trigger:
        replies[profile.trigger] = None
    f_Hz = plan.frequencies_Hz()
    if profile.kind == "lcr":
        if profile.wait:
            raise InputError(f"profile '{profile.name}' queries '{profile.wait}' before reading; "
                             f"the simulation cannot order replies around it", path=profile.path)
        replies[profile.read] = None
        for index, f in enumerate(f_Hz):
            command = profile.command("set_frequency", frequency_Hz=float(f))
            f_set = commanded_frequency_Hz(command, float(f))
            z_ohm = complex(input_impedance(params, f_set, wiring.port1, wiring.termination))
            text = format_point(z_ohm, profile.reply_format, f_set, profile.reply_separator)
            replies[command] = _reading_reply(index, text, faults)
    else:
        for key, values in (("set_start", {"start_Hz": plan.start_Hz}), ("set_stop", {"stop_Hz": plan.stop_Hz}),
                            ("set_points", {"points": plan.points})):
            replies[profile.command(key, **values)] = None
        if profile.set_spacing:
            spacing = profile.spacing_log if plan.log else profile.spacing_linear
            replies[profile.command("set_spacing", spacing=spacing)] = None
        if profile.wait:
            replies[profile.wait] = "1"
        if wiring.ports == 1:
            traces = {"S11": reflection(params, f_Hz, wiring.port1, wiring.termination, Z0_OHM)}
        else:
            s = s_matrix(params, f_Hz, wiring.port1, Z0_OHM, Z0_OHM)
            traces = {"S11": s[:, 0, 0], "S21": s[:, 1, 0], "S12": s[:, 0, 1], "S22": s[:, 1, 1]}
        for index, name in enumerate(ONE_PORT if wiring.ports == 1 else TWO_PORT):
            text = format_trace(np.asarray(traces[name]), profile.reply_format, profile.reply_separator)
            if profile.select:
                replies[profile.command("select", parameter=name)] = _reading_reply(index, text, faults)
                replies[profile.command("read", parameter=name)] = None
            else:
                replies[profile.command("read", parameter=name)] = _reading_reply(index, text, faults)

    error = {"response": {}}
    if profile.check_error:
        replies.pop(profile.check_error, None)
        error["error_queue"] = [{"q": profile.check_error, "default": _NO_ERROR,
                                 "command_error": _COMMAND_ERROR, "query_error": _COMMAND_ERROR}]
    eom = {"q": profile.write_termination, "r": profile.read_termination}
    return {
        "spec": "1.1",
        "devices": {"simulated": {
            "eom": {"TCPIP INSTR": eom},
            "error": error,
            "dialogues": [_dialogue(q, r) for q, r in replies.items()],
        }},
        "resources": {SIM_RESOURCE_NAME: {"device": "simulated"}},
    }


def open_simulated_session(profile: Profile, plan: SweepPlan, wiring: Wiring = Wiring(),
                           params: TransformerParams = DEFAULT_SIM_TRANSFORMER,
                           faults: SimFaults = SimFaults(), timeout_ms: int = SIM_TIMEOUT_MS) -> Session:
    """A Session with a pyvisa-sim instrument built for this one sweep (needs pyvisa-sim)."""
    try:
        import pyvisa
        import pyvisa_sim  # noqa: F401  (the '@sim' backend)
    except ImportError as exc:
        raise InputError("the simulated instrument needs pyvisa-sim (pip install pyvisa-sim)") from exc
    folder = Path(tempfile.mkdtemp(prefix="rfmeas-sim-"))
    try:
        # JSON is YAML, so the definition needs no YAML writer
        definition = folder / "instrument.yaml"
        definition.write_text(json.dumps(simulated_definition(profile, plan, wiring, params, faults)),
                              encoding="utf-8")
        rm = pyvisa.ResourceManager(f"{definition}@sim")
        resource = rm.open_resource(SIM_RESOURCE_NAME, timeout=timeout_ms,
                                    read_termination=profile.read_termination,
                                    write_termination=profile.write_termination)
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    return Session(resource, f"{SIM_RESOURCE} ({SIM_RESOURCE_NAME})")
