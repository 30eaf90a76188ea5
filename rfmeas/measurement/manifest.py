"""Measurement-set manifests (TOML, see docs/DESIGN.md): strict validation, paths relative to the file."""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np

from rfmeas.errors import InputError
from rfmeas.limits import check_range
from rfmeas.usertext import plain
from rfmeas.io.strict import check_keys, read_toml
from rfmeas.model.termination import Termination
from rfmeas.measurement.sweep import (WINDINGS, DesignTarget, MeasurementSet, Sweep, WindingReadings,
                                      check_sweep_count, other_winding, refuse_repeated_sweeps, thin_for_fit)

_TOP_KEYS = {"transformer", "core", "design", "sweep", "reading"}
_TRANSFORMER_KEYS = {"name", "primary_turns", "secondary_turns", "notes"}
_DESIGN_KEYS = {
    "source_impedance_ohm", "load_impedance_ohm", "lowest_frequency_Hz", "highest_frequency_Hz",
    "reactance_factor", "ratio_tolerance_percent", "return_loss_dB",
}
_READING_KEYS = {"file", "winding", "termination", "label"}
_SWEEP_KEYS = {"file", "port1", "port2", "termination", "label", "method", "fixture"}



def _number(table: dict, key: str, where: str, path, positive=True, integer=False):
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"{where}.{key} must be a number, not {type(value).__name__} {value!r}", path)
    if integer and (not float(value).is_integer()):
        raise InputError(f"{where}.{key} must be a whole number, not {value!r}", path)
    if not math.isfinite(float(value)) or (positive and value <= 0):
        raise InputError(f"{where}.{key} must be a positive number, not {value!r}", path)
    return int(value) if integer else float(value)


def load_sweep(file_path: Path, port1: str, termination=None, port2: str | None = None,
               label: str | None = None, where: str = "sweep", manifest_path=None,
               method: str = "reflection", fixture_path: Path | None = None) -> Sweep:
    """Read one Touchstone file and check it against how it is said to be connected."""
    from rfmeas.io.touchstone import read_touchstone

    data = read_touchstone(file_path)
    label = label or file_path.name
    warnings = list(data.warnings)
    partial = _partial_sweep(data.raw_bytes, file_path, warnings)
    where_path = manifest_path or file_path
    if method != "reflection":
        if data.port_count != 2 or port2 is not None or termination is None:
            raise InputError(f"{where}: a {method} sweep is a two-port file of one winding between the "
                             "ports: give port1 (the winding) and termination (what the other winding "
                             "sees), not port2", where_path)
        z0 = np.real(np.asarray(data.network.z0)[0])
        if not np.isclose(z0[0], z0[1]):
            raise InputError(f"{where}: a {method} sweep needs equal reference impedances on both ports",
                             where_path)
        if fixture_path is not None:
            raise InputError(f"{where}: jig compensation applies to reflection sweeps only", where_path)
        if "S21" in data.unmeasured:
            raise InputError(f"{where}: a {method} sweep needs S21, and {file_path.name} did not measure it",
                             where_path)
        return Sweep(network=data.network, port1=port1, termination=termination, label=label,
                     path=str(file_path), warnings=tuple(warnings), raw_bytes=data.raw_bytes,
                     sha256=data.sha256, method=method, partial=partial)
    if port2 is not None:
        if data.port_count != 2:
            raise InputError(f"{where} says port2 = '{port2}' but {file_path.name} is a one-port file",
                             manifest_path or file_path)
        if termination is not None:
            raise InputError(f"{where}: give either port2 (a two-port sweep) or termination, not both",
                             manifest_path or file_path)
        network = data.network
        forward_only = data.forward_only
        unmeasured = data.unmeasured
    else:
        if termination is None:
            raise InputError(f"{where}: say what the other winding sees: termination = \"open\", "
                             "\"short\" or a resistance in ohms (or port2 for a two-port sweep)",
                             manifest_path or file_path)
        network = data.network
        forward_only = False
        unmeasured = ()
        if "S11" in data.unmeasured:
            raise InputError(f"{where}: a one-port sweep needs S11, and {file_path.name} did not measure it",
                             where_path)
        if data.port_count == 2:
            warnings.append("two-port file used as a one-port sweep: only S11 is fitted")
            network = network.s11
    fixture_name = None
    if fixture_path is not None:
        if port2 is not None:
            raise InputError(f"{where}: jig compensation applies to one-port reflection sweeps only",
                             where_path)
        network, fixture_name = _compensate(network, fixture_path)
        warnings.append(f"compensated for the test jig '{fixture_name}'")
    return Sweep(network=network, port1=port1, termination=termination, port2=port2,
                 forward_only=forward_only, unmeasured=unmeasured, label=label, path=str(file_path),
                 warnings=tuple(warnings), raw_bytes=data.raw_bytes, sha256=data.sha256,
                 fixture=fixture_name, partial=partial)


