"""The ``check`` command: extraction, stage recognition, charge-sharing
analysis, reports and exit status."""

from __future__ import annotations

import sys

from analyze.cli.output import OutputSet, check_outputs
from analyze.report.json_report import (couplings_json, devices_json, dump_pieces, findings_json, header,
                                        nets_json, stage_json)
from analyze.report.text import check_header, stage_block
from analyze.search.analysis import analyse_circuit

__all__ = ["check_report", "check_text", "check_cell", "load_run_inputs", "warn"]


def check_report(circuit, tech, recognition, results) -> dict:
    report = header(circuit.cell, tech.vdd)

    report["clock"] = {"nets": list(recognition.clocks), "inferred": recognition.clock_inferred,
                       "note": recognition.clock_note}
    report["nets"] = nets_json(circuit)
    report["devices"] = devices_json(circuit)
    report["couplings"] = couplings_json(circuit)
    report["stages"] = [stage_json(r, circuit) for r in results]
    report["findings"] = findings_json(list(circuit.findings) + list(recognition.findings))
    report["status"] = "fail" if any(r.status == "fail" for r in results) else "pass"
    return report


def load_run_inputs(args, *extra_inputs):
    """Refuse bad outputs, then read the tech file and the constraints (if
    any) — everything is validated before any layout is read.

    Returns
    -------
    tech : Tech
    constraints : Constraints or None
    """
    from extract.techfile import load_tech

    inputs = [args.layout, args.tech, args.constraints, *extra_inputs]
    check_outputs({"--json": args.json, "--html": getattr(args, "html", None)}, inputs)
    tech = load_tech(args.tech)
    constraints = None
    if args.constraints:
        from analyze.search.constraints import load_constraints

        constraints = load_constraints(args.constraints)
    return tech, constraints


def check_text(circuit, tech, recognition, results) -> str:
    """The terminal report: header, one block per stage, the pass count."""
    parts = [check_header(circuit, tech, recognition)]
    parts += ["\n" + stage_block(r, circuit, tech) for r in results]
    if results:
        failed = sum(r.status == "fail" for r in results)
        parts.append(f"\n{len(results) - failed} of {len(results)} stages pass\n")
    return "".join(parts)  # joined once: a string grown stage by stage may be copied each time


def check_cell(args) -> int:
    tech, constraints = load_run_inputs(args)
    if getattr(args, "corner", None) and not getattr(args, "simulate", False):
        from extract.errors import InputError

        raise InputError(args.layout, "--corner needs --simulate", "--corner")
    if getattr(args, "simulate", False) and tech.models is None:
        from extract.errors import InputError

        raise InputError(args.tech, "--simulate needs a [models] table (the foundry model library)", "models")
    from analyze.cli.collector import big_run

    with big_run():
        return _check(args, tech, constraints)


def _check(args, tech, constraints) -> int:
    from analyze.cli.collector import settled
    from analyze.cli.inputs import open_cells
    from analyze.cli.progress import Steps

    notes = []  # printed with the warnings, once the outputs are written
    with Steps() as steps, _cluster(args, tech, steps, notes) as solve:
        with steps.step(f"reading, flattening and extracting {args.layout}"):
            circuit = open_cells(args.layout, tech).circuit(args.cell)
        settled()
        recognition, results = analyse_circuit(circuit, tech, constraints, args.constraints,
                                               progress=lambda n: steps.counted("analysing stages", n),
                                               solve=solve)
        settled()
    if getattr(args, "simulate", False):
        from analyze.simulate.run import simulate_result

        results = [simulate_result(circuit, r, tech, constraints, args.corner) for r in results]
    text = check_text(circuit, tech, recognition, results)
    failed = sum(r.status == "fail" for r in results)
    html = None
    if getattr(args, "html", None):
        from analyze.report.html_check import check_html

        html = check_html(circuit, tech, recognition, results, constraints=constraints)
    if args.json != "-":
        sys.stdout.write(text)
    outputs = OutputSet()
    if args.json:  # the report is built and serialised only when asked for
        outputs.add(args.json, dump_pieces(check_report(circuit, tech, recognition, results)))
    if html is not None:
        outputs.add(args.html, html)
    outputs.commit()
    for line in notes:
        sys.stderr.write(f"warning: {line}\n")
    warn(list(circuit.findings) + list(recognition.findings))
    return 1 if failed else 0


def _cluster(args, tech, steps, notes):
    """With ``--scheduler``: the connection to the cluster, giving the
    ``solve`` of :func:`analyze.search.analysis.analyse_circuit`
    (:mod:`analyze.cli.cluster_block`).  Otherwise, or with ``[models]``
    in the tech file (analysed here, stage by stage; a note says so): None."""
    from contextlib import nullcontext

    address = getattr(args, "scheduler", None)
    if address is None:
        return nullcontext()
    if tech.models is not None:
        from extract.errors import InputError

        notes.append(InputError(address, "not used: with [models] in the tech file every stage is analysed "
                                "on this machine (the foundry-model analysis is not shared between stage "
                                "contexts)", "--scheduler").line())
        return nullcontext()
    from analyze.cli.cluster_block import block_solver

    return block_solver(address, steps)


def warn(findings) -> None:
    """Warnings to stderr, one line each.  Called only once every output
    is written, so that a run ending in an error prints that line alone."""
    for f in findings:
        sys.stderr.write(f"warning: {f.text()}\n")
