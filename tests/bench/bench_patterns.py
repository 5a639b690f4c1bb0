"""Benchmark: every counted pattern of a 12-input stage, dynshare against ngspice.

Run ``python tests/bench/bench_patterns.py [--batch N] [--step NS]``.  The stage is a
footed domino OR of four 3-high stacks (12 inputs, 7**4 = 2401 counted
patterns) with junctions on every node; then the same stage with one
secondary-precharged node, on a sample of its patterns.

* dynshare: :func:`analyze.search.analysis.iter_counted_patterns` from a cold
  start (model built, every pattern evaluated, one result per pattern;
  final voltages are solved once per distinct set of shared nodes).
* ngspice: one level-1 transient per pattern (deck of
  tests/analyze/spice_reference.py).  To be fair to the simulator, the
  patterns run in batches of N (default 200) per ngspice process, the
  inputs changed with ``alter`` between transients, so process start-up is
  paid once per batch, not once per pattern.  Input nets drive only gates,
  which carry no capacitance in level 1 without ``tox``, so they need no
  ``.ic`` of their own.

Prints both times, the ratio and the largest |v_final − v(X)|, then the
worst-case search times of the 16- and 24-leg OR-mux with and without a
one-hot constraint on the selects, then the wide-OR figures of issue 12:
64-leg footed and footless domino ORs (128 inputs), the select next to X or
the data input next to X, with and without one-hot selects: worst case,
count and the whole check including flags, CPU seconds (goal: under 1 s).
``--wide-only`` skips ngspice and prints only these.
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path[:0] = [os.path.join(HERE, "..", "helpers"), os.path.join(HERE, "..", "..")]

from analyze.search.analysis import analyze_stage, iter_counted_patterns  # noqa: E402
from analyze.search.constraints import parse_constraints, stage_blocks  # noqa: E402
from analyze.search.patterns import bind_blocks  # noqa: E402
from analyze.physics.sharing import build_model  # noqa: E402
from analyze.search.worstcase import worst_case  # noqa: E402
from sharing_circuits import domino, make_tech, mux  # noqa: E402
from spice_reference import spice_names, transient_deck  # noqa: E402

T_STOP_NS = 80.0


def twelve_input_stage(tech, secondary=()):
    ev, caps = [], {"X": dict(linear=9.0, nmos=(2.0, 6.0, 4.0), pmos=(0.9, 3.0, 1.3)),
                    "FOOT": dict(linear=0.8, nmos=(1.2, 3.0, 8.0))}
    for i in range(4):
        a, b = f"a{i}", f"b{i}"
        ev += [(f"MA{i}", "X", f"A{i}", a), (f"MB{i}", a, f"B{i}", b), (f"MC{i}", b, f"C{i}", "FOOT")]
        caps[a] = dict(linear=0.6 + 0.4 * i, nmos=(0.4, 1.2, 2.0))
        caps[b] = dict(linear=1.5 - 0.3 * i, nmos=(0.4, 1.2, 2.0), pmos=(0.3, 1.6, 0.5) if i == 1 else None)
    return domino(tech, ev, caps, secondary=secondary)


def _batch_deck(circuit, stage, tech, patterns, step_ns: float) -> str:
    """One deck running a transient per pattern, inputs set with ``alter``."""
    base = transient_deck(circuit, stage, tech, patterns[0], t_stop_ns=T_STOP_NS, t_step_ns=step_ns)
    node = spice_names(circuit)
    by_node = {m.group(2): m.group(1) for m in re.finditer(r"^(Vh\d+) (\S+) 0 DC", base, re.M)}
    sources = {net: by_node[node[net]] for net in patterns[0]}
    head = base[: base.index(".control")]
    head = re.sub(r" v\((%s)\)=\S+" % "|".join(re.escape(node[n]) for n in patterns[0]), "", head)
    lines = [head.rstrip("\n"), ".control"]
    for k, pat in enumerate(patterns):
        lines += [f"alter {sources[n]} = {tech.vdd * v:g}" for n, v in sorted(pat.items())]
        lines += [f"tran {step_ns:g}n {T_STOP_NS:g}n uic",
                  f"meas tran vx{k} find v({stage.dynamic_node}) at={T_STOP_NS:g}n",
                  "destroy all"]
    lines += [".endc", ".end", ""]
    return "\n".join(lines)


def run_ngspice(circuit, stage, tech, patterns, batch: int, step_ns: float) -> list[float]:
    values = []
    with tempfile.TemporaryDirectory() as tmp:
        for start in range(0, len(patterns), batch):
            chunk = patterns[start:start + batch]
            path = os.path.join(tmp, "deck.cir")
            with open(path, "w") as fh:
                fh.write(_batch_deck(circuit, stage, tech, chunk, step_ns))
            out = subprocess.run(["ngspice", "-b", path], capture_output=True, text=True, cwd=tmp).stdout
            got = {int(m.group(1)): float(m.group(2))
                   for m in re.finditer(r"^\s*vx(\d+)\s*=\s*([-+0-9.eE]+)", out, re.M)}
            if len(got) != len(chunk):
                raise SystemExit(f"ngspice returned {len(got)} of {len(chunk)} values:\n{out[-2000:]}")
            values += [got[k] for k in range(len(chunk))]
    return values


def _regimes(results) -> dict[str, int]:
    out: dict[str, int] = {}
    for r in results:
        out[r.regime] = out.get(r.regime, 0) + 1
    return dict(sorted(out.items()))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--batch", type=int, default=200, help="transients per ngspice process")
    ap.add_argument("--step", type=float, default=0.1, help="ngspice .tran step, ns")
    ap.add_argument("--every", type=int, default=7, help="pattern sampling of the second stage")
    ap.add_argument("--wide-only", action="store_true", help="only the wide-OR figures")
    ap.add_argument("--legs", type=int, default=64, help="legs of the wide ORs")
    args = ap.parse_args()
    tech = make_tech()
    if args.wide_only:
        wide_ors(tech, args.legs)
        return
    circuit, stage = twelve_input_stage(tech)

    t0 = time.perf_counter()
    results = list(iter_counted_patterns(circuit, stage, tech))
    t_dyn = time.perf_counter() - t0
    print(f"12-input stage: {len(results)} counted patterns, "
          f"{len({tuple(r.shared_nodes) for r in results})} distinct sets of shared nodes")
    print(f"dynshare: {t_dyn * 1e3:.1f} ms for all ({t_dyn / len(results) * 1e6:.1f} us a pattern)")

    t0 = time.perf_counter()
    spice = run_ngspice(circuit, stage, tech, [r.inputs for r in results], args.batch, args.step)
    t_ng = time.perf_counter() - t0
    print(f"ngspice:  {t_ng:.1f} s for all ({t_ng / len(results) * 1e3:.2f} ms a transient, "
          f"batches of {args.batch} with alter, step {args.step:g} ns)")
    print(f"ratio:    dynshare {t_ng / t_dyn:.0f}x faster (target >= 1000x)")
    worst = max(range(len(results)), key=lambda k: abs(results[k].v_final - spice[k]))
    dv = abs(results[worst].v_final - spice[worst])
    print(f"largest |dV|: {dv * 1e3:.3f} mV (target < 10 mV) at {results[worst].inputs}")
    print(f"regimes: {_regimes(results)}")

    # With a secondary-precharged node the rule "a precharged node keeps its
    # charge until X falls to the pass limit" is a bound: where that node can
    # feed a discharged node without going through X, the simulator ends higher.
    circuit, stage = twelve_input_stage(tech, secondary=("b1",))
    results = list(iter_counted_patterns(circuit, stage, tech))[:: args.every]
    spice = run_ngspice(circuit, stage, tech, [r.inputs for r in results], args.batch, args.step)
    diff = [sp - r.v_final for r, sp in zip(results, spice)]
    print(f"with b1 precharged ({len(results)} patterns, every {args.every}th): v(X) - v_final "
          f"from {min(diff) * 1e3:.3f} to {max(diff) * 1e3:.3f} mV (the check never optimistic "
          f"when the lower end is above -10 mV); regimes {_regimes(results)}")

    for legs in (16, 24):
        circuit, stage = mux(tech, legs)
        selects = [f"S{i:02d}" for i in range(legs)]
        for label, cons in (("free", None), ("one-hot", parse_constraints({"one_hot": [selects]}))):
            t0 = time.perf_counter()
            model = build_model(circuit, stage, tech)
            found = worst_case(model, bind_blocks(model, stage_blocks(cons, model.inputs)))
            t_wc = time.perf_counter() - t0
            t0 = time.perf_counter()
            res = analyze_stage(circuit, stage, tech, cons)
            t_all = time.perf_counter() - t0
            print(f"{legs}-leg mux, {label:7s} selects: worst case {t_wc * 1e3:6.1f} ms; whole check "
                  f"(count, flags) {t_all * 1e3:6.1f} ms; v_final {model.to_volts(found.u_final):.4f} V, "
                  f"{res.status}, {res.counted_patterns} counted patterns, {len(res.flags)} flags")
    wide_ors(tech, args.legs)


def wide_or(tech, legs, footed, d_first):
    """Legs X – T_i – m_i – B_i – rail; (T, B) = (D, S) when ``d_first``."""
    ev, caps = [], {"X": dict(linear=6.0, nmos=(0.5 * legs, 1.5 * legs, 1.0 * legs), pmos=(0.6, 2.0, 1.0))}
    rail = "FOOT" if footed else "VSS"
    for i in range(legs):
        top, bot = (f"D{i:02d}", f"S{i:02d}") if d_first else (f"S{i:02d}", f"D{i:02d}")
        ev.append((f"MT{i:02d}", "X", top, f"m{i:02d}"))
        ev.append((f"MB{i:02d}", f"m{i:02d}", bot, rail))
        caps[f"m{i:02d}"] = dict(linear=0.2 + 0.05 * ((7 * i) % 11), nmos=(0.5, 1.5, 2.0))
    return domino(tech, ev, caps, footed=footed)


def wide_ors(tech, legs: int) -> None:
    from analyze.search.patterns import count_counted

    print(f"{legs}-leg domino ORs ({2 * legs} inputs), CPU ms")
    print(f"{'footed':>8} {'next to X':>9} {'selects':>8} {'worst':>7} {'count':>7} {'check':>8}  result")
    worst = 0.0
    for footed in (True, False):
        for d_first in (False, True):
            for one_hot in (False, True):
                circuit, stage = wide_or(tech, legs, footed, d_first)
                cons = parse_constraints({"one_hot": [[f"S{i:02d}" for i in range(legs)]]}) if one_hot else None
                model = build_model(circuit, stage, tech)
                choices = bind_blocks(model, stage_blocks(cons, model.inputs))
                t0 = time.process_time()
                worst_case(model, choices)
                t1 = time.process_time()
                count_counted(model, choices)
                t2 = time.process_time()
                res = analyze_stage(circuit, stage, tech, cons)
                t3 = time.process_time()
                worst = max(worst, t3 - t2)
                print(f"{str(footed):>8} {'D' if d_first else 'S':>9} {'one-hot' if one_hot else 'free':>8} "
                      f"{(t1 - t0) * 1e3:7.1f} {(t2 - t1) * 1e3:7.1f} {(t3 - t2) * 1e3:8.1f}  {res.status}, "
                      f"{len(res.flags)} flags{' (greedy)' if res.flag_note else ''}", flush=True)
    print(f"slowest whole check {worst:.2f} s (goal < 1 s)")


if __name__ == "__main__":
    main()
