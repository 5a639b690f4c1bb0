"""Building blocks shared by the dsk18 demo cells.

Every demo cell uses one floor plan (y in µm):

====================  ===============================================
0.0 – 0.6             VSS rail (metal1)
1.4 –                 nmos diffusion strips (bottom edge ``N_Y0``)
3.68 – 4.02           the dynamic-node bus (metal1, ``BUS_Y``)
4.6 –                 pmos diffusion strips (bottom edge ``P_Y0``)
6.4 – 6.6             poly route from the receiver output to the keeper
7.4 – 8.0             VDD rail (metal1)
====================  ===============================================

:func:`precharge_keeper_receiver` draws the upper half of an n-type
dynamic stage: the clocked precharge pmos, the keeper pmos (gate = the
receiver output), the receiving inverter, the dynamic-node bus and the
keeper feedback.  The evaluation network below is drawn by the cell and
joins the bus with vertical metal1 straps.

All of it is our own invented demo in the dsk18 process.
"""

from __future__ import annotations

from sample_layouts.drawing import Sketch, snap, strip

__all__ = [
    "N_Y0",
    "P_Y0",
    "BUS_Y",
    "CELL_H",
    "STRAP_W",
    "EXT",
    "rails",
    "strap",
    "gate",
    "poly_contact",
    "implants",
    "bus",
    "receiver",
    "precharge_keeper_receiver",
]

N_Y0 = 1.4
P_Y0 = 4.6
BUS_Y = 3.85
BUS_W = 0.34
CELL_H = 8.0
STRAP_W = 0.32
#: Poly extension beyond the active on each side of a channel, µm.
EXT = 0.2
_MID_Y = 4.15
_ROUTE_Y = 6.5  # keeper feedback route  # actives below are nmos, above are pmos


def rails(sk: Sketch, x0: float, x1: float, vdd: str = "VDD", vss: str = "VSS") -> None:
    """Horizontal VSS (y 0–0.6) and VDD (y 7.4–8.0) metal1 rails.

    Parameters
    ----------
    sk : Sketch
    x0, x1 : float
        x extent of both rails.
    vdd, vss : str
        Their labels (placed 0.3 µm in from the left end).
    """
    sk.rect("metal1", x0, 0.0, x1, 0.6)
    sk.rect("metal1", x0, CELL_H - 0.6, x1, CELL_H)
    sk.label("metal1", vss, x0 + 0.3, 0.3)
    sk.label("metal1", vdd, x0 + 0.3, CELL_H - 0.3)


def strap(sk: Sketch, x: float, y_from: float, y_to: float) -> None:
    """Vertical metal1 strap of width :data:`STRAP_W` centred on x.

    Parameters
    ----------
    sk : Sketch
    x : float
        Centre line.
    y_from, y_to : float
        Ends; the strap reaches half its width past both (so it covers a
        contact centred on either end).
    """
    sk.wire("metal1", [(x, y_from), (x, y_to)], STRAP_W)


def gate(sk: Sketch, xr: tuple[float, float], y_lo: float, y_hi: float) -> None:
    """Vertical poly over the x range ``xr`` from y_lo to y_hi.

    Parameters
    ----------
    sk : Sketch
    xr : (float, float)
        The channel's x range (its length L).
    y_lo, y_hi : float
        y extent; at least :data:`EXT` beyond the active on both sides.
    """
    sk.rect("poly", xr[0], y_lo, xr[1], y_hi)


def poly_contact(sk: Sketch, x: float, y: float) -> None:
    """A 0.4 × 0.4 µm poly pad with a contact in its centre (x, y).

    Parameters
    ----------
    sk : Sketch
    x, y : float
        Centre; keep the pad off active (it would make a channel).
    """
    sk.rect("poly", x - 0.2, y - 0.2, x + 0.2, y + 0.2)
    sk.contact(x, y)


def _mid(r: tuple[float, float]) -> float:
    return snap((r[0] + r[1]) / 2)


