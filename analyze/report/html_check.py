"""The HTML report designers look at: one self-contained page per run.

:func:`check_html` turns the results of ``dynshare check`` into a page
with the cell's layout coloured by net capacitance (dynamic, flagged and
shared nodes outlined and labelled), a summary of every stage, and per
stage its recognised parts, worst-case pattern, shared nodes with their
capacitances, the verdict, the nodes to fix and a plot of the final
voltage of every counted pattern.  :func:`compare_html` (from
:mod:`analyze.report.html_compare`) does the same for pre-layout against
post-layout.

The page has no scripts and fetches nothing (inline CSS and SVG); every
name is escaped; the same input gives the same bytes.
"""

from __future__ import annotations

import html

from analyze.report.html_compare import compare_html
from analyze.report.json_report import input_name
from analyze.report.html_page import (fix_action, flags_table, fmt_loc, fmt_v, layout_figure, page, pattern_text, props_table,
                               stage_kind, status_html, table)
from analyze.report.svg_layout import MAX_SHAPES, Mark
from analyze.report.svg_plots import pattern_plot_svg, waveform_svg

__all__ = ["check_html", "compare_html", "MAX_PATTERNS", "MAX_DETAILED", "MAX_SUMMARY"]

#: At most this many patterns are plotted per stage.
MAX_PATTERNS = 256
#: At most this many stages get a detailed section (lowest margin first).
MAX_DETAILED = 100
#: At most this many rows in the summary table (lowest margin first).
MAX_SUMMARY = 2000


def _detailed(results, limit: int) -> list[int]:
    """Indices of the stages to describe in full: all, or the ``limit``
    lowest margins (failing first), kept in report order."""
    idx = list(range(len(results)))
    if len(idx) <= limit:
        return idx
    return sorted(_by_margin(results, idx)[:limit])


def _by_margin(results, idx) -> list[int]:
    """Stage indices, failing first, then by rising margin, then report order."""
    return sorted(idx, key=lambda i: (results[i].status != "fail", results[i].margin_v, i))


def _marks(results, chosen) -> tuple[list[Mark], list[str]]:
    """Outlines and labels for the detailed stages, and the nets to keep
    when the drawing is capped: those of every stage, lowest margin first."""
    marks, keep = [], []
    chosen = set(chosen)
    for i in _by_margin(results, range(len(results))):
        r = results[i]
        st = r.stage
        keep.append(st.dynamic_node)
        keep.extend(f.node for f in r.flags)
        keep.extend(st.internal_nodes)
        keep.extend(n for n in (st.footer_node,) if n)
        if i not in chosen:
            continue
        verdict = "PASS" if r.status == "pass" else "FAIL"
        marks.append(Mark(st.dynamic_node, "dynamic", f"{st.dynamic_node}: dynamic node, {verdict}", st.location_um))
        marks.extend(Mark(f.node, "flag", f"{f.node}: add {fix_action(st)}", f.location_um) for f in r.flags)
        if r.worst_case is not None:
            marks.extend(Mark(n, "shared", "") for n in r.worst_case.shared_nodes)
    return marks, keep


def _summary(results, chosen, limit: int) -> str:
    """One row per stage, failing first, then by rising margin."""
    order = _by_margin(results, range(len(results)))
    rows = []
    for i in order[:limit]:
        r = results[i]
        st = r.stage
        node = html.escape(st.dynamic_node)
        link = f'<td><a href="#stage-{i}">{node}</a></td>' if i in chosen else f"<td>{node}</td>"
        wc = r.worst_case
        rows.append([link, stage_kind(st), st.clock, "footed" if st.footed else "footless",
                     fmt_v(None if wc is None else wc.v_final), fmt_v(r.threshold_v), f"{r.margin_v:+.3f} V",
                     status_html(r.status), ", ".join(f.node for f in r.flags) or "–"])
    out = table(["dynamic node", "type", "clock", "footer", "worst v_final", "threshold", "margin", "status",
                 "nodes to fix"], rows, cls="summary", raw_cols=(0, 7))
    if len(order) > limit:
        out += (f'<p class="note">The table shows the {limit} stages with the lowest margins of {len(order)}; '
                "the JSON report has all of them.</p>")
    return out


