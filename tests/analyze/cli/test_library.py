"""``check --all-cells``: every cell of a library once, bad cells reported
while the rest still run, the same answers with one or two processes.

The reference for each cell's numbers is the single-cell ``check`` (whose
physics is tested against ngspice elsewhere): library mode must agree with
it exactly."""

import json
import os
import subprocess
import sys

import gdstk
import pytest

ROOT = os.path.join(os.path.dirname(__file__), "..", "..", "..")
GDS = os.path.join(ROOT, "sample_layouts", "dsk18_cells.gds")
TECH = os.path.join(ROOT, "sample_layouts", "dsk18.toml")


def run(*args):
    p = subprocess.run([sys.executable, "-m", "analyze", *args], capture_output=True, text=True, timeout=300)
    return p.returncode, p.stdout, p.stderr


@pytest.fixture(scope="module")
def one_job():
    rc, out, err = run("check", GDS, "--tech", TECH, "--all-cells", "--json", "-")
    return rc, json.loads(out), err


def test_every_cell_once_and_exit_status(one_job):
    rc, doc, err = one_job
    names = [c["cell"] for c in doc["cells"]]
    assert names == sorted(c.name for c in gdstk.read_gds(GDS).cells)
    by = {c["cell"]: c for c in doc["cells"]}
    assert by["STATIC_NAND2"]["status"] == "no stage"
    assert by["DYN_NAND3_LONG"]["status"] == "fail"
    assert rc == 1 and doc["status"] == "fail"  # one failing stage in the library


def test_library_agrees_with_single_cell_check(one_job):
    _, doc, _ = one_job
    by = {c["cell"]: c for c in doc["cells"]}
    for cell in ("DYN_NAND3", "DYN_NAND3_LONG", "PDYN_NOR2"):
        rc, out, _ = run("check", GDS, "--tech", TECH, "--cell", cell, "--json", "-")
        single = json.loads(out)
        assert by[cell]["stages"] == single["stages"]


def test_two_jobs_same_report(one_job):
    _, doc1, _ = one_job
    rc, out, err = run("check", GDS, "--tech", TECH, "--all-cells", "--jobs", "2", "--json", "-")
    assert rc == 1
    assert json.loads(out)["cells"] == doc1["cells"]


def test_bad_cell_reported_rest_still_run(tmp_path):
    lib = gdstk.read_gds(GDS)
    broken = lib.new_cell("BROKEN")
    broken.add(gdstk.Reference("NOT_THERE"))
    path = str(tmp_path / "lib.gds")
    lib.write_gds(path)
    out = tmp_path / "r.json"
    rc, so, se = run("check", path, "--tech", TECH, "--all-cells", "--json", str(out))
    assert rc == 2
    doc = json.loads(out.read_text())
    by = {c["cell"]: c for c in doc["cells"]}
    assert by["BROKEN"]["status"] == "error" and "NOT_THERE" in by["BROKEN"]["error"]
    assert by["DYN_NAND3"]["status"] == "pass"  # the others still ran
    errors = [l for l in se.splitlines() if l.startswith("error:")]
    assert len(errors) == 1 and "1 of" in errors[0] and "BROKEN" in errors[0]
    assert "Traceback" not in se


def test_bad_jobs_value():
    rc, so, se = run("check", GDS, "--tech", TECH, "--all-cells", "--jobs", "0")
    assert rc == 2 and se.startswith("error:") and "--jobs" in se


@pytest.mark.skipif("fork" not in __import__("multiprocessing").get_all_start_methods(),
                    reason="start-up sharing by fork needs a platform that forks")
@pytest.mark.parametrize("opened_in_parent", [True, False])
def test_workers_open_the_library_once(tmp_path, monkeypatch, opened_in_parent):
    # Source: the module's rule, counted here: every call of open_cells appends
    # its process id to a file.  Opened in the parent, forked workers inherit it
    # (no worker opens it); otherwise each worker opens it once, however many
    # chunks it runs (8 chunks a worker here).
    import analyze.cli.inputs as inputs
    import analyze.cli.library as library

    log = tmp_path / "opens.txt"
    real = inputs.open_cells

    def counting(path, tech):
        with open(log, "a") as fh:
            fh.write(f"{os.getpid()}\n")
        return real(path, tech)

    monkeypatch.setattr(inputs, "open_cells", counting)
    monkeypatch.setattr(library, "_OPEN", {})
    cells = real(GDS, __import__("extract.techfile", fromlist=["load_tech"]).load_tech(TECH)).cells
    if opened_in_parent:
        library.open_library(GDS, TECH)
    outcomes = library.check_library(GDS, TECH, cells * 4, jobs=2)
    assert len(outcomes) == 4 * len(cells) and not any(o.error for o in outcomes)
    pids = log.read_text().split()
    if opened_in_parent:
        assert pids == [str(os.getpid())]
    else:
        assert len(pids) == len(set(pids)) <= 2 and str(os.getpid()) not in pids
