"""Errors and findings shared by every step of the pipeline.

A bad input is reported as one line, ``error: FILE: PLACE: what is wrong``,
and the command exits with status 2.  Every reader raises
:class:`InputError` for that; only the command line turns it into the
printed line, so library users can catch it.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["InputError", "Finding"]


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
        """The report without the ``error:`` prefix."""
        if self.place:
            return f"{self.file}: {self.place}: {self.message}"
        return f"{self.file}: {self.message}"

    def __str__(self) -> str:  # pragma: no cover - same as line()
        return self.line()


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
