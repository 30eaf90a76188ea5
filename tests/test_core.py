"""Core identification: geometry and permeability against published numbers, and µ(f) recovered
from windings simulated with scikit-rf (the relaxation formula written out here, not rfmeas's)."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import skrf as rf
from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.fit.core_spectrum import analyze_core, analyze_core_file, permeability_from_impedance
from rfmeas.errors import InputError
from rfmeas.io.touchstone import write_touchstone
from rfmeas.magnetics import toroid_geometry
from rfmeas.magnetics.materials import load_materials, match_material

MM = 1e-3
MU0 = 4e-7 * math.pi * (1 + 5.5e-10)  # CODATA 2018 µ0 = 1.25663706212e-6 H/m, written out here


# ------------------------------------------------------------------ independent simulation

def debye_mu(f_Hz, mu_i, fr_Hz):
    """Single relaxation µ = 1 + (µi − 1)/(1 + j f/fr), µ' − jµ'' (Debye form; project references)."""
    return 1 + (mu_i - 1) / (1 + 1j * f_Hz / fr_Hz)


def cole_cole_mu(f_Hz, mu_i, fr_Hz, alpha):
    """Cole–Cole broadened relaxation µ = 1 + (µi − 1)/(1 + (j f/fr)^(1−α))."""
    return 1 + (mu_i - 1) / (1 + (1j * f_Hz / fr_Hz) ** (1 - alpha))


def ring_core_constant_per_m(od_mm, id_mm, h_mm):
    """C1 = 2π/(h·ln(r2/r1)) (IEC 60205 ring core), metres."""
    return 2 * math.pi / (h_mm * MM * math.log(od_mm / id_mm))


def winding_network(f_Hz, mu, turns, c1_per_m, rw_ohm, cw_F):
    """The winding as a scikit-rf one-port: Rw in series with (jωL(f) ∥ Cw), L = µ·µ0·N²/C1."""
    freq = rf.Frequency.from_f(f_Hz, unit="Hz")
    w = 2 * np.pi * f_Hz
    zl = 1j * w * mu * MU0 * turns**2 / c1_per_m
    inductor = rf.Network.from_z(zl[:, None, None], frequency=freq, z0=50)
    capacitor = rf.Network.from_z((1 / (1j * w * cw_F))[:, None, None], frequency=freq, z0=50)
    resistor = rf.Network.from_z(np.full((f_Hz.size, 1, 1), rw_ohm, dtype=complex), frequency=freq, z0=50)
    # parallel: add admittances; series: add impedances (scikit-rf's own conversions)
    parallel = rf.Network.from_z(1 / (inductor.y + capacitor.y), frequency=freq, z0=50)
    return rf.Network.from_z(parallel.z + resistor.z, frequency=freq, z0=50)


def vna_noise(network, seed, floor=1e-4, relative=2e-3):
    """Complex Gaussian noise on S, σ = sqrt(floor² + (relative·|S|)²) (typical small VNA, from memory)."""
    rng = np.random.default_rng(seed)
    s = network.s.copy()
    sigma = np.hypot(floor, relative * np.abs(s)) / math.sqrt(2)
    s = s + sigma * (rng.normal(size=s.shape) + 1j * rng.normal(size=s.shape))
    return rf.Network(frequency=network.frequency, s=s, z0=50)


NIZN = dict(turns=8, core=(61.0, 35.55, 12.7), mu_i=800.0, fr_Hz=3e6, rw=0.05, cw=4e-12,
            f=np.geomspace(100e3, 100e6, 401))
MNZN = dict(turns=3, core=(12.7, 7.1, 4.9), mu_i=5000.0, fr_Hz=600e3, rw=0.02, cw=2e-12,
            f=np.geomspace(10e3, 30e6, 401))


def simulate(case, seed=1, mu=None):
    f = case["f"]
    mu = debye_mu(f, case["mu_i"], case["fr_Hz"]) if mu is None else mu
    net = winding_network(f, mu, case["turns"], ring_core_constant_per_m(*case["core"]), case["rw"], case["cw"])
    return vna_noise(net, seed)


@pytest.fixture(scope="module")
def nizn(tmp_path_factory):
    path = tmp_path_factory.mktemp("nizn") / "winding.s1p"
    write_touchstone(simulate(NIZN), path)
    return path, analyze_core_file(path, turns=NIZN["turns"], geometry=toroid_geometry(*NIZN["core"]))


@pytest.fixture(scope="module")
def mnzn(tmp_path_factory):
    path = tmp_path_factory.mktemp("mnzn") / "winding.s1p"
    write_touchstone(simulate(MNZN, seed=2), path)
    return path, analyze_core_file(path, turns=MNZN["turns"], geometry=toroid_geometry(*MNZN["core"]),
                                   dc_resistance="conductive")


