"""Read and write Touchstone .s1p/.s2p files (versions 1 and 2).

scikit-rf does the parsing proper, but it reads the option line by position,
takes a backwards frequency in a two-port file as the start of a noise block
and loads NaN, unsorted or repeated points without complaint. So the text is
checked and cleaned here first: each line is classified, every number is
validated, the known quirks of small-VNA files are repaired with a warning
the user can read, and a canonical text goes to scikit-rf.
"""

from __future__ import annotations

import hashlib
import io
import logging
import math
import os
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import NoReturn

import numpy as np
import skrf as rf

from rfmeas import __version__
from rfmeas.errors import InputError
from rfmeas.limits import FREQUENCY_RANGE_HZ
from rfmeas.io import files
from rfmeas.io.atomic import atomic_write_text

log = logging.getLogger(__name__)

MAX_FILE_BYTES = files.MAX_TOUCHSTONE_BYTES
MIN_POINTS = 3
MAX_POINTS = 200_001
"""More points than any sweep a VNA takes (common practice: 10,001 to 100,001 at most);
a longer file is refused while it is parsed, before the work grows with it."""
MAX_S_MAGNITUDE = 1e3
"""|S| of a passive device is at most about 1; above 1000 (60 dB of gain) a value is not a measurement."""
# A column whose |S| never rises above this (-200 dB) was not measured: exporters of
# forward-only sweeps write -300 or -600 dB, 1e-15 or exact zeros there.
UNMEASURED_BELOW = 1e-10
_ELEMENTS = {1: (("S11", 0, 0),), 2: (("S11", 0, 0), ("S21", 1, 0), ("S12", 0, 1), ("S22", 1, 1))}

UNIT_SCALE = {"HZ": 1.0, "KHZ": 1e3, "MHZ": 1e6, "GHZ": 1e9}
FORMATS = ("RI", "MA", "DB")
PARAMETERS = ("S", "Y", "Z", "H", "G")
DEFAULT_OPTIONS = ("GHZ", "S", "MA", 50.0)  # Touchstone's defaults for a missing option line

_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?", re.ASCII)
_NUMBER_ROW = re.compile(rf"{_NUMBER.pattern}(?: {_NUMBER.pattern})*", re.ASCII)
_CONTROL = re.compile(r"[\x00-\x08\x0e-\x1f]")
_NOT_FINITE = re.compile(r"[+-]?(?:nan|inf|infinity)", re.IGNORECASE)
_COMPLEX = re.compile(r"[()+\-.\deEjJ,]*[jJ(][()+\-.\deEjJ,]*")
_KEYWORD = re.compile(r"\[([^\]]*)\](.*)")
_PORTS_FROM_EXT = re.compile(r"\.s(\d+)p", re.IGNORECASE)

_ROW_WIDTH = {1: 3, 2: 9}
_NOISE_WIDTH = 5


@dataclass(frozen=True, eq=False)
class TouchstoneData:
    """One Touchstone file as read: the network, how it was cleaned, and the file itself.

    `network` has strictly increasing frequencies, all above 0 Hz, and finite
    values. `unmeasured` names the S columns whose magnitude stays at or below
    UNMEASURED_BELOW (-200 dB) at every point: not measured, whatever the
    format wrote there (-300 or -600 dB, 1e-15, zeros); they are set to exactly
    zero in `network` and must never be fitted. `forward_only` is True for a
    two-port file whose S12 and S22 were not measured (only S11 and S21).
    `warnings` are sentences for the user, one per repair. `raw_bytes` is the
    file exactly as read and `sha256` its hex digest.
    """

    network: rf.Network
    path: str
    port_count: int
    forward_only: bool
    warnings: tuple[str, ...]
    sha256: str
    raw_bytes: bytes = field(repr=False)
    unmeasured: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        """Plain metadata (no arrays): file, size, digest, ports, frequency span, warnings."""
        f_Hz = self.network.f
        z0_ohm = self.network.z0[0].real
        return {
            "path": self.path,
            "size_bytes": len(self.raw_bytes),
            "sha256": self.sha256,
            "port_count": self.port_count,
            "forward_only": self.forward_only,
            "unmeasured": list(self.unmeasured),
            "points": int(f_Hz.size),
            "start_frequency_Hz": float(f_Hz[0]),
            "stop_frequency_Hz": float(f_Hz[-1]),
            "reference_impedance_ohm": [float(z) for z in z0_ohm],
            "warnings": list(self.warnings),
        }


