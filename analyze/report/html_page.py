"""Building blocks of the HTML reports: the page, tables, legends, figures.

Everything here returns HTML text with every piece of data passed
through :func:`html.escape`.  The page is self-contained: inline CSS and
inline SVG, no scripts, no fonts or images to fetch, so it opens offline
and prints.  Output depends only on the arguments (no clock, no random).
"""

from __future__ import annotations

import html

from analyze.report.svg_layout import MARK_STYLES, MAX_SHAPES, cap_ramp, layout_svg
from extract.writers.numbers import tool_version

__all__ = ["page", "table", "props_table", "flags_table", "status_html", "fmt_v", "fmt_loc", "layout_figure",
           "pattern_text", "stage_kind", "fix_action", "CSS"]

CSS = """
body{font-family:sans-serif;margin:1.5em auto;max-width:72em;padding:0 1em;color:#111;line-height:1.35}
h1{font-size:1.5em;margin-bottom:.2em}h2{font-size:1.25em;margin-top:1.6em;border-bottom:1px solid #999}
h3{font-size:1.05em;margin-bottom:.3em}
table{border-collapse:collapse;margin:.4em 0 1em 0}
th,td{border:1px solid #999;padding:.2em .5em;text-align:left;vertical-align:top}
th{background:#eef2f5}td.num{text-align:right;font-variant-numeric:tabular-nums}
table.props th{width:13em}
.status{font-weight:bold;white-space:nowrap}.status.fail{background:#1d1d1d;color:#fff}
.status.pass{background:#e3eff7}
.note{font-style:italic}.verdict{font-size:1.1em;font-weight:bold}
figure{margin:.5em 0 1.2em 0}figcaption{font-size:.9em;margin-top:.3em}
svg.layout{width:100%;height:auto;max-height:75vh;border:1px solid #bbb;background:#fff}
svg.patterns,svg.bars{width:100%;max-width:50rem;height:auto}
.legend{display:flex;flex-wrap:wrap;gap:.3em 1.2em;font-size:.9em;margin-top:.4em;align-items:center}
.legend span.sw{display:inline-block;width:1.6em;height:1em;border:1px solid #555;vertical-align:middle;margin-right:.3em}
code{font-size:.95em}
@media print{svg.layout{max-height:none}h2{break-after:avoid}section.stage{break-inside:avoid-page}}
"""


def stage_kind(st) -> str:
    """``"n-type (precharged high)"`` or ``"p-type (predischarged low)"``."""
    return "n-type (precharged high)" if st.polarity == "n" else "p-type (predischarged low)"


def fix_action(st) -> str:
    """The device a flagged node of this stage needs: precharge or predischarge."""
    return "precharge" if st.polarity == "n" else "predischarge"


def flags_table(result) -> str:
    """The nodes to fix of a :class:`analyze.search.analysis.StageResult`, or its
    note, or ``""``."""
    if result.flags:
        return (f"<h3>Nodes that need a {fix_action(result.stage)} device</h3>"
                + table(["node", "action", "location", "between", "worst v_final after"],
                        [[f.node, f.action, fmt_loc(f.location_um), " and ".join(f.between) or "–",
                          fmt_v(f.v_final_after)] for f in result.flags], cls="flags"))
    if result.flag_note:
        return f'<p class="note">{html.escape(result.flag_note)}</p>'
    return ""


def fmt_v(x) -> str:
    """A voltage with 3 decimals, ``"–"`` for None.

    >>> fmt_v(1.23456), fmt_v(None)
    ('1.235 V', '–')
    """
    return "–" if x is None else f"{x:.3f} V"


def fmt_loc(loc) -> str:
    """A location in µm, ``"–"`` for None.

    >>> fmt_loc((1.0, 2.25))
    '(1.000, 2.250) µm'
    """
    return "–" if loc is None else f"({loc[0]:.3f}, {loc[1]:.3f}) µm"


def pattern_text(inputs: dict) -> str:
    """``"A=1 B=0"`` over the sorted inputs.

    >>> pattern_text({"B": 0, "A": 1}), pattern_text({})
    ('A=1 B=0', '(no inputs)')
    """
    return " ".join(f"{k}={int(v)}" for k, v in sorted(inputs.items())) or "(no inputs)"


def status_html(status: str | None, tag: str = "td") -> str:
    """A PASS/FAIL cell: a word and a symbol, so it reads without colour.

    >>> status_html("fail")
    '<td class="status fail">✗ FAIL</td>'
    """
    if status not in ("pass", "fail"):
        return f'<{tag} class="status">–</{tag}>'
    text = "✓ PASS" if status == "pass" else "✗ FAIL"
    return f'<{tag} class="status {status}">{text}</{tag}>'


