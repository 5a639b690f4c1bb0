"""Benchmark: schematic–layout matching time against device count.

Run ``python tests/bench/bench_match.py [--legs 4,16,64,256]``; for each size it
builds a domino OR-mux with that many legs (select and data device per leg,
shared footer, precharge) driving a chain of inverters whose inner nodes are
unlabelled, and matches it against a copy with shuffled devices, renamed
internal nets and swapped drain/source (as a layout extractor would give).
Also times the worst kind of cell for the matcher: identical legs with the
same gates (a symmetry that colour refinement cannot break, so VF2 runs).
Targets: tens of devices in milliseconds, hundreds well under a second.
"""

from __future__ import annotations

import argparse
import random
import time

from extract.circuit import Circuit, Device, Net

from analyze.compare.match import match_circuits


def mux(legs: int, chain: int, rename, same_gates: bool = False, seed: int = 0) -> Circuit:
    rng = random.Random(seed)
    nets: dict[str, Net] = {}
    devs: list[Device] = []

    def net(name: str, port: bool) -> str:
        nets.setdefault(name, Net(name, labelled=port, labels=(name,) if port else ()))
        return name

    for p in ("X", "VSS", "VDD", "CLK", "OUT"):
        net(p, True)
    foot = net(rename("foot"), False)
    for i in range(legs):
        mid = net(rename(f"m{i}"), False)
        s, d = ("S", "D") if same_gates else (f"S{i}", f"D{i}")
        net(s, True)
        net(d, True)
        devs.append(Device(f"MS{i}", "nmos", "X", s, mid, 1.0, 0.18))
        devs.append(Device(f"MD{i}", "nmos", mid, d, foot, 1.0, 0.18))
    devs.append(Device("MF", "nmos", foot, "CLK", "VSS", 2.0, 0.18))
    devs.append(Device("MP", "pmos", "X", "CLK", "VDD", 1.0, 0.18))
    prev = "X"
    for k in range(chain):
        out = "OUT" if k == chain - 1 else net(rename(f"c{k}"), False)
        devs.append(Device(f"IN{k}", "nmos", out, prev, "VSS", 0.6, 0.18))
        devs.append(Device(f"IP{k}", "pmos", out, prev, "VDD", 1.2, 0.18))
        prev = out
    for d in devs:
        if rng.random() < 0.5:
            d.drain, d.source = d.source, d.drain
    rng.shuffle(devs)
    return Circuit("MUX", nets, devs, source="bench.sp")


def timed(legs: int, chain: int, same_gates: bool) -> tuple[int, float]:
    sch = mux(legs, chain, lambda n: n, same_gates, seed=1)
    lay = mux(legs, chain, lambda n: "net_" + n, same_gates, seed=2)
    best = float("inf")
    for _ in range(3):
        t = time.perf_counter()
        match_circuits(sch, lay)
        best = min(best, time.perf_counter() - t)
    return len(sch.devices), best


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--legs", default="4,16,64,256")
    args = ap.parse_args(argv)
    print(f"{'cell':<28}{'devices':>8}{'time ms':>10}")
    for legs in (int(x) for x in args.legs.split(",")):
        n, t = timed(legs, max(2, legs // 2), same_gates=False)
        print(f"{'mux, ' + str(legs) + ' legs':<28}{n:>8}{t * 1e3:>10.1f}")
    for legs in (2, 4, 8):
        n, t = timed(legs, 2, same_gates=True)
        print(f"{'identical legs, ' + str(legs):<28}{n:>8}{t * 1e3:>10.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