# --------------------------------------------------------------------------- reading


def read_touchstone(path: str | os.PathLike) -> TouchstoneData:
    """Read a .s1p/.s2p file; any problem raises InputError naming the file."""
    name = str(path)
    return read_touchstone_bytes(files.read_regular_file(path, "Touchstone file", MAX_FILE_BYTES), name)


def read_touchstone_bytes(data: bytes, name: str) -> TouchstoneData:
    """Read Touchstone text given as bytes; `name` supplies the extension and names the source in messages."""
    name = str(name)
    if not isinstance(data, (bytes, bytearray, memoryview)):
        raise InputError("Touchstone data must be bytes", path=name)
    data = bytes(data)
    if len(data) > MAX_FILE_BYTES:
        raise InputError(_too_large(len(data)), path=name)
    parsed = _parse(_decode(data, name), name)
    notes = list(parsed.notes)
    rows = _clean(parsed, notes, name)
    network = _to_network(parsed, rows, name)
    _refuse_extreme_values(network, name)
    unmeasured = _unmeasured_columns(network, name)
    forward_only = parsed.ports == 2 and unmeasured == ("S12", "S22")
    if unmeasured and not forward_only:
        notes.append(f"{_join(unmeasured)} {'stays' if len(unmeasured) == 1 else 'stay'} at or below "
                     "-200 dB at every point: taken as not measured and left out of the fit.")
    for note in notes:
        log.info("%s: %s", name, note)
    return TouchstoneData(
        network=network,
        path=name,
        port_count=parsed.ports,
        forward_only=forward_only,
        warnings=tuple(notes),
        sha256=hashlib.sha256(data).hexdigest(),
        raw_bytes=data,
        unmeasured=unmeasured,
    )


def _unmeasured_columns(network: rf.Network, name: str) -> tuple[str, ...]:
    """Names of the S columns never above UNMEASURED_BELOW; they are zeroed in `network` (in place)."""
    s = network.s
    # a hair of slack so that exactly -200 dB, which converts to 1e-10 give or take a rounding, counts
    limit = UNMEASURED_BELOW * (1.0 + 1e-9)
    elements = _ELEMENTS[network.nports]
    out = tuple(e for e, i, j in elements if np.all(np.abs(s[:, i, j]) <= limit))
    if len(out) == len(elements):
        raise InputError(f"holds no measured values: {_join(out)} {'stays' if len(out) == 1 else 'stay'} "
                         "at or below -200 dB at every point", path=name)
    for e, i, j in elements:
        if e in out:
            s[:, i, j] = 0.0
    network.s = s
    return out


def _join(names) -> str:
    names = list(names)
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]


def _too_large(size: int) -> str:
    return files.too_large(size, MAX_FILE_BYTES, "Touchstone file")


def _decode(data: bytes, name: str) -> str:
    """Bytes to text; binary data are refused. Comments may be in a legacy 8-bit encoding."""
    if not data.strip():
        raise InputError("the file is empty", path=name)
    if b"\x00" in data:
        raise InputError("is not a Touchstone file (it holds binary data, not text)", path=name)
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = data.decode("latin-1")
    if _CONTROL.search(text):
        raise InputError("is not a Touchstone file (it holds binary data, not text)", path=name)
    return text


