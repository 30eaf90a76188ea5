"""Build measurement sets from independently simulated sweeps (scikit-rf circuit solver, ngspice)."""

from __future__ import annotations

import numpy as np
import skrf as rf

from reference import OnePort, four_sweeps
from reference.skrf_circuit import simulate_skrf
from rfmeas.measurement.sweep import MeasurementSet, Sweep

REFERENCE_CIRCUIT = dict(L1_H=11e-6, L2_H=99e-6, k=0.985, R1_ohm=0.05, R2_ohm=0.25, Rc_ohm=540.0,
                         C1_F=3e-12, C2_F=6e-12, C12_F=3e-12)


def add_vna_noise(s, sigma, rng):
    """Additive complex Gaussian noise, `sigma` rms per real component."""
    s = np.asarray(s, dtype=complex)
    return s + sigma * (rng.standard_normal(s.shape) + 1j * rng.standard_normal(s.shape))


def sweep_from_s(name, description, f_Hz, s, forward_only=True) -> Sweep:
    """A Sweep from simulated S values and the reference package's sweep description."""
    freq = rf.Frequency.from_f(f_Hz, unit="Hz")
    if isinstance(description, OnePort):
        net = rf.Network(frequency=freq, s=np.asarray(s).reshape(-1, 1, 1), z0=description.z0_ohm)
        return Sweep(network=net, port1=description.port1, termination=description.termination,
                     label=name)
    s = np.array(s, dtype=complex)
    if forward_only:
        s[:, 0, 1] = 0
        s[:, 1, 1] = 0
    net = rf.Network(frequency=freq, s=s, z0=[description.z0_port1_ohm, description.z0_port2_ohm])
    return Sweep(network=net, port1=description.port1, termination=None,
                 port2="secondary" if description.port1 == "primary" else "primary",
                 forward_only=forward_only, label=name)


def simulated_set(params, f_Hz, sigma=1e-3, rng=None, sweeps=None, simulate=simulate_skrf,
                  clean=None, name="simulated unit", forward_only=True, **set_fields) -> MeasurementSet:
    """A MeasurementSet of `sweeps` (default: the usual four) simulated by `simulate`, plus noise."""
    rng = rng or np.random.default_rng(0)
    sweeps = sweeps or four_sweeps()
    clean = clean or {n: simulate(params, f_Hz, d) for n, d in sweeps.items()}
    out = []
    for n, d in sweeps.items():
        out.append(sweep_from_s(n, d, f_Hz, add_vna_noise(clean[n], sigma, rng), forward_only))
    return MeasurementSet(name=name, sweeps=tuple(out), **set_fields)
