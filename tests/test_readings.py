"""LCR readings (CSV and TOML): each form against conversions worked by hand, round trips, and every
malformed file ending in InputError naming the file and the line.

The conversions checked are the circuit identities of a series and a parallel R–L pair
(Z = R + jX; Z = (1/Rp + 1/(jXp))⁻¹) and Q = X/R (standard circuit texts); each test shows its
arithmetic."""

from __future__ import annotations

import math
import os

import numpy as np
import pytest

from rfmeas.errors import InputError
from rfmeas.io.readings import (
    FORMS,
    MAX_READINGS_BYTES,
    form_values,
    format_readings_csv,
    load_readings,
    series_impedance,
    write_readings,
)

TWO_PI = 2 * math.pi


def write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


# ------------------------------------------------------------------ each form, worked by hand

def test_series_ls_rs(tmp_path):
    # 10 kHz, Ls = 100 µH, Rs = 0.5 Ω: X = 2π·1e4·1e-4 = 2π = 6.2832 Ω, so Z = 0.5 + j6.2832 Ω.
    r = load_readings(write(tmp_path, "a.csv", "frequency_Hz, Ls_H, Rs_ohm\n10000, 100e-6, 0.5\n"))
    assert r.form == "Ls_Rs" and r.path.endswith("a.csv") and r.warnings == ()
    assert r.impedance_ohm[0] == pytest.approx(0.5 + 1j * 6.283185307, rel=1e-9)
    assert r.series_inductance_H[0] == pytest.approx(100e-6, rel=1e-12)


def test_engineering_suffixes_and_unit_columns(tmp_path):
    # '10k' = 1e4 Hz, '100u' H = 100 µH, '500m' Ω = 0.5 Ω: the same reading as above, written the
    # way a meter's display shows it; then in a µH column with the unit repeated in the cell.
    r = load_readings(write(tmp_path, "b.csv", "frequency_Hz,Ls_H,Rs_ohm\n10k,100u,500m\n"))
    assert r.f_Hz[0] == 1e4
    assert r.impedance_ohm[0] == pytest.approx(0.5 + 1j * TWO_PI, rel=1e-9)
    r = load_readings(write(tmp_path, "c.csv", "frequency_kHz;Ls_uH;Rs_mohm\n10 kHz;100uH;500\n"))
    assert r.f_Hz[0] == 1e4
    assert r.impedance_ohm[0] == pytest.approx(0.5 + 1j * TWO_PI, rel=1e-9)
    # a bare number is in the column's unit, prefix included: '10k' in a kHz column is 10 MHz
    r = load_readings(write(tmp_path, "d.csv", "frequency_kHz, Rs_ohm, Xs_ohm\n10k, 1, 2\n"))
    assert r.f_Hz[0] == 1e7


def test_parallel_lp_rp(tmp_path):
    # Xp = ωLp = 100 Ω at 1 MHz (Lp = 100/(2π·1e6) = 15.915 µH).
    # Rp = 100 Ω: Z = (100·j100)/(100 + j100) = j1e4·(100 − j100)/2e4 = 50 + j50 Ω.
    # Rp = 300 Ω: Rs = Rp·Xp²/(Rp² + Xp²) = 300·1e4/1e5 = 30 Ω; Xs = Rp²·Xp/(Rp² + Xp²) = 9e6/1e5 = 90 Ω.
    lp = 100 / (TWO_PI * 1e6)
    r = load_readings(write(tmp_path, "p.csv", f"frequency_Hz, Lp_H, Rp_ohm\n1e6, {lp!r}, 100\n2e6, {lp / 2!r}, 300\n"))
    assert r.form == "Lp_Rp"
    assert r.impedance_ohm[0] == pytest.approx(50 + 50j, rel=1e-12)
    assert r.impedance_ohm[1] == pytest.approx(30 + 90j, rel=1e-12)


