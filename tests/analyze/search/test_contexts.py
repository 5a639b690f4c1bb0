"""Stage contexts (analyze.search.contexts): one analysis per distinct context.

Source of every check: the analysis of each stage on its own
(``analyse_circuit(..., reuse=False)``, i.e. analyze_stage per stage, as
before contexts existed) is the reference; with contexts the JSON report
must be the same bytes.  The key tests are properties of the definition
(the module text): any one analysed quantity changed gives another key,
and an order-preserving renaming gives the same key.
"""

from __future__ import annotations

import dataclasses
import functools
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from analyze.cli.check import check_report
from analyze.report.json_report import dumps
from analyze.search.analysis import analyse_circuit, analyze_stage
from analyze.search.constraints import load_constraints, parse_constraints
from analyze.search.contexts import StageContexts, analyse_contexts, stage_context
from analyze.stages.recognize import find_stages
from analyze.stages.stage import Receiver
from extract.circuit import CapParts, Circuit, JunctionGeometry
from extract.layout.pipeline import extract_layout
from extract.techfile import load_tech
from sample_layouts.make_samples import CELLS, mixed_block, nand3_array
from sharing_circuits import domino, make_tech

SAMPLES = Path(__file__).resolve().parents[3] / "sample_layouts"
GDS = str(SAMPLES / "dsk18_cells.gds")


@functools.cache
def dsk18():
    return load_tech(str(SAMPLES / "dsk18.toml"))


def both_ways(circuit, tech, constraints=None, path=None):
    """The JSON report without and with contexts."""
    out = []
    for reuse in (False, True):
        rec, res = analyse_circuit(circuit, tech, constraints, path, reuse=reuse)
        out.append(dumps(check_report(circuit, tech, rec, res)))
    return out


@pytest.mark.parametrize("cell", list(CELLS))
def test_every_sample_cell_same_report(cell):
    a, b = both_ways(extract_layout(GDS, dsk18(), cell), dsk18())
    assert a == b


@pytest.mark.parametrize("cell", ["DOMINO_MUX4", "DOMINO_OR16"])
def test_sample_constraints_same_report(cell):
    path = str(SAMPLES / f"{cell}.constraints.toml")
    a, b = both_ways(extract_layout(GDS, dsk18(), cell), dsk18(), load_constraints(path), path)
    assert a == b


def _contexts(circuit, tech, constraints=None):
    rec, _ = analyse_circuit(circuit, tech, constraints)
    ctx = StageContexts(circuit, tech, constraints, analyze_stage)
    for s in rec.stages:
        ctx.analyse(s)
    return len(rec.stages), ctx


def _array_checked(lib, path):
    """Extract ``lib``'s top cell; assert the same report both ways; the
    report, the stage count and the contexts."""
    lib.write_gds(path)
    circuit = extract_layout(path, dsk18(), lib.top_level()[0].name)
    a, b = both_ways(circuit, dsk18())
    assert a == b
    return (b, *_contexts(circuit, dsk18()))


def test_nand3_array_same_report_and_reused(tmp_path):
    _, n, ctx = _array_checked(nand3_array(7, 5), str(tmp_path / "a.gds"))
    assert n == 35 and ctx.analysed + ctx.reused == 35 and ctx.analysed < 35


def test_mixed_block_same_report_flags_renamed(tmp_path):
    # every sample cell arrayed 2 x 2: DYN_NAND3_LONG fails and has a flag
    # (sample_layouts/README.md), so renamed flags and their points are checked
    report, n, ctx = _array_checked(mixed_block(2, 2), str(tmp_path / "m.gds"))
    assert '"add precharge device"' in report
    assert ctx.reused > 0 and ctx.analysed + ctx.reused == n


def _solver(calls, failed=False):
    """A ``solve`` for StageContexts.prefetch that runs here (the cluster's
    stand-in), recording the keys it is given; ``failed``: every result
    comes back None (the analysis raised where it ran)."""
    def solve(analyse, keys, tech, path):
        calls.append(list(keys))
        done = analyse_contexts(analyse, keys, tech, path)
        for key, result in reversed(list(zip(keys, done))):  # any order
            yield key, None if failed else result
    return solve


