"""Small hand-written SVG charts for the HTML report.

:func:`pattern_plot_svg` draws the final dynamic-node voltage of each
counted input pattern, worst first, against the receiver threshold and
the required level (threshold plus guard).  :func:`paired_bars_svg`
draws pre-layout against post-layout values as pairs of horizontal bars.

Pass and fail, pre and post are told apart by fill *and* texture (solid
against hatched), never by colour alone, and every bar carries a
``<title>`` with its numbers.  Output depends only on the arguments.
"""

from __future__ import annotations

import html
import math

__all__ = ["pattern_plot_svg", "paired_bars_svg", "waveform_svg", "nice_ticks"]

_PASS = "#4f98cc"
_FAIL = "#1d1d1d"
_PRE = "#a9c4d8"
_POST = "#1f3b52"
_HATCH = (
    '<pattern id="{id}" patternUnits="userSpaceOnUse" width="6" height="6" patternTransform="rotate(45)">'
    '<rect width="6" height="6" fill="#ffffff"/><rect width="3" height="6" fill="{colour}"/></pattern>'
)


def nice_ticks(top: float, n: int = 5) -> list[float]:
    """Round tick values from 0 to at least ``top``.

    >>> nice_ticks(1.8)
    [0.0, 0.5, 1.0, 1.5, 2.0]
    >>> nice_ticks(0)
    [0.0, 1.0]
    """
    if top <= 0:
        return [0.0, 1.0]
    raw = top / n
    k = math.floor(math.log10(raw))
    step = next(m * 10.0**k for m in (1, 2, 2.5, 5, 10) if m * 10.0**k >= raw * (1 - 1e-12))
    count = math.ceil(top / step - 1e-9)
    return [round(i * step, 10) for i in range(count + 1)]


def _t(x: float) -> str:
    return f"{x:.1f}".rstrip("0").rstrip(".")