def _partial_sweep(raw_bytes: bytes, file_path: Path, warnings: list[str]) -> bool:
    """True (with a warning naming the file) when the file is marked as an incomplete sweep."""
    from rfmeas.io.incomplete import marked_incomplete

    if not marked_incomplete(raw_bytes):
        return False
    warnings.append(f"{file_path.name} is marked as an incomplete sweep (its acquisition was interrupted): "
                    "its data are used, but no design verdict may rest on it")
    return True


def _compensate(network, fixture_path: Path):
    """The one-port `network` as the DUT would read without the jig (rfmeas.measurement.fixture)."""
    from rfmeas.measurement.fixture import load_fixture

    fixture = load_fixture(fixture_path)
    s11 = fixture.compensate_reflection(network.f, network.s[:, 0, 0],
                                        float(np.real(network.z0[0, 0])))
    compensated = network.copy()
    compensated.s = np.asarray(s11).reshape(-1, 1, 1)
    return compensated, fixture.name


_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f]")


def _refuse_control_characters(text: str, key: str, path, allowed: str = "") -> None:
    """Names end up on terminals, in reports and in the history: no escape sequences in them."""
    bad = [c for c in _CONTROL.findall(text) if c not in allowed]
    if bad:
        raise InputError(f"{key} holds a control character ({plain(bad[0])}); use plain text", path)


def _winding(value, key, where, path) -> str:
    if value not in WINDINGS:
        raise InputError(f"{where}.{key} must be 'primary' or 'secondary', not {value!r}", path)
    return value


def load_manifest(path: str | Path) -> MeasurementSet:
    """Read and validate a manifest and every sweep it names."""
    path = Path(path)
    if path.is_dir():
        candidate = path / "manifest.toml"
        if not candidate.is_file():
            raise InputError("is a folder without a manifest.toml", path)
        path = candidate
    text, doc = read_toml(path, "manifest")
    for key in doc:
        if key not in _TOP_KEYS:
            raise InputError(f"unknown key '{key}' (allowed tables: {', '.join(sorted(_TOP_KEYS))})", path)

    transformer = doc.get("transformer", {})
    check_keys(transformer, _TRANSFORMER_KEYS, "[transformer]", path)
    name = transformer.get("name", path.parent.name or path.stem)
    if not isinstance(name, str) or not name.strip():
        raise InputError("transformer.name must be a non-empty string", path)
    _refuse_control_characters(name, "transformer.name", path)
    turns = {}
    for key in ("primary_turns", "secondary_turns"):
        if key in transformer:
            turns[key] = check_range("turns", _number(transformer, key, "transformer", path, integer=True),
                                     f"transformer.{key}", path)
    notes = transformer.get("notes", "")
    if not isinstance(notes, str):
        raise InputError("transformer.notes must be a string", path)
    _refuse_control_characters(notes, "transformer.notes", path, allowed="\n\t")

    core = doc.get("core")
    if core is not None:
        if not isinstance(core, dict):
            raise InputError("[core] must be a table", path)
        from rfmeas.magnetics.geometry import geometry_from_table

        geometry_from_table(core, path)  # validates; the table itself is kept
        core = dict(core)

    design = None
    if "design" in doc:
        table = doc["design"]
        check_keys(table, _DESIGN_KEYS, "[design]", path)
        values = {k: check_range(k, _number(table, k, "design", path), f"design.{k}", path) for k in table}
        lo, hi = values.get("lowest_frequency_Hz"), values.get("highest_frequency_Hz")
        if lo and hi and hi <= lo:
            raise InputError("design.highest_frequency_Hz must be above lowest_frequency_Hz", path)
        design = DesignTarget(**values)

    readings = _load_readings(doc.get("reading"), path)
    entries = doc.get("sweep")
    if not entries:
        more = (" (LCR readings alone: `rfmeas core --readings FILE --turns N` gives A_L and µ)"
                if readings else "")
        raise InputError("no [[sweep]] entries: a measurement set needs at least one sweep" + more, path)
    if not isinstance(entries, list):
        raise InputError("sweep must be an array of tables ([[sweep]])", path)
    check_sweep_count(len(entries), path)
    sweeps, names = [], []
    for i, entry in enumerate(entries, start=1):
        where = f"sweep {i}"
        check_keys(entry, _SWEEP_KEYS, f"[{where}]", path)
        if "file" not in entry or not isinstance(entry["file"], str):
            raise InputError(f"{where} needs file = \"...\" (a Touchstone file relative to the manifest)", path)
        from rfmeas.model.methods import METHODS

        method = entry.get("method", "reflection")
        if method not in METHODS:
            raise InputError(f"{where}.method must be one of {', '.join(METHODS)}, not {method!r}", path)
        fixture_path = None
        if "fixture" in entry:
            if not isinstance(entry["fixture"], str):
                raise InputError(f"{where}.fixture must be the path of a jig definition (TOML)", path)
            fixture_path = path.parent / entry["fixture"]
            if fixture_path.is_dir():
                fixture_path = fixture_path / "fixture.toml"
            if not fixture_path.is_file():
                raise InputError(f"{where}.fixture: no jig definition at '{entry['fixture']}' "
                                 "(a fixture.toml, or a folder holding one)", path)
        port1 = _winding(entry.get("port1", "primary"), "port1", where, path)
        port2 = entry.get("port2")
        if port2 is not None:
            port2 = _winding(port2, "port2", where, path)
            if port2 != other_winding(port1):
                raise InputError(f"{where}: port1 and port2 must be different windings", path)
        termination = None
        if "termination" in entry:
            termination = Termination.parse(entry["termination"], where, path)
        label = entry.get("label")
        if label is not None and not isinstance(label, str):
            raise InputError(f"{where}.label must be a string", path)
        _refuse_control_characters(label or "", f"{where}.label", path)
        file_path = (path.parent / entry["file"])
        sweep = load_sweep(file_path, port1, termination, port2, label or entry["file"], where, path,
                           method, fixture_path)
        sweeps.append(sweep)
        names.append(f"{where} ('{entry['file']}')")
    sweeps = refuse_repeated_sweeps(sweeps, names, path)

    return MeasurementSet(
        name=name.strip(), sweeps=thin_for_fit(sweeps),
        primary_turns=turns.get("primary_turns"), secondary_turns=turns.get("secondary_turns"),
        core=core, design=design, manifest_path=str(path), manifest_text=text, notes=notes, readings=readings,
    )


