"""Property tests: whatever bytes arrive, the reader either returns a clean
network or raises InputError, never another exception."""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rfmeas.errors import InputError
from rfmeas.io.touchstone import MAX_POINTS, MAX_S_MAGNITUDE, read_touchstone_bytes
from rfmeas.limits import FREQUENCY_RANGE_HZ

FUZZ = settings(max_examples=200, deadline=2000, suppress_health_check=[HealthCheck.too_slow])

VALID_V1 = """! sweep of a test winding
# MHz S RI R 50
1 0.1 0.2 0.7 -0.1 0.6 -0.2 0.3 0.05
2 0.15 0.25 0.65 -0.15 0.55 -0.25 0.35 0.1
3 0.18 0.28 0.62 -0.18 0.52 -0.28 0.38 0.12
4 0.2 0.3 0.6 -0.2 0.5 -0.3 0.4 0.15
5 0.22 0.31 0.58 -0.22 0.48 -0.31 0.42 0.16
"""

VALID_V2 = """[Version] 2.0
# kHz S MA R 50
[Number of Ports] 2
[Two-Port Data Order] 12_21
[Reference] 50 75
[Number of Frequencies] 4
[Network Data]
100 0.5 10 0.7 -20 0.6 -25 0.4 30
200 0.5 11 0.7 -21 0.6 -26 0.4 31
300 0.5 12 0.7 -22 0.6 -27 0.4 32
400 0.5 13 0.7 -23 0.6 -28 0.4 33
[End]
"""

# Tokens a garbled file might contain: numbers of every kind, option words,
# keywords, comment marks, junk.
GARBAGE = st.sampled_from([
    "0", "-1", "1e6", "1e300", "1e-300", "1e400", "nan", "-inf", "abc", "#", "!", "[", "]", "[End]", "R", "RI", "DB",
    "MHz", "S", "Z", "1.5.3", "1-2", "50+5j", "(50,1)", "1,5", "0x10", "1_0", "\u00b5", "\x00", "\t", "12_21", "",
])


def check(data: bytes, name: str) -> None:
    """Either a clean result or InputError naming the source; any other exception fails the test."""
    try:
        result = read_touchstone_bytes(data, name)
    except InputError as exc:
        assert exc.path == name
        assert exc.message
        return
    f_Hz = result.network.f
    assert f_Hz.size >= 3
    assert np.all(np.isfinite(f_Hz)) and f_Hz[0] > 0 and np.all(np.diff(f_Hz) > 0)
    assert np.all(np.isfinite(result.network.s))
    # nothing the numerics downstream would overflow on (see "Reliability" in the README)
    assert FREQUENCY_RANGE_HZ[0] <= f_Hz[0] and f_Hz[-1] <= FREQUENCY_RANGE_HZ[1]
    assert np.max(np.abs(result.network.s)) <= MAX_S_MAGNITUDE and f_Hz.size <= MAX_POINTS
    assert result.network.nports == result.port_count
    assert result.raw_bytes == data


@FUZZ
@given(data=st.binary(max_size=2000), name=st.sampled_from(["x.s1p", "x.s2p", "x.ts"]))
def test_random_bytes(data, name):
    check(data, name)


@FUZZ
@given(text=st.text(alphabet=st.characters(codec="utf-8"), max_size=400),
       name=st.sampled_from(["x.s1p", "x.s2p"]))
def test_random_text(text, name):
    check(text.encode("utf-8"), name)


@st.composite
def mutated(draw):
    """A valid file with lines and tokens deleted, duplicated, swapped or garbled."""
    lines = [line.split(" ") for line in draw(st.sampled_from([VALID_V1, VALID_V2])).splitlines()]
    for _ in range(draw(st.integers(1, 6))):
        op = draw(st.sampled_from(["del_line", "dup_line", "swap_lines", "del_token", "dup_token",
                                   "garble_token", "insert_token"]))
        if not lines:
            break
        i = draw(st.integers(0, len(lines) - 1))
        if op == "del_line":
            del lines[i]
        elif op == "dup_line":
            lines.insert(draw(st.integers(0, len(lines))), list(lines[i]))
        elif op == "swap_lines":
            j = draw(st.integers(0, len(lines) - 1))
            lines[i], lines[j] = lines[j], lines[i]
        else:
            line = lines[i]
            k = draw(st.integers(0, max(len(line) - 1, 0)))
            if op == "del_token" and line:
                del line[k]
            elif op == "dup_token" and line:
                line.insert(k, line[k])
            elif op == "garble_token" and line:
                line[k] = draw(GARBAGE)
            elif op == "insert_token":
                line.insert(k, draw(GARBAGE))
    return "\n".join(" ".join(line) for line in lines) + "\n"


@FUZZ
@given(text=mutated())
def test_mutated_valid_files(text):
    check(text.encode("utf-8"), "mutated.s2p")


def test_unmutated_files_load():
    # The seeds of the mutations are themselves valid.
    assert read_touchstone_bytes(VALID_V1.encode(), "a.s2p").network.f.size == 5
    assert read_touchstone_bytes(VALID_V2.encode(), "b.s2p").network.f.size == 4
