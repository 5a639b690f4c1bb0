"""Recognition by islands (analyze.stages.islands, analyze.stages.by_islands).

What each test checks against:

- "whole circuit": ``find_stages(..., islands=False)``, the recognition of
  the whole circuit at once, whose rules are tested against the textbook
  definitions in test_recognize.py.  Recognition by islands must give the
  same stages, findings (text and place) and clocks on every circuit;
  :func:`stage_circuits.recognised_both_ways` asserts it.
- "hand reasoning": written out in the test.
"""

from __future__ import annotations

import random

from hypothesis import given, settings, strategies as st

from extract.circuit import Circuit, Device, Net

from analyze.stages.islands import circuit_islands

from stage_circuits import NAND3_FOOTED, NO_CLOCK, TECH, inverter, make_circuit, recognised_both_ways


def _copies(rows, n, shared, rng, tech):
    """``n`` copies of ``rows``: nets in ``shared`` (and rails) keep their
    names, every other net and device gets a per-copy name; the devices of
    all copies are shuffled."""
    out = []
    for k in range(n):
        def name(x):
            return x if x in shared or x in ("VDD", "VSS") else f"{x}_{k}"
        out += [(f"{r[0]}_{k}", r[1], name(r[2]), name(r[3]), name(r[4]), *r[5:]) for r in rows]
    rng.shuffle(out)
    return make_circuit(out, tech)


def test_islands_cut_at_rails_and_gate_only_nets():
    # Hand reasoning: three footed NAND3 stages (with their output
    # inverters and keepers) on one clock and one set of inputs.  CLK, A, B
    # and C only drive gates and VDD/VSS are rails, so each copy is an
    # island, and the three copies share one key.
    c = _copies(NAND3_FOOTED, 3, {"CLK", "A", "B", "C"}, random.Random(1), TECH)
    isl = circuit_islands(c, TECH)
    assert len(isl) == 3 and len(isl.keys) == 1
    assert sorted(tuple(isl.names(i)) for i in range(3)) == [
        tuple(sorted({"A", "B", "C", "CLK", "VDD", "VSS"} | {f"{n}_{k}" for n in ("X", "OUT", "n1", "n2", "n3")}))
        for k in range(3)]
    r = recognised_both_ways(c, TECH)
    assert [s.dynamic_node for s in r.stages] == ["X_0", "X_1", "X_2"]


def test_a_driven_clock_joins_the_islands():
    # Hand reasoning: when CLK is driven by an inverter (it has channel
    # terminals) it is no cut point, and every copy joins one island.
    rows = NAND3_FOOTED + inverter("MCI", "CK0", "CLK")
    c = _copies(rows, 3, {"CLK", "CK0", "A", "B", "C"}, random.Random(2), NO_CLOCK)
    isl = circuit_islands(c, NO_CLOCK)
    assert len(isl) == 1 and isl.largest() == len(c.devices)
    r = recognised_both_ways(c, NO_CLOCK)
    assert r.clocks == ["CLK"] and len(r.stages) == 3


def test_name_order_is_part_of_the_key():
    # Hand reasoning: recognition breaks ties by name (the first footer
    # node, the smallest precharge device name), so two copies whose names
    # sort differently must not share a key, while a copy that only
    # renames in the same order does.
    rows = [("MP", "pmos", "X", "CLK", "VDD", 1.0, 0.18), ("MA", "nmos", "X", "A", "n1", 1.0, 0.18),
            ("MB", "nmos", "n1", "B", "VSS", 1.0, 0.18)]
    same = [("MP2", "pmos", "X2", "CLK", "VDD", 1.0, 0.18), ("MA2", "nmos", "X2", "A", "n12", 1.0, 0.18),
            ("MB2", "nmos", "n12", "B", "VSS", 1.0, 0.18)]
    other = [("MP3", "pmos", "p3", "CLK", "VDD", 1.0, 0.18), ("MA3", "nmos", "p3", "A", "a3", 1.0, 0.18),
             ("MB3", "nmos", "a3", "B", "VSS", 1.0, 0.18)]  # dynamic node now sorts after the internal one
    c = make_circuit(rows + same + other, TECH)
    isl = circuit_islands(c, TECH)
    assert len(isl) == 3 and len(isl.keys) == 2
    recognised_both_ways(c, TECH)


def test_empty_and_rail_only_circuits():
    # Hand reasoning: no devices, no islands; a device with every terminal
    # on a shared net is an island of its own.
    assert len(circuit_islands(Circuit("e", {}, []), TECH)) == 0
    c = Circuit("caps", {"VDD": Net("VDD", role="power"), "VSS": Net("VSS", role="ground")},
                [Device("MC1", "nmos", "VSS", "VDD", "VSS", 1.0, 1.0),
                 Device("MC2", "nmos", "VSS", "VDD", "VSS", 1.0, 1.0)])
    isl = circuit_islands(c, TECH)
    assert len(isl) == 2 and len(isl.keys) == 1
    recognised_both_ways(c, TECH)


_NETS = ["VDD", "VSS", "CLK", "X", "Y", "n1", "n2", "A", "B"]
_ROW = st.tuples(st.sampled_from(["nmos", "pmos"]), *[st.sampled_from(_NETS)] * 3)


@settings(max_examples=300, deadline=None)
@given(st.lists(_ROW, min_size=1, max_size=12), st.booleans(), st.integers(1, 4),
       st.sets(st.sampled_from(_NETS[2:])), st.integers(0, 2**16))
def test_random_copies_agree_with_the_whole_circuit(rows, declared, n, shared, seed):
    # Whole circuit: any circuit, copied 1-4 times with any set of nets kept
    # common to the copies (a common net with channels joins the copies
    # into one island; one that only drives gates is a cut), is recognised
    # alike by islands and at once.
    tech = TECH if declared else NO_CLOCK
    rows = [(f"M{k}", t, d, g, s, 1.0, 0.18) for k, (t, d, g, s) in enumerate(rows)]
    recognised_both_ways(_copies(rows, n, shared, random.Random(seed), tech), tech)


def test_sample_blocks_agree_with_the_whole_circuit():
    # Whole circuit: the demo's sample cells arrayed (every kind of stage
    # the samples hold, a failing one with a flag, static gates).
    from extract.layout.pipeline import extract_cell
    from extract.layout.reader import open_layout
    from extract.techfile import load_tech
    from sample_layouts.make_samples import mixed_block, nand3_array
    import os
    import tempfile

    tech = load_tech(os.path.join(os.path.dirname(__file__), "..", "..", "..", "sample_layouts", "dsk18.toml"))
    with tempfile.TemporaryDirectory() as tmp:
        for lib, cell in ((mixed_block(2, 2), "MIXED_BLOCK"), (nand3_array(3, 4), "NAND3_ARRAY")):
            path = os.path.join(tmp, cell + ".gds")
            lib.write_gds(path)
            c = extract_cell(open_layout(path), tech, cell)
            r = recognised_both_ways(c, tech)
            assert r.stages
