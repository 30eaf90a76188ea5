"""The project's one error hierarchy and the CLI exit codes it maps to."""

from __future__ import annotations

from pathlib import Path

EXIT_OK = 0
EXIT_DESIGN_FAILED = 1
EXIT_BAD_INPUT = 2
EXIT_INSTRUMENT = 3
EXIT_INTERRUPTED = 130  # stopped by Ctrl-C: 128 + SIGINT (common practice)


class RfmeasError(Exception):
    """Base of every error rfmeas raises on purpose.

    `path` names the file the problem is in (when there is one) so the CLI can
    print one line: ``<path>: <message>``.
    """

    exit_code = EXIT_BAD_INPUT

    def __init__(self, message: str, path: str | Path | None = None):
        super().__init__(message)
        self.message = message
        self.path = None if path is None else str(path)

    def __str__(self) -> str:
        return f"{self.path}: {self.message}" if self.path else self.message


class InputError(RfmeasError):
    """Bad input: a malformed file, manifest or option (exit code 2)."""

    exit_code = EXIT_BAD_INPUT


class FitError(RfmeasError):
    """The data cannot be fitted or do not look like a transformer (exit code 2)."""

    exit_code = EXIT_BAD_INPUT


class InstrumentError(RfmeasError):
    """An instrument did not answer, answered garbage, or reported a fault (exit code 3)."""

    exit_code = EXIT_INSTRUMENT
