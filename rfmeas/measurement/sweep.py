"""Sweeps and measurement sets: what was measured, and how it was connected."""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from rfmeas.model.termination import Termination

WINDINGS = ("primary", "secondary")

# design defaults, used where the manifest's [design] table leaves them out
DEFAULT_REACTANCE_FACTOR = 4.0
"""Each winding's reactance at the lowest frequency is at least this × the impedance it works into
(common practice)."""
DEFAULT_RATIO_TOLERANCE_PERCENT = 2.0
"""Allowed turns-ratio error of the design check."""
DEFAULT_RETURN_LOSS_DB = 15.0
"""Return-loss threshold of the band and of its design check."""


def other_winding(winding: str) -> str:
    return "secondary" if winding == "primary" else "primary"


@dataclass(frozen=True)
class Sweep:
    """One measured sweep: a scikit-rf Network plus how the transformer was connected.

    port1        the winding on VNA port 1 ("primary" or "secondary")
    termination  for a one-port sweep, what the other winding sees (a Termination;
                 its JSON value "open", "short" or ohms is accepted and converted);
                 None for a two-port sweep
    port2        for a two-port sweep, the winding on port 2; else None
    forward_only a two-port file whose S12/S22 were not measured
    unmeasured   S elements the file holds but did not measure (|S| <= -200 dB at
                 every point, rfmeas.io.touchstone); never fitted
    method       how the `port1` winding's impedance was measured: "reflection"
                 (S11 at port 1), or "series-through" / "shunt-through" (the
                 winding as the series or shunt element between two ports, S21)
    fixture      the test jig the sweep was compensated for, if any
    partial      the file is marked as an incomplete (interrupted) sweep: its
                 data may be used, but no design verdict may rest on it
    """

    network: Any
    port1: str
    termination: Termination | None = Termination.open()
    port2: str | None = None
    forward_only: bool = False
    label: str = ""
    path: str | None = None
    warnings: tuple[str, ...] = ()
    raw_bytes: bytes | None = field(default=None, repr=False, compare=False)
    sha256: str | None = None
    method: str = "reflection"
    fixture: str | None = None
    partial: bool = False
    unmeasured: tuple[str, ...] = ()

    def __post_init__(self):
        termination = None if self.port2 is not None else Termination.coerce(self.termination)
        object.__setattr__(self, "termination", termination)

    @property
    def f_Hz(self) -> np.ndarray:
        return np.asarray(self.network.f, dtype=float)

    @property
    def is_two_port(self) -> bool:
        return self.port2 is not None

    @functools.cached_property
    def z0_ohm(self) -> tuple[float, ...]:
        """Real reference impedance of each port used (taken at the first point; read once)."""
        z0 = np.asarray(self.network.z0)
        ports = 2 if self.is_two_port else 1
        return tuple(float(np.real(z0[0, i])) for i in range(ports))

    @property
    def is_through_method(self) -> bool:
        return self.method != "reflection"

    @property
    def elements(self) -> tuple[str, ...]:
        """The S elements this sweep contributes to a fit."""
        if self.is_through_method:
            return ("S21",)
        if not self.is_two_port:
            return ("S11",)
        measured = ("S11", "S21") if self.forward_only else ("S11", "S21", "S12", "S22")
        return tuple(e for e in measured if e not in self.unmeasured)

    def measured(self) -> np.ndarray:
        """Measured S elements, shape (F, len(elements)), complex."""
        s = np.asarray(self.network.s)
        index = {"S11": (0, 0), "S21": (1, 0), "S12": (0, 1), "S22": (1, 1)}
        return np.stack([s[:, index[e][0], index[e][1]] for e in self.elements], axis=1)

    def predict(self, params, f_Hz=None) -> np.ndarray:
        """Model S elements of this sweep for the circuit `params` (TransformerParams), shape (F, E).

        The forward model the fit compares with `measured()`: the circuit's admittance
        matrix (rfmeas.model.circuit, with the params' polarity and core-loss placement)
        seen the way this sweep was taken (`s_from_admittance`). `f_Hz` defaults to the
        sweep's own frequencies.
        """
        from rfmeas.model.circuit import y_elements

        f = self.f_Hz if f_Hz is None else np.asarray(f_Hz, dtype=float)
        y = y_elements(f, *params.values(), polarity=params.polarity, core_loss=params.core_loss)
        return self.s_from_admittance(*y)

    def s_from_admittance(self, y11, y12, y22) -> np.ndarray:
        """This sweep's S elements from the transformer's admittance elements (primary 1, secondary 2).

        The y arrays broadcast over any leading axes (a stack of parameter sets) and end in
        frequency; the result has the same shape plus a last axis of `elements`: two-port
        sweeps convert the whole matrix (keeping only the elements fitted, so forward-only
        files give S11, S21); one-port sweeps see the port-1 winding with the other one
        terminated, as a reflection or through a two-port method (rfmeas.model.methods).
        """
        from rfmeas.model.circuit import driving_point_admittance, reflection_from_admittance, s_from_y
        from rfmeas.model.methods import s_from_impedance

        if self.port1 == "secondary":
            y11, y22 = y22, y11
        if self.is_two_port:
            z01, z02 = self.z0_ohm
            s11, s21, s12, s22 = s_from_y(y11, y12, y22, z01, z02)
            parts = {"S11": s11, "S21": s21, "S12": s12, "S22": s22}
            return np.stack([parts[e] for e in self.elements], axis=-1)
        yin = driving_point_admittance(y11, y12, y22, self.termination.admittance_S())
        if self.is_through_method:
            return s_from_impedance(self.method, 1.0 / yin, self.z0_ohm[0])[..., None]
        return reflection_from_admittance(yin, self.z0_ohm[0])[..., None]

    def impedance_ohm(self, values=None) -> np.ndarray:
        """The winding's impedance from a one-port sweep's measured (or given) S element.

        Reflection sweeps convert S11, two-port method sweeps their S21, each by the
        method's own formula (rfmeas.model.methods). `values` defaults to the measurement.
        """
        from rfmeas.model.methods import impedance_from_s

        if self.is_two_port:
            raise ValueError("a two-port sweep of both windings has no single winding impedance")
        s = self.measured()[:, 0] if values is None else np.asarray(values)
        return impedance_from_s(self.method, s, self.z0_ohm[0])

    def equivalent_reflection(self, values=None) -> np.ndarray:
        """S11 a reflection sweep of the same winding would have read (for reflection sweeps, S11)."""
        if not self.is_through_method:
            return self.measured()[:, 0] if values is None else np.asarray(values)
        z = self.impedance_ohm(values)
        z0 = self.z0_ohm[0]
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(np.isinf(z), 1.0 + 0j, (z - z0) / (z + z0))

    def describe(self) -> str:
        """'primary on port 1, secondary open' in plain words."""
        if self.is_two_port:
            text = f"{self.port1} on port 1, {self.port2} on port 2"
            return text + (" (forward only)" if self.forward_only else "")
        other = other_winding(self.port1)
        where = f"{self.port1} {self.method}" if self.is_through_method else f"{self.port1} on port 1"
        return f"{where}, {other} {self.termination.describe()}"

    def to_dict(self) -> dict:
        f = self.f_Hz
        return {
            "label": self.label,
            "file": self.path,
            "sha256": self.sha256,
            "port1": self.port1,
            "port2": self.port2,
            "termination": None if self.termination is None else self.termination.to_json(),
            "forward_only": self.forward_only,
            "unmeasured": list(self.unmeasured),
            "method": self.method,
            "fixture": self.fixture,
            "points": int(f.size),
            "start_Hz": float(f[0]),
            "stop_Hz": float(f[-1]),
            "reference_impedance_ohm": list(self.z0_ohm),
            "description": self.describe(),
            "warnings": list(self.warnings),
        }


