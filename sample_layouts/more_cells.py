"""The remaining dsk18 demo cells: off-Manhattan, multi-finger, p-type and
static.

* ``DYN_NAND2_DIAG`` — footed dynamic NAND2 whose diffusion jogs up at 45°
  between the footer and gate A; gate B crosses the 45° strip at right
  angles, so its channel is a rectangle turned by 45°.
* ``DYN_NAND2_MF`` — footed dynamic NAND2 with every evaluation device and
  the footer drawn as two poly fingers (a comb) sharing their middle
  diffusion piece; the internal nodes N1, N2 are contacted and joined on
  metal1 across the finger pairs.
* ``PDYN_NOR2`` — p-type dynamic NOR2: predischarge nmos (gate CLKB) from
  VSS to XP, pmos stack VDD–footer(CLKB)–A–p1–B–XP, inverter XP→OUTP.
* ``STATIC_NAND2`` — an ordinary static CMOS NAND2.

All of it is our own invented demo in the dsk18 process.
"""

from __future__ import annotations

import math

import gdstk

from sample_layouts.blocks import (
    BUS_Y,
    EXT,
    N_Y0,
    P_Y0,
    bus,
    gate,
    implants,
    precharge_keeper_receiver,
    rails,
    receiver,
    strap,
)
from sample_layouts.drawing import Sketch, snap, strip

__all__ = ["dyn_nand2_diag", "dyn_nand2_mf", "pdyn_nor2", "static_nand2", "DIAG"]

#: Geometry of the 45° cell (µm): lower band centre y, the rise of the
#: 45° part, strip width, and the half-tangent that places mitre vertices.
DIAG = {"y_low": 1.5, "rise": 1.2, "width": 1.0, "mitre": 0.5 * math.tan(math.pi / 8)}


def _mid(r: tuple[float, float]) -> float:
    return snap((r[0] + r[1]) / 2)


def _finish(sk: Sketch, name: str, x0: float, x_max: float) -> gdstk.Cell:
    rails(sk, x0 - 0.5, x_max + 0.5)
    implants(sk)
    return sk.cell(name)


def dyn_nand2_diag() -> gdstk.Cell:
    """``DYN_NAND2_DIAG``: footed dynamic NAND2 drawn partly at 45°.

    Returns
    -------
    gdstk.Cell

    Notes
    -----
    The diffusion is a 1.0 µm wide strip along the centre line
    (1.0, 1.5) → (2.03, 1.5) → (3.23, 2.7) → (4.26, 2.7) with mitred
    corners: the vertices of a 45° mitre sit 0.5·tan(22.5°) ≈ 0.2071 µm
    either side of the corner along the straight edges.  The footer (CLK)
    and A are vertical gates on the horizontal parts; B is a poly bar
    perpendicular to the 45° part at its midpoint, with its corners on the
    1 nm grid: L = 0.127·√2 ≈ 0.1796 µm, W ≈ 1.0 µm.  The mitre vertices
    are rounded to the 1 nm database unit.

    Examples
    --------
    >>> c = dyn_nand2_diag()
    >>> any(len(p.points) > 4 for p in c.get_polygons(layer=10, datatype=0))
    True
    """
    sk = Sketch()
    x0, yl, rise, t = 1.0, DIAG["y_low"], DIAG["rise"], DIAG["mitre"]
    h = DIAG["width"] / 2
    c1x = x0 + 1.03
    c2x, yu = c1x + rise, yl + rise
    x_end = c2x + 1.03
    sk.polygon(
        "active",
        [
            (x0, yl - h),
            (c1x + t, yl - h),
            (c2x + t, yu - h),
            (x_end, yu - h),
            (x_end, yu + h),
            (c2x - t, yu + h),
            (c1x - t, yl + h),
            (x0, yl + h),
        ],
    )
    # gate B: a bar across the 45° part, perpendicular to it, 0.2 µm beyond
    # the active on the upper-left side and 0.5 µm on the lower-right (room
    # for its label).  Its length vector is (0.127, 0.127) so that every
    # corner is on the 1 nm grid: L = 0.127·√2 ≈ 0.1796 µm.
    s2 = math.sqrt(0.5)
    p0 = (c1x + rise / 2 - 0.064, yl + rise / 2 - 0.063)
    lv = (0.127, 0.127)
    lo = (snap((h + 0.5) * s2), -snap((h + 0.5) * s2))
    hi = (-snap((h + EXT) * s2), snap((h + EXT) * s2))

    def at(*vs):
        return (p0[0] + sum(v[0] for v in vs), p0[1] + sum(v[1] for v in vs))

    sk.polygon("poly", [at(lo), at(lv, lo), at(lv, hi), at(hi)])
    sk.label("poly", "B", *at((0.064, 0.063), (0.6, -0.6)))
    # gate A (vertical, upper band) and the contacted ends
    a = (snap(c2x + 0.37), snap(c2x + 0.55))
    gate(sk, a, yu - h - EXT, yu + h + EXT)
    sk.label("poly", "A", _mid(a), yu + h + 0.1)
    sk.contact(x0 + 0.24, yl)
    strap(sk, x0 + 0.24, yl, 0.3)
    sk.contact(snap(c2x + 0.79), yu)
    strap(sk, snap(c2x + 0.79), yu, BUS_Y)
    top = precharge_keeper_receiver(sk, clk_x=x0 + 0.48, clk_bottom=yl - h - EXT, inv_x=x_end + 0.5)
    return _finish(sk, "DYN_NAND2_DIAG", x0, top["x_max"])


