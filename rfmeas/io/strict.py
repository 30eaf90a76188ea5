"""Strict TOML input shared by manifests, jig definitions, instrument profiles and material tables.

Every problem is an InputError naming the file: unreadable or oversized files,
text that is not UTF-8 or not TOML, unknown or missing keys.
"""

from __future__ import annotations

import tomllib

from rfmeas.errors import InputError
from rfmeas.io import files

MAX_TOML_BYTES = files.MAX_TOML_BYTES
"""Our TOML files are a few kB; anything above this is not one of them (checked before reading)."""
MAX_TOML_DEPTH = 32
"""Our TOML files nest three or four levels; deeper nesting is refused before it is parsed."""



def _too_deep(text: str) -> bool:
    """True when brackets and braces nest deeper than MAX_TOML_DEPTH, counted outside strings.

    tomllib parses nested arrays and inline tables recursively and ends in a
    RecursionError on a few hundred levels; this cheap scan refuses such text first.
    Quoted text is skipped roughly (escapes and multi-line strings are treated
    alike), which can only over-count for text nobody writes by hand.
    """
    depth = 0
    quote = None
    escaped = False
    for char in text:
        if quote is not None:
            if escaped:
                escaped = False
            elif char == "\\" and quote == '"':
                escaped = True
            elif char == quote:
                quote = None
            continue
        if char in "\"'":
            quote = char
        elif char == "#":
            quote = "\n"  # a comment runs to the end of the line
        elif char in "[{":
            depth += 1
            if depth > MAX_TOML_DEPTH:
                return True
        elif char in "]}":
            depth = max(depth - 1, 0)
    return False


def parse_toml(text: str, path) -> dict:
    if _too_deep(text):
        raise InputError(f"not valid TOML for rfmeas: brackets nest more than {MAX_TOML_DEPTH} levels deep",
                         path)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", path) from None
    except RecursionError:
        raise InputError("not valid TOML for rfmeas: nested too deeply", path) from None


def read_toml(path, what: str = "file") -> tuple[str, dict]:
    """(text, parsed document) of a TOML file; `what` names the kind of file in messages."""
    text = decode_text(files.read_regular_file(path, what, MAX_TOML_BYTES), path, what)
    return text, parse_toml(text, path)


def decode_text(raw: bytes, path, what: str = "file") -> str:
    """UTF-8 text of a TOML file's bytes (InputError naming `path` when it is not text)."""
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(f"not a text file (a {what} is UTF-8 TOML)", path) from None


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
