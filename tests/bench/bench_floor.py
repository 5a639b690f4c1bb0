"""Benchmark: flat extraction against its floor, a minimal pipeline of the same libraries.

Run: ``python3 tests/bench/bench_floor.py [--transistors 100000] [--repeat 1]``

The floor is our own minimal code, written here and not imported from
``extract`` (with the garbage collector paused, as the tool pauses it
while it extracts): gdstk reads and flattens the top cell; every layer's
shapes are merged (an STR-tree self-query, connected components, one
union per cluster of touching shapes); channels are poly ∩ diffusion,
source/drain pieces diffusion − poly; a channel with exactly two pieces
along its edge is a transistor (W half the shared edge, L area / W, type
from the implant under its point); conductors (pieces, poly, metal) are
joined through the cuts that overlap them with positive area, and the
label texts of supply, ground and clock nets join the rails they name;
the nets are the connected components of that graph, and ``np.bincount``
sums per net the wire capacitance (poly over field only), the junction
capacitance (area, field and gate-edge perimeter) and the gate
capacitance.  It has none of the tool's findings, naming, records or
shapes.

Both run on the same flat-placed array of the DYN_NAND3 sample cell (one
GDSII file, every polygon in the top cell), each in a fresh process (so
the peak RSS is that of one run): first the floor, then
``extract_layout`` with ``DYNSHARE_FLAT=1``.  The benchmark checks that
the floor finds as many transistors and nets as the tool (and prints the
summed capacitance of both, which agree), and prints the time and peak
memory of both, their ratio and the load average.  Goal
(issue 12): the tool within 2× the floor measured in the same run.
"""

from __future__ import annotations

import argparse
import math
import os
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
TECH = os.path.join(ROOT, "sample_layouts", "dsk18.toml")