def test_l_and_q(tmp_path):
    # Ls = 10 µH at 100 kHz: X = 2π·1e5·1e-5 = 2π Ω; Q = 50 → Rs = X/Q = 2π/50 = 0.12566 Ω.
    # Lp with Xp = 100 Ω and Q = 3: Rp = Q·Xp = 300 Ω → 30 + j90 Ω as in the parallel case.
    r = load_readings(write(tmp_path, "q.csv", "frequency_Hz, Ls_H, Q\n100e3, 10e-6, 50\n"))
    assert r.form == "Ls_Q" and r.impedance_ohm[0] == pytest.approx(TWO_PI / 50 + 1j * TWO_PI, rel=1e-12)
    lp = 100 / (TWO_PI * 1e6)
    r = load_readings(write(tmp_path, "lpq.csv", f"frequency_Hz, Lp_H, Q\n1e6, {lp!r}, 3\n"))
    assert r.impedance_ohm[0] == pytest.approx(30 + 90j, rel=1e-12)
    # a bare L is read as the series inductance; at Q = 5 the note says Lp would be 1/Q² = 4 % larger
    r = load_readings(write(tmp_path, "lq.csv", "frequency_Hz, L_H, Q\n100e3, 10e-6, 5\n"))
    assert r.form == "L_Q" and r.impedance_ohm[0] == pytest.approx(TWO_PI / 5 + 1j * TWO_PI, rel=1e-12)
    assert any("4 %" in w for w in r.warnings)


def test_magnitude_and_phase(tmp_path):
    # |Z| = 10 Ω at 60°: Z = 10·cos 60° + j10·sin 60° = 5 + j8.6603 Ω.
    r = load_readings(write(tmp_path, "z.csv", "frequency_Hz, Z_ohm, theta_deg\n1e6, 10, 60\n"))
    assert r.form == "Z_theta" and r.impedance_ohm[0] == pytest.approx(5 + 8.660254038j, rel=1e-9)
    r = load_readings(write(tmp_path, "z2.csv", "frequency_Hz, |Z|_ohm, theta_deg\n1e6, 10, 60°\n"))
    assert r.impedance_ohm[0] == pytest.approx(5 + 8.660254038j, rel=1e-9)


def test_readings_as_a_one_port_network(tmp_path):
    # S11 = (Z − Z0)/(Z + Z0) (standard circuit texts): Z = 50 + j50 Ω against 50 Ω gives
    # j50/(100 + j50) = j50·(100 − j50)/12500 = 0.2 + 0.4j.
    r = load_readings(write(tmp_path, "net.csv", "frequency_Hz, Rs_ohm, Xs_ohm\n1e6, 50, 50\n2e6, 50, 0\n"))
    network = r.to_network()
    np.testing.assert_allclose(network.s[:, 0, 0], [0.2 + 0.4j, 0.0], atol=1e-12)
    np.testing.assert_array_equal(network.f, [1e6, 2e6])
    assert r.to_dict()["series_resistance_ohm"] == [50.0, 50.0]


def test_resistance_and_reactance(tmp_path):
    r = load_readings(write(tmp_path, "rx.csv", "frequency_Hz, Rs_ohm, Xs_ohm\n# a comment\n\n1e6, 2, 30\n"))
    assert r.form == "Rs_Xs" and r.impedance_ohm[0] == 2 + 30j


def test_toml_forms_declared_once_per_reading_or_inferred(tmp_path):
    # the same Lp ∥ Rp reading as in test_parallel_lp_rp: 50 + j50 Ω
    lp = 100 / (TWO_PI * 1e6)
    r = load_readings(write(tmp_path, "a.toml", f'[[reading]]\nfrequency_Hz = 1e6\nLp_H = {lp!r}\nRp_ohm = 100\n'
                                                 '[[reading]]\nfrequency_Hz = "10k"\nLp_H = "1m"\nRp_ohm = 1e9\n'))
    assert r.form == "Lp_Rp"
    assert r.impedance_ohm[1] == pytest.approx(50 + 50j, rel=1e-12)
    # Xp = 2π·1e4·1e-3 = 62.83 Ω against Rp = 1 GΩ: nearly a pure inductance
    assert r.impedance_ohm[0].imag == pytest.approx(TWO_PI * 10, rel=1e-9)
    text = ('form = "Ls_Rs"\n[[reading]]\nfrequency_Hz = 1e4\nLs_H = 100e-6\nRs_ohm = 0.5\n'
            '[[reading]]\nform = "Z_theta"\nfrequency_Hz = 1e6\nZ_ohm = 10\ntheta_deg = 60\n')
    r = load_readings(write(tmp_path, "b.toml", text))
    assert r.form == "mixed: Ls_Rs, Z_theta"
    np.testing.assert_allclose(r.impedance_ohm, [0.5 + 1j * TWO_PI, 5 + 8.660254038j], rtol=1e-9)