# ------------------------------------------------------------------ published numbers

def test_iec60205_toroid_effective_parameters():
    # IEC 60205 ring-core formulas; worked example of the 61.0 / 35.55 / 12.7 mm toroid
    # (owenduffy.net/blog/?p=20040 gives ΣA/l = (h/2π)·ln(OD/ID) = 1.0914 mm) [derived]:
    # C1 = 1/1.0914 mm = 0.91630 mm⁻¹; le = 2π·ln(r2/r1)/(1/r1 − 1/r2)
    #   = 2π·0.53984/(1/17.775 − 1/30.5) = 3.39187/0.023472 = 144.5 mm; Ae = le/C1 = 157.7 mm².
    g = toroid_geometry(61.0, 35.55, 12.7)
    assert 12.7 / (2 * math.pi) * math.log(61.0 / 35.55) == pytest.approx(1.0914, abs=1e-4)
    assert g.core_constant_per_m * MM == pytest.approx(0.91630, rel=1e-4)
    assert g.effective_length_m / MM == pytest.approx(144.5, abs=0.05)
    assert g.effective_area_m2 / MM**2 == pytest.approx(157.7, abs=0.05)


def test_single_winding_permeability_worked_example():
    # owenduffy.net/blog/?p=11856: one turn on the 61.0/35.55/12.7 mm NiZn toroid, Z = 13.6 + j19.1 Ω,
    # µr = 313 − j223. The post says 7.31 MHz, but its L values (0.429 − j0.305 µH) fit 7.1 MHz.
    g = toroid_geometry(61.0, 35.55, 12.7)
    mu = permeability_from_impedance(7.1e6, 13.6 + 19.1j, 1, g)
    assert mu.real == pytest.approx(313, rel=0.01)
    assert -mu.imag == pytest.approx(223, rel=0.01)


# ------------------------------------------------------------------ recovery from simulated sweeps

def test_nizn_winding_recovered(nizn):
    _, a = nizn
    assert a.initial_permeability == pytest.approx(NIZN["mu_i"], rel=0.03)
    assert a.initial_permeability_source == "plateau"
    # µ'' of a single relaxation peaks at fr (project references)
    assert a.relaxation_frequency_Hz == pytest.approx(NIZN["fr_Hz"], rel=0.10)
    assert a.model.winding_capacitance_F == pytest.approx(NIZN["cw"], rel=0.10)
    # 8 turns on this core are hundreds of ohms above 1 MHz, where the error model's reflection
    # resolution falls below 10 %: the band starts at the sweep's start and ends before fr
    band = a.trustworthy_band_Hz
    assert band is not None and band[0] == pytest.approx(NIZN["f"][0]) and band[1] < NIZN["fr_Hz"]


def test_mnzn_winding_recovered_and_classed(mnzn):
    _, a = mnzn
    assert a.initial_permeability == pytest.approx(MNZN["mu_i"], rel=0.03)
    assert a.relaxation_frequency_Hz == pytest.approx(MNZN["fr_Hz"], rel=0.10)
    assert a.material_class.best.material.family == "MnZn"


def test_spectrum_uncertainty_covers_the_truth(nizn):
    # The stated uncertainty is the VNA error model's size (systematic), so the deviations of the
    # measured µ from the simulated truth inside the trustworthy band must stay within it.
    _, a = nizn
    truth = debye_mu(a.f_Hz, NIZN["mu_i"], NIZN["fr_Hz"])
    t = a.trustworthy
    dev = np.hypot(a.mu_real[t] - truth.real[t], a.mu_imag[t] + truth.imag[t])
    bound = np.hypot(a.mu_real_stderr[t], a.mu_imag_stderr[t])
    assert np.mean(dev <= 2 * bound) >= 0.95
    # and it is not absurdly wide: a tenth of |µ| at most (the trust threshold), against the truth
    assert np.all(bound <= 0.2 * np.abs(truth[t]))


def test_few_ohm_points_are_not_trusted(tmp_path):
    # One turn on a MnZn core: |Z| is far below 50 Ω at the low end, so reflection resolves it poorly
    # (relative uncertainty ≈ |Z + Z0|²/(2 Z0)·σ/|Z|, project references).
    case = dict(MNZN, turns=1)
    path = tmp_path / "one_turn.s1p"
    write_touchstone(simulate(case, seed=3), path)
    a = analyze_core_file(path, turns=1, geometry=toroid_geometry(*case["core"]))
    z = a.model_impedance(a.f_Hz)
    assert np.abs(z[0]) < 1.0
    assert not a.trustworthy[0]
    assert a.trustworthy_band_Hz[0] > case["f"][0]
    assert a.relaxation_frequency_Hz == pytest.approx(case["fr_Hz"], rel=0.10)


