"""Touchstone reader and writer: one test per feature of the format, per quirk
of real files and per kind of malformed input, plus write->read round trips.

The layout rules checked here come from the Touchstone File Format
Specification (version 1.1, 2002, and version 2.0, 2009, IBIS Open Forum):
option line `# <unit> <parameter> <format> R <ohms>` with tokens in any
order and defaults GHz S MA R 50; v1 two-port rows ordered S11 S21 S12 S22;
v2 keywords including [Two-Port Data Order] and [Reference].
"""

from __future__ import annotations

import hashlib
import json
import os

import numpy as np
import pytest
import skrf as rf

from rfmeas import __version__
from rfmeas.errors import InputError
from rfmeas.io import atomic, touchstone
from rfmeas.io.atomic import atomic_write_bytes, atomic_write_text
from rfmeas.io.touchstone import (
    MAX_FILE_BYTES,
    TouchstoneData,
    read_touchstone,
    read_touchstone_bytes,
    touchstone_text,
    write_touchstone,
)

# Three points of a made-up two-port with four distinct S-parameters, as
# (frequency in MHz, S11, S21, S12, S22).
POINTS = [
    (1.0, 0.1 + 0.2j, 0.7 - 0.1j, 0.6 - 0.2j, 0.3 + 0.05j),
    (2.0, 0.15 + 0.25j, 0.65 - 0.15j, 0.55 - 0.25j, 0.35 + 0.1j),
    (4.0, 0.2 + 0.3j, 0.6 - 0.2j, 0.5 - 0.3j, 0.4 + 0.15j),
]
F_HZ = np.array([p[0] * 1e6 for p in POINTS])
S11 = np.array([p[1] for p in POINTS])
S21 = np.array([p[2] for p in POINTS])
S12 = np.array([p[3] for p in POINTS])
S22 = np.array([p[4] for p in POINTS])


def ri(z: complex) -> str:
    return f"{z.real!r} {z.imag!r}"


def rows_ri(order=("11", "21", "12", "22"), points=POINTS) -> str:
    index = {"11": 1, "21": 2, "12": 3, "22": 4}
    return "".join(f"{p[0]!r} " + " ".join(ri(p[index[k]]) for k in order) + "\n" for p in points)


def s2p_v1(option="# MHz S RI R 50", body=None) -> str:
    return f"! two-port test data\n{option}\n" + (rows_ri() if body is None else body)


def write(tmp_path, name: str, text: str | bytes) -> str:
    path = tmp_path / name
    if isinstance(text, str):
        path.write_text(text)
    else:
        path.write_bytes(text)
    return str(path)


def assert_matches_points(data: TouchstoneData) -> None:
    s = data.network.s
    np.testing.assert_allclose(data.network.f, F_HZ, rtol=1e-15)
    np.testing.assert_allclose(s[:, 0, 0], S11, atol=1e-12)
    np.testing.assert_allclose(s[:, 1, 0], S21, atol=1e-12)
    np.testing.assert_allclose(s[:, 0, 1], S12, atol=1e-12)
    np.testing.assert_allclose(s[:, 1, 1], S22, atol=1e-12)


# ----------------------------------------------------------------- spec features


def test_v1_two_port_column_order_is_s11_s21_s12_s22(tmp_path):
    data = read_touchstone(write(tmp_path, "thru.s2p", s2p_v1()))
    assert_matches_points(data)
    assert data.port_count == 2
    assert data.forward_only is False
    assert data.warnings == ()


def test_one_port_file(tmp_path):
    body = "".join(f"{p[0]!r} {ri(p[1])}\n" for p in POINTS)
    data = read_touchstone(write(tmp_path, "open.s1p", "# MHz S RI R 50\n" + body))
    assert data.port_count == 1
    assert data.network.nports == 1
    np.testing.assert_allclose(data.network.s[:, 0, 0], S11, atol=1e-12)


