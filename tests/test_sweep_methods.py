"""Sweeps taken through a test jig or with a two-port impedance method fit like plain reflections.

The jig and the through-methods are built with scikit-rf (cascades of its media
and circuit elements), the winding with scikit-rf's circuit solver
(tests/reference/skrf_circuit.py): nothing here uses rfmeas's own forward models.
"""

from __future__ import annotations

import importlib.util
import shutil
from pathlib import Path

import numpy as np
import pytest
import skrf as rf
from skrf.circuit import Circuit

from fitting_helpers import REFERENCE_CIRCUIT, add_vna_noise
from reference import OnePort, TwoPort
from reference.skrf_circuit import simulate_skrf
from rfmeas.analysis import analyze_manifest
from rfmeas.errors import InputError
from rfmeas.io.touchstone import read_touchstone, write_touchstone
from rfmeas.model import TransformerParams

ROOT = Path(__file__).resolve().parents[1]
TRUE = TransformerParams(**REFERENCE_CIRCUIT)


def _make_fixtures_module():
    spec = importlib.util.spec_from_file_location("make_fixtures", ROOT / "scripts" / "make_fixtures.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _manifest(folder: Path, sweeps: list[dict]) -> Path:
    lines = ['[transformer]', 'name = "jig test"', '']
    for entry in sweeps:
        lines.append("[[sweep]]")
        for key, value in entry.items():
            lines.append(f'{key} = {value!r}'.replace("'", '"') if isinstance(value, str) else f"{key} = {value}")
        lines.append("")
    path = folder / "manifest.toml"
    path.write_text("\n".join(lines))
    return path


def _write(folder: Path, name: str, f_Hz, s, z0=50.0):
    s = np.asarray(s)
    shape = (-1, 1, 1) if s.ndim == 1 else s.shape
    write_touchstone(rf.Network(frequency=rf.Frequency.from_f(f_Hz, unit="Hz"), s=s.reshape(shape), z0=z0),
                     folder / name)


def test_sweeps_through_the_clip_lead_jig_are_compensated(tmp_path):
    make = _make_fixtures_module()
    shutil.copytree(ROOT / "fixtures" / "clip-leads", tmp_path / "clip-leads")
    f = read_touchstone(tmp_path / "clip-leads" / "open.s1p").network.f  # the standards' own grid
    band = (f >= 1e5) & (f <= 1e8)
    freq = rf.Frequency.from_f(f, unit="Hz")
    jig, _medium = make.clip_leads_jig(freq)
    rng = np.random.default_rng(11)
    entries = []
    for name, desc in (("pri_open", OnePort("primary", "open")), ("pri_short", OnePort("primary", "short")),
                       ("sec_open", OnePort("secondary", "open"))):
        gamma = np.ones(f.size, complex)
        gamma[band] = simulate_skrf(TRUE, f[band], desc)
        dut = rf.Network(frequency=freq, s=gamma.reshape(-1, 1, 1), z0=50)
        at_vna = add_vna_noise((jig ** dut).s[:, 0, 0], 3e-4, rng)[band]
        _write(tmp_path, f"{name}.s1p", f[band], at_vna)
        entries.append({"file": f"{name}.s1p", "port1": desc.port1, "termination": desc.termination,
                        "fixture": "clip-leads"})
    analysis = analyze_manifest(_manifest(tmp_path, entries))
    p = analysis.to_dict()["parameters"]
    assert p["primary_inductance_H"]["value"] == pytest.approx(TRUE.L1_H, rel=0.01)
    assert p["secondary_inductance_H"]["value"] == pytest.approx(TRUE.L2_H, rel=0.01)
    assert p["leakage_inductance_H"]["value"] == pytest.approx(TRUE.leakage_inductance_H, rel=0.01)
    assert any("compensated for the test jig" in w for w in analysis.to_dict()["warnings"])

    # the same files without compensation: the jig's 30 nH lead inductance and 2 pF spoil the leakage
    for e in entries:
        del e["fixture"]
    raw = analyze_manifest(_manifest(tmp_path, entries)).to_dict()["parameters"]
    leakage = raw["leakage_inductance_H"]["value"]
    assert leakage is None or abs(leakage / TRUE.leakage_inductance_H - 1) > 0.05


@pytest.mark.parametrize("method", ["series-through", "shunt-through"])
def test_two_port_impedance_methods_fit_the_winding(tmp_path, method):
    f = np.logspace(5, 8, 301)
    freq = rf.Frequency.from_f(f, unit="Hz")
    rng = np.random.default_rng(12)
    entries = []
    for name, desc in (("pri_open", OnePort("primary", "open")), ("pri_short", OnePort("primary", "short"))):
        gamma = simulate_skrf(TRUE, f, desc)
        z = 50 * (1 + gamma) / (1 - gamma)
        if method == "series-through":
            element = Circuit.SeriesImpedance(freq, Z=z, name="winding", z0=50)
        else:
            element = Circuit.ShuntAdmittance(freq, Y=1 / z, name="winding", z0=50)
        s = add_vna_noise(element.s, 1e-3, rng)
        _write(tmp_path, f"{name}.s2p", f, s)
        entries.append({"file": f"{name}.s2p", "port1": "primary", "termination": desc.termination,
                        "method": method})
    s = add_vna_noise(simulate_skrf(TRUE, f, TwoPort("primary")), 1e-3, rng)
    _write(tmp_path, "thru.s2p", f, s)
    entries.append({"file": "thru.s2p", "port1": "primary", "port2": "secondary"})
    analysis = analyze_manifest(_manifest(tmp_path, entries))
    p = analysis.to_dict()["parameters"]
    assert p["primary_inductance_H"]["value"] == pytest.approx(TRUE.L1_H, rel=0.01)
    assert p["leakage_inductance_H"]["value"] == pytest.approx(TRUE.leakage_inductance_H, rel=0.01)
    assert p["effective_turns_ratio"]["value"] == pytest.approx(TRUE.effective_turns_ratio, rel=0.01)


def test_method_and_fixture_misuse_is_refused(tmp_path):
    f = np.logspace(5, 7, 11)
    _write(tmp_path, "one.s1p", f, np.full(f.size, 0.5 + 0j))
    bad = [
        ({"file": "one.s1p", "port1": "primary", "termination": "open", "method": "series-through"},
         "two-port file"),
        ({"file": "one.s1p", "port1": "primary", "termination": "open", "method": "sideways"},
         "method must be one of"),
        ({"file": "one.s1p", "port1": "primary", "termination": "open", "fixture": 3}, "fixture must be"),
    ]
    for entry, message in bad:
        with pytest.raises(InputError, match=message) as info:
            analyze_manifest(_manifest(tmp_path, [entry]))
        assert "manifest.toml" in str(info.value)


def test_a_shorted_winding_measured_series_through_is_not_taken_for_an_open_lead(tmp_path):
    """Series-through S21 of a few-ohm winding is close to 1, which as an S11 would read 'open':
    the checks and the plots convert each method's S parameter to the winding impedance first."""
    from rfmeas.model import input_impedance
    from rfmeas.present.plots.sweeps import plot_sweep
    from rfmeas.present.plots.style import close

    f = np.logspace(5, 8, 201)
    freq = rf.Frequency.from_f(f, unit="Hz")
    z = input_impedance(TRUE, f, "primary", "short")
    element = Circuit.SeriesImpedance(freq, Z=z, name="winding", z0=50)
    _write(tmp_path, "pri_short.s2p", f, add_vna_noise(element.s, 1e-4, np.random.default_rng(13)))
    gamma = simulate_skrf(TRUE, f, OnePort("primary", "open"))
    _write(tmp_path, "pri_open.s1p", f, add_vna_noise(gamma, 1e-3, np.random.default_rng(14)))
    analysis = analyze_manifest(_manifest(tmp_path, [
        {"file": "pri_open.s1p", "port1": "primary", "termination": "open"},
        {"file": "pri_short.s2p", "port1": "primary", "termination": "short", "method": "series-through"}]))
    assert not any("open circuit" in w or "left out" in w for w in analysis.warnings)
    fig = plot_sweep(analysis, 1)
    drawn = [line for line in fig.axes[0].lines if (line.get_gid() or "").startswith("data")]
    np.testing.assert_allclose(drawn[0].get_ydata(), np.abs(z), rtol=0.15)  # 1e-4 noise on 0.2 Ω
    close(fig)
