"""Property tests: whatever manifest arrives, load_manifest either returns a checked
measurement set or raises InputError naming a file, never another exception; and an
oversized file is refused before it is read."""

from __future__ import annotations

import datetime as dt
import math
import os
import tracemalloc

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rfmeas.errors import InputError
from rfmeas.measurement.manifest import load_manifest
from rfmeas.io.touchstone import read_touchstone
from rfmeas.measurement.sweep import WINDINGS, MeasurementSet

FUZZ = settings(max_examples=200, deadline=2000,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])

ONE_PORT = "# MHz S RI R 50\n1 0.1 0.2\n2 0.1 0.3\n3 0.2 0.3\n"
TWO_PORT = ("# MHz S RI R 50\n1 0.1 0.2 0.5 0.1 0.5 0.1 0.1 0.2\n2 0.1 0.3 0.5 0.2 0.5 0.2 0.1 0.3\n"
            "3 0.2 0.3 0.6 0.2 0.6 0.2 0.2 0.3\n")
FILES = {"pri_open.s1p": ONE_PORT, "thru.s2p": TWO_PORT, "junk.s1p": "hello\n", "empty.s2p": ""}

KNOWN_KEYS = {
    "transformer": ["name", "primary_turns", "secondary_turns", "notes"],
    "core": ["shape", "outer_diameter_mm", "inner_diameter_mm", "height_mm", "effective_area_mm2",
             "effective_length_mm", "width_mm", "length_mm", "hole_diameter_mm", "hole_spacing_mm",
             "diameter_mm"],
    "design": ["source_impedance_ohm", "load_impedance_ohm", "lowest_frequency_Hz", "highest_frequency_Hz",
               "reactance_factor", "ratio_tolerance_percent", "return_loss_dB"],
    "sweep": ["file", "port1", "port2", "termination", "label", "method", "fixture"],
}


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    root = tmp_path_factory.mktemp("fuzz")
    for name, text in FILES.items():
        (root / name).write_text(text)
    (root / "sub.s1p").mkdir()
    return root


# ---------------------------------------------------------------- TOML text from Python values

def toml_string(text: str) -> str:
    """A TOML basic string: quotes, backslashes and control characters escaped."""
    out = []
    for ch in text:
        if ch in '"\\':
            out.append("\\" + ch)
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        return ("inf" if value > 0 else "-inf") if math.isinf(value) else repr(value)
    if isinstance(value, str):
        return toml_string(value)
    if isinstance(value, (dt.datetime, dt.date)):
        return value.isoformat()
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{toml_string(k)} = {toml_value(v)}" for k, v in value.items()) + "}"
    raise TypeError(type(value))


def toml_document(doc: dict) -> str:
    lines = []
    for key, value in doc.items():
        if isinstance(value, dict):
            lines.append(f"[{toml_string(key)}]")
            lines.extend(f"{toml_string(k)} = {toml_value(v)}" for k, v in value.items())
        elif isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
            for table in value:
                lines.append(f"[[{toml_string(key)}]]")
                lines.extend(f"{toml_string(k)} = {toml_value(v)}" for k, v in table.items())
        else:
            lines.insert(0, f"{toml_string(key)} = {toml_value(value)}")
    return "\n".join(lines) + "\n"


# ---------------------------------------------------------------- strategies

SCALARS = st.one_of(
    st.integers(min_value=-2**63, max_value=2**63 - 1),
    st.floats(allow_nan=True, allow_infinity=True),
    st.booleans(),
    st.text(max_size=20),
    st.dates(),
    st.sampled_from(["open", "short", "1k", "470", "-5", "primary", "secondary", "toroid", "effective",
                     "reflection", "", "1e400", "2.2meg"]),
)
VALUES = st.recursive(SCALARS, lambda inner: st.lists(inner, max_size=3)
                      | st.dictionaries(st.text(max_size=5), inner, max_size=3), max_leaves=6)

CORE_SIZE = st.one_of(st.floats(allow_nan=True, allow_infinity=True),
                     st.sampled_from([0, -1, math.nan, math.inf, "12", True, [1], 1e300, 1e-300]))
FILE_NAMES = st.one_of(st.sampled_from(sorted(FILES) + ["sub.s1p", "missing.s1p", "", ".", "../x.s1p"]),
                       st.text(max_size=12), st.integers(), st.booleans())


PLAUSIBLE = {
    ("transformer", "name"): st.text(min_size=1, max_size=10),
    ("transformer", "primary_turns"): st.integers(1, 40),
    ("transformer", "secondary_turns"): st.integers(1, 40),
    ("transformer", "notes"): st.text(max_size=10),
    ("core", "shape"): st.sampled_from(["toroid", "effective", "two-hole", "rod"]),
    ("sweep", "file"): st.sampled_from(["pri_open.s1p", "thru.s2p"]),
    ("sweep", "port1"): st.sampled_from(WINDINGS),
    ("sweep", "port2"): st.sampled_from(WINDINGS),
    ("sweep", "termination"): st.sampled_from(["open", "short", "1k", 470, "50 ohm"]),
    ("sweep", "label"): st.text(max_size=10),
    ("sweep", "method"): st.just("reflection"),
    ("sweep", "fixture"): st.just("reflection"),
}


