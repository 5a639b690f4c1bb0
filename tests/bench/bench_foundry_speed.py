"""Speed of the foundry-model check against simulating every pattern.

For the ten sky130 stages of our own (tests/helpers/sky130_stages.py) at one
corner: the whole analysis of the stage (worst case over every counted
pattern and arrival case with the models' device charges, threshold, count,
flags) with its device tables measured afresh (an empty table cache) and
with them cached (the median of ``--warm-runs``), against simulating every
counted pattern in every
arrival case with ngspice and the foundry models (``--simulate``'s decks,
keeper in and tied off).  The simulation time is measured on up to
``--sample`` distinct patterns and scaled to all counted patterns × cases
(ngspice time is linear in the cases once each deck is full; said in the
output).

With ``--shipped`` the simulation is also estimated with the model library
as the foundry ships it (``.lib sky130.lib.spice CORNER``) in place of
the pruned file ``--simulate`` loads: one ngspice run of one nmos's
operating point measures the load with each, and every case of a stage is
counted as one run with the shipped library (its load once, then each
case's simulated time less the pruned file's load).  Run by hand::

    python3 tests/bench/bench_foundry_speed.py [--corner tt] [--sample 8] [--stages NAND2 ...] [--shipped]
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


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--corner", default="tt")
    ap.add_argument("--sample", type=int, default=8)
    ap.add_argument("--stages", nargs="*")
    ap.add_argument("--warm-runs", type=int, default=5, help="warm checks per stage; the median is printed")
    ap.add_argument("--wide", type=int, nargs="*", default=[16, 24],
                    help="legs of the wide ORs timed after the ten stages (2 inputs a leg; not simulated)")
    ap.add_argument("--shipped", action="store_true",
                    help="also estimate simulating with the library as shipped (one ngspice run of ~30-45 s)")
    args = ap.parse_args(argv)
    import sky130_stages as bs

    from analyze.search.cases import arrival_cases
    from analyze.simulate.run import simulate_stage
    from extract.techfile import load_tech

    tmp = tempfile.mkdtemp(prefix="bench-foundry-speed-")
    tech = load_tech(bs.characterised_techs([args.corner], tmp)[args.corner])
    print(f"corner {args.corner}; load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    loads = library_loads(tech, args.corner) if args.shipped else None
    if loads:
        print(f"ngspice, one nmos operating point: {loads[0]:.2f} s with the library as shipped, "
              f"{loads[1]:.2f} s with the pruned file")
    print(f"{'stage':<8} {'patterns':>8} {'cases':>5} {'check cold':>10} {'check warm':>10} "
          f"{'sim/case':>8} {'sim all (est.)':>14} {'× cold':>8} {'× warm':>8}"
          + (f" {'shipped (est.)':>14} {'× warm':>8}" if loads else ""))
    saved = os.environ.get("DYNSHARE_CACHE")
    for name, circuit in bs.stage_circuits(tech, tmp, args.stages):
        cold, warm, r = cold_and_warm(circuit, tech, tmp, args.warm_runs)
        if saved is None:
            os.environ.pop("DYNSHARE_CACHE", None)
        else:
            os.environ["DYNSHARE_CACHE"] = saved
        n_cases = len(arrival_cases(circuit, r.stage, None))
        patterns = r.counted_patterns or 0
        t0 = time.perf_counter()
        sims = simulate_stage(circuit, r, tech, None, [args.corner], count=args.sample)
        sim_time = time.perf_counter() - t0
        per_case = sim_time / max(1, len(sims))
        everything = per_case * patterns * n_cases
        shipped = ""
        if loads:
            # one run with the shipped library: its load once, then each
            # case's time less the pruned file's load
            one_run = loads[0] + max(0.0, per_case - loads[1]) * patterns * n_cases
            shipped = f" {one_run:>13.0f}s {one_run / warm:>8.0f}"
        print(f"{name:<8} {patterns:>8} {n_cases:>5} {cold:>9.2f}s {warm:>9.3f}s {per_case:>7.2f}s "
              f"{everything:>13.0f}s {everything / cold:>8.0f} {everything / warm:>8.0f}{shipped}", flush=True)
    wide(args, tech, tmp)
    return 0


def library_loads(tech, corner):
    """Seconds of one ngspice run of one nmos's operating point with the
    model library as shipped (``.lib LIBRARY CORNER``) and with the pruned
    file of the same corner (its ``.include``): (shipped, pruned)."""
    from analyze.simulator.instances import transistor_line
    from analyze.simulator.models import prune_models
    from analyze.simulator.ngspice import deck, run_deck

    models = tech.models
    pruned = prune_models(models, corner, [models.nmos])
    line = transistor_line("1", ("d", "g", "0", "0"), models.nmos, pruned.kinds.get(models.nmos.lower(), "subckt"),
                           pruned.scale, 1.0, 0.15)
    circuit = [f"Vd d 0 {tech.vdd}", f"Vg g 0 {tech.vdd}", line]
    options = [f".temp {models.temperature_c:g}"] + ([f".option scale={pruned.scale:.6g}"]
                                                     if pruned.scale is not None else [])
    shipped = ((None, [f'.lib "{os.path.abspath(models.library)}" {corner}']) if corner else
               (os.path.abspath(models.library), []))
    out = []
    for include, head in (shipped, (pruned.path, [])):
        text = deck("bench: model library load", include, circuit, ["op", "print i(Vd)"], head + options)
        t0 = time.perf_counter()
        run_deck(text, "model library load", timeout=900)
        out.append(time.perf_counter() - t0)
    return tuple(out)


def cold_and_warm(circuit, tech, tmp, warm_runs):
    """Seconds of the whole check with an empty cache for the device tables
    (the pruned models too; DYNSHARE_CACHE is left pointing at it), the
    median of ``warm_runs`` checks after it, and the last result."""
    from analyze.search.analysis import analyse_circuit

    os.environ["DYNSHARE_CACHE"] = tempfile.mkdtemp(prefix="cold-", dir=tmp)
    t0 = time.perf_counter()
    analyse_circuit(circuit, tech)
    cold = time.perf_counter() - t0
    runs = []
    for _ in range(warm_runs):
        t0 = time.perf_counter()
        _, (r,) = analyse_circuit(circuit, tech)
        runs.append(time.perf_counter() - t0)
    return cold, sorted(runs)[len(runs) // 2], r


def wide(args, tech, tmp) -> None:
    """The whole check of ORs of 2-high legs too wide to simulate (3^legs −
    1 counted patterns): the foundry-model worst case over the level-1
    model's ranked patterns and the bound that proves the verdict."""
    import sky130_stages as bs

    from extract.netlist.reader import read_schematic

    if not args.wide:
        return
    print(f"{'wide OR':<8} {'inputs':>8} {'check cold':>10} {'check warm':>10}  verdict")
    for legs in args.wide:
        path = os.path.join(tmp, f"OR{legs}x2.sp")
        with open(path, "w") as fh:
            fh.write(bs.netlist(f"OR{legs}x2", *bs.wide_or(legs)))
        circuit = read_schematic(path, tech)
        cold, warm, r = cold_and_warm(circuit, tech, tmp, args.warm_runs)
        print(f"{'OR' + str(legs) + 'x2':<8} {2 * legs:>8} {cold:>9.2f}s {warm:>9.3f}s  {r.status}, "
              f"{r.counted_patterns} counted patterns; {r.physics_note}", flush=True)


if __name__ == "__main__":
    sys.exit(main())
