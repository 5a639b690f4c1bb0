"""Multi-leg domino cells of the dsk18 demo: AND-OR and one-hot muxes.

A domino stage with parallel legs X–g1–g2–…–FOOT and one shared footer
(FOOT–CLK–VSS) is drawn as one long diffusion strip in which neighbouring
legs are mirrored and share their contacted pieces::

    FOOT | a_k … a_1 | X | b_1 … b_k | FOOT | c_k … c_1 | X | …

so each X piece and each FOOT piece serves two legs.  Mid-leg pieces are
uncontacted 0.26 µm diffusion.  X pieces strap up to the dynamic-node bus;
FOOT pieces strap down to a metal1 foot bus that leads to the footer.

All of it is our own invented demo in the dsk18 process.
"""

from __future__ import annotations

import gdstk

from sample_layouts.blocks import (
    BUS_Y,
    EXT,
    N_Y0,
    gate,
    implants,
    precharge_keeper_receiver,
    rails,
    strap,
)
from sample_layouts.drawing import Sketch, snap, strip

__all__ = ["domino_legs", "domino_ao22", "domino_mux4", "domino_or16"]

_W = 1.0  # evaluation device width, µm
_FOOT_Y = 0.95  # centre line of the foot bus


def _series(gates):
    """Channels for ``gates`` in order with 0.26 µm mid pieces between."""
    out = []
    for i, g in enumerate(gates):
        if i:
            out.append((("d", 0.26, _W), "mid"))
        out.append((("g", 0.18, _W), g))
    return out


def _leg_elements(legs):
    """Strip elements ``("d"|"g", length, width)`` and their tags
    (``"foot"``, ``"x"``, ``"mid"`` or the gate net), left to right."""
    seq = [(("d", 0.48, _W), "foot")]
    for i in range(0, len(legs), 2):
        pair = legs[i : i + 2]
        seq += _series(list(reversed(pair[0]))) + [(("d", 0.48, _W), "x")]
        if len(pair) == 2:
            seq += _series(pair[1]) + [(("d", 0.48, _W), "foot")]
    return [e for e, _ in seq], [t for _, t in seq]


def domino_legs(name: str, legs, footer_w: float = 1.2) -> gdstk.Cell:
    """A footed domino stage with parallel series legs.

    Parameters
    ----------
    name : str
        Cell name.
    legs : sequence of sequence of str
        Gate nets of each leg, from the dynamic node X towards the footer.
    footer_w : float
        Footer nmos width, µm (at most 2.0 so it stays below the bus).

    Returns
    -------
    gdstk.Cell
        Labels: VDD, VSS, CLK, X, OUT, FOOT and every gate net.

    Raises
    ------
    ValueError
        When ``legs`` is empty or ``footer_w`` is out of range.

    Notes
    -----
    Evaluation devices are 1.0/0.18 µm, the footer ``footer_w``/0.18; the
    precharge, keeper and inverter are those of
    :func:`sample_layouts.blocks.precharge_keeper_receiver`.  Drawing
    cost is linear in the number of gates.

    Examples
    --------
    >>> c = domino_legs("T", [["A1", "A2"], ["B1", "B2"]])
    >>> sorted({l.text for l in c.labels})
    ['A1', 'A2', 'B1', 'B2', 'CLK', 'FOOT', 'OUT', 'VDD', 'VSS', 'X']
    """
    if not legs or not all(legs):
        raise ValueError("a domino stage needs at least one non-empty leg")
    if not 0.3 <= footer_w <= 2.0:
        raise ValueError("footer_w must be between 0.3 and 2.0 µm")
    sk = Sketch()
    x0 = 1.0
    # footer: [VSS | CLK | FOOT]
    f = strip(sk, x0, N_Y0, [("d", 0.48, footer_w), ("g", 0.18, footer_w), ("d", 0.48, footer_w)])
    yf = snap(N_Y0 + footer_w / 2)
    sk.contact(_mid(f[0]), yf)
    strap(sk, _mid(f[0]), yf, 0.3)
    sk.contact(_mid(f[2]), yf)
    strap(sk, _mid(f[2]), yf, _FOOT_Y)

    elems, tags = _leg_elements(legs)
    r = strip(sk, f[2][1] + 0.4, N_Y0, elems)
    yc = N_Y0 + _W / 2
    foot_x = [_mid(f[2])]
    for xr, tag in zip(r, tags):
        if tag == "foot":
            sk.contact(_mid(xr), yc)
            strap(sk, _mid(xr), yc, _FOOT_Y)
            foot_x.append(_mid(xr))
        elif tag == "x":
            sk.contact(_mid(xr), yc)
            strap(sk, _mid(xr), yc, BUS_Y)
        elif tag != "mid":
            gate(sk, xr, N_Y0 - EXT, N_Y0 + _W + 0.5)
            sk.label("poly", tag, _mid(xr), N_Y0 + _W + 0.35)
    sk.wire("metal1", [(foot_x[0], _FOOT_Y), (foot_x[-1], _FOOT_Y)], 0.28)
    sk.label("metal1", "FOOT", snap((foot_x[0] + foot_x[1]) / 2), _FOOT_Y)

    top = precharge_keeper_receiver(sk, clk_x=f[1][0], clk_bottom=N_Y0 - EXT, inv_x=r[-1][1] + 0.5)
    rails(sk, x0 - 0.5, top["x_max"] + 0.5)
    implants(sk)
    return sk.cell(name)


def _mid(r: tuple[float, float]) -> float:
    return snap((r[0] + r[1]) / 2)


def domino_ao22() -> gdstk.Cell:
    """``DOMINO_AO22``: X–A1–A2–FOOT and X–B1–B2–FOOT, shared footer (W 1.2).

    Returns
    -------
    gdstk.Cell
    """
    return domino_legs("DOMINO_AO22", [["A1", "A2"], ["B1", "B2"]], footer_w=1.2)


def domino_mux4() -> gdstk.Cell:
    """``DOMINO_MUX4``: four legs X–S_i–D_i–FOOT (one-hot selects S0..S3),
    shared footer (W 1.6).

    Returns
    -------
    gdstk.Cell
    """
    return domino_legs("DOMINO_MUX4", [[f"S{i}", f"D{i}"] for i in range(4)], footer_w=1.6)


def domino_or16() -> gdstk.Cell:
    """``DOMINO_OR16``: sixteen legs X–S_i–D_i–FOOT (32 inputs), shared
    footer (W 2.0), for the analysis speed check.

    Returns
    -------
    gdstk.Cell
    """
    return domino_legs("DOMINO_OR16", [[f"S{i}", f"D{i}"] for i in range(16)], footer_w=2.0)