# The floor: no import from dynshare except the tech-file reader.
FLOOR = r"""
import gc, resource, sys, time
gc.disable()  # as the tool does while it extracts: no cycles, millions of objects
import gdstk
import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from extract.techfile import load_tech

tech = load_tech(sys.argv[1])
t0 = time.perf_counter()
lib = gdstk.read_gds(sys.argv[2], unit=1e-6)
top = lib.top_level()[0]
by_key = {}
for p in top.get_polygons(depth=None, include_paths=True):
    by_key.setdefault((p.layer, p.datatype), []).append(p.points)


def components(i, j, n):
    return connected_components(coo_matrix((np.ones(len(i)), (i, j)), shape=(n, n)), directed=False)[1]


def merged(key):
    arrays = by_key.get(key, [])
    if not arrays:
        return np.empty(0, dtype=object)
    counts = [len(a) for a in arrays]
    geoms = shapely.polygons(shapely.linearrings(np.concatenate(arrays), indices=np.repeat(np.arange(len(arrays)), counts)))
    i, j = shapely.STRtree(geoms).query(geoms, predicate="intersects")
    label = components(i, j, len(geoms))
    size = np.bincount(label)
    out = list(geoms[size[label] == 1])
    multi = np.flatnonzero(size[label] > 1)
    order = multi[np.argsort(label[multi], kind="stable")]
    for group in np.split(order, np.flatnonzero(np.diff(label[order])) + 1):
        if len(group):
            out.extend(shapely.get_parts(shapely.union_all(geoms[group])))
    return np.asarray(out, dtype=object)


def parts(geoms):
    flat = shapely.get_parts(geoms)
    flat = flat[shapely.get_type_id(flat) == 3]
    return flat[shapely.area(flat) > 0]


def covered(points, regions):
    hit = np.zeros(len(points), bool)
    if len(regions):
        hit[shapely.STRtree(regions).query(shapely.points(points), predicate="intersects")[0]] = True
    return hit


layers = tech.layers
kind = {name: layer.kind for name, layer in layers.items()}
shapes = {name: merged(layer.gds) for name, layer in layers.items()}
of = lambda k: [n for n in layers if kind[n] == k]
cat = lambda names: np.concatenate([shapes[n] for n in names] + [np.empty(0, dtype=object)])
poly = cat(of("poly"))
pimp, nimp, well = cat(of("pimplant")), cat(of("nimplant")), cat(of("nwell"))

geoms, layer_of, is_piece, is_pmos = [], [], [], []
channels, ends, widths, lengths, ch_pmos, poly_in_diff = [], [], [], [], [], []
for name in of("diffusion"):
    diff = shapes[name]
    di, pj = shapely.STRtree(poly).query(diff, predicate="intersects")
    overlap = shapely.intersection(diff[di], poly[pj])
    ch = parts(overlap)
    poly_in_diff.append((pj, shapely.area(overlap), shapely.length(shapely.intersection(shapely.boundary(poly[pj]), diff[di]))))
    cover = np.array([shapely.MultiPolygon()] * len(diff), dtype=object)
    order = np.argsort(di, kind="stable")
    ids, inv = np.unique(di[order], return_inverse=True)
    cover[ids] = shapely.multipolygons(poly[pj][order], indices=inv)
    pc = parts(shapely.difference(diff, cover))
    ci, pi = shapely.STRtree(pc).query(ch, predicate="intersects")
    shared = shapely.length(shapely.intersection(shapely.boundary(ch[ci]), shapely.boundary(pc[pi])))
    keep = shared > 0.0005
    ci, pi, shared = ci[keep], pi[keep], shared[keep]
    order = np.lexsort((pi, ci))
    ci, pi, shared = ci[order], pi[order], shared[order]
    good = np.flatnonzero(np.bincount(ci, minlength=len(ch)) == 2)
    first = np.searchsorted(ci, good)
    w = (shared[first] + shared[first + 1]) / 2
    pts = shapely.get_coordinates(shapely.point_on_surface(ch[good]))
    pc_pts = shapely.get_coordinates(shapely.point_on_surface(pc))
    in_p = lambda q: covered(q, pimp) | (~covered(q, nimp) & covered(q, well))
    base = len(geoms)
    channels.append(pts)
    ends.append(np.stack([pi[first], pi[first + 1]], 1) + base)
    widths.append(w)
    lengths.append(shapely.area(ch[good]) / w)
    ch_pmos.append(in_p(pts))
    geoms.extend(pc)
    layer_of += [name] * len(pc)
    is_piece += [True] * len(pc)
    is_pmos.extend(in_p(pc_pts))
for name in of("poly") + of("metal"):
    geoms.extend(shapes[name])
    layer_of += [name] * len(shapes[name])
    is_piece += [False] * len(shapes[name])
    is_pmos += [False] * len(shapes[name])
geoms, layer_of = np.asarray(geoms, dtype=object), np.asarray(layer_of)
is_piece, is_pmos = np.asarray(is_piece), np.asarray(is_pmos)
n = len(geoms)

# conductors joined through cuts: rows are conductors, then cut shapes, then one node per rail name
rows, cols, offset = [], [], n
for name in of("cut"):
    cuts = shapes[name]
    for joined in layers[name].joins:
        idx = np.flatnonzero(layer_of == joined)
        shapely.prepare(geoms[idx])
        g, c = shapely.STRtree(cuts).query(geoms[idx], predicate="intersects")
        keep = ~shapely.touches(geoms[idx][g], cuts[c])  # positive-area overlap
        rows.append(idx[g[keep]])
        cols.append(c[keep] + offset)
    offset += len(cuts)
rails, by_layer = {}, {}
for lab in top.get_labels(depth=None):
    if tech.role_of(lab.text) != "signal":
        for name, layer in layers.items():
            if (lab.layer, lab.texttype) in layer.labels:
                by_layer.setdefault(name, []).append((lab.origin, rails.setdefault(lab.text, offset + len(rails))))
for name, labs in by_layer.items():
    idx = np.flatnonzero(layer_of == name)
    li, gi = shapely.STRtree(geoms[idx]).query(shapely.points([o for o, _ in labs]), predicate="intersects")
    rows.append(idx[gi])
    cols.append(np.array([node for _, node in labs], dtype=np.intp)[li])
net = components(np.concatenate(rows), np.concatenate(cols), offset + len(rails))[:n]
n_nets = len(np.unique(net))

# per-net sums (fF): wire and junction area/perimeter, gate area
area, perim = shapely.area(geoms), shapely.length(geoms)
gate_edge = np.zeros(n)
dev = np.concatenate(ends)
w, l = np.concatenate(widths), np.concatenate(lengths)
np.add.at(gate_edge, dev.ravel(), np.repeat(w, 2))
wire = np.zeros(n)
junction = np.zeros(n)
field_area, field_perim = area.copy(), perim.copy()  # poly over field only
first_poly = np.flatnonzero(np.isin(layer_of, of("poly")))[:1]
for pj, a, p in poly_in_diff:
    field_area -= np.bincount(pj + first_poly, a, n) if len(first_poly) else 0
    field_perim -= np.bincount(pj + first_poly, p, n) if len(first_poly) else 0
for name in of("poly") + of("metal"):
    m = layer_of == name
    wire[m] = layers[name].area * field_area[m] + layers[name].fringe * field_perim[m]
for t, pm in (("nmos", False), ("pmos", True)):
    m = is_piece & (is_pmos == pm)
    mos = tech.mos[t]
    junction[m] = mos.cj * area[m] + mos.cjsw * np.maximum(perim[m] - gate_edge[m], 0) + mos.cjswg * gate_edge[m]
gate_pts = np.concatenate(channels)
poly_idx = np.flatnonzero(np.isin(layer_of, of("poly")))
pi, gi = shapely.STRtree(geoms[poly_idx]).query(shapely.points(gate_pts), predicate="intersects")
gate_net = np.zeros(len(gate_pts), dtype=np.intp)
gate_net[pi] = net[poly_idx[gi]]
pmos = np.concatenate(ch_pmos)
cox = np.where(pmos, tech.mos["pmos"].cox, tech.mos["nmos"].cox)
cap = (np.bincount(net, wire, n_nets) + np.bincount(net, junction, n_nets)
       + np.bincount(gate_net, cox * w * l, n_nets))
dt = time.perf_counter() - t0
print(len(w), n_nets, f"{cap.sum():.6f}", dt, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""

TOOL = r"""
import os, resource, sys, time
os.environ["DYNSHARE_FLAT"] = "1"
from extract.layout.pipeline import extract_layout
from extract.techfile import load_tech
tech = load_tech(sys.argv[1])
t0 = time.perf_counter()
c = extract_layout(sys.argv[2], tech)
dt = time.perf_counter() - t0
caps = sum(n.cap.wire + n.cap.junction_area + n.cap.junction_sidewall + n.cap.junction_gate_edge + n.cap.gate
           for n in c.nets.values())