def value_for(table: str, key: str):
    """Mostly a plausible value (so the fuzz gets past the first check), else anything."""
    if table == "core" and key == "shape":
        anything = st.one_of(st.sampled_from(["pot", "MHz"]), st.text(max_size=8), VALUES)
    elif table == "core":
        anything = CORE_SIZE
    elif table == "sweep" and key == "file":
        anything = FILE_NAMES
    else:
        anything = VALUES
    plausible = PLAUSIBLE.get((table, key), st.floats(1.0, 1e8) if table in ("core", "design") else anything)
    if table == "core" and key != "shape":
        plausible = st.floats(1.0, 30.0)
    return st.one_of(plausible, plausible, plausible, anything)


NEEDED = {"sweep": ("file", "termination"), "core": ("shape",)}

# Hypothesis leans towards small integers, so "rarely" is drawn from a list instead.
RARELY = st.sampled_from([False] * 14 + [True])


@st.composite
def tables(draw, table: str):
    keys = draw(st.lists(st.sampled_from(KNOWN_KEYS[table]), unique=True, max_size=len(KNOWN_KEYS[table])))
    # the keys without which a table is refused straight away, most of the time
    for needed in NEEDED.get(table, ()):
        if needed not in keys and not draw(RARELY):
            keys.append(needed)
    out = {k: draw(value_for(table, k)) for k in keys}
    if draw(RARELY):  # now and then an unknown key
        out[draw(st.text(min_size=1, max_size=8))] = draw(VALUES)
    return out


@st.composite
def manifests(draw) -> str:
    doc = {}
    for table in ("transformer", "core", "design"):
        if draw(st.sampled_from([False, False, True])):
            doc[table] = draw(VALUES) if draw(RARELY) else draw(tables(table))
    if not draw(RARELY):
        doc["sweep"] = draw(st.lists(tables("sweep"), min_size=1, max_size=4))
    elif draw(st.booleans()):
        doc["sweep"] = draw(VALUES)
    if draw(RARELY):
        doc[draw(st.text(min_size=1, max_size=8))] = draw(VALUES)
    return toml_document(doc)


# ---------------------------------------------------------------- the property

def check(folder, data: bytes) -> None:
    path = folder / "manifest.toml"
    path.write_bytes(data)
    try:
        result = load_manifest(path)
    except InputError as exc:
        assert exc.message and exc.path, str(exc)
        # the error names the manifest, a file inside its folder, or the absolute path the manifest gave
        assert os.path.commonpath([os.path.abspath(exc.path), str(folder)]) == str(folder) \
            or exc.path.startswith(str(folder)) \
            or (os.path.isabs(exc.path) and exc.path in data.decode("utf-8", "replace")), exc.path
        return
    assert isinstance(result, MeasurementSet)
    assert result.sweeps and result.name
    for sweep in result.sweeps:
        assert sweep.port1 in WINDINGS
        assert sweep.is_two_port or sweep.termination.to_json() in ("open", "short") \
            or (isinstance(sweep.termination.to_json(), float) and sweep.termination.to_json() > 0)
        assert sweep.network.f.size >= 3


@FUZZ
@given(text=manifests())
def test_generated_manifests(folder, text):
    check(folder, text.encode("utf-8", "surrogatepass"))


@FUZZ
@given(data=st.binary(max_size=2000))
def test_random_bytes(folder, data):
    check(folder, data)


@FUZZ
@given(text=st.text(max_size=300))
def test_random_text(folder, text):
    check(folder, text.encode("utf-8", "surrogatepass"))


def test_generated_manifest_text_is_toml():
    """The test's own TOML writer round-trips through tomllib (so the fuzz reaches the validation)."""
    import tomllib

    doc = {"transformer": {"name": "a\u00b5\"b", "primary_turns": 3}, "core": {"shape": "toroid"},
           "sweep": [{"file": "pri_open.s1p", "termination": 470.5, "x": [1, {"y": dt.date(2024, 1, 2)}]}]}
    assert tomllib.loads(toml_document(doc)) == doc


# ---------------------------------------------------------------- oversized files

def _peak_bytes(func) -> int:
    tracemalloc.start()
    try:
        with pytest.raises(InputError) as info:
            func()
        return tracemalloc.get_traced_memory()[1], info.value
    finally:
        tracemalloc.stop()


def test_a_100_MB_touchstone_file_is_refused_without_reading_it(tmp_path):
    junk = tmp_path / "junk.s2p"
    with open(junk, "wb") as fh:
        fh.truncate(100 * 2**20)  # sparse: no disk space used
    peak, exc = _peak_bytes(lambda: read_touchstone(junk))
    assert exc.path == str(junk) and "100 MB" in exc.message
    assert peak < 5 * 2**20



def test_a_100_MB_manifest_is_refused_without_reading_it(tmp_path):
    junk = tmp_path / "manifest.toml"
    with open(junk, "wb") as fh:
        fh.truncate(100 * 2**20)
    peak, exc = _peak_bytes(lambda: load_manifest(junk))
    assert exc.path == str(junk) and "too large" in exc.message
    assert peak < 5 * 2**20
