"""Precharge / predischarge flags (analyze.search.flags via analyze_stage).

Reference: brute force written out in the test — every subset of the
internal nodes, by increasing size, each with the worst case found by
enumerating every pattern (sharing_circuits.brute_force: networkx
components, analyze.physics.redistribution voltages).
"""

from __future__ import annotations

from itertools import combinations

import pytest

from analyze.search.analysis import analyze_stage
from sharing_circuits import brute_force, domino, make_tech

TECH = make_tech()

# X - A - n1 - B - n2 - C - n3 - D - FOOT, with a branch n1 - E - n4 - F - FOOT.
EV = [("MA", "X", "A", "n1"), ("MB", "n1", "B", "n2"), ("MC", "n2", "C", "n3"),
      ("MD", "n3", "D", "FOOT"), ("ME", "n1", "E", "n4"), ("MF", "n4", "F", "FOOT")]
CAPS = {
    "X": dict(linear=10.0, nmos=(0.5, 1.5, 1.0), pmos=(0.9, 3.0, 1.3)),
    "n1": dict(linear=2.0, nmos=(0.6, 1.5, 3.0)),
    "n2": dict(linear=5.0, nmos=(0.4, 1.2, 2.0)),
    "n3": dict(linear=4.0, nmos=(0.4, 1.2, 2.0)),
    "n4": dict(linear=6.0, nmos=(0.4, 1.2, 2.0)),
}


def _brute_flags(circuit, stage, need_u):
    """Smallest passing set, best worst case among equals (first on a tie)."""
    nodes = sorted(stage.internal_nodes)
    for k in range(1, len(nodes) + 1):
        best = None
        for subset in combinations(nodes, k):
            _, found = brute_force(circuit, stage, TECH, precharged=subset)
            u = found[0][0]
            if u >= need_u and (best is None or u > best[1]):
                best = (set(subset), u)
        if best:
            return best
    return None


@pytest.mark.parametrize("polarity", ["n", "p"])
def test_flags_are_the_smallest_best_set(polarity):
    circuit, stage = domino(TECH, EV, CAPS, polarity=polarity)
    res = analyze_stage(circuit, stage, TECH)
    assert res.status == "fail"
    n_type = polarity == "n"
    need_u = res.threshold_v + TECH.guard if n_type else TECH.vdd - res.threshold_v + TECH.guard
    want_set, want_u = _brute_flags(circuit, stage, need_u)
    assert {f.node for f in res.flags} == want_set
    last = res.flags[-1].v_final_after
    assert (last if n_type else TECH.vdd - last) == pytest.approx(want_u, abs=1e-9)
    assert res.flag_note is None
    # Each flag's voltage is the worst case with it and every flag before it.
    for i, flag in enumerate(res.flags):
        applied = [f.node for f in res.flags[: i + 1]]
        _, found = brute_force(circuit, stage, TECH, precharged=applied)
        u = found[0][0]
        assert (flag.v_final_after if n_type else TECH.vdd - flag.v_final_after) == pytest.approx(u, abs=1e-9)
        assert flag.action == ("add precharge device" if n_type else "add predischarge device")
        assert flag.location_um == circuit.nets[flag.node].location_um
    # ... and with all of them the stage passes.
    fixed = analyze_stage(circuit, stage, TECH, precharged={f.node for f in res.flags})
    assert fixed.status == "pass" and fixed.flags == []


def test_flag_names_the_devices_around_the_node():
    circuit, stage = domino(TECH, EV, CAPS)
    res = analyze_stage(circuit, stage, TECH)
    between = {f.node: f.between for f in res.flags}
    expect = {"n1": ("MA", "MB", "ME"), "n2": ("MB", "MC"), "n3": ("MC", "MD"), "n4": ("ME", "MF")}
    for node, devs in between.items():
        assert devs == expect[node]


def test_no_internal_node_note():
    # One device between X and the footer: no node to precharge; a guard
    # larger than VDD - threshold makes even the undisturbed node fail.
    tech = make_tech(guard=1.5)
    circuit, stage = domino(tech, [("MA", "X", "A", "FOOT")], {"X": dict(linear=5.0)})
    res = analyze_stage(circuit, stage, tech)
    assert res.status == "fail" and res.flags == []
    assert "no internal node" in res.flag_note


def test_dynamic_node_too_small_note():
    # Every internal node precharged leaves X at VDD, still short of
    # threshold + guard when the guard is above VDD - threshold.
    tech = make_tech(guard=1.2)
    circuit, stage = domino(tech, EV, CAPS)
    res = analyze_stage(circuit, stage, tech)
    assert res.status == "fail" and res.flags == []
    assert "even with every internal node pre-conditioned" in res.flag_note