@dataclass
class _Parsed:
    """What the text says, before cleaning: options, ports, rows with their line numbers."""

    ports: int
    version: int = 1
    unit: str = "GHZ"
    fmt: str = "MA"
    z0_ohm: tuple[float, ...] = (50.0,)
    order_21_12: bool = True
    rows: list = field(default_factory=list)      # (line number, tuple of floats)
    noise_rows: int = 0
    declared_points: int | None = None
    notes: list = field(default_factory=list)


def _ports_from_name(name: str) -> int | None:
    """Port count from the extension; None for a '.ts' file (version 2 says it inside)."""
    suffix = Path(name).suffix
    if suffix.lower() == ".ts":
        return None
    match = _PORTS_FROM_EXT.fullmatch(suffix)
    if match is None:
        raise InputError("is not a Touchstone file name: rfmeas reads .s1p and .s2p files", path=name)
    return _check_ports(int(match.group(1)), name)


def _check_ports(ports: int, name: str) -> int:
    if ports not in _ROW_WIDTH:
        raise InputError(f"holds {ports}-port data; rfmeas reads one- and two-port files (.s1p, .s2p)",
                         path=name)
    return ports


class _Parser:
    """Line-by-line reader of the Touchstone grammar (v1 and v2)."""

    def __init__(self, text: str, name: str):
        self.name = name
        self.lines = text.splitlines()
        ext_ports = _ports_from_name(name)
        self.ext_ports = ext_ports
        self.out = _Parsed(ports=ext_ports or 0)
        self.option_tokens: list[str] | None = None
        self.option_line = 0
        self.z0_from_option: tuple[float, ...] | None = None
        self.reference: list[float] | None = None   # [Reference] values being collected
        self.section = "header"                      # header | network | noise | info | end
        self.pending: list[float] = []
        self.pending_line = 0
        self.seen_keywords: set[str] = set()
        self.saw_order = False
        self.reference_values: list[float] | None = None

    def fail(self, message: str, lineno: int | None = None) -> NoReturn:
        where = f"line {lineno}: " if lineno else ""
        raise InputError(where + message, path=self.name)

    # -- driving
    def run(self) -> _Parsed:
        for lineno, raw in enumerate(self.lines, start=1):
            content = raw.split("!", 1)[0].strip()
            if not content:
                continue
            if self.section == "end":
                continue
            if self.section == "info":
                if _keyword_name(content) == "end information":
                    self.section = "header"
                continue
            if self.reference is not None and not content.startswith("["):
                self.collect_reference(content.split(), lineno)
                continue
            if content.startswith("#"):
                self.option(content, lineno)
            elif content.startswith("["):
                self.keyword(content, lineno)
            else:
                self.data(content.split(), lineno)
        return self.finish()

    def finish(self) -> _Parsed:
        out = self.out
        if self.reference is not None:
            self.fail("the [Reference] keyword gives fewer values than there are ports")
        if self.pending:
            self.fail(f"the last data row is incomplete ({len(self.pending)} numbers where "
                      f"{self.width()} are needed)", self.pending_line)
        if out.ports == 0:
            self.fail("a .ts file must state [Number of Ports]")
        if self.option_tokens is None:
            if self.out.version == 2:
                self.fail("the option line (starting with '#') is missing; Touchstone 2 requires it")
            out.notes.append("The file has no option line; rfmeas assumed the Touchstone defaults "
                             "(GHz, S-parameters, magnitude-angle, 50 ohm).")
        if out.version == 2 and out.ports == 2 and not self.saw_order:
            self.fail("a two-port Touchstone 2 file must state [Two-Port Data Order] (12_21 or 21_12)")
        if out.version == 2 and not out.rows and "network data" not in self.seen_keywords:
            self.fail("the [Network Data] keyword is missing")
        if not out.rows:
            self.fail("the file holds no data rows")
        if self.reference_values is not None:
            out.z0_ohm = tuple(self.reference_values)
        elif self.z0_from_option is not None:
            out.z0_ohm = self.z0_from_option
        if len(out.z0_ohm) not in (1, out.ports):
            self.fail(f"the option line gives {len(out.z0_ohm)} reference impedances for a "
                      f"{out.ports}-port file", self.option_line)
        if out.declared_points is not None and out.declared_points != len(out.rows):
            self.fail(f"[Number of Frequencies] says {out.declared_points} but the file holds "
                      f"{len(out.rows)} data rows (is it cut short?)")
        if out.noise_rows:
            out.notes.append(f"The file ends with a noise-parameter block ({out.noise_rows} rows); "
                             "rfmeas does not use noise data and ignored it.")
        return out

    # -- option line
    def option(self, content: str, lineno: int) -> None:
        tokens = content[1:].split()
        if self.option_tokens is not None:
            if [t.upper() for t in tokens] == self.option_tokens:
                self.out.notes.append(f"Line {lineno} repeats the option line; rfmeas ignored the copy.")
                return
            self.fail(f"a second option line differs from the first (line {self.option_line})", lineno)
        if self.out.rows or self.pending:
            self.fail("the option line must come before the data", lineno)
        self.option_tokens = [t.upper() for t in tokens]
        self.option_line = lineno
        unit = param = fmt = None
        i = 0
        while i < len(tokens):
            tok = tokens[i].upper()
            if tok in UNIT_SCALE:
                if unit is not None:
                    self.fail(f"the option line gives the frequency unit twice ({unit}, {tok})", lineno)
                unit = tok
            elif tok in PARAMETERS:
                if param is not None:
                    self.fail(f"the option line gives the parameter type twice ({param}, {tok})", lineno)
                if tok != "S":
                    self.fail(f"the file holds {tok}-parameters; rfmeas reads S-parameter files", lineno)
                param = tok
            elif tok in FORMATS:
                if fmt is not None:
                    self.fail(f"the option line gives the number format twice ({fmt}, {tok})", lineno)
                fmt = tok
            elif tok == "R":
                if self.z0_from_option is not None:
                    self.fail("the option line gives the reference impedance (R) twice", lineno)
                values = []
                while i + 1 < len(tokens) and _looks_like_value(tokens[i + 1]):
                    i += 1
                    values.append(self.impedance(tokens[i], lineno))
                if not values:
                    self.fail("'R' in the option line must be followed by the reference impedance in ohms",
                              lineno)
                self.z0_from_option = tuple(values)
            elif _looks_like_value(tokens[i]):
                self.fail(f"the option line holds a stray value {tokens[i]!r} (only R takes a value)", lineno)
            else:
                self.fail(f"unknown option {tokens[i]!r} in the option line (expected a unit such as MHz, "
                          "S, a format RI/MA/DB and R with an impedance)", lineno)
            i += 1
        self.out.unit = unit or DEFAULT_OPTIONS[0]
        self.out.fmt = fmt or DEFAULT_OPTIONS[2]

    def impedance(self, token: str, lineno: int) -> float:
        """One reference impedance in ohms: real, finite and positive."""
        if _NUMBER.fullmatch(token):
            value = float(token)
            if np.isfinite(value) and value > 0:
                return value
            self.fail(f"the reference impedance {token} ohm is not a positive finite value", lineno)
        if _COMPLEX.fullmatch(token):
            self.fail(f"the reference impedance {token!r} is complex; rfmeas supports real reference "
                      "impedances only", lineno)
        self.fail(f"the reference impedance {token!r} is not a number", lineno)

    # -- version 2 keywords
    def keyword(self, content: str, lineno: int) -> None:
        match = _KEYWORD.match(content)
        if match is None:
            self.fail(f"unreadable keyword line {content[:40]!r}", lineno)
        key = " ".join(match.group(1).lower().split())
        value = match.group(2).strip()
        if self.pending:
            self.fail(f"the data row before [{match.group(1)}] is incomplete", self.pending_line)
        if key in self.seen_keywords and key not in ("end information",):
            self.fail(f"the keyword [{match.group(1)}] appears twice", lineno)
        self.seen_keywords.add(key)
        if key != "version" and "version" not in self.seen_keywords:
            self.fail(f"the keyword [{match.group(1)}] needs [Version] 2.0 before it", lineno)
        if key == "version":
            if self.option_tokens is not None or self.out.rows:
                self.fail("[Version] must come before the option line and the data", lineno)
            if value.split() not in (["2.0"], ["2.1"], ["2"]):
                self.fail(f"unsupported Touchstone version {value!r} (rfmeas reads 1.x and 2.0/2.1)", lineno)
            self.out.version = 2
        elif key == "number of ports":
            ports = self.integer(value, key, lineno)
            _check_ports(ports, self.name)
            if self.ext_ports is not None and ports != self.ext_ports:
                self.fail(f"[Number of Ports] says {ports} but the file name ends in "
                          f"{Path(self.name).suffix}", lineno)
            self.out.ports = ports
        elif key == "two-port data order":
            order = value.upper()
            if order not in ("12_21", "21_12"):
                self.fail(f"[Two-Port Data Order] must be 12_21 or 21_12, not {value!r}", lineno)
            self.out.order_21_12 = order == "21_12"
            self.saw_order = True
        elif key == "number of frequencies":
            self.out.declared_points = self.integer(value, key, lineno)
        elif key == "number of noise frequencies":
            self.integer(value, key, lineno)
        elif key == "reference":
            if self.out.ports == 0:
                self.fail("[Reference] must come after [Number of Ports]", lineno)
            self.reference = []
            self.collect_reference(value.split(), lineno)
        elif key == "matrix format":
            if value.upper() != "FULL" and self.out.ports != 1:
                self.fail(f"[Matrix Format] {value} is not supported; rfmeas reads the Full format", lineno)
        elif key == "network data":
            if self.out.ports == 0:
                self.fail("[Network Data] must come after [Number of Ports]", lineno)
            if self.option_tokens is None:
                self.fail("the option line must come before [Network Data]", lineno)
            self.section = "network"
        elif key == "noise data":
            self.section = "noise"
        elif key == "end":
            self.section = "end"
        elif key == "begin information":
            self.section = "info"
        elif key == "mixed-mode order":
            self.fail("mixed-mode data are not supported; rfmeas reads single-ended S-parameters", lineno)
        else:
            self.fail(f"unknown keyword [{match.group(1)}]", lineno)

    def integer(self, value: str, key: str, lineno: int) -> int:
        if not re.fullmatch(r"\d{1,9}", value, re.ASCII):
            self.fail(f"[{key}] needs a whole number, not {value!r}", lineno)
        return int(value)

    def collect_reference(self, tokens: list[str], lineno: int) -> None:
        for tok in tokens:
            self.reference.append(self.impedance(tok, lineno))
        if len(self.reference) > self.out.ports:
            self.fail(f"[Reference] gives {len(self.reference)} values for {self.out.ports} ports", lineno)
        if len(self.reference) == self.out.ports:
            self.reference_values = self.reference
            self.reference = None

    # -- data
    def width(self) -> int:
        return _ROW_WIDTH[self.out.ports]

    def data(self, tokens: list[str], lineno: int) -> None:
        out = self.out
        if out.version == 2 and self.section == "header":
            self.fail(f"data before [Network Data]: {' '.join(tokens)[:40]!r}", lineno)
        if out.ports == 0:
            self.fail("data before [Number of Ports]", lineno)
        values = None
        if _NUMBER_ROW.fullmatch(" ".join(tokens)):
            values = [float(tok) for tok in tokens]
            if not all(map(math.isfinite, values)):
                values = None
        if values is None:  # the slow path names the offending token
            values = [self.number(tok, lineno) for tok in tokens]
        if self.section == "noise":
            self.noise_line(values, lineno)
            return
        if (out.version == 1 and out.ports == 2 and not self.pending and len(values) == _NOISE_WIDTH
                and out.rows and (out.noise_rows or values[0] <= out.rows[-1][1][0])):
            # A 5-number row whose frequency does not go up: the v1 noise-parameter block.
            out.noise_rows += 1
            return
        if out.noise_rows and out.version == 1:
            self.fail("S-parameter data after the noise-parameter block", lineno)
        if not self.pending:
            self.pending_line = lineno
        self.pending.extend(values)
        width = self.width()
        if len(self.pending) > width:
            self.fail(f"a data row has {len(self.pending)} numbers; a {out.ports}-port file needs {width} "
                      "(frequency and each S-parameter as two numbers)", self.pending_line)
        if len(self.pending) == width:
            out.rows.append((self.pending_line, tuple(self.pending)))
            self.pending = []
            _refuse_too_many_points(len(out.rows), self.pending_line, self.name)

    def noise_line(self, values: list[float], lineno: int) -> None:
        if len(values) != _NOISE_WIDTH:
            self.fail(f"a noise-data row has {len(values)} numbers instead of {_NOISE_WIDTH}", lineno)
        self.out.noise_rows += 1

    def number(self, token: str, lineno: int) -> float:
        if _NUMBER.fullmatch(token):
            value = float(token)
            if np.isfinite(value):
                return value
            self.fail(f"the value {token} is too large to be a finite number", lineno)
        if _NOT_FINITE.fullmatch(token):
            self.fail(f"the data hold a {token} value (not a number or infinite)", lineno)
        if self.out.rows or self.pending or self.option_tokens is not None:
            self.fail(f"text {token[:30]!r} where a number was expected", lineno)
        self.fail(f"is not a Touchstone file (line {lineno} is neither a comment, an option line nor data)")