@pytest.mark.parametrize("unit,scale", [("Hz", 1.0), ("kHz", 1e3), ("MHz", 1e6), ("GHz", 1e9),
                                        ("hz", 1.0), ("KHZ", 1e3), ("mhz", 1e6), ("gHz", 1e9)])
def test_frequency_units_any_case(tmp_path, unit, scale):
    text = f"# {unit} S RI R 50\n" + "".join(f"{p[0]!r} {ri(p[1])}\n" for p in POINTS)
    data = read_touchstone(write(tmp_path, "u.s1p", text))
    np.testing.assert_allclose(data.network.f, [p[0] * scale for p in POINTS], rtol=1e-15)


def test_magnitude_angle_format(tmp_path):
    # MA: magnitude and angle in degrees (Touchstone 1.1 spec).
    body = "".join(f"{p[0]!r} " + " ".join(f"{abs(z)!r} {float(np.degrees(np.angle(z)))!r}" for z in p[1:]) + "\n"
                   for p in POINTS)
    data = read_touchstone(write(tmp_path, "ma.s2p", s2p_v1("# MHz S MA R 50", body)))
    assert_matches_points(data)


def test_decibel_angle_format(tmp_path):
    # DB: 20*log10(magnitude) and angle in degrees (Touchstone 1.1 spec).
    body = "".join(f"{p[0]!r} " + " ".join(f"{float(20 * np.log10(abs(z)))!r} {float(np.degrees(np.angle(z)))!r}"
                                          for z in p[1:]) + "\n" for p in POINTS)
    data = read_touchstone(write(tmp_path, "db.s2p", s2p_v1("# mhz s db r 50", body)))
    assert_matches_points(data)


@pytest.mark.parametrize("option", ["# MHz S RI R 50", "# S RI R 50 MHz", "# R 50 RI MHz S",
                                    "# ri mhz r 50 s", "#   MHz   RI   S   R   50"])
def test_option_tokens_in_any_order(tmp_path, option):
    assert_matches_points(read_touchstone(write(tmp_path, "o.s2p", s2p_v1(option))))


def test_reference_impedance_from_option_line(tmp_path):
    data = read_touchstone(write(tmp_path, "r75.s2p", s2p_v1("# MHz S RI R 75")))
    np.testing.assert_array_equal(data.network.z0, np.full((3, 2), 75.0))


def test_bare_option_line_means_spec_defaults(tmp_path):
    # Defaults GHz S MA R 50 (Touchstone 1.1 spec).
    body = "1 0.5 90\n2 0.5 90\n3 0.5 90\n"
    data = read_touchstone(write(tmp_path, "d.s1p", "#\n" + body))
    np.testing.assert_allclose(data.network.f, [1e9, 2e9, 3e9])
    np.testing.assert_allclose(data.network.s[:, 0, 0], 0.5j, atol=1e-15)
    np.testing.assert_array_equal(data.network.z0, 50.0)


def test_missing_option_line_assumes_defaults_with_a_warning(tmp_path):
    data = read_touchstone(write(tmp_path, "d.s1p", "1 0.5 0\n2 0.5 0\n3 0.5 0\n"))
    np.testing.assert_allclose(data.network.f, [1e9, 2e9, 3e9])
    assert data.warnings == ("The file has no option line; rfmeas assumed the Touchstone defaults "
                             "(GHz, S-parameters, magnitude-angle, 50 ohm).",)


def test_comments_anywhere(tmp_path):
    lines = rows_ri().splitlines()
    text = ("! first\n!\n# MHz S RI R 50 ! options\n! between\n" + lines[0] + " ! trailing\n"
            "   ! indented comment\n\n" + lines[1] + "\n" + lines[2] + "!no space\n! last")
    data = read_touchstone(write(tmp_path, "c.s2p", text))
    assert_matches_points(data)
    assert data.warnings == ()


def test_crlf_line_ends_and_byte_order_mark(tmp_path):
    text = "\ufeff" + s2p_v1().replace("\n", "\r\n")
    assert_matches_points(read_touchstone(write(tmp_path, "w.s2p", text.encode("utf-8"))))