def _receiver_text(st, circuit) -> str:
    if not st.receivers:
        return "none found: threshold taken as VDD/2"
    return "; ".join(f"inverter {r.nmos}/{r.pmos} → {r.output}" for r in st.receivers)


def _cap_rows(circuit, st, names) -> list[list]:
    rows = []
    for name in names:
        net = circuit.nets.get(name)
        what = "dynamic node" if name == st.dynamic_node else (
            f"precharged by {st.secondary_precharge[name]}" if name in st.secondary_precharge else "internal")
        if net is None:
            rows.append([name, what, None, None, None, None, None])
            continue
        c = net.cap
        rows.append([name, what, c.total, c.junction, c.wire, c.gate + c.overlap, fmt_loc(net.location_um)])
    return rows


def _pattern_points(circuit, st, tech, result, constraints, max_patterns: int):
    """(v_final, hover text) for at most ``max_patterns`` counted patterns,
    always including the worst case, and a caption when capped."""
    from analyze.search.analysis import iter_counted_patterns

    pts, seen = [], set()
    for wc in iter_counted_patterns(circuit, st, tech, constraints, limit=max_patterns):
        key = tuple(sorted(wc.inputs.items()))
        seen.add(key)
        pts.append((wc.v_final, f"{pattern_text(wc.inputs)}; shared: {' '.join(wc.shared_nodes) or 'none'}"))
    caption = ""
    wc = result.worst_case
    if result.counted_patterns is None or result.counted_patterns > len(pts):
        total = "the" if result.counted_patterns is None else str(result.counted_patterns)
        caption = (f"Only {len(pts)} of {total} counted patterns are drawn (the first in search "
                   "order, plus the worst case).")
        if wc is not None and tuple(sorted(wc.inputs.items())) not in seen:
            pts.append((wc.v_final, f"{pattern_text(wc.inputs)} (worst case); shared: {' '.join(wc.shared_nodes)}"))
    return pts, caption


def _stage_section(i, r, circuit, tech, constraints, max_patterns) -> str:
    st = r.stage
    wc = r.worst_case
    out = [f'<section class="stage" id="stage-{i}"><h2>Stage {html.escape(st.dynamic_node)} '
           f'<span class="status {r.status}">{"✓ PASS" if r.status == "pass" else "✗ FAIL"}</span></h2>']
    sp = ", ".join(f"{n} by {d}" for n, d in sorted(st.secondary_precharge.items())) or "none"
    out.append(props_table([
        ("dynamic node", f"{st.dynamic_node} at {fmt_loc(st.location_um)}"),
        ("type", stage_kind(st)),
        ("clock", st.clock),
        (f"{fix_action(st)} devices", " ".join(st.precharge) or "–"),
        ("footer" if st.polarity == "n" else "header",
         f"{st.footer} (node {st.footer_node})" if st.footed else f"none ({'footless' if st.polarity == 'n' else 'headless'})"),
        ("keepers", " ".join(st.keepers) or "none"),
        ("receiver", _receiver_text(st, circuit)),
        ("receiver threshold", f"{fmt_v(r.threshold_v)} (guard {tech.guard:g} V)"),
        ("inputs", " ".join(st.inputs) or "–"),
        (f"internal nodes {fix_action(st)}d", sp),
        ("counted patterns", "not counted (too many states)" if r.counted_patterns is None else
         f"{r.counted_patterns} (patterns that keep the dynamic node from the rail)"),
    ]))
    out.append("<h3>Worst case</h3>")
    if wc is None:
        out.append('<p class="note">No counted pattern: every allowed pattern evaluates the node; the margin is '
                   "taken with the dynamic node at its starting level.</p>")
    else:
        out.append(props_table([("worst pattern", pattern_text(wc.inputs)),
                                ("v_final", f"{fmt_v(wc.v_final)} (junction charge and pass limit)"),
                                ("v_final_linear", f"{fmt_v(wc.v_final_linear)} (zero-bias capacitances)"),
                                ("droop", fmt_v(wc.droop_v))]))
        out.append(table(["node", "part", "total fF", "junction fF", "wire fF", "gate + overlap fF", "location"],
                         _cap_rows(circuit, st, [st.dynamic_node] + list(wc.shared_nodes)), cls="caps"))
    out.append(f'<table class="props verdict"><tbody><tr><th>margin</th><td class="num">{r.margin_v:+.3f} V</td>'
               f"{status_html(r.analysis_status or r.status)}</tr></tbody></table>")
    out.append(flags_table(r))
    if r.simulation:
        out.append(_simulation(r, tech))
    if r.counted_patterns is None or r.counted_patterns:
        pts, caption = _pattern_points(circuit, st, tech, r, constraints, max_patterns)
        svg = pattern_plot_svg(pts, threshold_v=r.threshold_v, guard_v=tech.guard, vdd=tech.vdd,
                               polarity=st.polarity, caption=caption, pattern_id=f"s{i}")
        out.append(f"<figure>{svg}<figcaption>Final voltage of the dynamic node for each counted pattern. "
                   "Solid bars pass, hatched bars fail.</figcaption></figure>")
    out.append("</section>")
    return "\n".join(out)