def _keyword_name(content: str) -> str | None:
    match = _KEYWORD.match(content)
    return " ".join(match.group(1).lower().split()) if match else None


def _looks_like_value(token: str) -> bool:
    """A token meant as a number (perhaps a complex or non-finite one), not an option word."""
    return bool(_NUMBER.fullmatch(token) or _COMPLEX.fullmatch(token) or _NOT_FINITE.fullmatch(token))


def _parse(text: str, name: str) -> _Parsed:
    return _Parser(text, name).run()


# --------------------------------------------------------------------------- cleaning


def _clean(parsed: _Parsed, notes: list[str], name: str) -> np.ndarray:
    """Rows (frequency in file units, then values) with the quirks of real files repaired.

    Order of repairs: non-positive frequencies dropped, exact duplicate rows
    dropped, later rows that repeat a frequency with other values dropped
    (the first reading is kept), then the rest sorted by frequency.
    """
    rows = np.array([values for _, values in parsed.rows], dtype=float)
    f = rows[:, 0]

    nonpositive = f <= 0
    if nonpositive.any():
        count = int(nonpositive.sum())
        notes.append(f"{_points(count)} at 0 Hz or a negative frequency {_were(count)} dropped.")
        rows = rows[~nonpositive]

    _, first = np.unique(rows, axis=0, return_index=True)
    exact_dups = rows.shape[0] - first.size
    if exact_dups:
        rows = rows[np.sort(first)]
        notes.append(f"{exact_dups} {'row was an exact duplicate' if exact_dups == 1 else 'rows were exact duplicates'}"
                     " of an earlier row and " + ("was" if exact_dups == 1 else "were") + " dropped.")

    freqs, first = np.unique(rows[:, 0], return_index=True)
    repeats = rows.shape[0] - first.size
    if repeats:
        kept = np.sort(first)
        notes.append(f"{_points(repeats)} repeated a frequency already in the file with different values "
                     f"(sweep segments joined with an overlap?); rfmeas kept the first reading and dropped "
                     f"{'it' if repeats == 1 else 'them'}.")
        rows = rows[kept]

    backwards = int(np.count_nonzero(np.diff(rows[:, 0]) < 0))
    if backwards:
        rows = rows[np.argsort(rows[:, 0], kind="stable")]
        notes.append(f"The frequencies were not in increasing order (they went back {backwards} "
                     f"time{'s' if backwards != 1 else ''}); rfmeas sorted the points.")

    if rows.shape[0] < MIN_POINTS:
        raise InputError(f"only {rows.shape[0]} usable frequency point{'s' if rows.shape[0] != 1 else ''} "
                         f"left; rfmeas needs at least {MIN_POINTS}", path=name)
    f_Hz = rows[:, 0] * UNIT_SCALE[parsed.unit]
    if not (np.all(np.isfinite(f_Hz)) and np.all(np.diff(f_Hz) > 0) and f_Hz[0] > 0):
        raise InputError("the frequencies are out of range once converted to hertz", path=name)
    return rows


