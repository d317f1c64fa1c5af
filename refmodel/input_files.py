"""Opening the files a user names (specs, data files) without hanging on a FIFO or a device.

A path may name a FIFO, a terminal, ``/dev/zero`` or a socket: opening or
reading such a thing blocks, or never ends. Every user-named input file is
opened here, non-blocking, and refused unless it is a regular file.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path
from typing import BinaryIO

from .errors import SpecError

#: Largest block spec read, in bytes (a spec is a few kilobytes; this only stops a runaway file).
MAX_SPEC_BYTES = 1 << 20


def open_regular(path: str | Path, field: str, allowed: str = "a regular file") -> BinaryIO:
    """Open ``path`` for reading in binary mode, refusing anything but a regular file.

    Parameters
    ----------
    path : str or pathlib.Path
        The file the user named.
    field : str
        Name of the field or option in errors (``"SPEC"``, ``"DIR"``...).
    allowed : str
        What the error says is allowed.

    Returns
    -------
    BinaryIO
        The open file (blocking reads again, positioned at the start).

    Raises
    ------
    SpecError
        When the file cannot be opened, or is a FIFO, a device, a socket or a folder.
    """
    p = os.fspath(path)
    try:
        # O_NONBLOCK: opening a FIFO with no writer returns at once instead of waiting for one.
        fd = os.open(p, os.O_RDONLY | os.O_NONBLOCK | getattr(os, "O_NOCTTY", 0))
    except OSError as exc:
        raise SpecError(field, f"cannot read {p!r} ({exc.strerror})", allowed) from None
    try:
        mode = os.fstat(fd).st_mode
        if not stat.S_ISREG(mode):
            kind = ("a folder" if stat.S_ISDIR(mode) else "a FIFO" if stat.S_ISFIFO(mode) else
                    "a device" if stat.S_ISCHR(mode) or stat.S_ISBLK(mode) else "a socket" if stat.S_ISSOCK(mode)
                    else "not a regular file")
            raise SpecError(field, f"{p!r} is {kind}", allowed)
        os.set_blocking(fd, True)
        return os.fdopen(fd, "rb")
    except BaseException:
        os.close(fd)
        raise


def read_text(path: str | Path, field: str, *, max_bytes: int, allowed: str) -> str:
    """The UTF-8 text of a regular file of at most ``max_bytes`` bytes.

    Raises
    ------
    SpecError
        For a file that cannot be read, is not a regular file (:func:`open_regular`),
        is larger than ``max_bytes``, or is not UTF-8.
    """
    p = os.fspath(path)
    with open_regular(p, field, allowed) as f:
        data = f.read(max_bytes + 1)
    if len(data) > max_bytes:
        raise SpecError(field, f"{p!r} is larger than {max_bytes} bytes", allowed)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise SpecError(field, f"{p!r} is not UTF-8 text (byte {exc.start} is {data[exc.start]:#04x})",
                        allowed) from None
