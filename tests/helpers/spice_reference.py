"""Transient ngspice decks that reproduce one charge-sharing event.

Used by the tests (ngspice is the reference simulator).  A deck holds the
whole circuit with SPICE level-1 MOSFETs, so the simulator itself decides
how charge moves, where devices cut off and what the junctions store:

* every net's junction geometry is put on one device terminal of that
  type on the net as AD/AS and PD/PS (level 1 has one sidewall, so PD =
  field edges + gate edge; the tech must have ``cjswg = cjsw`` and
  ``pbsw = pb``), or on a junction-only device (drain = source = the net)
  when no device of that type touches the net;
* the linear part (wire + gate + overlap) is an explicit capacitor, as
  level 1 without ``tox`` has no gate capacitance (``cgso = cgdo = cgbo =
  0``);
* supplies, the clock (evaluation level: precharge devices off, footer on),
  the inputs and every keeper gate are DC sources.  A keeper's gate is
  held at its off level because the keeper would otherwise conduct (its
  gate is the receiver output, low while the dynamic node is high) and
  restore the node: the analysis checks the charge-conservation droop
  without keeper help, so the reference must show that droop too;
* ``.ic`` for every net (supplies and inputs too) and ``.tran … uic``;
  ``v(X)`` is read with ``meas … find … at=`` after it has settled.
"""

from __future__ import annotations

from extract.circuit import Circuit
from extract.tech import Tech
from analyze.stages.stage import Stage

__all__ = ["model_cards", "spice_names", "transient_deck"]


def model_cards(tech: Tech) -> str:
    """``.model`` lines for ``nmod``/``pmod`` (level 1) in SI units.

    fF/µm² → 1e-3 F/m², fF/µm → 1e-9 F/m, µA/V² → 1e-6 A/V².
    """
    lines = []
    for t, name in (("nmos", "nmod"), ("pmos", "pmod")):
        p = tech.mos[t]
        if abs(p.cjswg - p.cjsw) > 1e-12 or abs(p.pbsw - p.pb) > 1e-12:
            raise ValueError("a level-1 reference needs cjswg = cjsw and pbsw = pb")
        lines.append(
            f".model {name} {t} level=1 vto={p.vt0:.6g} kp={p.kp * 1e-6:.6g} gamma={p.gamma:.6g} "
            f"phi={p.phi:.6g} lambda=0 cj={p.cj * 1e-3:.6g} cjsw={p.cjsw * 1e-9:.6g} "
            f"mj={p.mj:.6g} mjsw={p.mjsw:.6g} pb={p.pb:.6g} cgso=0 cgdo=0 cgbo=0"
        )
    return "\n".join(lines)


def spice_names(circuit: Circuit) -> dict[str, str]:
    """A SPICE node name per net.  SPICE folds case, so nets whose names
    differ only in case (``A0`` and ``a0``), or that are not plain
    identifiers, get numbered names instead."""
    folded: dict[str, int] = {}
    for n in circuit.nets:
        folded[n.lower()] = folded.get(n.lower(), 0) + 1
    out = {}
    for k, n in enumerate(circuit.nets):
        plain = n.replace("_", "").isalnum() and n.lower() != "0" and folded[n.lower()] == 1
        out[n] = n if plain else f"net{k}_"
    return out


def _rail_nets(circuit: Circuit) -> tuple[str, str]:
    power = [n.name for n in circuit.nets.values() if n.role == "power"]
    ground = [n.name for n in circuit.nets.values() if n.role == "ground"]
    return power[0], ground[0]


