"""Benchmark: dynamic-stage recognition on a large flat cell.

Run ``python tests/bench/bench_recognize.py [DEVICES]``; prints the time to
recognise a cell of about DEVICES devices (default 100 000): domino NAND3
stages with keeper and inverter, footless domino chains, static NAND2s and
one long nmos pass-transistor chain (a large channel-connected component);
each recognised on the whole circuit at once and by islands (the default,
:mod:`analyze.stages.islands`).
"""

from __future__ import annotations

import sys
import time

from extract.circuit import Circuit, Device, Net
from extract.tech import NetRoles, Tech

from analyze.stages.recognize import find_stages


def build(devices: int, tech: Tech) -> Circuit:
    rows: list[tuple] = []
    k = 0
    while len(rows) < devices:
        s = f"_{k}"
        rows += [
            ("MP" + s, "pmos", "X" + s, "CLK", "VDD"),
            ("MK" + s, "pmos", "X" + s, "O" + s, "VDD"),
            ("MA" + s, "nmos", "X" + s, "A" + s, "a" + s),
            ("MB" + s, "nmos", "a" + s, "B" + s, "b" + s),
            ("MC" + s, "nmos", "b" + s, "C" + s, "f" + s),
            ("MF" + s, "nmos", "f" + s, "CLK", "VSS"),
            ("MIN" + s, "nmos", "O" + s, "X" + s, "VSS"),
            ("MIP" + s, "pmos", "O" + s, "X" + s, "VDD"),
            # footless stage fed by O
            ("MQ" + s, "pmos", "Y" + s, "CLK", "VDD"),
            ("MQA" + s, "nmos", "Y" + s, "O" + s, "q" + s),
            ("MQB" + s, "nmos", "q" + s, "D" + s, "VSS"),
            # static NAND2
            ("MSA" + s, "pmos", "Z" + s, "A" + s, "VDD"),
            ("MSB" + s, "pmos", "Z" + s, "D" + s, "VDD"),
            ("MSN" + s, "nmos", "Z" + s, "A" + s, "z" + s),
            ("MSM" + s, "nmos", "z" + s, "D" + s, "VSS"),
            # one link of a long pass-transistor chain
            ("MT" + s, "nmos", f"t_{k}", "E" + s, f"t_{k + 1}"),
        ]
        k += 1
    devs = [Device(n, t, d, g, src, 1.0, 0.18) for n, t, d, g, src in rows]
    names = {x for d in devs for x in (d.drain, d.gate, d.source)}
    nets = {n: Net(n, role=tech.role_of(n)) for n in sorted(names)}
    return Circuit("big", nets, sorted(devs, key=lambda d: d.name))


def _tech(clock: tuple[str, ...]) -> Tech:
    return Tech("dsk18", 1.8, NetRoles(("VDD",), ("VSS",), clock), {}, {})


def main(devices: int = 100_000) -> None:
    for tech in (_tech(("CLK",)), _tech(())):
        c = build(devices, tech)
        for islands, how in ((False, "whole circuit"), (None, "by islands (default)")):
            t0 = time.perf_counter()
            r = find_stages(c, tech, islands=islands)
            dt = time.perf_counter() - t0
            print(
                f"{len(c.devices)} devices, clocks {r.clocks} "
                f"({'inferred' if r.clock_inferred else 'declared'}), {how}: "
                f"{len(r.stages)} stages, {len(r.findings)} findings in {dt:.2f} s"
            )


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100_000)
