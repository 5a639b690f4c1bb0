"""The cell's layout as inline SVG, every net coloured by its capacitance.

:func:`layout_svg` draws ``circuit.shapes`` (the per-net conductor pieces
that extraction keeps) as one ``<g data-net="NAME">`` per net, filled with
a colour from a sequential single-hue ramp (:func:`cap_ramp`) binned by
total capacitance, with a ``<title>`` giving the net's name and its
capacitance parts.  Power and ground nets are drawn neutral (grey
cross-hatch).  Nets to point out (dynamic nodes, flagged nodes, shared
nodes) are outlined with distinct dash patterns and labelled, so the
marking does not rely on colour.

Coordinates are written in integer nanometres with the y axis flipped
(SVG y grows downwards, layout y upwards), so the picture looks like the
layout.  Layers are drawn in process order: diffusion, poly, then metals
in tech-file order; diffusion and poly are solid, metals hatched so that
what lies under them stays visible.
"""

from __future__ import annotations

import colorsys
import html
import math
from dataclasses import dataclass

import numpy as np
import shapely

from extract.circuit import CAP_PART_NAMES, Circuit

__all__ = ["Mark", "MARK_STYLES", "cap_ramp", "cap_bins", "bin_of", "layout_svg", "MAX_SHAPES", "MAX_LABELS"]

#: Above this many shapes only the nets asked for (``keep``) are drawn.
MAX_SHAPES = 20_000
#: At most this many marked nets are labelled (all are outlined).
MAX_LABELS = 30

#: Outline styles of marked nets: mark kind -> (stroke width px, dash array, legend text).
MARK_STYLES = {
    "dynamic": (3.0, "none", "dynamic node (solid outline)"),
    "flag": (2.5, "7 3", "needs a precharge / predischarge device (dashed outline)"),
    "shared": (1.5, "1.5 2.5", "shared node of the worst case (dotted outline)"),
}

_RAIL_FILL = "#e4e4e4"
_RAIL_LINE = "#8c8c8c"
_KIND_RANK = {"diffusion": 0, "poly": 1, "metal": 2}


@dataclass(frozen=True)
class Mark:
    """A net to outline and label.

    Attributes
    ----------
    net : str
    kind : str
        A key of :data:`MARK_STYLES`.
    text : str
        Label drawn beside the net; ``""`` outlines without a label.
    at_um : tuple of float or None
        Where to put the label (default: the net's ``location_um``).
    """

    net: str
    kind: str
    text: str
    at_um: tuple[float, float] | None = None


def cap_ramp(n: int) -> list[str]:
    """``n`` colours from light to dark in one hue family (blue-teal).

    Parameters
    ----------
    n : int
        Number of colours, at least 1.

    Returns
    -------
    list of str
        ``#rrggbb`` strings, lightness falling strictly from 93 % to 18 %.

    Notes
    -----
    HLS lightness is stepped evenly at a fixed hue (205°) and saturation
    (55 %), so relative luminance falls monotonically: the order survives
    greyscale printing and every form of colour-blindness, because it is
    carried by lightness, not hue.  Our own choice of ramp.

    Examples
    --------
    >>> cap_ramp(3)
    ['#e3eff7', '#4f98cc', '#153247']
    """
    if n < 1:
        raise ValueError("n must be at least 1")
    out = []
    for i in range(n):
        light = 0.93 if n == 1 else 0.93 - (0.93 - 0.18) * i / (n - 1)
        r, g, b = colorsys.hls_to_rgb(205 / 360, light, 0.55)
        out.append("#%02x%02x%02x" % tuple(round(c * 255) for c in (r, g, b)))
    return out


def _nice_step(raw: float) -> float:
    """Smallest of 1, 2, 2.5, 5 times a power of ten that is >= ``raw``."""
    if raw <= 0:
        return 1.0
    k = math.floor(math.log10(raw))
    for m in (1, 2, 2.5, 5, 10):
        step = m * 10.0**k
        if step >= raw * (1 - 1e-12):
            return step
    return 10.0 ** (k + 1)  # pragma: no cover - the loop always returns