def _refuse_too_many_points(count: int, lineno: int, name: str) -> None:
    if count > MAX_POINTS:
        raise InputError(f"line {lineno}: more than {MAX_POINTS:,} frequency points; rfmeas reads sweeps of "
                         f"up to {MAX_POINTS:,} points (take fewer points, or split the sweep)", path=name)


def _refuse_extreme_values(network: rf.Network, name: str) -> None:
    """Frequencies or S-parameters no instrument can have measured (they would only overflow later)."""
    f_Hz = network.f
    low, high = FREQUENCY_RANGE_HZ
    if f_Hz[0] < low or f_Hz[-1] > high:
        raise InputError(f"a frequency of {f_Hz[0] if f_Hz[0] < low else f_Hz[-1]:.3g} Hz is outside "
                         f"{low:g} Hz to {high:g} Hz: is the unit in the option line right?", path=name)
    with np.errstate(over="ignore", invalid="ignore"):
        peak = float(np.max(np.abs(network.s)))
    if not peak <= MAX_S_MAGNITUDE:
        raise InputError(f"an S-parameter of magnitude {peak:.3g} is not a measurement of a passive device "
                         f"(|S| is at most about 1; rfmeas refuses values above {MAX_S_MAGNITUDE:g})", path=name)


def _points(count: int) -> str:
    return f"{count} point{'s' if count != 1 else ''}"


