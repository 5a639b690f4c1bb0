"""The receiving inverter's response, measured from the foundry's models.

While the dynamic node falls through the receiver's switching region the
receiver's output starts to swing, and its gate–drain (Miller) charge
pushes back on the dynamic node: the node's lowest point comes while the
output is part-way.  The transient of the evaluation window
(:mod:`analyze.physics.transient`) needs two surfaces of each receiver,
over its input ``v_in`` (the voltage grid of
:class:`analyze.physics.device_tables.StageTables`) and its output
``v_out`` (:func:`output_levels`):

gate charge ``Q_g(v_in, v_out)``
    The charge on the inverter's input (both gates), fC, relative to
    ``v_in = v_out = 0``: for each output level, the charge a slow input
    ramp 0 → VDD draws with the output held there, plus, at ``v_in = 0``,
    the charge an output ramp draws from the (grounded) input — the offset
    between the levels.
output current ``I(v_in, v_out)``
    The static current the inverter drives into its output node, µA (the
    pmos pulling up less the nmos pulling down), from a DC sweep of the
    input per output level.

Output levels run from −0.2·VDD to 1.2·VDD in steps of VDD/20: coupling
pushes an output past the rail before its devices pull it back.

Notes
-----
One ngspice run per corner for all the receivers of a stage (cached with
the other tables): per output level one transient (input ramp 0 → VDD over
0.36 ns; the models' charges are quasi-static, so the ramp's speed does
not matter — the input capacitance agrees with ngspice's AC analysis in
the tests) and one DC sweep, the output held by a source changed with
``alter``.  A 1 fF capacitor on a ramp of its own calibrates sign and
integration, as for the charge tables.
"""

from __future__ import annotations

import numpy as np

from analyze.physics.lookup import bilinear_lookup, bilinear_lookups
from analyze.physics.ramp_charge import calibration, delivered_charge

__all__ = ["output_levels", "measure_responses", "ReceiverResponse", "OUTPUT_STEPS", "RAMP_START_NS", "RAMP_NS"]

#: Output levels per VDD: VDD / OUTPUT_STEPS apart.
OUTPUT_STEPS = 20
#: The input (and output) ramps: start and length, ns.  The models'
#: charges are quasi-static, so a ramp's speed does not change them; a
#: short one takes ngspice fewer steps.
RAMP_START_NS, RAMP_NS = 0.1, 0.36