def test_legacy_8bit_comment_is_accepted(tmp_path):
    text = b"! probe at 23 \xb0C\n" + s2p_v1().encode()
    assert_matches_points(read_touchstone(write(tmp_path, "l.s2p", text)))


def v2_text(order="12_21", reference="[Reference] 50 50", extra="", points=POINTS, n=None) -> str:
    key = ("11", "12", "21", "22") if order == "12_21" else ("11", "21", "12", "22")
    n = len(points) if n is None else n
    return ("! version 2 test data\n[Version] 2.0\n# MHz S RI R 50\n[Number of Ports] 2\n"
            f"[Two-Port Data Order] {order}\n{reference}\n[Number of Frequencies] {n}\n{extra}"
            "[Network Data]\n" + rows_ri(key, points) + "[End]\n")


@pytest.mark.parametrize("order", ["12_21", "21_12"])
def test_v2_two_port_data_order(tmp_path, order):
    # 12_21: S11 S12 S21 S22 per row; 21_12: S11 S21 S12 S22 (Touchstone 2.0 spec).
    data = read_touchstone(write(tmp_path, "v2.s2p", v2_text(order)))
    assert_matches_points(data)
    assert data.warnings == ()


def test_v2_per_port_reference(tmp_path):
    data = read_touchstone(write(tmp_path, "ref.s2p", v2_text(reference="[Reference] 50 75")))
    np.testing.assert_array_equal(data.network.z0, np.tile([50.0, 75.0], (3, 1)))
    assert_matches_points(data)
    assert data.to_dict()["reference_impedance_ohm"] == [50.0, 75.0]


def test_v2_reference_continued_on_next_line(tmp_path):
    data = read_touchstone(write(tmp_path, "ref.s2p", v2_text(reference="[Reference] 25\n100 ! port 2")))
    np.testing.assert_array_equal(data.network.z0[0], [25.0, 100.0])


def test_v2_information_block_and_matrix_format_are_accepted(tmp_path):
    extra = "[Matrix Format] Full\n[Begin Information]\nanything 1 2 3\n[End Information]\n"
    assert_matches_points(read_touchstone(write(tmp_path, "i.s2p", v2_text(extra=extra))))


def test_v2_ts_extension_takes_ports_from_keyword(tmp_path):
    data = read_touchstone(write(tmp_path, "sweep.ts", v2_text("21_12")))
    assert data.port_count == 2
    assert_matches_points(data)


def test_v2_noise_data_is_dropped_with_a_warning(tmp_path):
    text = v2_text().replace("[End]\n", "[Noise Data]\n1 2.0 0.5 30 0.4\n2 2.1 0.5 31 0.4\n[End]\n")
    data = read_touchstone(write(tmp_path, "n.s2p", text))
    assert_matches_points(data)
    assert data.warnings == ("The file ends with a noise-parameter block (2 rows); rfmeas does not use "
                             "noise data and ignored it.",)


def test_v2_number_of_frequencies_must_match(tmp_path):
    with pytest.raises(InputError, match=r"n\.s2p.*\[Number of Frequencies\] says 5 but the file holds 3"):
        read_touchstone(write(tmp_path, "n.s2p", v2_text(n=5)))


def test_v2_two_port_without_data_order_is_refused(tmp_path):
    text = v2_text().replace("[Two-Port Data Order] 12_21\n", "")
    with pytest.raises(InputError, match=r"o\.s2p.*\[Two-Port Data Order\]"):
        read_touchstone(write(tmp_path, "o.s2p", text))


def test_bytes_reader_matches_file_reader_and_keeps_the_bytes(tmp_path):
    raw = s2p_v1().encode()
    from_file = read_touchstone(write(tmp_path, "b.s2p", raw))
    from_bytes = read_touchstone_bytes(raw, "upload.s2p")
    assert from_bytes.path == "upload.s2p"
    assert from_bytes.raw_bytes == raw == from_file.raw_bytes
    assert from_bytes.sha256 == hashlib.sha256(raw).hexdigest() == from_file.sha256
    np.testing.assert_array_equal(from_bytes.network.s, from_file.network.s)