def _load_readings(entries, path: Path) -> tuple[WindingReadings, ...]:
    """The [[reading]] tables: LCR readings of one winding with the other open (CSV or TOML)."""
    from rfmeas.io.readings import load_readings

    if entries is None:
        return ()
    if not isinstance(entries, list):
        raise InputError("reading must be an array of tables ([[reading]])", path)
    out, seen = [], {}  # one file per winding: a third entry is refused before it is read
    for i, entry in enumerate(entries, start=1):
        where = f"reading {i}"
        check_keys(entry, _READING_KEYS, f"[{where}]", path)
        if "file" not in entry or not isinstance(entry["file"], str):
            raise InputError(f"{where} needs file = \"...\" (LCR readings, CSV or TOML, relative to the manifest)",
                             path)
        winding = _winding(entry.get("winding", "primary"), "winding", where, path)
        termination = entry.get("termination", "open")
        if termination != "open":
            raise InputError(f"{where}.termination: readings are taken with the other winding open "
                             f"(\"open\"), not {termination!r}", path)
        if winding in seen:
            raise InputError(f"{where}: the {winding} was already read in {seen[winding]}; give one file of "
                             "readings per winding", path)
        seen[winding] = where
        label = entry.get("label", entry["file"])
        if not isinstance(label, str):
            raise InputError(f"{where}.label must be a string", path)
        _refuse_control_characters(label, f"{where}.label", path)
        data = load_readings(path.parent / entry["file"])
        if not data.impedance_ohm[0].imag > 0:
            raise InputError(f"{where}: the lowest-frequency reading of {entry['file']} is not inductive "
                             "(Ls ≤ 0): not an open winding on a core", path)
        out.append(WindingReadings(label, winding, data))
    return tuple(out)


def parse_turns(text: str) -> tuple[int, int]:
    """'3:9' -> (3, 9)."""
    try:
        a, b = (int(x) for x in str(text).split(":"))
    except ValueError:
        raise InputError(f"--turns must look like PRIMARY:SECONDARY (e.g. 3:9), not {text!r}") from None
    if a <= 0 or b <= 0:
        raise InputError(f"--turns must be positive whole numbers, not {text!r}")
    return check_range("turns", a, "--turns primary"), check_range("turns", b, "--turns secondary")


def measurement_set_from_files(paths: list[str | Path], turns: tuple[int, int] | None = None,
                               termination: str = "open", port1: str = "primary",
                               name: str | None = None) -> MeasurementSet:
    """A quick measurement set without a manifest: two-port files are primary→secondary thrus,
    one-port files are `port1` with the other winding as `termination`."""
    sweeps = []
    check_sweep_count(len(paths))
    term = Termination.parse(termination, "--termination", None)
    for p in paths:
        p = Path(p)
        if p.suffix.lower() == ".s2p":
            sweeps.append(load_sweep(p, port1, None, other_winding(port1), p.name))
        else:
            sweeps.append(load_sweep(p, port1, term, None, p.name))
    sweeps = refuse_repeated_sweeps(sweeps, [f"'{p}'" for p in paths])
    return MeasurementSet(
        name=name or Path(paths[0]).stem, sweeps=thin_for_fit(sweeps),
        primary_turns=turns[0] if turns else None, secondary_turns=turns[1] if turns else None,
    )