def _simulation(r, tech) -> str:
    """Analysis and simulation side by side, and the worst case's waveform."""
    word = "lowest V(X)" if r.stage.polarity == "n" else "highest V(X)"
    rows = [[str(s.corner or "–"), s.case, pattern_text(s.inputs), fmt_v(s.v_min), f"{s.t_min_ns:.3f} ns",
             fmt_v(s.threshold_v), f"{s.margin_v:+.3f} V", s.status.upper(),
             "–" if s.v_min_without_keeper is None else fmt_v(s.v_min_without_keeper)] for s in r.simulation]
    worst = min(r.simulation, key=lambda s: s.margin_v)
    head = (f'<h3>Simulation with the foundry models</h3><p class="note">ngspice, every input-arrival case the '
            f"constraints allow, keeper in (and without its help in the last column). The analysis said "
            f"{r.analysis_status.upper()} (v_final {fmt_v(r.worst_case.v_final) if r.worst_case else '–'}, "
            f"threshold {fmt_v(r.threshold_v)}); the simulation says {r.status.upper()}.</p>"
            + "".join(f'<p class="note">{html.escape(n)}</p>' for n in r.simulation_notes))
    svg = ""
    if worst.waveform is not None:
        t, v = worst.waveform
        svg = waveform_svg(t, v, threshold_v=worst.threshold_v, vdd=tech.vdd, window_ns=tech.evaluation_ns,
                           caption=f"V(X), corner {worst.corner}, case {worst.case}, {pattern_text(worst.inputs)}")
        svg = (f"<figure>{svg}<figcaption>Dynamic node of the simulated case with the lowest margin (corner "
               f"{html.escape(str(worst.corner))}, {html.escape(worst.case)} inputs, "
               f"{html.escape(pattern_text(worst.inputs))}).</figcaption></figure>")
    return head + table(["corner", "case", "pattern", word, "at", "threshold", "margin", "status",
                         "without keeper"], rows, cls="simulation") + svg


def _couplings(circuit) -> str:
    """Coupling capacitance between signal nets (netlists), largest first."""
    if not circuit.couplings:
        return ""
    rows = [[c.net_a, c.net_b, f"{c.cap_ff:.3f}", str(c.elements)]
            for c in sorted(circuit.couplings, key=lambda c: (-c.cap_ff, c.net_a, c.net_b))[:MAX_SUMMARY]]
    note = (f'<p class="note">{len(circuit.couplings)} net pairs; each is also counted to ground on both nets '
            "(the droop is computed as if the other end were held still).</p>")
    return "<h2>Coupling capacitance</h2>" + note + table(["net", "net", "fF", "capacitors"], rows, cls="couplings")