def test_rows_are_sorted_with_a_note(tmp_path):
    r = load_readings(write(tmp_path, "s.csv", "frequency_Hz, Rs_ohm, Xs_ohm\n2e6, 1, 2\n1e6, 3, 4\n"))
    np.testing.assert_array_equal(r.f_Hz, [1e6, 2e6])
    np.testing.assert_array_equal(r.impedance_ohm, [3 + 4j, 1 + 2j])
    assert any("sorted" in w for w in r.warnings)
    r = load_readings(write(tmp_path, "n.csv", "frequency_Hz, Ls_H, Rs_ohm\n1e6, 1e-6, -0.01\n"))
    assert any("negative Rs" in w for w in r.warnings)


# ------------------------------------------------------------------ round trips

@pytest.mark.parametrize("form", list(FORMS))
def test_round_trip_every_form(tmp_path, form):
    rng = np.random.default_rng(13)
    f = np.sort(rng.uniform(1e3, 1e8, 40))
    z = rng.lognormal(0, 2, 40) + 1j * rng.lognormal(3, 2, 40)
    np.testing.assert_allclose(series_impedance(form, f, *form_values(form, f, z)), z, rtol=1e-10)
    path = tmp_path / f"rt-{form}.csv"
    write_readings(path, f, z, form)
    r = load_readings(path)
    assert r.form == form
    np.testing.assert_array_equal(r.f_Hz, f)
    np.testing.assert_allclose(r.impedance_ohm, z, rtol=1e-10)
    assert format_readings_csv(f, z, form) == path.read_text()


def test_writer_refuses_a_form_that_cannot_hold_the_impedance():
    # a pure resistance has no parallel inductance (Lp = ∞) and Q = 0
    with pytest.raises(InputError, match="Lp_Rp"):
        format_readings_csv([1e6], [50 + 0j], "Lp_Rp")
    assert format_readings_csv([1e6], [50 + 0j], "Rs_Xs").splitlines()[1] == "1000000.0, 50.0, 0.0"


# ------------------------------------------------------------------ malformed files

CSV_CASES = {
    "unknown quantity": ("frequency_Hz, Cs_F, Rs_ohm\n1e6, 1e-9, 1\n", "line 1", "Cs_F"),
    "unknown unit": ("frequency_Hz, Ls_kg, Rs_ohm\n1e6, 1, 1\n", "line 1", "Ls_kg"),
    "no frequency column": ("Ls_H, Rs_ohm\n1e-6, 1\n", "line 1", "frequency"),
    "one quantity": ("frequency_Hz, Ls_H\n1e6, 1e-6\n", "line 1", "forms"),
    "three quantities": ("frequency_Hz, Ls_H, Rs_ohm, Q\n1e6, 1e-6, 1, 6\n", "line 1", "forms"),
    "repeated column": ("frequency_Hz, Ls_H, Ls_uH\n1e6, 1e-6, 1\n", "line 1", "twice"),
    "missing value": ("frequency_Hz, Ls_H, Rs_ohm\n1e6, , 1\n", "line 2", "missing"),
    "short row": ("frequency_Hz, Ls_H, Rs_ohm\n1e6, 1e-6, 1\n2e6, 1e-6\n", "line 3", "2 values"),
    "zero frequency": ("frequency_Hz, Ls_H, Rs_ohm\n0, 1e-6, 1\n", "line 2", "positive"),
    "negative frequency": ("frequency_Hz, Ls_H, Rs_ohm\n\n-1k, 1e-6, 1\n", "line 3", "positive"),
    "duplicate frequency": ("frequency_Hz, Ls_H, Rs_ohm\n10k, 1e-6, 1\n10000, 1e-6, 1\n", "line 3", "already"),
    "nan": ("frequency_Hz, Ls_H, Rs_ohm\n1e6, nan, 1\n", "line 2", "not a number"),
    "inf": ("frequency_Hz, Ls_H, Rs_ohm\n1e6, 1e-6, inf\n", "line 2", "not a number"),
    "text": ("frequency_Hz, Ls_H, Rs_ohm\n1e6, abc, 1\n", "line 2", "abc"),
    "wrong unit in cell": ("frequency_Hz, Ls_H, Rs_ohm\n1e6, 2.2uF, 1\n", "line 2", "2.2uF"),
    "decimal comma": ("frequency_Hz;Ls_H;Rs_ohm\n1e6;2,2e-6;1\n", "line 2", "2,2e-6"),
    "overflow": ("frequency_Hz, Ls_H, Rs_ohm\n1e6, 1e308T, 1\n", "line 2", "finite"),
    "zero Lp": ("frequency_Hz, Lp_H, Rp_ohm\n1e6, 0, 1\n", "line 2", "short"),
    "zero Rp": ("frequency_Hz, Lp_H, Rp_ohm\n1e6, 1e-6, 0\n", "line 2", "Rp = 0"),
    "zero Q": ("frequency_Hz, Ls_H, Q\n1e6, 1e-6, 0\n", "line 2", "Q = 0"),
    "zero |Z|": ("frequency_Hz, Z_ohm, theta_deg\n1e6, 0, 10\n", "line 2", "|Z|"),
    "theta out of range": ("frequency_Hz, Z_ohm, theta_deg\n1e6, 5, 270\n", "line 2", "180"),
    "only comments": ("# nothing\n\n", None, "header"),
    "header only": ("frequency_Hz, Ls_H, Rs_ohm\n", None, "no readings"),
}


