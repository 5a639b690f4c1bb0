"""Exactness and speed of the worst-case search and of pattern counting.

The reference is brute force written out here, independent of the
analyser's own enumeration: every pattern of the inputs, the constraints
checked by their definition, the dynamic node's component found with
networkx, and the final voltage from
analyze.redistribution.network_final_voltage on the component's conducting
devices (its physics is checked against ngspice and hand calculations in
test_redistribution.py and test_against_ngspice.py).
"""

from __future__ import annotations

import itertools
import math
import time

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from analyze.constraints import parse_constraints, stage_blocks
from analyze.patterns import bind_blocks, count_counted
from analyze.sharing import build_model
from analyze.worstcase import worst_case
from sharing_circuits import brute_force, domino, make_tech, mux

TECH = make_tech()


# -- random series-parallel stages ------------------------------------------------
@st.composite
def sp_stages(draw):
    polarity = draw(st.sampled_from("np"))
    footed = draw(st.booleans())
    rail = "FOOT" if footed else ("VSS" if polarity == "n" else "VDD")
    pool = [f"I{k}" for k in range(draw(st.integers(1, 12)))]
    n_dev = draw(st.integers(1, 14))
    devices, mids = [], itertools.count()

    def build(a, b, n):
        if n == 1:
            devices.append((f"M{len(devices):02d}", a, draw(st.sampled_from(pool)), b))
            return
        k = draw(st.integers(1, n - 1))
        if draw(st.booleans()):
            mid = f"n{next(mids)}"
            build(a, mid, k)
            build(mid, b, n - k)
        else:
            build(a, b, k)
            build(a, b, n - k)

    build("X", rail, n_dev)
    internal = sorted({t for _, a, _, b in devices for t in (a, b)} - {"X", rail})
    geo = st.tuples(st.floats(0, 2), st.floats(0, 6), st.floats(0, 4))
    caps = {"X": dict(linear=draw(st.floats(0.5, 4) | st.floats(4, 30)), nmos=draw(geo),
                      pmos=draw(geo))}
    for n in internal:
        caps[n] = dict(linear=draw(st.floats(0, 15)), nmos=draw(st.none() | geo),
                       pmos=draw(st.none() | geo))
    secondary = []
    if internal and draw(st.booleans()):
        secondary = draw(st.lists(st.sampled_from(internal), min_size=1, unique=True))
    circuit, stage = domino(TECH, devices, caps, polarity=polarity, footed=footed,
                            secondary=secondary)
    used = sorted({d[2] for d in devices})
    data = {}
    if len(used) >= 2 and draw(st.booleans()):
        data["one_hot"] = [draw(st.lists(st.sampled_from(used), min_size=1, max_size=4, unique=True))
                           for _ in range(draw(st.integers(1, 2)))]
    if len(used) >= 2 and draw(st.booleans()):
        data["complement"] = [draw(st.lists(st.sampled_from(used), min_size=2, max_size=2,
                                            unique=True))]
    if draw(st.booleans()):
        data["fixed"] = {draw(st.sampled_from(used)): draw(st.integers(0, 1))}
    constraints = parse_constraints(data) if data else None
    return circuit, stage, constraints


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(sp_stages())
def test_search_matches_brute_force(case):
    circuit, stage, constraints = case
    count, best = brute_force(circuit, stage, TECH, constraints)
    model = build_model(circuit, stage, TECH)
    choices = bind_blocks(model, stage_blocks(constraints, model.inputs))
    assert count_counted(model, choices) == count
    for method in ("bound", "brute"):
        found = worst_case(model, choices, method=method)
        if best is None:
            assert found is None
            continue
        (u_ref, values_ref), shared_ref = best
        assert found is not None
        assert found.values == values_ref, method
        assert found.u_final == pytest.approx(u_ref, abs=2e-9)
        got_shared = {model.nodes[i] for i in range(1, len(model.nodes)) if (found.component >> i) & 1}
        assert got_shared == shared_ref


# -- the OR-mux targets ------------------------------------------------------------
@pytest.mark.parametrize("legs", [16, 24])
@pytest.mark.parametrize("one_hot", [False, True])
def test_mux_worst_case_fast_and_right(legs, one_hot):
    circuit, stage = mux(TECH, legs)
    selects = [f"S{i:02d}" for i in range(legs)]
    constraints = parse_constraints({"one_hot": [selects]}) if one_hot else None
    model = build_model(circuit, stage, TECH)
    choices = bind_blocks(model, stage_blocks(constraints, model.inputs))
    start = time.perf_counter()
    found = worst_case(model, choices)
    elapsed = time.perf_counter() - start
    assert elapsed < 1.0
    pattern = dict(zip(model.inputs, found.values))
    mids = [f"m{i:02d}" for i in range(legs)]
    # Hand argument: every data input 0 (a 1 on a selected leg would
    # discharge X; on an unselected one it changes nothing and 0 is
    # lexicographically smaller).  Unconstrained, every leg selected shares
    # the most; one-hot, the leg with the largest mid-node (the one whose
    # wire part 0.2 + 0.05*((7i) mod 11) is largest, i.e. (7i) mod 11 = 10:
    # legs 3 and 14 tie, and the lexicographically smallest pattern puts its
    # 1 as late as possible, so leg 14).
    assert all(pattern[f"D{i:02d}"] == 0 for i in range(legs))
    if one_hot:
        hot = max(range(legs), key=lambda i: ((7 * i) % 11, i))
        assert hot == 14
        assert [s for s in selects if pattern[s]] == [f"S{hot:02d}"]
        expect = {f"m{hot:02d}"}
    else:
        assert all(pattern[s] == 1 for s in selects)
        expect = set(mids)
    got = {model.nodes[i] for i in range(1, len(model.nodes)) if (found.component >> i) & 1}
    assert got == expect


@pytest.mark.parametrize("legs", [16, 24])
def test_mux_counts_by_hand(legs):
    # Hand count: unconstrained, each leg (S, D) may be anything but (1, 1):
    # 3 choices per leg, 3**legs.  One-hot selects: legs choices of the hot
    # leg, whose D must be 0, and the other legs' D free: legs * 2**(legs-1).
    circuit, stage = mux(TECH, legs)
    model = build_model(circuit, stage, TECH)
    assert count_counted(model, bind_blocks(model, stage_blocks(None, model.inputs))) == 3**legs
    one_hot = parse_constraints({"one_hot": [[f"S{i:02d}" for i in range(legs)]]})
    choices = bind_blocks(model, stage_blocks(one_hot, model.inputs))
    assert count_counted(model, choices) == legs * 2 ** (legs - 1)


def test_no_counted_pattern():
    # A single device whose input is fixed at 1 always discharges X.
    circuit, stage = domino(TECH, [("M1", "X", "A", "FOOT")], {"X": dict(linear=10.0)})
    model = build_model(circuit, stage, TECH)
    choices = bind_blocks(model, stage_blocks(parse_constraints({"fixed": {"A": 1}}), model.inputs))
    assert worst_case(model, choices, method="bound") is None
    assert worst_case(model, choices, method="brute") is None
    assert count_counted(model, choices) == 0
    assert math.prod(len(c.options) for c in choices) == 1
