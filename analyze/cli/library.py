"""``dynshare check LIB --all-cells``: every cell of a library, in parallel.

Each cell defined in the file is extracted and checked once (a cell
placed many times is still one cell).  Cells are independent, so with
``--jobs N`` they run in N worker processes.  Start-up is paid once: where
the platform can fork, the workers inherit the parent's imports and its
opened library and tech file; elsewhere each worker opens them once, in
its initializer.  Cells go out in small chunks, so the workers finish
together.  With ``--scheduler ADDRESS`` the same chunks go to the workers
of a Dask distributed cluster instead (:mod:`analyze.cli.cluster`); the
report is the same.  A cell that cannot be analysed is reported and
the others still run.

Exit status: 2 when some cell could not be analysed (one ``error:`` line
at the end names how many and which), else 1 when a stage fails, else 0.
"""

from __future__ import annotations

import multiprocessing
import os
import sys
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field

from analyze.cli.output import OutputSet, check_outputs
from analyze.report.json_report import dumps, header, input_name, rounded, stage_json

__all__ = ["CellOutcome", "check_cell_in_library", "check_library", "run_library", "open_library", "work_chunks"]

_OPEN: dict = {}


def open_library(path: str, tech_path: str, constraints_path: str | None = None):
    """``(source, tech, constraints)`` of a library, opened once per
    process (kept for :func:`check_cell_in_library`).  The files' size and
    modification time are part of the key, so that a long-lived process (a
    cluster worker) reads a library again when it has been rewritten."""
    from analyze.cli.inputs import open_cells
    from extract.techfile import load_tech

    key = (path, tech_path, constraints_path, _stamp(path), _stamp(tech_path), _stamp(constraints_path))
    if key not in _OPEN:
        constraints = None
        if constraints_path:
            from analyze.search.constraints import load_constraints

            constraints = load_constraints(constraints_path)
        _OPEN.clear()
        tech = load_tech(tech_path)
        _OPEN[key] = (open_cells(path, tech), tech, constraints)
    return _OPEN[key]


def _stamp(path):
    try:
        st = os.stat(path)
    except (OSError, TypeError):
        return None  # no file (reported by the reader)
    return st.st_size, st.st_mtime_ns


def _worker_start(path, tech_path, constraints_path) -> None:
    """Process-pool initializer: open the library once per worker."""
    from extract.errors import InputError

    try:
        open_library(path, tech_path, constraints_path)
    except InputError:
        pass  # each cell will report it


@dataclass
class CellOutcome:
    """What checking one cell of a library gave."""

    cell: str
    devices: int = 0
    stages: list[dict] = field(default_factory=list)
    error: str | None = None
    findings: list[str] = field(default_factory=list)
    inputs: tuple[str, ...] = ()

    @property
    def status(self) -> str:
        if self.error:
            return "error"
        if not self.stages:
            return "no stage"
        return "fail" if any(s["status"] == "fail" for s in self.stages) else "pass"

    @property
    def worst_margin(self) -> float | None:
        return min((s["margin_v"] for s in self.stages), default=None)


def check_cell_in_library(path: str, tech_path: str, cell: str, constraints_path: str | None = None) -> CellOutcome:
    """Extract and check one cell; never raises for bad input (it is
    recorded in the outcome).  The library and tech are read once per
    process."""
    from analyze.search.analysis import analyse_circuit
    from extract.errors import InputError

    try:
        source, tech, constraints = open_library(path, tech_path, constraints_path)
        circuit = source.circuit(cell)
        recognition, results = analyse_circuit(circuit, tech)
        if constraints is not None:
            from analyze.search.analysis import analyze_stage
            from analyze.search.constraints import check_constraints_apply

            try:
                check_constraints_apply(constraints, recognition.stages, constraints_path)
                results = [analyze_stage(circuit, st, tech, constraints) for st in recognition.stages]
            except InputError:
                pass  # constraints for other cells' inputs: this cell runs without them
        return CellOutcome(
            cell,
            devices=len(circuit.devices),
            stages=[stage_json(r, circuit) for r in results],
            findings=[f.text() for f in list(circuit.findings) + list(recognition.findings)],
            inputs=tuple(sorted({n for st in recognition.stages for n in st.inputs})),
        )
    except InputError as exc:
        return CellOutcome(cell, error=exc.line())
    except Exception as exc:  # one broken cell must not stop the library
        return CellOutcome(cell, error=f"{path}: cell {cell}: internal error ({type(exc).__name__}: {exc})")


