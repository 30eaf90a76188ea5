"""The steps of a guided measurement session and the manifest it writes.

The manifest follows the measurement-set format of the design notes:
[transformer] name and optional turns, then one [[sweep]] per file with
`port1` and either `termination` (one port) or `port2` (two port).
"""

from __future__ import annotations

import json
from dataclasses import dataclass

from rfmeas.errors import InputError
from rfmeas.instruments.simulation import Wiring
from rfmeas.model.termination import Termination


@dataclass(frozen=True)
class PlannedSweep:
    """One sweep of the set: the file to write and how the transformer is wired for it."""

    file: str
    port1: str
    termination: str | None = None
    port2: str | None = None

    @property
    def wiring(self) -> Wiring:
        return Wiring(self.port1, self.termination or "open", 2 if self.port2 else 1)

    def instruction(self, kind: str) -> str:
        """What the user must connect, in plain words."""
        where = "the meter's test terminals" if kind == "lcr" else "port 1"
        if self.port2:
            return f"Connect the {self.port1} to port 1 and the {self.port2} to port 2."
        other = "secondary" if self.port1 == "primary" else "primary"
        termination = Termination.parse(self.termination or "open", self.file)
        if termination.is_open:
            rest = f"leave the {other} open"
        elif termination.is_short:
            rest = f"short the {other} with a short, low-inductance link"
        else:
            rest = f"terminate the {other} in {termination.resistance_ohm:g} ohms"
        return f"Connect the {self.port1} to {where} and {rest}."

    def to_dict(self) -> dict:
        entry = {"file": self.file, "port1": self.port1}
        if self.port2:
            entry["port2"] = self.port2
        else:
            entry["termination"] = Termination.parse(self.termination or "open", self.file).to_json()
        return entry


def default_plan(kind: str) -> tuple[PlannedSweep, ...]:
    """Primary open and shorted, secondary open; a VNA adds the two-port through sweep."""
    steps = [
        PlannedSweep("pri_open.s1p", "primary", "open"),
        PlannedSweep("pri_short.s1p", "primary", "short"),
        PlannedSweep("sec_open.s1p", "secondary", "open"),
    ]
    if kind == "vna":
        steps.append(PlannedSweep("thru.s2p", "primary", port2="secondary"))
    return tuple(steps)


def _toml_string(value: str) -> str:
    # a TOML basic string is a JSON string for every character we write
    return json.dumps(value, ensure_ascii=False)


def manifest_text(name: str, sweeps, primary_turns: int | None = None,
                  secondary_turns: int | None = None, comment: str | None = None) -> str:
    """TOML text of a measurement-set manifest listing `sweeps` (PlannedSweep)."""
    if not sweeps:
        raise InputError("no sweep was taken, so there is no measurement set to write")
    lines = [f"# {comment}", ""] if comment else []
    lines += ["[transformer]", f"name = {_toml_string(name)}"]
    for key, turns in (("primary_turns", primary_turns), ("secondary_turns", secondary_turns)):
        if turns is not None:
            lines.append(f"{key} = {int(turns)}")
    for sweep in sweeps:
        lines += ["", "[[sweep]]"]
        lines += [f"{key} = {_toml_string(value) if isinstance(value, str) else repr(value)}"
                  for key, value in sweep.to_dict().items()]
    return "\n".join(lines) + "\n"