def cap_bins(values, max_bins: int = 7) -> list[float]:
    """Round bin edges (fF) from 0 up to at least ``max(values)``.

    Parameters
    ----------
    values : iterable of float
        Capacitances, fF.
    max_bins : int
        At most this many bins.

    Returns
    -------
    list of float
        Edges ``[0, s, 2s, ...]``, ``s`` a 1-2-2.5-5 step; one bin ``[0, 1]``
        when there are no values.

    Examples
    --------
    >>> cap_bins([1.3, 7.9, 4.2])
    [0.0, 2.0, 4.0, 6.0, 8.0]
    >>> cap_bins([])
    [0.0, 1.0]
    """
    top = max([float(v) for v in values] or [0.0])
    step = _nice_step(top / max_bins) if top > 0 else 1.0
    n = max(1, math.ceil(top / step - 1e-9))
    return [round(i * step, 10) for i in range(n + 1)]


def bin_of(value: float, edges: list[float]) -> int:
    """Index of the bin holding ``value`` (the last bin is closed).

    >>> bin_of(0.0, [0, 2, 4]), bin_of(2.0, [0, 2, 4]), bin_of(4.0, [0, 2, 4])
    (0, 1, 1)
    """
    i = int(np.searchsorted(edges, value, side="right")) - 1
    return min(max(i, 0), len(edges) - 2)


def _fmt(x: float) -> str:
    return f"{x:.3f}".rstrip("0").rstrip(".") if x != int(x) else str(int(x))


def _title(circuit: Circuit, name: str) -> str:
    net = circuit.nets.get(name)
    if net is None:
        return name
    lines = [f"{name} ({net.role}): {net.cap_ff:.3f} fF"]
    parts = net.cap.as_dict()
    lines += [f"{p.replace('_', ' ')}: {parts[p]:.3f} fF" for p in CAP_PART_NAMES if parts[p]]
    return "\n".join(lines)


def _path_data(geoms) -> str:
    """SVG path data of polygons, integer nm, y flipped; holes as rings."""
    rings = shapely.get_rings(shapely.get_parts(np.asarray(geoms, dtype=object)))
    coords, idx = shapely.get_coordinates(rings, return_index=True)
    if len(coords) == 0:
        return ""
    pts = np.rint(coords * 1000.0).astype(np.int64)
    pts[:, 1] = -pts[:, 1]
    cuts = np.flatnonzero(np.diff(idx)) + 1
    out = []
    for ring in np.split(pts, cuts):
        ring = ring[:-1] if len(ring) > 1 and (ring[0] == ring[-1]).all() else ring
        body = " ".join(f"{x} {y}" for x, y in ring[1:].tolist())
        out.append(f"M{ring[0, 0]} {ring[0, 1]}L{body}Z")
    return "".join(out)


def _layer_order(tech, layers: set[str]) -> list[str]:
    kinds = {n: lay.kind for n, lay in tech.layers.items()} if tech is not None else {}
    file_pos = {n: i for i, n in enumerate(kinds)}
    return sorted(layers, key=lambda n: (_KIND_RANK.get(kinds.get(n, "metal"), 2), file_pos.get(n, 99), n))


def _select(circuit: Circuit, keep, max_shapes: int) -> tuple[list[str], str]:
    """Nets to draw and a note when the drawing is capped."""
    total = sum(len(v) for v in circuit.shapes.values())
    names = sorted(circuit.shapes)
    if total <= max_shapes:
        return names, ""
    chosen, used = [], 0
    for name in dict.fromkeys(keep or ()):
        n = len(circuit.shapes.get(name, ()))
        if n and used + n <= max_shapes:
            chosen.append(name)
            used += n
    note = (
        f"The cell has {total} shapes on {len(names)} nets; to keep this page small only "
        f"{len(chosen)} nets of the analysed stages ({used} shapes) are drawn."
    )
    return sorted(chosen), note


def _patterns(ramp: list[str], metal_layers: list[str], size: int) -> str:
    """Hatch patterns: one per (metal layer, colour) and one for the rails."""
    out = []
    for li, layer in enumerate(metal_layers):
        angle = 45 if li % 2 == 0 else -45
        for ci, colour in enumerate(ramp + [_RAIL_LINE]):
            out.append(
                f'<pattern id="h{li}c{ci}" patternUnits="userSpaceOnUse" width="{size}" height="{size}" '
                f'patternTransform="rotate({angle})"><rect width="{max(1, size * 2 // 5)}" height="{size}" fill="{colour}"/></pattern>'
            )
    out.append(
        f'<pattern id="rail" patternUnits="userSpaceOnUse" width="{size}" height="{size}">'
        f'<rect width="{size}" height="{size}" fill="{_RAIL_FILL}"/>'
        f'<path d="M0 0L{size} {size}M{size} 0L0 {size}" stroke="{_RAIL_LINE}" stroke-width="{max(1, size // 8)}"/></pattern>'
    )
    return "<defs>" + "".join(out) + "</defs>"


