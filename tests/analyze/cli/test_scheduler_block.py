"""``check BLOCK --cell TOP --scheduler ADDRESS``: the distinct stage contexts
of one block analysed on a Dask distributed cluster (the ``scheduler``
fixture, tests/helpers/local_cluster.py: a local cluster of two worker
processes).

Sources of the expectations:

* the same command without ``--scheduler`` (the single-machine run) is the
  reference: the JSON report must be the same bytes, and the exit status,
  stdout and stderr the same text;
* that the workers did the analysis, not the client, is read from the
  scheduler's own count of finished tasks (``TaskPrefix.state_counts``),
  against the number of chunks of distinct context keys counted here by
  brute force (the key of every stage put in a set);
* the error lines are the library path's (test_scheduler.py).
"""

import functools
import operator
import os
import socket

import pytest
from cli_run import run_dynshare as run
from local_cluster import scheduler  # noqa: F401  (the fixture)

from analyze.cli.library import work_chunks
from analyze.search.constraints import load_constraints
from analyze.search.contexts import stage_context
from analyze.stages.recognize import find_stages
from extract.errors import InputError
from extract.layout.pipeline import extract_layout
from extract.techfile import load_tech
from sample_layouts.make_samples import mixed_block, nand3_array

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..", ".."))
SAMPLES = os.path.join(ROOT, "sample_layouts")
TECH = os.path.join(SAMPLES, "dsk18.toml")


@functools.cache
def dsk18():
    return load_tech(TECH)


@pytest.fixture(scope="module")
def blocks(tmp_path_factory):
    """The two sample blocks as GDS files: name → (path, top cell)."""
    folder = tmp_path_factory.mktemp("blocks")
    made = {}
    for name, lib in (("mixed", mixed_block(2, 2)), ("nand3", nand3_array(3, 3))):
        path = str(folder / f"{name}.gds")
        lib.write_gds(path)
        made[name] = (path, lib.top_level()[0].name)
    return made


def _finished(dask_scheduler):
    prefix = dask_scheduler.task_prefixes.get("context_chunk")  # tasks of cluster_block._context_chunk
    return 0 if prefix is None else prefix.state_counts["memory"]


def finished_tasks(address) -> int:
    """Context tasks the scheduler has seen finish since it started."""
    from distributed import Client

    with Client(address) as client:
        return client.run_on_scheduler(_finished)


def chunks_expected(path, cell, constraints_path=None) -> int:
    """Brute force: the distinct context keys of the block's stages, in the
    chunks the client makes for two workers."""
    circuit = extract_layout(path, dsk18(), cell)
    cons = load_constraints(constraints_path) if constraints_path else None
    keys = {stage_context(circuit, s, dsk18(), cons)[0] for s in find_stages(circuit, dsk18()).stages}
    keys.discard(None)
    return len(work_chunks(sorted(keys, key=repr), 2))


def both(tmp_path, path, cell, scheduler, *extra):
    """The block checked here and on the cluster: (rc, stdout, stderr, JSON
    bytes) of each, and the context tasks the cluster run finished."""
    runs = {}
    before = finished_tasks(scheduler)
    for name, more in (("local", ()), ("cluster", ("--scheduler", scheduler))):
        out = tmp_path / f"{name}.json"
        rc, so, se = run("check", path, "--tech", TECH, "--cell", cell, "--json", out, *extra, *more)
        runs[name] = (rc, so, se, out.read_bytes())
    return runs["local"], runs["cluster"], finished_tasks(scheduler) - before


def test_mixed_block_same_bytes_on_the_cluster(tmp_path, scheduler, blocks):
    # every sample cell 2 x 2: dynamic, domino, p-type, static, and
    # DYN_NAND3_LONG failing with a flag (sample_layouts/README.md)
    path, cell = blocks["mixed"]
    local, cluster, tasks = both(tmp_path, path, cell, scheduler)
    assert local[0] == 1 and b'"add precharge device"' in local[3], local[2]
    assert b'"polarity": "p"' in local[3]
    assert cluster == local
    assert tasks == chunks_expected(path, cell) > 1


def test_nand3_array_same_bytes_on_the_cluster(tmp_path, scheduler, blocks):
    path, cell = blocks["nand3"]
    local, cluster, tasks = both(tmp_path, path, cell, scheduler)
    assert local[0] == 0 and local[3].count(b'"dynamic_node"') == 9, local[2]
    assert cluster == local
    assert tasks == chunks_expected(path, cell) >= 1


@pytest.mark.parametrize("constraints", ["DOMINO_MUX4.constraints.toml", "DOMINO_OR16.constraints.toml",
                                         "lower-case"])
