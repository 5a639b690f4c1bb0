"""Area–perimeter capacitance formulas, one per part of a net's capacitance.

Every function returns fF from geometry in µm and coefficients in the
tech file's units (fF/µm², fF/µm).  Both the layout extractor and the
schematic reader use these, so a pre-layout and a post-layout net are
measured with the same rules.

Source: the zero-bias junction capacitance of the SPICE MOSFET models,
C = CJ·AD + CJSW·PD (Berkeley SPICE2/3 level 1–3; with the BSIM3 split of
the perimeter into field edge CJSW and gate edge CJSWG), and the usual
parallel-plate plus fringe estimate of wire capacitance, C = Ca·A + Cf·P
(e.g. Rabaey, Chandrakasan & Nikolić, *Digital Integrated Circuits*, 2nd
ed., ch. 4, from memory).  The gate capacitance is the oxide capacitance
Cox·W·L; overlap is CGO·W per side.
"""

from __future__ import annotations

from extract.circuit import CapParts, JunctionGeometry
from extract.tech import Layer, MosParams

__all__ = ["junction_parts", "wire_parts", "gate_parts", "overlap_per_side"]


def junction_parts(mos: MosParams, junction: JunctionGeometry) -> CapParts:
    """Zero-bias junction capacitance of a source/drain region.

    ``junction_area = cj·A``, ``junction_sidewall = cjsw·P_field``,
    ``junction_gate_edge = cjswg·P_gate``.

    Parameters
    ----------
    mos : MosParams
        Parameters of the diffusion's device type.
    junction : JunctionGeometry

    Returns
    -------
    CapParts

    Examples
    --------
    >>> from extract.tech import MosParams
    >>> n = MosParams("nmos", 0.45, 0.4, 0.8, 200, 8, 0, 1.0, 0.25, 0.3, 0.5, 0.33, 0.8, 0.8)
    >>> p = junction_parts(n, JunctionGeometry(0.5, 2.0, 1.0))
    >>> (p.junction_area, p.junction_sidewall, p.junction_gate_edge)
    (0.5, 0.5, 0.3)
    """
    return CapParts(
        junction_area=mos.cj * junction.area_um2,
        junction_sidewall=mos.cjsw * junction.field_perimeter_um,
        junction_gate_edge=mos.cjswg * junction.gate_perimeter_um,
    )


def wire_parts(layer: Layer, area_um2: float, perimeter_um: float) -> CapParts:
    """Wire capacitance of a conductor: ``area·A + fringe·P``.

    >>> from extract.tech import Layer
    >>> m1 = Layer("metal1", (4, 0), "metal", area=0.04, fringe=0.05)
    >>> round(wire_parts(m1, 10.0, 22.0).wire, 6)
    1.5
    >>> wire_parts(m1, 0.0, 0.0).wire
    0.0
    """
    return CapParts(wire=layer.area * area_um2 + layer.fringe * perimeter_um)


def gate_parts(mos: MosParams, w_um: float, l_um: float) -> CapParts:
    """What a device adds to its gate net: ``cox·W·L`` of gate and
    ``2·cgo·W`` of overlap (one per side).

    >>> from extract.tech import MosParams
    >>> n = MosParams("nmos", 0.45, 0.4, 0.8, 200, 8, 0.3, 1, 0.25, 0.25, 0.5, 0.33, 0.8, 0.8)
    >>> g = gate_parts(n, 1.0, 0.18)
    >>> round(g.gate, 6), round(g.overlap, 6)
    (1.44, 0.6)
    """
    return CapParts(gate=mos.cox * w_um * l_um, overlap=2.0 * mos.cgo * w_um)


def overlap_per_side(mos: MosParams, w_um: float) -> CapParts:
    """What a device adds to each of its source and drain nets: ``cgo·W``.

    >>> from extract.tech import MosParams
    >>> n = MosParams("nmos", 0.45, 0.4, 0.8, 200, 8, 0.3, 1, 0.25, 0.25, 0.5, 0.33, 0.8, 0.8)
    >>> round(overlap_per_side(n, 2.0).overlap, 6)
    0.6
    """
    return CapParts(overlap=mos.cgo * w_um)