def test_to_dict_is_plain_json(tmp_path):
    data = read_touchstone(write(tmp_path, "j.s2p", s2p_v1()))
    meta = data.to_dict()
    assert json.loads(json.dumps(meta)) == meta
    assert meta["points"] == 3
    assert meta["start_frequency_Hz"] == 1e6 and meta["stop_frequency_Hz"] == 4e6
    assert meta["size_bytes"] == len(data.raw_bytes)
    assert meta["forward_only"] is False and meta["port_count"] == 2


# ----------------------------------------------------------------- quirks


def test_out_of_order_points_are_sorted(tmp_path):
    lines = rows_ri().splitlines()
    body = "\n".join([lines[2], lines[0], lines[1]]) + "\n"
    data = read_touchstone(write(tmp_path, "q.s2p", s2p_v1(body=body)))
    assert_matches_points(data)
    assert data.warnings == ("The frequencies were not in increasing order (they went back 1 time); "
                             "rfmeas sorted the points.",)


def test_one_port_out_of_order_is_sorted_too(tmp_path):
    data = read_touchstone(write(tmp_path, "q.s1p", "# Hz S RI R 50\n3 0.3 0\n1 0.1 0\n2 0.2 0\n"))
    np.testing.assert_array_equal(data.network.f, [1, 2, 3])
    np.testing.assert_array_equal(data.network.s[:, 0, 0], [0.1, 0.2, 0.3])
    assert len(data.warnings) == 1 and "sorted" in data.warnings[0]


def test_exact_duplicate_rows_are_dropped(tmp_path):
    lines = rows_ri().splitlines()
    body = "\n".join([lines[0], lines[1], lines[1], lines[2], lines[2]]) + "\n"
    data = read_touchstone(write(tmp_path, "q.s2p", s2p_v1(body=body)))
    assert_matches_points(data)
    assert data.warnings == ("2 rows were exact duplicates of an earlier row and were dropped.",)


def test_repeated_frequency_with_other_values_keeps_the_first(tmp_path):
    # Two joined sweep segments overlapping at 2 and 4 MHz: the second
    # segment's readings there differ and must be dropped, not averaged.
    later = [(2.0, 0.9, 0.9, 0.9, 0.9), (4.0, 0.8, 0.8, 0.8, 0.8), (5.0, 0.7, 0.7, 0.7, 0.7)]
    body = rows_ri() + rows_ri(points=later)
    data = read_touchstone(write(tmp_path, "seg.s2p", s2p_v1(body=body)))
    np.testing.assert_array_equal(data.network.f, [1e6, 2e6, 4e6, 5e6])
    np.testing.assert_allclose(data.network.s[:3, 0, 0], S11, atol=1e-15)
    np.testing.assert_allclose(data.network.s[3], [[0.7, 0.7], [0.7, 0.7]], atol=1e-15)
    assert data.warnings == (
        "2 points repeated a frequency already in the file with different values (sweep segments joined "
        "with an overlap?); rfmeas kept the first reading and dropped them.",
    )


def test_backwards_frequency_in_v1_two_port_is_s_data_not_noise(tmp_path):
    # scikit-rf alone would take the row at 3 MHz as the start of a noise block.
    body = rows_ri(points=POINTS[:1] + POINTS[2:]) + rows_ri(points=[POINTS[1]])
    data = read_touchstone(write(tmp_path, "back.s2p", s2p_v1(body=body)))
    assert_matches_points(data)
    assert len(data.warnings) == 1 and "sorted" in data.warnings[0]