@pytest.mark.parametrize("case", list(CSV_CASES))
def test_malformed_csv(tmp_path, case):
    text, line, words = CSV_CASES[case]
    path = write(tmp_path, "bad.csv", text)
    with pytest.raises(InputError) as info:
        load_readings(path)
    message = str(info.value)
    assert "bad.csv" in message and words in message
    if line:
        assert line in message


TOML_CASES = {
    "unknown top key": ('colour = "red"\n[[reading]]\nfrequency_Hz = 1e6\nLs_H = 1e-6\nRs_ohm = 1\n', "colour"),
    "unknown reading key": ('[[reading]]\nfrequency_Hz = 1e6\nLs_H = 1e-6\nRs_ohm = 1\nCs_F = 1\n', "line 1"),
    "missing frequency": ('[[reading]]\nLs_H = 1e-6\nRs_ohm = 1\n', "frequency_Hz is missing"),
    "missing value": ('[[reading]]\nfrequency_Hz = 1e6\nLs_H = 1e-6\n', "forms"),
    "mixed forms": ('[[reading]]\nfrequency_Hz = 1e6\nLs_H = 1e-6\nRs_ohm = 1\n\n'
                    '[[reading]]\nfrequency_Hz = 2e6\nZ_ohm = 10\ntheta_deg = 80\n', "line 1"),
    "declared form mismatch": ('form = "Lp_Rp"\n[[reading]]\nfrequency_Hz = 1e6\nLs_H = 1e-6\nRs_ohm = 1\n',
                               "declared form Lp_Rp"),
    "unknown form": ('form = "Cs_D"\n[[reading]]\nfrequency_Hz = 1e6\nLs_H = 1e-6\nRs_ohm = 1\n', "Cs_D"),
    "nan": ('[[reading]]\nfrequency_Hz = 1e6\nLs_H = nan\nRs_ohm = 1\n', "finite"),
    "boolean": ('[[reading]]\nfrequency_Hz = 1e6\nLs_H = true\nRs_ohm = 1\n', "must be a number"),
    "duplicate frequency": ('[[reading]]\nfrequency_Hz = 1e6\nLs_H = 1e-6\nRs_ohm = 1\n'
                            '[[reading]]\nfrequency_Hz = "1M"\nLs_H = 1e-6\nRs_ohm = 1\n', "line 5"),
    "negative frequency": ('[[reading]]\nfrequency_Hz = -1e6\nLs_H = 1e-6\nRs_ohm = 1\n', "positive"),
    "no readings": ('form = "Ls_Rs"\n', "no readings"),
    "reading not a table": ('reading = [1, 2]\n', "must be a table"),
    "not TOML": ('[[reading]\nfrequency_Hz = 1e6\n', "not valid TOML"),
}


@pytest.mark.parametrize("case", list(TOML_CASES))
def test_malformed_toml(tmp_path, case):
    text, words = TOML_CASES[case]
    path = write(tmp_path, "bad.toml", text)
    with pytest.raises(InputError) as info:
        load_readings(path)
    assert "bad.toml" in str(info.value) and words in str(info.value)


