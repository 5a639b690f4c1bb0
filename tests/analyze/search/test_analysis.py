"""The public entry points (analyze.search.analysis): single patterns, iteration,
the stage result.  Hand calculations written out per test."""

from __future__ import annotations

import dataclasses

import pytest

from analyze.search.analysis import analyze_stage, evaluate_pattern, iter_counted_patterns
from analyze.search.constraints import parse_constraints
from extract.errors import InputError
from sharing_circuits import NMOS, domino, make_tech

TECH = make_tech()
NAND3 = [("MA", "X", "A", "n1"), ("MB", "n1", "B", "n2"), ("MC", "n2", "C", "FOOT")]
LIN = {"X": dict(linear=30.0), "n1": dict(linear=10.0), "n2": dict(linear=10.0)}


def test_evaluate_pattern():
    circuit, stage = domino(TECH, NAND3, LIN)
    assert evaluate_pattern(circuit, stage, TECH, {"A": 1, "B": 1, "C": 1}) is None
    wc = evaluate_pattern(circuit, stage, TECH, {"A": 1, "B": 0, "C": 1})
    # X shares with n1 only: lossless 30 * 1.8 / 40 = 1.35 V.
    assert wc.shared_nodes == ["n1"]
    assert wc.v_final_linear == pytest.approx(1.35)
    none = evaluate_pattern(circuit, stage, TECH, {"A": 0, "B": 1, "C": 1})
    assert none.shared_nodes == [] and none.v_final == pytest.approx(1.8) and none.droop_v == 0
    with pytest.raises(ValueError, match="'C'"):
        evaluate_pattern(circuit, stage, TECH, {"A": 1, "B": 1})
    with pytest.raises(ValueError, match="0 or 1"):
        evaluate_pattern(circuit, stage, TECH, {"A": 1, "B": 1, "C": 2})


def test_iterate_counted_patterns():
    # Hand count: a 3-input series stack discharges only for A = B = C = 1,
    # so 2**3 - 1 = 7 patterns count; with C fixed at 1, A = B = 1 is out: 3.
    circuit, stage = domino(TECH, NAND3, LIN)
    every = list(iter_counted_patterns(circuit, stage, TECH))
    assert len(every) == 7 == analyze_stage(circuit, stage, TECH).counted_patterns
    assert {tuple(w.inputs.values()) for w in every} == {
        (a, b, c) for a in (0, 1) for b in (0, 1) for c in (0, 1)} - {(1, 1, 1)}
    for w in every:
        assert w == evaluate_pattern(circuit, stage, TECH, w.inputs)
    fixed = parse_constraints({"fixed": {"C": 1}})
    assert len(list(iter_counted_patterns(circuit, stage, TECH, fixed))) == 3
    assert len(list(iter_counted_patterns(circuit, stage, TECH, limit=2))) == 2
    assert analyze_stage(circuit, stage, TECH, fixed).counted_patterns == 3


def test_secondary_precharge_starts_high():
    # X - A - p1 - B - FOOT (p1 precharged), X - C - d1 - D - FOOT.
    # A = C = 1: lossless (30 * 1.8 + 10 * 1.8) / 50 = 1.44 V.
    ev = [("MA", "X", "A", "p1"), ("MB", "p1", "B", "FOOT"),
          ("MC", "X", "C", "d1"), ("MD", "d1", "D", "FOOT")]
    caps = {"X": dict(linear=30.0), "p1": dict(linear=10.0), "d1": dict(linear=10.0)}
    circuit, stage = domino(TECH, ev, caps, secondary=("p1",))
    wc = evaluate_pattern(circuit, stage, TECH, {"A": 1, "B": 0, "C": 1, "D": 0})
    assert wc.v_final_linear == pytest.approx(1.44)
    # The worst case avoids the precharged node: only d1 shares, 30*1.8/40 = 1.35 V lossless.
    res = analyze_stage(circuit, stage, TECH)
    assert res.worst_case.shared_nodes == ["d1"]
    assert res.worst_case.v_final_linear == pytest.approx(1.35)


def test_p_type_is_the_mirror_image():
    # With pmos parameters equal to the nmos ones (|vt0| the same), a p-type
    # gate with p+ junctions is the n-type gate with every voltage flipped:
    # v_p = VDD - v_n for the complementary pattern.
    tech = make_tech(pmos={**NMOS, "vt0": -NMOS["vt0"]})
    caps = {"X": dict(linear=4.0, nmos=(0.5, 1.5, 1.0), pmos=(0.9, 3.0, 1.3)),
            "n1": dict(linear=1.0, nmos=(0.4, 1.2, 2.0)), "n2": dict(linear=3.0, nmos=(0.4, 1.2, 2.0))}
    flipped = {k: dict(linear=v["linear"], nmos=v.get("pmos"), pmos=v.get("nmos")) for k, v in caps.items()}
    cn, sn = domino(tech, NAND3, caps, polarity="n")
    cp, sp = domino(tech, NAND3, flipped, polarity="p")
    rn, rp = analyze_stage(cn, sn, tech), analyze_stage(cp, sp, tech)
    assert rp.worst_case.inputs == {k: 1 - v for k, v in rn.worst_case.inputs.items()}
    assert rp.worst_case.v_final == pytest.approx(tech.vdd - rn.worst_case.v_final, abs=1e-9)
    assert rp.worst_case.v_final_linear == pytest.approx(tech.vdd - rn.worst_case.v_final_linear, abs=1e-9)
    assert rp.worst_case.droop_v == pytest.approx(rn.worst_case.droop_v, abs=1e-9)
    assert rp.worst_case.regime == rn.worst_case.regime
    assert rp.counted_patterns == rn.counted_patterns == 7