def test_series_through_two_port(tmp_path):
    # The winding in series between two ports, S from scikit-rf's ABCD → S conversion of [[1, Z], [0, 1]].
    case = MNZN
    one_port = winding_network(case["f"], debye_mu(case["f"], case["mu_i"], case["fr_Hz"]), case["turns"],
                               ring_core_constant_per_m(*case["core"]), case["rw"], case["cw"])
    abcd = np.zeros((case["f"].size, 2, 2), dtype=complex)
    abcd[:, 0, 0] = abcd[:, 1, 1] = 1
    abcd[:, 0, 1] = one_port.z[:, 0, 0]
    path = tmp_path / "series.s2p"
    write_touchstone(vna_noise(rf.Network(frequency=one_port.frequency, a=abcd, z0=50), seed=5), path)
    a = analyze_core_file(path, turns=case["turns"], geometry=toroid_geometry(*case["core"]),
                          method="series-through")
    assert a.method == "series-through"
    assert a.initial_permeability == pytest.approx(case["mu_i"], rel=0.03)
    assert a.relaxation_frequency_Hz == pytest.approx(case["fr_Hz"], rel=0.10)


@pytest.mark.parametrize("kind", ["exact copy", "same frequency, other values"])
def test_duplicated_frequency_point_still_analyses(tmp_path, kind):
    path = tmp_path / "dup.s1p"
    write_touchstone(simulate(NIZN, seed=6), path)
    lines = path.read_text().splitlines()
    data = [i for i, line in enumerate(lines) if line and line[0].isdigit()]
    k = data[100]
    copy = lines[k] if kind == "exact copy" else " ".join(lines[k].split()[:1] + ["0.1", "0.2"])
    lines.insert(k + 1, copy)
    path.write_text("\n".join(lines) + "\n")
    a = analyze_core_file(path, turns=NIZN["turns"], geometry=toroid_geometry(*NIZN["core"]))
    assert a.points == NIZN["f"].size
    assert any("duplicate" in w or "repeated" in w for w in a.warnings)
    assert a.initial_permeability == pytest.approx(NIZN["mu_i"], rel=0.03)


def test_pure_function_drops_repeated_frequencies():
    case = NIZN
    net = simulate(case, seed=7)
    f = np.insert(net.f, 50, net.f[50])
    z = np.insert(net.z[:, 0, 0], 50, 0.5 * net.z[50, 0, 0])
    a = analyze_core(f, z, case["turns"], toroid_geometry(*case["core"]))
    assert a.points == net.f.size
    assert any("repeated" in w for w in a.warnings)


def test_bad_inputs_raise_input_error(tmp_path):
    g = toroid_geometry(*NIZN["core"])
    with pytest.raises(InputError):
        analyze_core([1e6, 2e6], [1 + 1j, 2 + 2j], 3, g)
    with pytest.raises(InputError):
        analyze_core(NIZN["f"], np.ones(NIZN["f"].size), 0, g)
    with pytest.raises(InputError):
        analyze_core(NIZN["f"], np.ones(NIZN["f"].size), 3, g, method="transmission")
    path = tmp_path / "w.s1p"
    write_touchstone(simulate(NIZN), path)
    with pytest.raises(InputError, match="two-port"):
        analyze_core_file(path, turns=3, geometry=g, method="shunt-through")
    with pytest.raises(InputError, match="turns"):
        analyze_core_file(path, geometry=g)


# ------------------------------------------------------------------ material classes

def test_dc_resistance_hint_separates_neighbouring_classes():
    table = load_materials(use_environment=False)
    # between the NiZn µi ≈ 800 and MnZn µi ≈ 2000 classes: the ohmmeter decides
    insulating = match_material(table, 1300, 20, 2.0e6, 1e5, "insulating")
    conductive = match_material(table, 1300, 20, 2.0e6, 1e5, "conductive")
    assert insulating.best.material.family == "NiZn"
    assert conductive.best.material.family == "MnZn"
    assert len(insulating.alternatives) == 3


def test_far_off_core_is_a_poor_match():
    table = load_materials(use_environment=False)
    match = match_material(table, 1.3, 0.01, 1e3, 10, None)  # nearly air, relaxing at 1 kHz
    assert match.confidence_level == "poor match"
    assert match.confidence <= 1


