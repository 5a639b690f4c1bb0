"""Speed of the layout record-grammar checks against gdstk's own reading.

Writes a layout of random rectangles, Manhattan polygons and labels in 50
cells (about 30 MB as OASIS, by default) with gdstk: OASIS uncompressed,
OASIS with CBLOCKs, and GDSII; then times ``check_oasis_grammar`` /
``check_gds_grammar`` and ``gdstk.read_oas`` / ``read_gds`` on each, best
of ``--repeat``.  Prints the load average with the figures (the machine is
shared).  Run by hand::

    python3 tests/bench/bench_layout_grammar.py [--rectangles 1500000] [--polygons 300000]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(os.path.dirname(HERE)))


def layout(rectangles: int, polygons: int, cells: int = 50, seed: int = 1):
    """A library of random shapes (integers in nm, so every writer keeps them exactly)."""
    import gdstk
    import numpy as np

    rng = np.random.default_rng(seed)
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    top = lib.new_cell("TOP")
    for k in range(cells):
        c = lib.new_cell(f"C{k}")
        xy = rng.integers(0, 200_000, size=(rectangles // cells, 2)) / 1000
        wh = rng.integers(100, 3000, size=(rectangles // cells, 2)) / 1000
        for (x, y), (w, h), layer in zip(xy, wh, rng.integers(1, 12, size=len(xy))):
            c.add(gdstk.rectangle((x, y), (x + w, y + h), layer=int(layer)))
        for _ in range(polygons // cells):
            x0, y0 = rng.integers(0, 200_000, 2) / 1000
            pts = [(x0, y0)]
            for i, (a, b) in enumerate(rng.integers(50, 2000, size=(int(rng.integers(3, 20)), 2)) / 1000):
                px, py = pts[-1]
                pts.append((px + a, py) if i % 2 == 0 else (px, py + b))
            pts.append((x0, pts[-1][1]))
            c.add(gdstk.Polygon(pts, layer=int(rng.integers(1, 12))))
            c.add(gdstk.Label(f"N{rng.integers(0, 1000)}", (x0, y0), layer=int(rng.integers(1, 12))))
        top.add(gdstk.Reference(c, (k * 300, 0)))
    return lib


def best(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rectangles", type=int, default=1_500_000)
    ap.add_argument("--polygons", type=int, default=300_000)
    ap.add_argument("--repeat", type=int, default=2)
    args = ap.parse_args(argv)
    import gdstk

    from extract.layout.gdsii import check_gds_grammar
    from extract.layout.oasis import check_oasis_grammar

    lib = layout(args.rectangles, args.polygons)
    with tempfile.TemporaryDirectory() as tmp:
        files = {"OASIS": os.path.join(tmp, "a.oas"), "OASIS, CBLOCKs": os.path.join(tmp, "b.oas"),
                 "GDSII": os.path.join(tmp, "c.gds")}
        lib.write_oas(files["OASIS"], compression_level=0)
        lib.write_oas(files["OASIS, CBLOCKs"], compression_level=6)
        lib.write_gds(files["GDSII"])
        print(f"load average before: {os.getloadavg()[0]:.2f}")
        print(f"{'file':<16} {'MB':>6} {'records':>11} {'check s':>8} {'gdstk s':>8} {'MB/s':>6}")
        for name, path in files.items():
            with open(path, "rb") as fh:
                data = fh.read()
            if name == "GDSII":
                summary = check_gds_grammar(path, data)
                check = best(lambda: check_gds_grammar(path, data), args.repeat)
                read = best(lambda: gdstk.read_gds(path), args.repeat)
            else:
                summary = check_oasis_grammar(path, data)
                check = best(lambda: check_oasis_grammar(path, data), args.repeat)
                read = best(lambda: gdstk.read_oas(path), args.repeat)
            mb = len(data) / 1e6
            print(f"{name:<16} {mb:>6.1f} {summary.records:>11,} {check:>8.2f} {read:>8.2f} {mb / check:>6.1f}")
        print(f"load average after: {os.getloadavg()[0]:.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
