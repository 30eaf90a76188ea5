"""Test jigs: remove what sits between the VNA's reference plane and the winding.

A jig is a TOML file (see fixtures/) of one of two kinds.

Standards compensation ([standards]): one-port sweeps (.s1p) of the jig with
an open, a short and optionally a known load at the DUT terminals.

- open, short and load: the jig is any linear two-port between the calibrated
  plane and the DUT, so the measured reflection is a bilinear function of the
  DUT's (the three-term error model of one-port VNA calibration):

      Gm = e00 + e01 e10 G / (1 - e11 G)

  Written as Gm = e00 + G Gm e11 - G D with D = e00 e11 - e01 e10, each
  standard of known G_i and measured Gm_i gives one linear equation in
  (e00, e11, D); three standards fix them per frequency and

      G = (Gm - e00) / (Gm e11 - D).

  With an ideal open (G = 1), ideal short (G = -1) and a load Zl this is the
  classic impedance formula (the cross ratio of the bilinear map is kept):

      Zdut = Zl (Zxm - Zsm)(Zom - Zlm) / ((Zom - Zxm)(Zlm - Zsm))

- open and short only: two standards cannot fix three terms, so the jig is
  taken to be an L-section, series Zs then shunt Yo at the DUT end (leads, then
  the capacitance between the clips). Then Zsm = Zs, Zom = Zs + 1/Yo and

      Zdut = (Zxm - Zsm)(Zom - Zsm) / (Zom - Zxm).

  This is implemented as the three-term model with a virtual third standard
  (the Z0 load seen through that L-section), so both cases share one path.

Port extension ([extension]): a matched line of one-way delay tau (given, or
length / (velocity factor c)) and one-way loss A(f) = loss_dB sqrt(f/f_loss):

      G = Gm exp(+j 2 omega tau) 10^(2 A(f)/20).

Error terms measured on one grid are interpolated (real and imaginary parts,
linearly) onto the DUT's grid; a frequency outside the standards' sweep is an
error, never an extrapolation.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from rfmeas.errors import InputError
from rfmeas.io.strict import check_keys, read_toml

log = logging.getLogger(__name__)

SPEED_OF_LIGHT_m_per_s = 299_792_458.0

_TOP_KEYS = {"fixture", "standards", "extension"}
_FIXTURE_KEYS = {"name", "description"}
_STANDARDS_KEYS = {"open", "short", "load", "load_ohm"}
_EXTENSION_KEYS = {"delay_s", "length_m", "velocity_factor", "loss_dB", "loss_frequency_Hz"}


def _z_to_gamma(z, z0):
    z = np.asarray(z, dtype=complex)
    with np.errstate(divide="ignore", invalid="ignore"):
        g = (z - z0) / (z + z0)
    return np.where(np.isinf(z), 1.0 + 0j, g)


def _gamma_to_z(g, z0):
    g = np.asarray(g, dtype=complex)
    with np.errstate(divide="ignore", invalid="ignore"):
        return z0 * (1.0 + g) / (1.0 - g)


def error_terms(actual, measured) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(e00, e11, D) per frequency from three standards.

    actual, measured: arrays of shape (3, F), the standards' true and measured
    reflection. Raises InputError where the standards cannot be told apart.
    """
    g = np.asarray(actual, dtype=complex)
    gm = np.asarray(measured, dtype=complex)
    n_f = gm.shape[-1]
    a = np.empty((n_f, 3, 3), dtype=complex)
    a[:, :, 0] = 1.0
    a[:, :, 1] = (g * gm).T
    a[:, :, 2] = -g.T
    cond = np.linalg.cond(a)
    # two standards that measure alike leave the jig's transmission term undetermined
    alike = np.zeros(n_f, dtype=bool)
    for i, j in ((0, 1), (0, 2), (1, 2)):
        alike |= np.abs(gm[i] - gm[j]) < 1e-9
    bad = ~np.isfinite(cond) | (cond > 1e12) | alike
    if bad.any():
        raise InputError(f"the standards cannot be told apart at {int(bad.sum())} of {n_f} frequencies "
                         "(two of them measure the same)")
    x = np.linalg.solve(a, gm.T[..., None])[..., 0]
    return x[:, 0], x[:, 1], x[:, 2]


