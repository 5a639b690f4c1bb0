"""Tests of switch networks as Boolean functions (analyze.stages.logic).

What each test checks against:

- "truth table": the table written out in the test, by hand, from the
  switch-level reading of a transistor (nmos closed when its gate is
  high, pmos when low; Weste & Harris, *CMOS VLSI Design*, 4th ed.,
  ch. 1, from memory).
- "brute force": every assignment of the variables, evaluated one by one
  with :func:`conducts`.
- "hand count": the search's cases counted by hand, written out.
"""

from __future__ import annotations

from itertools import product

import pytest
from hypothesis import given, settings, strategies as st

from analyze.stages.logic import SearchLimit, Switch, conducts, find_floating

RAILS = ["VDD", "VSS"]


def n(a, b, g):
    return Switch(a, b, g, True)


def p(a, b, g):
    return Switch(a, b, g, False)


# y = !(a·(b+c)), the shape of a flip-flop's set/reset NAND: one pmos (a)
# straight from VDD to y, the nmos a in series at ground.
OAI = [
    p("VDD", "y", "a"), p("VDD", "m", "b"), p("m", "y", "c"),
    n("VSS", "s", "a"), n("s", "y", "b"), n("s", "y", "c"),
]


def table(switches, rail, names):
    return [int(conducts(switches, "y", [rail], dict(zip(names, bits)))) for bits in product((0, 1), repeat=len(names))]


def test_oai_pull_up_and_pull_down_are_complements():
    # Truth table, rows a b c = 000, 001, ..., 111:
    #   pull-up   !a + !b·!c : 1 1 1 1 1 0 0 0
    #   pull-down a·(b + c)  : 0 0 0 0 0 1 1 1
    up = [s for s in OAI if not s.closed_when]
    down = [s for s in OAI if s.closed_when]
    assert table(up, "VDD", "abc") == [1, 1, 1, 1, 1, 0, 0, 0]
    assert table(down, "VSS", "abc") == [0, 0, 0, 0, 0, 1, 1, 1]
    assert find_floating(OAI, "y", RAILS) is None


def test_aoi22_truth_table_and_static():
    # y = !(a·b + c·d): pull-down (a series b) parallel (c series d),
    # pull-up (a parallel b) series (c parallel d).  Truth table, rows
    # abcd = 0000 ... 1111: the pull-down conducts on 0011, 0111, 1011,
    # 1100, 1101, 1110, 1111 (a·b or c·d), the pull-up on the other nine.
    sw = [
        p("VDD", "m", "a"), p("VDD", "m", "b"), p("m", "y", "c"), p("m", "y", "d"),
        n("y", "k1", "a"), n("k1", "VSS", "b"), n("y", "k2", "c"), n("k2", "VSS", "d"),
    ]
    down = [0, 0, 0, 1, 0, 0, 0, 1, 0, 0, 0, 1, 1, 1, 1, 1]
    assert table([s for s in sw if s.closed_when], "VSS", "abcd") == down
    assert table([s for s in sw if not s.closed_when], "VDD", "abcd") == [1 - v for v in down]
    assert find_floating(sw, "y", RAILS) is None


def nand(k):
    nets = ["y"] + [f"n{i}" for i in range(1, k)] + ["VSS"]
    return [p("VDD", "y", f"A{i}") for i in range(k)] + [n(nets[i], nets[i + 1], f"A{i}") for i in range(k)]


def nor(k):
    nets = ["y"] + [f"m{i}" for i in range(1, k)] + ["VDD"]
    return [n("y", "VSS", f"A{i}") for i in range(k)] + [p(nets[i], nets[i + 1], f"A{i}") for i in range(k)]


