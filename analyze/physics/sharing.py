"""A dynamic stage as a charge-sharing problem: switches, nodes, charges.

:func:`build_model` turns a :class:`~analyze.stages.stage.Stage` of a
:class:`~extract.circuit.Circuit` into a :class:`SharingModel`: the
evaluation devices as switches between numbered nodes (node 0 is the
dynamic node, the rail and the footer node are one fixed node), each node's
charge model, which nodes start precharged, and the pass limit.

Everything inside is *normalised* to the n-type view: for a p-type stage
voltages are mirrored, ``u = vdd − V``, so the dynamic node always starts
at ``vdd``, internal nodes at 0 unless pre-conditioned, and conducting
devices pass up to ``v_lim``.  :meth:`SharingModel.outcome` turns results
back into real voltages.

Node sets and device sets are Python ``int`` bitmasks (bit i = node i or
device i).
"""

from __future__ import annotations

import copy as _copy
from dataclasses import dataclass, field

import numpy as np

from analyze.physics.charge import NodeCharge, node_charge
from analyze.physics.redistribution import (
    Redistribution,
    final_voltage,
    linear_final_voltage,
    network_final_voltage,
)
from analyze.stages.stage import Stage
from analyze.physics.threshold import pass_limit
from extract.circuit import Circuit
from extract.tech import Tech

__all__ = ["RAIL", "WorstCase", "SharingModel", "build_model"]

#: Node index of the rail (and footer node) in device terminal arrays.
RAIL = -1


@dataclass
class WorstCase:
    """One counted input pattern and what it does to the dynamic node.

    Attributes
    ----------
    inputs : dict of str to int
        Every stage input, 0 or 1.
    shared_nodes : list of str
        Nets joined to the dynamic node through conducting devices, sorted.
    v_final : float
        Final dynamic-node voltage (junction charge, pass limit), V.
    v_final_linear : float
        Final voltage from zero-bias capacitances, no pass limit, V.
    droop_v : float
        ``|start − v_final|``, V.
    regime : str
        ``"a"``, ``"b"`` or ``"c"`` (see :mod:`analyze.physics.redistribution`).
    case : str or None
        The input-arrival case (``"rising"``/``"settled"``) when the final
        voltage came from the foundry models' device charges
        (:mod:`analyze.physics.device_charge`); None for the lumped model.
    """

    inputs: dict[str, int]
    shared_nodes: list[str]
    v_final: float
    v_final_linear: float
    droop_v: float
    regime: str = ""
    case: str | None = None


