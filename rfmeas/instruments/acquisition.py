"""Drive an instrument through a sweep with a profile, streaming rows to Touchstone.

`Instrument(session, profile)` only stores its arguments; `identify()` is the
first exchange and refuses a connection that does not answer '*IDN?'.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from rfmeas.errors import InputError, InstrumentError
from rfmeas.instruments.profiles import Profile
from rfmeas.instruments.replies import parse_point, parse_trace
from rfmeas.instruments.session import InstrumentTimeout, Session
from rfmeas.instruments.sweep import SweepPlan
from rfmeas.instruments.touchstone_stream import TouchstoneStream, check_free, ports_for

log = logging.getLogger(__name__)

Z0_OHM = 50.0
ONE_PORT = ("S11",)
TWO_PORT = ("S11", "S21", "S12", "S22")


def commanded_frequency_Hz(command: str, f_Hz: float) -> float:
    """The frequency a set-frequency command really asks for: its last word, as the
    instrument parses it (rounded to the profile's digits), else `f_Hz`."""
    try:
        return float(command.split()[-1])
    except (ValueError, IndexError):
        return f_Hz


class Instrument:
    """One instrument spoken to through `session` with the commands of `profile`."""

    def __init__(self, session: Session, profile: Profile, retries: int | None = None):
        self.session = session
        self.profile = profile
        self.retries = profile.retries if retries is None else retries

    @property
    def source(self) -> str:
        return self.session.resource_name

    def identify(self) -> str:
        """Ask for the identification; an empty or missing reply means nothing trustworthy is there."""
        command = self.profile.identify
        try:
            reply = self.session.query(command)
        except InstrumentTimeout:
            raise InstrumentError(f"{self.source}: no reply to '{command}'; is this the right resource "
                                  f"and is the instrument on?") from None
        if not reply:
            raise InstrumentError(f"{self.source}: empty reply to '{command}'; no instrument seems "
                                  f"to be answering at this resource")
        log.info("%s identifies as %s", self.source, reply)
        return reply

    def check_errors(self, after: str) -> None:
        """Read the error queue (if the profile says how); a non-zero entry is an instrument fault."""
        command = self.profile.check_error
        if not command:
            return
        reply = self.session.query(command)
        code_text = reply.split(",", 1)[0].strip()
        try:
            code = int(code_text)
        except ValueError:
            raise InstrumentError(f"{self.source}: reply to '{command}' is not an error-queue entry "
                                  f"('code,\"message\"'): {reply!r}") from None
        if code != 0:
            raise InstrumentError(f"{self.source}: instrument reports a fault after '{after}': {reply}")

    def configure(self) -> None:
        """Send the profile's set-up commands once."""
        for command in self.profile.setup:
            self.session.write(command)
        if self.profile.setup:
            self.check_errors(self.profile.setup[-1])

    def _retrying(self, action: Callable, what: str):
        """Run `action`; repeat it after a timeout, at most `retries` more times."""
        attempt = 0
        while True:
            try:
                return action()
            except InstrumentTimeout as exc:
                if attempt >= self.retries:
                    tries = "try" if attempt == 0 else "tries"
                    raise InstrumentTimeout(f"{exc.message} ({what}; gave up after {attempt + 1} {tries})") \
                        from exc
                attempt += 1
                log.warning("%s (%s); retrying (%d of %d)", exc.message, what, attempt, self.retries)

    def measure_impedance(self, f_Hz: float) -> complex:
        """One LCR reading at `f_Hz`, as a complex impedance in ohms."""
        p = self.profile

        def once() -> complex:
            self.session.write(p.command("set_frequency", frequency_Hz=f_Hz))
            if p.trigger:
                self.session.write(p.trigger)
            if p.wait:
                self.session.query(p.wait)
            reply = self.session.query(p.read)
            return parse_point(reply, p.reply_format, f_Hz, p.read, p.reply_separator, p.reply_fields,
                               self.source)

        z_ohm = self._retrying(once, f"at {f_Hz:g} Hz")
        self.check_errors(p.read)
        return z_ohm

    def set_sweep(self, plan: SweepPlan) -> None:
        p = self.profile
        self.session.write(p.command("set_start", start_Hz=plan.start_Hz))
        self.session.write(p.command("set_stop", stop_Hz=plan.stop_Hz))
        self.session.write(p.command("set_points", points=plan.points))
        if p.set_spacing:
            self.session.write(p.command("set_spacing", spacing=p.spacing_log if plan.log else p.spacing_linear))
        elif plan.log:
            raise InputError(f"profile '{p.name}' has no set_spacing command, so it cannot take a log sweep",
                             path=p.path)
        self.check_errors(p.set_points)

    def sweep_once(self) -> None:
        """Trigger one sweep and wait for it to finish."""
        p = self.profile
        if p.trigger:
            self.session.write(p.trigger)
        if p.wait:
            self._retrying(lambda: self.session.query(p.wait), "waiting for the sweep")

    def read_trace(self, parameter: str, points: int) -> np.ndarray:
        p = self.profile

        def once() -> np.ndarray:
            if p.select:
                self.session.write(p.command("select", parameter=parameter))
            command = p.command("read", parameter=parameter)
            reply = self.session.query(command)
            return parse_trace(reply, p.reply_format, points, command, p.reply_separator, self.source)

        trace = self._retrying(once, f"trace {parameter}")
        self.check_errors(p.read)
        return trace


@dataclass(frozen=True)
class AcquisitionResult:
    """What one acquisition wrote."""

    path: str
    points: int
    ports: int
    identity: str
    profile: str
    sweep: SweepPlan
    parameters: tuple[str, ...] = field(default=ONE_PORT)
    previous: str | None = None  # where the file this one replaced was kept

    def to_dict(self) -> dict:
        return {"path": self.path, "points": self.points, "ports": self.ports, "identity": self.identity,
                "profile": self.profile, "sweep": self.sweep.to_dict(), "parameters": list(self.parameters),
                "previous": self.previous}


class AcquisitionInterrupted(KeyboardInterrupt):
    """Ctrl-C during an acquisition; `kept` is the partial file holding data (None: nothing was measured)."""

    def __init__(self, kept: Path | None):
        super().__init__()
        self.kept = kept


def _reflection(z_ohm: complex) -> complex:
    return (z_ohm - Z0_OHM) / (z_ohm + Z0_OHM)


def _with_partial_note(exc: InstrumentError, stream: TouchstoneStream, total: int,
                       kept: Path | None = None) -> InstrumentError:
    if kept is not None:
        note = f"; the traces read before the fault are kept in {kept}"
    elif stream.rows:
        note = f"; partial data ({stream.rows} of {total} points) kept in {stream.partial}"
    else:
        note = f"; no data taken ({stream.partial} holds the header only)"
    return type(exc)(exc.message + note, path=exc.path)


def _keep_traces(stream: TouchstoneStream, f_Hz, traces: dict, reason: str, comments) -> Path | None:
    """Write the two-port traces read before a fault or Ctrl-C; returns the file that holds them.

    With S11 and S21 the rows go to the partial .s2p as a forward-only sweep
    (S12 and S22 written as 0, the convention for "not measured"; an S12 read
    without S22 is left out); with S11 alone to a partial .s1p beside it.
    None when no trace was read.
    """
    if "S21" in traces:
        zero = np.zeros(len(f_Hz), dtype=complex)
        if "S22" not in traces:
            stream._write("! forward only: S12 and S22 were not read before the sweep stopped\n")
        for i, f in enumerate(f_Hz):
            s12 = traces["S12"][i] if "S22" in traces else zero[i]
            s22 = traces["S22"][i] if "S22" in traces else zero[i]
            stream.write_row(f, np.array([[traces["S11"][i], s12], [traces["S21"][i], s22]]))
        stream.abandon(reason)
        return stream.partial
    if "S11" in traces:
        one_port = TouchstoneStream(stream.path.with_suffix(".s1p"), 1, stream.z0_ohm,
                                    [*comments, "S11 of a two-port sweep that stopped before S21 was read"],
                                    overwrite=True).open()
        for i, f in enumerate(f_Hz):
            one_port.write_row(f, traces["S11"][i])
        one_port.abandon(reason)
        stream.abandon(reason)
        stream.partial.unlink()  # it held the header only; the data are in the one-port file
        return one_port.partial
    return None


def acquire(instrument: Instrument, plan: SweepPlan, output: str | Path,
            on_progress: Callable[[int, int], None] | None = None,
            comments=(), overwrite: bool = False) -> AcquisitionResult:
    """Identify, configure, sweep and write `output` (.s1p or .s2p) as the rows arrive.

    On an instrument fault, a lost connection or Ctrl-C the rows taken so far
    stay in the partial file (see touchstone_stream) and the error is re-raised;
    a VNA's two-port traces read before the fault are written there too
    (_keep_traces). An existing `output` is refused unless `overwrite`, which
    keeps it beside the new file.
    """
    output = Path(output)
    ports = ports_for(output)
    profile = instrument.profile
    if profile.kind == "lcr" and ports != 1:
        raise InputError("an LCR meter gives one-port readings; write a .s1p file", path=output)
    check_free(output, overwrite)
    parameters = ONE_PORT if ports == 1 else TWO_PORT
    progress = on_progress or (lambda done, total: None)

    try:
        identity = instrument.identify()
        instrument.configure()
    except KeyboardInterrupt:
        raise AcquisitionInterrupted(None) from None
    f_Hz = plan.frequencies_Hz()
    header = [f"rfmeas acquire, profile {profile.name}", f"instrument: {identity}",
              f"sweep: {plan.describe()}", *comments]
    stream = TouchstoneStream(output, ports, Z0_OHM, header, overwrite=overwrite).open()
    traces: dict[str, np.ndarray] = {}
    try:
        if profile.kind == "lcr":
            progress(0, plan.points)
            for index, f in enumerate(f_Hz):
                f_set = commanded_frequency_Hz(profile.command("set_frequency", frequency_Hz=float(f)), float(f))
                stream.write_row(f_set, _reflection(instrument.measure_impedance(float(f))))
                progress(index + 1, plan.points)
        else:
            progress(0, len(parameters))
            instrument.set_sweep(plan)
            instrument.sweep_once()
            for index, name in enumerate(parameters):
                traces[name] = instrument.read_trace(name, plan.points)
                progress(index + 1, len(parameters))
            for i, f in enumerate(f_Hz):
                s = (traces["S11"][i] if ports == 1 else
                     np.array([[traces["S11"][i], traces["S12"][i]], [traces["S21"][i], traces["S22"][i]]]))
                stream.write_row(f, s)
    except InstrumentError as exc:
        kept = _keep_traces(stream, f_Hz, traces, exc.message, header) if ports == 2 and not stream.rows else None
        stream.abandon(exc.message)
        raise _with_partial_note(exc, stream, plan.points, kept) from exc
    except KeyboardInterrupt:
        kept = (_keep_traces(stream, f_Hz, traces, "interrupted by the user (Ctrl-C)", header)
                if ports == 2 and not stream.rows else None)
        stream.abandon("interrupted by the user (Ctrl-C)")
        raise AcquisitionInterrupted(kept or (stream.partial if stream.rows else None)) from None
    except BaseException as exc:
        stream.abandon(f"{type(exc).__name__}: {exc}")
        raise
    path = stream.finish()
    return AcquisitionResult(str(path), plan.points, ports, identity, profile.name, plan, parameters,
                             None if stream.previous is None else str(stream.previous))