def test_constraints_same_bytes_on_the_cluster(tmp_path, scheduler, blocks, constraints):
    # the sample constraints files (one-hot selects: they change the worst
    # case of the first mux copy), and the MUX4 selects named in lower case
    # (matched without regard to case: a key token of its own)
    path, cell = blocks["mixed"]
    if constraints == "lower-case":
        cons = tmp_path / "lower.constraints.toml"
        cons.write_text('one_hot = [["s0", "s1", "s2", "s3"]]\n')
    else:
        cons = os.path.join(SAMPLES, constraints)
    local, cluster, tasks = both(tmp_path, path, cell, scheduler, "--constraints", cons)
    assert local[0] == 1, local[2]
    assert cluster == local
    assert tasks == chunks_expected(path, cell, str(cons))


def test_unreachable_scheduler_one_error_line_nothing_written(tmp_path, blocks):
    with socket.socket() as s:  # a port nobody listens on
        s.bind(("127.0.0.1", 0))
        address = f"tcp://127.0.0.1:{s.getsockname()[1]}"
    path, cell = blocks["nand3"]
    out = tmp_path / "r.json"
    rc, so, se = run("check", path, "--tech", TECH, "--cell", cell, "--json", out, "--scheduler", address,
                     env={"DYNSHARE_SCHEDULER_TIMEOUT": "2"})
    assert rc == 2 and so == "" and not out.exists()
    assert len(se.splitlines()) == 1 and "Traceback" not in se
    assert se.startswith(f"error: {address}: --scheduler: cannot reach the scheduler (")


def _block_stages(blocks):
    path, cell = blocks["nand3"]
    circuit = extract_layout(path, dsk18(), cell)
    return circuit, find_stages(circuit, dsk18()).stages


def test_worker_of_another_version_is_refused(scheduler, blocks, monkeypatch):
    # the client claims another version: every worker refuses its chunk
    import extract.writers.numbers as numbers
    from analyze.cli.cluster_block import block_solver
    from analyze.search.analysis import analyze_stage
    from analyze.search.contexts import StageContexts

    circuit, stages = _block_stages(blocks)
    monkeypatch.setattr(numbers, "tool_version", lambda: "0.0-other")
    with pytest.raises(InputError) as err, block_solver(scheduler) as solve:
        StageContexts(circuit, dsk18(), None, analyze_stage).prefetch(stages, solve)
    line = err.value.line()
    assert line.startswith(f"{scheduler}: --scheduler: worker tcp://") and "the client 0.0-other" in line


class _Unloadable:
    """Pickles, but raises ZeroDivisionError where it is unpickled (a stand-in
    for a worker that cannot load the task)."""

    def __reduce__(self):
        return operator.truediv, (1, 0)


def test_failing_task_one_error_line(scheduler, blocks):
    from analyze.cli.cluster_block import block_solver

    circuit, stages = _block_stages(blocks)
    key = stage_context(circuit, stages[0], dsk18())[0]
    with pytest.raises(InputError) as err, block_solver(scheduler) as solve:
        list(solve(_Unloadable(), [key], dsk18(), "<constraints>"))
    line = err.value.line()
    assert line.startswith(f"{scheduler}: --scheduler: a worker failed (") and "\n" not in line


def test_models_tech_stays_here_with_a_note():
    # with [models] the stages are analysed directly (not keyed), so the
    # cluster is not contacted at all: the address below is never dialled
    from types import SimpleNamespace

    from analyze.cli.check import _cluster

    notes = []
    tech = SimpleNamespace(models=object())
    with _cluster(SimpleNamespace(scheduler="tcp://127.0.0.1:1"), tech, None, notes) as solve:
        assert solve is None
    assert len(notes) == 1 and notes[0].startswith("tcp://127.0.0.1:1: --scheduler: not used: with [models]")


def test_progress_of_the_cluster_step_on_a_terminal(scheduler, blocks):
    # source: the progress module's contract (drawn on a terminal only)
    import io

    from analyze.cli.cluster_block import block_solver
    from analyze.cli.progress import Steps
    from analyze.search.analysis import analyse_circuit

    class Terminal(io.StringIO):
        def isatty(self):
            return True

    circuit, _ = _block_stages(blocks)
    for stream, drawn in ((Terminal(), True), (io.StringIO(), False)):
        with Steps(stream=stream) as steps, block_solver(scheduler, steps) as solve:
            results = analyse_circuit(circuit, dsk18(), solve=solve)[1]
        assert len(results) == 9
        assert (f"analysing stage contexts on {scheduler}" in stream.getvalue()) == drawn
