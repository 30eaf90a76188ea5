"""Writing a command's CSV file: refused over an existing file unless --overwrite, then atomic."""

from __future__ import annotations

from pathlib import Path

from rfmeas.errors import InputError


def check_csv_target(path: Path | None, overwrite: bool) -> None:
    """Refuse an existing --csv file without --overwrite (checked before the work, so a refusal
    costs nothing), and a name that is not .csv."""
    if path is None:
        return
    if Path(path).suffix.lower() != ".csv":
        raise InputError("--csv writes comma-separated text: give a file name ending in .csv", path=path)
    if Path(path).exists() and not overwrite:
        raise InputError("exists already; pass --overwrite to replace it", path=path)


def write_csv(path: Path, text: str, overwrite: bool) -> None:
    """Write `text` to `path` atomically (rfmeas.io.atomic), checking the target again."""
    from rfmeas.io.atomic import atomic_write_text

    check_csv_target(path, overwrite)
    atomic_write_text(path, text)
