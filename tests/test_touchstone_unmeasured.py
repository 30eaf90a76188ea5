"""Columns a VNA did not measure: forward-only two-port files in every format and version.

A forward-only export cannot write "nothing" in its S12/S22 columns: DB files
carry -300 or -600 dB (or -200 dB), MA/RI files tiny magnitudes such as 1e-15,
or exact zeros (common practice of VNA exporters). A column whose magnitude
stays at or below 1e-10 (-200 dB) at every point is taken as not measured.
Row layouts from the Touchstone File Format Specification 1.1 (v1 rows S11
S21 S12 S22) and 2.0 ([Two-Port Data Order] 12_21 or 21_12).
"""

from __future__ import annotations

import numpy as np
import pytest

from population import format_pair
from rfmeas.errors import InputError
from rfmeas.measurement.manifest import load_manifest
from rfmeas.io.touchstone import UNMEASURED_BELOW, read_touchstone_bytes

FREQS_MHZ = (1.0, 2.0, 4.0, 8.0)
S11 = (0.1 + 0.2j, 0.15 + 0.25j, 0.2 + 0.3j, 0.25 + 0.1j)
S21 = (0.7 - 0.1j, 0.65 - 0.15j, 0.6 - 0.2j, 0.5 - 0.3j)


def pair(z: complex, fmt: str) -> str:
    return format_pair(z, fmt, digits=17)


def two_port(fmt: str, s12: list[str], s22: list[str], version: int = 1, order: str = "21_12") -> bytes:
    """A two-port file whose S12/S22 columns hold the given text, row by row."""
    lines = ["! forward-only export"]
    if version == 2:
        lines += ["[Version] 2.0", f"# MHz S {fmt} R 50", "[Number of Ports] 2",
                  f"[Two-Port Data Order] {order}", f"[Number of Frequencies] {len(FREQS_MHZ)}",
                  "[Network Data]"]
    else:
        lines.append(f"# MHz S {fmt} R 50")
    for f, a, b, c, d in zip(FREQS_MHZ, S11, S21, s12, s22):
        cols = (pair(a, fmt), pair(b, fmt), c, d) if order == "21_12" else (pair(a, fmt), c, pair(b, fmt), d)
        lines.append(f"{f!r} " + " ".join(cols))
    if version == 2:
        lines.append("[End]")
    return ("\n".join(lines) + "\n").encode()


# what exporters write in a column they did not measure (common practice)
FILLERS = [
    ("DB", "-300 0"), ("DB", "-600 0"), ("DB", "-200 0"), ("DB", "-250.5 90"),
    ("MA", "1e-15 0"), ("MA", "1e-20 37"), ("MA", "0 0"), ("MA", "1e-10 0"),
    ("RI", "1e-15 0"), ("RI", "0 0"), ("RI", "3e-11 -4e-11"), ("RI", "-1e-18 1e-18"),
]


@pytest.mark.parametrize("version,order", [(1, "21_12"), (2, "12_21"), (2, "21_12")])
@pytest.mark.parametrize("fmt,filler", FILLERS)
def test_unmeasured_reverse_columns_make_a_forward_only_file(fmt, filler, version, order):
    data = read_touchstone_bytes(two_port(fmt, [filler] * 4, [filler] * 4, version, order), "thru.s2p")
    assert data.forward_only is True
    assert data.unmeasured == ("S12", "S22")
    assert data.to_dict()["unmeasured"] == ["S12", "S22"]
    # not measured: held at exactly zero, never copied from S21 or S11
    assert np.all(data.network.s[:, 0, 1] == 0) and np.all(data.network.s[:, 1, 1] == 0)
    np.testing.assert_allclose(data.network.s[:, 0, 0], S11, rtol=1e-12)
    np.testing.assert_allclose(data.network.s[:, 1, 0], S21, rtol=1e-12)
    assert data.warnings == ()


