"""What each sub-command does, from parsed arguments to exit status.

Every command validates all inputs before it writes anything, builds its
outputs in memory and writes each file atomically at the end.
"""

from __future__ import annotations

import sys

from analyze.cli.check import warn
from analyze.cli.output import OutputSet, check_outputs
from analyze.report.json_report import dump_pieces, extract_report
from extract.techfile import load_tech

__all__ = ["run_extract", "run_check", "run_compare", "run_characterize", "run_demo"]


def extract_summary(circuit, top: int = 5) -> str:
    """A few lines: cell, device and net counts, the largest node caps."""
    n_n = sum(d.type == "nmos" for d in circuit.devices)
    n_p = len(circuit.devices) - n_n
    lines = [
        f"cell {circuit.cell}: {len(circuit.devices)} devices ({n_n} nmos, {n_p} pmos), {len(circuit.nets)} nets",
    ]
    signal = [n for n in circuit.nets.values() if n.role not in ("power", "ground")]
    signal.sort(key=lambda n: (-n.cap_ff, n.name))
    if signal:
        lines.append("largest node capacitances (supplies left out):")
        width = max(len(n.name) for n in signal[:top])
        for n in signal[:top]:
            p = n.cap
            loc = "" if n.location_um is None else f"  at ({n.location_um[0]:.2f}, {n.location_um[1]:.2f}) um"
            lines.append(
                f"  {n.name:<{width}}  {n.cap_ff:8.3f} fF  (junction {p.junction:.3f}, wire {p.wire:.3f}, "
                f"gate {p.gate:.3f}, overlap {p.overlap:.3f}){loc}"
            )
    return "\n".join(lines) + "\n"


def run_extract(args) -> int:
    from extract.layout.pipeline import extract_layout
    from extract.writers.spef import write_spef
    from extract.writers.spice import write_spice

    check_outputs({"--json": args.json, "--spice": args.spice, "--spef": args.spef}, [args.layout, args.tech])
    stdout_users = [o for o in ("json", "spice", "spef") if getattr(args, o) == "-"]
    if len(stdout_users) > 1:
        from extract.errors import InputError

        raise InputError("-", "only one output can go to stdout", "--" + stdout_users[1])
    tech = load_tech(args.tech)
    circuit = extract_layout(args.layout, tech, args.cell)
    texts = {}
    if args.json:
        texts[args.json] = dump_pieces(extract_report(circuit, tech))
    if args.spice:
        texts[args.spice] = write_spice(circuit, tech)
    if args.spef:
        texts[args.spef] = write_spef(circuit, tech)
    if not stdout_users:
        sys.stdout.write(extract_summary(circuit))
    outputs = OutputSet()
    for path, text in texts.items():
        outputs.add(path, text)
    outputs.commit()
    warn(circuit.findings)
    return 0


def run_check(args) -> int:
    if args.scheduler is not None and args.jobs is not None:
        from extract.errors import InputError

        raise InputError(args.scheduler, "--jobs and --scheduler exclude each other (the cluster's workers are "
                         "the parallel processes)", "--scheduler")
    if args.all_cells:
        from analyze.cli.library import run_library

        return run_library(args)
    from analyze.cli.check import check_cell

    return check_cell(args)


def run_compare(args) -> int:
    from analyze.cli.compare import compare_cell

    return compare_cell(args)


def run_characterize(args) -> int:
    from analyze.cli.characterize import run

    return run(args)


def run_demo(args) -> int:
    from analyze.cli.demo import run

    return run(args)
