"""Text exchanges with one instrument over any transport that has write/read/query.

The transport is passed in (a pyvisa resource, or a scripted fake in tests), so
nothing here opens a connection on construction. Every transport failure comes
out as an InstrumentError that names the resource and the command.
"""

from __future__ import annotations

import logging
from typing import Protocol

from rfmeas.errors import InputError, InstrumentError

log = logging.getLogger(__name__)

DEFAULT_BACKEND = "@py"


class InstrumentTimeout(InstrumentError):
    """The instrument sent no reply in time (a reading may be retried)."""


class Transport(Protocol):
    """What a Session needs from a pyvisa message-based resource."""

    def write(self, message: str): ...

    def read(self) -> str: ...

    def query(self, message: str) -> str: ...

    def close(self): ...


def _transport_errors():
    """The exceptions a transport raises for a lost or refused connection."""
    try:
        from pyvisa.errors import VisaIOError
    except ImportError:  # pragma: no cover - pyvisa is a dependency
        return (OSError,)
    return (VisaIOError, OSError)


def _is_timeout(exc: BaseException) -> bool:
    return getattr(exc, "abbreviation", "") == "VI_ERROR_TMO" or isinstance(exc, TimeoutError)


class Session:
    """One instrument connection: `write`, `query` and `read` of text lines.

    `resource_name` is only used in messages. Replies are stripped of
    surrounding whitespace.
    """

    def __init__(self, transport: Transport, resource_name: str):
        self._transport = transport
        self.resource_name = resource_name

    def _fail(self, exc: BaseException, command: str) -> InstrumentError:
        if _is_timeout(exc):
            return InstrumentTimeout(f"{self.resource_name}: no reply to '{command}' in time")
        detail = getattr(exc, "description", None) or str(exc) or type(exc).__name__
        return InstrumentError(f"{self.resource_name}: '{command}' failed: {detail}")

    def write(self, command: str) -> None:
        log.debug("%s <- %s", self.resource_name, command)
        try:
            self._transport.write(command)
        except _transport_errors() as exc:
            raise self._fail(exc, command) from exc

    def query(self, command: str) -> str:
        log.debug("%s <- %s ?", self.resource_name, command)
        try:
            reply = self._transport.query(command)
        except _transport_errors() as exc:
            raise self._fail(exc, command) from exc
        return reply.strip()

    def read(self, command: str = "read") -> str:
        """Read one reply; `command` names what it answers, for messages."""
        try:
            reply = self._transport.read()
        except _transport_errors() as exc:
            raise self._fail(exc, command) from exc
        return reply.strip()

    def close(self) -> None:
        try:
            self._transport.close()
        except _transport_errors() as exc:  # closing a dead link must not hide the first error
            log.warning("%s: closing failed: %s", self.resource_name, exc)


def _resource_manager(backend: str):
    import pyvisa

    try:
        return pyvisa.ResourceManager(backend)
    except (ValueError, OSError, ImportError) as exc:
        raise InputError(f"VISA backend '{backend}' is not available: {exc}") from exc


def list_resources(backend: str = DEFAULT_BACKEND) -> tuple[str, ...]:
    """Resource names the backend can see (pure-Python pyvisa-py by default)."""
    rm = _resource_manager(backend)
    try:
        return tuple(rm.list_resources())
    except _transport_errors() as exc:
        raise InstrumentError(f"listing resources with backend '{backend}' failed: {exc}") from exc
    finally:
        rm.close()


def open_session(resource_name: str, backend: str = DEFAULT_BACKEND, timeout_ms: int = 5000,
                 read_termination: str = "\n", write_termination: str = "\n") -> Session:
    """Open `resource_name` with pyvisa and wrap it in a Session."""
    rm = _resource_manager(backend)
    try:
        resource = rm.open_resource(resource_name, timeout=timeout_ms,
                                    read_termination=read_termination,
                                    write_termination=write_termination)
    except (*_transport_errors(), ValueError) as exc:  # ValueError: the backend lacks a transport package
        rm.close()
        detail = " ".join((getattr(exc, "description", None) or str(exc)).split())
        raise InstrumentError(f"{resource_name}: cannot open the instrument: {detail}") from exc
    return Session(resource, resource_name)