def _mixed(folder):
    path = str(folder / "m.gds")
    mixed_block(2, 2).write_gds(path)
    circuit = extract_layout(path, dsk18(), "MIXED_BLOCK")
    return circuit, both_ways(circuit, dsk18())[0]


def test_prefetched_contexts_same_report(tmp_path):
    # reference: the report without contexts; each distinct key goes out
    # once (brute force: the set of every stage's key), analyse then renames
    circuit, reference = _mixed(tmp_path)
    calls = []
    rec, res = analyse_circuit(circuit, dsk18(), solve=_solver(calls))
    assert dumps(check_report(circuit, dsk18(), rec, res)) == reference
    keys = {stage_context(circuit, s, dsk18())[0] for s in rec.stages}
    assert len(calls) == 1 and len(calls[0]) == len(keys) and set(calls[0]) == keys


def test_contexts_that_raised_elsewhere_analysed_here(tmp_path):
    # None back for every key: each stage analysed directly in its own
    # names (no context analysed or reused), the report unchanged
    circuit, reference = _mixed(tmp_path)
    rec = find_stages(circuit, dsk18())
    ctx = StageContexts(circuit, dsk18(), None, analyze_stage)
    assert ctx.prefetch(rec.stages, _solver([], failed=True)) > 0
    res = [ctx.analyse(s) for s in rec.stages]
    assert ctx.analysed == ctx.reused == 0
    assert dumps(check_report(circuit, dsk18(), rec, res)) == reference


def test_models_tech_sends_nothing():
    # with [models] prefetch sends nothing (StageContexts.prefetch): the
    # foundry-model contexts are analysed where their device tables are
    tech = dataclasses.replace(make_tech(), models=object())
    calls = []
    assert StageContexts(Circuit("c", {}, []), tech, None, analyze_stage).prefetch([], _solver(calls)) == 0
    assert calls == []


@pytest.mark.parametrize("groups", [
    [["S0", "S1", "S2", "S3"]],        # the first copy's own select names only
    [["s0", "s1", "s2", "s3"]],        # matched without regard to case
    [["S0", "S1", "S2", "S3_2"]],      # a group across two copies: "at most one" in each
])
def test_constraints_on_an_array_same_report(tmp_path, groups):
    path = str(tmp_path / "m.gds")
    mixed_block(2, 2, ["DOMINO_MUX4"]).write_gds(path)
    circuit = extract_layout(path, dsk18(), "MIXED_BLOCK")
    cons = parse_constraints({"one_hot": groups})
    a, b = both_ways(circuit, dsk18(), cons, "c.toml")
    assert a == b


def test_case_ambiguous_constraint_analysed_directly():
    # nets "A" and "a" both in the stage: a constraint on "A" is not keyed
    tech = make_tech()
    circuit, stage = domino(tech, [("MA", "X", "A", "n1"), ("MB", "n1", "a", "FOOT")],
                            {"X": dict(linear=30.0), "n1": dict(linear=10.0)})
    cons = parse_constraints({"fixed": {"A": 1}})
    assert stage_context(circuit, stage, tech, cons)[0] is None
    assert stage_context(circuit, stage, tech, None)[0] is not None
    ctx = StageContexts(circuit, tech, cons, analyze_stage)
    assert ctx.analyse(stage) == analyze_stage(circuit, stage, tech, cons)
    assert ctx.analysed == ctx.reused == 0


# --------------------------------------------------------------- key properties

TECH = make_tech()
SHAPES = {
    "footed nand3": dict(evaluation=[("MA", "X", "A", "n1"), ("MB", "n1", "B", "n2"), ("MC", "n2", "C", "FOOT")],
                         caps={"X": dict(linear=30.0, nmos=(0.5, 2.0, 1.0)), "n1": dict(linear=10.0),
                               "n2": dict(linear=5.0, nmos=(0.3, 1.0, 2.0))}, secondary=("n2",)),
    "footless p-type nor": dict(evaluation=[("MA", "X", "A", "p1"), ("MB", "p1", "B", "VDD"),
                                            ("MC", "X", "C", "VDD")],
                                caps={"X": dict(linear=20.0, pmos=(0.4, 2.0, 1.0)), "p1": dict(linear=4.0)},
                                polarity="p", footed=False),
}