def test_no_counted_pattern_passes():
    # A fixed at 1 on a single-device stage always discharges X: no pattern
    # counts, so the node is taken undisturbed at VDD.
    circuit, stage = domino(TECH, [("MA", "X", "A", "FOOT")], {"X": dict(linear=5.0)})
    res = analyze_stage(circuit, stage, TECH, parse_constraints({"fixed": {"A": 1}}))
    assert res.worst_case is None and res.counted_patterns == 0
    assert res.status == "pass"
    assert res.margin_v == pytest.approx(TECH.vdd - res.threshold_v)


def test_held_gates_and_other_rails():
    # X - A - n1 - (gate at VDD, always on) - n2 - B - FOOT, and a leg X - C - VSS
    # straight to ground beside the footer.  VDD is no input; n1 and n2
    # always share together; C = 1 ties X to ground.
    # Hand count: patterns over (A, B, C) with C = 0 and not (A = B = 1): 3.
    ev = [("MA", "X", "A", "n1"), ("MON", "n1", "VDD", "n2"), ("MB", "n2", "B", "FOOT"),
          ("MC", "X", "C", "VSS")]
    caps = {"X": dict(linear=30.0), "n1": dict(linear=6.0), "n2": dict(linear=4.0)}
    circuit, stage = domino(TECH, ev, caps)
    res = analyze_stage(circuit, stage, TECH)
    assert set(res.worst_case.inputs) == {"A", "B", "C"}
    assert res.worst_case.inputs == {"A": 1, "B": 0, "C": 0}
    assert res.worst_case.shared_nodes == ["n1", "n2"]
    # Lossless: 30 * 1.8 / 40 = 1.35 V.
    assert res.worst_case.v_final_linear == pytest.approx(1.35)
    assert res.counted_patterns == 3
    assert len(list(iter_counted_patterns(circuit, stage, TECH))) == 3
    assert evaluate_pattern(circuit, stage, TECH, {"A": 0, "B": 0, "C": 1}) is None


# ------------------------------------------------ no NaN verdict (issue 13)

@pytest.mark.parametrize("nmos, pmos, what", [
    ({"kp": float("nan")}, {}, "switching threshold"),   # NaN kp: the square-law ratio is NaN
    ({"kp": float("inf")}, {}, "switching threshold"),   # r = inf, VM = inf/inf = NaN
    ({"vt0": float("nan")}, {}, "not a finite number"),  # the pass limit VDD - VT is NaN
    ({"pb": 1e-308}, {}, "not a finite number"),         # (1 + V/PB)^(1-M) overflows: NaN charge
])
def test_a_non_finite_result_is_an_error_never_a_pass(nmos, pmos, what):
    # Source: README "Hostile and broken inputs" (a non-finite result is an error naming the cause);
    # hand reasoning on the formulas of the README's charge-sharing model, one per case above.
    # Tech objects made directly, past the tech-file checks that would refuse these numbers.
    tech = dataclasses.replace(make_tech(nmos=nmos, pmos=pmos), path="t.toml")
    circuit, stage = domino(tech, NAND3, {k: dict(v, nmos=(1.0, 3.0, 1.0)) for k, v in LIN.items()})
    with pytest.raises(InputError) as err:
        analyze_stage(circuit, stage, tech)
    assert err.value.file == "t.toml" and err.value.place == "stage X" and what in err.value.message


# ------------------------------------------------ ranked runners-up

@pytest.mark.parametrize("scan, count", [(0, 3), (7, 3), (40, 16), (4096, 5)])
def test_worst_patterns_against_brute_force(scan, count):
    # Brute force: every pattern of iter_counted_patterns up to ``scan`` made a
    # WorstCase, the first met kept per set of shared nodes, the rest ranked
    # by final voltage then inputs, after the exact worst case.
    from analyze.search.analysis import find_worst_case, worst_patterns
    from sharing_circuits import mux

    circuit, stage = mux(TECH, 5)
    best = find_worst_case(circuit, stage, TECH)
    first = {tuple(sorted(best.shared_nodes)): best}
    others = {}
    for wc in list(iter_counted_patterns(circuit, stage, TECH))[:scan]:
        others.setdefault(tuple(sorted(wc.shared_nodes)), wc)
    ranked = sorted((wc for k, wc in others.items() if k not in first),
                    key=lambda wc: (wc.v_final, sorted(wc.inputs.items())))
    expected = [best, *ranked[: count - 1]]
    assert worst_patterns(circuit, stage, TECH, count=count, scan=scan) == expected
    assert len(expected) == (1 if scan == 0 else min(count, 1 + len(ranked)))
