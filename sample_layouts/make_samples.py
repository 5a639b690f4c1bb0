"""Draw the dsk18 demo cells and write ``sample_layouts/dsk18_cells.gds``.

Run ``python -m sample_layouts.make_samples [OUT.gds]`` to regenerate the
library (default: ``dsk18_cells.gds`` beside this file).  The output is
byte-for-byte reproducible: fixed cell order, merged layers and a fixed
timestamp.

Importable too: :data:`CELLS` maps each cell name to the function that
draws it, :func:`build_library` returns the whole library and
:func:`nand3_array` an array of ``DYN_NAND3`` and :func:`mixed_block` an
array of every cell, for benchmarks.

Every cell is our own invented demo in the invented 1.8 V dsk18 process.
"""

from __future__ import annotations

import datetime
import os
import sys

import gdstk

from sample_layouts.domino_cells import domino_ao22, domino_mux4, domino_or16
from sample_layouts.more_cells import dyn_nand2_diag, dyn_nand2_mf, pdyn_nor2, static_nand2
from sample_layouts.nand3_cells import dyn_nand3, dyn_nand3_long, dyn_nand3_pc

__all__ = [
    "CELLS",
    "LIBRARY_NAME",
    "TIMESTAMP",
    "UNIT",
    "PRECISION",
    "DEFAULT_PATH",
    "build_library",
    "write_library",
    "nand3_array",
    "mixed_block",
    "main",
]

#: Cell name → function returning that :class:`gdstk.Cell`, in file order.
CELLS = {
    "DYN_NAND3": dyn_nand3,
    "DOMINO_AO22": domino_ao22,
    "DOMINO_MUX4": domino_mux4,
    "DYN_NAND2_DIAG": dyn_nand2_diag,
    "DYN_NAND2_MF": dyn_nand2_mf,
    "DYN_NAND3_LONG": dyn_nand3_long,
    "DYN_NAND3_PC": dyn_nand3_pc,
    "PDYN_NOR2": pdyn_nor2,
    "STATIC_NAND2": static_nand2,
    "DOMINO_OR16": domino_or16,
}

LIBRARY_NAME = "DSK18_CELLS"
UNIT = 1e-6  # user unit: 1 µm
PRECISION = 1e-9  # database unit: 1 nm
#: Written into the file so that regenerating gives identical bytes.
TIMESTAMP = datetime.datetime(2024, 1, 1, 0, 0, 0)
DEFAULT_PATH = os.path.join(os.path.dirname(os.path.abspath(__file__)), "dsk18_cells.gds")


def build_library(names=None) -> gdstk.Library:
    """The demo library, each cell its own top cell.

    Parameters
    ----------
    names : iterable of str, optional
        Cells to include (default all of :data:`CELLS`, in that order).

    Returns
    -------
    gdstk.Library
        Unit 1e-6 (µm), precision 1e-9.

    Raises
    ------
    KeyError
        For a name that is not in :data:`CELLS`.

    Examples
    --------
    >>> lib = build_library(["STATIC_NAND2"])
    >>> [c.name for c in lib.top_level()], lib.unit, lib.precision
    (['STATIC_NAND2'], 1e-06, 1e-09)
    """
    lib = gdstk.Library(LIBRARY_NAME, unit=UNIT, precision=PRECISION)
    for name in names if names is not None else CELLS:
        lib.add(CELLS[name]())
    return lib


def write_library(path: str = DEFAULT_PATH, names=None) -> str:
    """Write :func:`build_library` to ``path`` with the fixed timestamp.

    Parameters
    ----------
    path : str
        Output GDSII file.  Written to a temporary name, then renamed.
    names : iterable of str, optional
        As for :func:`build_library`.

    Returns
    -------
    str
        ``path``.
    """
    tmp = f"{path}.tmp{os.getpid()}"
    try:
        build_library(names).write_gds(tmp, timestamp=TIMESTAMP)
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)
    return path


