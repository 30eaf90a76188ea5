"""Instrument profiles: the SCPI commands and reply format of one kind of instrument, as TOML.

Shipped profiles live in rfmeas/data/instruments/; users add their own in a
folder given by `--profiles-dir` or the RFMEAS_PROFILES environment variable
(a user profile with the same name replaces the shipped one). Keys are checked
strictly: an unknown or misspelt key is an InputError naming the key and file.
"""

from __future__ import annotations

import os
import string
from dataclasses import asdict, dataclass
from importlib import resources
from pathlib import Path

from rfmeas.errors import InputError
from rfmeas.io.strict import check_keys, parse_toml

PROFILES_ENV = "RFMEAS_PROFILES"

KINDS = ("lcr", "vna")
POINT_FORMATS = ("r_x", "z_theta_deg", "ls_rs")
TRACE_FORMATS = ("s_trace_ri", "s_trace_ma", "s_trace_db")

# command key -> the placeholders it may use (with a sample value to test-format it)
_COMMAND_FIELDS = {
    "identify": {},
    "set_frequency": {"frequency_Hz": 1.0e6},
    "set_start": {"start_Hz": 1.0e5},
    "set_stop": {"stop_Hz": 3.0e7},
    "set_points": {"points": 201},
    "set_spacing": {"spacing": "LIN"},
    "trigger": {},
    "wait": {},
    "select": {"parameter": "S11"},
    "read": {"parameter": "S11"},
    "check_error": {},
}
_REQUIRED = {
    "lcr": ("identify", "set_frequency", "read"),
    "vna": ("identify", "set_start", "set_stop", "set_points", "read"),
}
_TOP_KEYS = {"name", "kind", "description", "connection", "commands", "reply", "spacing"}
_CONNECTION_KEYS = {"read_termination", "write_termination", "timeout_ms", "retries"}
_REPLY_KEYS = {"format", "separator", "fields"}
_SPACING_KEYS = {"linear", "log"}


@dataclass(frozen=True)
class Profile:
    """One instrument profile (see the README section `acquire` for the keys).

    Commands are Python format strings; `None` means the step is not sent.
    `wait` is a query whose reply is awaited (e.g. '*OPC?'); `check_error`
    queries the error queue, whose reply starts with 0 when there is none.
    """

    name: str
    kind: str
    description: str
    path: str
    identify: str
    read: str
    setup: tuple[str, ...] = ()
    set_frequency: str | None = None
    set_start: str | None = None
    set_stop: str | None = None
    set_points: str | None = None
    set_spacing: str | None = None
    trigger: str | None = None
    wait: str | None = None
    select: str | None = None
    check_error: str | None = None
    reply_format: str = "r_x"
    reply_separator: str = ","
    reply_fields: int = 2
    spacing_linear: str = "LIN"
    spacing_log: str = "LOG"
    read_termination: str = "\n"
    write_termination: str = "\n"
    timeout_ms: int = 5000
    retries: int = 2

    def command(self, key: str, **values) -> str:
        """The text of command `key` with its placeholders filled in."""
        return getattr(self, key).format(**values)

    def to_dict(self) -> dict:
        data = asdict(self)
        data["setup"] = list(self.setup)
        return data


def _string(value, key: str, path) -> str:
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"'{key}' must be a non-empty string", path=path)
    return value


def _check_template(key: str, template: str, path) -> None:
    allowed = _COMMAND_FIELDS.get(key, {})
    try:
        names = [field for _, field, _, _ in string.Formatter().parse(template) if field is not None]
    except ValueError as exc:
        raise InputError(f"command '{key}' = {template!r} is not a valid template: {exc}", path=path) from exc
    for name in names:
        if name not in allowed:
            choices = ", ".join("{" + n + "}" for n in allowed) or "no placeholders"
            raise InputError(f"command '{key}' uses {{{name}}}; it may use {choices}", path=path)
    try:
        template.format(**allowed)
    except (ValueError, TypeError, KeyError, IndexError) as exc:
        raise InputError(f"command '{key}' = {template!r} cannot be filled in: {exc}", path=path) from exc


