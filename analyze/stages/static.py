"""Which nets of a circuit are static: driven to a rail whatever the inputs.

A net is *static* when, for every assignment of the gate nets of the
devices of its channel-connected component (both device types, rails not
gone through), closed devices join it to power or ground.  The output of
a complementary CMOS gate is static whatever its shape or device count
(its pull-up conducts for every input pattern in which its pull-down
does not); so is a latch's storage node fed by a transmission gate from a
driven net and held by a clocked feedback inverter.  A dynamic node is
not: with the clock off (precharge off, footer on) and the evaluation
inputs off it is joined to nothing.  A clock is an input like any other
here, so a clocked static NAND is static.  Textbook definitions: Weste &
Harris, *CMOS VLSI Design*, 4th ed., ch. 1 and 9 (from memory).

Stage recognition and clock inference never take a static net for a
dynamic node (:mod:`analyze.stages.clocks`,
:mod:`analyze.stages.recognize`).
"""

from __future__ import annotations

from analyze.stages.logic import Floating, SearchLimit, Switch, find_floating
from analyze.stages.topology import Topology

__all__ = ["StaticNets"]


class StaticNets:
    """The staticness test of :mod:`analyze.stages.logic`, over a circuit.

    Parameters
    ----------
    topo : Topology
    max_cases : int
        Passed to :func:`analyze.stages.logic.find_floating`; a net left
        undecided after that many cases counts as not static (the
        structural rules of recognition then decide, as they would
        without this test).

    Notes
    -----
    For a net X: the devices of X's channel-connected component become
    switches (:class:`~analyze.stages.logic.Switch`).  A device gated by a
    rail is always closed (or dropped, always open).  A device gated by
    the output Y of an inverter — every device with a channel terminal on
    Y is gated by one net A, the nmos from ground, the pmos from power,
    at least one of each — is controlled by the complement of A (followed
    along inverter chains), unless A is a net of the component (feedback,
    whose value is the stored state: it stays a free variable).  Every
    other gate net is a free variable; a cell's inputs, clocks included,
    take every value.  Then X is static when
    :func:`~analyze.stages.logic.find_floating` finds no assignment that
    joins X to no rail.  Results are cached per net, and the search is
    run once per network shape (switches with names replaced by their
    rank, rails, the net): the arrays of a block repeat few shapes.

    Cost: the components, O(devices · α), once; per net, the search of
    :func:`~analyze.stages.logic.find_floating` over the s devices of
    its component, O(cases · s).

    Examples
    --------
    >>> from extract.circuit import Circuit, Device
    >>> from extract.tech import NetRoles, Tech
    >>> tech = Tech("t", 1.8, NetRoles(("VDD",), ("VSS",), ()), {}, {})
    >>> D = lambda *a: Device(*a, 1.0, 0.18)
    >>> c = Circuit("c", {}, [D("MP", "pmos", "X", "CLK", "VDD"),   # dynamic
    ...                       D("MA", "nmos", "X", "A", "VSS"),
    ...                       D("MQ", "pmos", "Y", "A", "VDD"),     # inverter
    ...                       D("MN", "nmos", "Y", "A", "VSS")])
    >>> static = StaticNets(Topology(c, tech))
    >>> static("X"), static("Y")
    (False, True)
    >>> static.floating("X").assignment
    {'A': False, 'CLK': True}
    """

    def __init__(self, topo: Topology, max_cases: int = 4096):
        self.topo = topo
        self.max_cases = max_cases
        self._inverted: dict[str, str] | None = None
        self._cache: dict[str, Floating | None | SearchLimit] = {}
        self._networks: dict[int, tuple] = {}
        self._anchor: dict[int, str] = {}
        self._searched: dict[tuple, tuple] = {}

    def __call__(self, net: str) -> bool:
        """True when ``net`` is a rail or is driven for every assignment."""
        if self.topo.is_rail(net):
            return True
        r = self._decide(net)
        return r is None

    def floating(self, net: str) -> Floating | None:
        """The witness assignment leaving ``net`` undriven, or None when
        ``net`` is static or undecided."""
        if self.topo.is_rail(net):
            return None
        r = self._decide(net)
        return r if isinstance(r, Floating) else None

    # -- internals -------------------------------------------------------
    def _decide(self, net: str) -> Floating | None | SearchLimit:
        if net not in self._cache:
            comp = self.topo.component_id(None, net)
            if comp is None:
                self._cache[net] = Floating({}, 1)  # no channel: joined to nothing
            else:
                self._cache[net] = self._search(comp, net)
        return self._cache[net]

    def _network(self, comp: int) -> tuple:
        """The names of a component's switches, sorted, their ranks and
        the network's shape (switches with names replaced by ranks, the
        rails): made once per component (a dynamic node and its footer
        node share one)."""
        got = self._networks.get(comp)
        if got is None:
            switches, rails = self._component_switches(comp)
            names = sorted({n for s in switches for n in (s.a, s.b, s.var) if n is not None})
            rank = {n: i for i, n in enumerate(names)}
            shape = (tuple((rank[s.a], rank[s.b], -1 if s.var is None else rank[s.var], s.closed_when)
                           for s in switches), tuple(sorted(rank[n] for n in rails)))
            got = self._networks[comp] = (names, rank, shape)
        return got

    def _component_switches(self, comp: int):
        """The switches and rails of component ``comp`` (by number)."""
        net = self._anchor[comp]
        record = self.topo.component_of(None, net)
        switches = self._switches(record.devices, set(record.nets))
        return switches, {n for s in switches for n in (s.a, s.b) if self.topo.is_rail(n)}

    def _search(self, comp: int, net: str) -> Floating | None | SearchLimit:
        """:func:`find_floating` once per network shape: the switches with
        every name replaced by its rank among the network's names (so the
        search, which goes in name order, is the same), the rails and the
        net.  A later net of the same shape takes the witness renamed."""
        self._anchor[comp] = net
        names, rank, shape = self._network(comp)
        key = (shape, rank.get(net, -1))
        hit = self._searched.get(key)
        if hit is not None:
            result, first_names = hit
            if not isinstance(result, Floating):
                return result
            back = {n: names[i] for i, n in enumerate(first_names)}
            return Floating({back[v]: x for v, x in result.assignment.items()}, result.cases)
        switches, rails = self._component_switches(comp)
        try:
            result = find_floating(switches, net, rails, self.max_cases)
        except SearchLimit as e:
            result = e
        self._searched[key] = (result, names)
        return result

    def _switches(self, devices: list[int], inside: set[str]) -> list[Switch]:
        out = []
        for i in devices:
            d = self.topo.devices[i]
            closed_when = d.type == "nmos"
            role = self.topo.role(d.gate)
            if self.topo.is_rail(d.gate):
                if (role == "power") == closed_when:
                    out.append(Switch(d.drain, d.source, None))
                continue
            var, inverted = self._literal(d.gate, inside)
            out.append(Switch(d.drain, d.source, var, closed_when != inverted))
        return out

    def _literal(self, gate: str, inside: set[str]) -> tuple[str, bool]:
        """``(variable, inverted)`` for a gate net, through inverter chains
        that start outside the component."""
        inv = self._inverters()
        var, inverted, seen = gate, False, {gate}
        while var in inv and inv[var] not in inside and inv[var] not in seen:
            var, inverted = inv[var], not inverted
            seen.add(var)
        return var, inverted

    def _inverters(self) -> dict[str, str]:
        """Inverter output -> input, for outputs driven by nothing else."""
        if self._inverted is None:
            topo, out = self.topo, {}
            for y, devs in _channel_devices(topo):
                gates = {topo.devices[i].gate for i in devs}
                if len(gates) != 1:
                    continue
                (a,) = gates
                ends = {(topo.devices[i].type, topo.rail_end(i)) for i in devs}
                if ends == {("nmos", ("ground", y)), ("pmos", ("power", y))} and a != y and not topo.is_rail(a):
                    out[y] = a
            self._inverted = out
        return self._inverted


def _channel_devices(topo: Topology):
    """``(net, devices)`` for every non-rail net with a channel terminal of
    an nmos or pmos on it (from the topology's own indices)."""
    nmos, pmos = topo._channels.get("nmos", {}), topo._channels.get("pmos", {})
    for y, devs in nmos.items():
        if not topo.is_rail(y):
            yield y, devs + pmos.get(y, [])
    for y, devs in pmos.items():
        if y not in nmos and not topo.is_rail(y):
            yield y, devs
