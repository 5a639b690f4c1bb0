"""Hand-built circuits and stages for the charge-sharing tests.

The numbers are those of the invented dsk18 demo process (1.8 V); none
describes a real process.  :func:`domino` builds a whole dynamic gate
(precharge, evaluation network, optional footer, keeper, receiver
inverter, secondary precharge devices) as a :class:`Circuit` with the
matching :class:`Stage`, so tests need not run stage recognition.
"""

from __future__ import annotations

import itertools

import networkx as nx

from analyze.physics.charge import NodeCharge, node_charge
from analyze.physics.redistribution import network_final_voltage
from analyze.physics.threshold import pass_limit
from extract.circuit import CapParts, Circuit, Device, JunctionGeometry, Net
from extract.tech import MosParams, NetRoles, Tech
from analyze.stages.stage import Receiver, Stage

__all__ = ["NMOS", "PMOS", "make_tech", "make_net", "domino", "mux", "allowed", "brute_force"]

NMOS = dict(vt0=0.45, gamma=0.45, phi=0.85, kp=280.0, cox=8.5, cgo=0.25, cj=0.95, cjsw=0.22,
            cjswg=0.22, mj=0.40, mjsw=0.30, pb=0.80, pbsw=0.80)
PMOS = dict(vt0=-0.48, gamma=0.40, phi=0.80, kp=65.0, cox=8.5, cgo=0.25, cj=1.10, cjsw=0.28,
            cjswg=0.28, mj=0.45, mjsw=0.32, pb=0.85, pbsw=0.85)


def make_tech(vdd: float = 1.8, guard: float = 0.05, nmos: dict | None = None,
              pmos: dict | None = None) -> Tech:
    """A dsk18-like Tech; ``nmos``/``pmos`` override single parameters.

    With the defaults ``cjswg = cjsw`` and ``pbsw = pb``, as the SPICE
    level-1 model needs for a like-for-like ngspice reference.
    """
    n = MosParams("nmos", **{**NMOS, **(nmos or {})})
    p = MosParams("pmos", **{**PMOS, **(pmos or {})})
    return Tech("dsk18", vdd, NetRoles(("VDD",), ("VSS",), ("CLK",)), {}, {"nmos": n, "pmos": p},
                guard=guard)


def make_net(name: str, tech: Tech, linear: float = 0.0, nmos=None, pmos=None,
             role: str = "signal", location=None) -> Net:
    """A net with ``linear`` fF of wire capacitance and junctions given as
    ``(area µm², field perimeter µm, gate perimeter µm)`` per type; the
    CapParts are computed from the tech (cj·A, cjsw·P_field, cjswg·P_gate)."""
    junctions, cap = {}, CapParts(wire=linear)
    for t, geo in (("nmos", nmos), ("pmos", pmos)):
        if geo is None:
            continue
        g = JunctionGeometry(*geo)
        junctions[t] = g
        p = tech.mos[t]
        cap = cap + CapParts(junction_area=p.cj * g.area_um2,
                             junction_sidewall=p.cjsw * g.field_perimeter_um,
                             junction_gate_edge=p.cjswg * g.gate_perimeter_um)
    return Net(name, role=role, cap=cap, junctions=junctions, location_um=location,
               labels=(name,), labelled=True)


def domino(tech: Tech, evaluation, caps: dict, *, polarity: str = "n", footed: bool = True,
           secondary=(), keeper: bool = True, receivers=((1.0, 0.18, 2.0, 0.18),),
           wl=(1.0, 0.18)):
    """A dynamic gate and its Stage.

    Parameters
    ----------
    evaluation : list of (name, a, gate, b)
        Evaluation devices; terminals name nets, ``"X"`` is the dynamic
        node, ``"FOOT"`` the footer node (or write the rail, ``"VSS"`` for
        n-type, ``"VDD"`` for p-type, for a footless stage).
    caps : dict of net -> dict
        Keyword arguments of :func:`make_net` (``linear``, ``nmos``, ``pmos``)
        for each net that has capacitance.
    polarity : "n" or "p"
    secondary : iterable of str
        Internal nodes with a clocked precharge (predischarge) device.
    receivers : tuple of (Wn, Ln, Wp, Lp)
        One inverter per entry, reading X.
    """
    n_type = polarity == "n"
    ev_type, pre_type = ("nmos", "pmos") if n_type else ("pmos", "nmos")
    supply, rail = ("VDD", "VSS") if n_type else ("VSS", "VDD")
    w, l = wl
    devs = [Device("MPRE", pre_type, "X", "CLK", supply, 1.0, 0.18)]
    for name, a, g, b in evaluation:
        devs.append(Device(name, ev_type, a, g, b, w, l))
    if footed:
        devs.append(Device("MFOOT", ev_type, "FOOT", "CLK", rail, 2.0, 0.18))
    keepers = ()
    if keeper:
        devs.append(Device("MKEEP", pre_type, "X", "OUT0", supply, 0.3, 0.5))
        keepers = ("MKEEP",)
    recs = []
    for k, (wn, ln, wp, lp) in enumerate(receivers):
        out = f"OUT{k}"
        devs.append(Device(f"MRN{k}", "nmos", out, "X", "VSS", wn, ln))
        devs.append(Device(f"MRP{k}", "pmos", out, "X", "VDD", wp, lp))
        recs.append(Receiver(f"MRN{k}", f"MRP{k}", out))
    sec = {}
    for k, node in enumerate(sorted(secondary)):
        devs.append(Device(f"MSEC{k}", pre_type, node, "CLK", supply, 0.5, 0.18))
        sec[node] = f"MSEC{k}"
    names = {t for d in devs for t in (d.drain, d.gate, d.source)}
    if keeper and "OUT0" not in names:
        names.add("OUT0")
    nets = {}
    for i, n in enumerate(sorted(names)):
        role = tech.role_of(n)
        nets[n] = make_net(n, tech, role=role, location=(float(i), 0.5), **caps.get(n, {}))
    ev_names = tuple(e[0] for e in evaluation)
    fixed = {"X", "FOOT", rail}
    internal = sorted({t for _, a, _, b in evaluation for t in (a, b)} - fixed)
    stage = Stage(
        dynamic_node="X", polarity=polarity, clock="CLK", supply=supply, rail=rail,
        precharge=("MPRE",), evaluation=ev_names, footer="MFOOT" if footed else None,
        footer_node="FOOT" if footed else None,
        inputs=tuple(sorted({e[2] for e in evaluation})), internal_nodes=tuple(internal),
        keepers=keepers, receivers=tuple(recs), secondary_precharge=sec, location_um=(0.0, 0.5),
    )
    circuit = Circuit("test", dict(sorted(nets.items())), sorted(devs, key=lambda d: d.name))
    return circuit, stage