def apply_error_terms(e00, e11, delta, gm) -> np.ndarray:
    """DUT reflection from measured reflection: G = (Gm - e00)/(Gm e11 - D)."""
    gm = np.asarray(gm, dtype=complex)
    return (gm - e00) / (gm * e11 - delta)


@dataclass(frozen=True, eq=False)
class StandardsCompensation:
    """Three error terms of the jig on the standards' frequency grid, reference impedance z0_ohm."""

    frequency_Hz: np.ndarray
    e00: np.ndarray
    e11: np.ndarray
    delta: np.ndarray
    z0_ohm: float
    with_load: bool
    load_ohm: float | None = None

    @classmethod
    def from_measurements(cls, f_Hz, open_s11, short_s11, load_s11=None, load_ohm=None,
                          z0_ohm: float = 50.0) -> "StandardsCompensation":
        """Error terms from measured standards (ideal open and short, load of `load_ohm`)."""
        f = np.asarray(f_Hz, dtype=float)
        gom = np.asarray(open_s11, dtype=complex)
        gsm = np.asarray(short_s11, dtype=complex)
        if load_s11 is None:
            # L-section jig (series Zs, then shunt Yo): the Z0 load as it would measure
            zs = _gamma_to_z(gsm, z0_ohm)
            with np.errstate(divide="ignore", invalid="ignore"):
                yom = (1.0 - gom) / (z0_ohm * (1.0 + gom))
                yo = yom / (1.0 - zs * yom)
            zlm = zs + 1.0 / (yo + 1.0 / z0_ohm)
            glm, gl = _z_to_gamma(zlm, z0_ohm), np.zeros_like(gom)
        else:
            glm = np.asarray(load_s11, dtype=complex)
            gl = np.broadcast_to(_z_to_gamma(load_ohm, z0_ohm), glm.shape)
        actual = np.stack([np.ones_like(gom), -np.ones_like(gom), gl])
        e00, e11, delta = error_terms(actual, np.stack([gom, gsm, glm]))
        return cls(f, e00, e11, delta, float(z0_ohm), load_s11 is not None,
                   None if load_ohm is None else float(load_ohm))

    def to_dict(self) -> dict:
        """A summary (the error terms themselves stay inside)."""
        return {"with_load": self.with_load, "load_ohm": self.load_ohm, "z0_ohm": self.z0_ohm,
                "start_Hz": float(self.frequency_Hz[0]), "stop_Hz": float(self.frequency_Hz[-1]),
                "points": int(self.frequency_Hz.size)}

    def _terms_on(self, f_Hz, path=None):
        f = np.asarray(f_Hz, dtype=float)
        lo, hi = self.frequency_Hz[0], self.frequency_Hz[-1]
        tol = 1e-9 * hi
        if np.any(f < lo - tol) or np.any(f > hi + tol):
            raise InputError(f"frequencies {f.min():.6g}–{f.max():.6g} Hz reach outside the jig's "
                             f"standards ({lo:.6g}–{hi:.6g} Hz)", path=path)
        if f.shape == self.frequency_Hz.shape and np.allclose(f, self.frequency_Hz, rtol=1e-12, atol=0):
            return self.e00, self.e11, self.delta

        fs = self.frequency_Hz

        def interp(y):
            return np.interp(f, fs, y.real) + 1j * np.interp(f, fs, y.imag)

        # the transmission term e01 e10 turns with the jig's delay: interpolate it in polar form
        t = self.e00 * self.e11 - self.delta
        t_f = np.exp(np.interp(f, fs, np.log(np.abs(t))) + 1j * np.interp(f, fs, np.unwrap(np.angle(t))))
        e00, e11 = interp(self.e00), interp(self.e11)
        return e00, e11, e00 * e11 - t_f

    def compensate_reflection(self, f_Hz, s11, path=None) -> np.ndarray:
        """S11 at the DUT terminals, in the standards' reference impedance."""
        e00, e11, delta = self._terms_on(f_Hz, path)
        return apply_error_terms(e00, e11, delta, s11)


