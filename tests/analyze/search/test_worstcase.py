"""Exactness and speed of the worst-case search and of pattern counting.

The reference is brute force written out here, independent of the
analyser's own enumeration: every pattern of the inputs, the constraints
checked by their definition, the dynamic node's component found with
networkx, and the final voltage from
analyze.physics.redistribution.network_final_voltage on the component's conducting
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

from analyze.search.constraints import parse_constraints, stage_blocks
from analyze.search.patterns import bind_blocks, count_counted
from analyze.physics.sharing import build_model
from analyze.search.worstcase import worst_case
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


def _agrees_with_brute_force(circuit, stage, constraints):
    """Count, worst pattern, its voltage and shared nodes: both search
    methods against sharing_circuits.brute_force."""
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


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(sp_stages())
def test_search_matches_brute_force(case):
    _agrees_with_brute_force(*case)


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(sp_stages())
def test_below_asks_whether_the_worst_case_is_below_a_bar(case):
    # worst_case(below=bar) finds a pattern below the bar exactly when the
    # brute-force worst case (sharing_circuits.brute_force) is below it;
    # bars 1 µV either side of the reference worst case
    circuit, stage, constraints = case
    _, best = brute_force(circuit, stage, TECH, constraints)
    model = build_model(circuit, stage, TECH)
    choices = bind_blocks(model, stage_blocks(constraints, model.inputs))
    for method in ("bound", "brute"):
        if best is None:
            assert worst_case(model, choices, method=method, below=10.0) is None
            continue
        (u_ref, _), _ = best
        assert worst_case(model, choices, method=method, below=u_ref - 1e-6) is None, method
        found = worst_case(model, choices, method=method, below=u_ref + 1e-6)
        assert found is not None, method
        assert round(found.u_final, 9) < round(u_ref + 1e-6, 9)
        assert found.u_final >= u_ref - 2e-9  # no pattern ends below the worst case


# -- stacks with precharged middle nodes (the topology matters) --------------------
@st.composite
def precharged_stacks(draw):
    # Legs X – ... – FOOT of 1 to 4 devices, some middle nodes precharged, and
    # a few bridges between middle nodes: discharged nodes that only a
    # precharged node reaches, or that several precharged nodes reach.
    pool = [f"I{k}" for k in range(draw(st.integers(2, 10)))]
    devices, mids = [], []
    for leg in range(draw(st.integers(1, 3))):
        nodes = ["X"] + [f"m{leg}{k}" for k in range(draw(st.integers(0, 3)))] + ["FOOT"]
        mids += nodes[1:-1]
        for a, b in zip(nodes, nodes[1:]):
            devices.append((f"M{len(devices):02d}", a, draw(st.sampled_from(pool)), b))
    if len(mids) >= 2:
        for _ in range(draw(st.integers(0, 2))):
            a, b = draw(st.lists(st.sampled_from(mids), min_size=2, max_size=2, unique=True))
            devices.append((f"M{len(devices):02d}", a, draw(st.sampled_from(pool)), b))
    caps = {"X": dict(linear=draw(st.floats(0.5, 20.0)), nmos=(0.5, 1.5, 1.0))}
    for n in mids:
        caps[n] = dict(linear=draw(st.floats(0.0, 10.0)), nmos=(0.4, 1.2, 2.0))
    secondary = [n for n in mids if draw(st.booleans())]
    polarity = draw(st.sampled_from("np"))
    return domino(TECH, devices, caps, polarity=polarity, secondary=secondary)


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(precharged_stacks())
def test_search_matches_brute_force_with_precharged_middle_nodes(case):
    _agrees_with_brute_force(*case, None)


def test_topology_changes_the_worst_case():
    # X – A – n1 – B – n2 – C – FOOT with n1 precharged, and a second leg
    # X – D – m – E – FOOT.  With the topology-free rule the worst case would
    # put n2 behind n1 and X at the pass limit; but n1 feeds n2 itself (zero-
    # bias totals n1 ≈ 11.1 fF, n2 ≈ 4.1 fF with the junction parts of
    # sharing_circuits.make_net: n1 can give about (1.8 − 1.13) · 11 ≈ 7 fC,
    # n2 needs about 1.13 · 4.1 ≈ 4.6 fC), so only m costs X anything, and
    # the lexicographically smallest pattern sharing m is D alone.  Both
    # search methods agree with brute force.
    ev = [("MA", "X", "A", "n1"), ("MB", "n1", "B", "n2"), ("MC", "n2", "C", "FOOT"),
          ("MD", "X", "D", "m"), ("ME", "m", "E", "FOOT")]
    caps = {"X": dict(linear=4.0, nmos=(0.5, 1.5, 1.0)), "n1": dict(linear=10.0, nmos=(0.4, 1.2, 2.0)),
            "n2": dict(linear=3.0, nmos=(0.4, 1.2, 2.0)), "m": dict(linear=1.0, nmos=(0.4, 1.2, 2.0))}
    circuit, stage = domino(TECH, ev, caps, secondary=("n1",))
    model = build_model(circuit, stage, TECH)
    choices = bind_blocks(model, stage_blocks(None, model.inputs))
    _, ((u_ref, values_ref), shared_ref) = brute_force(circuit, stage, TECH)
    assert dict(zip(model.inputs, values_ref)) == {"A": 0, "B": 0, "C": 0, "D": 1, "E": 0}
    assert shared_ref == {"m"}
    for method in ("bound", "brute"):
        found = worst_case(model, choices, method=method)
        assert (found.values, found.u_final) == (values_ref, pytest.approx(u_ref, abs=2e-9))
    # Everything joined (A = B = D = 1, C = E = 0): topology-free, X would be
    # held at the pass limit; with n1 feeding n2 it stays above.
    on = model.conducting(tuple(int(n in "ABD") for n in model.inputs))
    full, _ = model.component(on)
    assert model.redistribute(*model.split(full)).v_final == pytest.approx(model.v_lim)
    assert model.u_final(full, on) > model.v_lim + 0.05


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


# -- counting on wide OR networks, any input names -------------------------------------
@st.composite
def or_stages(draw):
    # Legs X - ... - rail of 1 to 3 devices in series, input names drawn so that
    # the alphabetical order of the choices is arbitrary (the exponential case of
    # the old count was "D_i over S_i": every leg's top device sorted first),
    # inputs sometimes shared between legs, one-hot groups across legs.
    footed = draw(st.booleans())
    rail = "FOOT" if footed else "VSS"
    names = draw(st.lists(st.text("ABCDSXYZ", min_size=1, max_size=2), min_size=3, max_size=13,
                          unique=True))
    devices, used = [], []
    for leg in range(draw(st.integers(1, 6))):
        nodes = ["X"] + [f"m{leg}{k}" for k in range(draw(st.integers(0, 2)))] + [rail]
        for a, b in zip(nodes, nodes[1:]):
            gate = draw(st.sampled_from(names))
            used.append(gate)
            devices.append((f"M{len(devices):02d}", a, gate, b))
    caps = {"X": dict(linear=5.0, nmos=(0.5, 1.5, 1.0))}
    for _, a, _, b in devices:
        for n in (a, b):
            if n.startswith("m"):
                caps[n] = dict(linear=0.5, nmos=(0.4, 1.2, 2.0))
    circuit, stage = domino(TECH, devices, caps, footed=footed)
    used = sorted(set(used))
    constraints = None
    if len(used) >= 2 and draw(st.booleans()):
        constraints = parse_constraints({"one_hot": [draw(st.lists(st.sampled_from(used), min_size=2,
                                                                   max_size=len(used), unique=True))]})
    return circuit, stage, constraints


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(or_stages())
def test_count_on_or_networks_matches_brute_force(case):
    # Source: sharing_circuits.brute_force, every pattern enumerated.
    circuit, stage, constraints = case
    count, _ = brute_force(circuit, stage, TECH, constraints)
    model = build_model(circuit, stage, TECH)
    assert count_counted(model, bind_blocks(model, stage_blocks(constraints, model.inputs))) == count


def _wide_or(legs, footed, top_first):
    # Legs X - T_i - m_i - B_i - rail with (T, B) = (D, S) or (S, D).
    ev, caps = [], {"X": dict(linear=6.0, nmos=(0.5 * legs, 1.5 * legs, 1.0 * legs))}
    rail = "FOOT" if footed else "VSS"
    for i in range(legs):
        top, bottom = (f"D{i:02d}", f"S{i:02d}") if top_first else (f"S{i:02d}", f"D{i:02d}")
        ev += [(f"MT{i:02d}", "X", top, f"m{i:02d}"), (f"MB{i:02d}", f"m{i:02d}", bottom, rail)]
        caps[f"m{i:02d}"] = dict(linear=0.2 + 0.05 * ((7 * i) % 11), nmos=(0.5, 1.5, 2.0))
    return domino(TECH, ev, caps, footed=footed)


@pytest.mark.parametrize("footed", [True, False])
@pytest.mark.parametrize("d_first", [True, False])
def test_64_leg_or_counts_by_hand(footed, d_first):
    # Hand count as in test_mux_counts_by_hand: 3**64 free; one-hot selects
    # 64 * 2**63.  The old count took 2**legs steps when the D inputs sorted
    # next to X (13 s at 16 legs); this one is polynomial.
    circuit, stage = _wide_or(64, footed, d_first)
    model = build_model(circuit, stage, TECH)
    start = time.perf_counter()
    assert count_counted(model, bind_blocks(model, stage_blocks(None, model.inputs))) == 3**64
    one_hot = parse_constraints({"one_hot": [[f"S{i:02d}" for i in range(64)]]})
    assert count_counted(model, bind_blocks(model, stage_blocks(one_hot, model.inputs))) == 64 * 2**63
    assert time.perf_counter() - start < 2.0


def test_count_gives_up_past_its_budget():
    # A 6-leg OR needs more than 3 memoised sub-counts (one per leg at least),
    # so a budget of 3 gives None; the default budget gives the hand count 3**6.
    circuit, stage = _wide_or(6, True, True)
    model = build_model(circuit, stage, TECH)
    choices = bind_blocks(model, stage_blocks(None, model.inputs))
    assert count_counted(model, choices, budget=3) is None
    assert count_counted(model, choices) == 3**6