def table(headers, rows, cls: str = "", raw_cols=()) -> str:
    """An HTML table; cells are escaped except columns in ``raw_cols``.

    Parameters
    ----------
    headers : sequence of str
    rows : iterable of sequence
        Cell values (str, numbers, None → "–").  A cell in a ``raw_cols``
        column is inserted as given (already HTML, e.g. :func:`status_html`,
        which brings its own ``<td>``).
    cls : str
        CSS class of the table.
    raw_cols : iterable of int

    Returns
    -------
    str

    Examples
    --------
    >>> table(["a"], [["<b>"]])
    '<table><thead><tr><th>a</th></tr></thead><tbody><tr><td>&lt;b&gt;</td></tr></tbody></table>'
    """
    raw = set(raw_cols)
    head = "".join(f"<th>{html.escape(str(h))}</th>" for h in headers)
    body = []
    for row in rows:
        cells = []
        for i, v in enumerate(row):
            if i in raw:
                cells.append(str(v))
            elif isinstance(v, float):
                cells.append(f'<td class="num">{v:.3f}</td>')
            else:
                cells.append(f"<td>{'–' if v is None else html.escape(str(v))}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    c = f' class="{cls}"' if cls else ""
    return f"<table{c}><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def props_table(pairs) -> str:
    """A two-column table of (label, value) with the labels as row headers.

    >>> props_table([("node", "X&Y")])
    '<table class="props"><tbody><tr><th>node</th><td>X&amp;Y</td></tr></tbody></table>'
    """
    rows = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(str(v))}</td></tr>" for k, v in pairs)
    return f'<table class="props"><tbody>{rows}</tbody></table>'


def _legend(edges: list[float], has_rails: bool, tech) -> str:
    ramp = cap_ramp(len(edges) - 1)
    items = [f'<span><span class="sw" style="background:{c}"></span>{edges[i]:g}–{edges[i + 1]:g} fF</span>'
             for i, c in enumerate(ramp)]
    if has_rails:
        items.append('<span><span class="sw" style="background:repeating-linear-gradient(45deg,#8c8c8c 0 2px,'
                     '#e4e4e4 2px 6px)"></span>power / ground (not coloured by capacitance)</span>')
    items.append('<span>diffusion and poly solid, metal hatched</span>')
    for kind, (width, dash, text) in MARK_STYLES.items():
        d = "" if dash == "none" else f' stroke-dasharray="{dash}"'
        items.append(f'<span><svg width="34" height="14" aria-hidden="true"><rect x="2" y="2" width="30" height="10" '
                     f'fill="#ffffff" stroke="#000000" stroke-width="{width}"{d}/></svg> {html.escape(text)}</span>')
    return '<div class="legend">' + "".join(items) + "</div>"


def layout_figure(circuit, tech, marks=(), keep=(), max_shapes: int = MAX_SHAPES, what: str = "") -> str:
    """The layout drawing with its colour legend, or a note when there is none.

    Parameters
    ----------
    circuit : Circuit
    tech : Tech
    marks : iterable of analyze.report.svg_layout.Mark
    keep : iterable of str
        Nets to keep when the drawing is capped (priority order).
    max_shapes : int
    what : str
        Extra caption text.

    Returns
    -------
    str
        ``<figure class="layout">`` holding the SVG (see
        :func:`analyze.report.svg_layout.layout_svg`).
    """
    if not circuit.shapes:
        return '<p class="note">No layout geometry to draw (the circuit came from a netlist).</p>'
    svg, edges, note = layout_svg(circuit, tech, marks=marks, keep=keep, max_shapes=max_shapes)
    if not svg:
        return f'<p class="note">{html.escape(note or "Nothing to draw.")}</p>'
    rails = any(n.role in ("power", "ground") for k, n in circuit.nets.items() if k in circuit.shapes)
    cap = ("Layout of cell " + circuit.cell + ", each net coloured by its total zero-bias capacitance "
           "(darker is more). Hover over a shape for the net's name and capacitance parts. " + what)
    note_html = f'<p class="note">{html.escape(note)}</p>' if note else ""
    return (f'<figure class="layout">{svg}<figcaption>{html.escape(cap.strip())}</figcaption>'
            f"{_legend(edges, rails, tech)}{note_html}</figure>")


def page(title: str, body: str) -> str:
    """The whole HTML document.

    >>> page("T<", "<p>x</p>").count("<title>T&lt;</title>")
    1
    """
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{html.escape(title)}</title><style>{CSS}</style></head>\n<body>\n{body}\n"
        f'<footer><p class="note">Written by dynshare {html.escape(tool_version())}. '
        "Units: µm, fF, V.</p></footer>\n</body></html>\n"
    )
