"""Reading an input file: a regular file only, within a size limit.

A FIFO would block the reader forever, a device such as ``/dev/zero``
would be read until memory runs out, and a directory is no file: all are
refused at once, before a byte is read.  The file is opened without
blocking and checked on the open descriptor, so a file replaced between
the check and the read cannot slip through.
"""

from __future__ import annotations

import os
import stat

from extract.errors import InputError

__all__ = ["check_input", "read_input"]

_KINDS = ((stat.S_ISFIFO, "a FIFO (named pipe)"), (stat.S_ISCHR, "a character device"),
          (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket"))


def _refuse_kind(path: str, mode: int, what: str) -> None:
    if stat.S_ISDIR(mode):
        raise InputError(path, f"is a directory, not a {what}")
    if not stat.S_ISREG(mode):
        kind = next((name for test, name in _KINDS if test(mode)), "not a regular file")
        raise InputError(path, f"is {kind}, not a {what}; dynshare reads regular files only")


def check_input(path: str, what: str) -> None:
    """Refuse ``path`` unless it names an existing regular file.

    Raises
    ------
    InputError
        Empty name, missing file, directory, FIFO, device or socket.

    Examples
    --------
    >>> check_input("/dev/zero", "layout file")
    Traceback (most recent call last):
    ...
    extract.errors.InputError: /dev/zero: is a character device, not a layout file; dynshare reads regular files only
    """
    if not path:
        raise InputError("''", f"an empty name is not a {what}")
    try:
        mode = os.stat(path).st_mode
    except FileNotFoundError:
        raise InputError(path, "file not found") from None
    except (OSError, ValueError) as exc:
        raise InputError(path, f"cannot read: {getattr(exc, 'strerror', None) or exc}") from None
    _refuse_kind(path, mode, what)


def read_input(path: str, what: str, limit: int) -> bytes:
    """The whole content of the regular file ``path``.

    Parameters
    ----------
    path : str
    what : str
        What the file is, for messages (``"tech file"``).
    limit : int
        Largest size accepted, in bytes.

    Returns
    -------
    bytes

    Raises
    ------
    InputError
        As :func:`check_input`, and a file larger than ``limit``.

    Notes
    -----
    ``open(O_NONBLOCK)`` then ``fstat`` on the descriptor: a FIFO opened
    this way does not wait for a writer.  Cost: one read of the file.

    Examples
    --------
    >>> import tempfile
    >>> with tempfile.NamedTemporaryFile("wb", delete=False) as f:
    ...     _ = f.write(b"12345")
    >>> read_input(f.name, "tech file", 10)
    b'12345'
    >>> read_input(f.name, "tech file", 4)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    extract.errors.InputError: ...: is 5 bytes, more than a tech file may be (4 bytes)
    >>> os.unlink(f.name)
    """
    check_input(path, what)
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except OSError as exc:
        raise InputError(path, f"cannot read: {exc.strerror or exc}") from None
    try:
        info = os.fstat(fd)
        _refuse_kind(path, info.st_mode, what)
        if info.st_size > limit:
            raise InputError(path, f"is {info.st_size} bytes, more than a {what} may be ({limit} bytes)")
        with os.fdopen(fd, "rb", closefd=False) as fh:
            # read(n) reserves n bytes first: ask for the size the file has
            data = fh.read(info.st_size + 1)
    except OSError as exc:
        raise InputError(path, f"cannot read: {exc.strerror or exc}") from None
    finally:
        os.close(fd)
    if len(data) > limit:
        raise InputError(path, f"grew past {limit} bytes while being read, more than a {what} may be")
    return data