def _built(shape):
    kw = dict(SHAPES[shape])
    return domino(TECH, kw.pop("evaluation"), kw.pop("caps"), **kw)


def _stage_nets(circuit, stage):
    return stage_context(circuit, stage, TECH)[1]


def _perturbations(circuit, stage):
    """Every single change of one analysed quantity: ``(what, circuit, stage,
    constraints)`` with the changed copy."""
    out = []
    nets = _stage_nets(circuit, stage)
    devs = stage_context(circuit, stage, TECH)[2]

    def with_device(name, **change):
        return dataclasses.replace(circuit, devices=[dataclasses.replace(d, **change) if d.name == name else d
                                                     for d in circuit.devices])

    def with_net(name, **change):
        return dataclasses.replace(circuit, nets={n: dataclasses.replace(x, **change) if n == name else x
                                                  for n, x in circuit.nets.items()})

    for name in devs:
        d = circuit.device(name)
        for f in ("w_um", "l_um", "ad_um2", "as_um2", "pd_um", "ps_um"):
            out.append((f"{name}.{f}", lambda f=f, d=d, name=name, dv=0.0: with_device(name, **{f: getattr(d, f) + dv})))
        out.append((f"{name}.type", lambda d=d, name=name, dv=0.0: with_device(
            name, type="pmos" if d.type == "nmos" else "nmos")))
        out.append((f"{name}.model", lambda name=name, dv=0.0: with_device(name, model="other")))
        for term in ("drain", "gate", "source"):
            here = getattr(d, term)
            for other in [n for n in nets if n != here][:3] + ["NEWNET"]:
                out.append((f"{name}.{term}={other}",
                            lambda term=term, other=other, name=name, dv=0.0: with_device(name, **{term: other})))
    for n in nets:
        net = circuit.nets[n]
        for f in dataclasses.fields(CapParts):
            out.append((f"{n}.cap.{f.name}", lambda n=n, net=net, f=f, dv=0.0: with_net(
                n, cap=dataclasses.replace(net.cap, **{f.name: getattr(net.cap, f.name) + dv}))))
        for role in ("signal", "power", "ground", "clock"):
            if role != net.role:
                out.append((f"{n}.role={role}", lambda n=n, role=role, dv=0.0: with_net(n, role=role)))
        for t in ("nmos", "pmos"):
            geo = net.junctions.get(t)
            if geo is None:
                out.append((f"{n}.junctions+{t}", lambda n=n, t=t, net=net, dv=0.0: with_net(
                    n, junctions={**net.junctions, t: JunctionGeometry(0.1 + dv, 0.0, 0.0)})))
                continue
            out.append((f"{n}.junctions-{t}", lambda n=n, t=t, net=net, dv=0.0: with_net(
                n, junctions={k: v for k, v in net.junctions.items() if k != t})))
            for f in dataclasses.fields(JunctionGeometry):
                out.append((f"{n}.junctions.{t}.{f.name}", lambda n=n, t=t, net=net, f=f, geo=geo, dv=0.0: with_net(
                    n, junctions={**net.junctions, t: dataclasses.replace(geo, **{f.name: getattr(geo, f.name) + dv})})))
    return out


def _stage_changes(stage):
    out = [("polarity", dict(polarity="n" if stage.polarity == "p" else "p")),
           ("evaluation order", dict(evaluation=stage.evaluation[::-1])),
           ("keepers", dict(keepers=())),
           ("receivers", dict(receivers=())),
           ("two receivers", dict(receivers=stage.receivers * 2)),
           ("receiver output", dict(receivers=tuple(Receiver(r.nmos, r.pmos, "X") for r in stage.receivers))),
           ("inputs", dict(inputs=stage.inputs[:-1])),
           ("internal nodes", dict(internal_nodes=stage.internal_nodes[:-1])),
           ("clock", dict(clock=stage.supply)),
           ("secondary precharge", dict(secondary_precharge={} if stage.secondary_precharge
                                        else {stage.internal_nodes[0]: stage.precharge[0]}))]
    if stage.footer:
        out += [("footer", dict(footer=None, footer_node=None))]
    return [(w, c) for w, c in out if dataclasses.replace(stage, **c) != stage]


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(shape=st.sampled_from(sorted(SHAPES)), data=st.data(),
       dv=st.floats(min_value=1e-12, max_value=5.0, allow_nan=False) | st.floats(min_value=-5.0, max_value=-1e-12))
