"""Jig compensation: a known DUT seen through a simulated jig (scikit-rf cascade) is recovered."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest
import skrf as rf
from skrf.media import DefinedGammaZ0

from rfmeas.errors import InputError
from rfmeas.measurement.fixture import load_fixture
from rfmeas.model import TransformerParams, input_impedance

ROOT = Path(__file__).resolve().parent.parent
FIXTURES = ROOT / "fixtures"


def _load_script():
    spec = importlib.util.spec_from_file_location("make_fixtures", ROOT / "scripts" / "make_fixtures.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


MAKE = _load_script()

# An invented winding: 12 uH open-circuit primary with its capacitances (reaches 10 kOhm
# near resonance), plus plain resistors of 1, 50 and 10k ohm.
WINDING = TransformerParams(L1_H=12e-6, L2_H=48e-6, k=0.985, R1_ohm=0.2, R2_ohm=0.8,
                            Rc_ohm=6e3, C1_F=4e-12, C2_F=3e-12, C12_F=2e-12)


def dut_impedances(f_Hz):
    return {"winding": input_impedance(WINDING, f_Hz, "primary", "open"),
            "1 ohm": np.full(f_Hz.shape, 1.0 + 0j), "50 ohm": np.full(f_Hz.shape, 50.0 + 0j),
            "10k ohm": np.full(f_Hz.shape, 1e4 + 0j)}


def through_jig(jig: rf.Network, z_dut) -> np.ndarray:
    """S11 at the VNA: scikit-rf cascade of the jig two-port with the DUT one-port."""
    dut = rf.Network(frequency=jig.frequency, s=((z_dut - 50) / (z_dut + 50)).reshape(-1, 1, 1), z0=50)
    return (jig ** dut).s[:, 0, 0]


def test_shipped_standards_are_what_the_script_writes(tmp_path):
    written = MAKE.main(tmp_path)
    for new in written:
        shipped = rf.Network(str(FIXTURES / "clip-leads" / new.name))
        np.testing.assert_allclose(rf.Network(str(new)).s, shipped.s, rtol=0, atol=1e-13)


@pytest.mark.parametrize("grid", ["standards grid", "other grid"])
def test_clip_leads_open_short_load_recovers_dut(grid):
    # Reference: scikit-rf's cascade of the jig and the DUT (outside our code).
    fx = load_fixture(FIXTURES / "clip-leads" / "fixture.toml")
    assert fx.kind == "standards" and fx.standards.with_load
    if grid == "standards grid":
        frequency = MAKE.log_grid(*MAKE.CLIP_LEADS_GRID)
        tol = 1e-8
    else:  # a coarser DUT sweep between the standards' points: the error terms are interpolated
        frequency = rf.Frequency.from_f(np.linspace(50e3, 30e6, 97), unit="hz")
        tol = 1e-3  # seen 1.9e-4 (10 kOhm behind the 2 pF of the clips)
    jig, _ = MAKE.clip_leads_jig(frequency)
    f = frequency.f
    for label, z in dut_impedances(f).items():
        z_back = fx.compensate_impedance(f, _gamma_to_z(through_jig(jig, z)))
        rel = np.max(np.abs(z_back - z) / np.abs(z))
        assert rel < tol, f"{label}: max relative error {rel:.3g}"
        # the uncompensated reading is far off, so the test does test something
        if label != "50 ohm":
            raw = _gamma_to_z(through_jig(jig, z))
            assert np.max(np.abs(raw - z) / np.abs(z)) > 100 * tol


def _gamma_to_z(g, z0=50.0):
    return z0 * (1 + g) / (1 - g)


def test_open_short_only_exact_for_an_l_section_jig(tmp_path):
    # An L-section jig (series 40 nH + 0.1 ohm, then 3 pF across the clips) built with
    # scikit-rf; open/short compensation is exact for it (the model it assumes).
    frequency = MAKE.log_grid(10e3, 100e6, 201)
    medium = DefinedGammaZ0(frequency, z0=50, gamma=1j * frequency.w / 3e8)
    jig = medium.inductor(40e-9) ** medium.resistor(0.1) ** medium.shunt_capacitor(3e-12)
    MAKE.write_standards(tmp_path, {"open": jig ** medium.open(), "short": jig ** medium.short()})
    toml = tmp_path / "fixture.toml"
    toml.write_text('[standards]\nopen = "open.s1p"\nshort = "short.s1p"\n')
    fx = load_fixture(toml)
    assert not fx.standards.with_load and fx.name == tmp_path.name  # folder name by default
    f = frequency.f
    for label, z in dut_impedances(f).items():
        z_back = fx.compensate_impedance(f, _gamma_to_z(through_jig(jig, z)))
        assert np.max(np.abs(z_back - z) / np.abs(z)) < 1e-8, label


def test_sma_board_port_extension_recovers_dut():
    fx = load_fixture(FIXTURES / "sma-board" / "fixture.toml")
    assert fx.kind == "extension"
    assert fx.extension.delay_s == pytest.approx(120e-12)
    frequency = MAKE.log_grid(100e3, 1e9, 301)
    board = MAKE.sma_board_jig(frequency)
    # the board as scikit-rf models it: 0.05 dB one-way at 100 MHz (insertion loss of the line)
    i100 = np.argmin(np.abs(frequency.f - 100e6))
    expected_dB = 0.05 * np.sqrt(frequency.f[i100] / 100e6)
    assert -20 * np.log10(abs(board.s[i100, 1, 0])) == pytest.approx(expected_dB, rel=1e-9)
    f = frequency.f
    for label, z in dut_impedances(f).items():
        g_back = fx.compensate_reflection(f, through_jig(board, z))
        np.testing.assert_allclose(g_back, (z - 50) / (z + 50), atol=1e-12, err_msg=label)


def test_length_and_velocity_factor_equal_a_delay(tmp_path):
    toml = tmp_path / "line.toml"
    toml.write_text("[extension]\nlength_m = 0.024\nvelocity_factor = 0.667\n")
    fx = load_fixture(toml)
    # t = l / (vf c) = 0.024 / (0.667 * 299792458) = 120.02 ps [derived]
    assert fx.extension.delay_s == pytest.approx(120.02e-12, rel=1e-4)
    assert fx.extension.loss_dB == 0.0


def test_compensate_reflection_re_references_impedance():
    fx = load_fixture(FIXTURES / "clip-leads" / "fixture.toml")
    f = MAKE.log_grid(*MAKE.CLIP_LEADS_GRID).f
    jig, _ = MAKE.clip_leads_jig(MAKE.log_grid(*MAKE.CLIP_LEADS_GRID))
    z = dut_impedances(f)["winding"]
    g50 = through_jig(jig, z)
    zm = _gamma_to_z(g50)
    g75 = (zm - 75) / (zm + 75)
    out75 = fx.compensate_reflection(f, g75, z0_ohm=75)
    np.testing.assert_allclose(out75, (z - 75) / (z + 75), atol=1e-9)


def test_outside_the_standards_sweep_is_an_error():
    fx = load_fixture(FIXTURES / "clip-leads" / "fixture.toml")
    with pytest.raises(InputError, match="outside"):
        fx.compensate_reflection(np.array([1e3, 1e6]), np.zeros(2))
    with pytest.raises(InputError, match="reflection values"):
        fx.compensate_reflection(np.array([1e5, 1e6]), np.zeros(3))


# ---------------------------------------------------------------- strict loading

def _write(tmp_path, text, name="jig.toml"):
    p = tmp_path / name
    p.write_text(text)
    return p


def _copy_standards(tmp_path):
    for key in ("open", "short", "load"):
        (tmp_path / f"{key}.s1p").write_bytes((FIXTURES / "clip-leads" / f"{key}.s1p").read_bytes())


STD = '[standards]\nopen = "open.s1p"\nshort = "short.s1p"\n'


@pytest.mark.parametrize("text,match", [
    ('colour = "red"\n' + STD, "unknown key 'colour' in the fixture file"),
    ('[fixture]\nnmae = "x"\n' + STD, "unknown key 'nmae' in \\[fixture\\]"),
    (STD + 'lod = "load.s1p"\n', "unknown key 'lod' in \\[standards\\]"),
    ("[extension]\ndelay_s = 1e-10\nloss_db = 0.1\n", "unknown key 'loss_db' in \\[extension\\]"),
    (STD + "[extension]\ndelay_s = 1e-10\n", "exactly one"),
    ('[fixture]\nname = "x"\n', "exactly one"),
    ('[standards]\nopen = "open.s1p"\n', "needs 'short'"),
    (STD + 'load = "load.s1p"\n', "go together"),
    (STD + "load_ohm = 50\n", "go together"),
    (STD + 'load = "load.s1p"\nload_ohm = -5\n', "positive"),
    (STD + 'load = "load.s1p"\nload_ohm = "fifty"\n', "finite number"),
    ('[standards]\nopen = "open.s1p"\nshort = 3\n', "file name"),
    ("[extension]\ndelay_s = 1e-10\nlength_m = 0.02\nvelocity_factor = 0.7\n", "not both"),
    ("[extension]\nlength_m = 0.02\n", "needs"),
    ("[extension]\nlength_m = 0.02\nvelocity_factor = 1.5\n", "exceed 1"),
    ("[extension]\ndelay_s = 1e-10\nloss_dB = 0.1\n", "loss_frequency_Hz"),
    ("[extension]\ndelay_s = -1e-10\n", "zero or more"),
    ("[extension]\ndelay_s = true\n", "finite number"),
    ("extension = 3\n", "must be a table"),
    ("[extension\ndelay_s = 1\n", "not valid TOML"),
])
def test_strict_toml_errors(tmp_path, text, match):
    _copy_standards(tmp_path)
    path = _write(tmp_path, text)
    with pytest.raises(InputError, match=match) as info:
        load_fixture(path)
    assert info.value.path == str(path)


def test_standard_file_errors(tmp_path):
    _copy_standards(tmp_path)
    with pytest.raises(InputError, match="not found") as info:
        load_fixture(_write(tmp_path, '[standards]\nopen = "gone.s1p"\nshort = "short.s1p"\n'))
    assert info.value.path == str(tmp_path / "gone.s1p")
    (tmp_path / "bad.s1p").write_text("# Hz S RI R 50\n1e6 0.5 zero\n")
    with pytest.raises(InputError, match="where a number was expected") as info:
        load_fixture(_write(tmp_path, '[standards]\nopen = "bad.s1p"\nshort = "short.s1p"\n'))
    assert info.value.path == str(tmp_path / "bad.s1p")
    (tmp_path / "two.s2p").write_text("# Hz S RI R 50\n1e6 0 0 1 0 1 0 0 0\n2e6 0 0 1 0 1 0 0 0\n3e6 0 0 1 0 1 0 0 0\n")
    with pytest.raises(InputError, match="one-port"):
        load_fixture(_write(tmp_path, '[standards]\nopen = "two.s2p"\nshort = "short.s1p"\n'))
    (tmp_path / "nan.s1p").write_text("# Hz S RI R 50\n1e6 nan 0\n2e6 1 0\n")
    with pytest.raises(InputError, match="(?i)nan value"):
        load_fixture(_write(tmp_path, '[standards]\nopen = "nan.s1p"\nshort = "short.s1p"\n'))
    (tmp_path / "grid.s1p").write_text("# Hz S RI R 50\n1e6 -1 0\n2e6 -1 0\n3e6 -1 0\n")
    with pytest.raises(InputError, match="same frequency grid"):
        load_fixture(_write(tmp_path, '[standards]\nopen = "open.s1p"\nshort = "grid.s1p"\n'))
    with pytest.raises(InputError, match="told apart"):
        load_fixture(_write(tmp_path, '[standards]\nopen = "open.s1p"\nshort = "open.s1p"\n'
                                      'load = "load.s1p"\nload_ohm = 49.9\n'))
    with pytest.raises(InputError, match="not found"):
        load_fixture(tmp_path / "missing.toml")
