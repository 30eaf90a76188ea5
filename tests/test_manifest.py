"""Strict manifest validation (docs/DESIGN.md, "Measurement set manifest"): every mistake is an
InputError that names the offending key and the manifest file."""

from __future__ import annotations

import textwrap

import pytest

from rfmeas.errors import InputError
from rfmeas.measurement.manifest import load_manifest
from rfmeas.model.termination import Termination
from rfmeas.io.strict import MAX_TOML_BYTES

ONE_PORT = "# Hz S RI R 50\n1e5 0.1 0.2\n2e5 0.1 0.3\n3e5 0.2 0.3\n"
TWO_PORT = ("# Hz S RI R 50\n"
            "1e5 0.1 0.2 0.5 0.1 0.5 0.1 0.1 0.2\n"
            "2e5 0.1 0.3 0.5 0.2 0.5 0.2 0.1 0.3\n"
            "3e5 0.2 0.3 0.6 0.2 0.6 0.2 0.2 0.3\n")

VALID = """\
[transformer]
name = "bench unit"
primary_turns = 3
secondary_turns = 9
notes = "second try"

[core]
shape = "toroid"
outer_diameter_mm = 12.7
inner_diameter_mm = 7.1
height_mm = 4.9

[design]
source_impedance_ohm = 50
load_impedance_ohm = 450
lowest_frequency_Hz = 1.8e6
highest_frequency_Hz = 30e6

[[sweep]]
file = "pri_open.s1p"
port1 = "primary"
termination = "open"

[[sweep]]
file = "thru.s2p"
port1 = "primary"
port2 = "secondary"
"""


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "pri_open.s1p").write_text(ONE_PORT)
    (tmp_path / "sec_load.s1p").write_text(ONE_PORT)
    (tmp_path / "thru.s2p").write_text(TWO_PORT)
    return tmp_path


def write(folder, text):
    path = folder / "manifest.toml"
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def sweep_manifest(folder, body, head=""):
    """A manifest with `head` tables and one [[sweep]] whose lines are `body`."""
    return write(folder, head + "\n[[sweep]]\n" + textwrap.dedent(body))


def with_tables(folder, head):
    """A manifest of one good open sweep after the tables in `head`."""
    return sweep_manifest(folder, 'file = "pri_open.s1p"\ntermination = "open"\n', head=head)


def refused(path, *words):
    """load_manifest(path) raises InputError naming the manifest and every word."""
    with pytest.raises(InputError) as info:
        load_manifest(path)
    exc = info.value
    assert exc.path == str(path), str(exc)
    for word in words:
        assert word in exc.message, f"{word!r} not in {exc.message!r}"
    assert str(path) in str(exc)
    return exc


def test_the_valid_manifest_loads(folder):
    m = load_manifest(write(folder, VALID))
    assert m.name == "bench unit"
    assert (m.primary_turns, m.secondary_turns) == (3, 9)
    assert m.core["shape"] == "toroid" and m.design.target_turns_ratio == pytest.approx(3.0)
    assert [s.label for s in m.sweeps] == ["pri_open.s1p", "thru.s2p"]
    assert m.sweeps[1].is_two_port and m.sweeps[0].termination.to_json() == "open"


def test_a_folder_with_its_manifest_loads(folder):
    write(folder, VALID)
    assert load_manifest(folder).name == "bench unit"


# ---------------------------------------------------------------- unknown keys, every level

@pytest.mark.parametrize("text, key", [
    ("colour = 'red'\n" + VALID, "colour"),
    (VALID.replace("notes =", "windings = 2\nnotes ="), "windings"),
    (VALID.replace("highest_frequency_Hz", "top_frequency_Hz"), "top_frequency_Hz"),
    (VALID.replace("[core]\n", "[core]\ncolour = 'grey'\n"), "colour"),
    (VALID.replace('termination = "open"', 'termination = "open"\nports = 1'), "ports"),
    (VALID + "\n[extra]\nx = 1\n", "extra"),
])
def test_unknown_keys_are_refused_by_name(folder, text, key):
    refused(write(folder, text), key)


# ---------------------------------------------------------------- types and values

@pytest.mark.parametrize("line, key", [
    ("name = 3", "name"),
    ("name = '  '", "name"),
    ("primary_turns = 'three'", "primary_turns"),
    ("primary_turns = true", "primary_turns"),
    ("primary_turns = -3", "primary_turns"),
    ("primary_turns = 0", "primary_turns"),
    ("primary_turns = 2.5", "primary_turns"),
    ("primary_turns = inf", "primary_turns"),
    ("primary_turns = nan", "primary_turns"),
    ("secondary_turns = 1979-05-27", "secondary_turns"),
    ("secondary_turns = [9]", "secondary_turns"),
    ("notes = 3", "notes"),
])
def test_bad_transformer_values_are_refused(folder, line, key):
    refused(with_tables(folder, f"[transformer]\n{line}\n"), key)