def pattern_plot_svg(points, *, threshold_v: float, guard_v: float, vdd: float, polarity: str = "n",
                     caption: str = "", pattern_id: str = "p") -> str:
    """Final voltage per counted pattern, worst first, as an SVG bar chart.

    Parameters
    ----------
    points : iterable of (float, str)
        ``(v_final in V, hover text)`` per pattern, any order.
    threshold_v : float
        Receiver threshold, V (solid line).
    guard_v : float
        Required margin, V: the dashed line is at ``threshold + guard``
        (n-type) or ``threshold − guard`` (p-type).
    vdd : float
        Top of the voltage axis.
    polarity : {"n", "p"}
        n-type: worst is lowest and a pattern fails below the dashed line;
        p-type: worst is highest and it fails above.
    caption : str
        Shown under the chart (e.g. that the pattern list is capped).
    pattern_id : str
        Prefix for the ids of the hatch pattern (unique per page).

    Returns
    -------
    str
        ``<svg class="patterns">``; one ``<rect class="bar pass|fail">`` per point.

    Notes
    -----
    O(points).  Sorting is stable on (voltage, hover text) so equal
    voltages keep a fixed order.

    Examples
    --------
    >>> svg = pattern_plot_svg([(1.4, "a"), (0.6, "b")], threshold_v=0.8, guard_v=0.05, vdd=1.8)
    >>> svg.count('class="bar fail"'), svg.count('class="bar pass"')
    (1, 1)
    """
    pts = sorted(((float(v), str(t)) for v, t in points), key=lambda p: (p[0] if polarity == "n" else -p[0], p[1]))
    need = threshold_v + guard_v if polarity == "n" else threshold_v - guard_v
    w, h, left, right, top, bottom = 640, 260, 52, 12, 14, 34
    pw, ph = w - left - right, h - top - bottom
    ticks = nice_ticks(vdd)
    ymax = ticks[-1]

    def y(v: float) -> float:
        return top + ph * (1 - max(0.0, min(v, ymax)) / ymax)

    hid = f"{pattern_id}-fail"
    out = [f'<svg class="patterns" xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {w} {h}" role="img" '
           f'aria-label="final voltage per input pattern" font-family="sans-serif" font-size="11">',
           "<defs>" + _HATCH.format(id=hid, colour=_FAIL) + "</defs>"]
    for t in ticks:
        out.append(f'<line x1="{left}" x2="{w - right}" y1="{_t(y(t))}" y2="{_t(y(t))}" stroke="#dddddd"/>'
                   f'<text x="{left - 6}" y="{_t(y(t) + 4)}" text-anchor="end">{t:g}</text>')
    n = len(pts)
    bw = pw / max(n, 1)
    gap = 0.15 * bw if bw > 3 else 0.0
    fails = 0
    for i, (v, text) in enumerate(pts):
        bad = v < need if polarity == "n" else v > need
        fails += bad
        x = left + i * bw
        fill = f"url(#{hid})" if bad else _PASS
        verdict = "fails" if bad else "passes"
        out.append(f'<rect class="bar {"fail" if bad else "pass"}" x="{x + gap / 2:.2f}" y="{y(v):.2f}" '
                   f'width="{max(bw - gap, 0.5):.2f}" height="{y(0) - y(v):.2f}" fill="{fill}" stroke="{_FAIL if bad else "none"}" '
                   f'stroke-width="0.5"><title>{html.escape(text)}\nv_final {v:.3f} V ({verdict})</title></rect>')
    out.append(f'<line class="threshold" x1="{left}" x2="{w - right}" y1="{_t(y(threshold_v))}" y2="{_t(y(threshold_v))}" '
               f'stroke="#000000" stroke-width="1.5"/>')
    if guard_v:
        out.append(f'<line class="required" x1="{left}" x2="{w - right}" y1="{_t(y(need))}" y2="{_t(y(need))}" '
                   f'stroke="#000000" stroke-width="1.5" stroke-dasharray="6 4"/>')
    lab_y = y(threshold_v) - 4 if polarity == "n" else y(threshold_v) + 12
    guard_text = f", dashed: required {need:.3f} V" if guard_v else ""
    out.append(f'<text x="{w - right - 4}" y="{_t(lab_y)}" text-anchor="end" stroke="#ffffff" stroke-width="3" '
               f'paint-order="stroke">solid: threshold {threshold_v:.3f} V{guard_text}</text>')
    out.append(f'<line x1="{left}" x2="{left}" y1="{top}" y2="{_t(y(0))}" stroke="#000000"/>'
               f'<line x1="{left}" x2="{w - right}" y1="{_t(y(0))}" y2="{_t(y(0))}" stroke="#000000"/>')
    out.append(f'<text x="14" y="{top + ph / 2:.0f}" transform="rotate(-90 14 {top + ph / 2:.0f})" '
               f'text-anchor="middle">v_final (V)</text>')
    order, side = ("lowest", "below") if polarity == "n" else ("highest", "above")
    out.append(f'<text x="{left + pw / 2:.0f}" y="{h - 18}" text-anchor="middle">{n} patterns, {order} v_final first'
               f' ({fails} {side} the required level)</text>')
    if caption:
        out.append(f'<text class="caption" x="{left + pw / 2:.0f}" y="{h - 4}" text-anchor="middle" '
                   f'font-style="italic">{html.escape(caption)}</text>')
    out.append("</svg>")
    return "\n".join(out)