def test_v1_noise_block_is_dropped_with_a_warning(tmp_path):
    noise = "! noise parameters\n1 1.5 0.4 20 0.3\n2 1.6 0.4 21 0.3\n4 1.7 0.4 22 0.3\n"
    data = read_touchstone(write(tmp_path, "amp.s2p", s2p_v1(body=rows_ri() + noise)))
    assert_matches_points(data)
    assert data.warnings == ("The file ends with a noise-parameter block (3 rows); rfmeas does not use "
                             "noise data and ignored it.",)


def test_zero_and_negative_frequencies_are_dropped(tmp_path):
    text = "# Hz S RI R 50\n0 0.9 0\n-5 0.8 0\n1 0.1 0\n2 0.2 0\n3 0.3 0\n"
    data = read_touchstone(write(tmp_path, "dc.s1p", text))
    np.testing.assert_array_equal(data.network.f, [1, 2, 3])
    np.testing.assert_array_equal(data.network.s[:, 0, 0], [0.1, 0.2, 0.3])
    assert data.warnings == ("2 points at 0 Hz or a negative frequency were dropped.",)


@pytest.mark.parametrize("fmt,zero", [("RI", "0 0"), ("MA", "0 0"), ("MA", "0 45")])
def test_forward_only_two_port_is_detected_and_left_alone(tmp_path, fmt, zero):
    body = "".join(f"{p[0]!r} 0.1 0 0.7 0 {zero} {zero}\n" for p in POINTS)
    data = read_touchstone(write(tmp_path, "fwd.s2p", s2p_v1(f"# MHz S {fmt} R 50", body)))
    assert data.forward_only is True
    assert data.to_dict()["forward_only"] is True
    # Never copied from S21/S11: the unmeasured columns stay exactly zero.
    assert np.all(data.network.s[:, 0, 1] == 0) and np.all(data.network.s[:, 1, 1] == 0)
    np.testing.assert_allclose(data.network.s[:, 1, 0], 0.7)


def test_not_forward_only_when_one_reverse_value_is_nonzero(tmp_path):
    body = "".join(f"{p[0]!r} 0.1 0 0.7 0 0 0 0 0\n" for p in POINTS[:2]) + "4 0.1 0 0.7 0 0 0 1e-9 0\n"
    assert read_touchstone(write(tmp_path, "fwd.s2p", s2p_v1(body=body))).forward_only is False


def test_fewer_than_three_points_left_is_refused(tmp_path):
    text = "# Hz S RI R 50\n0 0.9 0\n1 0.1 0\n2 0.2 0\n2 0.2 0\n"
    with pytest.raises(InputError, match=r"few\.s1p: only 2 usable frequency points left"):
        read_touchstone(write(tmp_path, "few.s1p", text))


def test_identical_second_option_line_is_ignored_with_a_warning(tmp_path):
    text = s2p_v1().replace("# MHz S RI R 50\n", "# MHz S RI R 50\n# mhz s ri r 50\n")
    data = read_touchstone(write(tmp_path, "two.s2p", text))
    assert_matches_points(data)
    assert data.warnings == ("Line 3 repeats the option line; rfmeas ignored the copy.",)


# ----------------------------------------------------------------- malformed input