def layout_svg(circuit: Circuit, tech=None, marks=(), keep=(), max_shapes: int = MAX_SHAPES) -> tuple[str, list[float], str]:
    """Draw the layout of ``circuit`` as an inline SVG element.

    Parameters
    ----------
    circuit : Circuit
        ``circuit.shapes`` maps net name -> list of ``(layer, Polygon)`` (µm).
    tech : Tech, optional
        For the layer order (diffusion, poly, metals in file order).
    marks : iterable of Mark
        Nets to outline and label; a net marked twice keeps its first mark.
    keep : iterable of str
        Nets to draw, in priority order, when the cell has more than
        ``max_shapes`` shapes.
    max_shapes : int

    Returns
    -------
    svg : str
        ``<svg class="layout">...</svg>``, or ``""`` when there is nothing to draw.
    edges : list of float
        Capacitance bin edges (fF) of the colour scale (for the legend).
    note : str
        Why the drawing is incomplete, or ``""``.

    Notes
    -----
    One pass over the shapes: rings and coordinates come out of shapely in
    bulk and are written as integer nm, O(vertices).  Nets are drawn in
    the order of their highest layer, then name, so metal lies over the
    diffusion and poly of other nets.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> from extract.circuit import Circuit, Net, CapParts
    >>> c = Circuit("T", {"A": Net("A", cap=CapParts(wire=1.0))}, [],
    ...             shapes={"A": [("poly", box(0, 0, 1, 2))]})
    >>> svg, edges, note = layout_svg(c)
    >>> svg.count('data-net="A"'), edges, note
    (1, [0.0, 0.2, 0.4, 0.6, 0.8, 1.0], '')
    """
    names, note = _select(circuit, keep, max_shapes)
    names = [n for n in names if circuit.shapes.get(n)]
    if not names:
        return "", [0.0, 1.0], note
    signal = [circuit.nets[n].cap_ff for n in names if n in circuit.nets and circuit.nets[n].role not in ("power", "ground")]
    edges = cap_bins(signal)
    ramp = cap_ramp(len(edges) - 1)
    all_geoms = [g for n in names for _, g in circuit.shapes[n]]
    x0, y0, x1, y1 = shapely.total_bounds(np.asarray(all_geoms, dtype=object))
    span = max(x1 - x0, y1 - y0, 1e-3)
    pad = 0.04 * span
    box = (round((x0 - pad) * 1000), round(-(y1 + pad) * 1000), round((x1 + pad) * 1000), round(-(y0 - pad) * 1000))
    hatch = max(2, round(span * 1000 / 120))
    layers = _layer_order(tech, {lay for n in names for lay, _ in circuit.shapes[n]})
    kind = {n: lay.kind for n, lay in tech.layers.items()} if tech is not None else {}
    metals = [lay for lay in layers if kind.get(lay, "metal") == "metal"]
    rank = {lay: i for i, lay in enumerate(layers)}
    marked: dict[str, Mark] = {}
    for m in marks:
        marked.setdefault(m.net, m)
    labels_svg, vb, label_note = _labels(circuit, [m for m in marked.values() if m.net in names], box)
    note = " ".join(t for t in (note, label_note) if t)

    def order(n):
        return (max(rank[lay] for lay, _ in circuit.shapes[n]), n)

    parts = [
        f'<svg class="layout" xmlns="http://www.w3.org/2000/svg" viewBox="{" ".join(map(str, vb))}" '
        f'role="img" aria-label="layout of {html.escape(circuit.cell)}">',
        "<style>.net path{vector-effect:non-scaling-stroke}</style>",
        _patterns(ramp, metals, hatch),
    ]
    for name in sorted(names, key=order):
        net = circuit.nets.get(name)
        rail = net is not None and net.role in ("power", "ground")
        ci = len(ramp) if rail else bin_of(net.cap_ff if net else 0.0, edges)
        colour = _RAIL_FILL if rail else ramp[ci]
        cls = "net rail" if rail else "net"
        style = ""
        if name in marked:
            width, dash, _ = MARK_STYLES[marked[name].kind]
            cls += f" mark-{marked[name].kind}"
            style = f' stroke="#000000" stroke-width="{width}" stroke-dasharray="{dash}"'
        cap = f"{net.cap_ff:.3f}" if net else "0"
        body = [f'<g class="{cls}" data-net="{html.escape(name)}" data-cap-ff="{cap}"{style}>',
                f"<title>{html.escape(_title(circuit, name))}</title>"]
        by_layer: dict[str, list] = {}
        for lay, g in circuit.shapes[name]:
            by_layer.setdefault(lay, []).append(g)
        for lay in sorted(by_layer, key=rank.__getitem__):
            if lay in metals:
                fill = f"url(#h{metals.index(lay)}c{ci})"
                line = _RAIL_LINE if rail else ramp[min(ci + 2, len(ramp) - 1)]
                extra = "" if name in marked else f' stroke="{line}" stroke-width="0.75"'
            else:
                fill = "url(#rail)" if rail else colour
                extra = ""
            body.append(f'<path data-layer="{html.escape(lay)}" fill="{fill}" fill-rule="evenodd"{extra} '
                        f'd="{_path_data(by_layer[lay])}"/>')
        body.append("</g>")
        parts.append("".join(body))
    parts.append(labels_svg)
    parts.append("</svg>")
    return "\n".join(parts), edges, note