@dataclass(frozen=True)
class PortExtension:
    """A matched line: one-way delay and one-way loss loss_dB at loss_frequency_Hz, scaling as sqrt(f)."""

    delay_s: float
    loss_dB: float = 0.0
    loss_frequency_Hz: float = 100e6

    def one_way_loss_dB(self, f_Hz) -> np.ndarray:
        return self.loss_dB * np.sqrt(np.asarray(f_Hz, dtype=float) / self.loss_frequency_Hz)

    def compensate_reflection(self, f_Hz, s11, path=None) -> np.ndarray:
        """S11 at the end of the line; the line is matched to whatever Z0 s11 is referenced to."""
        f = np.asarray(f_Hz, dtype=float)
        gain = 10.0 ** (2.0 * self.one_way_loss_dB(f) / 20.0)
        return np.asarray(s11, dtype=complex) * gain * np.exp(4j * np.pi * f * self.delay_s)

    def to_dict(self) -> dict:
        return {"delay_s": float(self.delay_s), "loss_dB": float(self.loss_dB),
                "loss_frequency_Hz": float(self.loss_frequency_Hz)}


@dataclass(frozen=True, eq=False)
class Fixture:
    """A test jig loaded from TOML: `kind` is 'standards' or 'extension'."""

    name: str
    path: str | None
    kind: str
    description: str = ""
    standards: StandardsCompensation | None = None
    extension: PortExtension | None = None
    standard_files: dict = field(default_factory=dict)

    @property
    def z0_ohm(self) -> float:
        return self.standards.z0_ohm if self.standards is not None else 50.0

    def compensate_reflection(self, f_Hz, s11, z0_ohm: float | None = None) -> np.ndarray:
        """Reflection at the DUT from reflection measured through the jig (same reference impedance)."""
        s11 = np.asarray(s11, dtype=complex)
        if np.shape(f_Hz) != s11.shape:
            raise InputError(f"{s11.size} reflection values for {np.size(f_Hz)} frequencies", path=self.path)
        if self.extension is not None:
            return self.extension.compensate_reflection(f_Hz, s11)
        z0 = self.z0_ohm if z0_ohm is None else float(z0_ohm)
        if z0 != self.standards.z0_ohm:  # re-reference to the standards' impedance and back
            g = _z_to_gamma(_gamma_to_z(s11, z0), self.standards.z0_ohm)
            out = self.standards.compensate_reflection(f_Hz, g, self.path)
            return _z_to_gamma(_gamma_to_z(out, self.standards.z0_ohm), z0)
        return self.standards.compensate_reflection(f_Hz, s11, self.path)

    def compensate_impedance(self, f_Hz, impedance_ohm) -> np.ndarray:
        """Impedance at the DUT from impedance measured through the jig."""
        z0 = self.z0_ohm
        g = self.compensate_reflection(f_Hz, _z_to_gamma(impedance_ohm, z0), z0)
        return _gamma_to_z(g, z0)

    def to_dict(self) -> dict:
        out = {"name": self.name, "path": self.path, "kind": self.kind, "description": self.description}
        if self.extension is not None:
            out["extension"] = self.extension.to_dict()
        if self.standards is not None:
            out["standards"] = {"files": dict(self.standard_files), **self.standards.to_dict()}
        return out


# ---------------------------------------------------------------- loading

def _number(table: dict, key: str, where: str, path: Path, positive=True, default=None) -> float | None:
    if key not in table:
        return default
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError(f"'{key}' in {where} must be a finite number, not {value!r}", path=path)
    if (positive and value <= 0) or value < 0:
        raise InputError(f"'{key}' in {where} must be {'positive' if positive else 'zero or more'}, "
                         f"not {value!r}", path=path)
    return float(value)


def _read_standard(path: Path):
    """A one-port sweep of a standard: (f_Hz, s11, z0_ohm), read by the project's reader."""
    from rfmeas.io.touchstone import read_touchstone

    data = read_touchstone(path)
    net = data.network
    if data.port_count != 1:
        raise InputError(f"a standard must be a one-port (.s1p) sweep, this has {data.port_count} ports",
                         path=path)
    z0 = np.unique(net.z0)
    if z0.size != 1:
        raise InputError("a standard needs one reference impedance", path=path)
    return net.f, net.s[:, 0, 0], float(z0[0].real)


