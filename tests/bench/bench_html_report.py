"""Benchmark: the HTML report of a large cell.

Run ``python tests/bench/bench_html_report.py [NX NY]``; builds an NX × NY
array of the demo ``DYN_NAND3`` (default 34 × 33, about 9 000 transistors;
106 × 105 gives about 90 000), extracts and checks it, and prints the time
to write the report and its size.  The report caps the drawing at
:data:`analyze.report.svg_layout.MAX_SHAPES` shapes, the detailed sections at
:data:`analyze.report.html_check.MAX_DETAILED` stages and the summary at
:data:`analyze.report.html_check.MAX_SUMMARY` rows, so its size stays a few MB
whatever the cell.
"""

from __future__ import annotations

import os
import sys
import tempfile
import time

from analyze.search.analysis import analyse_circuit
from analyze.report.html_check import check_html
from extract.layout.pipeline import extract_layout
from extract.techfile import load_tech
from sample_layouts.make_samples import nand3_array

TECH = os.path.join(os.path.dirname(__file__), "..", "..", "sample_layouts", "dsk18.toml")


def main(nx: int = 34, ny: int = 33) -> None:
    tech = load_tech(TECH)
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "array.gds")
        nand3_array(nx, ny).write_gds(path)
        t0 = time.perf_counter()
        circuit = extract_layout(path, tech)
        t1 = time.perf_counter()
        recognition, results = analyse_circuit(circuit, tech)
        t2 = time.perf_counter()
        page = check_html(circuit, tech, recognition, results)
        t3 = time.perf_counter()
    shapes = sum(len(s) for s in circuit.shapes.values())
    print(f"{nx} x {ny} DYN_NAND3: {len(circuit.devices)} transistors, {shapes} shapes, {len(results)} stages")
    print(f"  extract {t1 - t0:6.1f} s   analyse {t2 - t1:6.1f} s   HTML report {t3 - t2:6.2f} s")
    print(f"  report size {len(page.encode()) / 1e6:.2f} MB")


if __name__ == "__main__":
    args = [int(a) for a in sys.argv[1:3]]
    main(*args)