def nand3_array(nx: int, ny: int, flatten: bool = False) -> gdstk.Library:
    """An ``nx`` × ``ny`` array of ``DYN_NAND3`` for benchmarks.

    Parameters
    ----------
    nx, ny : int
        Columns and rows.  DYN_NAND3 has 8 transistors, so about 1k
        transistors is 13 × 10, 10k is 36 × 35 and 100k is 112 × 112.
    flatten : bool
        False (default): top cell ``NAND3_ARRAY`` holds one reference to
        ``DYN_NAND3`` with a :class:`gdstk.Repetition`.  True: the top cell
        is flattened (every polygon and label copied).

    Returns
    -------
    gdstk.Library
        Unit 1e-6, precision 1e-9.  Cells abut in x, so the rails of a
        row join; rows are 0.6 µm apart (bounding box to bounding box).  Labels repeat in every copy.

    Raises
    ------
    ValueError
        When nx or ny is below 1.

    Examples
    --------
    >>> lib = nand3_array(3, 2)
    >>> top = lib.top_level()[0]
    >>> top.name, top.references[0].repetition.columns, top.references[0].repetition.rows
    ('NAND3_ARRAY', 3, 2)
    >>> len(nand3_array(2, 2, flatten=True).top_level()[0].labels)
    32
    """
    if nx < 1 or ny < 1:
        raise ValueError("nx and ny must be at least 1")
    lib = gdstk.Library("NAND3_ARRAY_LIB", unit=UNIT, precision=PRECISION)
    cell = dyn_nand3()
    # the rails span the cell's whole width; the nwell is its top
    (bx0, by0), (bx1, by1) = cell.bounding_box()
    pitch_x = bx1 - bx0
    pitch_y = (by1 - by0) + 0.6
    top = gdstk.Cell("NAND3_ARRAY")
    ref = gdstk.Reference(
        cell,
        origin=(0, 0),
        columns=nx,
        rows=ny,
        spacing=(round(pitch_x, 3), round(pitch_y, 3)),
    )
    top.add(ref)
    if flatten:
        top.flatten()
        lib.add(top)
    else:
        lib.add(top, cell)
    return lib


def mixed_block(nx: int, ny: int, names=None) -> gdstk.Library:
    """A block of several demo cells, each arrayed ``nx`` × ``ny``.

    Parameters
    ----------
    nx, ny : int
        Columns and rows of each cell's array.  One copy of every cell of
        :data:`CELLS` is 111 transistors, so 30 × 30 is about 100k and
        95 × 95 about 1M.
    names : iterable of str, optional
        The cells (default all of :data:`CELLS`, in that order).

    Returns
    -------
    gdstk.Library
        Top cell ``MIXED_BLOCK``: one arrayed reference per cell, the
        arrays side by side in x, 2 µm apart.  Within an array copies abut
        in x (their rails join) and rows are 0.6 µm apart, as in
        :func:`nand3_array`; the rails of different rows and arrays are
        one net each by their labels.

    Raises
    ------
    ValueError
        When nx or ny is below 1.

    Examples
    --------
    >>> lib = mixed_block(2, 3, ["DYN_NAND3", "PDYN_NOR2"])
    >>> top = [c for c in lib.top_level()][0]
    >>> top.name, [(r.cell.name, r.repetition.columns, r.repetition.rows) for r in top.references]
    ('MIXED_BLOCK', [('DYN_NAND3', 2, 3), ('PDYN_NOR2', 2, 3)])
    """
    if nx < 1 or ny < 1:
        raise ValueError("nx and ny must be at least 1")
    lib = gdstk.Library("MIXED_BLOCK_LIB", unit=UNIT, precision=PRECISION)
    top = gdstk.Cell("MIXED_BLOCK")
    x = 0.0
    for name in names if names is not None else CELLS:
        cell = CELLS[name]()
        (bx0, by0), (bx1, by1) = cell.bounding_box()
        w, h = round(bx1 - bx0, 3), round(by1 - by0 + 0.6, 3)
        top.add(gdstk.Reference(cell, origin=(round(x - bx0, 3), round(-by0, 3)), columns=nx, rows=ny,
                                spacing=(w, h)))
        lib.add(cell)
        x += nx * w + 2.0
    lib.add(top)
    return lib


def main(argv=None) -> int:
    """Command line: ``python -m sample_layouts.make_samples [OUT.gds]``."""
    argv = sys.argv[1:] if argv is None else argv
    if len(argv) > 1 or (argv and argv[0].startswith("-")):
        print("usage: python -m sample_layouts.make_samples [OUT.gds]", file=sys.stderr)
        return 2
    path = write_library(argv[0] if argv else DEFAULT_PATH)
    print(f"wrote {len(CELLS)} cells to {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