print(len(c.devices), len(c.nets), f"{caps:.6f}", dt, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""


def run(code: str, path: str) -> tuple[int, int, float, float, float]:
    """Run one child; its transistors, nets, summed capacitance (fF), seconds and peak MB."""
    env = dict(os.environ, PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", ""))
    out = subprocess.run([sys.executable, "-c", code, TECH, path], capture_output=True, text=True, cwd=ROOT,
                         env=env, check=True).stdout.split()
    return int(out[0]), int(out[1]), float(out[2]), float(out[3]), float(out[4])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--transistors", type=int, default=100000, help="size of the array (default 100000)")
    ap.add_argument("--repeat", type=int, default=1, help="runs of each, floor and tool taking turns; the best of each is kept (default 1)")
    ap.add_argument("--gds", help="use this flat array file instead of writing one")
    args = ap.parse_args(argv)
    sys.path.insert(0, ROOT)
    from sample_layouts.make_samples import nand3_array

    with tempfile.TemporaryDirectory() as tmp:
        path = args.gds
        if path is None:
            cells = max(1, round(args.transistors / 8))
            nx = max(1, int(math.sqrt(cells)))
            path = os.path.join(tmp, "flat.gds")
            nand3_array(nx, math.ceil(cells / nx), flatten=True).write_gds(path)
        runs = [(run(FLOOR, path), run(TOOL, path)) for _ in range(args.repeat)]  # interleaved: load drifts
        floor = min((f for f, _ in runs), key=lambda r: r[3])
        tool = min((t for _, t in runs), key=lambda r: r[3])
    load = os.getloadavg()
    print(f"{'':6} {'transistors':>12} {'nets':>8} {'C sum fF':>14} {'time s':>8} {'peak MB':>8}")
    for name, r in (("floor", floor), ("tool", tool)):
        print(f"{name:6} {r[0]:>12} {r[1]:>8} {r[2]:>14.3f} {r[3]:>8.2f} {r[4]:>8.0f}")
    print(f"tool / floor: time {tool[3] / floor[3]:.2f}x, memory {tool[4] / floor[4]:.2f}x "
          f"(goal: time within 2x); load average {load[0]:.2f} {load[1]:.2f} {load[2]:.2f}")
    same = floor[:2] == tool[:2]
    print("same transistors and nets" if same else "DIFFERENT transistor or net counts")
    return 0 if same else 1


if __name__ == "__main__":
    raise SystemExit(main())