MALFORMED = {
    "empty": ("", "is empty"),
    "blank": ("\n  \n\t\n", "is empty"),
    "header only": ("! just a header\n# MHz S RI R 50\n", "no data rows"),
    "binary": (bytes(range(256)) * 4, "binary data"),
    "control characters": (b"\x1b\x02\x7f" * 20, "binary data"),
    "random text": ("Dear reader,\nthis is a letter, not a sweep.\n", "not a Touchstone file"),
    "short row": (s2p_v1(body=rows_ri() + "5 0.1 0.2 0.3\n"), "incomplete"),
    "long row": (s2p_v1(body=rows_ri() + "5 " + "0.1 " * 10 + "\n"), "has 11 numbers"),
    "text in data": (s2p_v1(body=rows_ri() + "5 0.1 abc 0 0 0 0 0 0\n"), "'abc' where a number"),
    "run-together numbers": (s2p_v1(body=rows_ri() + "5 0.1 1.5.3 0 0 0 0 0 0\n"), "'1.5.3' where a number"),
    "number with a dash": (s2p_v1(body=rows_ri() + "5 0.1 1-2 0 0 0 0 0 0\n"), "'1-2' where a number"),
    "nan value": (s2p_v1(body=rows_ri() + "5 0.1 NaN 0 0 0 0 0 0\n"), "NaN value"),
    "inf value": (s2p_v1(body=rows_ri() + "5 0.1 -inf 0 0 0 0 0 0\n"), "-inf value"),
    "overflowing value": (s2p_v1(body=rows_ri() + "5 0.1 1e999 0 0 0 0 0 0\n"), "too large"),
    "db overflow": (s2p_v1("# MHz S DB R 50", rows_ri() + "5 1e300 0 0 0 0 0 0 0\n"), "too large"),
    "unknown option": (s2p_v1("# MHz S RI R 50 FOO"), "unknown option 'FOO'"),
    "repeated unit": (s2p_v1("# MHz S RI R 50 GHz"), "frequency unit twice"),
    "repeated format": (s2p_v1("# MHz S RI MA R 50"), "number format twice"),
    "repeated R": (s2p_v1("# MHz S RI R 50 R 75"), "reference impedance \\(R\\) twice"),
    "R without value": (s2p_v1("# MHz S RI R"), "must be followed by the reference impedance"),
    "complex R": (s2p_v1("# MHz S RI R 50+10j"), "complex; rfmeas supports real reference"),
    "complex R parens": (s2p_v1("# MHz S RI R (50,10)"), "is complex"),
    "zero R": (s2p_v1("# MHz S RI R 0"), "not a positive finite value"),
    "Z parameters": (s2p_v1("# MHz Z RI R 50"), "Z-parameters; rfmeas reads S-parameter"),
    "different second option line": (s2p_v1().replace("# MHz S RI R 50\n", "# MHz S RI R 50\n# GHz S RI R 50\n"),
                                     "second option line differs"),
    "option after data": (rows_ri() + "# MHz S RI R 50\n", "before the data"),
    "stray option value": (s2p_v1("# MHz 12 S RI R 50"), "stray value '12'"),
    "complex v2 reference": (v2_text(reference="[Reference] 50 50+5j"), "is complex"),
    "v2 reference too long": (v2_text(reference="[Reference] 50 50 50"), "3 values for 2 ports"),
    "v2 unknown keyword": (v2_text(extra="[Colour] blue\n"), "unknown keyword \\[Colour\\]"),
    "v2 bad order": (v2_text(order="12_21").replace("12_21", "11_22"), "must be 12_21 or 21_12"),
    "v2 repeated keyword": (v2_text(extra="[Number of Ports] 2\n"), "appears twice"),
    "v2 mixed mode": (v2_text(extra="[Mixed-Mode Order] D2,1 C2,1\n"), "mixed-mode"),
    "v2 ports mismatch": (v2_text().replace("[Number of Ports] 2", "[Number of Ports] 1"),
                          "says 1 but the file name ends in .s2p"),
    "keyword without version": ("[Number of Ports] 2\n" + s2p_v1(), "needs \\[Version\\] 2.0"),
}


@pytest.mark.parametrize("case", sorted(MALFORMED))
def test_malformed_input_is_an_input_error_naming_the_file(tmp_path, case):
    content, expected = MALFORMED[case]
    path = write(tmp_path, "bad_input.s2p", content)
    with pytest.raises(InputError, match=expected) as info:
        read_touchstone(path)
    assert info.value.path == path
    assert "bad_input.s2p" in str(info.value)


@pytest.mark.parametrize("name,ports", [("three.s3p", 3), ("four.S4P", 4)])
def test_more_than_two_ports_is_refused(tmp_path, name, ports):
    with pytest.raises(InputError, match=f"{name}: holds {ports}-port data; rfmeas reads one- and two-port"):
        read_touchstone(write(tmp_path, name, s2p_v1()))