def _were(count: int) -> str:
    return "was" if count == 1 else "were"


# --------------------------------------------------------------------------- scikit-rf


def _canonical_text(parsed: _Parsed, rows: np.ndarray) -> str:
    """Clean Touchstone text for scikit-rf: options in its order, v2 only when needed."""
    z0 = parsed.z0_ohm
    per_port = len(z0) > 1 and len(set(z0)) > 1
    lines = []
    two_port_12_21 = parsed.ports == 2 and not parsed.order_21_12
    v2 = per_port or two_port_12_21
    if v2:
        lines.append("[Version] 2.0")
    lines.append(f"# {parsed.unit} S {parsed.fmt} R {z0[0]!r}")
    if v2:
        lines.append(f"[Number of Ports] {parsed.ports}")
        if parsed.ports == 2:
            lines.append(f"[Two-Port Data Order] {'21_12' if parsed.order_21_12 else '12_21'}")
        refs = z0 if len(z0) == parsed.ports else z0 * parsed.ports
        lines.append("[Reference] " + " ".join(repr(z) for z in refs))
        lines.append(f"[Number of Frequencies] {rows.shape[0]}")
        lines.append("[Network Data]")
    lines.extend(" ".join(map(repr, row)) for row in rows.tolist())
    if v2:
        lines.append("[End]")
    return "\n".join(lines) + "\n"