@dataclass(frozen=True)
class DesignTarget:
    """What the transformer should do (the manifest's [design] table)."""

    source_impedance_ohm: float | None = None
    load_impedance_ohm: float | None = None
    lowest_frequency_Hz: float | None = None
    highest_frequency_Hz: float | None = None
    reactance_factor: float = DEFAULT_REACTANCE_FACTOR
    ratio_tolerance_percent: float = DEFAULT_RATIO_TOLERANCE_PERCENT
    return_loss_dB: float = DEFAULT_RETURN_LOSS_DB

    @property
    def target_turns_ratio(self) -> float | None:
        """sqrt(load/source), secondary : primary."""
        if self.source_impedance_ohm and self.load_impedance_ohm:
            return math.sqrt(self.load_impedance_ohm / self.source_impedance_ohm)
        return None

    def to_dict(self) -> dict:
        return {
            "source_impedance_ohm": self.source_impedance_ohm,
            "load_impedance_ohm": self.load_impedance_ohm,
            "lowest_frequency_Hz": self.lowest_frequency_Hz,
            "highest_frequency_Hz": self.highest_frequency_Hz,
            "reactance_factor": self.reactance_factor,
            "ratio_tolerance_percent": self.ratio_tolerance_percent,
            "return_loss_dB": self.return_loss_dB,
            "target_turns_ratio": self.target_turns_ratio,
        }


