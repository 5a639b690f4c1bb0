"""Accuracy of the analysis against simulation with the foundry models.

For the ten sky130 stages of bench_simulate.py and each corner: the tech file
is characterised (``dynshare characterize``, cached), every stage is
analysed (the foundry-model path: device charges measured from the models),
and its worst pattern per input-arrival case is simulated (``--simulate``
machinery, keeper tied off like the analysis).  Prints, per stage, corner and
case, the analysis' final voltage, the simulated extreme within the
evaluation window and their difference (n-type: positive = optimistic), the
level-1 model's value for comparison, and the verdicts; then the largest
errors.  Run by hand::

    python3 tests/bench/bench_accuracy.py [--corners tt ss ff] [--stages NAND3W ...] [--temp C]

(``--temp``: the tech files characterised and the stages simulated at that
temperature, ``[models] temperature``; 27 °C without it.)
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
sys.path[:0] = [ROOT, os.path.join(ROOT, "tests", "helpers"), HERE]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--corners", nargs="+", default=["tt", "ss", "ff"])
    ap.add_argument("--stages", nargs="*")
    ap.add_argument("--temp", type=float, default=None, help="temperature, C (default 27)")
    args = ap.parse_args(argv)
    import sky130_stages as bs
    from sky130_stages import characterised_techs

    from analyze.search.analysis import analyse_circuit
    from analyze.simulate.run import simulate_stage
    from extract.techfile import load_tech
    from dataclasses import replace

    tmp = tempfile.mkdtemp(prefix="bench-accuracy-")
    techs = characterised_techs(args.corners, tmp, args.temp)
    rows = []
    print(f"{'stage':<8} {'corner':<6} {'case':<8} {'analysis':>8} {'sim':>7} {'error':>8} {'level-1':>7} "
          f"{'an':>4} {'sim':>4}   s")
    for corner in args.corners:
        tech = load_tech(techs[corner])
        level1 = replace(tech, models=None)
        for name, circuit in bs.stage_circuits(tech, tmp, args.stages):
            t0 = time.perf_counter()
            _, (r,) = analyse_circuit(circuit, tech)
            dt = time.perf_counter() - t0
            _, (r1,) = analyse_circuit(circuit, level1)
            from analyze.search.foundry import foundry_worst_case
            from analyze.search.cases import arrival_cases
            for case in arrival_cases(circuit, r.stage, None):
                from analyze.search.analysis import iter_counted_patterns
                fo = foundry_worst_case(circuit, r.stage, tech, None, list(iter_counted_patterns(circuit, r.stage, tech)),
                                        cases=(case,))
                if fo.worst is None:
                    continue
                sim = [s for s in simulate_stage(circuit, replace(r, worst_case=fo.worst), tech, None, [corner],
                                                 count=1) if s.case == case][0]
                v_sim = sim.v_min_without_keeper if sim.v_min_without_keeper is not None else sim.v_min
                sign = 1 if r.stage.polarity == "n" else -1
                err = sign * (fo.worst.v_final - v_sim)
                an = "PASS" if sign * (fo.worst.v_final - fo.threshold_v) >= tech.guard else "FAIL"
                sv = "PASS" if sign * (v_sim - sim.threshold_v) >= tech.guard else "FAIL"
                rows.append((name, corner, case, err, an == sv))
                print(f"{name:<8} {corner:<6} {case:<8} {fo.worst.v_final:8.3f} {v_sim:7.3f} {err:+8.4f} "
                      f"{r1.worst_case.v_final if r1.worst_case else float('nan'):7.3f} {an:>4} {sv:>4} {dt:5.2f}")
    worst_opt = max(rows, key=lambda r: r[3])
    worst_pes = min(rows, key=lambda r: r[3])
    print(f"\n{len(rows)} stage/corner/case results; most optimistic {worst_opt[3] * 1000:+.1f} mV "
          f"({worst_opt[0]} {worst_opt[1]} {worst_opt[2]}), most pessimistic {worst_pes[3] * 1000:+.1f} mV "
          f"({worst_pes[0]} {worst_pes[1]} {worst_pes[2]}); verdicts agree in {sum(r[4] for r in rows)} of {len(rows)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