def implants(sk: Sketch) -> None:
    """Implants and well from the drawn active.

    nimplant is the bounding box of the nmos actives (those below
    y = 4.15) grown by 0.2 µm; pimplant likewise for the pmos actives;
    nwell is the pimplant box grown by 0.3 µm and carried up over the
    VDD rail.  Call it after every active is drawn.

    Parameters
    ----------
    sk : Sketch
        Its ``active`` shapes decide the boxes; the implants are added to it.

    Notes
    -----
    One pass over the active shapes: linear in their number.
    """
    boxes = {"n": [], "p": []}
    for pts in sk.shapes.get("active", []):
        ys = [p[1] for p in pts]
        xs = [p[0] for p in pts]
        side = "n" if (min(ys) + max(ys)) / 2 < _MID_Y else "p"
        boxes[side].append((min(xs), min(ys), max(xs), max(ys)))
    for side, layer in (("n", "nimplant"), ("p", "pimplant")):
        if not boxes[side]:
            continue
        x0 = min(b[0] for b in boxes[side]) - 0.2
        y0 = min(b[1] for b in boxes[side]) - 0.2
        x1 = max(b[2] for b in boxes[side]) + 0.2
        y1 = max(b[3] for b in boxes[side]) + 0.2
        sk.rect(layer, x0, y0, x1, y1)
        if side == "p":
            sk.rect("nwell", x0 - 0.3, y0 - 0.3, x1 + 0.3, max(y1 + 0.3, CELL_H + 0.2))


def bus(sk: Sketch, x0: float, x1: float, name: str, label_x: float) -> None:
    """The dynamic-node bus: horizontal metal1, 0.34 µm wide, centre y 3.85.

    Parameters
    ----------
    sk : Sketch
    x0, x1 : float
        Ends of the centre line (the bus reaches 0.17 µm past them).
    name : str
        Its label, placed at (label_x, 3.85).
    label_x : float
    """
    sk.wire("metal1", [(x0, BUS_Y), (x1, BUS_Y)], BUS_W)
    sk.label("metal1", name, label_x, BUS_Y)


def receiver(sk: Sketch, inv_x: float, out: str, strap_top: float | None = None) -> dict[str, float]:
    """Draw the receiving inverter whose input is the dynamic-node bus.

    Parameters
    ----------
    sk : Sketch
    inv_x : float
        Left edge: [rail | gate | output] pieces, nmos (W 0.6) on the nmos
        row and pmos (W 1.2) on the pmos row, one vertical poly gate.
    out : str
        Label of the output strap.
    strap_top : float, optional
        Carry the output strap up to this y (for a keeper feedback pad).

    Returns
    -------
    dict
        ``pad_x`` (gate contact on the bus, centre), ``out_x`` (output
        strap centre) and ``x_max`` (right edge).

    Examples
    --------
    >>> sk = Sketch()
    >>> receiver(sk, 2.0, "OUT")
    {'pad_x': 2.34, 'out_x': 2.9, 'x_max': 3.14}
    >>> len(sk.shapes["active"]), len(sk.shapes["contact"])
    (6, 5)
    """
    inv_x = snap(inv_x)
    n = strip(sk, inv_x, N_Y0, [("d", 0.48, 0.6), ("g", 0.18, 0.6), ("d", 0.48, 0.6)])
    strip(sk, inv_x, P_Y0, [("d", 0.48, 1.2), ("g", 0.18, 1.2), ("d", 0.48, 1.2)])
    gate(sk, n[1], N_Y0 - EXT, P_Y0 + 1.2 + EXT)
    sk.rect("poly", n[0][0] + 0.18, BUS_Y - 0.2, n[1][1], BUS_Y + 0.2)  # pad on the gate
    pad_x = snap(n[0][0] + 0.34)
    sk.contact(pad_x, BUS_Y)
    yn, yp = N_Y0 + 0.3, P_Y0 + 0.6
    for y in (yn, yp):
        sk.contact(_mid(n[0]), y)
        sk.contact(_mid(n[2]), y)
    strap(sk, _mid(n[0]), yn, 0.3)
    strap(sk, _mid(n[0]), yp, CELL_H - 0.3)
    out_x = _mid(n[2])
    strap(sk, out_x, yn, yp if strap_top is None else strap_top)
    sk.label("metal1", out, out_x, 3.0)
    return {"pad_x": pad_x, "out_x": out_x, "x_max": n[2][1]}


