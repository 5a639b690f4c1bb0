"""The footed dynamic NAND3 family of the dsk18 demo.

Three cells share one evaluation stack, X–A–n1–B–n2–C–n3–footer–VSS,
drawn as one horizontal diffusion strip (VSS on the left, X on the right):

* ``DYN_NAND3`` — n1 and n2 are uncontacted 0.26 µm diffusion pieces.
* ``DYN_NAND3_LONG`` — n1 and n2 are contacted (0.48 µm pieces) and each is
  routed out on a long metal1 serpentine to the left of the stack, so the
  worst case shares enough charge to fail the check.
* ``DYN_NAND3_PC`` — ``DYN_NAND3_LONG`` plus a secondary precharge pmos
  (gate CLK) from VDD to n1, which makes it pass.

The exact dimensions are listed in ``sample_layouts/README.md``.
All of it is our own invented demo in the dsk18 process.
"""

from __future__ import annotations

import gdstk

from sample_layouts.blocks import (
    BUS_Y,
    EXT,
    N_Y0,
    P_Y0,
    gate,
    implants,
    precharge_keeper_receiver,
    rails,
    strap,
)
from sample_layouts.drawing import Sketch, snap, strip

__all__ = ["dyn_nand3", "dyn_nand3_long", "dyn_nand3_pc", "SERPENTINE"]

#: Serpentine of the LONG/PC cells: left end x, run pitch and wire width (µm).
SERPENTINE = {"x_left": 1.0, "pitch": 0.56, "width": 0.28, "gap_to_stack": 0.6}

_W_EVAL = 1.0
_W_FOOT = 1.2


def _stack(sk: Sketch, x0: float, mid_len: float) -> list[tuple[float, float]]:
    """The evaluation strip from x0; returns the x range of each element:
    VSS, CLK, n3a, n3b, C, n2, B, n1, A, X."""
    elems = [
        ("d", 0.48, _W_FOOT),  # VSS
        ("g", 0.18, _W_FOOT),  # footer, CLK
        ("d", 0.13, _W_FOOT),  # n3, footer half
        ("d", 0.13, _W_EVAL),  # n3, evaluation half
        ("g", 0.18, _W_EVAL),  # C
        ("d", mid_len, _W_EVAL),  # n2
        ("g", 0.18, _W_EVAL),  # B
        ("d", mid_len, _W_EVAL),  # n1
        ("g", 0.18, _W_EVAL),  # A
        ("d", 0.48, _W_EVAL),  # X
    ]
    r = strip(sk, x0, N_Y0, elems)
    for name, idx in (("C", 4), ("B", 6), ("A", 8)):
        gate(sk, r[idx], 0.9, N_Y0 + _W_EVAL + EXT)
        sk.label("poly", name, _mid(r[idx]), 1.05)
    sk.contact(_mid(r[0]), N_Y0 + _W_FOOT / 2)
    strap(sk, _mid(r[0]), N_Y0 + _W_FOOT / 2, 0.3)
    sk.contact(_mid(r[9]), N_Y0 + _W_EVAL / 2)
    strap(sk, _mid(r[9]), N_Y0 + _W_EVAL / 2, BUS_Y)
    return r


def _mid(r: tuple[float, float]) -> float:
    return snap((r[0] + r[1]) / 2)


def _build(name: str, long: bool, secondary: bool) -> gdstk.Cell:
    sk = Sketch()
    s = SERPENTINE
    x0 = 1.0
    if long:
        x0 = 13.6
    r = _stack(sk, x0, 0.48 if long else 0.26)
    clk_top = P_Y0 + 0.6 + EXT
    if secondary:
        clk_top = 6.44 + EXT
    top = precharge_keeper_receiver(
        sk, clk_x=r[1][0], clk_bottom=N_Y0 - EXT, inv_x=r[9][1] + 0.5, clk_top=clk_top
    )
    x_left = 0.5
    if long:
        xl, xr = s["x_left"], snap(x0 - s["gap_to_stack"])
        p, w = s["pitch"], s["width"]
        yc = N_Y0 + _W_EVAL / 2
        n2x, n1x = _mid(r[5]), _mid(r[7])
        sk.contact(n2x, yc)
        sk.contact(n1x, yc)
        y2 = 2.84
        n2 = [(n2x, yc), (n2x, y2), (xl, y2), (xl, y2 - p), (xr, y2 - p)]
        n2 += [(xr, y2 - 2 * p), (xl, y2 - 2 * p), (xl, y2 - 3 * p), (xr, y2 - 3 * p)]
        sk.wire("metal1", n2, w)
        y1 = 3.34
        n1 = [(n1x, yc), (n1x, y1), (xl, y1), (xl, y1 + p), (xr, y1 + p)]
        n1 += [(xr, y1 + 2 * p), (xl, y1 + 2 * p), (xl, y1 + 3 * p), (xr, y1 + 3 * p)]
        sk.wire("metal1", n1, w)
        sk.label("metal1", "N2", snap((xl + xr) / 2), y2)
        sk.label("metal1", "N1", snap((xl + xr) / 2), y1)
        x_left = xl - 0.5
        if secondary:
            # secondary precharge pmos on the clock column: [n1 | CLK | VDD]
            pc = strip(
                sk, r[1][0] - 0.48, 5.84, [("d", 0.48, 0.6), ("g", 0.18, 0.6), ("d", 0.48, 0.6)]
            )
            sk.contact(_mid(pc[0]), 6.14)
            sk.contact(_mid(pc[2]), 6.14)  # on the precharge VDD strap
            sk.wire("metal1", [(xr, y1 + 3 * p), (xr, 6.14), (_mid(pc[0]), 6.14)], w)
    rails(sk, x_left, top["x_max"] + 0.5)
    implants(sk)
    return sk.cell(name)


def dyn_nand3() -> gdstk.Cell:
    """``DYN_NAND3``: footed dynamic NAND3 with keeper and output inverter.

    Returns
    -------
    gdstk.Cell

    Examples
    --------
    >>> c = dyn_nand3()
    >>> c.name, sorted({l.text for l in c.labels})
    ('DYN_NAND3', ['A', 'B', 'C', 'CLK', 'OUT', 'VDD', 'VSS', 'X'])
    """
    return _build("DYN_NAND3", long=False, secondary=False)


def dyn_nand3_long() -> gdstk.Cell:
    """``DYN_NAND3_LONG``: DYN_NAND3 with n1, n2 contacted and routed out on
    long metal1 serpentines (fails the charge-sharing check).

    Returns
    -------
    gdstk.Cell

    Examples
    --------
    >>> sorted({l.text for l in dyn_nand3_long().labels})[:3]
    ['A', 'B', 'C']
    """
    return _build("DYN_NAND3_LONG", long=True, secondary=False)


def dyn_nand3_pc() -> gdstk.Cell:
    """``DYN_NAND3_PC``: DYN_NAND3_LONG plus a secondary precharge pmos
    (gate CLK, VDD to n1), the fix that makes it pass.

    Returns
    -------
    gdstk.Cell

    Examples
    --------
    >>> len(dyn_nand3_pc().polygons) > len(dyn_nand3_long().polygons)
    True
    """
    return _build("DYN_NAND3_PC", long=True, secondary=True)
