"""``check --all-cells --scheduler ADDRESS``: the cells on a Dask distributed
cluster (here a local one, started by the test, two worker processes).

Source of the expectations: the single-machine run (``--jobs 1``) is the
reference; the JSON report with ``--scheduler`` must be byte-identical to it,
and so must the exit status, the table and the ``error:`` line.  The cluster
is the ``scheduler`` fixture (tests/helpers/local_cluster.py)."""

import os
import socket
import subprocess
import sys

import pytest
from cli_run import run_dynshare as run
from local_cluster import scheduler  # noqa: F401  (the fixture)

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..", ".."))
GDS = os.path.join(ROOT, "sample_layouts", "dsk18_cells.gds")
TECH = os.path.join(ROOT, "sample_layouts", "dsk18.toml")


def both(tmp_path, source, tech, scheduler, cwd=ROOT):
    """The library checked with --jobs 1 and with --scheduler: (rc, stdout,
    stderr, JSON bytes) of each."""
    runs = {}
    for name, extra in (("local", ["--jobs", "1"]), ("cluster", ["--scheduler", scheduler])):
        out = tmp_path / f"{name}.json"
        rc, so, se = run("check", source, "--tech", tech, "--all-cells", "--json", out, *extra, cwd=cwd)
        runs[name] = (rc, so, se, out.read_bytes())
    return runs["local"], runs["cluster"]


def test_sample_library_same_bytes(tmp_path, scheduler):
    local, cluster = both(tmp_path, GDS, TECH, scheduler)
    assert local[0] == 1, local[2]  # DYN_NAND3_LONG fails (test_library.py)
    assert cluster == local


def test_netlist_library_with_a_bad_cell_relative_paths(tmp_path, scheduler):
    # relative paths, from a folder the workers do not run in: the workers
    # open the absolute paths, the report names the files as given
    with open(os.path.join(ROOT, "sample_layouts", "DYN_NAND3.sp")) as a, \
            open(os.path.join(ROOT, "sample_layouts", "DYN_NAND3_LONG.sp")) as b:
        text = a.read() + b.read()
    (tmp_path / "lib.sp").write_text(text + ".subckt BROKEN a y VDD VSS\nX1 a y NOT_DEFINED\n.ends\n")
    (tmp_path / "t.toml").write_bytes(open(TECH, "rb").read())
    local, cluster = both(tmp_path, "lib.sp", "t.toml", scheduler, cwd=tmp_path)
    assert local[0] == 2 and "BROKEN" in local[2] and b'"error": "lib.sp' in local[3], local[2]
    assert cluster == local


def test_unreachable_scheduler_one_error_line():
    with socket.socket() as s:  # a port nobody listens on
        s.bind(("127.0.0.1", 0))
        address = f"tcp://127.0.0.1:{s.getsockname()[1]}"
    rc, so, se = run("check", GDS, "--tech", TECH, "--all-cells", "--scheduler", address,
                     env={"DYNSHARE_SCHEDULER_TIMEOUT": "2"})
    assert rc == 2 and so == ""
    assert len(se.splitlines()) == 1 and "Traceback" not in se
    assert se.startswith(f"error: {address}: --scheduler: cannot reach the scheduler (")


@pytest.mark.parametrize("args", [["--all-cells", "--jobs", "2"], ["--cell", "DYN_NAND3", "--jobs", "2"]])
def test_refused_combinations(args):
    rc, so, se = run("check", GDS, "--tech", TECH, "--scheduler", "tcp://127.0.0.1:1", *args)
    assert rc == 2 and se == f"error: tcp://127.0.0.1:1: --scheduler: {se.split('--scheduler: ', 1)[1]}"
    assert "--jobs and --scheduler exclude each other" in se and len(se.splitlines()) == 1


def test_worker_reading_other_bytes_is_refused(scheduler, monkeypatch):
    # the client's digest of the library made wrong: every worker reads
    # other bytes at the path, refuses its chunk, the run stops with one line
    import analyze.cli.cluster as cluster
    import analyze.cli.library as library
    from analyze.cli.library import open_library
    from extract.errors import InputError

    cells = open_library(GDS, TECH)[0].cells
    real = cluster.file_digest
    monkeypatch.setattr(cluster, "file_digest", lambda p: "0" * 64 if p == GDS else real(p))
    with pytest.raises(InputError) as err:
        list(library.check_library(GDS, TECH, cells, scheduler=scheduler))
    line = err.value.line()
    assert line.startswith(f"{scheduler}: --scheduler: worker tcp://")
    assert f"reads other bytes at {GDS}" in line and "shared filesystem" in line


def test_worker_missing_file_is_refused(tmp_path):
    # called directly (as a worker would): a file it cannot open
    from analyze.cli.cluster import _cluster_chunk
    from analyze.cli.library import check_cell_in_library as check
    from extract.writers.numbers import tool_version

    gone = str(tmp_path / "gone.gds")
    kind, why = _cluster_chunk(check, (gone, TECH, None), (gone, TECH, None), ("0" * 64, "0" * 64, None),
                               tool_version(), ["A"])
    assert kind == "refused" and f"cannot read {gone}" in why and "same path" in why
    kind, why = _cluster_chunk(check, (GDS, TECH, None), (GDS, TECH, None), (None, None, None), "0.0-other", ["A"])
    assert kind == "refused" and "the client 0.0-other" in why


@pytest.mark.parametrize("args", [["--all-cells", "--jobs", "2"], ["--cell", "DYN_NAND3_LONG"]])
def test_local_run_does_not_import_dask(tmp_path, args):
    # source: the design rule (Dask only with --scheduler), counted in
    # sys.modules, for a library and for one cell (exit 1: DYN_NAND3_LONG fails)
    code = ("import sys; from analyze.cli.main import main; "
            f"rc = main(['check', {GDS!r}, '--tech', {TECH!r}, *{args!r}, '--json', {str(tmp_path / 'r.json')!r}]); "
            "print(rc, sorted(m for m in sys.modules if m.split('.')[0] in ('dask', 'distributed') "
            "or m.startswith('analyze.cli.cluster')))")
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300, cwd=ROOT,
                       env=dict(os.environ, PYTHONPATH=ROOT))
    assert p.stdout.splitlines()[-1] == "1 []", p.stderr


def test_rewritten_library_is_read_again(tmp_path, scheduler):
    # the workers live on between runs: a library rewritten at the same path
    # must be read again (reference: the --jobs 1 run of each version)
    import gdstk

    lib = gdstk.read_gds(GDS)
    path = tmp_path / "lib.gds"
    lib.write_gds(str(path))
    first = both(tmp_path, path, TECH, scheduler)
    # the failing cell, same name, now drawn as the passing DYN_NAND3
    cells = {c.name: c for c in lib.cells}
    lib.remove(cells["DYN_NAND3_LONG"])
    lib.add(cells["DYN_NAND3"].copy("DYN_NAND3_LONG"))
    lib.write_gds(str(path))
    second = both(tmp_path, path, TECH, scheduler)
    assert first[1] == first[0] and second[1] == second[0]
    assert first[0][0] == 1 and second[0][0] == 0  # DYN_NAND3_LONG passes now