def _findings(findings) -> str:
    if not findings:
        return ""
    items = "".join(f"<li>{html.escape(f.message)}" + (f" at {fmt_loc(f.location_um)}" if f.location_um else "")
                    + "</li>" for f in findings)
    return f"<h2>Warnings</h2><ul class=\"findings\">{items}</ul>"


def check_html(circuit, tech, recognition, results, *, constraints=None, max_patterns: int = MAX_PATTERNS,
               max_shapes: int = MAX_SHAPES, max_detailed: int = MAX_DETAILED,
               max_summary: int = MAX_SUMMARY) -> str:
    """The HTML report of ``dynshare check``.

    Parameters
    ----------
    circuit : extract.circuit.Circuit
    tech : extract.tech.Tech
    recognition : analyze.stages.recognize.Recognition
    results : list of analyze.search.analysis.StageResult
        One per stage of ``recognition``.
    constraints : analyze.search.constraints.Constraints, optional
        The input constraints of the run (the pattern plot shows only the
        patterns they allow).
    max_patterns : int
        Patterns plotted per stage.
    max_shapes : int
        Above this many layout shapes only the stages' nets are drawn.
    max_detailed : int
        Stages described in full, lowest margins first (the rest appear in
        the summary table only).
    max_summary : int
        Rows of the summary table, lowest margins first.

    Returns
    -------
    str
        A complete HTML document.

    Notes
    -----
    Cost: one pass over the layout shapes plus, per detailed stage, at
    most ``max_patterns`` pattern evaluations
    (:func:`analyze.search.analysis.iter_counted_patterns`).
    """
    n = len(results)
    failed = sum(r.status == "fail" for r in results)
    chosen = _detailed(results, max_detailed)
    marks, keep = _marks(results, chosen)
    head = [f"<h1>Charge sharing in cell {html.escape(circuit.cell)}</h1>",
            f"<p>Process {html.escape(tech.name)}, VDD {tech.vdd:g} V, guard {tech.guard:g} V. "
            f"{'Layout' if circuit.shapes else 'Netlist'} <code>{html.escape(input_name(circuit.source) or '–')}</code>: "
            f"{len(circuit.devices)} transistors, {len(circuit.nets)} nets.</p>"]
    if recognition.clock_note:
        head.append(f"<p>Clock: {html.escape(recognition.clock_note)}.</p>")
    if n == 0:
        head.append('<p class="verdict">No dynamic stage found in this cell.</p>')
    else:
        sym = "✓" if failed == 0 else "✗"
        head.append(f'<p class="verdict">{sym} {n - failed} of {n} stage{"s" if n != 1 else ""} pass'
                    f'{"" if failed == 0 else f", {failed} fail"}.</p>')
    if circuit.shapes:
        picture = ["<h2>Layout</h2>", layout_figure(circuit, tech, marks, keep, max_shapes)]
    else:
        picture = ['<p class="note">No layout picture: this check read a netlist, which has no geometry. '
                   "Net capacitances come from the netlist's AD/AS/PD/PS and C elements (or the tech "
                   "file's pre-layout estimates where a device gives none).</p>"]
    body = head + [_findings(list(circuit.findings) + list(recognition.findings))] + picture + [_couplings(circuit)]
    if n:
        body += ["<h2>Stages</h2>", _summary(results, set(chosen), max_summary)]
    if len(chosen) < n:
        body.append(f'<p class="note">{len(chosen)} of {n} stages (the lowest margins) are described below.</p>')
    body += [_stage_section(i, results[i], circuit, tech, constraints, max_patterns) for i in chosen]
    return page(f"dynshare check: {circuit.cell}", "\n".join(body))
