"""The dispersion family, the VNA error model, the leads and realistic hobby-VNA sweeps.

Sweeps come from tests/reference/core_sweeps.py: µ(f) written out there, Z → S by scikit-rf,
the three-term one-port error model with hobby-grade residuals (from memory), linear grids
from 50 kHz to 300 MHz, stitched segments.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.fit.core_spectrum import (
    analyze_core,
    analyze_core_file,
    analyze_core_windings,
    analyze_readings,
    given_leads,
    leads_from_short,
    leads_from_turns,
)
from rfmeas.errors import InputError
from rfmeas.io.touchstone import write_touchstone
from rfmeas.magnetics import toroid_geometry
from rfmeas.magnetics.dispersion import (
    RESONANCE,
    SUM,
    VnaErrorModel,
    log_thin_indices,
    model_permeability,
    permeability_from_impedance,
)
from rfmeas.magnetics.materials import load_materials
from tests.reference.core_sweeps import (
    MU0,
    Calibration,
    Core,
    Leads,
    impedance,
    linear_grid,
    measure,
    s11_of,
    winding_z,
)
from tests.reference.spice import run_ngspice, spice_available

import skrf as rf

# ------------------------------------------------------------------ published and derived checks


def test_worked_example_single_winding():
    # owenduffy.net/blog/?p=11856: one turn on the 61.0/35.55/12.7 mm NiZn toroid,
    # Z = 13.6 + j19.1 Ω at about 7.1 MHz (the post says 7.31 MHz, but its L = 0.429 − j0.305 µH
    # fits 7.1 MHz), µr = 313 − j223.
    g = toroid_geometry(61.0, 35.55, 12.7)
    mu = permeability_from_impedance(7.1e6, 13.6 + 19.1j, 1, g)
    assert mu.real == pytest.approx(313, rel=0.01)
    assert -mu.imag == pytest.approx(223, rel=0.01)
    # the same point through a 30 nH lead taken off first: Z − jωLl, then the same formula
    w = 2 * math.pi * 7.1e6
    mu_leads = permeability_from_impedance(7.1e6, 13.6 + 19.1j + 1j * w * 30e-9, 1, g, 0.0, 30e-9)
    assert mu_leads == pytest.approx(mu, rel=1e-12)


@pytest.mark.spice
@pytest.mark.skipif(not spice_available(), reason="ngspice not installed")
def test_dispersion_forms_are_lumped_networks_ngspice():
    # A damped resonance χs/(1 − x² + jβx) times jωL0 is a parallel L, C, G with L = L0χs,
    # C = 1/(ω0²L), G = β/(ω0 L); a relaxation χr/(1 + jf/fr) is L0χr in parallel with
    # R = 2π·fr·L0χr [derived, project references]. ngspice solves the networks independently.
    l0, chi_s, f0, beta, chi_r, fr = 1e-9, 300.0, 20e6, 0.7, 200.0, 8e6
    ls, w0 = l0 * chi_s, 2 * math.pi * f0
    lr = l0 * chi_r
    f = np.geomspace(1e5, 3e8, 40)
    deck = ["* dispersion as lumped networks", "I1 0 a AC 1",
            f"L0 a b {l0:.12e}",
            f"Ls b c {ls:.12e}", f"Cs b c {1 / (w0**2 * ls):.12e}", f"Rs b c {w0 * ls / beta:.12e}",
            f"Lr c 0 {lr:.12e}", f"Rr c 0 {2 * math.pi * fr * lr:.12e}",
            ".control", "set filetype=binary", f"ac dec 10 {f[0]:g} {f[-1]:g}", "write out.raw v(a)", "quit",
            ".endc", ".end", ""]
    plot = run_ngspice("\n".join(deck))[0]
    f_sim = plot["frequency"].real
    z_spice = plot["v(a)"]
    mu = model_permeability(SUM, f_sim, (chi_s, f0, beta, chi_r, fr))
    z_model = 1j * 2 * np.pi * f_sim * l0 * mu
    np.testing.assert_allclose(z_model, z_spice, rtol=1e-6)


def test_error_model_near_a_short():
    # σ_Z = |Z + Z0|²/(2 Z0)·σ_S; at Z → 0 that is 25 Ω·σ_S and σ_S = sqrt(ed² + et² + es²)
    # with ed = 10^(−40/20), es = 10^(−35/20), et = 10^(0.05/20) − 1 [derived].
    e = VnaErrorModel()
    sigma_s = math.sqrt(0.01**2 + (10 ** (0.05 / 20) - 1) ** 2 + 10 ** (-35 / 10))
    assert e.sigma_impedance(1e-9)[()] == pytest.approx(25 * sigma_s, rel=1e-6)
    assert 0.4 < e.sigma_impedance(0.0)[()] < 0.6  # R, X below about 0.5 Ω are not to be trusted (issue facts)
    # at Z = Z0 only the directivity is left (S = 0): |dZ/dS| = 100 Ω
    assert e.sigma_impedance(50.0)[()] == pytest.approx(100 * 0.01, rel=1e-9)
    with pytest.raises(InputError):
        VnaErrorModel(directivity_db=5.0)


def test_thinning_keeps_sparse_points_and_caps_dense_ones():
    f = linear_grid(30000)
    idx = log_thin_indices(f, 50)
    kept = f[idx]
    decades = np.floor(np.log10(kept))
    for d in np.unique(decades):
        assert np.sum(decades == d) <= 51
    assert kept[0] == f[0] and kept[-1] == f[-1]
    # the sparse low end of a linear grid keeps every point
    assert np.all(np.isin(f[f < 2e5], kept))


# ------------------------------------------------------------------ realistic sweeps

CORE = Core(mu_i=125.0, resonance_share=0.7, f0_Hz=30e6, damping=0.8, fr_Hz=20e6, od_mm=25, id_mm=15, h_mm=10)
LEADS = Leads(32e-9, 0.05)


def _sweep(core, turns, seed, leads=LEADS, cw=None, points=1010, segments=2, cals=None):
    """A sweep of `turns` on `core`; `cals` (one per segment) default to a fresh calibration."""
    rng = np.random.default_rng(seed)
    cals = cals or [Calibration.random(rng), Calibration.random(rng)]
    f = linear_grid(points)
    cw = (0.5 + 0.4 * turns) * 1e-12 if cw is None else cw
    fm, s = measure(f, winding_z(f, core, turns, leads, cw), cals, rng, segments=segments)
    return fm, impedance(s), cals, rng


def _geometry(core):
    return toroid_geometry(core.od_mm, core.id_mm, core.h_mm)


def test_stitched_linear_sweep_with_leads_removed_by_turn_counts():
    g = _geometry(CORE)
    windings = []
    for n, seed in ((1, 11), (2, 12), (8, 13)):
        f, z, _, _ = _sweep(CORE, n, seed)
        windings.append((f, z, n))
    a = analyze_core_windings(windings, g)
    assert a.initial_permeability == pytest.approx(CORE.mu_i, rel=0.05)
    assert a.leads.source == "turn counts" and a.leads.determined
    assert a.leads.inductance_H == pytest.approx(LEADS.inductance_H, rel=0.15)
    assert any("repeated frequency" in w for w in a.warnings)
    assert {w["turns"] for w in a.other_windings} | {a.turns} == {1, 2, 8}
    # the loss peak of the simulated core, found by brute force on its µ(f)
    assert a.loss_peak.frequency_Hz == pytest.approx(CORE.peak_Hz(), rel=0.15)
    assert a.model.name in (RESONANCE, SUM)


@pytest.mark.parametrize("lead_nH", [20.0, 40.0])
def test_lead_inductance_from_a_two_turn_count_pair(lead_nH):
    # both windings measured after the same calibration, as on the bench
    leads = Leads(lead_nH * 1e-9, 0.03)
    rng = np.random.default_rng(int(lead_nH))
    cals = [Calibration.random(rng), Calibration.random(rng)]
    pair = []
    for n, seed in ((1, 21), (2, 22)):
        f, z, _, _ = _sweep(CORE, n, seed + int(lead_nH), leads=leads, cals=cals)
        pair.append((f, z, n))
    from rfmeas.fit.core_spectrum import _clean_input

    est = leads_from_turns([(*_clean_input(f, z, []), n) for f, z, n in pair])
    assert est.determined
    assert est.inductance_H == pytest.approx(leads.inductance_H, rel=0.15)
    assert abs(est.inductance_H - leads.inductance_H) <= 3 * est.inductance_stderr_H + 1e-9


def test_shorted_leads_sweep():
    rng = np.random.default_rng(5)
    cal = Calibration.random(rng)
    f = linear_grid(1010)
    z = LEADS.resistance_ohm + 2j * np.pi * f * LEADS.inductance_H
    est = leads_from_short(f, impedance(cal.apply(f, s11_of(f, z), rng)))
    assert est.determined and est.source == "shorted leads"
    assert est.inductance_H == pytest.approx(LEADS.inductance_H, rel=0.05)


def test_compensated_error_model_bounds_the_three_term_error():
    # The one-port three-term error model (common practice) with random hobby-grade residues:
    # the error left on Z − Zs after a short Zs swept with the same calibration stays within
    # the compensated error model, which is far smaller than the uncompensated one near a short.
    rng = np.random.default_rng(17)
    errors = VnaErrorModel()
    f = np.array([1e6])
    zs = np.array([0.05 + 0.2j])
    ratios, gains = [], []
    for z in (0.3 + 0.5j, 1.0 + 3.0j, 5.0 + 20.0j, 0.02 + 0.05j):
        z = np.array([z])
        bound = errors.sigma_impedance_compensated(z, zs)
        plain = errors.sigma_impedance(z)
        for _ in range(200):
            cal = Calibration.random(rng)
            zm = impedance(cal.apply(f, s11_of(f, z), rng, trace_noise=0.0))
            zsm = impedance(cal.apply(f, s11_of(f, zs), rng, trace_noise=0.0))
            ratios.append(float(abs((zm - zsm) - (z - zs))[0] / bound[0]))
        gains.append(float(plain[0] / bound[0]))
    assert max(ratios) <= 1.5
    assert np.median(ratios) > 0.2          # the bound is not vacuous
    assert gains[0] > 10 and gains[-1] > 30  # near a short most of the residue cancels
    assert errors.sigma_impedance_compensated(zs, zs)[0] == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("seed", range(4))
def test_swept_short_takes_off_the_calibration_residue_of_one_turn(seed):
    # One turn of µi 125 is a fraction of an ohm at the low end, comparable to the calibration
    # residue; the shorted leads swept with the same calibration take both off (short
    # compensation, common practice), so µi is read from the data's plateau, within 5 %.
    g = _geometry(CORE)
    f, z, cals, rng = _sweep(CORE, 1, 300 + seed)
    fs, s_short = measure(linear_grid(1010), LEADS.resistance_ohm + 2j * np.pi * linear_grid(1010) * LEADS.inductance_H,
                          cals, rng, segments=2)
    swept = analyze_core(f, z, 1, g, leads=leads_from_short(fs, impedance(s_short)))
    assert swept.initial_permeability == pytest.approx(CORE.mu_i, rel=0.05)
    assert swept.initial_permeability_source == "plateau"
    assert not swept.fit_is_poor
    assert swept.leads.short is not None
    assert abs(swept.initial_permeability - CORE.mu_i) <= 3 * swept.initial_permeability_stderr


@pytest.mark.parametrize("turns", [1, 2, 8])
def test_mu_i_within_5_percent_with_the_leads_known(turns):
    g = _geometry(CORE)
    rng = np.random.default_rng(40 + turns)
    cal = Calibration.random(rng)
    f0 = linear_grid(1010)
    short = impedance(cal.apply(f0, s11_of(f0, LEADS.resistance_ohm + 2j * np.pi * f0 * LEADS.inductance_H), rng))
    leads = leads_from_short(f0, short)
    f, z, _, _ = _sweep(CORE, turns, 50 + turns)
    a = analyze_core(f, z, turns, g, leads=leads)
    assert a.initial_permeability == pytest.approx(CORE.mu_i, rel=0.05)
    assert a.leads.source == "shorted leads"


def test_negative_low_impedance_points_and_100k_points():
    # a big linear sweep: at the low end |Z| < 0.5 Ω and R, X come out negative; the analysis
    # must not trust those points and must still read µi
    g = _geometry(CORE)
    f, z, _, _ = _sweep(CORE, 2, 7, points=100_000, segments=3)
    assert np.any(z.real[:50] < 0)
    a = analyze_core(f, z, 2, g, leads=given_leads(LEADS.inductance_H, LEADS.resistance_ohm))
    assert a.points == f.size - 2
    assert not a.trustworthy[0]
    assert a.model.points <= 60 * 4
    assert a.initial_permeability == pytest.approx(CORE.mu_i, rel=0.05)


def test_no_mu_pinned_at_a_bound_and_no_peak_outside_the_sweep():
    # a low-loss core whose µ'' peak lies far above 300 MHz: no peak frequency is reported
    core = Core(mu_i=40.0, resonance_share=0.5, f0_Hz=3e9, damping=1.0, fr_Hz=2e9)
    f, z, _, _ = _sweep(core, 8, 31)
    a = analyze_core(f, z, 8, _geometry(core), materials=load_materials(use_environment=False))
    assert a.loss_peak.frequency_Hz is None
    assert a.to_dict()["relaxation_frequency_Hz"]["value"] is None
    assert a.to_dict()["snoek_product_Hz"] is None
    for name, p in a.model.to_dict()["parameters"].items():
        if name.endswith("frequency_Hz") and not p["determined"]:
            assert p["value"] is None
    assert a.initial_permeability == pytest.approx(core.mu_i, rel=0.05)


def test_poor_fit_names_no_class_with_confidence():
    # two sharp resonances (Q ≈ 30) at 3 and 60 MHz in series with the winding, like the
    # dimensional resonances of a large conductive core: no model of the family follows them,
    # the misfit is far above the error model, and the class is not named with confidence
    f, z, _, _ = _sweep(CORE, 8, 61)
    w = 2 * np.pi * f
    extra = 0
    for f_res, l_res in ((3e6, 2e-6), (60e6, 0.2e-6)):
        c_res = 1 / ((2 * np.pi * f_res) ** 2 * l_res)
        r_res = 30 * 2 * np.pi * f_res * l_res
        extra = extra + 1 / (1 / (1j * w * l_res) + 1j * w * c_res + 1 / r_res)
    a = analyze_core(f, z + extra, 8, _geometry(CORE), materials=load_materials(use_environment=False))
    assert a.model.poor
    assert a.material_class is None or a.material_class.confidence_level != "likely"
    assert any("poor" in w for w in a.warnings)


# ------------------------------------------------------------------ readings and the command line

def test_lcr_readings_give_mu_and_al():
    # readings of the 8-turn winding at 10 kHz – 1 MHz, Ls/Rs without leads: µ' = Ls·C1/(µ0 N²)
    g = _geometry(CORE)
    f = np.array([10e3, 100e3, 1e6])
    z = winding_z(f, CORE, 8, Leads(0.0, 0.0), 2e-12, copper_ohm_per_turn=0.0)
    r = analyze_readings(f, z, 8, g, None)
    mu_true = CORE.mu(f)
    np.testing.assert_allclose(r.mu_real, mu_true.real, rtol=1e-3)
    assert r.initial_permeability == pytest.approx(CORE.mu_i, rel=0.01)
    assert r.inductance_factor_H_per_turn2[0] == pytest.approx(MU0 * mu_true.real[0] / CORE.c1_per_m, rel=1e-3)


@pytest.fixture(scope="module")
def pair_files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("pair")
    paths = []
    for n, seed in ((1, 71), (2, 72)):
        f, z, _, _ = _sweep(CORE, n, seed, segments=1)
        net = rf.Network(frequency=rf.Frequency.from_f(f, unit="Hz"), s=s11_of(f, z)[:, None, None], z0=50)
        path = folder / f"w{n}.s1p"
        write_touchstone(net, path)
        paths.append(path)
    return folder, paths


def test_cli_two_turn_counts_and_core_set_manifest(pair_files):
    folder, (p1, p2) = pair_files
    size = f"{CORE.od_mm},{CORE.id_mm},{CORE.h_mm}"
    result = CliRunner().invoke(app, ["core", str(p1), str(p2), "--turns", "1,2", "--toroid", size, "--json"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert doc["leads"]["source"] == "turn counts"
    assert doc["leads"]["inductance_H"]["value"] == pytest.approx(LEADS.inductance_H, rel=0.2)
    assert doc["initial_permeability"]["value"] == pytest.approx(CORE.mu_i, rel=0.05)
    (folder / "manifest.toml").write_text(
        'name = "drawer core"\n[core]\nshape = "toroid"\n'
        f'outer_diameter_mm = {CORE.od_mm}\ninner_diameter_mm = {CORE.id_mm}\nheight_mm = {CORE.h_mm}\n'
        '[[winding]]\nfile = "w1.s1p"\nturns = 1\n[[winding]]\nfile = "w2.s1p"\nturns = 2\n'
        '[vna]\ndirectivity_dB = -40\n')
    result = CliRunner().invoke(app, ["core", str(folder), "--json"])
    assert result.exit_code == 0, result.output
    assert json.loads(result.stdout)["leads"]["source"] == "turn counts"


def test_cli_errors_are_one_line(pair_files, tmp_path):
    folder, (p1, p2) = pair_files
    size = f"{CORE.od_mm},{CORE.id_mm},{CORE.h_mm}"
    result = CliRunner().invoke(app, ["core", str(p1), str(p2), "--turns", "1", "--toroid", size])
    assert result.exit_code == 2 and "turn count" in result.output
    bad = tmp_path / "manifest.toml"
    bad.write_text('[[winding]]\nfile = "w1.s1p"\nturns = 1\ncolour = "red"\n')
    result = CliRunner().invoke(app, ["core", str(bad), "--toroid", size])
    assert result.exit_code == 2 and "colour" in result.output
    result = CliRunner().invoke(app, ["core", str(p1), "--turns", "1", "--toroid", size, "--directivity", "3"])
    assert result.exit_code == 2


def test_cli_lcr_readings_alone(tmp_path):
    # Ls/Rs readings of the 8-turn winding written by the readings writer, read back by `core`
    from rfmeas.io.readings import write_readings

    f = np.array([10e3, 100e3, 1e6])
    z = winding_z(f, CORE, 8, Leads(0.0, 0.0), 2e-12, copper_ohm_per_turn=0.0)
    path = tmp_path / "lcr.csv"
    write_readings(path, f, z, "Ls_Rs")
    size = f"{CORE.od_mm},{CORE.id_mm},{CORE.h_mm}"
    result = CliRunner().invoke(app, ["core", "--readings", str(path), "--turns", "8", "--toroid", size, "--json"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert doc["initial_permeability"]["value"] == pytest.approx(CORE.mu_i, rel=0.01)
    # A_L = µ0·µ'/C1 (IEC 60205 with the ring's C1 written out in tests/reference/core_sweeps.py)
    al = doc["readings"][0]["inductance_factor_nH_per_turn2"] * 1e-9
    assert al == pytest.approx(MU0 * CORE.mu(f[:1]).real[0] / CORE.c1_per_m, rel=1e-3)
    result = CliRunner().invoke(app, ["core", "--readings", str(path), "--toroid", size])
    assert result.exit_code == 2 and "turns" in result.output


def test_seeded_population_of_cores_set_analysis():
    # A small seeded population (µi 40–5000, resonance plus relaxation, 1, 2 and 8 turns through
    # the same leads and calibration, linear stitched grids): the turn-count analysis must land
    # µi within 5 % on nearly all and never be far off. The larger run with its figures is
    # tests/bench/test_core_population.py.
    from tests.bench.test_core_population import simulate_core

    rng = np.random.default_rng(7)
    errors = []
    for _ in range(6):
        core, leads, windings, _short = simulate_core(rng)
        a = analyze_core_windings(windings, _geometry(core))
        errors.append(a.initial_permeability / core.mu_i - 1)
    errors = np.abs(errors)
    assert np.sum(errors <= 0.05) >= 5, errors
    assert np.all(errors <= 0.15), errors


def test_cli_shorted_leads_file(pair_files, tmp_path):
    # the leads swept shorted after the same kind of calibration, given with --leads-short
    folder, (p1, _) = pair_files
    rng = np.random.default_rng(9)
    cal = Calibration.random(rng)
    f = linear_grid(1010)
    s = cal.apply(f, s11_of(f, LEADS.resistance_ohm + 2j * np.pi * f * LEADS.inductance_H), rng)
    short = tmp_path / "short.s1p"
    write_touchstone(rf.Network(frequency=rf.Frequency.from_f(f, unit="Hz"), s=s[:, None, None], z0=50), short)
    size = f"{CORE.od_mm},{CORE.id_mm},{CORE.h_mm}"
    result = CliRunner().invoke(app, ["core", str(p1), "--turns", "1", "--toroid", size, "--leads-short", str(short),
                                      "--json"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert doc["leads"]["source"] == "shorted leads"
    assert doc["leads"]["inductance_H"]["value"] == pytest.approx(LEADS.inductance_H, rel=0.05)
    result = CliRunner().invoke(app, ["core", str(p1), "--turns", "1", "--toroid", size, "--leads-short", str(short),
                                      "--lead-inductance", "30n"])
    assert result.exit_code == 2


def test_rod_reports_the_material_permeability():
    # a rod shows the apparent µ; the material's µ follows from Nd (rfmeas.magnetics.geometry,
    # prolate spheroid of the same length/diameter): µ = µapp(1 − Nd)/(1 − Nd·µapp)
    from rfmeas.magnetics.geometry import rod_geometry

    g = rod_geometry(10.0, 80.0)
    nd = g.demagnetising_factor
    mu_app = 20.0
    core = Core(mu_i=mu_app, resonance_share=0.5, f0_Hz=2e9, damping=1.0, fr_Hz=2e9)
    f = linear_grid(1010)
    w = 2 * np.pi * f
    z = 1j * w * core.mu(f) * MU0 * 20**2 / g.core_constant_per_m
    a = analyze_core(f, z, 20, g)
    doc = a.to_dict()["material_permeability"]
    assert a.initial_permeability == pytest.approx(mu_app, rel=0.02)
    assert doc["value"] == pytest.approx(a.initial_permeability * (1 - nd) / (1 - nd * a.initial_permeability),
                                         rel=1e-9)


def test_a_series_inductance_one_sweep_needs_is_kept_not_dropped(monkeypatch):
    # Two turns (about 3 µH) on a µi 1270 core through 26 nH of leads, 100 kHz–300 MHz: the
    # one sweep does not resolve the lead inductance, yet the model without it misses the data
    # (µ falls, the lead does not). Kept at its fitted value, µi stays within 5 %; dropping it
    # (the old rule, forced here) put µi 15–18 % high on some calibration draws.
    core = Core(1270.0, 0.42, 6.05e6, 1.52, 6.45e6, od_mm=19.0, id_mm=11.6, h_mm=5.9)
    g = _geometry(core)
    kept = []
    for seed in range(4):
        rng = np.random.default_rng(seed)
        cals = [Calibration.random(rng), Calibration.random(rng)]
        f = linear_grid(1010, f_lo=100e3)
        fm, s = measure(f, winding_z(f, core, 2, Leads(26e-9, 0.05), 1.2e-12), cals, rng, segments=2,
                        trace_noise=3e-3)
        a = analyze_core(fm, impedance(s), 2, g)
        assert a.initial_permeability == pytest.approx(core.mu_i, rel=0.05)
        assert a.leads.source == "single sweep"
        if not a.leads.determined:
            kept.append((fm, impedance(s)))
            assert "not resolve" in a.leads.note
    assert kept, "no draw needed the unresolved series inductance"
    monkeypatch.setattr("rfmeas.fit.core_spectrum.SERIES_INDUCTANCE_BIC", math.inf)
    dropped = analyze_core(*kept[0], 2, g)
    assert abs(dropped.initial_permeability / core.mu_i - 1) > 0.10