def _comb(sk: Sketch, fingers, y_lo: float, y_top: float, name: str | None) -> None:
    """Poly fingers over the x ranges ``fingers`` from y_lo to y_top, joined
    by a 0.2 µm bar at the top; labelled ``name`` on the bar."""
    for xr in fingers:
        gate(sk, xr, y_lo, y_top)
    sk.rect("poly", fingers[0][0], y_top - 0.2, fingers[-1][1], y_top)
    if name:
        sk.label("poly", name, snap((fingers[0][1] + fingers[-1][0]) / 2), y_top - 0.1)


def _fingered(sk: Sketch, x0: float, w: float) -> list[tuple[float, float]]:
    """Two fingers sharing the middle piece: d | g | d | g | d."""
    return strip(sk, x0, N_Y0, [("d", 0.48, w), ("g", 0.18, w)] * 2 + [("d", 0.48, w)])


def dyn_nand2_mf() -> gdstk.Cell:
    """``DYN_NAND2_MF``: footed dynamic NAND2, two fingers per device.

    Returns
    -------
    gdstk.Cell

    Notes
    -----
    Three strips, left to right: footer [VSS | CLK | N2 | CLK | VSS]
    (fingers 0.6/0.18), B [N2 | B | N1 | B | N2] and A [N1 | A | X | A |
    N1] (fingers 0.5/0.18).  N2 joins on a metal1 bar above the strips,
    N1 on one below; X goes up to the dynamic-node bus.

    Examples
    --------
    >>> sorted({l.text for l in dyn_nand2_mf().labels})
    ['A', 'B', 'CLK', 'N1', 'N2', 'OUT', 'VDD', 'VSS', 'X']
    """
    sk = Sketch()
    x0 = 1.0
    f = _fingered(sk, x0, 0.6)
    b = _fingered(sk, f[-1][1] + 0.5, 0.5)
    a = _fingered(sk, b[-1][1] + 0.5, 0.5)
    _comb(sk, [f[1], f[3]], N_Y0 - EXT, N_Y0 + 0.6 + 2 * EXT, None)  # CLK label: on the column
    _comb(sk, [b[1], b[3]], N_Y0 - EXT, N_Y0 + 0.5 + 2 * EXT, "B")
    _comb(sk, [a[1], a[3]], N_Y0 - EXT, N_Y0 + 0.5 + 2 * EXT, "A")
    yf, ye = N_Y0 + 0.3, N_Y0 + 0.25
    y_n2, y_n1 = 2.65, 0.95
    for r in (f[0], f[4]):
        sk.contact(_mid(r), yf)
        strap(sk, _mid(r), yf, 0.3)
    sk.contact(_mid(f[2]), yf)
    strap(sk, _mid(f[2]), yf, y_n2)
    for r, y in ((b[0], y_n2), (b[4], y_n2), (b[2], y_n1), (a[0], y_n1), (a[4], y_n1)):
        sk.contact(_mid(r), ye)
        strap(sk, _mid(r), ye, y)
    sk.contact(_mid(a[2]), ye)
    strap(sk, _mid(a[2]), ye, BUS_Y)
    sk.wire("metal1", [(_mid(f[2]), y_n2), (_mid(b[4]), y_n2)], 0.28)
    sk.wire("metal1", [(_mid(b[2]), y_n1), (_mid(a[4]), y_n1)], 0.28)
    sk.label("metal1", "N2", snap((_mid(f[2]) + _mid(b[0])) / 2), y_n2)
    sk.label("metal1", "N1", snap((_mid(b[2]) + _mid(a[0])) / 2), y_n1)
    top = precharge_keeper_receiver(sk, clk_x=f[1][0], clk_bottom=N_Y0 - EXT, inv_x=a[-1][1] + 0.5)
    return _finish(sk, "DYN_NAND2_MF", x0, top["x_max"])