def test_user_table_extends_and_is_strict(tmp_path, monkeypatch):
    extra = tmp_path / "mine.toml"
    extra.write_text('[[class]]\nid = "my-ferrite"\nname = "bench ferrite, µi ≈ 1500"\nfamily = "NiZn"\n'
                     'initial_permeability = [1400, 1600]\nrelaxation_frequency_Hz = [1.5e6, 2.5e6]\n'
                     'resistivity = "insulating"\nsource = "measured on the bench"\n')
    monkeypatch.setenv("RFMEAS_MATERIALS", str(extra))
    table = load_materials()
    assert "my-ferrite" in [c.id for c in table.classes]
    assert match_material(table, 1500, 10, 2e6, 1e5).best.material.id == "my-ferrite"
    bad = tmp_path / "bad.toml"
    bad.write_text('[[class]]\nid = "x"\nname = "x"\nfamily = "NiZn"\ninitial_permeability = [1, 2]\n'
                   'relaxation_frequency_Hz = [1, 2]\nresistivity = "insulating"\nsource = ""\ncolour = "red"\n')
    with pytest.raises(InputError) as info:
        load_materials(bad)
    assert "colour" in str(info.value) and "bad.toml" in str(info.value)


# ------------------------------------------------------------------ plot

def test_plot_draws_the_model_and_the_data(nizn, tmp_path):
    from rfmeas.present.plots.permeability import plot_permeability

    _, a = nizn
    fig = plot_permeability(a)
    lines = {line.get_gid(): line for line in fig.axes[0].get_lines() if line.get_gid()}
    model_f = lines["model-real"].get_xdata()
    mu = a.model_permeability(model_f)
    np.testing.assert_allclose(lines["model-real"].get_ydata(), mu.real, rtol=1e-12)
    np.testing.assert_allclose(lines["model-imag"].get_ydata(), -mu.imag, rtol=1e-12)
    np.testing.assert_allclose(lines["measured-real"].get_xdata(), a.f_Hz)
    np.testing.assert_allclose(lines["measured-real"].get_ydata(), a.mu_real)
    assert fig.axes[0].get_xscale() == "log" and fig.axes[0].get_yscale() == "log"
    out = tmp_path / "mu.png"
    plot_permeability(a, out)
    assert out.read_bytes()[:4] == b"\x89PNG"


# ------------------------------------------------------------------ command line

def test_cli_json_keys(nizn):
    path, _ = nizn
    result = CliRunner().invoke(app, ["core", str(path), "--turns", "8", "--toroid", "61,35.55,12.7",
                                      "--json", "--loss-at", "1M,20M"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    for key in ("initial_permeability", "relaxation_frequency_Hz", "loss_factor", "relaxation_model",
                "material_class", "spectrum", "trustworthy_band", "warnings"):
        assert key in doc
    assert set(doc["material_class"]) >= {"best", "alternatives", "confidence"}
    assert doc["material_class"]["best"]["family"] == "NiZn"
    assert set(doc["spectrum"]) == {"frequency_Hz", "mu_real", "mu_imag", "mu_real_stderr",
                                    "mu_imag_stderr", "trustworthy"}
    assert [p["frequency_Hz"] for p in doc["loss_factor"]] == [1e6, 20e6]
    assert doc["initial_permeability"]["value"] == pytest.approx(NIZN["mu_i"], rel=0.03)
    # tan δ/µi at 1 MHz against the Debye formula above: tan δ = µ''/µ'
    mu = debye_mu(1e6, NIZN["mu_i"], NIZN["fr_Hz"])
    assert doc["loss_factor"][0]["tan_delta_over_mu"] == pytest.approx(-mu.imag / mu.real / NIZN["mu_i"], rel=0.05)
    assert doc["loss_factor"][1]["trustworthy"] is False  # 20 MHz is above the self-resonance
    assert doc["initial_permeability"]["source"] == "plateau"
    assert doc["dispersion_model"]["criterion"] == "BIC"
    assert set(doc["dispersion_model"]["comparison"]) == {"relaxation", "resonance", "resonance + relaxation"}


def test_cli_manifest_and_table_output(nizn, tmp_path):
    path, _ = nizn
    (tmp_path / "w.s1p").write_bytes(path.read_bytes())
    (tmp_path / "manifest.toml").write_text(
        '[transformer]\nname = "unknown ring"\nprimary_turns = 8\n'
        '[core]\nshape = "toroid"\nouter_diameter_mm = 61.0\ninner_diameter_mm = 35.55\nheight_mm = 12.7\n'
        '[[sweep]]\nfile = "w.s1p"\nport1 = "primary"\ntermination = "open"\n')
    result = CliRunner().invoke(app, ["core", str(tmp_path), "--plot", str(tmp_path / "mu.svg")])
    assert result.exit_code == 0, result.output
    assert "NiZn ferrite" in result.stdout
    assert "initial permeability" in result.stdout
    assert (tmp_path / "mu.svg").is_file()


def test_cli_bad_input_is_one_line(nizn):
    path, _ = nizn
    result = CliRunner().invoke(app, ["core", str(path), "--turns", "8", "--toroid", "61,35.55"])
    assert result.exit_code == 2
    assert "--toroid" in result.output
    result = CliRunner().invoke(app, ["core", str(path), "--toroid", "61,35.55,12.7"])
    assert result.exit_code == 2
    assert "turns" in result.output
