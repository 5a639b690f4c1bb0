"""Errors and findings shared by every step of the pipeline.

A bad input is reported as one line, ``error: FILE: PLACE: what is wrong``,
and the command exits with status 2.  Every reader raises
:class:`InputError` for that; only the command line turns it into the
printed line, so library users can catch it.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["InputError", "Finding", "MAX_LINE", "escaped", "listing"]

#: Longest error line, ``error: `` included (under 300 characters).
MAX_LINE = 299
_ESCAPES = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}


def escaped(text: str) -> str:
    r"""``text`` with control and line-breaking characters written as escapes,
    so that a name can never split the one error line.

    >>> escaped("DYN\nX"), escaped(""), escaped("a\x1bb")
    ('DYN\\nX', "''", 'a\\x1bb')
    """
    if not text:
        return "''"
    if text.isprintable():
        return text
    out = []
    for c in text:
        if c.isprintable() or c == " ":
            out.append(c)
        else:
            out.append(_ESCAPES.get(c) or (f"\\x{ord(c):02x}" if ord(c) < 256 else f"\\u{ord(c):04x}"))
    return "".join(out)


def listing(items, shown: int = 8, sep: str = ", ") -> str:
    """The first ``shown`` items joined, the rest counted.

    >>> listing(["a", "b", "c"], 2), listing(["a"], 2)
    ('a, b and 1 more', 'a')
    """
    items = [str(i) for i in items]
    more = len(items) - shown
    return sep.join(items[:shown]) + (f" and {more} more" if more > 0 else "")


def _cut(text: str, room: int) -> str:
    if len(text) <= room:
        return text
    room = max(room, 20)
    tail = f"... ({len(text) - room + 24} more characters)"
    return text[: max(0, room - len(tail))] + tail


class InputError(Exception):
    """A problem with a file the user gave us.

    Parameters
    ----------
    file : str
        The file that is wrong (as the user named it).
    message : str
        What is wrong, in one line.
    place : str, optional
        Where in the file: a line (``"12"``), a key path
        (``"layers.poly.area"``), a record, a cell name.

    Examples
    --------
    >>> str(InputError("t.toml", "must be positive", place="process.vdd"))
    't.toml: process.vdd: must be positive'
    >>> str(InputError("x.gds", "file not found"))
    'x.gds: file not found'
    """

    def __init__(self, file: str, message: str, place: str | None = None):
        self.file = str(file)
        self.place = None if place is None else str(place)
        self.message = " ".join(str(message).split())
        super().__init__(self.line())

    def line(self) -> str:
        """The report without the ``error:`` prefix: one line (names
        escaped, see :func:`escaped`), at most :data:`MAX_LINE` characters
        with the prefix (a long file name keeps its end, a long message
        its start).

        >>> len(InputError("f.sp", "x" * 1000, "line 3").line()) <= MAX_LINE - 7
        True
        """
        file = _cut_path(escaped(self.file))
        place = _cut(escaped(self.place), 80) if self.place else None
        head = f"{file}: {place}: " if place else f"{file}: "
        return head + _cut(escaped(self.message) if self.message else "", MAX_LINE - 7 - len(head))

    def __str__(self) -> str:  # pragma: no cover - same as line()
        return self.line()


def _cut_path(path: str, room: int = 120) -> str:
    return path if len(path) <= room else "..." + path[-(room - 3):]


@dataclass(frozen=True)
class Finding:
    """Something a designer should look at that does not stop the run.

    Parameters
    ----------
    message : str
        One line describing it.
    location_um : tuple of float or None
        A point in the layout (µm) where it is, when there is one.

    Examples
    --------
    >>> Finding("poly crosses diffusion without splitting it", (1.0, 2.5)).text()
    'poly crosses diffusion without splitting it at (1.000, 2.500) um'
    """

    message: str
    location_um: tuple[float, float] | None = None

    def text(self) -> str:
        if self.location_um is None:
            return self.message
        x, y = self.location_um
        return f"{self.message} at ({x:.3f}, {y:.3f}) um"