def _load_standards(table: dict, base: Path, path: Path):
    where = "[standards]"
    check_keys(table, _STANDARDS_KEYS, where, path)
    for key in ("open", "short"):
        if key not in table:
            raise InputError(f"{where} needs '{key}' (a .s1p file of the jig with that standard)", path=path)
    if ("load" in table) != ("load_ohm" in table):
        raise InputError(f"{where}: 'load' and 'load_ohm' go together", path=path)
    files, sweeps = {}, {}
    for key in ("open", "short", "load"):
        if key not in table:
            continue
        if not isinstance(table[key], str):
            raise InputError(f"'{key}' in {where} must be a file name", path=path)
        files[key] = table[key]
        sweeps[key] = _read_standard(base / table[key])
    f_ref, _, z0_ref = sweeps["open"]
    for key, (f, _s, z0) in sweeps.items():
        if f.shape != f_ref.shape or not np.allclose(f, f_ref, rtol=1e-9, atol=0):
            raise InputError(f"standard '{key}' is not on the same frequency grid as 'open'", path=base / files[key])
        if z0 != z0_ref:
            raise InputError(f"standard '{key}' has reference impedance {z0} ohm, 'open' has {z0_ref} ohm",
                             path=base / files[key])
    load_ohm = _number(table, "load_ohm", where, path)
    comp = StandardsCompensation.from_measurements(
        f_ref, sweeps["open"][1], sweeps["short"][1],
        sweeps["load"][1] if "load" in sweeps else None, load_ohm, z0_ref)
    return comp, files


def _load_extension(table: dict, path: Path) -> PortExtension:
    where = "[extension]"
    check_keys(table, _EXTENSION_KEYS, where, path)
    delay = _number(table, "delay_s", where, path, positive=False)
    length = _number(table, "length_m", where, path, positive=False)
    vf = _number(table, "velocity_factor", where, path)
    if delay is not None and (length is not None or vf is not None):
        raise InputError(f"{where}: give either 'delay_s' or 'length_m' with 'velocity_factor', not both",
                         path=path)
    if delay is None:
        if length is None or vf is None:
            raise InputError(f"{where} needs 'delay_s', or 'length_m' and 'velocity_factor'", path=path)
        if vf > 1:
            raise InputError(f"'velocity_factor' in {where} must not exceed 1, not {vf}", path=path)
        delay = length / (vf * SPEED_OF_LIGHT_m_per_s)
    loss = _number(table, "loss_dB", where, path, positive=False, default=0.0)
    f_loss = _number(table, "loss_frequency_Hz", where, path)
    if loss > 0 and f_loss is None:
        raise InputError(f"{where}: 'loss_dB' needs 'loss_frequency_Hz' (the frequency it was given at)",
                         path=path)
    return PortExtension(delay, loss, 100e6 if f_loss is None else f_loss)


def load_fixture(path) -> Fixture:
    """Read a jig definition (TOML); standard files are relative to it."""
    path = Path(path)
    _text, doc = read_toml(path, "fixture file")
    check_keys(doc, _TOP_KEYS, "the fixture file", path)
    for key in _TOP_KEYS:
        if key in doc and not isinstance(doc[key], dict):
            raise InputError(f"'{key}' must be a table ([{key}])", path=path)
    meta = doc.get("fixture", {})
    check_keys(meta, _FIXTURE_KEYS, "[fixture]", path)
    for key in _FIXTURE_KEYS:
        if key in meta and not isinstance(meta[key], str):
            raise InputError(f"'{key}' in [fixture] must be text", path=path)
    name = meta.get("name", path.parent.name if path.name == "fixture.toml" else path.stem)
    has_std, has_ext = "standards" in doc, "extension" in doc
    if has_std == has_ext:
        raise InputError("a fixture has exactly one of [standards] or [extension]", path=path)
    if has_std:
        comp, files = _load_standards(doc["standards"], path.parent, path)
        fx = Fixture(name, str(path), "standards", meta.get("description", ""), standards=comp,
                     standard_files=files)
    else:
        fx = Fixture(name, str(path), "extension", meta.get("description", ""),
                     extension=_load_extension(doc["extension"], path))
    log.debug("loaded fixture %s (%s) from %s", fx.name, fx.kind, path)
    return fx
