"""Reflection, series-through and shunt-through impedance: forward models, inverses, uncertainty."""

from __future__ import annotations

import numpy as np
import pytest
import skrf as rf

from rfmeas.model import methods as m
from rfmeas.errors import InputError

Z0 = 50.0
FREQ = rf.Frequency.from_f(np.array([1e6]), unit="hz")


def skrf_s(method: str, z: complex) -> complex:
    """The measured S parameter as scikit-rf computes it for the element (outside our code).

    Series element ABCD [[1, Z], [0, 1]], shunt element [[1, 0], [1/Z, 1]] (Pozar, Microwave
    Engineering, ABCD table); a one-port from its impedance for reflection.
    """
    if method == m.REFLECTION:
        return rf.Network.from_z(np.array([[[z]]]), frequency=FREQ, z0=Z0).s[0, 0, 0]
    abcd = [[1, z], [0, 1]] if method == m.SERIES_THROUGH else [[1, 0], [1 / z, 1]]
    return rf.Network(frequency=FREQ, a=np.array([abcd], dtype=complex), z0=Z0).s[0, 1, 0]


IMPEDANCES = [1.0, 50.0, 1e4, 3.0 + 40j, 200 - 900j, 0.02 + 0.5j]


@pytest.mark.parametrize("method", m.METHODS)
@pytest.mark.parametrize("z", IMPEDANCES)
def test_forward_model_matches_scikit_rf(method, z):
    assert m.s_from_impedance(method, z, Z0) == pytest.approx(skrf_s(method, z), rel=1e-12, abs=1e-14)


@pytest.mark.parametrize("method", m.METHODS)
def test_inverse_undoes_forward_vectorised(method):
    rng = np.random.default_rng(7)
    z = 10 ** rng.uniform(-1, 5, 500) * np.exp(1j * rng.uniform(-1.5, 1.5, 500))
    back = m.impedance_from_s(method, m.s_from_impedance(method, z, Z0), Z0)
    np.testing.assert_allclose(back, z, rtol=1e-9)
    assert back.shape == z.shape


def test_limits_give_infinity_not_errors():
    assert np.isinf(m.impedance_from_reflection(1.0))
    assert np.isinf(m.impedance_from_series_through(0.0))
    assert np.isinf(m.impedance_from_shunt_through(1.0))
    assert m.relative_uncertainty(m.REFLECTION, 0.0) == np.inf


@pytest.mark.parametrize("method", m.METHODS)
@pytest.mark.parametrize("z", IMPEDANCES)
def test_sensitivity_is_the_derivative(method, z):
    # Z(S) is analytic, so a complex finite difference gives dZ/dS [derived]
    s = m.s_from_impedance(method, z, Z0)
    h = 1e-7 * (1 + 1j) * max(abs(s), 1e-3)
    numeric = (m.impedance_from_s(method, s + h, Z0) - m.impedance_from_s(method, s - h, Z0)) / (2 * h)
    assert m.impedance_sensitivity(method, z, Z0) == pytest.approx(numeric, rel=1e-5)


def test_with_equal_additive_noise_reflection_is_never_worse():
    # |Z+Z0|^2 <= |2Z0+Z|^2 and |2Z+Z0|^2 for Re Z >= 0 [derived], so with purely additive
    # noise the two-port methods only win through a lower noise on S21.
    rng = np.random.default_rng(3)
    z = 10 ** rng.uniform(-2, 6, 2000) * np.exp(1j * rng.uniform(-np.pi / 2, np.pi / 2, 2000))
    t = m.uncertainty_table(z, Z0, noise=1e-3)
    assert np.all(t[m.REFLECTION] <= t[m.SERIES_THROUGH] * (1 + 1e-12))
    assert np.all(t[m.REFLECTION] <= t[m.SHUNT_THROUGH] * (1 + 1e-12))


def add_noise(s, noise: m.SNoise, rng, n):
    """n noisy readings of S: S (1 + relative part) + floor, complex Gaussian with E|x|^2 = sigma^2."""
    def cnoise(sigma):
        return sigma / np.sqrt(2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    return s * (1 + cnoise(noise.relative)) + cnoise(noise.floor)


@pytest.mark.parametrize("z,expected_best", [(1.0, m.SHUNT_THROUGH), (50.0, m.REFLECTION),
                                             (1e4, m.SERIES_THROUGH)])
def test_monte_carlo_recovery_ranks_methods_as_theory_says(z, expected_best):
    # The measured S comes from scikit-rf (see skrf_s); 4000 noisy repeats per method, fixed seed.
    noise = m.DEFAULT_NOISE
    rng = np.random.default_rng(20261201)
    n = 4000
    observed, predicted = {}, {}
    for method in m.METHODS:
        readings = add_noise(skrf_s(method, z), noise, rng, n)
        z_hat = m.impedance_from_s(method, readings, Z0)
        observed[method] = float(np.sqrt(np.mean(np.abs(z_hat - z) ** 2)) / abs(z))
        predicted[method] = float(m.relative_uncertainty(method, z, Z0, noise))
    assert m.best_method(z, Z0, noise) == expected_best
    assert min(observed, key=observed.get) == expected_best
    for method in m.METHODS:
        if method != expected_best:  # the winner wins clearly, not by sampling luck
            assert observed[method] > 3 * observed[expected_best], (method, observed)
        if predicted[method] < 0.05:  # first order holds where the error is small
            assert observed[method] == pytest.approx(predicted[method], rel=0.08), (method, observed)


def test_best_method_per_point_and_for_a_range():
    z = np.array([0.5, 50.0, 20e3])
    assert list(m.best_method(z)) == [m.SHUNT_THROUGH, m.REFLECTION, m.SERIES_THROUGH]
    assert isinstance(m.best_method(20e3), str)
    assert m.best_method(np.geomspace(2e3, 4e4, 50), per_point=False) == m.SERIES_THROUGH
    # purely additive noise: reflection everywhere (see the test above)
    assert set(m.best_method(np.geomspace(0.1, 1e5, 40), noise=1e-3)) == {m.REFLECTION}


def test_advice_sentences():
    high = m.method_advice(np.geomspace(2e3, 4e4, 200))
    assert high.best == m.SERIES_THROUGH
    assert "series-through measurement would resolve it about" in high.sentence
    assert high.sentence.startswith("this winding is 2.") and "kΩ" in high.sentence
    assert high.gain_over_reflection == pytest.approx(
        high.median_uncertainty[m.REFLECTION] / high.median_uncertainty[m.SERIES_THROUGH])
    assert high.gain_over_reflection > 10
    low = m.advise_method(1j * np.geomspace(0.3, 3, 100))
    assert "shunt-through" in low and "better than reflection" in low
    mid = m.advise_method(np.geomspace(20, 120, 100))
    assert "reflection resolves it best" in mid
    d = high.to_dict()
    assert d["best"] == m.SERIES_THROUGH and isinstance(d["median_uncertainty"][m.REFLECTION], float)


def test_bad_input():
    with pytest.raises(InputError, match="unknown impedance method"):
        m.s_from_impedance("four-wire", 1.0)
    with pytest.raises(InputError, match="no finite"):
        m.advise_method(np.array([np.nan, 0.0]))
    with pytest.raises(InputError):
        m.SNoise(floor=-1.0)
    with pytest.raises(InputError):
        m.SNoise(floor=0.0, relative=0.0)
