"""Simulated hobby-VNA sweeps of test windings on a core, written independently of rfmeas.

- Permeability: a damped resonance plus a relaxation, written out here,
  µ = 1 + χs/(1 − (f/f0)² + j·β·f/f0) + χr/(1 + j·f/fr)  (µ' − jµ''; the usual ferrite
  dispersion forms, common practice).
- Winding: Rs + jω·Ls in series with (jω·µ·µ0·N²/C1 ∥ Cw), converted to S11 by scikit-rf
  (`Network.from_z`), so the Z → S step is not rfmeas's.
- VNA after a hobby SOL calibration: the three-term one-port error model
  S_m = e00 + e01e10·S/(1 − e11·S) (common practice) with residual directivity e00 about
  −40 dB, source match e11 about −35 dB, tracking e01e10 within ±0.05 dB (from memory), each
  drifting slowly with frequency (a phase that turns with a delay), plus trace noise.
- Linear frequency grids, and stitched segments whose common point repeats with the next
  segment's own residual errors.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import skrf as rf

MU0 = 4e-7 * math.pi * (1 + 5.5e-10)  # CODATA 2018 µ0 = 1.25663706212e-6 H/m, written out here


def ring_core_constant_per_m(od_mm, id_mm, h_mm):
    """C1 = 2π/(h·ln(r2/r1)) of a rectangular ring (IEC 60205), in 1/m."""
    return 2 * math.pi / (h_mm * 1e-3 * math.log(od_mm / id_mm))


@dataclass(frozen=True)
class Core:
    mu_i: float                 # 1 + χs + χr
    resonance_share: float      # χs/(χs + χr)
    f0_Hz: float
    damping: float
    fr_Hz: float
    od_mm: float = 25.0
    id_mm: float = 15.0
    h_mm: float = 10.0

    def mu(self, f_Hz):
        f = np.asarray(f_Hz, dtype=float)
        chi = self.mu_i - 1
        xs, xr = chi * self.resonance_share, chi * (1 - self.resonance_share)
        x = f / self.f0_Hz
        return 1 + xs / (1 - x**2 + 1j * self.damping * x) + xr / (1 + 1j * f / self.fr_Hz)

    @property
    def c1_per_m(self):
        return ring_core_constant_per_m(self.od_mm, self.id_mm, self.h_mm)

    def peak_Hz(self, f_lo=1e3, f_hi=1e10):
        grid = np.geomspace(f_lo, f_hi, 20000)
        return float(grid[np.argmax(-self.mu(grid).imag)])


@dataclass(frozen=True)
class Leads:
    inductance_H: float = 30e-9
    resistance_ohm: float = 0.04


def winding_z(f_Hz, core: Core, turns, leads: Leads, cw_F, copper_ohm_per_turn=0.003):
    w = 2 * np.pi * np.asarray(f_Hz, dtype=float)
    zc = 1j * w * core.mu(f_Hz) * MU0 * turns**2 / core.c1_per_m
    zp = 1 / (1 / zc + 1j * w * cw_F)
    return leads.resistance_ohm + copper_ohm_per_turn * turns + 1j * w * leads.inductance_H + zp


def s11_of(f_Hz, z):
    freq = rf.Frequency.from_f(np.asarray(f_Hz, dtype=float), unit="Hz")
    return rf.Network.from_z(np.asarray(z, dtype=complex)[:, None, None], frequency=freq, z0=50).s[:, 0, 0]


@dataclass(frozen=True)
class Calibration:
    """Residual error terms of one calibration, slowly varying with frequency."""

    directivity: float
    source_match: float
    tracking_db: float
    phases: tuple[float, float, float]
    delays_s: tuple[float, float]

    @classmethod
    def random(cls, rng, directivity_db=-40.0, source_match_db=-35.0, tracking_db=0.05):
        return cls(10 ** (directivity_db / 20) * rng.uniform(0.5, 1.0),
                   10 ** (source_match_db / 20) * rng.uniform(0.5, 1.0),
                   rng.uniform(-tracking_db, tracking_db),
                   tuple(rng.uniform(0, 2 * math.pi, 3)), tuple(rng.uniform(0.3e-9, 3e-9, 2)))

    def apply(self, f_Hz, s, rng, trace_noise=1e-3):
        f = np.asarray(f_Hz, dtype=float)
        e00 = self.directivity * np.exp(1j * (self.phases[0] + 2 * np.pi * f * self.delays_s[0]))
        e11 = self.source_match * np.exp(1j * (self.phases[1] + 2 * np.pi * f * self.delays_s[1]))
        e01e10 = 10 ** (self.tracking_db / 20) * np.exp(1j * math.radians(0.3) * math.sin(self.phases[2]))
        sm = e00 + e01e10 * s / (1 - e11 * s)
        noise = trace_noise * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size)) / math.sqrt(2)
        return sm + noise


def linear_grid(points=1010, f_lo=50e3, f_hi=300e6):
    return np.linspace(f_lo, f_hi, points)


def measure(f_Hz, z, calibrations, rng, segments=1, trace_noise=1e-3):
    """S11 as a small VNA writes it; `segments` > 1 stitches segments (each with its own
    calibration from `calibrations`) that repeat their common frequency."""
    s = s11_of(f_Hz, z)
    if segments == 1:
        return np.asarray(f_Hz, float), calibrations[0].apply(f_Hz, s, rng, trace_noise)
    edges = np.linspace(0, f_Hz.size - 1, segments + 1).astype(int)
    fs, ss = [], []
    for k in range(segments):
        sl = slice(edges[k], edges[k + 1] + 1)
        fs.append(f_Hz[sl])
        ss.append(calibrations[k % len(calibrations)].apply(f_Hz[sl], s[sl], rng, trace_noise))
    return np.concatenate(fs), np.concatenate(ss)


def impedance(s11):
    return 50 * (1 + s11) / (1 - s11)


def random_core(rng, mu_lo=40.0, mu_hi=5000.0):
    """A ferrite-like core: µi log-uniform, Snoek product (µi − 1)·f_peak about 2–8 GHz
    (Snoek's limit, a few GHz for ferrites, project references [memory]), a resonance share
    and damping from pure relaxation-like to underdamped (µ' rising a few % before it falls)."""
    mu_i = float(np.exp(rng.uniform(math.log(mu_lo), math.log(mu_hi))))
    snoek = float(np.exp(rng.uniform(math.log(2e9), math.log(8e9))))
    f_peak = snoek / (mu_i - 1)
    share = float(rng.uniform(0.3, 1.0))
    damping = float(rng.uniform(0.6, 2.5))
    od = float(rng.uniform(10, 40))
    size = dict(od_mm=od, id_mm=od * float(rng.uniform(0.5, 0.65)), h_mm=od * float(rng.uniform(0.25, 0.45)))
    return Core(mu_i, share, f_peak * max(1.0, damping), damping, f_peak * float(rng.uniform(0.5, 2.0)), **size)


def winding_capacitance_F(turns, rng):
    """A few pF for a spread winding, less for one or two turns (common practice)."""
    return float(rng.uniform(0.3, 1.0) * (1.0 + 0.4 * turns)) * 1e-12