def test_whole_turns_written_as_floats_are_accepted(folder):
    m = load_manifest(with_tables(folder, "[transformer]\nprimary_turns = 3.0\n"))
    assert m.primary_turns == 3 and isinstance(m.primary_turns, int)


@pytest.mark.parametrize("text", [
    "transformer = 'bench unit'\n",
    "design = 3\n",
    "core = 'toroid'\n",
])
def test_tables_given_as_values_are_refused(folder, text):
    key = text.split(" ")[0]
    refused(with_tables(folder, text), key)


# ---------------------------------------------------------------- sweeps

def test_no_sweeps_is_refused(folder):
    refused(write(folder, VALID.split("[[sweep]]")[0]), "[[sweep]]")


def test_an_empty_sweep_array_is_refused(folder):
    refused(write(folder, "sweep = []\n"), "[[sweep]]")


@pytest.mark.parametrize("text, words", [
    ("sweep = 'pri_open.s1p'\n", ("sweep", "array of tables")),
    ("sweep = [1, 2]\n", ("sweep 1", "table")),
    ("[sweep]\nfile = 'pri_open.s1p'\n", ("sweep", "array of tables")),
])
def test_sweeps_that_are_not_tables_are_refused(folder, text, words):
    refused(write(folder, text), *words)


@pytest.mark.parametrize("body, words", [
    ('termination = "open"', ("sweep 1", "file")),
    ('file = 3\ntermination = "open"', ("sweep 1", "file")),
    ('file = "pri_open.s1p"\ntermination = "open"\nlabel = 7', ("sweep 1.label",)),
    ('file = "pri_open.s1p"\ntermination = "open"\nmethod = "bridge"', ("sweep 1.method", "must be one of")),
    ('file = "pri_open.s1p"\ntermination = "open"\nfixture = "jig"', ("sweep 1.fixture", "no jig definition")),
])
def test_bad_sweep_entries_are_refused(folder, body, words):
    refused(sweep_manifest(folder, body), *words)


def test_a_missing_sweep_file_names_that_file(folder):
    with pytest.raises(InputError) as info:
        load_manifest(sweep_manifest(folder, 'file = "nope.s1p"\ntermination = "open"\n'))
    assert info.value.path == str(folder / "nope.s1p")
    assert "not found" in info.value.message


def test_a_sweep_file_that_is_a_folder_is_refused(folder):
    (folder / "data.s1p").mkdir()
    with pytest.raises(InputError, match="folder"):
        load_manifest(sweep_manifest(folder, 'file = "data.s1p"\ntermination = "open"\n'))


@pytest.mark.parametrize("body, words", [
    ('file = "pri_open.s1p"\nport1 = "tertiary"\ntermination = "open"', ("sweep 1.port1", "tertiary")),
    ('file = "pri_open.s1p"\nport1 = 1\ntermination = "open"', ("sweep 1.port1",)),
    ('file = "thru.s2p"\nport1 = "primary"\nport2 = "primary"', ("sweep 1", "port1 and port2")),
    ('file = "thru.s2p"\nport2 = "both"', ("sweep 1.port2", "both")),
    ('file = "pri_open.s1p"\nport2 = "secondary"', ("sweep 1", "port2", "one-port")),
    ('file = "thru.s2p"\nport2 = "secondary"\ntermination = "open"', ("sweep 1", "port2", "termination")),
    ('file = "pri_open.s1p"', ("sweep 1", "termination")),
])
def test_port_errors_are_refused(folder, body, words):
    refused(sweep_manifest(folder, body), *words)


def test_secondary_on_port1_and_a_two_port_file_as_one_port(folder):
    m = load_manifest(write(folder, """\
        [[sweep]]
        file = "sec_load.s1p"
        port1 = "secondary"
        termination = "1k"
        [[sweep]]
        file = "thru.s2p"
        termination = "short"
        """))
    assert m.sweeps[0].port1 == "secondary" and m.sweeps[0].termination.to_json() == 1000.0
    assert not m.sweeps[1].is_two_port and m.sweeps[1].network.nports == 1
    assert any("one-port" in w for w in m.sweeps[1].warnings)


# ---------------------------------------------------------------- terminations

@pytest.mark.parametrize("value, expected", [
    ('"open"', "open"), ('"Short"', "short"), ('"  OPEN "', "open"),
    ('"1k"', 1000.0), ("470", 470.0), ("470.5", 470.5), ('"470"', 470.0), ('"200 ohm"', 200.0),
    ('"2.2k"', 2200.0), ('"1meg"', 1e6), ('"50Ω"', 50.0),
])
def test_terminations_are_parsed(folder, value, expected):
    m = load_manifest(sweep_manifest(folder, f'file = "pri_open.s1p"\ntermination = {value}\n'))
    assert m.sweeps[0].termination.to_json() == expected