@pytest.mark.parametrize("gate", [nand, nor])
@pytest.mark.parametrize("k", [2, 3, 8])
def test_nand_nor_static_in_2k_plus_1_cases(gate, k):
    # Hand count (NAND; NOR is its dual): the first case splits on A0, the
    # input of a switch on y.  A0 = 0 closes its pmos: driven, closed.
    # A0 = 1 closes the top nmos; that case splits on A1, and so on; the
    # last case, every input 1, closes the whole stack: driven.  So each
    # input adds two cases to the first: 2k + 1, and no fewer suffice.
    assert find_floating(gate(k), "y", RAILS, max_cases=2 * k + 1) is None
    with pytest.raises(SearchLimit):
        find_floating(gate(k), "y", RAILS, max_cases=2 * k)


def test_dynamic_nodes_float_with_clock_off_and_inputs_off():
    # Truth table of the footed domino NAND2 (precharge pmos CLK, nmos A, B,
    # footer CLK): with CLK = 1 the precharge is open and the pull-down
    # needs A = B = 1, so CLK, A, B = 1, 0, 0 joins X to nothing; the
    # search tries the opening value first, so it returns that one.
    dyn = [p("VDD", "X", "CLK"), n("X", "n1", "A"), n("n1", "f", "B"), n("f", "VSS", "CLK")]
    w = find_floating(dyn, "X", RAILS)
    assert w.assignment == {"A": False, "B": False, "CLK": True}
    assert not conducts(dyn, "X", RAILS, w.assignment)
    # Domino OR2 with keeper gated by OUT (a free input here): CLK = 1,
    # A = B = 0, OUT = 1 (keeper off) floats.
    orr = [p("VDD", "X", "CLK"), p("VDD", "X", "OUT"), n("X", "f", "A"), n("X", "f", "B"), n("f", "VSS", "CLK")]
    w = find_floating(orr, "X", RAILS)
    assert w.assignment == {"A": False, "B": False, "CLK": True, "OUT": True}


def test_constant_switches():
    # Hand reasoning: a pmos with its gate on ground is always closed
    # (var None): a pseudo-nmos NOR's output is driven whatever A, B.
    pseudo = [Switch("VDD", "y", None), n("y", "VSS", "A"), n("y", "VSS", "B")]
    assert find_floating(pseudo, "y", RAILS) is None
    # A net with no switch to anything floats, with an empty assignment.
    assert find_floating([], "y", RAILS).assignment == {}


def test_complemented_control():
    # Hand reasoning: an nmos pass latch, S fed from D when CLK = 1 and from
    # the feedback F when CLKB = 1.  With CLKB a free variable, CLK =
    # CLKB = 0 floats S; written as "not CLK" (closed_when False) it never
    # does.  D and F stand for driven nets (a switch closed to VDD or VSS
    # by their own input).
    drive = [p("VDD", "D", "d"), n("D", "VSS", "d"), p("VDD", "F", "f"), n("F", "VSS", "f")]
    free = drive + [n("D", "S", "CLK"), n("F", "S", "CLKB")]
    assert find_floating(free, "S", RAILS).assignment["CLK"] is False
    tied = drive + [n("D", "S", "CLK"), Switch("F", "S", "CLK", False)]
    assert find_floating(tied, "S", RAILS) is None


_NETS = ["VDD", "VSS", "y", "a", "b", "c"]
_SW = st.builds(Switch, st.sampled_from(_NETS), st.sampled_from(_NETS), st.sampled_from(["P", "Q", "R", "T", None]), st.booleans())


@settings(max_examples=400, deadline=None)
@given(st.lists(_SW, max_size=10))
def test_search_agrees_with_brute_force(switches):
    # Brute force: y floats under some assignment exactly when the search
    # says so, and its witness is one.
    names = sorted({s.var for s in switches if s.var})
    floats = [
        dict(zip(names, bits))
        for bits in product((False, True), repeat=len(names))
        if not conducts(switches, "y", RAILS, dict(zip(names, bits)))
    ]
    w = find_floating(switches, "y", RAILS)
    assert (w is None) == (not floats)
    if w is not None:
        assert set(w.assignment) == set(names)
        assert not conducts(switches, "y", RAILS, w.assignment)