def test_passing_stage_has_no_flags():
    caps = dict(CAPS, X=dict(linear=80.0))
    circuit, stage = domino(TECH, EV, caps)
    res = analyze_stage(circuit, stage, TECH)
    assert res.status == "pass" and res.flags == [] and res.flag_note is None


# -- random stages: flags against brute force -----------------------------------------
from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

import analyze.search.flags as flags_module  # noqa: E402


@st.composite
def failing_stages(draw):
    # Legs and bridges as in test_worstcase.precharged_stacks, with a small X
    # so that most stages fail and need flags.
    pool = [f"I{k}" for k in range(draw(st.integers(2, 7)))]
    devices, mids = [], []
    for leg in range(draw(st.integers(1, 3))):
        nodes = ["X"] + [f"m{leg}{k}" for k in range(draw(st.integers(1, 3)))] + ["FOOT"]
        mids += nodes[1:-1]
        for a, b in zip(nodes, nodes[1:]):
            devices.append((f"M{len(devices):02d}", a, draw(st.sampled_from(pool)), b))
    if len(mids) >= 2 and draw(st.booleans()):
        a, b = draw(st.lists(st.sampled_from(mids), min_size=2, max_size=2, unique=True))
        devices.append((f"M{len(devices):02d}", a, draw(st.sampled_from(pool)), b))
    caps = {"X": dict(linear=draw(st.floats(0.5, 6.0)), nmos=(0.5, 1.5, 1.0))}
    for n in mids:
        caps[n] = dict(linear=draw(st.floats(0.0, 6.0)), nmos=(0.4, 1.2, 2.0))
    return domino(TECH, devices, caps, polarity=draw(st.sampled_from("np")))


def _need(res, n_type):
    return res.threshold_v + TECH.guard if n_type else TECH.vdd - res.threshold_v + TECH.guard


def _worst(circuit, stage, nodes):
    """(normalised u, discharged shared nodes) of the brute-force worst case."""
    _, ((u, _), shared) = brute_force(circuit, stage, TECH, precharged=tuple(nodes))
    return u, shared - set(nodes) - set(stage.secondary_precharge)


def _reference_order(circuit, stage, chosen):
    """Best first: each step the node whose addition gives the highest
    worst case, alphabetically first on a tie (the documented order)."""
    applied, out = [], []
    left = sorted(chosen)
    while left:
        best = max(left, key=lambda n: (_worst(circuit, stage, applied + [n])[0], [-ord(c) for c in n]))
        left.remove(best)
        applied.append(best)
        out.append((best, _worst(circuit, stage, applied)[0]))
    return out


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(failing_stages())
def test_flags_match_brute_force(case):
    # Source: brute force written here — every subset by increasing size, each
    # worst case by enumerating every pattern (sharing_circuits.brute_force).
    circuit, stage = case
    res = analyze_stage(circuit, stage, TECH)
    n_type = stage.polarity == "n"
    if res.status != "fail" or res.flag_note is not None:
        return
    want_set, want_u = _brute_flags(circuit, stage, _need(res, n_type))
    assert {f.node for f in res.flags} == want_set
    got = [(f.node, f.v_final_after if n_type else TECH.vdd - f.v_final_after) for f in res.flags]
    ref = _reference_order(circuit, stage, want_set)
    assert [n for n, _ in got] == [n for n, _ in ref]
    for (_, u), (_, u_ref) in zip(got, ref):
        assert u == pytest.approx(u_ref, abs=1e-9)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(failing_stages())
def test_greedy_fallback_matches_brute_force_greedy(case):
    # With no search budget the flags come from the greedy fallback.  Source:
    # the greedy rule of the docs written out here over brute-force worst
    # cases: add, one at a time, the discharged shared node of the current
    # worst case that raises the worst case most (alphabetically first on a tie).
    circuit, stage = case
    old = flags_module.SEARCH_BUDGET
    flags_module.SEARCH_BUDGET = 0
    try:
        res = analyze_stage(circuit, stage, TECH)
    finally:
        flags_module.SEARCH_BUDGET = old
    n_type = stage.polarity == "n"
    if res.status != "fail" or not res.flags:
        return
    need = _need(res, n_type)
    chosen = []
    u, discharged = _worst(circuit, stage, chosen)
    while u < need:
        pick = max(sorted(discharged), key=lambda n: (_worst(circuit, stage, chosen + [n])[0],
                                                      [-ord(c) for c in n]))
        chosen.append(pick)
        u, discharged = _worst(circuit, stage, chosen)
    assert {f.node for f in res.flags} == set(chosen)
    assert "greedily" in res.flag_note
    # The terminal report says so beside the flags (not only the JSON).
    from analyze.report.text import stage_block

    assert f"({res.flag_note})" in stage_block(res, circuit, TECH)
    ref = _reference_order(circuit, stage, chosen)
    assert [f.node for f in res.flags] == [n for n, _ in ref]
