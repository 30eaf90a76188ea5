"""Mistakes a user makes at the edges: a band in the wrong unit, options that do not fit the files,
a file where a manifest is expected. Each is an error (exit 2) that names the fix."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.errors import InputError
from rfmeas.judge.design import UNIT_SLIP_FACTOR, check_band_units

ROOT = Path(__file__).resolve().parents[1]
BEFORE = ROOT / "sample_data" / "coupler-before"
runner = CliRunner()


@pytest.mark.parametrize("value_Hz, swept, guess", [
    (1.8, (100e3, 100e6), "1.8M"),          # MHz typed as Hz
    (3.5e3 * 1e9, (1e3, 10e6), "3.5k"),     # kHz typed as THz-ish: scaled down by 1e9
    (30.0, (1e6, 100e6), "30M"),
    (2.0e12, (100e3, 50e6), "2M"),          # MHz typed as µHz-scaled Hz: 2 THz read back as 2 MHz
    (1e-12, (1e6, 10e6), None),             # no prefix brings it near the sweep: no guess
])
def test_a_band_edge_far_outside_the_sweep_is_refused_with_the_likely_unit(value_Hz, swept, guess):
    # The SI prefixes (k = 1e3, M = 1e6, G = 1e9) are the SI brochure's; the 1000x margin is common practice.
    with pytest.raises(InputError) as exc:
        check_band_units(value_Hz, None, *swept, labels=("--plan lowest", "--plan highest"))
    message = str(exc.value)
    assert "--plan lowest" in message and "far" in message
    if guess is None:
        assert "did you mean" not in message and "unit" in message
    else:
        assert f"did you mean {guess}" in message


def test_a_band_near_the_sweep_passes_even_a_decade_or_two_outside():
    # an audio-range design swept from a little above its lowest frequency is not a unit slip
    for lowest, highest in ((3.5e6, 30e6), (1e3, 20e3), (100e3 / 50, 100e6 * 50)):
        check_band_units(lowest, highest, 100e3, 100e6)
    edge = 100e3 / UNIT_SLIP_FACTOR
    check_band_units(edge, None, 100e3, 100e6)  # exactly at the margin: still accepted
    with pytest.raises(InputError):
        check_band_units(edge / 1.01, None, 100e3, 100e6)


def test_analyze_plan_with_a_frequency_in_the_wrong_unit_exits_2_and_suggests_mhz():
    result = runner.invoke(app, ["analyze", str(BEFORE), "--plan", "50:450:1.8:30M", "--no-record"])
    assert result.exit_code == 2
    assert "did you mean 1.8M" in result.stderr and "--plan lowest" in result.stderr
    assert "turns" not in result.stdout  # no verdicts, no rewind advice


def test_a_manifest_band_in_hz_for_mhz_is_refused_naming_the_manifest(tmp_path):
    for f in BEFORE.iterdir():
        shutil.copy(f, tmp_path / f.name)
    text = (BEFORE / "manifest.toml").read_text()
    assert "lowest_frequency_Hz = 3.5e6" in text
    (tmp_path / "manifest.toml").write_text(text.replace("lowest_frequency_Hz = 3.5e6", "lowest_frequency_Hz = 3.5"))
    result = runner.invoke(app, ["analyze", str(tmp_path), "--no-record"])
    assert result.exit_code == 2
    assert "manifest.toml" in result.stderr and "did you mean 3.5M" in result.stderr
    report = runner.invoke(app, ["report", str(tmp_path), "-o", str(tmp_path / "r.html")])
    assert report.exit_code == 2 and not (tmp_path / "r.html").exists()


def test_analyze_refuses_termination_on_a_two_port_file():
    result = runner.invoke(app, ["analyze", str(BEFORE / "thru.s2p"), "--termination", "short", "--no-record"])
    assert result.exit_code == 2
    assert "--termination" in result.stderr and "one-port" in result.stderr
    # the same option on a one-port file is what it is for
    ok = runner.invoke(app, ["analyze", str(BEFORE / "pri_open.s1p"), str(BEFORE / "thru.s2p"),
                             "--turns", "3:9", "--no-record", "--json"])
    assert ok.exit_code in (0, 1), ok.stderr


def test_core_refuses_a_two_port_file_without_a_method():
    result = runner.invoke(app, ["core", str(BEFORE / "thru.s2p"), "--turns", "5", "--toroid", "12.7,7.1,4.9"])
    assert result.exit_code == 2
    assert "--method" in result.stderr and "two-port" in result.stderr


def test_report_takes_files_with_turns_like_analyze(tmp_path):
    out = tmp_path / "r.html"
    result = runner.invoke(app, ["report", str(BEFORE / "thru.s2p"), str(BEFORE / "pri_open.s1p"),
                                 str(BEFORE / "pri_short.s1p"), "--turns", "3:9", "-o", str(out)])
    assert result.exit_code == 0, result.stderr
    assert out.is_file() and "<html" in out.read_text().lower()


def test_report_given_a_non_toml_file_says_what_was_expected(tmp_path):
    notes = tmp_path / "notes.txt"
    notes.write_text("L1 about 20 uH\n")
    result = runner.invoke(app, ["report", str(notes), "-o", str(tmp_path / "r.html")])
    assert result.exit_code == 2
    assert re.search(r"expected a manifest \(\.toml.*Touchstone", result.stderr)
    assert "not valid TOML" not in result.stderr


def test_unit_slips_on_a_seeded_population_are_caught_and_the_intended_value_suggested():
    """Random sweeps (10 Hz to 10 GHz starts, 1-4 decades) with a band edge within a decade of them,
    typed with a dropped prefix (MHz or GHz written as Hz: 1e-6 or 1e-9 of the intended value).
    A slip is refused exactly when it lands more than UNIT_SLIP_FACTOR below the sweep (a 1e-6 slip
    of a band far above a wide sweep can land within it: that is the rule's price), and every refusal
    suggests the intended value. Correct bands are never refused."""
    import numpy as np

    from rfmeas.units import format_engineering

    rng = np.random.default_rng(16)
    caught, cases = 0, 300
    for _ in range(cases):
        low = 10 ** rng.uniform(1, 10)
        high = low * 10 ** rng.uniform(1, 4)
        intended = low * 10 ** rng.uniform(-1, np.log10(high / low) + 1)  # within a decade of the sweep
        check_band_units(intended, None, low, high)  # the correct band passes
        slip = intended * rng.choice([1e-6, 1e-9])
        if slip >= low / UNIT_SLIP_FACTOR:
            check_band_units(slip, None, low, high)
            continue
        with pytest.raises(InputError) as exc:
            check_band_units(slip, None, low, high)
        caught += 1
        # the suggestions name the intended value with its prefix, e.g. "1.8M (1.8 MHz)"
        suggestions = str(exc.value).split("did you mean ", 1)[1]
        assert format_engineering(intended, "Hz") in suggestions, (intended, str(exc.value))
    print(f"unit slips caught: {caught} of {cases}")
    assert caught > cases * 0.8  # most slips land far below the sweep (seeded: the count is fixed)
