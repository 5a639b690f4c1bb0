"""Tests of the channel-connected components of a Topology
(analyze.stages.topology).

What each test checks against: brute force, a breadth-first search over the
nets through the channels of the chosen device types (never through a
rail), written out below; and the scipy path of larger circuits, which
must number and order everything the same way as the plain-Python path of
small ones.
"""

from __future__ import annotations

from collections import Counter

from hypothesis import given, settings, strategies as st

import analyze.stages.topology as topology
from analyze.stages.topology import Topology

from stage_circuits import TECH, make_circuit

_NETS = ["VDD", "VSS", "CLK", "X", "Y", "n1", "n2", "n3", "A", "B"]
_ROW = st.tuples(st.sampled_from(["nmos", "pmos"]), *[st.sampled_from(_NETS)] * 3)
_TYPES = (None, "nmos", "pmos")


def _brute(circuit, types, rails):
    """Net -> the set of nets of its component, and -> its devices (indices),
    by breadth-first search through the channels of ``types``."""
    devs = [(i, d) for i, d in enumerate(circuit.devices) if d.type in types]
    touched = {t for _, d in devs for t in (d.drain, d.source) if t not in rails}
    comp = {}
    for start in touched:
        if start in comp:
            continue
        seen, todo = {start}, [start]
        while todo:
            n = todo.pop()
            for _, d in devs:
                if n in (d.drain, d.source):
                    other = d.source if n == d.drain else d.drain
                    if other not in rails and other not in seen:
                        seen.add(other)
                        todo.append(other)
        for n in seen:
            comp[n] = seen
    members = {n: sorted(i for i, d in devs if {d.drain, d.source} - rails <= s and {d.drain, d.source} - rails)
               for n, s in comp.items()}
    return comp, members


def _records(topo, dtype):
    out = {}
    for n in set(topo.gates) | {t for d in topo.devices for t in (d.drain, d.source)}:
        c = topo.component_of(dtype, n)
        out[n] = (topo.component_id(dtype, n), None if c is None else
                  (c.nets, c.devices, dict(c.gate_count), dict(c.rail_by_gate)))
    return out


@settings(max_examples=300, deadline=None)
@given(st.lists(_ROW, min_size=1, max_size=14))
def test_small_components_match_brute_force_and_the_scipy_path(rows):
    c = make_circuit([(f"M{k:02d}", t, d, g, s, 1.0, 0.18) for k, (t, d, g, s) in enumerate(rows)], TECH)
    small = Topology(c, TECH)
    assert len(small.devices) <= topology.SMALL
    big = Topology(c, TECH)
    saved = topology.SMALL
    topology.SMALL = -1  # the scipy path for this one
    try:
        for dtype in _TYPES:
            big._comps(dtype)
    finally:
        topology.SMALL = saved
    rails = small._rails
    for dtype in _TYPES:
        assert type(small._comps(dtype)) is topology._SmallComponents
        assert type(big._comps(dtype)) is topology._Components
        got = _records(small, dtype)
        # the same numbers, nets, devices and orders as the scipy path
        assert got == _records(big, dtype)
        comp, members = _brute(c, ("nmos", "pmos") if dtype is None else (dtype,), rails)
        for n, (cid, rec) in got.items():
            if n not in comp:
                assert cid is None and rec is None
                continue
            nets, devices, gate_count, rail_by_gate = rec
            assert set(nets) == comp[n] and len(nets) == len(comp[n])
            assert devices == members[n]
            assert gate_count == dict(Counter(c.devices[i].gate for i in devices))
            assert rail_by_gate == {g: [i for i in devices if c.devices[i].gate == g
                                        and (c.devices[i].drain in rails) != (c.devices[i].source in rails)]
                                    for g in {c.devices[i].gate for i in devices
                                              if (c.devices[i].drain in rails) != (c.devices[i].source in rails)}}
            # nets in order of first appearance, drain before source, device by device
            order = [t for i in devices for t in (c.devices[i].drain, c.devices[i].source) if t not in rails]
            assert nets == list(dict.fromkeys(order))
            # one number per component, the same for each of its nets
            assert {got[m][0] for m in comp[n]} == {cid}