def output_levels(vdd: float) -> np.ndarray:
    """The output voltages of the response tables, V.

    Examples
    --------
    >>> v = output_levels(1.8).round(3).tolist()
    >>> len(v), v[:6], v[-1]
    (29, [-0.36, -0.27, -0.18, -0.09, 0.0, 0.09], 2.16)
    """
    k = np.arange(-OUTPUT_STEPS // 5, OUTPUT_STEPS + OUTPUT_STEPS // 5 + 1)
    return vdd * k / OUTPUT_STEPS


def measure_responses(items, names, pruned, vdd: float, corner, transistor_line, deck, run_deck, steps: int, *,
                      temp_c: float) -> dict:
    """Measure the response surfaces of receiver ``items``.

    Parameters
    ----------
    items : list of list
        ``["r", nmos name, Wn, Ln, Wp, Lp]`` (µm), distinct inverters.
    names : dict of str to str
        ``"nmos"``/``"pmos"`` -> model (device subcircuit) name.
    pruned : analyze.simulator.models.PrunedModels
    vdd : float
    corner : str or None
    transistor_line, deck, run_deck : callable
        :func:`analyze.simulator.instances.transistor_line`,
        :func:`analyze.simulator.ngspice.deck`,
        :func:`analyze.simulator.ngspice.run_deck` (passed in: physics
        does not import the simulator at module level).
    steps : int
        Input grid: 0 … VDD in ``steps`` steps.
    temp_c : float
        Temperature of the deck, °C (``.temp``).

    Returns
    -------
    dict
        ``{"q": [Q_g rows per item], "i": [I rows per item]}``: per item a
        list over the input grid of lists over :func:`output_levels`.

    Raises
    ------
    InputError
        What ngspice refuses (:func:`analyze.simulator.ngspice.run_deck`).
    """
    if not items:
        return {"q": [], "i": []}
    kind = {t: pruned.kinds.get(n.lower(), "subckt") for t, n in names.items()}
    levels = output_levels(vdd)
    lo, hi = float(levels[0]), float(levels[-1])
    ramp = f"PWL(0 0 {RAMP_START_NS}n 0 {RAMP_START_NS + RAMP_NS:.6g}n {vdd:.6g})"
    lines = [f"Vdd vdd 0 {vdd:.6g}", f"Vcal cal 0 {ramp}", "Ccal cal 0 1f", "Vsw sw 0 0"]

    def inverter(tag, out, inp, it):
        _, _, wn, ln, wp, lp = it
        return [transistor_line(f"n{tag}", (out, inp, "0", "0"), names["nmos"], kind["nmos"], pruned.scale, wn, ln),
                transistor_line(f"p{tag}", (out, inp, "vdd", "vdd"), names["pmos"], kind["pmos"], pruned.scale,
                                wp, lp)]

    for k, it in enumerate(items):
        # input ramp, output held by Vo (gate charge); input at 0, output
        # ramped over every level (the offset between levels); input swept,
        # output held by Vd (static current)
        lines += [f"Vi{k} i{k} 0 {ramp}", f"Vo{k} o{k} 0 0", *inverter(f"q{k}", f"o{k}", f"i{k}", it)]
        lines += ["Vz{0} z{0} 0 0".format(k), f"Vr{k} r{k} 0 PWL(0 {lo:.6g} {RAMP_START_NS}n {lo:.6g} {RAMP_START_NS + RAMP_NS:.6g}n {hi:.6g})",
                  *inverter(f"z{k}", f"r{k}", f"z{k}", it)]
        lines += [f"Vd{k} d{k} 0 0", *inverter(f"d{k}", f"d{k}", "sw", it)]
    commands = []
    for j, level in enumerate(levels):
        commands += [f"alter Vo{k} dc = {level:.6g}" for k in range(len(items))]
        commands += [f"alter Vd{k} dc = {level:.6g}" for k in range(len(items))]
        commands += [f"tran 2p {RAMP_START_NS + RAMP_NS:.6g}n",
                     f"wrdata rq{j}.txt i(Vcal) " + " ".join(f"i(Vi{k}) i(Vz{k})" for k in range(len(items))),
                     f"dc Vsw 0 {vdd:.6g} {vdd / steps:.6g}",
                     f"wrdata ri{j}.txt " + " ".join(f"i(Vd{k})" for k in range(len(items)))]
    options = [f".temp {temp_c:g}"]
    if pruned.scale is not None:
        options.append(f".option scale={pruned.scale:.6g}")
    text = deck(f"dynshare: receiver response tables at corner {corner}", pruned.path, lines, commands, options)
    files = [f"rq{j}.txt" for j in range(len(levels))] + [f"ri{j}.txt" for j in range(len(levels))]
    res = run_deck(text, f"receiver response tables at corner {corner}", tables=files)
    grid = np.linspace(0.0, vdd, steps + 1)
    times = (RAMP_START_NS + RAMP_NS * grid / vdd) * 1e-9
    q_out = np.zeros((len(items), len(grid), len(levels)))
    i_out = np.zeros_like(q_out)
    offset = np.zeros((len(items), len(levels)))
    for j in range(len(levels)):
        table = res.tables[f"rq{j}.txt"]
        t = table[:, 0]
        q = delivered_charge(table)
        scale = calibration(grid, np.interp(times, t, q[:, 0]))
        cur = res.tables[f"ri{j}.txt"]
        for k in range(len(items)):
            q_out[k, :, j] = np.interp(times, t, q[:, 1 + 2 * k]) * scale
            if j == 0:
                # the grounded input's charge as the output ramps lo -> hi
                at = (RAMP_START_NS + RAMP_NS * (levels - lo) / (hi - lo)) * 1e-9
                zq = np.interp(at, t, q[:, 2 + 2 * k]) * scale
                offset[k] = zq - np.interp(0.0, levels, zq)
            # the current into the output node: SPICE's branch current of
            # the holding source (flowing in at its + terminal)
            i_out[k, :, j] = cur[:len(grid), 1 + k] * 1e6
    q_out += offset[:, None, :]
    return {"q": q_out.tolist(), "i": i_out.tolist()}


class ReceiverResponse:
    """Lookups of one receiver's response surfaces on plain floats.

    Parameters
    ----------
    v_in : array_like
        The input grid, V (even).
    v_out : array_like
        :func:`output_levels`, V.
    charge, current : array_like
        ``Q_g`` (fC) and ``I`` (µA) over ``v_in`` × ``v_out``.

    Attributes
    ----------
    current : callable
        ``current(v_in, v_out)``, µA into the output.
    dq_din, dq_dout : callable
        The partial derivatives of ``Q_g``, fF (finite differences of the
        table, interpolated bilinearly).
    charge : callable
        ``charge(v_in, v_out)``, fC.
    at : callable
        ``at(v_in, v_out, nan)`` -> ``[dq_din, dq_dout, current]`` at one
        point (one cell search for the three; ``nan`` for a NaN argument).

    Notes
    -----
    Arguments past the tables are taken at their edge.

    Examples
    --------
    A linear gate–drain capacitor of 0.2 fF and a gate capacitance of
    1 fF: ``Q_g = 1.2·v_in − 0.2·v_out``.

    >>> vin, vout = np.linspace(0, 1.8, 19), output_levels(1.8)
    >>> q = 1.2 * vin[:, None] - 0.2 * vout[None, :]
    >>> r = ReceiverResponse(vin, vout, q, np.zeros_like(q))
    >>> round(r.charge(0.9, 0.45), 6), round(r.dq_din(0.9, 0.45), 6), round(r.dq_dout(0.9, 0.45), 6)
    (0.99, 1.2, -0.2)
    >>> [round(x, 6) for x in r.at(0.9, 0.45, None)]
    [1.2, -0.2, 0.0]
    """

    def __init__(self, v_in, v_out, charge, current):
        v_in = np.asarray(v_in, dtype=float)
        v_out = np.asarray(v_out, dtype=float)
        q = np.asarray(charge, dtype=float)
        d_in, d_out = np.gradient(q, v_in, axis=0), np.gradient(q, v_out, axis=1)
        i = np.asarray(current, dtype=float)
        self.charge = bilinear_lookup(v_in, v_out, q)
        self.dq_din = bilinear_lookup(v_in, v_out, d_in)
        self.dq_dout = bilinear_lookup(v_in, v_out, d_out)
        self.current = bilinear_lookup(v_in, v_out, i)
        self.at = bilinear_lookups(v_in, v_out, [d_in, d_out, i])