@dataclass(eq=False)
class SharingModel:
    """A stage ready for pattern evaluation (see the module text).

    Attributes
    ----------
    stage : Stage
    vdd : float
    nodes : tuple of str
        Node names; index 0 is the dynamic node, then the other nets of the
        evaluation network, sorted.
    charges : tuple of NodeCharge
        Normalised charge model of each node.
    zero_bias : ndarray
        Zero-bias total capacitance of each node, fF.
    precharged : int
        Bitmask of nodes (never node 0) that start at the dynamic node's
        level: secondary precharge plus any extra pre-conditioned nodes.
    inputs : tuple of str
        Stage inputs, sorted.
    devices : tuple of str
        Evaluation devices, in order.
    dev_a, dev_b : tuple of int
        Terminal nodes of each device (:data:`RAIL` for rail / footer node).
    dev_input : tuple of int
        Index into ``inputs`` of each device's gate; -1 for a device whose
        gate is held on (a supply or the clock).
    dev_on : tuple of int
        Gate value that makes each device conduct (1 nmos, 0 pmos).
    v_lim : float
        Pass limit, normalised, V.
    always_on : int
        Bitmask of the devices whose gate is held on.
    """

    stage: Stage
    vdd: float
    nodes: tuple[str, ...]
    charges: tuple[NodeCharge, ...]
    zero_bias: np.ndarray
    precharged: int
    inputs: tuple[str, ...]
    devices: tuple[str, ...]
    dev_a: tuple[int, ...]
    dev_b: tuple[int, ...]
    dev_input: tuple[int, ...]
    dev_on: tuple[int, ...]
    v_lim: float
    always_on: int = 0
    _cache: dict = field(default_factory=dict, repr=False)

    def __post_init__(self):
        self._index_devices()
        self.all_nodes = (1 << len(self.nodes)) - 1
        # Every node carries the same junction parts (analyze.physics.charge.JUNCTION_KINDS),
        # so sums of nodes are sums of rows; share the part arrays for fast addition.
        first = self.charges[0]
        for q in self.charges:
            if not first._same_parts(q):
                raise ValueError("every node must carry the same junction parts")
        self.charges = tuple(first.like(q.c_lin, q.c0, q.vdd) for q in self.charges)
        self._c_lin = np.array([q.c_lin for q in self.charges])
        self._c0 = np.array([q.c0 for q in self.charges])

    def _index_devices(self) -> None:
        """Per node: its devices, those to the rail, the node across each
        other one (device bit -> node) and the nodes one device away; per
        device bit its two ends."""
        self.node_devices = [0] * len(self.nodes)
        self._to_rail = [0] * len(self.nodes)
        self._across: list[dict[int, int]] = [{} for _ in self.nodes]
        self._ends = {1 << d: (a, b) for d, (a, b) in enumerate(zip(self.dev_a, self.dev_b)) if a != b}
        for d, (a, b) in enumerate(zip(self.dev_a, self.dev_b)):
            for s, t in ((a, b), (b, a)):
                if s != RAIL and s != t:
                    self.node_devices[s] |= 1 << d
                    if t == RAIL:
                        self._to_rail[s] |= 1 << d
                    else:
                        self._across[s][1 << d] = t
        self._near = [0] * len(self.nodes)  # nodes one device away (any device)
        for s, other in enumerate(self._across):
            for t in other.values():
                self._near[s] |= 1 << t

    # -- switch network ------------------------------------------------------
    def with_precharged(self, names) -> "SharingModel":
        """The same stage with the nodes ``names`` also starting precharged.

        The copy shares the cache of final voltages (a final voltage depends
        only on which discharged and precharged nodes share, and on which
        devices among them conduct).

        Raises
        ------
        ValueError
            For a name that is not a node of the evaluation network other
            than the dynamic node.
        """
        mask = self.precharged
        for name in names:
            if name not in self.nodes[1:]:
                raise ValueError(f"{name!r} is not an internal node of the stage")
            mask |= 1 << self.nodes.index(name)
        if mask == self.precharged:
            return self
        copy = _copy.copy(self)  # the switch network and charges as they are, prepared once
        copy.precharged = mask
        return copy

    def conducting(self, values) -> int:
        """Bitmask of devices that conduct for input ``values`` (in ``inputs`` order)."""
        on = self.always_on
        for d, (i, v) in enumerate(zip(self.dev_input, self.dev_on)):
            if i >= 0 and values[i] == v:
                on |= 1 << d
        return on

    def component(self, on: int) -> tuple[int, bool]:
        """Nodes joined to the dynamic node through devices ``on``.

        Returns ``(node bitmask, tied)``; ``tied`` is True when the rail is
        reached.  The rail is never passed through.  Depth-first search
        that, at each node, walks only the set bits of ``on`` among the
        node's devices: O(conducting devices at the nodes reached).
        """
        return self._grow(1, False, [0], on)

    def component_from(self, seen: int, tied: bool, on: int, new: int) -> tuple[int, bool]:
        """:meth:`component` of ``on``, given ``(seen, tied)``, the component
        of ``on & ~new`` (fewer devices conducting).

        A component only grows as devices turn on, so the search starts
        from ``seen``: a new device with an end in ``seen`` adds its other
        end, and the nodes so added are searched as in :meth:`component`.
        O(new devices + conducting devices at the nodes added), where a
        fresh search is O(conducting devices at every node reached).

        Examples
        --------
        >>> m = SharingModel.__new__(SharingModel)
        >>> m.nodes, m.dev_a, m.dev_b = ("X", "a", "b"), (0, 1, 2), (1, 2, RAIL)
        >>> m._index_devices()
        >>> m.component(0b001)
        (3, False)
        >>> m.component_from(3, False, 0b011, 0b010), m.component(0b011)
        ((7, False), (7, False))
        >>> m.component_from(7, False, 0b111, 0b100)
        (7, True)
        """
        stack = []
        ends = self._ends
        while new:
            bit = new & -new
            new ^= bit
            a, b = ends.get(bit, (RAIL, RAIL))  # a device from a node to itself joins nothing
            for s, t in ((a, b), (b, a)):
                if s != RAIL and (seen >> s) & 1:
                    if t == RAIL:
                        tied = True
                    elif not (seen >> t) & 1:
                        seen |= 1 << t
                        stack.append(t)
        return self._grow(seen, tied, stack, on)

    def _grow(self, seen: int, tied: bool, stack: list, on: int) -> tuple[int, bool]:
        """Depth-first search through devices ``on`` from the nodes of
        ``stack`` (already in ``seen``); at each node only the set bits of
        ``on`` among its devices are walked."""
        across, to_rail, at, near = self._across, self._to_rail, self.node_devices, self._near
        while stack:
            s = stack.pop()
            live = on & at[s]
            if live & to_rail[s]:
                tied = True
                live &= ~to_rail[s]
            other = across[s]
            while live:
                bit = live & -live
                live ^= bit
                j = other[bit]
                if not (seen >> j) & 1:
                    seen |= 1 << j
                    if near[j] & ~seen:
                        stack.append(j)
                    elif on & to_rail[j]:  # every neighbour is in already: only the rail is news
                        tied = True
        return seen, tied

    def touching(self, node_mask: int) -> int:
        """Bitmask of devices with a terminal among ``node_mask``."""
        out, i = 0, 0
        while node_mask:
            if node_mask & 1:
                out |= self.node_devices[i]
            node_mask >>= 1
            i += 1
        return out

    def components_batch(self, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Vectorised :meth:`component` for many patterns.

        Parameters
        ----------
        values : ndarray, shape (N, len(inputs))

        Returns
        -------
        counted : ndarray of bool, shape (N,)
            True where the dynamic node is not tied to the rail.
        reach : ndarray of bool, shape (N, len(nodes))

        Notes
        -----
        Reachability by repeated relaxation: each sweep marks both ends of
        every conducting device with a marked end (one matrix product with
        the device–node incidence matrix); at most ``len(nodes)`` sweeps,
        so O(sweeps · N · devices · nodes) numpy work.
        """
        values = np.asarray(values)
        n = len(self.nodes)
        idx = np.array(self.dev_input, dtype=int)
        cond = np.ones((values.shape[0], len(idx)), dtype=bool)
        var = idx >= 0
        if var.any():
            cond[:, var] = values[:, idx[var]] == np.asarray(self.dev_on)[var]
        a = np.array([n if x == RAIL else x for x in self.dev_a], dtype=int)
        b = np.array([n if x == RAIL else x for x in self.dev_b], dtype=int)
        inc = np.zeros((len(a), n + 1), dtype=np.float32)
        np.add.at(inc, (np.arange(len(a)), a), 1.0)
        np.add.at(inc, (np.arange(len(b)), b), 1.0)
        reach = np.zeros((values.shape[0], n + 1), dtype=bool)
        reach[:, 0] = True
        for _ in range(n + 1):
            live = reach.copy()
            live[:, n] = False  # the rail does not pass charge on
            hit = cond & (live[:, a] | live[:, b])
            new = reach | ((hit.astype(np.float32) @ inc) > 0)
            if np.array_equal(new, reach):
                break
            reach = new
        return ~reach[:, n], reach[:, :n]

    # -- charge --------------------------------------------------------------
    def split(self, node_mask: int) -> tuple[int, int]:
        """``(discharged, precharged)`` shared nodes of a component bitmask."""
        shared = node_mask & ~1
        return shared & ~self.precharged, shared & self.precharged

    def _sum(self, mask: int) -> NodeCharge:
        """The nodes of ``mask`` as one :class:`NodeCharge`; cached (it does
        not depend on which nodes are pre-conditioned, so the copies of
        :meth:`with_precharged` share it)."""
        key = ("sum", mask)
        hit = self._cache.get(key)
        if hit is not None:
            return hit
        idx = [i for i in range(mask.bit_length()) if (mask >> i) & 1]
        first = self.charges[0]
        if not idx:
            hit = first.like(0.0, np.zeros_like(first.c0), self.vdd)
        else:
            hit = first.like(float(self._c_lin[idx].sum()), self._c0[idx].sum(axis=0), self.vdd)
        self._cache[key] = hit
        return hit

    def redistribute(self, discharged: int, precharged: int) -> Redistribution:
        """Topology-free normalised final state for these shared node sets
        (:func:`analyze.physics.redistribution.final_voltage`, cached): exact when
        every discharged node touches X, a lower bound otherwise."""
        key = (discharged, precharged)
        hit = self._cache.get(key)
        if hit is None:
            hit = final_voltage(self.charges[0], self._sum(discharged), self._sum(precharged), self.v_lim)
            self._cache[key] = hit
        return hit

    def topology_matters(self, node_mask: int) -> bool:
        """True when a component holds both discharged and precharged nodes,
        so its final state depends on which devices among them conduct."""
        discharged, precharged = self.split(node_mask)
        return bool(discharged and precharged)

    def pairs(self, node_mask: int, on: int) -> tuple[tuple[int, int], ...]:
        """Node pairs ``(i, j)``, ``i < j``, joined by devices of ``on``
        inside the component ``node_mask``, sorted.  O(devices)."""
        inside = on & self.touching(node_mask)
        out, d = set(), 0
        while inside:
            if inside & 1:
                a, b = self.dev_a[d], self.dev_b[d]
                if a != b and RAIL not in (a, b) and (node_mask >> a) & (node_mask >> b) & 1:
                    out.add((min(a, b), max(a, b)))
            inside >>= 1
            d += 1
        return tuple(sorted(out))

    def redistribute_component(self, node_mask: int, on: int) -> Redistribution:
        """Normalised final state of the component ``node_mask`` whose
        conducting devices are ``on`` (:func:`analyze.physics.redistribution.
        network_final_voltage`).  Cached per discharged set, precharged set
        and conducting node pairs; a component without both kinds of node
        needs no topology and shares the :meth:`redistribute` cache."""
        discharged, precharged = self.split(node_mask)
        if not (discharged and precharged):
            return self.redistribute(discharged, precharged)
        pairs = self.pairs(node_mask, on)
        key = ("network", discharged, precharged, pairs)
        hit = self._cache.get(key)
        if hit is None:
            idx = [i for i in range(node_mask.bit_length()) if (node_mask >> i) & 1]
            local = {g: k for k, g in enumerate(idx)}
            hit = network_final_voltage(
                [self.charges[i] for i in idx],
                [local[i] for i in idx if (precharged >> i) & 1],
                [(local[a], local[b]) for a, b in pairs],
                self.v_lim,
            )
            self._cache[key] = hit
        return hit

    def u_final(self, node_mask: int, on: int) -> float:
        """Normalised final dynamic-node voltage of a component whose
        conducting devices are ``on``, V."""
        return self.redistribute_component(node_mask, on).v_final

    def u_pattern(self, values, node_mask: int) -> float:
        """:meth:`u_final` of a pattern's component; the conducting devices
        are worked out from ``values`` only when the topology matters."""
        on = self.conducting(values) if self.topology_matters(node_mask) else 0
        return self.u_final(node_mask, on)

    def bound(self, reach: int, component: int) -> float:
        """Lowest normalised final voltage any completion can reach, V.

        Every discharged node of ``reach`` (what undecided devices could
        still join) with only the precharged nodes of ``component`` (joined
        already), in the topology-free :meth:`redistribute`: valid because
        that final voltage falls as discharged nodes join and rises as
        precharged ones do, and it is never above the topology-aware one
        of the same nodes (:mod:`analyze.physics.redistribution`).
        """
        d, _ = self.split(reach)
        _, p = self.split(component)
        return self.redistribute(d, p).v_final

    def to_volts(self, u: float) -> float:
        """Real voltage of a normalised one."""
        return u if self.stage.polarity == "n" else self.vdd - u

    def _component_result(self, node_mask: int, on: int) -> tuple:
        """(shared names, v_final, v_final_linear, droop, regime) of a
        component, real voltages; cached per component, precharge set and,
        where the topology matters, conducting node pairs."""
        pairs = self.pairs(node_mask, on) if self.topology_matters(node_mask) else None
        key = ("outcome", node_mask, self.precharged, pairs)
        hit = self._cache.get(key)
        if hit is None:
            red = self.redistribute_component(node_mask, on)
            idx = [i for i in range(len(self.nodes)) if (node_mask >> i) & 1]
            starts = [self.vdd if (i == 0 or (self.precharged >> i) & 1) else 0.0 for i in idx]
            u_lin = linear_final_voltage(self.zero_bias[idx], starts)
            v = self.to_volts(red.v_final)
            hit = (self.shared_of(node_mask), v, self.to_volts(u_lin), abs(self.to_volts(self.vdd) - v), red.regime)
            self._cache[key] = hit
        return hit

    def shared_of(self, node_mask: int) -> tuple:
        """The names of a component's nodes after its first (the dynamic
        node): the ``shared_nodes`` of its :meth:`outcome`."""
        idx = [i for i in range(len(self.nodes)) if (node_mask >> i) & 1]
        return tuple(self.nodes[i] for i in idx[1:])

    def outcome(self, values, node_mask: int) -> WorstCase:
        """The :class:`WorstCase` record of a counted pattern."""
        on = self.conducting(values) if self.topology_matters(node_mask) else 0
        shared, v, v_lin, droop, regime = self._component_result(node_mask, on)
        return WorstCase(dict(zip(self.inputs, map(int, values))), list(shared), v, v_lin, droop, regime)


def build_model(circuit: Circuit, stage: Stage, tech: Tech, precharged=frozenset()) -> SharingModel:
    """Prepare ``stage`` of ``circuit`` for charge-sharing evaluation.

    Parameters
    ----------
    circuit : Circuit
    stage : Stage
    tech : Tech
    precharged : iterable of str
        Extra internal nodes to treat as precharged (predischarged for a
        p-type stage) besides ``stage.secondary_precharge``.

    Returns
    -------
    SharingModel

    Raises
    ------
    ValueError
        For a name in ``precharged`` that is not an internal node.

    Notes
    -----
    A device conducts when its gate is 1 (nmos) or 0 (pmos).  A gate on a
    supply or on the clock is held (supply value; the clock at its
    evaluation level) and is no input; a device it holds off is left out.
    Every net of the rail's role (ground for n-type) is the rail.  A device
    with a terminal on the other supply could only restore the dynamic
    node; it is left out, which errs on the safe side.  The pass
    limit is that of the stage's evaluation type (nmos for ``"n"``, pmos
    for ``"p"``, :func:`analyze.physics.threshold.pass_limit`).  A net missing from
    ``circuit.nets`` has no capacitance.  Cost O(devices + nets).
    """
    n_type = stage.polarity == "n"

    def role(net: str) -> str:
        return circuit.role_of(net, tech)

    rail_role, supply_role = ("ground", "power") if n_type else ("power", "ground")
    devs = [circuit.device(name) for name in stage.evaluation]
    # Devices to the other supply would only restore the node: left out (conservative).
    devs = [d for d in devs if supply_role not in (role(d.drain), role(d.source))]
    fixed = {stage.rail} | ({stage.footer_node} if stage.footer_node else set())
    fixed |= {t for d in devs for t in (d.drain, d.source) if role(t) == rail_role}
    held = {}  # gate net -> value during evaluation
    for d in devs:
        r = role(d.gate)
        if d.gate == stage.clock or r == "clock":
            held[d.gate] = 1 if n_type else 0
        elif r in ("power", "ground"):
            held[d.gate] = 1 if r == "power" else 0
    conducts = {d.name: held[d.gate] == (1 if d.type == "nmos" else 0) for d in devs if d.gate in held}
    devs = [d for d in devs if conducts.get(d.name, True)]
    others = sorted({t for d in devs for t in (d.drain, d.source)} - fixed - {stage.dynamic_node})
    nodes = (stage.dynamic_node, *others)
    index = {n: i for i, n in enumerate(nodes)}
    inputs = tuple(sorted((set(stage.inputs) | {d.gate for d in devs}) - set(held)))
    mirror = stage.polarity == "p"
    charges = []
    for n in nodes:
        q = node_charge(circuit.nets.get(n), tech)
        charges.append(q.mirrored() if mirror else q)
    zero = np.array([circuit.nets[n].cap.total if n in circuit.nets else 0.0 for n in nodes])
    pre = 0
    for n in stage.secondary_precharge:
        if n in index and index[n] != 0:
            pre |= 1 << index[n]
    model = SharingModel(
        stage=stage,
        vdd=float(tech.vdd),
        nodes=nodes,
        charges=tuple(charges),
        zero_bias=zero,
        precharged=pre,
        inputs=inputs,
        devices=tuple(d.name for d in devs),
        dev_a=tuple(RAIL if d.drain in fixed else index[d.drain] for d in devs),
        dev_b=tuple(RAIL if d.source in fixed else index[d.source] for d in devs),
        dev_input=tuple(-1 if d.gate in held else inputs.index(d.gate) for d in devs),
        dev_on=tuple(1 if d.type == "nmos" else 0 for d in devs),
        v_lim=pass_limit(tech.mos["pmos" if mirror else "nmos"], float(tech.vdd)),
        always_on=sum(1 << k for k, d in enumerate(devs) if d.gate in held),
    )
    return model.with_precharged(precharged)
