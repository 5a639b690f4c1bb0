"""The long fuzz run, by hand: ``python3 tests/fuzz/run_fuzz.py [--cases N] [--start S]
[--kind K ...] [--seed S] [--jobs J] [--slowest N]``.

Runs N cases of each kind (default 2000, so 12 000 in all) from seed S
under the CI harness's caps and prints, per kind, the runs by exit status,
the time per case and every broken promise with its seed (and, with
``--slowest N``, the N slowest cases).  ``--seed``
replays one case and prints its command line and standard error.  Exit
status 1 when any promise broke.
"""

from __future__ import annotations

import argparse
import collections
import os
import sys
import time

sys.path.insert(0, os.path.dirname(__file__))
sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", ".."))


def main() -> int:
    from harness import names_no_place, run_many
    from mutate import KINDS, base_files, make_case

    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=2000)
    ap.add_argument("--start", type=int, default=0)
    ap.add_argument("--kind", action="append", choices=KINDS)
    ap.add_argument("--seed", type=int)
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--slowest", type=int, default=0, help="also print the N slowest cases of each kind")
    args = ap.parse_args()
    import analyze.cli.main  # noqa: F401 - imported once, before the children fork
    import analyze.cli.check  # noqa: F401
    import analyze.cli.compare  # noqa: F401

    base = base_files()
    kinds = args.kind or list(KINDS)
    if args.seed is not None:
        for kind in kinds:
            case = make_case(kind, args.seed, base)
            v = run_many([case], 1)[0]
            print(f"{kind} seed {args.seed}: {case.argv} env {case.env}\n  exit {v.status}, "
                  f"{v.problem or 'kept every promise'}, {v.seconds:.2f} s\n  {v.stderr}")
        return 0
    broken = 0
    total_t = time.monotonic()
    print(f"{'kind':<12} {'cases':>6} {'exit 0':>7} {'exit 1':>7} {'exit 2':>7} {'broken':>7} {'no place':>8} "
          f"{'s/case':>7} {'slowest s':>9}")
    for kind in kinds:
        t = time.monotonic()
        cases = [make_case(kind, s, base) for s in range(args.start, args.start + args.cases)]
        verdicts = run_many(cases, args.jobs)
        count = collections.Counter(v.status for v in verdicts)
        bad = [v for v in verdicts if v.problem]
        unplaced = [v for v in verdicts if names_no_place(v)]
        broken += len(bad) + len(unplaced)
        took = time.monotonic() - t
        print(f"{kind:<12} {len(cases):>6} {count[0]:>7} {count[1]:>7} {count[2]:>7} {len(bad):>7} {len(unplaced):>8} "
              f"{took / len(cases):>7.3f} {max(v.seconds for v in verdicts):>9.1f}", flush=True)
        for v in bad:
            print(f"    seed {v.seed}: {v.problem} | {v.stderr[:200]}")
        for v in unplaced:
            print(f"    seed {v.seed}: names no place | {v.stderr[:200]}")
        for v in sorted(verdicts, key=lambda v: -v.seconds)[: args.slowest]:
            print(f"    slow: seed {v.seed}: {v.seconds:.1f} s, exit {v.status} | {v.stderr[:160]}")
    print(f"{broken} broken promises; {time.monotonic() - total_t:.0f} s in all")
    return 1 if broken else 0


if __name__ == "__main__":
    raise SystemExit(main())
