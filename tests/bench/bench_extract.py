"""Benchmark: extraction time and peak memory against transistor count.

Run: ``python3 tests/bench/bench_extract.py [--sizes 1000,10000,100000]``

Builds flat-placed arrays of the DYN_NAND3 sample cell (8 transistors
each) with ``sample_layouts.make_samples.nand3_array``, writes each to a
temporary GDSII file and runs ``dynshare extract`` on it in a fresh
process (so the peak RSS is that of one extraction).  Prints wall time,
peak RSS, and the growth exponent between successive sizes (time ∝ n^k).
Targets: 100k transistors under 60 s and 4 GB; k no worse than n·log n.
"""

from __future__ import annotations

import argparse
import math
import os
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
TECH = os.path.join(ROOT, "sample_layouts", "dsk18.toml")

CHILD = r"""
import resource, sys, time
from extract.layout.pipeline import extract_layout
from extract.techfile import load_tech
tech = load_tech(sys.argv[1])
t = time.perf_counter()
c = extract_layout(sys.argv[2], tech, sys.argv[3])
dt = time.perf_counter() - t
print(len(c.devices), dt, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="1000,10000,100000", help="transistor counts, comma separated")
    args = ap.parse_args(argv)
    sys.path.insert(0, ROOT)
    from sample_layouts.make_samples import nand3_array

    rows = []
    print(f"{'transistors':>12} {'instances':>10} {'time s':>8} {'peak MB':>8} {'exponent':>9}")
    with tempfile.TemporaryDirectory() as tmp:
        for target in (int(s) for s in args.sizes.split(",")):
            cells = max(1, round(target / 8))
            nx = max(1, int(math.sqrt(cells)))
            ny = max(1, math.ceil(cells / nx))
            lib = nand3_array(nx, ny)
            path = os.path.join(tmp, f"array_{target}.gds")
            lib.write_gds(path)
            top = lib.top_level()[0].name
            t0 = time.perf_counter()
            out = subprocess.run(
                [sys.executable, "-c", CHILD, TECH, path, top], capture_output=True, text=True, cwd=ROOT, check=True
            ).stdout.split()
            n_dev, dt, mb = int(out[0]), float(out[1]), float(out[2])
            k = ""
            if rows:
                n0, t0_ = rows[-1]
                k = f"{math.log(dt / t0_) / math.log(n_dev / n0):.2f}"
            rows.append((n_dev, dt))
            print(f"{n_dev:>12} {nx * ny:>10} {dt:>8.2f} {mb:>8.0f} {k:>9}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