@dataclass(frozen=True)
class WindingReadings:
    """LCR-meter readings of one winding with the other open: its series impedance at each frequency.

    They give the winding's inductance without a VNA (the reading at the lowest frequency, where
    the core is nearest its initial permeability), hence A_L = L/N².
    """

    label: str
    winding: str
    data: Any  # rfmeas.io.readings.LcrReadings, sorted by frequency

    @property
    def path(self) -> str:
        return self.data.path

    @property
    def raw_bytes(self) -> bytes | None:
        return self.data.raw_bytes

    @property
    def frequency_Hz(self) -> float:
        """The frequency of the reading the inductance is taken from (the lowest)."""
        return float(self.data.f_Hz[0])

    @property
    def inductance_H(self) -> float:
        """Series inductance of the lowest-frequency reading."""
        return float(self.data.series_inductance_H[0])

    def to_dict(self) -> dict:
        f = self.data.f_Hz
        return {"label": self.label, "file": self.path, "winding": self.winding, "termination": "open",
                "form": self.data.form, "readings": int(f.size), "frequency_range_Hz": [float(f[0]), float(f[-1])]}


@dataclass(frozen=True)
class MeasurementSet:
    """All sweeps of one transformer, with what is known about it."""

    name: str
    sweeps: tuple[Sweep, ...]
    primary_turns: int | None = None
    secondary_turns: int | None = None
    core: dict | None = None
    design: DesignTarget | None = None
    manifest_path: str | None = None
    manifest_text: str | None = field(default=None, repr=False, compare=False)
    notes: str = ""
    readings: tuple[WindingReadings, ...] = ()

    @property
    def points(self) -> int:
        return int(sum(s.f_Hz.size for s in self.sweeps))

    def sources(self) -> list[tuple[str, bytes]]:
        """(relative path, raw bytes) of the manifest and every sweep file, for a history store."""
        from pathlib import Path

        out: list[tuple[str, bytes]] = []
        base = None
        if self.manifest_text is not None:
            out.append(("manifest.toml", self.manifest_text.encode("utf-8")))
            base = Path(self.manifest_path).resolve().parent if self.manifest_path else None
        for item in (*self.sweeps, *self.readings):
            if item.raw_bytes is None:
                continue
            name = Path(item.path).name if item.path else item.label
            # keep the path the manifest names the file by (a file outside its folder: the bare name)
            if base is not None and item.path and Path(item.path).resolve().is_relative_to(base):
                name = Path(item.path).resolve().relative_to(base).as_posix()
            out.append((name, item.raw_bytes))
        return out

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "primary_turns": self.primary_turns,
            "secondary_turns": self.secondary_turns,
            "core": self.core,
            "design": None if self.design is None else self.design.to_dict(),
            "manifest": self.manifest_path,
            "sweeps": [s.to_dict() for s in self.sweeps],
            **({"readings": [r.to_dict() for r in self.readings]} if self.readings else {}),
        }