def test_one_analysed_quantity_changed_never_shares_a_key(shape, data, dv):
    circuit, stage = _built(shape)
    key = stage_context(circuit, stage, TECH)[0]
    what, make = data.draw(st.sampled_from(_perturbations(circuit, stage)), label="change")
    changed = make(dv=dv)
    assert stage_context(changed, stage, TECH)[0] != key, what


@pytest.mark.parametrize("shape", sorted(SHAPES))
def test_every_stage_field_and_constraint_changes_the_key(shape):
    circuit, stage = _built(shape)
    key = stage_context(circuit, stage, TECH)[0]
    for what, change in _stage_changes(stage):
        assert stage_context(circuit, dataclasses.replace(stage, **change), TECH)[0] != key, what
    a, b = stage.inputs[0], stage.inputs[1]
    cons = [parse_constraints(c) for c in ({"fixed": {a: 1}}, {"fixed": {a: 0}}, {"fixed": {b: 1}},
                                           {"complement": [[a, b]]}, {"one_hot": [[a, b]]},
                                           {"one_hot": [[a, b, "ELSEWHERE"]]}, {"fixed": {a.lower(): 1}})]
    keys = [key] + [stage_context(circuit, stage, TECH, c)[0] for c in cons]
    assert len(set(keys)) == len(keys)
    # a constraint on no net of the stage bears on nothing: same key as none
    assert stage_context(circuit, stage, TECH, parse_constraints({"fixed": {"ELSEWHERE": 1}}))[0] == \
        stage_context(circuit, stage, TECH, parse_constraints({}))[0]


def _renamed(circuit, stage, rename):
    """The circuit and stage with every net and device name mapped."""
    r = lambda n: None if n is None else rename(n)  # noqa: E731
    nets = {rename(n): dataclasses.replace(x, name=rename(n)) for n, x in circuit.nets.items()}
    devs = [dataclasses.replace(d, name=rename(d.name), drain=rename(d.drain), gate=rename(d.gate),
                                source=rename(d.source)) for d in circuit.devices]
    st_ = dataclasses.replace(
        stage, dynamic_node=rename(stage.dynamic_node), clock=rename(stage.clock), supply=rename(stage.supply),
        rail=rename(stage.rail), precharge=tuple(map(rename, stage.precharge)),
        evaluation=tuple(map(rename, stage.evaluation)), footer=r(stage.footer), footer_node=r(stage.footer_node),
        inputs=tuple(sorted(map(rename, stage.inputs))),
        internal_nodes=tuple(sorted(map(rename, stage.internal_nodes))),
        keepers=tuple(map(rename, stage.keepers)),
        receivers=tuple(Receiver(rename(x.nmos), rename(x.pmos), rename(x.output)) for x in stage.receivers),
        secondary_precharge={rename(n): rename(d) for n, d in stage.secondary_precharge.items()})
    return Circuit(circuit.cell, nets, devs), st_


@pytest.mark.parametrize("shape", sorted(SHAPES))
def test_order_preserving_renaming_shares_the_key_and_the_result(shape):
    circuit, stage = _built(shape)
    # a common prefix keeps the order of any two names; the roles are the nets' own
    other, ostage = _renamed(circuit, stage, lambda n: f"I7/{n}")
    key = stage_context(circuit, stage, TECH)[0]
    assert stage_context(other, ostage, TECH)[0] == key
    ctx = StageContexts(other, TECH, None, analyze_stage)
    ctx.analyse(dataclasses.replace(ostage))
    # the reused result of the renamed stage equals its own analysis
    assert ctx.analyse(ostage) == analyze_stage(other, ostage, TECH)
    assert ctx.analysed == 1 and ctx.reused == 1


def test_order_of_names_is_part_of_the_key():
    # swapping the names of two inputs swaps their sorted order: another key
    circuit, stage = _built("footed nand3")
    swap = {"A": "C", "C": "A"}
    other, ostage = _renamed(circuit, stage, lambda n: swap.get(n, n))
    assert stage_context(other, ostage, TECH)[0] != stage_context(circuit, stage, TECH)[0]