def parse_profile(text: str, path: str | Path = "<profile>") -> Profile:
    """Validate the TOML text of one profile and return it."""
    data = parse_toml(text, path)
    check_keys(data, _TOP_KEYS, "the profile", path)
    for key in ("name", "kind", "commands", "reply"):
        if key not in data:
            raise InputError(f"missing key '{key}'", path=path)
    kind = data["kind"]
    if kind not in KINDS:
        raise InputError(f"kind = {kind!r}; expected one of {', '.join(KINDS)}", path=path)
    fields: dict = {"name": _string(data["name"], "name", path), "kind": kind,
                    "description": str(data.get("description", "")), "path": str(path)}

    commands = data["commands"]
    check_keys(commands, set(_COMMAND_FIELDS) | {"setup"}, "[commands]", path)
    for key in _REQUIRED[kind]:
        if key not in commands:
            raise InputError(f"a '{kind}' profile needs [commands] {key}", path=path)
    for key, value in commands.items():
        if key == "setup":
            if not isinstance(value, list) or not all(isinstance(v, str) and v.strip() for v in value):
                raise InputError("[commands] setup must be a list of command strings", path=path)
            fields["setup"] = tuple(value)
            continue
        _check_template(key, _string(value, key, path), path)
        fields[key] = value

    reply = data["reply"]
    check_keys(reply, _REPLY_KEYS, "[reply]", path)
    fmt = reply.get("format")
    formats = POINT_FORMATS if kind == "lcr" else TRACE_FORMATS
    if fmt not in formats:
        raise InputError(f"[reply] format = {fmt!r}; a '{kind}' profile takes one of {', '.join(formats)}",
                         path=path)
    fields["reply_format"] = fmt
    if "separator" in reply:
        fields["reply_separator"] = _string(reply["separator"], "separator", path)
    if "fields" in reply:
        count = reply["fields"]
        if not isinstance(count, int) or isinstance(count, bool) or count < 2:
            raise InputError("[reply] fields must be an integer of at least 2", path=path)
        fields["reply_fields"] = count

    connection = data.get("connection", {})
    check_keys(connection, _CONNECTION_KEYS, "[connection]", path)
    for key in ("read_termination", "write_termination"):
        if key in connection:
            if not isinstance(connection[key], str):
                raise InputError(f"[connection] {key} must be a string", path=path)
            fields[key] = connection[key]
    for key, low in (("timeout_ms", 1), ("retries", 0)):
        if key in connection:
            value = connection[key]
            if not isinstance(value, int) or isinstance(value, bool) or value < low:
                raise InputError(f"[connection] {key} must be an integer of at least {low}", path=path)
            fields[key] = value

    spacing = data.get("spacing", {})
    check_keys(spacing, _SPACING_KEYS, "[spacing]", path)
    for key in _SPACING_KEYS & set(spacing):
        fields[f"spacing_{key}"] = _string(spacing[key], key, path)
    return Profile(**fields)


def load_profile_file(path: str | Path) -> Profile:
    path = Path(path)
    from rfmeas.io.files import read_regular_file  # regular files only, bounded in size
    from rfmeas.io.strict import decode_text

    return parse_profile(decode_text(read_regular_file(path, "profile"), path, "profile"), path)


def profile_dirs(extra: str | Path | None = None) -> list[Path]:
    """User folders to search, most important first: the option, then RFMEAS_PROFILES."""
    dirs = []
    if extra:
        dirs.append(Path(extra))
    env = os.environ.get(PROFILES_ENV)
    if env:
        dirs.extend(Path(p) for p in env.split(os.pathsep) if p)
    return dirs


def _shipped_files() -> list:
    folder = resources.files("rfmeas").joinpath("data", "instruments")
    return sorted((f for f in folder.iterdir() if f.name.endswith(".toml")), key=lambda f: f.name)


def available_profiles(extra_dir: str | Path | None = None) -> dict[str, Profile]:
    """Every profile by name; user folders override shipped profiles of the same name."""
    found: dict[str, Profile] = {}
    for item in _shipped_files():
        profile = parse_profile(item.read_text(encoding="utf-8"), f"rfmeas/data/instruments/{item.name}")
        found[profile.name] = profile
    for folder in reversed(profile_dirs(extra_dir)):
        if not folder.is_dir():
            raise InputError("profile folder does not exist", path=folder)
        for file in sorted(folder.glob("*.toml")):
            profile = load_profile_file(file)
            found[profile.name] = profile
    return found


def load_profile(name_or_path: str, extra_dir: str | Path | None = None) -> Profile:
    """A profile by name (shipped or user folder) or by the path of a .toml file."""
    if name_or_path.endswith(".toml") and Path(name_or_path).is_file():
        return load_profile_file(name_or_path)
    profiles = available_profiles(extra_dir)
    if name_or_path not in profiles:
        raise InputError(f"no instrument profile named '{name_or_path}' "
                         f"(available: {', '.join(sorted(profiles))})")
    return profiles[name_or_path]