def paired_bars_svg(rows, *, unit: str, axis_max: float | None = None, pattern_id: str = "q",
                    mark_text: str = "") -> str:
    """Pre-layout against post-layout values as horizontal bar pairs.

    Parameters
    ----------
    rows : iterable of dict
        Keys ``label`` (str), ``pre`` and ``post`` (float or None, missing
        values draw no bar) and optionally ``mark`` (float: a tick drawn
        across the pair, e.g. the threshold).
    unit : str
        Unit shown after the numbers ("V", "fF").
    axis_max : float, optional
        Right end of the axis (default: the largest value).
    pattern_id : str
        Prefix for hatch pattern ids (unique per page).
    mark_text : str
        Legend entry for the ``mark`` ticks.

    Returns
    -------
    str
        ``<svg class="bars">`` with ``<rect class="bar pre">`` and
        ``<rect class="bar post">`` elements.

    Notes
    -----
    O(rows).  Pre-layout bars are light and hatched, post-layout bars dark
    and solid.

    Examples
    --------
    >>> svg = paired_bars_svg([{"label": "X", "pre": 1.5, "post": 1.3}], unit="V")
    >>> svg.count('class="bar pre"'), svg.count('class="bar post"')
    (1, 1)
    """
    rows = list(rows)
    values = [r[k] for r in rows for k in ("pre", "post", "mark") if r.get(k) is not None]
    ticks = nice_ticks(axis_max if axis_max is not None else max(values or [0.0]))
    xmax = ticks[-1]
    label_w = min(220, 14 + 7 * max([len(str(r["label"])) for r in rows] or [4]))
    w, left, right, top, row_h, bar_h = 640, label_w, 70, 30, 30, 11
    pw = w - left - right
    h = top + row_h * len(rows) + 26

    def x(v: float) -> float:
        return left + pw * max(0.0, min(v, xmax)) / xmax

    hid = f"{pattern_id}-pre"
    out = [f'<svg class="bars" xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {w} {h}" role="img" '
           f'aria-label="pre-layout against post-layout" font-family="sans-serif" font-size="11">',
           "<defs>" + _HATCH.format(id=hid, colour=_PRE) + "</defs>",
           f'<rect x="{left}" y="4" width="14" height="10" fill="url(#{hid})" stroke="#555555"/>'
           f'<text x="{left + 18}" y="13">pre-layout (schematic)</text>'
           f'<rect x="{left + 170}" y="4" width="14" height="10" fill="{_POST}"/>'
           f'<text x="{left + 188}" y="13">post-layout (layout)</text>']
    if mark_text:
        out.append(f'<line x1="{left + 340}" x2="{left + 340}" y1="2" y2="16" stroke="#000000" stroke-width="2"/>'
                   f'<text x="{left + 346}" y="13">{html.escape(mark_text)}</text>')
    base = top + row_h * len(rows)
    for k, t in enumerate(ticks):
        text = f"{t:g} {html.escape(unit)}" if k == len(ticks) - 1 else f"{t:g}"
        anchor = "start" if k == len(ticks) - 1 else "middle"
        xt = x(t) - (4 if k == len(ticks) - 1 else 0)
        out.append(f'<line x1="{_t(x(t))}" x2="{_t(x(t))}" y1="{top - 4}" y2="{base}" stroke="#dddddd"/>'
                   f'<text x="{_t(xt)}" y="{base + 14}" text-anchor="{anchor}">{text}</text>')
    for i, r in enumerate(rows):
        y0 = top + i * row_h
        label = html.escape(str(r["label"]))
        out.append(f'<text x="{left - 6}" y="{y0 + bar_h + 4}" text-anchor="end">{label}</text>')
        for k, (key, fill) in enumerate((("pre", f"url(#{hid})"), ("post", _POST))):
            v = r.get(key)
            yb = y0 + k * bar_h
            if v is None:
                out.append(f'<text x="{left + 4}" y="{yb + bar_h - 2}" font-style="italic">no {key}-layout value</text>')
                continue
            out.append(f'<rect class="bar {key}" x="{left}" y="{yb}" width="{x(v) - left:.2f}" height="{bar_h - 1}" '
                       f'fill="{fill}" stroke="#555555" stroke-width="0.5"><title>{label} {key}-layout: '
                       f'{v:.3f} {html.escape(unit)}</title></rect>'
                       f'<text x="{x(v) + 4:.2f}" y="{yb + bar_h - 2}">{v:.3f}</text>')
        if r.get("mark") is not None:
            xm = _t(x(r["mark"]))
            out.append(f'<line class="mark" x1="{xm}" x2="{xm}" y1="{y0 - 2}" y2="{y0 + 2 * bar_h + 1}" '
                       f'stroke="#000000" stroke-width="2"/>')
    out.append(f'<line x1="{left}" x2="{left}" y1="{top - 4}" y2="{base}" stroke="#000000"/>')
    out.append("</svg>")
    return "\n".join(out)