def transient_deck(
    circuit: Circuit,
    stage: Stage,
    tech: Tech,
    inputs: dict[str, int],
    *,
    precharged=(),
    probes=(),
    t_stop_ns: float = 80.0,
    t_step_ns: float = 0.005,
) -> str:
    """A deck that prints ``vx = <v(X) at t_stop>`` and ``v_<net> = ...``
    for each net of ``probes``.

    Parameters
    ----------
    circuit, stage, tech
    inputs : dict of str to int
        Value of every stage input.
    precharged : iterable of str
        Extra internal nodes that start at the dynamic node's level.
    probes : iterable of str
        Further nets whose final voltage to print.
    t_stop_ns : float
        Simulated time; ``v(X)`` is read at its end.
    t_step_ns : float
        ``.tran`` step (also the largest internal step ngspice takes).
    """
    vdd = tech.vdd
    n_type = stage.polarity == "n"
    high, low = (vdd, 0.0) if n_type else (0.0, vdd)  # dynamic node's start, and the other level
    power, ground = _rail_nets(circuit)
    held = {power: vdd, ground: 0.0, stage.clock: vdd if n_type else 0.0}
    for name, value in inputs.items():
        held[name] = vdd * value
    for k in stage.keepers:
        d = circuit.device(k)
        held[d.gate] = vdd if d.type == "pmos" else 0.0
    starts = {n: low for n in circuit.nets}
    starts[stage.dynamic_node] = high
    for n in set(stage.secondary_precharge) | set(precharged):
        starts[n] = high
    if stage.footer_node:
        starts[stage.footer_node] = 0.0 if n_type else vdd
    for rec in stage.receivers:  # receiver outputs start opposite to the node
        starts[rec.output] = low
    starts.update(held)

    node = spice_names(circuit)
    lines = ["* charge-sharing reference", model_cards(tech)]
    for k, (net, v) in enumerate(sorted(held.items())):
        lines.append(f"Vh{k} {node[net]} 0 DC {v:.9g}")
    devices = {d.name: d for d in circuit.devices}
    extra = {name: {} for name in devices}
    dummies = []
    for net in circuit.nets.values():
        for t, geo in net.junctions.items():
            if geo.empty:
                continue
            perim = geo.field_perimeter_um + geo.gate_perimeter_um
            host = next((d for d in circuit.devices if d.type == t and net.name in (d.drain, d.source)), None)
            if host is None:
                dummies.append((net.name, t, geo.area_um2, perim))
            elif host.drain == net.name:
                extra[host.name].update(ad=geo.area_um2, pd=perim)
            else:
                extra[host.name].update(**{"as": geo.area_um2, "ps": perim})
    for d in circuit.devices:
        j = extra[d.name]
        body = ground if d.type == "nmos" else power
        model = "nmod" if d.type == "nmos" else "pmod"
        lines.append(
            f"M{d.name} {node[d.drain]} {node[d.gate]} {node[d.source]} {node[body]} {model} "
            f"w={d.w_um:.6g}u l={d.l_um:.6g}u "
            f"ad={j.get('ad', 0):.6g}p as={j.get('as', 0):.6g}p "
            f"pd={j.get('pd', 0):.6g}u ps={j.get('ps', 0):.6g}u"
        )
    for k, (net, t, area, perim) in enumerate(dummies):
        body, off = (ground, ground) if t == "nmos" else (power, power)
        model = "nmod" if t == "nmos" else "pmod"
        lines.append(f"Mjunc{k} {node[net]} {node[off]} {node[net]} {node[body]} {model} w=1u l=1u "
                     f"ad={area:.6g}p pd={perim:.6g}u")
    for k, net in enumerate(circuit.nets.values()):
        if net.cap.linear > 0:
            lines.append(f"Clin{k} {node[net.name]} 0 {net.cap.linear:.9g}f")
    lines.append(".ic " + " ".join(f"v({node[n]})={v:.9g}" for n, v in sorted(starts.items())))
    lines.append(".options reltol=1e-5 abstol=1e-16 vntol=1e-8 method=gear")
    lines.append(f".tran {t_step_ns:g}n {t_stop_ns:g}n uic")
    lines.append(".control")
    lines.append("run")
    lines.append(f"meas tran vx find v({node[stage.dynamic_node]}) at={t_stop_ns:g}n")
    for net in probes:
        lines.append(f"meas tran v_{net} find v({node[net]}) at={t_stop_ns:g}n")
    lines.append(".endc")
    lines.append(".end")
    return "\n".join(lines) + "\n"