def precharge_keeper_receiver(
    sk: Sketch,
    clk_x: float,
    clk_bottom: float,
    inv_x: float,
    clk_top: float = P_Y0 + 0.6 + EXT,
    node: str = "X",
    out: str = "OUT",
    clock: str = "CLK",
) -> dict[str, float]:
    """Draw the upper half of an n-type dynamic stage.

    Parameters
    ----------
    sk : Sketch
    clk_x : float
        Left edge of the vertical clock poly column (the footer gate of the
        evaluation network below lies on it).  The precharge pmos sits on
        this column: drain (dynamic node) left, source (VDD) right.
    clk_bottom, clk_top : float
        y extent of the clock column.
    inv_x : float
        Left edge of the receiving inverter (VSS/VDD piece, gate, output).
    node, out, clock : str
        Labels of the dynamic node, the inverter output and the clock.

    Returns
    -------
    dict
        ``bus_x0``/``bus_x1`` (the dynamic-node bus centre line runs
        between them at y = 3.85; straps from below must land inside),
        ``x_max`` (right edge of the drawing), ``keeper_x`` and the
        precharge drain contact ``pre_x``.

    Notes
    -----
    Devices (W/L, µm): precharge pmos 0.6/0.18, keeper pmos 0.3/0.36,
    inverter nmos 0.6/0.18 and pmos 1.2/0.18.  Every source/drain piece
    is 0.48 µm long with one contact in its middle.  Constant cost.

    Examples
    --------
    >>> sk = Sketch()
    >>> top = precharge_keeper_receiver(sk, clk_x=1.48, clk_bottom=1.2, inv_x=4.0)
    >>> top["bus_x0"], top["bus_x1"], top["x_max"]
    (1.24, 4.7, 5.5)
    >>> sorted(text for _, text, _, _ in sk.labels)
    ['CLK', 'OUT', 'X']
    """
    # precharge pmos: [node | clock | VDD]
    pre = strip(sk, clk_x - 0.48, P_Y0, [("d", 0.48, 0.6), ("g", 0.18, 0.6), ("d", 0.48, 0.6)])
    gate(sk, pre[1], clk_bottom, clk_top)
    sk.label("poly", clock, _mid(pre[1]), 4.3)
    yc = P_Y0 + 0.3
    for r in (pre[0], pre[2]):
        sk.contact(_mid(r), yc)
    strap(sk, _mid(pre[0]), yc, BUS_Y)
    strap(sk, _mid(pre[2]), yc, CELL_H - 0.3)

    # keeper pmos: [VDD | out | node], W 0.3, L 0.36
    kx = snap(pre[2][1] + 0.4)
    kp = strip(sk, kx, P_Y0, [("d", 0.48, 0.3), ("g", 0.36, 0.3), ("d", 0.48, 0.3)])
    yk = P_Y0 + 0.15
    for r in (kp[0], kp[2]):
        sk.contact(_mid(r), yk)
    strap(sk, _mid(kp[0]), yk, CELL_H - 0.3)
    strap(sk, _mid(kp[2]), yk, BUS_Y)

    rx = receiver(sk, max(inv_x, kp[2][1] + 0.5), out, strap_top=_ROUTE_Y)
    # keeper gate: poly up from the keeper channel, across to a pad on the output strap
    sk.rect("poly", kp[1][0], P_Y0 - EXT, kp[1][1], _ROUTE_Y + 0.1)
    sk.rect("poly", kp[1][0], _ROUTE_Y - 0.1, rx["out_x"], _ROUTE_Y + 0.1)
    poly_contact(sk, rx["out_x"], _ROUTE_Y)

    bus_x0 = _mid(pre[0])
    bus(sk, bus_x0, rx["pad_x"], node, _mid(kp[1]))
    return {
        "bus_x0": bus_x0,
        "bus_x1": rx["pad_x"],
        "x_max": rx["x_max"],
        "keeper_x": kx,
        "pre_x": bus_x0,
    }
