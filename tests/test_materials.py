"""Material classes: the shipped table, and matching by plateau µi, µ″ peak and resistivity together.

The class ranges are typical values from memory (rfmeas/data/materials.toml says so); these tests
check the matching rules, not the ranges: each class's own centre comes back to it, the ohmmeter
hint keeps the families apart, and a poor fit, an unseen peak or a contradicting hint never yields
a confident class."""

from __future__ import annotations

import math

import numpy as np
import pytest

from rfmeas.errors import InputError
from rfmeas.magnetics.materials import LEVELS, load_materials, match_material, parse_materials


@pytest.fixture(scope="module")
def table():
    return load_materials(use_environment=False)


def centre(rng):
    """Geometric centre of a [low, high] range."""
    return math.sqrt(rng[0] * rng[1])


def test_shipped_table_is_generic_and_complete(table):
    ids = [c.id for c in table.classes]
    assert len(ids) == len(set(ids)) >= 10
    for c in table.classes:
        assert c.source.startswith("typical, from memory")
        assert c.resistivity in ("conductive", "insulating")
        # the class's own centre obeys its family's Snoek product, so the table is self-consistent
        family = table.families.get(c.family)
        if family is not None:
            snoek = (centre(c.initial_permeability) - 1) * centre(c.peak_frequency_Hz)
            assert family.snoek_product_Hz[0] <= snoek <= family.snoek_product_Hz[1], c.id
    assert {c.resistivity for c in table.classes if c.family == "MnZn"} == {"conductive"}
    assert {c.resistivity for c in table.classes if c.family in ("NiZn", "iron powder")} == {"insulating"}


def test_each_class_centre_is_matched_to_itself(table):
    for c in table.classes:
        mu, fp = centre(c.initial_permeability), centre(c.peak_frequency_Hz)
        match = match_material(table, mu, 0.01 * mu, fp, 0.05 * fp, c.resistivity,
                               sweep_top_Hz=1e10, sweep_bottom_Hz=1e3)
        assert match.best.material.id == c.id
        assert match.peak_evidence == "measured"
        assert match.confidence_level in ("likely", "possible"), (c.id, match.explanation)


def test_resistivity_hint_excludes_the_wrong_family(table):
    # µi 2000 with the peak at 1.34 MHz sits in both the MnZn µi ≈ 2000 and NiZn µi ≈ 1500 classes
    conductive = match_material(table, 2000, 20, 1.34e6, 5e4, "conductive")
    insulating = match_material(table, 2000, 20, 1.34e6, 5e4, "insulating")
    unknown = match_material(table, 2000, 20, 1.34e6, 5e4)
    assert conductive.best.material.family == "MnZn"
    assert insulating.best.material.family == "NiZn"
    # without the hint the two families are too close to call with confidence, and it says how to tell
    assert unknown.confidence_level != "likely"
    assert any("ohmmeter" in limit for limit in unknown.limits)
    # with the hint, every class of the other resistivity is pushed back
    assert all(a.material.resistivity == "insulating" or a.distance >= 3 for a in insulating.alternatives)


def test_insulating_cores_are_never_named_mnzn_with_confidence(table):
    # seeded population over everything a user can bring: µi 2 … 20000, peak 10 kHz … 1 GHz
    rng = np.random.default_rng(13)
    named = 0
    for _ in range(2000):
        mu = 10 ** rng.uniform(0.3, 4.3)
        fp = 10 ** rng.uniform(4, 9)
        hint = rng.choice(["insulating", None])
        match = match_material(table, mu, 0.02 * mu, fp, 0.1 * fp, hint)
        if match.confidence_level == "likely":
            named += 1
            if hint == "insulating":
                assert match.best.material.resistivity == "insulating"
            else:  # no hint: a confident class has no class of the other resistivity close behind
                others = [a for a in match.alternatives if a.material.resistivity != match.best.material.resistivity]
                assert all(a.distance > match.best.distance + 1 for a in others)
        if match.best.material.family == "MnZn" and hint == "insulating":
            assert match.confidence_level != "likely"
    assert named > 50  # the rules leave room for confident answers


def test_poor_fit_caps_the_confidence(table):
    good = match_material(table, 800, 10, 4.5e6, 2e5, "insulating")
    poor = match_material(table, 800, 10, 4.5e6, 2e5, "insulating", fit_is_poor=True)
    assert good.confidence_level == "likely" and good.best.material.id == "nizn-800"
    assert poor.best.material.id == "nizn-800"
    assert poor.confidence_level == "possible"
    assert poor.confidence <= 0.5 < good.confidence
    assert poor.fit_is_poor and "fit is poor" in poor.explanation
    # never "likely" with a poor fit, anywhere
    rng = np.random.default_rng(7)
    for _ in range(500):
        mu, fp = 10 ** rng.uniform(0.3, 4.3), 10 ** rng.uniform(4, 9)
        match = match_material(table, mu, None, fp, None, rng.choice(["insulating", "conductive"]),
                               fit_is_poor=True)
        assert match.confidence_level != "likely"