def waveform_svg(t_ns, v, *, threshold_v: float, vdd: float, window_ns: float, caption: str = "") -> str:
    """A voltage waveform against time, with the threshold and the
    evaluation window marked.

    Parameters
    ----------
    t_ns, v : sequence of float
        Time (ns after evaluation starts) and voltage (V), same length.
    threshold_v : float
        Drawn as a dashed line.
    vdd : float
        Top of the voltage axis.
    window_ns : float
        The evaluation window ``[0, window_ns]`` is shaded.
    caption : str
        Text of the ``<title>``.

    Returns
    -------
    str
        An ``<svg>`` element; empty string when there are fewer than two points.

    Examples
    --------
    >>> svg = waveform_svg([0, 0.5, 1.0], [1.8, 1.2, 1.1], threshold_v=0.9, vdd=1.8, window_ns=1.0)
    >>> svg.startswith("<svg") and "polyline" in svg
    True
    >>> waveform_svg([0], [1.8], threshold_v=0.9, vdd=1.8, window_ns=1.0)
    ''
    """
    t_ns, v = list(t_ns), list(v)
    if len(t_ns) < 2:
        return ""
    w, h, left, bottom, top, right = 560, 220, 48, 30, 10, 12
    t0, t1 = min(t_ns), max(t_ns)
    span = (t1 - t0) or 1.0
    vmax = max(vdd, max(v)) * 1.02
    vmin = min(0.0, min(v))

    def x(t):
        return left + (t - t0) / span * (w - left - right)

    def y(u):
        return top + (vmax - u) / (vmax - vmin) * (h - top - bottom)

    step = max(1, len(t_ns) // 800)
    pts = " ".join(f"{x(a):.1f},{y(b):.1f}" for a, b in list(zip(t_ns, v))[::step])
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" class="waveform" viewBox="0 0 {w} {h}" width="{w}" '
           f'height="{h}" role="img"><title>{html.escape(caption)}</title>',
           f'<rect x="{x(max(0.0, t0)):.1f}" y="{top}" width="{x(min(window_ns, t1)) - x(max(0.0, t0)):.1f}" '
           f'height="{h - top - bottom}" fill="#eef3f7"/>']
    for tick in nice_ticks(vmax, 4):
        if tick <= vmax:
            out.append(f'<line x1="{left}" x2="{w - right}" y1="{y(tick):.1f}" y2="{y(tick):.1f}" stroke="#ddd"/>'
                       f'<text x="{left - 4}" y="{y(tick) + 4:.1f}" text-anchor="end" font-size="10">'
                       f"{_t(tick)}</text>")
    out.append(f'<line x1="{left}" x2="{w - right}" y1="{y(threshold_v):.1f}" y2="{y(threshold_v):.1f}" '
               f'stroke="#1d1d1d" stroke-dasharray="5 3"><title>receiver threshold {threshold_v:.3f} V</title></line>')
    out.append(f'<polyline fill="none" stroke="#1f3b52" stroke-width="1.5" points="{pts}"/>')
    out.append(f'<text x="{w - right}" y="{h - 8}" text-anchor="end" font-size="10">ns after evaluation starts; '
               f"V(dynamic node), dashed: receiver threshold, shaded: evaluation window</text>")
    out.append("</svg>")
    return "".join(out)