def pdyn_nor2() -> gdstk.Cell:
    """``PDYN_NOR2``: p-type (predischarged) dynamic NOR2.

    Returns
    -------
    gdstk.Cell

    Notes
    -----
    pmos stack (W 1.0, L 0.18) [VDD | CLKB | pf | A | p1 | B | XP] with pf
    and p1 uncontacted 0.26 µm pieces; predischarge nmos (0.6/0.18)
    [XP | CLKB | VSS] on the same vertical CLKB poly; inverter XP→OUTP
    (nmos 0.6/0.18, pmos 1.2/0.18).  No keeper.  The clock is labelled
    CLKB, which the dsk18 tech file does not list as a clock.

    Examples
    --------
    >>> sorted({l.text for l in pdyn_nor2().labels})
    ['A', 'B', 'CLKB', 'OUTP', 'VDD', 'VSS', 'XP']
    """
    sk = Sketch()
    x0 = 1.0
    w = 1.0
    p = strip(
        sk,
        x0,
        P_Y0,
        [("d", 0.48, w), ("g", 0.18, w), ("d", 0.26, w), ("g", 0.18, w)]
        + [("d", 0.26, w), ("g", 0.18, w), ("d", 0.48, w)],
    )
    n = strip(sk, x0, N_Y0, [("d", 0.48, 0.6), ("g", 0.18, 0.6), ("d", 0.48, 0.6)])
    gate(sk, p[1], N_Y0 - EXT, P_Y0 + w + EXT)
    sk.label("poly", "CLKB", _mid(p[1]), 4.3)
    for name, idx in (("A", 3), ("B", 5)):
        gate(sk, p[idx], P_Y0 - EXT, P_Y0 + w + 0.5)
        sk.label("poly", name, _mid(p[idx]), P_Y0 + w + 0.35)
    yp, yn = P_Y0 + w / 2, N_Y0 + 0.3
    for x, y, to in (
        (_mid(p[0]), yp, 7.7),
        (_mid(p[6]), yp, BUS_Y),
        (_mid(n[0]), yn, BUS_Y),
        (_mid(n[2]), yn, 0.3),
    ):
        sk.contact(x, y)
        strap(sk, x, y, to)
    rx = receiver(sk, p[6][1] + 0.5, "OUTP")
    bus(sk, _mid(n[0]), rx["pad_x"], "XP", _mid(p[3]))
    return _finish(sk, "PDYN_NOR2", x0, rx["x_max"])


def static_nand2() -> gdstk.Cell:
    """``STATIC_NAND2``: static CMOS NAND2 (no dynamic stage).

    Returns
    -------
    gdstk.Cell

    Notes
    -----
    pmos [VDD | A | OUT | B | VDD] and nmos [OUT | A | n1 | B | VSS], all
    1.0/0.18 µm, sharing two vertical poly gates; n1 is an uncontacted
    0.48 µm piece.

    Examples
    --------
    >>> sorted({l.text for l in static_nand2().labels})
    ['A', 'B', 'OUT', 'VDD', 'VSS']
    """
    sk = Sketch()
    x0, w = 1.0, 1.0
    elems = [("d", 0.48, w), ("g", 0.18, w), ("d", 0.48, w), ("g", 0.18, w), ("d", 0.48, w)]
    p = strip(sk, x0, P_Y0, elems)
    n = strip(sk, x0, N_Y0, elems)
    for name, idx in (("A", 1), ("B", 3)):
        gate(sk, n[idx], N_Y0 - EXT, P_Y0 + w + EXT)
        sk.label("poly", name, _mid(n[idx]), 3.0)
    yp, yn = P_Y0 + w / 2, N_Y0 + w / 2
    for x, y, to in ((_mid(p[0]), yp, 7.7), (_mid(p[4]), yp, 7.7), (_mid(n[4]), yn, 0.3)):
        sk.contact(x, y)
        strap(sk, x, y, to)
    sk.contact(_mid(n[0]), yn)
    sk.contact(_mid(p[2]), yp)
    sk.wire("metal1", [(_mid(n[0]), yn), (_mid(n[0]), 3.5), (_mid(p[2]), 3.5), (_mid(p[2]), yp)], 0.32)
    sk.label("metal1", "OUT", _mid(n[0]), 2.7)
    return _finish(sk, "STATIC_NAND2", x0, n[-1][1])
