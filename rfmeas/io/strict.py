"""Strict TOML input shared by manifests, jig definitions, instrument profiles and material tables.

Every problem is an InputError naming the file: unreadable or oversized files,
text that is not UTF-8 or not TOML, unknown or missing keys.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

from ..errors import InputError

MAX_TOML_BYTES = 1_000_000
"""Our TOML files are a few kB; anything above this is not one of them (checked before reading)."""


def parse_toml(text: str, path) -> dict:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", path) from None


def read_toml(path, what: str = "file") -> tuple[str, dict]:
    """(text, parsed document) of a TOML file; `what` names the kind of file in messages."""
    path = Path(path)
    try:
        if path.is_dir():
            raise InputError(f"is a folder, not a {what}", path)
        if path.stat().st_size > MAX_TOML_BYTES:
            raise InputError(f"too large for a {what} (over 1 MB)", path)
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"no such file (the {what} was not found)", path) from None
    except (OSError, ValueError) as exc:  # ValueError: a NUL in the name
        raise InputError(f"cannot read the {what}: {getattr(exc, 'strerror', None) or exc}", path) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(f"not a text file (a {what} is UTF-8 TOML)", path) from None
    return text, parse_toml(text, path)


def check_keys(table, allowed, where: str, path, required=()) -> None:
    """`table` must be a table holding only `allowed` keys and every `required` one."""
    if not isinstance(table, dict):
        raise InputError(f"{where} must be a table", path)
    for key in table:
        if key not in allowed:
            raise InputError(f"unknown key '{key}' in {where} (allowed: {', '.join(sorted(allowed))})", path)
    for key in required:
        if key not in table:
            raise InputError(f"{where} needs '{key}'", path)
