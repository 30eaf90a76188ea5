"""Trace noise estimated from the measured data alone, never from a model's residuals.

A fit's misfit can only be judged against something the model did not
produce. Along a densely sampled sweep the true response is smooth in the
point index, so an n-th order difference of neighbouring points cancels the
signal and leaves the noise: for white noise of standard deviation σ per
component, the n-th difference has variance C(2n, n)·σ². The median absolute
deviation makes the estimate robust against the few points where a resonance
or a joined segment leaves signal in the difference. Several orders are tried
and the smallest estimate is kept: a low order leaves curvature in on coarse
grids, a high order only amplifies the noise by a known factor.
"""

from __future__ import annotations

import math

import numpy as np

DIFFERENCE_ORDERS = (2, 3, 4, 5)
"""Difference orders tried; the smallest normalised estimate wins."""
MIN_DIFFERENCES = 8
"""Fewer differences than this give no usable estimate (NaN)."""
SYSTEMATIC_FLOOR = 3e-4
"""S units per component: what a careful calibration of a small VNA leaves beside the
trace noise (about −70 dB; from memory). Added in quadrature to the data's own noise, so
a noise-free simulated sweep is not held to a precision no instrument reaches."""
_MAD_TO_SIGMA = 1.482602218505602  # 1/Φ⁻¹(3/4): MAD of a normal variable → its σ


def trace_noise_sigma(values: np.ndarray) -> float:
    """Per-component noise σ of one complex trace (1-D), from its neighbouring points.

    Returns NaN when the trace is too short to tell noise from signal.
    """
    y = np.asarray(values, dtype=complex).ravel()
    y = y[np.isfinite(y)]
    best = math.inf
    for order in DIFFERENCE_ORDERS:
        if y.size - order < MIN_DIFFERENCES:
            break
        d = np.diff(y, n=order)
        parts = np.concatenate([d.real, d.imag])
        mad = float(np.median(np.abs(parts - np.median(parts))))
        sigma = _MAD_TO_SIGMA * mad / math.sqrt(math.comb(2 * order, order))
        best = min(best, sigma)
    return best if math.isfinite(best) else math.nan


def sweep_noise_sigma(measured: np.ndarray) -> np.ndarray:
    """Noise σ per S element of a sweep's measured array of shape (F, E): shape (E,)."""
    m = np.asarray(measured)
    if m.ndim == 1:
        m = m[:, None]
    return np.array([trace_noise_sigma(m[:, e]) for e in range(m.shape[1])])


def error_sigma(measured: np.ndarray) -> np.ndarray:
    """The error model of a sweep, per S element: data noise and the systematic floor in quadrature.

    This, never the fit's own residuals, is what a fit is weighted by and judged against.
    """
    noise = sweep_noise_sigma(measured)
    noise = np.where(np.isfinite(noise), noise, 0.0)
    return np.sqrt(noise**2 + SYSTEMATIC_FLOOR**2)
