"""A Touchstone writer that appends each row as it is measured.

Rows go to '<stem>.partial<ext>' (e.g. pri_open.partial.s1p), flushed and
synced after every row, under a first comment line saying the sweep is
incomplete. `finish()` writes the final file without that line and removes
the partial one; `abandon(reason)` adds a closing comment with the reason
and keeps the partial file, which any Touchstone reader can still load.

A measurement is never overwritten: an existing output is refused unless
`overwrite` is given, and then (like an earlier partial file, always) it is
kept beside the new one as '<stem>.previous-<UTC time><ext>'.
"""

from __future__ import annotations

import logging
import os
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from rfmeas.errors import InputError
from rfmeas.io.incomplete import INCOMPLETE_SWEEP_MARK

log = logging.getLogger(__name__)

INCOMPLETE_MARK = INCOMPLETE_SWEEP_MARK + ": acquisition interrupted or still running; rows may be missing"


def partial_path(path: str | Path) -> Path:
    path = Path(path)
    return path.with_name(f"{path.stem}.partial{path.suffix}")


def previous_path(path: str | Path) -> Path:
    """'<stem>.previous-<UTC time><ext>' beside `path` (with -2, -3, ... if that is taken)."""
    path = Path(path)
    stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    candidate = path.with_name(f"{path.stem}.previous-{stamp}{path.suffix}")
    n = 2
    while candidate.exists():
        candidate = path.with_name(f"{path.stem}.previous-{stamp}-{n}{path.suffix}")
        n += 1
    return candidate


def keep_aside(path: str | Path, leave_in_place: bool = False) -> Path | None:
    """Give an existing file a second name from previous_path(); returns it (None: nothing there).

    With `leave_in_place` the file also keeps its own name until an atomic write
    replaces it (so there is no moment without it); else it is moved.
    """
    path = Path(path)
    if not path.exists():
        return None
    target = previous_path(path)
    try:
        os.link(path, target)  # a second name for the same bytes; refuses to replace anything
    except OSError:  # no hard links here (or a name taken meanwhile): move the file instead
        target = previous_path(path)
        try:
            os.rename(path, target)
        except OSError as exc:
            raise InputError(f"cannot keep the earlier file: {exc.strerror or exc}", path=path) from exc
    else:
        if not leave_in_place:
            path.unlink()
    log.info("kept the earlier %s as %s", path, target)
    return target


def check_free(path: str | Path, overwrite: bool) -> None:
    """Refuse to measure into an existing file unless `overwrite` (which keeps it beside the new one)."""
    path = Path(path)
    if path.exists() and not overwrite:
        raise InputError("exists already; pass --overwrite to measure anew (the earlier file is then kept "
                         f"as {path.stem}.previous-<time>{path.suffix})", path=path)


def ports_for(path: str | Path) -> int:
    """Port count from a .s1p / .s2p name."""
    suffix = Path(path).suffix.lower()
    if suffix not in (".s1p", ".s2p"):
        raise InputError(f"output must end in .s1p or .s2p (got '{Path(path).name}')", path=path)
    return int(suffix[2])


class TouchstoneStream:
    """Stream rows of S parameters (RI, hertz, real reference `z0_ohm`) to a Touchstone v1 file."""

    def __init__(self, path: str | Path, ports: int, z0_ohm: float = 50.0, comments=(), overwrite: bool = False):
        self.path = Path(path)
        self.overwrite = overwrite
        self.previous: Path | None = None  # where an earlier output was kept
        self.ports = ports
        self.z0_ohm = z0_ohm
        self.comments = tuple(comments)
        self.partial = partial_path(self.path)
        self.rows = 0
        self._file = None

    def open(self) -> "TouchstoneStream":
        check_free(self.path, self.overwrite)
        keep_aside(self.partial)  # an earlier interrupted sweep is data too
        try:
            self._file = open(self.partial, "x", encoding="utf-8", newline="\n")
        except OSError as exc:
            raise InputError(f"cannot write: {exc.strerror or exc}", path=self.partial) from exc
        header = [INCOMPLETE_MARK] + [f"! {c}" for c in self.comments]
        header.append(f"# Hz S RI R {self.z0_ohm:g}")
        self._write("\n".join(header) + "\n")
        return self

    def _write(self, text: str) -> None:
        self._file.write(text)
        self._file.flush()
        os.fsync(self._file.fileno())

    def write_row(self, f_Hz: float, s) -> None:
        """One frequency: `s` is a complex scalar (1 port) or a (2, 2) matrix."""
        s = np.asarray(s, dtype=complex).reshape(self.ports, self.ports)
        # Touchstone v1 two-port order: S11 S21 S12 S22 (column-major)
        values = s.T.ravel() if self.ports == 2 else s.ravel()
        fields = [f"{f_Hz:.12g}"] + [f"{v.real:+.12e} {v.imag:+.12e}" for v in values]
        self._write(" ".join(fields) + "\n")
        self.rows += 1

    def finish(self) -> Path:
        """Write the complete file at `path` and drop the partial one."""
        self._file.close()
        text = self.partial.read_text(encoding="utf-8")
        text = text.replace(INCOMPLETE_MARK + "\n", "", 1)
        from rfmeas.io.atomic import atomic_write_text

        check_free(self.path, self.overwrite)  # it may have appeared during the sweep
        self.previous = keep_aside(self.path, leave_in_place=True)
        atomic_write_text(self.path, text)
        self.partial.unlink()
        return self.path

    def abandon(self, reason: str) -> Path:
        """Close the partial file with a comment saying why it stopped; keep it."""
        if self._file is not None and not self._file.closed:
            self._write(f"! stopped after {self.rows} rows: {reason}\n")
            self._file.close()
        log.info("partial sweep kept in %s (%d rows): %s", self.partial, self.rows, reason)
        return self.partial
