"""What a command reads: a layout (GDSII, OASIS) or a netlist (SPICE, CDL),
decided by the file's content, and the cells it holds.

:func:`open_cells` returns a :class:`CellSource` for either kind, so that
``check`` and ``check --all-cells`` treat a foundry netlist library like a
layout library: the file is read once, each cell becomes a
:class:`~extract.circuit.Circuit` on demand.
"""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass
from typing import Callable

from extract.circuit import Circuit

__all__ = ["CellSource", "input_kind", "open_cells"]

#: First bytes of a GDSII stream: the HEADER record (length 6, type 0x00, data 0x02).
_GDS_MAGIC = b"\x00\x06\x00\x02"
_OASIS_MAGIC = b"%SEMI-OASIS\r\n"
_NETLIST_NAMES = (".sp", ".spi", ".spice", ".cir", ".cdl", ".net", ".ckt")


def input_kind(path: str) -> str:
    """``"layout"`` or ``"netlist"``, from the first bytes of the file.

    GDSII starts with its HEADER record, OASIS with its magic string; a
    file holding NUL bytes in its first 4 kB (binary) is taken for a
    layout too, so the layout reader says what is wrong with it.  Any other file
    is text, read as a netlist whatever its name.  A file that cannot be
    opened is left to the reader to report.

    Examples
    --------
    >>> import tempfile, os
    >>> with tempfile.NamedTemporaryFile("wb", suffix=".gds", delete=False) as f:
    ...     _ = f.write(b".subckt INV a y\\n.ends\\n")
    >>> input_kind(f.name)
    'netlist'
    >>> os.unlink(f.name)
    """
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
        with os.fdopen(fd, "rb") as fh:
            head = fh.read(4096) if stat.S_ISREG(os.fstat(fd).st_mode) else b""
    except OSError:
        return "netlist" if path.lower().endswith(_NETLIST_NAMES) else "layout"
    if head.startswith(_GDS_MAGIC) or head.startswith(_OASIS_MAGIC) or b"\0" in head:
        return "layout"
    return "netlist"


@dataclass
class CellSource:
    """A file read once, its cells made into circuits on demand.

    Attributes
    ----------
    path : str
    kind : str
        ``"layout"`` or ``"netlist"``.
    cells : list of str
        Every cell it defines (for a netlist: every subcircuit but the
        device subcircuits of the tech file).
    circuit : callable
        ``circuit(cell or None) -> Circuit``; None: the single top cell.
    """

    path: str
    kind: str
    cells: list[str]
    circuit: Callable[[str | None], Circuit]


def open_cells(path: str, tech) -> CellSource:
    """Read ``path`` (layout or netlist) once.

    Raises
    ------
    InputError
        Anything wrong with the file (see the layout and netlist readers).
    """
    from extract.inputfile import check_input

    check_input(path, "layout or netlist file")  # before a byte is read: no FIFO, device, directory
    if input_kind(path) == "layout":
        from extract.layout.pipeline import extract_cell, tech_layers
        from extract.layout.reader import open_layout

        tech_layers(tech)  # refuse a tech file without layers before reading
        layout = open_layout(path)
        return CellSource(path, "layout", list(layout.cells), lambda cell: extract_cell(layout, tech, cell))
    from extract.netlist.reader import circuit_of, netlist_cells, read_netlist_library

    lib = read_netlist_library(path)
    return CellSource(path, "netlist", netlist_cells(lib, tech), lambda cell: circuit_of(lib, tech, path, cell))