@pytest.mark.parametrize("value", ['"ground"', '"-5"', "0", "-50", "true", "nan", "inf", '"1e400"', "[50]",
                                   '""'])
def test_bad_terminations_are_refused(folder, value):
    refused(sweep_manifest(folder, f'file = "pri_open.s1p"\ntermination = {value}\n'), "sweep 1.termination")


def test_parse_termination_names_where_and_file():
    with pytest.raises(InputError) as info:
        Termination.parse("lots", "--termination", "cmd")
    assert info.value.path == "cmd" and "--termination" in info.value.message
    assert Termination.parse(75, "x", None) == Termination.load(75.0)


# ---------------------------------------------------------------- core (validated by rfmeas.magnetics)

@pytest.mark.parametrize("table, words", [
    ("outer_diameter_mm = 12.7", ("shape",)),
    ("shape = 'pot'", ("shape", "pot")),
    ("shape = 'toroid'\nouter_diameter_mm = 12.7\ninner_diameter_mm = 7.1", ("height_mm",)),
    ("shape = 'toroid'\nouter_diameter_mm = 12.7\ninner_diameter_mm = 7.1\nheight_mm = 4.9\nmu = 800", ("mu",)),
    ("shape = 'toroid'\nouter_diameter_mm = 7\ninner_diameter_mm = 12\nheight_mm = 4.9", ("inner_diameter_mm",)),
    ("shape = 'toroid'\nouter_diameter_mm = -12\ninner_diameter_mm = 7\nheight_mm = 4.9", ("outer_diameter_mm",)),
    ("shape = 'effective'\neffective_area_mm2 = '20'\neffective_length_mm = 30", ("effective_area_mm2",)),
    ("shape = 'effective'\neffective_area_mm2 = 20\neffective_length_mm = 0", ("effective_length_mm",)),
])
def test_core_table_errors_are_refused(folder, table, words):
    refused(with_tables(folder, f"[core]\n{table}\n"), "[core]", *words)



def test_core_shape_that_is_a_list_is_refused(folder):
    refused(with_tables(folder, "[core]\nshape = ['toroid']\n"), "shape")



@pytest.mark.parametrize("table", [
    "shape = 'toroid'\nouter_diameter_mm = 1e300\ninner_diameter_mm = 1\nheight_mm = 1e300",
    "shape = 'effective'\neffective_area_mm2 = 1e-300\neffective_length_mm = 1e300",
])
def test_absurd_core_sizes_are_refused(folder, table):
    refused(with_tables(folder, f"[core]\n{table}\n"), "[core]")


# ---------------------------------------------------------------- design

@pytest.mark.parametrize("lines, words", [
    ("lowest_frequency_Hz = 30e6\nhighest_frequency_Hz = 1.8e6", ("highest_frequency_Hz",)),
    ("source_impedance_ohm = -50", ("design.source_impedance_ohm",)),
    ("load_impedance_ohm = '450'", ("design.load_impedance_ohm",)),
    ("reactance_factor = 0", ("design.reactance_factor",)),
    ("return_loss_dB = nan", ("design.return_loss_dB",)),
    ("ratio_tolerance_percent = true", ("design.ratio_tolerance_percent",)),
    ("target = 3", ("target",)),
])
def test_design_errors_are_refused(folder, lines, words):
    refused(with_tables(folder, f"[design]\n{lines}\n"), *words)


# ---------------------------------------------------------------- the file itself

def test_invalid_toml_is_refused(folder):
    refused(write(folder, "[transformer\nname = 1\n"), "not valid TOML")


def test_a_manifest_that_is_not_utf8_is_refused(folder):
    path = folder / "manifest.toml"
    path.write_bytes(b"[transformer]\nname = \"\xff\xfe\"\n")
    refused(path, "UTF-8")


def test_an_oversized_manifest_is_refused(folder):
    path = folder / "manifest.toml"
    path.write_bytes(b"# " + b"x" * MAX_TOML_BYTES + b"\n")
    refused(path, "too large")


def test_a_missing_manifest_is_refused(folder):
    refused(folder / "nope.toml", "file not found")


def test_a_folder_without_manifest_is_refused(folder):
    with pytest.raises(InputError) as info:
        load_manifest(folder)
    assert info.value.path == str(folder) and "manifest.toml" in info.value.message



def test_a_file_name_with_a_nul_character_is_refused(folder):
    with pytest.raises(InputError):
        load_manifest(sweep_manifest(folder, 'file = "a\\u0000.s1p"\ntermination = "open"\n'))
