"""Crash-safe file writes: a reader never sees a half-written file.

The data go to a temporary file in the destination folder, are flushed to
disk, and the temporary file then replaces the destination in one step
(`os.replace` is atomic on POSIX and Windows when both are on one volume).
"""

from __future__ import annotations

import os
import secrets
from pathlib import Path

from rfmeas.errors import InputError


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> None:
    """Write `data` to `path` atomically; any failure raises InputError naming `path`."""
    target = Path(path)
    folder = target.parent
    if not folder.is_dir():
        raise InputError(f"cannot write the file: the folder {str(folder)!r} does not exist", path=target)
    if target.is_dir():
        raise InputError("cannot write the file: a folder of that name exists", path=target)
    tmp = folder / f".{target.name}.{secrets.token_hex(6)}.tmp"
    try:
        # os.open with mode 0o666 lets the umask decide the final permissions,
        # as for a file created the ordinary way.
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0), 0o666)
        try:
            view = memoryview(data)
            while view:
                written = os.write(fd, view)
                view = view[written:]
            os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, target)
    except OSError as exc:
        _remove_quietly(tmp)
        reason = exc.strerror or str(exc)
        raise InputError(f"cannot write the file: {reason}", path=target) from exc
    except BaseException:
        _remove_quietly(tmp)
        raise
    _sync_folder(folder)


def atomic_write_text(path: str | os.PathLike, text: str, encoding: str = "utf-8") -> None:
    """Encode `text` and write it to `path` atomically (see `atomic_write_bytes`)."""
    try:
        data = text.encode(encoding)
    except (UnicodeEncodeError, LookupError) as exc:
        raise InputError(f"cannot write the file: the text cannot be encoded as {encoding} ({exc})",
                         path=path) from exc
    atomic_write_bytes(path, data)


def _remove_quietly(tmp: Path) -> None:
    """Remove a leftover temporary file; it may never have been created."""
    try:
        tmp.unlink()
    except FileNotFoundError:
        return
    except OSError:
        # The write already failed and is being reported; a temporary file we
        # cannot remove must not replace that error.
        return


def _sync_folder(folder: Path) -> None:
    """Flush the folder entry so the rename survives a power cut (POSIX only)."""
    if os.name != "posix":
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        # Some file systems refuse fsync on folders; the data are written already.
        return
    finally:
        os.close(fd)
