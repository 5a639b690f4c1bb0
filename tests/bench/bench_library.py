"""Benchmark: ``check --all-cells`` on a generated library of 500 cells.

Run: ``python3 tests/bench/bench_library.py [--cells 500]``

The library holds renamed copies of the bundled sample cells (all ten,
round robin, so a realistic mix of dynamic and static cells).  Each run is
the real command line in a fresh process; cells/s is printed for
``--jobs 1`` and ``--jobs 2``.
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


def build(path: str, n: int) -> None:
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


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=500)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "lib.gds")
        build(path, args.cells)
        print(f"library of {args.cells} cells")
        for jobs in (1, 2):
            t = time.perf_counter()
            p = subprocess.run(
                [sys.executable, "-m", "analyze", "check", path, "--tech", TECH, "--all-cells",
                 "--jobs", str(jobs), "--json", os.path.join(tmp, f"r{jobs}.json")],
                capture_output=True, text=True, cwd=ROOT,
            )
            dt = time.perf_counter() - t
            print(f"  --jobs {jobs}: {dt:7.2f} s  {args.cells / dt:7.1f} cells/s  (exit {p.returncode})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
