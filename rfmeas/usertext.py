"""User text on a terminal: file, sweep and unit names, and messages quoting them, shown verbatim.

Two dangers: the terminal obeys control characters (an ANSI escape in a unit
name can recolour, move the cursor or retitle the window; a newline splits a
one-line message), and rich reads square brackets as markup (`[/]` raises,
`backup[old]/x.s1p` loses `[old]`). So every piece of user text goes through
`plain` (control characters shown as visible escapes) and, where it is printed
with rich markup, through `markup` (brackets escaped as well).
"""

from __future__ import annotations

import re

# C0 and C1 controls, DEL, and the Unicode bidirectional overrides that reorder text on screen.
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u200e\u200f\u202a-\u202e\u2066-\u2069]")
# Lone surrogates: bytes of a file name that are not UTF-8 (os.fsdecode's surrogateescape).
_SURROGATE = re.compile("[\ud800-\udfff]")


def _escape_control(match: re.Match) -> str:
    code = ord(match.group())
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def _escape_surrogate(match: re.Match) -> str:
    code = ord(match.group())
    return f"\\x{code - 0xDC00:02x}" if 0xDC80 <= code <= 0xDCFF else f"\\u{code:04x}"


def plain(text) -> str:
    """`text` with every control character (tab and newline too) and every undecodable byte of a file
    name written as a visible escape (`\\x1b`, `\\n`, `\\xff`): one line, nothing the terminal obeys."""
    text = str(text)
    text = _SURROGATE.sub(_escape_surrogate, text)
    return _CONTROL.sub(_escape_control, text.replace("\n", "\\n").replace("\t", "\\t"))


def visible_lines(text) -> str:
    """Like `plain`, but newlines and tabs kept: for whole blocks of output, not single names."""
    text = _SURROGATE.sub(_escape_surrogate, str(text))
    return _CONTROL.sub(lambda m: m.group() if m.group() in "\n\t" else _escape_control(m), text)


def markup(text) -> str:
    """`plain(text)` with rich markup escaped, for an f-string printed by a rich console."""
    from rich.markup import escape

    return escape(plain(text))