def test_v2_more_than_two_ports_is_refused(tmp_path):
    text = v2_text().replace("[Number of Ports] 2", "[Number of Ports] 4")
    with pytest.raises(InputError, match="big.ts: holds 4-port data; rfmeas reads one- and two-port"):
        read_touchstone(write(tmp_path, "big.ts", text))


def test_other_extension_is_refused(tmp_path):
    with pytest.raises(InputError, match=r"sweep\.csv: is not a Touchstone file name"):
        read_touchstone(write(tmp_path, "sweep.csv", s2p_v1()))


def test_missing_file(tmp_path):
    path = tmp_path / "nothing.s2p"
    with pytest.raises(InputError, match="nothing.s2p: file not found") as info:
        read_touchstone(path)
    assert info.value.path == str(path)


def test_folder_instead_of_file(tmp_path):
    folder = tmp_path / "folder.s2p"
    folder.mkdir()
    with pytest.raises(InputError, match="folder.s2p: is a folder"):
        read_touchstone(folder)


def test_unreadable_file(tmp_path, monkeypatch):
    path = write(tmp_path, "locked.s2p", s2p_v1())

    def denied(*args, **kwargs):
        raise PermissionError(13, "Permission denied")

    # Patched rather than chmod-ed so the test also means something when run as root.
    monkeypatch.setattr("rfmeas.io.files._open_nonblocking", denied)
    with pytest.raises(InputError, match="locked.s2p: cannot read the Touchstone file: Permission denied"):
        read_touchstone(path)


def test_file_over_the_size_limit_is_refused_before_reading(tmp_path, monkeypatch):
    path = tmp_path / "huge.s2p"
    with open(path, "wb") as handle:
        handle.truncate(MAX_FILE_BYTES + 1)  # sparse: no real disk use

    def no_reading(*args, **kwargs):
        raise AssertionError("the file was opened although it is too large")

    monkeypatch.setattr("rfmeas.io.files._open_nonblocking", no_reading)
    with pytest.raises(InputError, match="huge.s2p: the file is too large for a Touchstone file "
                                         r"\(64 MB; rfmeas accepts up to 64 MB\)"):
        read_touchstone(path)


def test_bytes_over_the_size_limit_are_refused():
    with pytest.raises(InputError, match=r"big.s2p: the file is too large for a Touchstone file \(65 MB"):
        read_touchstone_bytes(b" " * (MAX_FILE_BYTES + 2**20), "big.s2p")


def test_scikit_rf_failure_is_reworded(tmp_path, monkeypatch):
    def broken(*args, **kwargs):
        raise IndexError("list index out of range")

    monkeypatch.setattr(touchstone.rf, "Network", broken)
    with pytest.raises(InputError, match=r"x\.s2p: scikit-rf could not read the data \(IndexError"):
        read_touchstone(write(tmp_path, "x.s2p", s2p_v1()))


# ----------------------------------------------------------------- writing


def random_network(ports: int, z0, points: int = 25, seed: int = 1) -> rf.Network:
    rng = np.random.default_rng(seed)
    f_Hz = np.sort(rng.uniform(1e5, 3e8, points))
    s = rng.normal(size=(points, ports, ports)) + 1j * rng.normal(size=(points, ports, ports))
    return rf.Network(frequency=rf.Frequency.from_f(f_Hz, unit="Hz"), s=s * 0.3, z0=z0)