def _check_chunk(path, tech_path, cells, constraints_path):
    return [check_cell_in_library(path, tech_path, c, constraints_path) for c in cells]


def check_library(path, tech_path, cells, jobs=1, constraints_path=None, progress=None,
                  scheduler=None) -> list[CellOutcome]:
    """Check ``cells`` of ``path``; outcomes sorted by cell name.

    ``progress`` is called with each finished outcome (for a progress bar).
    With ``scheduler`` (an address), the cells run on that Dask distributed
    cluster (:mod:`analyze.cli.cluster`) and ``jobs`` is not used.
    """
    outcomes = []
    if scheduler:
        from analyze.cli.cluster import cluster_map

        files = (path, tech_path, constraints_path)
        for out in cluster_map(scheduler, check_cell_in_library, files, cells, work_chunks):
            outcomes.append(out)
            if progress:
                progress(out)
    elif jobs <= 1 or len(cells) <= 1:
        for cell in cells:
            out = check_cell_in_library(path, tech_path, cell, constraints_path)
            outcomes.append(out)
            if progress:
                progress(out)
    else:
        for out in _pool_map(path, tech_path, cells, jobs, constraints_path):
            outcomes.append(out)
            if progress:
                progress(out)
    outcomes.sort(key=lambda o: o.cell)
    return outcomes


