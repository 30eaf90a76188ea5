"""Start readings of the fit (rfmeas.fit.start) against networks built by scikit-rf."""

from __future__ import annotations

import numpy as np
import pytest
import skrf as rf

from rfmeas.fit.start import band_fit_LC, thru_low_band

F_HZ = np.geomspace(1e4, 3e6, 301)


def _coupled_pair(f_Hz, L1_H, L2_H, M_H, R1_ohm=0.0, R2_ohm=0.0):
    """S of coupled inductors from their Z matrix, converted by scikit-rf (Network.from_z)."""
    w = 2 * np.pi * f_Hz
    z = np.empty((f_Hz.size, 2, 2), complex)
    z[:, 0, 0] = R1_ohm + 1j * w * L1_H
    z[:, 1, 1] = R2_ohm + 1j * w * L2_H
    z[:, 0, 1] = z[:, 1, 0] = 1j * w * M_H
    return rf.Network.from_z(z, frequency=rf.Frequency.from_f(f_Hz, unit="hz"), z0=50).s


@pytest.mark.parametrize("polarity", [1, -1])
@pytest.mark.parametrize("L1_H,L2_H,k", [(10e-6, 90e-6, 0.99), (200e-6, 12e-6, 0.95), (3e-6, 3e-6, 0.999)])
def test_thru_low_band_reads_both_inductances_and_the_signed_mutual(L1_H, L2_H, k, polarity):
    # Lossless coupled inductors, S from scikit-rf's Z-to-S conversion; only S11 and S21 are given
    # (a forward-only file): the reading completes S22 and must give L1, L2 and M with its sign.
    M_H = polarity * k * np.sqrt(L1_H * L2_H)
    s = _coupled_pair(F_HZ, L1_H, L2_H, M_H)
    l1, l2, m = thru_low_band(F_HZ, s[:, 0, 0], s[:, 1, 0], 50.0, 50.0)
    assert l1 == pytest.approx(L1_H, rel=1e-6)
    assert l2 == pytest.approx(L2_H, rel=1e-6)
    assert m == pytest.approx(M_H, rel=1e-6)


def test_thru_low_band_reads_nothing_from_a_lossy_thru():
    # 20 ohm in series with each winding absorbs a large share of the power at low frequency: the
    # lossless completion of S22 does not hold there, so no reading (the fit uses its others).
    s = _coupled_pair(F_HZ, 10e-6, 40e-6, 0.99 * 20e-6, R1_ohm=20.0, R2_ohm=20.0)
    assert thru_low_band(F_HZ, s[:, 0, 0], s[:, 1, 0], 50.0, 50.0) is None


def test_band_fit_reads_a_winding_with_only_two_points_below_resonance():
    # 1.8 mH with 63 pF resonates near 470 kHz; a linear grid from 100 kHz in steps of 227 kHz has
    # two points below it. Parallel L-C admittance Y = 1/(jωL) + jωC (textbook form), converted
    # to impedance: the two-term reading is exact for it.
    f = np.linspace(100e3, 100e6, 440)
    L, C = 1.8e-3, 63e-12
    z = 1.0 / (1.0 / (2j * np.pi * f * L) + 2j * np.pi * f * C)
    l_read, c_read = band_fit_LC(f, z, 50.0)
    assert l_read == pytest.approx(L, rel=1e-6)
    assert c_read == pytest.approx(C, rel=1e-6)