@pytest.mark.parametrize("ports,z0", [(1, 50.0), (2, 50.0), (2, 75.0), (2, [50.0, 200.0]), (1, 12.5)])
def test_write_read_round_trip(tmp_path, ports, z0):
    network = random_network(ports, z0)
    path = tmp_path / f"rt.s{ports}p"
    write_touchstone(network, path, comments=("winding A on port 1",))
    back = read_touchstone(path)
    np.testing.assert_allclose(back.network.f, network.f, rtol=1e-12, atol=0)
    np.testing.assert_allclose(back.network.s, network.s, rtol=0, atol=1e-12)
    np.testing.assert_array_equal(back.network.z0, network.z0)
    assert back.warnings == ()
    text = path.read_text()
    assert text.startswith(f"! written by rfmeas {__version__}\n! winding A on port 1\n")
    assert ("[Version] 2.0" in text) == isinstance(z0, list)
    assert not [p for p in os.listdir(tmp_path) if p.endswith(".tmp")]


def test_round_trip_through_scikit_rf_alone(tmp_path):
    # scikit-rf must read our v2 output by itself (it is the format's reference implementation here).
    network = random_network(2, [50.0, 75.0])
    path = tmp_path / "plain.s2p"
    write_touchstone(network, path)
    theirs = rf.Network(str(path))
    np.testing.assert_allclose(theirs.s, network.s, atol=1e-12)
    np.testing.assert_array_equal(theirs.z0, network.z0)


def test_touchstone_text_layout():
    network = random_network(2, 50.0, points=3)
    lines = touchstone_text(network, comments=["two\nlines"]).splitlines()
    assert lines[:4] == [f"! written by rfmeas {__version__}", "! two", "! lines", "# Hz S RI R 50.0"]
    first = [float(x) for x in lines[5].split()]
    s = network.s[0]
    assert first == [network.f[0], s[0, 0].real, s[0, 0].imag, s[1, 0].real, s[1, 0].imag,
                     s[0, 1].real, s[0, 1].imag, s[1, 1].real, s[1, 1].imag]


def test_write_refuses_complex_reference(tmp_path):
    network = random_network(2, 50.0 + 5.0j)
    with pytest.raises(InputError, match=r"c\.s2p: the network has a complex reference impedance"):
        write_touchstone(network, tmp_path / "c.s2p")
    assert list(tmp_path.iterdir()) == []


def test_write_refuses_non_finite_values(tmp_path):
    network = random_network(1, 50.0)
    network.s[3, 0, 0] = np.nan
    with pytest.raises(InputError, match="NaN or infinite"):
        write_touchstone(network, tmp_path / "n.s1p")


def test_write_refuses_wrong_extension(tmp_path):
    with pytest.raises(InputError, match=r"must end in \.s2p"):
        write_touchstone(random_network(2, 50.0), tmp_path / "x.s1p")


def test_write_into_missing_folder(tmp_path):
    with pytest.raises(InputError, match="folder .* does not exist"):
        write_touchstone(random_network(1, 50.0), tmp_path / "nowhere" / "x.s1p")


# ----------------------------------------------------------------- atomic writes


def test_atomic_write_creates_and_replaces(tmp_path):
    path = tmp_path / "out.txt"
    atomic_write_text(path, "first µ\n")
    atomic_write_text(path, "second\n")
    assert path.read_text(encoding="utf-8") == "second\n"
    atomic_write_bytes(path, b"\x00\x01")
    assert path.read_bytes() == b"\x00\x01"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.txt"]


def test_atomic_write_failure_keeps_old_file_and_removes_temp(tmp_path, monkeypatch):
    path = tmp_path / "keep.txt"
    path.write_text("old")

    def failing_replace(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(atomic.os, "replace", failing_replace)
    with pytest.raises(InputError, match="keep.txt: cannot write the file: No space left on device"):
        atomic_write_text(path, "new")
    assert path.read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.txt"]


def test_atomic_write_encoding_error(tmp_path):
    with pytest.raises(InputError, match="cannot be encoded as ascii"):
        atomic_write_text(tmp_path / "a.txt", "µ", encoding="ascii")
    assert list(tmp_path.iterdir()) == []


def test_atomic_write_onto_a_folder(tmp_path):
    (tmp_path / "d").mkdir()
    with pytest.raises(InputError, match="a folder of that name exists"):
        atomic_write_bytes(tmp_path / "d", b"x")