def test_peak_above_the_sweep_is_used_as_a_bound(table):
    # µi 8, no peak up to 300 MHz: carbonyl iron (peaks 50 MHz … 1 GHz) allows that
    match = match_material(table, 8, 0.2, None, None, "insulating", sweep_top_Hz=300e6)
    assert match.best.material.id == "carbonyl-iron"
    assert match.peak_evidence == "above the sweep"
    assert "above the sweep's top" in match.explanation
    # µi 2000 and no peak up to 10 MHz: both µi ≈ 2000 classes would have peaked inside the sweep
    match = match_material(table, 2000, 20, None, None, "conductive", sweep_top_Hz=10e6)
    assert match.best.detail["peak_frequency"] > 1.0
    assert match.confidence_level != "likely"
    # a model's peak beyond the top is treated as the same bound, not as a measured value
    beyond = match_material(table, 8, 0.2, 5e9, 1e9, "insulating", sweep_top_Hz=300e6)
    assert beyond.peak_evidence == "above the sweep"
    assert beyond.best.distance == pytest.approx(match_material(table, 8, 0.2, None, None, "insulating",
                                                                sweep_top_Hz=300e6).best.distance)


def test_peak_not_known_compares_mu_only_and_says_so(table):
    match = match_material(table, 300, 5, None, None, "insulating")
    assert match.peak_evidence == "not known"
    assert match.best.material.id == "nizn-300"
    assert match.confidence_level == "possible"
    assert "µ″ peak not known" in match.explanation


def test_thousands_with_a_peak_far_below_the_sweep_are_not_claimed(table):
    # the failure seen on real sweeps: µi in the thousands from a relaxation pinned at 50 Hz
    pinned = match_material(table, 3000, 30, 50.0, 10.0, sweep_bottom_Hz=50e3, sweep_top_Hz=300e6)
    assert pinned.confidence_level == "not determined"
    assert pinned.peak_evidence == "below the sweep"
    assert "extrapolation" in pinned.explanation and pinned.confidence <= 0.5
    # without the sweep's span the 50 Hz peak is far from every class (Snoek product 1.5e5 Hz)
    assert match_material(table, 3000, 30, 50.0, 10.0).confidence_level == "poor match"


def test_match_serialises_with_its_evidence(table):
    d = match_material(table, 800, 10, None, None, "insulating", sweep_top_Hz=1e6).to_dict()
    assert {"best", "alternatives", "confidence", "dc_resistance_hint", "explanation", "note",
            "peak_evidence", "limits", "fit_is_poor"} <= set(d)
    assert d["confidence"]["level"] in LEVELS
    assert set(d["best"]["detail"]) == {"permeability", "peak_frequency", "snoek", "resistivity_penalty"}


@pytest.mark.parametrize("args", [
    (0, 1, 1e6, 1e4), (float("nan"), 1, 1e6, 1e4), (800, 1, -1e6, 1e4), (800, 1, float("inf"), 1e4),
])
def test_bad_measurements_are_input_errors(table, args):
    with pytest.raises(InputError):
        match_material(table, *args)
    with pytest.raises(InputError, match="top"):
        match_material(table, 800, 1, None, None, sweep_top_Hz=0.0)
    with pytest.raises(InputError, match="hint"):
        match_material(table, 800, 1, 1e6, 1e4, "magnetic")


def test_older_peak_key_is_read_and_conflicts_are_refused(tmp_path):
    head = ('[[class]]\nid = "x"\nname = "x"\nfamily = "NiZn"\ninitial_permeability = [1, 2]\n'
            'resistivity = "insulating"\nsource = ""\n')
    classes, _ = parse_materials(head + "relaxation_frequency_Hz = [1e6, 2e6]\n", "old.toml", "old.toml")
    assert classes[0].peak_frequency_Hz == (1e6, 2e6)
    with pytest.raises(InputError, match="both"):
        parse_materials(head + "relaxation_frequency_Hz = [1e6, 2e6]\npeak_frequency_Hz = [1e6, 2e6]\n",
                        "two.toml", "two.toml")
    with pytest.raises(InputError, match="peak_frequency_Hz"):
        parse_materials(head, "none.toml", "none.toml")


def test_cores_drawn_from_each_class_population(table):
    # seeded population: µi and peak drawn log-uniformly inside each class's own ranges, the ohmmeter
    # hint given half the time; a "likely" answer must never name another class, and the nearest
    # class is the drawing class for most cores (measured: 0 wrong "likely" of ~1160, 92 % right)
    rng = np.random.default_rng(3)
    right = likely_wrong = total = 0
    for c in table.classes:
        for _ in range(150):
            mu = math.exp(rng.uniform(*np.log(c.initial_permeability)))
            fp = math.exp(rng.uniform(*np.log(c.peak_frequency_Hz)))
            match = match_material(table, mu, 0.03 * mu, fp, 0.1 * fp, rng.choice([c.resistivity, None]))
            total += 1
            right += match.best.material.id == c.id
            likely_wrong += match.confidence_level == "likely" and match.best.material.id != c.id
    assert likely_wrong == 0
    assert right / total > 0.85
