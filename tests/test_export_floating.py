"""The four-terminal (floating-secondary) SPICE subcircuit against ngspice and the model."""

from __future__ import annotations

import shutil
import subprocess

import numpy as np
import pytest

from reference.spice import read_rawfile

from rfmeas.model import TransformerParams, s_matrix
from rfmeas.present.export import spice_subcircuit

LOSSLESS = TransformerParams(L1_H=10e-6, L2_H=40e-6, k=0.99, R1_ohm=0.3, R2_ohm=1.2,
                             C1_F=3e-12, C2_F=2e-12, C12_F=1.5e-12)
LOSSY = LOSSLESS.replace(Rc_ohm=5e3)

# Test bench (REFERENCES.md, ngspice check): 2 V behind 50 ohm on one port, 50 ohm on the
# other, so S11 = V1 - 1 and S21 = V2 with every voltage taken against the port's low end.
# {pl} / {sl} are the nodes the primary's and the secondary's low ends sit on; {src} adds
# the sources that hold those nodes.
BENCH = """rfmeas floating export check
{sub}
VA a {pl} AC 2
RA a p1 50
XF p1 {pl} s1 {sl} XFMR
RB s1 {sl} 50
VB b {sl2} AC 2
RD b s2 50
XR p2 {pl2} s2 {sl2} XFMR
RE p2 {pl2} 50
{src}
.ac dec 40 10k 300meg
.end
"""

needs_spice = pytest.mark.skipif(shutil.which("ngspice") is None, reason="ngspice not installed")


def simulate(params, tmp_path, form, pl="0", sl="0", pl2="0", sl2="0", src=""):
    netlist = BENCH.format(sub=spice_subcircuit(params, name="XFMR", form=form, floating=True),
                           pl=pl, sl=sl, pl2=pl2, sl2=sl2, src=src)
    cir, raw = tmp_path / "bench.cir", tmp_path / "bench.raw"
    cir.write_text(netlist)
    done = subprocess.run(["ngspice", "-b", "-r", str(raw), str(cir)], capture_output=True,
                          text=True, timeout=60)
    assert done.returncode == 0, done.stdout + done.stderr
    vec = read_rawfile(raw.read_bytes(), str(raw))[0]  # the reference package's rawfile reader

    def v(node):
        return np.zeros_like(vec["frequency"]) if node == "0" else vec[f"v({node})"]

    f = vec["frequency"].real
    s = np.empty((f.size, 2, 2), complex)
    s[:, 0, 0] = v("p1") - v(pl) - 1.0
    s[:, 1, 0] = v("s1") - v(sl)
    s[:, 1, 1] = v("s2") - v(sl2) - 1.0
    s[:, 0, 1] = v("p2") - v(pl2)
    return f, s


@pytest.mark.spice
@needs_spice
@pytest.mark.parametrize("params,form", [(LOSSLESS, "coupled"), (LOSSLESS, "tee"), (LOSSY, "tee"),
                                         (LOSSY.replace(polarity=-1), "tee"),
                                         (LOSSLESS.replace(polarity=-1), "coupled")])
def test_floating_subcircuit_grounded_matches_model(params, form, tmp_path):
    # Independent simulator: ngspice AC analysis (REFERENCES.md), both low ends on ground.
    f, s_spice = simulate(params, tmp_path, form)
    assert f.size > 150
    err = np.max(np.abs(s_spice - s_matrix(params, f)) / np.maximum(np.abs(s_matrix(params, f)), 1e-3))
    assert err < 1e-9, f"max relative |S_spice - S_model| = {err:.3g}"


@pytest.mark.spice
@needs_spice
@pytest.mark.parametrize("form", ["coupled", "tee"])
def test_floating_subcircuit_low_ends_on_other_nodes(form, tmp_path):
    # The secondary's low end on its own node, held at the same (non-zero) potential as the
    # primary's low end by a second source: the port-to-port transfer is the model's.
    params = LOSSLESS if form == "coupled" else LOSSY
    src = "VC c 0 AC 0.7\nVD d 0 AC 0.7\nVE e 0 AC 0.3\nVF g 0 AC 0.3"
    f, s_spice = simulate(params, tmp_path, form, pl="c", sl="d", pl2="e", sl2="g", src=src)
    s_model = s_matrix(params, f)
    err = np.max(np.abs(s_spice - s_model) / np.maximum(np.abs(s_model), 1e-3))
    assert err < 1e-9, f"max relative |S_spice - S_model| = {err:.3g}"


@pytest.mark.spice
@needs_spice
@pytest.mark.parametrize("form", ["coupled", "tee"])
def test_floating_secondary_is_isolated_without_c12(form, tmp_path):
    # With no interwinding capacitance the windings share only the magnetic path: a common-mode
    # voltage on the secondary's low end (here 0.5 V, against the primary's 0 V) leaves the
    # differential transfer unchanged (circuit theory: no conductive path between the sides).
    params = (LOSSLESS if form == "coupled" else LOSSY).replace(C12_F=0.0)
    f, s_spice = simulate(params, tmp_path, form, sl="d", pl2="e", src="VD d 0 AC 0.5\nVE e 0 AC 0.5")
    s_model = s_matrix(params, f)
    err = np.max(np.abs(s_spice - s_model) / np.maximum(np.abs(s_model), 1e-3))
    assert err < 1e-9, f"max relative |S_spice - S_model| = {err:.3g}"


def test_floating_netlist_pins_and_c12():
    text = spice_subcircuit(LOSSY, name="ISO", floating=True).splitlines()
    assert ".SUBCKT ISO P_HI P_LO S_HI S_LO" in text
    assert "C12 P_HI S_HI 1.5e-12" in text
    assert "C1 P_HI P_LO 3e-12" in text and "C2 S_HI S_LO 2e-12" in text
    body = [line for line in text if line[:1].isalpha()]
    assert not any("GND" in line.split() for line in body)
    grounded = spice_subcircuit(LOSSY, name="ISO").splitlines()
    assert ".SUBCKT ISO P1 S1 GND" in grounded


def test_export_command_writes_the_floating_subcircuit(tmp_path):
    import json
    from pathlib import Path

    from typer.testing import CliRunner

    from rfmeas.cli import app

    sample = Path(__file__).resolve().parents[1] / "sample_data" / "coupler-after"
    cir = tmp_path / "iso.cir"
    result = CliRunner().invoke(app, ["export", str(sample), "--spice", str(cir), "--floating-secondary",
                                      "--json"])
    assert result.exit_code == 0, result.stdout
    params = TransformerParams(**json.loads(result.stdout)["model"])
    text = cir.read_text()
    assert ".SUBCKT XFMR P_HI P_LO S_HI S_LO" in text
    # the netlist written is the library's floating subcircuit of the fitted parameters
    body = [line for line in text.splitlines() if not line.startswith("*")]
    expected = [line for line in spice_subcircuit(params, floating=True).splitlines() if not line.startswith("*")]
    assert body == expected
