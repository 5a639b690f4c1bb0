"""Benchmark: reading a SPICE netlist of 100k transistors.

Run: ``python3 tests/bench/bench_netlist.py [--devices 100000]``

Two files of the same circuit, written into a temporary folder: the bundled
demo schematic ``sample_layouts/DYN_NAND3.sp`` (8 transistors and a wire
capacitor, dsk18 process) repeated until the device count is reached,

- *flat*: one subcircuit holding every M and C line (nets renamed per copy),
  as an extractor writes a large block;
- *hierarchical*: the DYN_NAND3 subcircuit and a top subcircuit of X lines,
  as a designer writes it; the reader flattens it.

For each, the time of ``read_schematic`` (cards, library, elaboration,
junction estimates, capacitance per net) in this process, and of a whole
``check`` of the file through the command line, are printed, with the peak
memory of the process.  The issue's target: reading under 10 s.
"""

from __future__ import annotations

import argparse
import os
import re
import resource
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
TECH = os.path.join(ROOT, "sample_layouts", "dsk18.toml")
SCHEMATIC = os.path.join(ROOT, "sample_layouts", "DYN_NAND3.sp")
PORTS = ("VDD", "VSS", "CLK", "A", "B", "C", "X", "OUT")
GLOBAL = {"VDD", "VSS", "CLK"}


def _cell() -> tuple[str, list[str]]:
    """The DYN_NAND3 subcircuit text and its element lines."""
    text = open(SCHEMATIC).read()
    sub = re.search(r"^\.subckt DYN_NAND3.*?^\.ends DYN_NAND3\s*$", text, re.M | re.S).group(0)
    body = [line for line in sub.splitlines()[1:-1] if line.strip() and not line.startswith("*")]
    return sub, body


def write_flat(path: str, copies: int) -> None:
    _, body = _cell()
    nodes = {"X", "OUT", "A", "B", "C", "n1", "n2", "n3"}
    with open(path, "w") as out:
        out.write(".subckt BLOCK VDD VSS CLK\n")
        for i in range(copies):
            for line in body:
                name, *rest = line.split()
                fields = [f"{n}_{i}" if n in nodes else n for n in rest]
                out.write(f"{name}_{i} {' '.join(fields)}\n")
        out.write(".ends BLOCK\n")


def write_hierarchical(path: str, copies: int) -> None:
    sub, _ = _cell()
    with open(path, "w") as out:
        out.write(sub + "\n.subckt BLOCK VDD VSS CLK\n")
        for i in range(copies):
            nets = " ".join(p if p in GLOBAL else f"{p}_{i}" for p in PORTS)
            out.write(f"X{i} {nets} DYN_NAND3\n")
        out.write(".ends BLOCK\n")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--devices", type=int, default=100_000)
    args = ap.parse_args(argv)
    sys.path.insert(0, ROOT)
    from extract.netlist.reader import read_schematic
    from extract.techfile import load_tech

    tech = load_tech(TECH)
    copies = -(-args.devices // 8)
    with tempfile.TemporaryDirectory() as tmp:
        for kind, writer in (("flat", write_flat), ("hierarchical", write_hierarchical)):
            path = os.path.join(tmp, f"{kind}.sp")
            writer(path, copies)
            size = os.path.getsize(path) / 1e6
            t = time.perf_counter()
            circuit = read_schematic(path, tech, "BLOCK")
            dt = time.perf_counter() - t
            print(f"{kind:>12}: {len(circuit.devices)} transistors, {len(circuit.nets)} nets, "
                  f"{size:.1f} MB: read in {dt:5.2f} s")
            t = time.perf_counter()
            p = subprocess.run([sys.executable, "-m", "analyze", "check", path, "--tech", TECH,
                                "--cell", "BLOCK", "--json", os.path.join(tmp, f"{kind}.json")],
                               capture_output=True, text=True, cwd=ROOT)
            print(f"{'':>12}  whole check (command line, {copies} stages): "
                  f"{time.perf_counter() - t:5.2f} s (exit {p.returncode})")
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak memory of the reading process: {peak:.0f} MB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