# --------------------------------------------------------------------------- limits on a measurement set

MAX_SWEEPS = 64
"""A transformer is characterised by a handful of sweeps (four to eight); more than 64 is refused
before any file is read."""
FIT_POINTS_PER_SWEEP = 20_001
"""A sweep with more points is thinned to this many for the fit (every k-th point, ends kept)."""
FIT_POINTS_TOTAL = 200_000
"""All sweeps together are thinned to at most this many points (a few seconds of fitting)."""


def check_sweep_count(count: int, path=None) -> None:
    """Refuse a set of more than MAX_SWEEPS sweeps before any of them is read."""
    from rfmeas.errors import InputError

    if count > MAX_SWEEPS:
        raise InputError(f"{count:,} sweeps listed; rfmeas fits at most {MAX_SWEEPS} sweeps of one "
                         "transformer (a handful characterise it: split the set)", path)


def _data_digest(sweep: Sweep) -> str:
    """Digest of what the fit sees: frequencies and S-parameters (not comments or formatting)."""
    import hashlib

    digest = hashlib.sha256(np.ascontiguousarray(sweep.f_Hz).tobytes())
    digest.update(np.ascontiguousarray(np.asarray(sweep.network.s, dtype=complex)).tobytes())
    return digest.hexdigest()


def _connection(sweep: Sweep) -> tuple:
    return (sweep.port1, sweep.port2, sweep.termination, sweep.method, sweep.fixture)


def refuse_repeated_sweeps(sweeps, names, path=None) -> tuple[Sweep, ...]:
    """Refuse a set that lists the same measurement twice: one file named twice, or the same data
    said to be taken the same way.

    The fit would count the same evidence twice and report standard errors √2
    too small, so the set is refused naming both entries (not merged: which
    entry was meant is the user's call). Identical data said to be taken two
    different ways (a noiseless simulation of a 1:1 transformer, or a copied
    file) are kept, with a warning on the later sweep. Returns the sweeps.
    """
    from dataclasses import replace
    from pathlib import Path

    from rfmeas.errors import InputError

    def refuse(i, j, same):
        raise InputError(f"{names[i]} {same} {names[j]}: list each measurement once (a repeat would "
                         "count the same evidence twice and shrink every standard error)", path)

    files: dict[str, int] = {}
    data: dict[str, int] = {}
    out = list(sweeps)
    for i, sweep in enumerate(sweeps):
        if sweep.path is not None:
            key = str(Path(sweep.path).resolve())
            if key in files:
                refuse(i, files[key], "names the same file as")
            files[key] = i
        digest = _data_digest(sweep)
        if digest in data:
            j = data[digest]
            if _connection(sweep) == _connection(sweeps[j]):
                refuse(i, j, "holds the same data, taken the same way, as")
            out[i] = replace(sweep, warnings=sweep.warnings + (
                f"holds exactly the same data as {names[j]} (a copied file?)",))
        else:
            data[digest] = i
    return tuple(out)


def thin_for_fit(sweeps, per_sweep: int = FIT_POINTS_PER_SWEEP, total: int = FIT_POINTS_TOTAL):
    """The sweeps with the longest ones thinned (every k-th point, first and last kept) so that none
    has more than `per_sweep` points and all together at most `total`; each thinned sweep says so."""
    from dataclasses import replace

    sweeps = tuple(sweeps)
    limit = min(per_sweep, max(total // max(len(sweeps), 1), 101))
    out = []
    for sweep in sweeps:
        n = sweep.f_Hz.size
        if n <= limit:
            out.append(sweep)
            continue
        step = -(-(n - 1) // (limit - 1))  # ceil: keeps at most `limit` points
        index = np.arange(0, n, step)
        if index[-1] != n - 1:
            index = np.append(index[:-1] if index.size >= limit else index, n - 1)
        note = (f"{n:,} points: one point in {step} was fitted ({index.size:,} points), to keep the fit "
                f"within {limit:,} points per sweep")
        out.append(replace(sweep, network=sweep.network[index], warnings=sweep.warnings + (note,)))
    return tuple(out)