def mux(tech: Tech, legs: int, x_linear: float = 6.0):
    """A footed domino OR-mux: legs X – S_i – m_i – D_i – FOOT.

    Mid-node capacitances vary from leg to leg (wire 0.2–0.7 fF plus a
    junction); returns ``(circuit, stage)``.
    """
    ev = []
    caps = {"X": dict(linear=x_linear, nmos=(0.5 * legs, 1.5 * legs, 1.0 * legs),
                      pmos=(0.6, 2.0, 1.0))}
    for i in range(legs):
        ev.append((f"MS{i:02d}", "X", f"S{i:02d}", f"m{i:02d}"))
        ev.append((f"MD{i:02d}", f"m{i:02d}", f"D{i:02d}", "FOOT"))
        caps[f"m{i:02d}"] = dict(linear=0.2 + 0.05 * ((7 * i) % 11), nmos=(0.5, 1.5, 2.0))
    return domino(tech, ev, caps)


def allowed(pattern: dict, constraints) -> bool:
    """The constraint definitions of the README, checked directly."""
    if constraints is None:
        return True
    return (
        all(sum(pattern[n] for n in g) == 1 for g in constraints.one_hot)
        and all(pattern[a] != pattern[b] for a, b in constraints.complement)
        and all(pattern[n] == v for n, v in constraints.fixed)
    )


def brute_force(circuit, stage, tech, constraints=None, precharged=()):
    """``(count, best)`` by enumeration of every pattern: ``best`` is
    ``((rounded normalised v_final, pattern tuple over sorted inputs), shared
    node set)`` or None.  Components by networkx, voltages by
    analyze.physics.redistribution.network_final_voltage on the component's
    conducting devices."""
    vdd = tech.vdd
    mirror = stage.polarity == "p"
    fixed = {stage.rail, stage.footer_node} - {None}
    devs = [circuit.device(n) for n in stage.evaluation]
    inputs = sorted({d.gate for d in devs})
    v_lim = pass_limit(tech.mos["pmos" if mirror else "nmos"], vdd)

    def charge(names):
        total = NodeCharge.linear(0.0, vdd)
        for n in names:
            q = node_charge(circuit.nets[n], tech)
            total = total + (q.mirrored() if mirror else q)
        return total

    count, best, memo = 0, None, {}
    for values in itertools.product((0, 1), repeat=len(inputs)):
        pat = dict(zip(inputs, values))
        if not allowed(pat, constraints):
            continue
        g = nx.Graph()
        g.add_node("X")
        for d in devs:
            if pat[d.gate] == (1 if d.type == "nmos" else 0):
                a, b = ("RAIL" if t in fixed else t for t in (d.drain, d.source))
                g.add_edge(a, b)
        comp = nx.node_connected_component(g, "X")
        if "RAIL" in comp:
            continue
        count += 1
        shared = frozenset(comp - {"X"})
        order = ["X", *sorted(shared)]
        edges = frozenset(frozenset(e) for e in g.subgraph(comp).edges())
        if (shared, edges) not in memo:
            pre = [k for k, n in enumerate(order) if n in stage.secondary_precharge or n in precharged]
            pairs = [(order.index(min(e)), order.index(max(e))) for e in edges]  # a loop: (i, i)
            r = network_final_voltage([charge([n]) for n in order], pre, pairs, v_lim)
            memo[shared, edges] = r.v_final
        key = (round(memo[shared, edges], 9), values)
        if best is None or key < best[0]:
            best = (key, shared)
    return count, best
