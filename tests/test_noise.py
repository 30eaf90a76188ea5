"""The data-only noise estimate: white noise of known σ on smooth transformer-like traces."""

import numpy as np
import pytest

from rfmeas.measurement.noise import sweep_noise_sigma, trace_noise_sigma


@pytest.mark.parametrize("grid", ["log", "linear"])
@pytest.mark.parametrize("sigma", [3e-4, 3e-3])
def test_recovers_added_white_noise_on_a_resonant_winding(grid, sigma):
    # the trace is a winding (L, C, R) seen by a 50 ohm port: smooth in the point index
    # except near its self-resonance, which the median must ignore
    rng = np.random.default_rng(7)
    f = np.logspace(4, 8, 801) if grid == "log" else np.linspace(1e4, 1e8, 801)
    w = 2 * np.pi * f
    z = 1j * w * 20e-6 / (1 - w**2 * 20e-6 * 8e-12) + 0.3
    s = (z - 50) / (z + 50)
    noisy = s + sigma * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size))
    assert trace_noise_sigma(noisy) == pytest.approx(sigma, rel=0.2)


def test_noise_free_trace_reads_far_below_any_instrument_noise():
    f = np.logspace(4, 8, 401)
    s = (1j * 2 * np.pi * f * 1e-5 - 50) / (1j * 2 * np.pi * f * 1e-5 + 50)
    assert trace_noise_sigma(s) < 1e-8


def test_a_misfit_is_not_noise():
    # a smooth offset (what a wrong model leaves) does not raise the estimate
    rng = np.random.default_rng(3)
    f = np.linspace(1e5, 3e7, 1001)
    base = 1e-3 * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size))
    offset = 0.05 * np.exp(1j * f / 1e7)
    assert trace_noise_sigma(base + offset) == pytest.approx(trace_noise_sigma(base), rel=0.1)


def test_short_trace_has_no_estimate_and_shape_per_element():
    assert np.isnan(trace_noise_sigma(np.ones(5, complex)))
    out = sweep_noise_sigma(np.ones((100, 2), complex))
    assert out.shape == (2,)


def test_error_model_never_below_the_systematic_floor():
    from rfmeas.measurement.noise import SYSTEMATIC_FLOOR, error_sigma

    quiet = np.exp(1j * np.linspace(0, 1, 200))[:, None]
    assert error_sigma(quiet)[0] == pytest.approx(SYSTEMATIC_FLOOR, rel=1e-3)
    rng = np.random.default_rng(5)
    noisy = quiet + 3e-3 * (rng.standard_normal((200, 1)) + 1j * rng.standard_normal((200, 1)))
    assert error_sigma(noisy)[0] == pytest.approx(np.hypot(3e-3, SYSTEMATIC_FLOOR), rel=0.25)
