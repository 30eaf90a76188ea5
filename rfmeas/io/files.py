"""Reading a user's file: regular files only, bounded in size, never blocking.

Every reader of user input (Touchstone sweeps, manifests, jig definitions,
instrument profiles, material tables) goes through `read_regular_file`, so the
rules are the same everywhere:

- only a regular file is opened (symbolic links are followed); a folder, FIFO,
  socket or device is refused before it is opened, because reading a FIFO or a
  terminal blocks until someone writes to it;
- the file is opened non-blocking and checked again after opening, so a file
  swapped for a FIFO between the check and the open cannot hang the read;
- the size is checked before reading and the read stops one byte past the
  limit, so a file that grows while it is read cannot exhaust memory.

A read of a regular file does not block on a local disk, so no timer is
needed; the size bound also bounds the time.
"""

from __future__ import annotations

import os
import stat

from rfmeas.errors import InputError

MAX_TOUCHSTONE_BYTES = 64 * 1024 * 1024
"""A 100,001-point two-port sweep is about 20 MB of text."""
MAX_TOML_BYTES = 1_000_000
"""Our TOML files (manifests, jigs, profiles, material tables) are a few kB."""

_CHUNK_BYTES = 1 << 20


def _kind(mode: int) -> str:
    """A plain name for what a non-regular path is."""
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a named pipe (FIFO)"
    if stat.S_ISSOCK(mode):
        return "a socket"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    return "not a regular file"


def _size_text(size: int) -> str:
    return f"{size / 2**20:.0f} MB" if size >= 2**20 else f"{size / 1000:.0f} kB"


def too_large(size: int, limit: int, what: str) -> str:
    """The one message for a file over its size limit."""
    return f"the file is too large for a {what} ({_size_text(size)}; rfmeas accepts up to {_size_text(limit)})"


def _open_nonblocking(path) -> int:
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0) | getattr(os, "O_CLOEXEC", 0)
    return os.open(path, flags | getattr(os, "O_BINARY", 0))


def check_regular_file(path, what: str = "file") -> os.stat_result:
    """stat() of `path`, which must exist and be a regular file; else InputError naming it."""
    try:
        info = os.stat(path)
    except FileNotFoundError:
        raise InputError(f"file not found (no such {what})", path) from None
    except ValueError as exc:  # a NUL character in the name
        raise InputError(f"not a usable file name ({exc})", path) from None
    except OSError as exc:  # a symlink loop, a name too long, no permission on a folder
        raise InputError(f"cannot read the {what}: {exc.strerror or exc}", path) from None
    if not stat.S_ISREG(info.st_mode):
        raise InputError(f"is {_kind(info.st_mode)}, not a {what} (rfmeas reads regular files only)", path)
    return info


def read_regular_file(path, what: str = "file", max_bytes: int = MAX_TOML_BYTES) -> bytes:
    """The bytes of a regular file of at most `max_bytes`; any problem is an InputError naming `path`."""
    info = check_regular_file(path, what)
    if info.st_size > max_bytes:
        raise InputError(too_large(info.st_size, max_bytes, what), path)
    try:
        fd = _open_nonblocking(path)
    except OSError as exc:
        raise InputError(f"cannot read the {what}: {exc.strerror or exc}", path) from None
    try:
        mode = os.fstat(fd).st_mode
        if not stat.S_ISREG(mode):  # replaced between the check and the open
            raise InputError(f"is {_kind(mode)}, not a {what} (rfmeas reads regular files only)", path)
        chunks, total = [], 0
        while total <= max_bytes:
            chunk = os.read(fd, min(_CHUNK_BYTES, max_bytes + 1 - total))
            if not chunk:
                break
            chunks.append(chunk)
            total += len(chunk)
    except OSError as exc:
        raise InputError(f"cannot read the {what}: {exc.strerror or exc}", path) from None
    finally:
        os.close(fd)
    if total > max_bytes:
        raise InputError(too_large(total, max_bytes, what), path)
    return b"".join(chunks)