@pytest.mark.parametrize("fmt,small,measured", [
    ("DB", "-300 0", "-199.9 0"),       # -199.9 dB is 1.01e-10: above the threshold
    ("MA", "1e-15 0", "2e-10 0"),
    ("RI", "0 0", "1e-10 1e-10"),       # |S| = 1.4e-10
])
def test_one_point_above_the_threshold_makes_the_column_measured(fmt, small, measured):
    column = [small, small, measured, small]
    data = read_touchstone_bytes(two_port(fmt, column, column), "thru.s2p")
    assert data.forward_only is False
    assert data.unmeasured == ()
    assert abs(data.network.s[2, 0, 1]) > UNMEASURED_BELOW


def test_real_reverse_data_are_kept():
    s12 = [pair(z, "DB") for z in S21]
    s22 = [pair(z, "DB") for z in S11]
    data = read_touchstone_bytes(two_port("DB", s12, s22), "thru.s2p")
    assert data.forward_only is False and data.unmeasured == ()
    np.testing.assert_allclose(data.network.s[:, 0, 1], S21, rtol=1e-12)


def test_a_single_unmeasured_column_is_named_in_a_warning():
    s12 = [pair(z, "MA") for z in S21]
    data = read_touchstone_bytes(two_port("MA", s12, ["1e-15 0"] * 4), "thru.s2p")
    assert data.forward_only is False
    assert data.unmeasured == ("S22",)
    assert np.all(data.network.s[:, 1, 1] == 0)
    assert len(data.warnings) == 1 and "S22" in data.warnings[0] and "not measured" in data.warnings[0]


@pytest.mark.parametrize("fmt,filler", [("DB", "-600 0"), ("MA", "1e-15 0"), ("RI", "0 0")])
def test_a_one_port_file_with_nothing_measured_is_refused(fmt, filler):
    text = f"# MHz S {fmt} R 50\n" + "".join(f"{f!r} {filler}\n" for f in FREQS_MHZ)
    with pytest.raises(InputError, match=r"open\.s1p: .*S11 stays at or below -200 dB"):
        read_touchstone_bytes(text.encode(), "open.s1p")


def test_a_two_port_file_with_nothing_measured_is_refused():
    text = "# MHz S DB R 50\n" + "".join(f"{f!r} -300 0 -600 0 -300 0 -300 0\n" for f in FREQS_MHZ)
    with pytest.raises(InputError, match=r"thru\.s2p: holds no measured values: .* stay at or below -200 dB"):
        read_touchstone_bytes(text.encode(), "thru.s2p")


def _write_set(folder, thru: bytes):
    (folder / "thru.s2p").write_bytes(thru)
    (folder / "manifest.toml").write_text(
        '[transformer]\nname = "fwd"\n\n[[sweep]]\nfile = "thru.s2p"\nport1 = "primary"\n'
        'port2 = "secondary"\n')
    return load_manifest(folder / "manifest.toml")


@pytest.mark.parametrize("fmt,filler", [("DB", "-600 0"), ("MA", "1e-15 0"), ("RI", "1e-15 0")])
def test_unmeasured_columns_are_never_fitted(tmp_path, fmt, filler):
    measurement = _write_set(tmp_path, two_port(fmt, [filler] * 4, [filler] * 4))
    (sweep,) = measurement.sweeps
    assert sweep.forward_only is True
    assert sweep.elements == ("S11", "S21")
    assert sweep.measured().shape == (4, 2)


def test_a_single_unmeasured_column_is_left_out_of_the_fit(tmp_path):
    s12 = [pair(z, "RI") for z in S21]
    measurement = _write_set(tmp_path, two_port("RI", s12, ["0 0"] * 4))
    (sweep,) = measurement.sweeps
    assert sweep.unmeasured == ("S22",)
    assert sweep.elements == ("S11", "S21", "S12")
    assert sweep.to_dict()["unmeasured"] == ["S22"]
