"""The ``compare`` command: schematic (pre-layout) against layout
(post-layout), terminal table, JSON and HTML."""

from __future__ import annotations

import sys

from analyze.cli.output import OutputSet
from analyze.report.json_report import dumps, flags_json, header, input_name, rounded, worst_case_json
from analyze.report.text import fmt_loc

__all__ = ["compare_cell", "compare_report", "compare_text", "read_matching_schematic"]


def read_matching_schematic(path, tech, cell):
    """The schematic's subcircuit named like the layout cell, else its top one."""
    from extract.errors import InputError
    from extract.netlist.reader import read_schematic

    try:
        return read_schematic(path, tech, subckt=cell)
    except InputError as exc:
        if "no subcircuit named" not in exc.message:
            raise
    return read_schematic(path, tech)


def _side(r) -> dict | None:
    if r is None:
        return None
    return {
        "worst_case": worst_case_json(r.worst_case),
        "threshold_v": rounded(r.threshold_v),
        "margin_v": rounded(r.margin_v),
        "status": r.status,
        "counted_patterns": None if r.counted_patterns is None else int(r.counted_patterns),
    }


def compare_report(cmp) -> dict:
    report = header(cmp.post.cell, cmp.tech.vdd)
    report["schematic"] = input_name(cmp.pre.source)
    report["nets"] = [
        {
            "name": d.name,
            "schematic_name": d.schematic_name,
            "cap_ff_pre": rounded(d.cap_ff_pre),
            "cap_ff_post": rounded(d.cap_ff_post),
            "delta_ff": rounded(d.delta_ff),
            "parts_ff_pre": {k: rounded(v) for k, v in d.parts_pre.items()},
            "parts_ff_post": {k: rounded(v) for k, v in d.parts_post.items()},
            "grew": d.grew,
        }
        for d in cmp.nets
    ]
    stages = []
    for s in cmp.stages:
        inc = s.droop_increase_v
        flags = [] if s.post is None else s.post.flags
        stages.append(
            {
                "dynamic_node": s.dynamic_node,
                "droop_increase_v": None if inc is None else rounded(inc),
                "pre": _side(s.pre),
                "post": _side(s.post),
                "attribution": [
                    {"node": a.node, "schematic_name": a.schematic_name, "delta_ff": rounded(a.delta_ff),
                     "droop_reduction_v": rounded(a.droop_reduction_v)}
                    for a in s.attribution
                ],
                "flags": flags_json(flags),
                "flag_note": None if s.post is None else s.post.flag_note,
            }
        )
    report["stages"] = stages
    report["notes"] = list(cmp.notes)
    report["status"] = "fail" if cmp.failed else "pass"
    return report


def _pattern(wc) -> str:
    if wc is None:
        return "-"
    return " ".join(f"{k}={v}" for k, v in sorted(wc.inputs.items())) or "-"


def _num(x, fmt="{:.3f}") -> str:
    return "-" if x is None else fmt.format(x)


def compare_text(cmp) -> str:
    out = [f"cell {cmp.post.cell}: schematic {input_name(cmp.pre.source)} against layout {input_name(cmp.post.source)} "
           f"(process {cmp.tech.name}, VDD {cmp.tech.vdd:g} V)"]
    out.append(f"  {len(cmp.net_map)} nets matched")
    for note in cmp.notes:
        out.append(f"  note: {note}")
    for s in cmp.stages:
        pre, post = s.pre, s.post
        wp = pre.worst_case if pre else None
        wq = post.worst_case if post else None
        rows = [
            ("worst pattern", _pattern(wp), _pattern(wq)),
            ("v_final (V)", _num(wp and wp.v_final), _num(wq and wq.v_final)),
            ("lossless (V)", _num(wp and wp.v_final_linear), _num(wq and wq.v_final_linear)),
            ("droop (V)", _num(wp and wp.droop_v), _num(wq and wq.droop_v)),
            ("threshold (V)", _num(pre and pre.threshold_v), _num(post and post.threshold_v)),
            ("margin (V)", _num(pre and pre.margin_v, "{:+.3f}"), _num(post and post.margin_v, "{:+.3f}")),
            ("status", pre.status.upper() if pre else "-", post.status.upper() if post else "-"),
        ]
        w1 = max(len(r[1]) for r in rows + [("", "pre-layout", "")])
        out.append("")
        inc = s.droop_increase_v
        out.append(f"stage {s.dynamic_node}" + ("" if inc is None else f": droop increase {inc:+.3f} V"))
        out.append(f"  {'':<15} {'pre-layout':<{w1}}  post-layout")
        for name, a, b in rows:
            out.append(f"  {name:<15} {a:<{w1}}  {b}")
        if s.attribution:
            out.append("  droop increase by node (post-layout cap set back to pre-layout):")
            width = max(len(a.node) for a in s.attribution)
            for a in s.attribution:
                out.append(f"    {a.node:<{width}}  {a.delta_ff:+8.3f} fF  -> {a.droop_reduction_v:+.3f} V of droop")
        if post is not None and post.flags:
            action = "precharge" if post.stage.polarity == "n" else "predischarge"
            out.append(f"  fix: add {action} devices on")
            for f in post.flags:
                between = f" between {' and '.join(f.between)}" if f.between else ""
                out.append(f"    {f.node} at {fmt_loc(f.location_um)}{between} -> worst case {f.v_final_after:.3f} V")
        elif post is not None and post.flag_note:
            out.append(f"  fix: {post.flag_note}")
    if cmp.nets:
        out.append("")
        out.append("nets, largest increase first")
        wl = max([len(d.name) for d in cmp.nets] + [6])
        ws = max([len(d.schematic_name) for d in cmp.nets] + [9])
        out.append(f"  {'layout':<{wl}}  {'schematic':<{ws}}  {'pre fF':>8}  {'post fF':>8}  {'change':>8}  grew")
        for d in cmp.nets:
            if d.name in cmp.post.nets and cmp.post.nets[d.name].role in ("power", "ground"):
                continue
            out.append(f"  {d.name:<{wl}}  {d.schematic_name:<{ws}}  {d.cap_ff_pre:8.3f}  {d.cap_ff_post:8.3f}  "
                       f"{d.delta_ff:+8.3f}  {', '.join(d.grew) or '-'}")
    return "\n".join(out) + "\n"


def compare_cell(args) -> int:
    from analyze.cli.check import load_run_inputs
    from analyze.compare.comparison import compare_circuits
    from analyze.compare.match import match_circuits
    from extract.layout.pipeline import extract_layout

    tech, constraints = load_run_inputs(args, args.schematic)
    post = extract_layout(args.layout, tech, args.cell)
    pre = read_matching_schematic(args.schematic, tech, post.cell)
    match = match_circuits(pre, post)
    cmp = compare_circuits(pre, post, match, tech, constraints, args.constraints)
    report = compare_report(cmp)
    html = None
    if getattr(args, "html", None):
        from analyze.report.html_check import compare_html

        html = compare_html(cmp)
    if args.json != "-":
        sys.stdout.write(compare_text(cmp))
    outputs = OutputSet()
    outputs.add(args.json, dumps(report))
    if html is not None:
        outputs.add(args.html, html)
    outputs.commit()
    from analyze.cli.check import warn

    warn(list(pre.findings) + list(post.findings))
    return 1 if cmp.failed else 0
