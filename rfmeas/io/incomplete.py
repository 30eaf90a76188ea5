"""The mark of a sweep file that was never finished (an interrupted acquisition).

rfmeas's acquisition writes INCOMPLETE_SWEEP_MARK as the first line of a
sweep file until the sweep is finished (rfmeas.instruments.touchstone_stream),
and keeps the file under that mark when it stops early. Such a file still
loads in any Touchstone reader; rfmeas uses its data but warns and rests no
design verdict on it (Sweep.partial).
"""

from __future__ import annotations

INCOMPLETE_SWEEP_MARK = "! INCOMPLETE SWEEP"
_SEARCH_BYTES = 4096


def marked_incomplete(data: bytes) -> bool:
    """True when a comment line before the file's first option or data line carries the mark."""
    head = bytes(data[:_SEARCH_BYTES]).decode("utf-8", errors="replace")
    mark = INCOMPLETE_SWEEP_MARK.lstrip("!").split()
    for line in head.splitlines():
        text = line.strip()
        if text and not text.startswith("!"):
            return False  # the option line or the first data row: no mark before it
        words = text.lstrip("!").replace(":", " ").upper().split()
        if words[:len(mark)] == mark:
            return True
    return False
