"""Writing result files safely.

An output file is either complete or absent: text is written to a
temporary file in the same folder and renamed over the target in one
step.  An output path that names one of the run's input files is refused,
so an input is never overwritten.
"""

from __future__ import annotations

import os
import stat
import sys
import tempfile

from extract.errors import InputError

__all__ = ["check_outputs", "write_atomic", "emit"]


def _same(a: str, b: str) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return os.path.abspath(a) == os.path.abspath(b)


def check_outputs(outputs: dict[str, str | None], inputs: list[str]) -> None:
    """Refuse outputs that would overwrite an input or each other.

    Parameters
    ----------
    outputs : dict of str to str or None
        Option name (``"--json"``) -> path (None or ``"-"`` are skipped).
    inputs : list of str
        Paths read by the run.

    Raises
    ------
    InputError
        Naming the output path.

    Examples
    --------
    >>> check_outputs({"--json": "-"}, ["a.gds"])
    >>> check_outputs({"--json": "a.gds"}, ["a.gds"])
    Traceback (most recent call last):
    ...
    extract.errors.InputError: a.gds: --json: would overwrite an input file
    """
    seen: dict[str, str] = {}
    for option, path in outputs.items():
        if not path or path == "-":
            continue
        for inp in inputs:
            if inp and _same(path, inp):
                raise InputError(path, "would overwrite an input file", option)
        for other, opath in seen.items():
            if _same(path, opath):
                raise InputError(path, f"given to both {other} and {option}", option)
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder):
            raise InputError(path, "folder does not exist", option)
        if os.path.isdir(path):
            raise InputError(path, "is a folder", option)
        special = os.path.exists(path) and not stat.S_ISREG(os.stat(path).st_mode)
        if not special and not os.access(folder, os.W_OK):
            raise InputError(path, "folder is not writable", option)
        seen[option] = path


def write_atomic(path: str, text: str) -> None:
    """Write ``text`` to ``path`` whole or not at all (temp file + rename).

    A symbolic link is followed (the file it names is replaced, the link
    stays); a target that exists but is not a regular file — a device such
    as ``/dev/null``, a FIFO — is written to directly, never replaced.

    Raises
    ------
    InputError
        When the file cannot be written (naming the output path).
    """
    try:
        _write_atomic(path, text)
    except OSError as exc:
        raise InputError(path, f"cannot write: {exc.strerror or exc}") from None


def _write_atomic(path: str, text: str) -> None:
    path = os.path.realpath(path)
    if os.path.exists(path) and not stat.S_ISREG(os.stat(path).st_mode):
        with open(path, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
        return
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix=".dynshare-", suffix=".tmp", dir=folder)
    try:
        mask = os.umask(0)
        os.umask(mask)
        os.chmod(tmp, 0o666 & ~mask)  # mkstemp makes 0600; give the usual mode
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def emit(path: str | None, text: str) -> None:
    """Write ``text`` to ``path``; ``"-"`` means standard output."""
    if not path:
        return
    if path == "-":
        sys.stdout.write(text)
        sys.stdout.flush()
    else:
        write_atomic(path, text)
