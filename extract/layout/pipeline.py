"""The extraction pipeline: layout cell + tech -> :class:`Circuit`.

Steps, each a pure function of the one before:

1. :func:`extract.layout.reader.read_layout` — flatten the cell, µm.
2. merge every layer's shapes (:func:`extract.layout.geometry.merge_parts`);
3. :func:`extract.layout.devices.find_channels` — transistors and source/drain pieces;
4. :func:`extract.layout.connectivity.connect` / ``name_nets`` — nets and names;
5. capacitance per net with :mod:`extract.capacitance`;
6. devices with AD/AS/PD/PS, each junction given to exactly one device.
"""

from __future__ import annotations

import contextlib
import gc
import os
import warnings

import numpy as np
import shapely
import shapely.errors

from extract.circuit import Circuit
from extract.errors import Finding, InputError
from extract.layout.assemble import assemble
from extract.layout.hierarchy import extract_hierarchical
from extract.layout.reader import FlatLayout, LayoutFile, flatten_cell, open_layout
from extract.layout.units import cell_units
from extract.tech import Tech

__all__ = ["extract_layout", "extract_cell", "extract_flat", "tech_layers"]


def extract_layout(path: str, tech: Tech, cell: str | None = None) -> Circuit:
    """Extract devices, nets and per-net capacitance from a layout cell.

    Parameters
    ----------
    path : str
        GDSII or OASIS file.
    tech : Tech
    cell : str, optional
        Cell name; the single top cell when omitted.

    Returns
    -------
    Circuit

    Raises
    ------
    InputError
        For every problem with the layout file (see :func:`read_layout`).
    """
    tech_layers(tech)  # a tech file without layers is refused before reading
    return extract_cell(open_layout(path), tech, cell)


def tech_layers(tech: Tech) -> set[tuple[int, int]]:
    """The ``(layer, datatype)`` pairs the tech file uses (shapes and text).

    Raises
    ------
    InputError
        The tech file has no ``[layers]`` (it can describe netlists only).
    """
    if not tech.layers:
        raise InputError(tech.path, "has no [layers] tables, so it can read netlists only; "
                                    "describe the drawn layers to read a layout", "layers")
    wanted = {layer.gds for layer in tech.layers.values()}
    return wanted | {pair for layer in tech.layers.values() for pair in layer.labels}


def extract_cell(layout: LayoutFile, tech: Tech, cell: str | None = None, hierarchical: bool = True) -> Circuit:
    """Like :func:`extract_layout`, from a file already opened with
    :func:`extract.layout.reader.open_layout` (for many cells of one library).

    With ``hierarchical`` (the default) a cell made only of placed cells is
    extracted by :func:`extract.layout.hierarchy.extract_hierarchical` (each
    distinct cell once, the same result as flattening); any other cell, and
    any where that rule does not hold, is flattened.  The environment
    variable ``DYNSHARE_FLAT=1`` forces flattening.
    """
    with _collector_paused():
        return _extract_cell(layout, tech, cell, hierarchical)


@contextlib.contextmanager
def _collector_paused():
    """Pause Python's cyclic garbage collector for the duration.

    Extraction makes millions of objects (shapes, records) and no reference
    cycles; each full collection would walk every one of them again
    (common practice for allocation-heavy phases; about a sixth of a flat
    100k-transistor extraction).  Reference counting still frees
    everything; the collector's previous state is restored.
    """
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.enable()


def _extract_cell(layout: LayoutFile, tech: Tech, cell: str | None, hierarchical: bool) -> Circuit:
    wanted = tech_layers(tech)
    if hierarchical and os.environ.get("DYNSHARE_FLAT", "") not in ("1", "true", "yes"):
        with warnings.catch_warnings(), np.errstate(all="ignore"):
            warnings.simplefilter("ignore")
            try:
                circuit = extract_hierarchical(layout, tech, cell, wanted)
            except (InputError, shapely.errors.GEOSException):
                circuit = None  # flattening reports it, or extracts what it can
        if circuit is not None:
            return circuit
    return extract_flat(flatten_cell(layout, cell, layers=wanted), tech)


def extract_flat(flat: FlatLayout, tech: Tech) -> Circuit:
    """Extract from an already flattened layout (see :func:`extract_layout`).

    Raises
    ------
    InputError
        When the geometry cannot be processed (degenerate shapes the
        geometry engine refuses), naming the file and cell.

    Notes
    -----
    Cost is dominated by the polygon overlays and STR-tree queries,
    O(n log n) in the number of shapes.
    """
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        try:
            circuit = _extract_flat(flat, tech)
        except shapely.errors.GEOSException as exc:
            raise InputError(flat.path, f"geometry cannot be processed ({exc})", f"cell {flat.cell}") from None
    # wrong layer numbers show as a missing kind: warn when no diffusion (no
    # poly) layer has shapes; one empty layer of several (a tap layer in a
    # logic cell) is normal
    for kind in ("diffusion", "poly"):
        names = [n for n, layer in tech.layers.items() if layer.kind == kind]
        if not any(flat.polygons.get(tech.layers[n].gds) for n in names):
            circuit.findings.extend(
                Finding(f"tech layer {name} {list(tech.layers[name].gds)} has no shapes in cell {flat.cell}")
                for name in names
            )
    return circuit


def _extract_flat(flat: FlatLayout, tech: Tech) -> Circuit:
    units = cell_units(flat, tech)
    return assemble([(units, np.zeros((1, 2)))], tech, flat.cell, flat.path)