def _to_network(parsed: _Parsed, rows: np.ndarray, name: str) -> rf.Network:
    text = _canonical_text(parsed, rows)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            with np.errstate(all="ignore"):
                network = rf.Network(io.StringIO(text), name=f"data.s{parsed.ports}p")
    except (ValueError, IndexError, AttributeError, KeyError, TypeError, UnicodeError,
            ZeroDivisionError, OverflowError, FloatingPointError, NotImplementedError) as exc:
        raise InputError(f"scikit-rf could not read the data ({type(exc).__name__}: {exc})", path=name) from exc
    network.name = Path(name).stem
    if network.f.size != rows.shape[0] or network.nports != parsed.ports:
        raise InputError("scikit-rf read a different number of points or ports than the file holds",
                         path=name)
    if not (np.all(np.diff(network.f) > 0) and network.f[0] > 0):
        raise InputError("the frequencies are not strictly increasing once converted to hertz", path=name)
    if not np.all(np.isfinite(network.s)):
        raise InputError("some values are too large to convert to finite S-parameters", path=name)
    return network


# --------------------------------------------------------------------------- writing


def touchstone_text(network: rf.Network, comments: tuple[str, ...] | list[str] = ()) -> str:
    """The network as Touchstone text: RI format, Hz, our comment lines on top.

    Version 1 when every port has one and the same real reference impedance,
    else version 2 with a [Reference] line. Values are written with Python's
    shortest round-trip representation, so reading gives back the same floats.
    """
    ports = getattr(network, "nports", None)
    if ports not in _ROW_WIDTH:
        raise InputError(f"rfmeas writes one- and two-port Touchstone files, not {ports}-port ones")
    f_Hz = np.asarray(network.f, dtype=float)
    s = np.asarray(network.s)
    z0 = np.asarray(network.z0)
    if not (np.all(np.isfinite(f_Hz)) and np.all(np.isfinite(s))):
        raise InputError("the network holds NaN or infinite values; refusing to write it")
    if np.any(z0.imag != 0):
        raise InputError("the network has a complex reference impedance; rfmeas writes real ones only")
    if np.any(z0.real != z0.real[:1]):
        raise InputError("the network's reference impedance changes with frequency; Touchstone cannot hold that")
    z0_ohm = [float(z) for z in z0.real[0]] if z0.shape[0] else [50.0] * ports
    v2 = len(set(z0_ohm)) > 1

    lines = [f"! written by rfmeas {__version__}"]
    for comment in comments:
        lines.extend(f"! {part}".rstrip() for part in str(comment).splitlines() or [""])
    if v2:
        lines.append("[Version] 2.0")
    lines.append(f"# Hz S RI R {z0_ohm[0]!r}")
    if v2:
        lines.append(f"[Number of Ports] {ports}")
        if ports == 2:
            lines.append("[Two-Port Data Order] 21_12")
        lines.append("[Reference] " + " ".join(repr(z) for z in z0_ohm))
        lines.append(f"[Number of Frequencies] {f_Hz.size}")
        lines.append("[Network Data]")
    # Column order S11 S21 S12 S22: the v1 layout, and 21_12 in v2.
    flat = s.transpose(0, 2, 1).reshape(f_Hz.size, ports * ports)
    table = np.empty((f_Hz.size, 1 + 2 * ports * ports))
    table[:, 0] = f_Hz
    table[:, 1::2] = flat.real
    table[:, 2::2] = flat.imag
    header = "!freq_Hz " + " ".join(f"ReS{i}{j} ImS{i}{j}" for j in range(1, ports + 1)
                                     for i in range(1, ports + 1))
    lines.append(header)
    lines.extend(" ".join(map(repr, row)) for row in table.tolist())
    if v2:
        lines.append("[End]")
    return "\n".join(lines) + "\n"


def write_touchstone(network: rf.Network, path: str | os.PathLike,
                     comments: tuple[str, ...] | list[str] = ()) -> None:
    """Write the network to `path` atomically (see `touchstone_text` for the layout)."""
    match = _PORTS_FROM_EXT.fullmatch(Path(path).suffix)
    if match is None or int(match.group(1)) != getattr(network, "nports", None):
        raise InputError(f"the file name must end in .s{getattr(network, 'nports', '?')}p for this network",
                         path=path)
    try:
        text = touchstone_text(network, comments)
    except InputError as exc:
        raise InputError(exc.message, path=path) from exc
    atomic_write_text(path, text)
