"""``dynshare demo``: the whole job on the bundled sample cells.

For every cell of ``sample_layouts/dsk18_cells.gds`` it runs extraction
(JSON, SPICE, SPEF), the charge-sharing check (JSON, HTML) and, where a
schematic ``CELL.sp`` is bundled, the pre- against post-layout comparison
(JSON, HTML); a bundled ``CELL.constraints.toml`` is applied to that
cell.  It writes everything into one folder with an ``index.html`` and
prints a summary table.  The sample cells and the dsk18 process are an
invented demo scenario.
"""

from __future__ import annotations

import html
import os
import sys
from importlib import resources

from analyze.cli.output import OutputSet
from analyze.report.json_report import dumps, extract_report

__all__ = ["sample_path", "run"]


def sample_path(name: str) -> str:
    """Path of a bundled sample file (works from an installed package)."""
    return str(resources.files("sample_layouts").joinpath(name))


def _cells(gds: str) -> list[str]:
    import gdstk

    return sorted(c.name for c in gdstk.read_gds(gds).top_level())


def run(args) -> int:
    from analyze.cli.check import check_report, check_text
    from analyze.search.analysis import analyse_circuit
    from analyze.cli.compare import compare_report, compare_text, read_matching_schematic
    from analyze.compare.comparison import compare_circuits
    from analyze.search.constraints import load_constraints
    from analyze.report.html_check import check_html, compare_html
    from analyze.compare.match import match_circuits
    from extract.layout.pipeline import extract_layout
    from extract.writers.spef import write_spef
    from extract.writers.spice import write_spice
    from extract.techfile import load_tech

    from extract.errors import InputError

    out = os.path.abspath(args.out)
    samples = os.path.dirname(sample_path("dsk18.toml"))
    if os.path.exists(out) and not os.path.isdir(out):
        raise InputError(args.out, "exists and is not a folder", "--out")
    if os.path.exists(out) and os.path.samefile(out, samples):
        raise InputError(args.out, "is the folder of the bundled samples; choose another", "--out")
    try:
        os.makedirs(out, exist_ok=True)
    except OSError as exc:
        raise InputError(args.out, f"cannot create the folder: {exc.strerror or exc}", "--out") from None
    gds, tech_path = sample_path("dsk18_cells.gds"), sample_path("dsk18.toml")
    tech = load_tech(tech_path)
    rows, links = [], []
    outputs = OutputSet()
    for cell in _cells(gds):
        circuit = extract_layout(gds, tech, cell)
        outputs.add(os.path.join(out, f"{cell}.extract.json"), dumps(extract_report(circuit, tech)))
        outputs.add(os.path.join(out, f"{cell}.extracted.sp"), write_spice(circuit, tech))
        outputs.add(os.path.join(out, f"{cell}.extracted.spef"), write_spef(circuit, tech))

        cpath = sample_path(f"{cell}.constraints.toml")
        constraints = load_constraints(cpath) if os.path.exists(cpath) else None
        recognition, results = analyse_circuit(circuit, tech, constraints, cpath)
        outputs.add(os.path.join(out, f"{cell}.check.json"), dumps(check_report(circuit, tech, recognition, results)))
        outputs.add(os.path.join(out, f"{cell}.check.html"),
                     check_html(circuit, tech, recognition, results, constraints=constraints))
        outputs.add(os.path.join(out, f"{cell}.check.txt"), check_text(circuit, tech, recognition, results))
        page = [f"{cell}.check.html"]

        droop_inc = ""
        spath = sample_path(f"{cell}.sp")
        if os.path.exists(spath):
            pre = read_matching_schematic(spath, tech, cell)
            cmp = compare_circuits(pre, circuit, match_circuits(pre, circuit), tech, constraints, cpath)
            outputs.add(os.path.join(out, f"{cell}.compare.json"), dumps(compare_report(cmp)))
            outputs.add(os.path.join(out, f"{cell}.compare.html"), compare_html(cmp))
            outputs.add(os.path.join(out, f"{cell}.compare.txt"), compare_text(cmp))
            page.append(f"{cell}.compare.html")
            incs = [s.droop_increase_v for s in cmp.stages if s.droop_increase_v is not None]
            droop_inc = f"{max(incs):+.3f}" if incs else ""
        worst = min(results, key=lambda r: r.margin_v) if results else None
        rows.append(
            (
                cell,
                len(circuit.devices),
                len(results),
                "" if worst is None or worst.worst_case is None else f"{worst.worst_case.v_final:.3f}",
                "" if worst is None else f"{worst.margin_v:+.3f}",
                "-" if worst is None else ("FAIL" if any(r.status == "fail" for r in results) else "PASS"),
                ", ".join(f.node for r in results for f in r.flags),
                droop_inc,
            )
        )
        links.append((cell, page))

    head = ("cell", "devices", "stages", "v_final V", "margin V", "status", "needs precharge", "droop +V vs schematic")
    widths = [max(len(str(r[i])) for r in rows + [head]) for i in range(len(head))]
    lines = ["dynshare demo: invented 1.8 V process dsk18, bundled sample cells", ""]
    lines.append("  ".join(h.ljust(w) for h, w in zip(head, widths)))
    lines.append("  ".join("-" * w for w in widths))
    for r in rows:
        lines.append("  ".join(str(v).ljust(w) for v, w in zip(r, widths)))
    items = "".join(
        f"<li>{html.escape(c)}: " + ", ".join(f'<a href="{html.escape(p)}">{html.escape(p)}</a>' for p in pages) + "</li>"
        for c, pages in links
    )
    index = (
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>dynshare demo</title></head><body>"
        "<h1>dynshare demo</h1><p>Invented 1.8 V process dsk18; results are estimates to guide design, "
        "sign-off needs foundry-qualified extraction and simulation.</p>"
        f"<pre>{html.escape(chr(10).join(lines))}</pre><ul>{items}</ul></body></html>\n"
    )
    outputs.add(os.path.join(out, "index.html"), index)
    outputs.commit()
    lines += [
        "",
        "The demo always exits 0 when it ran; DYN_NAND3_LONG fails its check on purpose (long internal",
        "wiring) and DYN_NAND3_PC is the same cell fixed with a secondary precharge device.",
        f"reports written to {out}",
        f"open {os.path.join(out, 'index.html')} in a browser",
    ]
    sys.stdout.write("\n".join(lines) + "\n")
    return 0
