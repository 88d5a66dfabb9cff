"""Reading untrusted input files: regular files only, size-capped, never blocking.

A case file or netlist named in a pull request may be a FIFO (reading it would wait forever), a
device, a folder, an unreadable file or a name the system refuses (too long, a NUL byte). Each is
refused here with the reason and what to do, before anything is read.

Why the paths are safe: the file is opened read-only with ``O_NONBLOCK`` (so opening a FIFO with no
writer returns at once instead of waiting) and ``O_NOCTTY``; ``fstat`` on the open descriptor then
decides whether it is a regular file, so a name swapped for a FIFO between a check and the open is
still refused. At most ``limit + 1`` bytes are read, so an oversized file costs no more memory
than the limit. Nothing here writes, creates or follows anything the caller did not name.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

from crosscheck.errors import CrosscheckError

#: The longest file name (one path component) and the longest path text accepted from untrusted input.
MAX_NAME_CHARS = 255
MAX_PATH_CHARS = 4096


class InputFileError(CrosscheckError, ValueError):
    """Why an input file could not be read, in words; callers wrap it in their own error with file and key.

    ``too_large``: the file's size in bytes when it was refused for being over the limit (else None), so
    a caller can say which setting to raise.
    """

    def __init__(self, message: str, too_large: int | None = None) -> None:
        super().__init__(message)
        self.too_large = too_large


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a FIFO (named pipe)"
    if stat.S_ISSOCK(mode):
        return "a socket"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    return "not a regular file"


def check_path_text(text: str) -> None:
    """Refuse path text the system cannot take or that hides characters: NUL, control characters, overlong."""
    if any(ord(ch) < 32 or ord(ch) == 127 for ch in text):
        raise InputFileError(f"the name {text[:80]!r} contains a NUL or control character; give a plain file name")
    if len(text) > MAX_PATH_CHARS:
        raise InputFileError(f"the name is {len(text)} characters long; at most {MAX_PATH_CHARS} are accepted")
    for part in Path(text).parts:
        if len(part) > MAX_NAME_CHARS:
            raise InputFileError(
                f"the name {part[:40]!r}… has {len(part)} characters; a file name has at most {MAX_NAME_CHARS}"
            )


def read_regular(path: str | os.PathLike, limit: int) -> bytes:
    """The bytes of a regular file of at most ``limit`` bytes; anything else raises ``InputFileError``."""
    check_path_text(str(path))
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NONBLOCK | getattr(os, "O_NOCTTY", 0))
    except FileNotFoundError:
        raise InputFileError("no such file") from None
    except IsADirectoryError:
        raise InputFileError("it is a folder, not a file") from None
    except PermissionError:
        raise InputFileError("permission denied: the file cannot be read; make it readable") from None
    except OSError as exc:
        raise InputFileError(f"cannot open it ({exc.strerror or exc})") from None
    try:
        status = os.fstat(fd)
        mode = status.st_mode
        if not stat.S_ISREG(mode):
            raise InputFileError(f"it is {_kind(mode)}, not a regular file; give a text file")
        chunks, size = [], 0
        while size <= limit:
            chunk = os.read(fd, min(1 << 20, limit + 1 - size))
            if not chunk:
                break
            chunks.append(chunk)
            size += len(chunk)
    except OSError as exc:
        raise InputFileError(f"cannot read it ({exc.strerror or exc})") from None
    finally:
        os.close(fd)
    if size > limit:
        raise InputFileError(
            f"it is larger than the limit of {limit} bytes; such a file is refused", max(size, status.st_size)
        )
    return b"".join(chunks)