def work_chunks(items: list, workers: int) -> list[list]:
    """Work (cells, stage contexts) in chunks for parallel workers: at most
    16 items, and small enough for 8 tasks per worker, so that the last
    tasks even the load out while inter-process traffic stays a few
    messages per worker.

    Examples
    --------
    >>> [len(c) for c in work_chunks(list(range(40)), 2)]
    [2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2, 2]
    >>> work_chunks(["a", "b", "c"], 4)
    [['a'], ['b'], ['c']]
    """
    size = max(1, min(16, len(items) // (8 * workers)))
    return [items[i : i + size] for i in range(0, len(items), size)]


def _pool_map(path, tech_path, cells, jobs, constraints_path):
    """Outcomes of ``cells`` from ``jobs`` worker processes, as they finish."""
    methods = multiprocessing.get_all_start_methods()
    ctx = multiprocessing.get_context("fork" if "fork" in methods else None)
    chunks = work_chunks(cells, jobs)
    with ProcessPoolExecutor(max_workers=jobs, mp_context=ctx, initializer=_worker_start,
                             initargs=(path, tech_path, constraints_path)) as pool:
        futures = [pool.submit(_check_chunk, path, tech_path, ch, constraints_path) for ch in chunks]
        for fut in as_completed(futures):
            yield from fut.result()


def summary_table(outcomes: list[CellOutcome]) -> str:
    shown = [o for o in outcomes if o.stages or o.error]
    head = ("cell", "stages", "worst margin V", "status")
    rows = [
        (o.cell, str(len(o.stages)) if not o.error else "-",
         "" if o.worst_margin is None else f"{o.worst_margin:+.3f}", o.status.upper())
        for o in shown
    ]
    widths = [max(len(r[i]) for r in rows + [head]) for i in range(4)]
    lines = ["  ".join(h.ljust(w) for h, w in zip(head, widths)), "  ".join("-" * w for w in widths)]
    lines += ["  ".join(v.ljust(w) for v, w in zip(r, widths)) for r in rows]
    n_stage = sum(1 for o in outcomes if o.stages)
    n_fail = sum(1 for o in outcomes if o.status == "fail")
    n_none = sum(1 for o in outcomes if o.status == "no stage")
    lines.append("")
    lines.append(f"{len(outcomes)} cells: {n_stage} with dynamic stages ({n_fail} failing), {n_none} without")
    return "\n".join(lines) + "\n"


def run_library(args) -> int:
    from extract.errors import InputError, listing

    if getattr(args, "html", None):
        raise InputError(args.html, "--html is written per cell; it cannot be combined with --all-cells", "--html")
    if args.cell:
        raise InputError(args.layout, "--cell and --all-cells exclude each other", "--cell")
    if getattr(args, "simulate", False):
        raise InputError(args.layout, "--simulate runs on one cell at a time; name it with --cell", "--simulate")
    if args.jobs is not None and args.jobs < 1:
        raise InputError(args.layout, f"--jobs must be at least 1, got {args.jobs}", "--jobs")
    scheduler = getattr(args, "scheduler", None)
    check_outputs({"--json": args.json}, [args.layout, args.tech, args.constraints])
    # opened once here; forked workers inherit it (see the module text)
    source, tech, constraints = open_library(args.layout, args.tech, args.constraints)
    cells = source.cells
    jobs = max(1, args.jobs or 1)
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    notes = []  # printed with the warnings, once the outputs are written
    if jobs > cores:
        notes.append(f"--jobs {jobs} is more than the {cores} cores this machine gives us; ran {cores}")
        jobs = cores

    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    console = Console(stderr=True)
    with Progress(TextColumn("checking cells"), BarColumn(), MofNCompleteColumn(), TimeRemainingColumn(),
                  console=console, transient=True, disable=not console.is_terminal) as bar:
        task = bar.add_task("cells", total=len(cells))
        outcomes = check_library(args.layout, args.tech, cells, jobs, args.constraints,
                                 progress=lambda _o: bar.advance(task), scheduler=scheduler)
    report = header(os.path.basename(args.layout), tech.vdd)
    report["library"] = input_name(args.layout)
    report["cells"] = [
        {"cell": o.cell, "status": o.status, "devices": o.devices,
         "worst_margin_v": None if o.worst_margin is None else rounded(o.worst_margin),
         "stages": o.stages, "error": o.error, "findings": o.findings}
        for o in outcomes
    ]
    if constraints is not None:
        # as for one cell: every constrained net must be an input of some stage
        # (of some cell); checked against the stages the library really has
        from analyze.search.constraints import check_constraints_apply
        from analyze.stages.stage import Stage

        union = tuple(sorted({n for o in outcomes for n in o.inputs}))
        everything = Stage("*", "n", "", "", "", (), (), None, None, union, ())
        try:
            check_constraints_apply(constraints, [everything], args.constraints)
        except InputError as exc:
            if "allow no input pattern" not in exc.message:
                raise
    bad = [o for o in outcomes if o.error]
    report["status"] = "error" if bad else ("fail" if any(o.status == "fail" for o in outcomes) else "pass")
    if args.json != "-":
        sys.stdout.write(summary_table(outcomes))
    outputs = OutputSet()
    outputs.add(args.json, dumps(report))
    outputs.commit()
    if not bad:
        for text in notes:
            sys.stderr.write(f"warning: {text}\n")
        for o in outcomes:
            for text in o.findings:
                sys.stderr.write(f"warning: cell {o.cell}: {text}\n")
    if bad:
        names = listing([o.cell for o in bad], 5)
        line = InputError(args.layout, f"{len(bad)} of {len(outcomes)} cells could not be analysed "
                                       f"(see \"error\" in the JSON report): {names}; first: {bad[0].error}").line()
        sys.stderr.write(f"error: {line}\n")
        return 2
    return 1 if report["status"] == "fail" else 0