def test_mixed_forms_name_the_undeclared_reading(tmp_path):
    text = ('[[reading]]\nform = "Ls_Rs"\nfrequency_Hz = 1e6\nLs_H = 1e-6\nRs_ohm = 1\n\n'
            '[[reading]]\nfrequency_Hz = 2e6\nZ_ohm = 10\ntheta_deg = 80\n')
    with pytest.raises(InputError, match=r"line 7 \(\[\[reading\]\] 2\).*mix forms"):
        load_readings(write(tmp_path, "m.toml", text))


def test_files_that_are_not_readings(tmp_path):
    with pytest.raises(InputError, match="not found"):
        load_readings(tmp_path / "absent.csv")
    with pytest.raises(InputError, match="regular file"):
        load_readings(tmp_path)  # a folder has no .csv suffix but is refused before anything else
    folder = tmp_path / "folder.csv"
    folder.mkdir()
    with pytest.raises(InputError, match="regular file"):
        load_readings(folder)
    if hasattr(os, "mkfifo"):
        fifo = tmp_path / "pipe.csv"
        os.mkfifo(fifo)
        with pytest.raises(InputError, match="regular file"):
            load_readings(fifo)  # refused from its metadata: reading a pipe would block
    big = tmp_path / "big.csv"
    with open(big, "wb") as handle:
        handle.truncate(MAX_READINGS_BYTES + 1)
    with pytest.raises(InputError, match="too large"):
        load_readings(big)
    binary = tmp_path / "bin.csv"
    binary.write_bytes(b"frequency_Hz, Ls_H, Rs_ohm\n\xff\xfe\x00\n")
    with pytest.raises(InputError, match="UTF-8"):
        load_readings(binary)
    with pytest.raises(InputError, match=r"\.csv"):
        load_readings(write(tmp_path, "r.s1p", "frequency_Hz, Ls_H, Rs_ohm\n1e6, 1e-6, 1\n"))


# ------------------------------------------------------------------ any text at all

from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

CELLS = st.one_of(st.sampled_from(["1e6", "10k", "2.2u", "-1", "0", "nan", "", "1e400", "3 kHz", "x", "90",
                                   "200", "1M", "°", "1e-300"]),
                  st.floats(allow_nan=True, allow_infinity=True).map(repr), st.text(max_size=6))
HEADS = st.sampled_from(["frequency_Hz", "frequency_kHz", "Ls_H", "Ls_uH", "Rs_ohm", "Lp_H", "Rp_kohm", "L_H",
                         "Q", "Z_ohm", "theta_deg", "Xs_ohm", "|Z|_ohm", "Cs_F", "", "freq"])


@settings(max_examples=300, deadline=2000, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(HEADS, min_size=1, max_size=4), st.lists(st.lists(CELLS, min_size=1, max_size=4), max_size=5),
       st.sampled_from([",", ";", "\t"]))
def test_any_csv_gives_readings_or_an_input_error(tmp_path, heads, rows, separator):
    text = separator.join(heads) + "\n" + "".join(separator.join(r) + "\n" for r in rows)
    path = tmp_path / "fuzz.csv"
    path.write_text(text, encoding="utf-8")
    try:
        r = load_readings(path)
    except InputError as exc:
        assert "fuzz.csv" in str(exc)
        return
    assert np.all(np.diff(r.f_Hz) > 0) and np.all(r.f_Hz > 0)
    assert np.all(np.isfinite(r.impedance_ohm)) and r.form in FORMS


@settings(max_examples=200, deadline=2000, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.dictionaries(st.sampled_from(["frequency_Hz", "Ls_H", "Rs_ohm", "Z_ohm", "theta_deg", "form", "Q"]),
                       st.one_of(st.floats(allow_nan=True), st.text(max_size=5), st.booleans(),
                                 st.sampled_from(["Ls_Rs", "Z_theta", "10k"])), max_size=5),
       st.integers(1, 3))
def test_any_toml_gives_readings_or_an_input_error(tmp_path, reading, copies):
    import json

    def value(v):
        if isinstance(v, float) and not math.isfinite(v):
            return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf")
        return json.dumps(v) if isinstance(v, (str, bool)) else repr(v)

    body = "".join(f"{k} = {value(v)}\n" for k, v in reading.items())
    path = tmp_path / "fuzz.toml"
    path.write_text("".join("[[reading]]\n" + body for _ in range(copies)), encoding="utf-8")
    try:
        r = load_readings(path)
    except InputError as exc:
        assert "fuzz.toml" in str(exc)
        return
    assert copies == 1 and r.f_Hz.size == 1 and np.all(np.isfinite(r.impedance_ohm))
