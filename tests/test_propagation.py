"""The one propagation routine (rfmeas.fit.propagation) against closed forms and a Monte Carlo draw.

Reference: first-order (delta-method) propagation, var(q) = g·C·gᵀ with g = ∂q/∂p (JCGM 100:2008,
"GUM", eq. 13, correlated inputs); the Monte Carlo check draws the parameters from the same
covariance (JCGM 101:2008, "GUM Supplement 1") and compares the scatter of q.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from rfmeas.fit.propagation import physical_covariance, propagate, propagate_all
from rfmeas.fit.result import build_estimates
from rfmeas.fit.solver import FitOutcome
from rfmeas.judge.figures import propagate as figures_propagate
from rfmeas.model.circuit import input_impedance
from rfmeas.model.params import TransformerParams

L1, L2, K = 10e-6, 90e-6, 0.99
S_L1, S_L2, S_K = 1e-7, 1.8e-6, 1e-3          # 1 %, 2 %, and 0.001 in k
R_L1K, R_L1L2, R_L2K = 0.5, 0.8, 0.3          # correlation coefficients


def _physical_cov():
    s = np.array([S_L1, S_L2, S_K])
    r = np.array([[1, R_L1L2, R_L1K], [R_L1L2, 1, R_L2K], [R_L1K, R_L2K, 1]])
    return r * np.outer(s, s)


def _outcome(cov_p=None, held=None, extra_free=(), extra_cov=None, core_loss="magnetizing", **more):
    """A FitOutcome whose internal covariance is the given physical one converted by hand:
    x = log L for the inductances, log(1 − k) for the coupling, so ∂x/∂L = 1/L, ∂x/∂k = −1/(1 − k)."""
    params = TransformerParams(L1, L2, K, R1_ohm=0.1, R2_ohm=0.5, Rc_ohm=2e3, C1_F=5e-12, C2_F=4e-12,
                               C12_F=2e-12, core_loss=core_loss)
    free = ("L1_H", "L2_H", "k") + tuple(extra_free)
    values = [getattr(params, n) for n in free]
    x = np.array([math.log(1 - v) if n == "k" else math.log(v) for n, v in zip(free, values)])
    inv_d = np.array([-1 / (1 - v) if n == "k" else 1 / v for n, v in zip(free, values)])
    cov_p = _physical_cov() if cov_p is None else cov_p
    if extra_cov is not None:
        cov_p = extra_cov
    cov_x = cov_p * np.outer(inv_d, inv_d)
    fields = dict(params=params, free=free, held=held or {}, referred={}, x=x, covariance=cov_x,
                  residual_variance=1.0, sweep_sigma=(), residuals=(), converged=True, message="",
                  evaluations=0, points=100, elapsed_s=0.0)
    fields.update(more)
    return FitOutcome(**fields)


def test_internal_covariance_converts_to_physical_units():
    names, cov = physical_covariance(_outcome())
    assert names == ("L1_H", "L2_H", "k")
    np.testing.assert_allclose(cov, _physical_cov(), rtol=1e-12)


def test_leakage_and_ratio_against_the_closed_form():
    outcome = _outcome()
    # leakage Ll = L1(1 − k²): ∂/∂L1 = 1 − k² = 0.0199, ∂/∂k = −2kL1 = −1.98e-5 H
    # var = 0.0199²·(1e-7)² + (1.98e-5)²·(1e-3)² + 2·0.0199·(−1.98e-5)·(0.5·1e-7·1e-3)
    #     = 3.9601e-18 + 3.9204e-16 − 3.9402e-17 = 3.565981e-16 H², σ = 1.88838e-8 H
    leak = propagate(outcome, lambda p: p.leakage_inductance_H, needs=("L1_H", "k"))
    assert leak.value == pytest.approx(1.99e-7, rel=1e-12)
    assert leak.stderr == pytest.approx(1.88838e-8, rel=1e-5)
    # ratio n = √(L2/L1) = 3: ∂n/∂L1 = −n/(2L1), ∂n/∂L2 = n/(2L2), so
    # var/n² = ((σ1/L1)² + (σ2/L2)² − 2ρ·(σ1/L1)(σ2/L2))/4 = (1e-4 + 4e-4 − 2·0.8·0.01·0.02)/4 = 4.5e-5
    # σ = 3·√4.5e-5 = 0.0201246
    ratio = propagate(outcome, lambda p: p.effective_turns_ratio)
    assert ratio.value == pytest.approx(3.0, rel=1e-12)
    assert ratio.stderr == pytest.approx(0.0201246, rel=1e-5)
    assert ratio.reason == ""


def test_results_and_figures_use_the_same_routine():
    outcome = _outcome()
    estimates = build_estimates(outcome)
    assert estimates["leakage_inductance_H"].stderr == pytest.approx(1.88838e-8, rel=1e-5)
    assert estimates["effective_turns_ratio"].stderr == pytest.approx(0.0201246, rel=1e-5)
    assert estimates["coupling_coefficient"].stderr == pytest.approx(S_K, rel=1e-6)
    values, stderr = figures_propagate(outcome, lambda p: {"ratio": p.effective_turns_ratio})
    assert stderr["ratio"] == estimates["effective_turns_ratio"].stderr
    assert values["ratio"] == pytest.approx(3.0)


def _impedance_magnitude(p):
    # the primary with the secondary shorted at 3 MHz: leakage, R and C together, nonlinear in all
    return float(abs(input_impedance(p, [3e6], "primary", "short")[0]))


def test_against_the_scatter_of_a_monte_carlo_draw():
    outcome = _outcome()
    funcs = {"leakage": lambda p: p.leakage_inductance_H, "ratio": lambda p: p.effective_turns_ratio,
             "mutual": lambda p: p.mutual_inductance_H, "z_short": _impedance_magnitude}
    got = propagate_all(outcome, lambda p: {k: f(p) for k, f in funcs.items()})
    rng = np.random.default_rng(15)
    draws = rng.multivariate_normal([L1, L2, K], _physical_cov(), size=20000)
    base = outcome.params
    for key, f in funcs.items():
        q = np.array([f(base.replace(L1_H=a, L2_H=b, k=c)) for a, b, c in draws])
        # 20 000 draws: the scatter's own relative uncertainty is 1/√(2·20000) = 0.5 %
        assert got[key].stderr == pytest.approx(float(np.std(q)), rel=0.03), key


def test_held_parameter_gives_no_stderr_with_its_reason():
    held = {"C12_F": (1e-17, "the sweeps do not constrain it")}
    got = propagate_all(outcome := _outcome(held=held), lambda p: {"c": p.C12_F, "l": p.L1_H},
                        needs={"c": ("C12_F",), "l": ("L1_H",)})
    assert got["c"].stderr is None and got["c"].held == ("C12_F",)
    assert "needs C12," in got["c"].reason and "C12_F" not in got["c"].reason and "do not constrain" in got["c"].reason
    assert got["l"].stderr == pytest.approx(S_L1, rel=1e-6)
    estimates = build_estimates(outcome)
    assert estimates["interwinding_capacitance_F"].determined is False
    assert "do not constrain" in estimates["interwinding_capacitance_F"].note


def test_unseen_direction_spoils_only_what_moves_along_it():
    # C1 free but unseen: the solver marks its row and column NaN and its variance infinite
    cov = np.zeros((4, 4))
    cov[:3, :3] = _physical_cov()
    cov[3, :] = cov[:, 3] = np.nan
    cov[3, 3] = np.inf
    outcome = _outcome(extra_free=("C1_F",), extra_cov=cov)
    got = propagate_all(outcome, lambda p: {"ratio": p.effective_turns_ratio, "z": _impedance_magnitude(p)})
    assert got["ratio"].stderr == pytest.approx(0.0201246, rel=1e-5)
    assert got["z"].stderr is None and "unseen" in got["z"].reason


def test_no_covariance_and_failing_evaluation_say_why():
    got = propagate(_outcome(covariance=None), lambda p: p.L1_H)
    assert got.stderr is None and "no covariance" in got.reason

    def breaks_next_to_the_fit(p):
        if p.L2_H != L2:
            raise ValueError("outside")
        return p.L1_H + p.L2_H

    got = propagate(_outcome(), breaks_next_to_the_fit)
    assert got.value == pytest.approx(L1 + L2) and got.stderr is None and "cannot be evaluated" in got.reason
    assert "moving L2_H" in got.reason and "outside" in got.reason  # the failure itself is said


def test_core_loss_placement_and_polarity_are_kept():
    seen = set()

    def placement(p):
        seen.add((p.core_loss, p.polarity))
        return _impedance_magnitude(p)

    got = propagate(_outcome(core_loss="primary"), placement)
    assert seen == {("primary", 1)}
    # the primary placement changes the quantity: the value is the placed model's, not the default's
    params = _outcome(core_loss="primary").params
    assert got.value == _impedance_magnitude(params)
    assert got.value != pytest.approx(_impedance_magnitude(params.replace(core_loss="magnetizing")), rel=1e-6)


def _random_case(rng):
    """Parameters over the range a user can bring and a random correlated covariance (0.1–5 %)."""
    l1, l2 = 10 ** rng.uniform(-7, -3), 10 ** rng.uniform(-7, -3)
    k = 1 - 10 ** rng.uniform(-5, -0.4)
    a = rng.normal(size=(3, 3))
    corr = a @ a.T
    corr /= np.sqrt(np.outer(np.diag(corr), np.diag(corr)))
    rel = 10 ** rng.uniform(-3, -1.3, size=3)
    s = np.array([rel[0] * l1, rel[1] * l2, rel[2] * (1 - k)])  # k's spread scales with 1 − k, as in the fit
    params = TransformerParams(l1, l2, k)
    x = np.array([math.log(l1), math.log(l2), math.log(1 - k)])
    inv_d = np.array([1 / l1, 1 / l2, -1 / (1 - k)])
    cov_p = corr * np.outer(s, s)
    outcome = FitOutcome(params=params, free=("L1_H", "L2_H", "k"), held={}, referred={}, x=x,
                         covariance=cov_p * np.outer(inv_d, inv_d), residual_variance=1.0, sweep_sigma=(),
                         residuals=(), converged=True, message="", evaluations=0, points=100, elapsed_s=0.0)
    return outcome, cov_p


def _key_quantities(q):
    return {"leak": q.leakage_inductance_H, "ratio": q.effective_turns_ratio, "mutual": q.mutual_inductance_H}


def _propagated_population(seed, count):
    """(generator, outcome, physical covariance, propagated key quantities) of `count` seeded cases."""
    rng = np.random.default_rng(seed)
    for _ in range(count):
        outcome, cov = _random_case(rng)
        yield rng, outcome, cov, propagate_all(outcome, _key_quantities)


def test_closed_form_over_a_random_population():
    # 300 seeded cases; the analytic gradients of leakage and ratio (as derived above) with g·C·gᵀ
    worst = 0.0
    for _rng, outcome, cov, got in _propagated_population(151, 300):
        p = outcome.params
        n = p.effective_turns_ratio
        gradients = {"leak": np.array([1 - p.k ** 2, 0.0, -2 * p.k * p.L1_H]),
                     "ratio": np.array([-n / (2 * p.L1_H), n / (2 * p.L2_H), 0.0])}
        for key, g in gradients.items():
            worst = max(worst, abs(got[key].stderr / math.sqrt(g @ cov @ g) - 1))
    assert worst < 1e-5, worst  # measured: 5.7e-7


def test_monte_carlo_over_a_random_population():
    worst = 0.0
    for rng, outcome, cov, got in _propagated_population(152, 12):
        p = outcome.params
        l1, l2, k = rng.multivariate_normal([p.L1_H, p.L2_H, p.k], cov, size=20000).T
        scatter = {"leak": np.std(l1 * (1 - k ** 2)), "ratio": np.std(np.sqrt(l2 / l1)),
                   "mutual": np.std(k * np.sqrt(l1 * l2))}
        for key, s in scatter.items():
            worst = max(worst, abs(got[key].stderr / s - 1))
    # sampling alone: 0.5 % (1σ) per comparison; the rest is the first-order approximation at 5 % spreads
    assert worst < 0.05, worst  # measured: 1.0 %
