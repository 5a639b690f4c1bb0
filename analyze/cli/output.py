"""Writing result files safely.

An output file is either complete or absent: text is written to a
temporary file in the same folder and renamed over the target in one
step.  The outputs of one run form an :class:`OutputSet`: every file is
written under a temporary name first and all are renamed at the end, so
either all of them appear or none does.  An output path that names one of
the run's input files is refused, so an input is never overwritten.
"""

from __future__ import annotations

import os
import stat
import sys
import tempfile

from extract.errors import InputError

__all__ = ["OutputSet", "check_outputs", "write_atomic", "emit"]


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
    >>> check_outputs({"--json": "-", "--html": "-"}, [])
    Traceback (most recent call last):
    ...
    extract.errors.InputError: -: --html: only one output can go to stdout (--json, --html were given '-')
    >>> check_outputs({"--json": "a.gds"}, ["a.gds"])
    Traceback (most recent call last):
    ...
    extract.errors.InputError: a.gds: --json: would overwrite an input file
    """
    seen: dict[str, str] = {}
    to_stdout = [option for option, path in outputs.items() if path == "-"]
    if len(to_stdout) > 1:
        raise InputError("-", f"only one output can go to stdout ({', '.join(to_stdout)} were given '-')",
                         to_stdout[1])
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


def _special(path: str) -> bool:
    """An existing target that is not a regular file (a device, a FIFO)."""
    try:
        return not stat.S_ISREG(os.stat(path).st_mode)
    except OSError:
        return False


class OutputSet:
    """The outputs of one run, written all together or not at all.

    :meth:`add` collects (path, text); :meth:`commit` writes each regular
    file under a temporary name in its folder, then the outputs that go to
    standard output (``"-"``) or to an existing device or FIFO (which
    cannot be renamed over), then renames every temporary file over its
    target.  Any failure removes every temporary file, puts back the
    files that were already replaced (kept as hard links until the end)
    and raises :class:`InputError` naming the output that failed.

    Examples
    --------
    >>> import tempfile
    >>> d = tempfile.mkdtemp()
    >>> outs = OutputSet()
    >>> outs.add(os.path.join(d, "a.json"), "{}\\n")
    >>> outs.add(os.path.join(d, "no-folder", "b.html"), "<p>")
    >>> outs.commit()  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    extract.errors.InputError: .../no-folder/b.html: cannot write: No such file or directory
    >>> os.listdir(d)  # neither output, no temporary file
    []

    Notes
    -----
    The renames are the only steps that change what a reader sees; each is
    atomic, and a rename that fails undoes the ones before it.  Cost: one
    write of every output plus one rename each.
    """

    def __init__(self):
        self._items: list[tuple[str, str]] = []

    def add(self, path: str | None, text) -> None:
        """Queue ``text`` for ``path`` (None: nothing; ``"-"``: stdout).

        ``text`` is a string, or an iterable of strings written one after
        the other (a big report made while written: an error while making
        it fails the commit like a failed write)."""
        if path:
            self._items.append((path, text))

    def commit(self) -> None:
        temps: list[tuple[str, str, str]] = []  # (temp, real target, path as given)
        backups: list[tuple[str, str]] = []  # (backup, target) of replaced files
        done: list[tuple[str, str | None]] = []  # renamed targets and their backup
        current = None
        try:
            for path, text in self._items:  # 1. every regular file under a temporary name
                current = path
                if path == "-" or _special(path):
                    continue
                real = os.path.realpath(path)
                fd, tmp = tempfile.mkstemp(prefix=".dynshare-", suffix=".tmp", dir=os.path.dirname(real))
                temps.append((tmp, real, path))
                mask = os.umask(0)
                os.umask(mask)
                os.chmod(tmp, 0o666 & ~mask)
                with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
                    _write(fh, text)
            for path, text in self._items:  # 2. standard output and devices: cannot be taken back
                current = path
                if path == "-":
                    sys.stdout.write(text if isinstance(text, str) else "".join(text))  # whole, then written
                    sys.stdout.flush()
                elif _special(path):
                    text = text if isinstance(text, str) else "".join(text)
                    with open(path, "w", encoding="utf-8", newline="\n") as fh:
                        fh.write(text)
            for tmp, real, path in temps:  # 3. the renames
                current = path
                backup = None
                if os.path.isfile(real):
                    backup = tmp + ".old"
                    try:
                        os.link(real, backup)
                    except OSError:
                        backup = None
                    else:
                        backups.append((backup, real))
                os.replace(tmp, real)
                done.append((real, backup))
        except BaseException as exc:
            for tmp, _, _ in temps:
                _remove(tmp)
            for real, backup in reversed(done):
                if backup is not None:
                    try:
                        os.replace(backup, real)
                        continue
                    except OSError:
                        pass
                _remove(real)
            for backup, _ in backups:
                _remove(backup)
            if isinstance(exc, OSError) and not isinstance(exc, BrokenPipeError):
                raise InputError(current, f"cannot write: {exc.strerror or exc}") from None
            raise
        for backup, _ in backups:
            _remove(backup)


def _remove(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def _write(fh, text) -> None:
    """Write a string, or the strings of an iterable one by one."""
    if isinstance(text, str):
        fh.write(text)
        return
    for piece in text:
        fh.write(piece)
