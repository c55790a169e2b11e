"""Opening an input file safely: regular files only, and never more than a stated size.

Every file xcheck reads (fixture TOML, traces, peak tables) is opened through
:func:`open_regular`, which refuses a folder, a FIFO (named pipe), a device or a socket
*before* reading a byte (a FIFO would block forever, ``/dev/zero`` never ends), and a
file larger than the reader's limit. :class:`BoundedStream` caps what is read from a
stream whose length is not known in advance (the decompressed content of a gzip file).

The problems are raised as :class:`InputFileProblem`, worded to follow the file's name;
each reader turns them into its own error (fixture or trace) so the message says which
input it was.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path
from typing import BinaryIO, Protocol

from xcheck.interrupts import sigint_held

#: The kinds of file that are not regular files, as a message words them.
_KINDS = (
    (stat.S_ISDIR, "a folder"),
    (stat.S_ISFIFO, "a FIFO (named pipe)"),
    (stat.S_ISCHR, "a character device"),
    (stat.S_ISBLK, "a block device"),
    (stat.S_ISSOCK, "a socket"),
)


class InputFileProblem(Exception):
    """Why a file cannot be read as an input; the text follows the file's name."""


def size_words(count: int) -> str:
    """``count`` bytes in binary units (``"1 MiB"``, ``"2.5 GiB"``), for messages."""
    for unit, scale in (("GiB", 2**30), ("MiB", 2**20), ("KiB", 2**10)):
        if count >= scale:
            return f"{count / scale:.3g} {unit}"
    return f"{count} bytes"


def open_regular(path: str | Path, max_bytes: int, what: str) -> BinaryIO:
    """Open ``path`` for binary reading when it is a regular file of at most ``max_bytes``.

    Parameters
    ----------
    path
        The file.
    max_bytes
        Largest size accepted, in bytes.
    what
        What the file should be, for the message (``"a fixture TOML file"``).

    Returns
    -------
    BinaryIO
        The open file (blocking reads), positioned at its start.

    Raises
    ------
    OSError
        When the file cannot be opened (missing, permission denied); the caller words it.
    InputFileProblem
        When it is not a regular file or is larger than ``max_bytes``.
    """
    # O_NONBLOCK: opening a FIFO with no writer must not wait; it is refused below.
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0)
    fd = os.open(path, flags)
    handle: BinaryIO | None = None
    try:
        info = os.fstat(fd)
        if not stat.S_ISREG(info.st_mode):
            kind = next((words for test, words in _KINDS if test(info.st_mode)),
                        "not a regular file")
            raise InputFileProblem(
                f"is {kind}, not a regular file; give the path of {what}")
        if info.st_size > max_bytes:
            raise InputFileProblem(
                f"is {size_words(info.st_size)} ({info.st_size} bytes), more than the "
                f"{size_words(max_bytes)} accepted for {what}; check that this is the "
                "right file")
        os.set_blocking(fd, True)
        # Ctrl-C is held off until the file object owns the descriptor, so exactly one
        # of the two closes it below (closing it twice once reported a spurious "Bad
        # file descriptor" as the input's fault).
        with sigint_held():
            handle = os.fdopen(fd, "rb")
    except BaseException:
        if handle is not None:
            handle.close()
        else:
            os.close(fd)
        raise
    return handle


class _Readable(Protocol):
    def read(self, size: int = -1, /) -> bytes: ...


class BoundedStream:
    """A read-only stream that raises :class:`InputFileProblem` past ``max_bytes``.

    Parameters
    ----------
    raw
        The stream read from (for example pyarrow's gzip-decompressing input stream).
    max_bytes
        Largest number of bytes that may be read from ``raw`` in all.
    what
        Words for the message (``"the decompressed trace"``).
    already
        Bytes of the same content read before this stream took over (they count
        towards ``max_bytes``).
    """

    def __init__(self, raw: _Readable, max_bytes: int, what: str, already: int = 0) -> None:
        self._raw = raw
        self._left = max_bytes - already
        self._max = max_bytes
        self._what = what
        self.closed = False

    def read(self, size: int = -1, /) -> bytes:
        """Up to ``size`` bytes (all when negative), never more than the bound allows."""
        data = b""
        if self._left >= 0:  # (bytes read before this stream may already be too many)
            want = self._left + 1 if size is None or size < 0 else min(size, self._left + 1)
            data = self._raw.read(want)
            self._left -= len(data)
        if self._left < 0:
            raise InputFileProblem(
                f"holds more than {size_words(self._max)} as {self._what}, the most "
                "accepted; cut the capture shorter or decimate it when exporting")
        return data

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return False

    def close(self) -> None:
        self.closed = True
        close = getattr(self._raw, "close", None)
        if close is not None:
            close()