def _labels(circuit: Circuit, marks: list[Mark], box: tuple[int, int, int, int]) -> tuple[str, list[int], str]:
    """Numbered badges at the marked points and a key right of the layout;
    returns the SVG, the viewBox that makes room for the key, and a note
    when no badges are drawn.

    Badges are numbered in reading order of their points (top to bottom,
    left to right); at most :data:`MAX_LABELS` are written, and none when
    two points are too close for badges of a readable size (all pairs of
    at most :data:`MAX_LABELS` points are compared).
    """
    bx0, by0, bx1, by1 = box
    items = []
    for m in marks:
        at = m.at_um or (circuit.nets[m.net].location_um if m.net in circuit.nets else None)
        if at is not None and m.text:
            items.append((round(-at[1] * 1000), round(at[0] * 1000), m))
    items = sorted(items, key=lambda t: (t[0], t[1], t[2].net))[:MAX_LABELS]
    width, height = bx1 - bx0, by1 - by0
    if not items:
        return "", [bx0, by0, width, height], ""
    chars = min(48, max(len(t[2].text) for t in items)) + 4
    size = max(1, round(max(width / (72 - 0.6 * chars), height / 50)))
    pts = np.array([(x, y) for y, x, _ in items], dtype=float)
    gaps = np.hypot(*(pts[:, None, :] - pts[None, :, :]).transpose(2, 0, 1)) + np.eye(len(pts)) * 1e18
    r = round(min(0.7 * size, 0.5 * float(gaps.min())))
    if r < 0.35 * size:
        return "", [bx0, by0, width, height], "Marked nodes are too close at this scale to be numbered; see the outlines."
    num = round(min(0.85 * size, 1.2 * r))
    col = bx1 + size
    step = round(1.5 * size)
    bottom = max(by1, by0 + size + step * len(items))
    vb = [bx0, by0, width + round(size * (0.62 * chars + 2)), bottom - by0]
    out = [f'<g class="labels" font-family="sans-serif" font-size="{size}">']
    for k, (y, x, m) in enumerate(items, start=1):
        text = m.text if len(m.text) <= 48 else m.text[:47] + "…"
        ty = by0 + size + (k - 1) * step
        badge = (f'<circle cx="{{x}}" cy="{{y}}" r="{r}" fill="#ffffff" stroke="#000000" stroke-width="{max(1, r // 6)}"/>'
                 f'<text x="{{x}}" y="{{ty}}" text-anchor="middle" font-size="{num}" '
                 f'font-weight="bold">{k}</text>')
        out.append(
            f'<g class="label" data-label-for="{html.escape(m.net)}">'
            + badge.format(x=x, y=y, ty=y + round(0.35 * num))
            + badge.format(x=col + r, y=ty - round(0.35 * num), ty=ty)
            + f'<text x="{col + 2 * r + size // 3}" y="{ty}">{html.escape(text)}</text></g>'
        )
    out.append("</g>")
    return "".join(out), vb, ""
