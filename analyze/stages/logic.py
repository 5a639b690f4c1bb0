"""Switch networks as Boolean functions: is a net always driven?

A MOSFET, seen as a switch (Bryant's switch-level model, from memory:
R. E. Bryant, "A switch-level model and simulator for MOS digital
systems", IEEE Trans. Computers, 1984), joins its two channel terminals
when its gate is at the level that turns it on: high for nmos, low for
pmos.  A :class:`Switch` is that, with the gate already reduced to a
Boolean variable (or to a constant).  For one assignment of the
variables, a net is *driven* when closed switches join it to a rail;
the conduction function of a network from a net to a rail is the OR
over paths of the AND of the switches' conditions.

:func:`find_floating` decides whether some assignment leaves a net joined
to no rail at all.  None exists for the output of a complementary static
gate — its pull-up conducts for every input pattern in which its
pull-down does not — whatever the network's shape or device count; one
exists for a dynamic node (clock off, evaluation inputs off).
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass
from typing import Iterable, Mapping

__all__ = ["Switch", "SearchLimit", "Floating", "conducts", "find_floating"]


@dataclass(frozen=True)
class Switch:
    """A transistor as a switch between nets ``a`` and ``b``.

    Attributes
    ----------
    a, b : str
        The channel terminals.
    var : str or None
        The Boolean variable controlling the switch; None for a switch
        whose gate is tied to a constant that turns it on.
    closed_when : bool
        The value of ``var`` that closes the switch (True for an nmos
        gated by ``var``, False for a pmos, or for an nmos gated by the
        complement of ``var``).
    """

    a: str
    b: str
    var: str | None
    closed_when: bool = True

    def state(self, assignment: Mapping[str, bool]) -> bool | None:
        """True closed, False open, None when ``var`` is unassigned."""
        if self.var is None:
            return True
        v = assignment.get(self.var)
        return None if v is None else v == self.closed_when


class SearchLimit(Exception):
    """:func:`find_floating` gave up after its limit of cases."""


@dataclass(frozen=True)
class Floating:
    """An assignment under which a net is joined to no rail.

    Attributes
    ----------
    assignment : dict of str to bool
        A value for every variable of the network.
    cases : int
        Partial assignments the search looked at.
    """

    assignment: dict[str, bool]
    cases: int


def _adjacency(switches: Iterable[Switch]) -> dict[str, list[Switch]]:
    adj: dict[str, list[Switch]] = defaultdict(list)
    for s in switches:
        adj[s.a].append(s)
        if s.b != s.a:
            adj[s.b].append(s)
    return adj


def _reach(adj, node: str, rails, assignment, maybe: bool) -> tuple[set[str], bool]:
    """Nets joined to ``node`` through closed switches (``maybe``: through
    switches not known open), rails not gone through; and whether a rail
    was reached."""
    seen = {node}
    stack = [node]
    hit = False
    while stack:
        net = stack.pop()
        for s in adj.get(net, ()):
            st = s.state(assignment)
            if st is False or (st is None and not maybe):
                continue
            other = s.b if net == s.a else s.a
            if other in rails:
                hit = True
            elif other not in seen:
                seen.add(other)
                stack.append(other)
    return seen, hit


def conducts(switches: Iterable[Switch], node: str, rails: Iterable[str], assignment: Mapping[str, bool]) -> bool:
    """Whether closed switches join ``node`` to one of ``rails``.

    This is the conduction function of the network from ``node`` to
    ``rails``, evaluated at one full assignment.

    Parameters
    ----------
    switches : iterable of Switch
    node : str
    rails : iterable of str
        Nets the search stops at (never gone through).
    assignment : mapping of str to bool
        A value for every variable of the switches met.

    Returns
    -------
    bool

    Notes
    -----
    Depth-first search over closed switches, O(switches).

    Examples
    --------
    The pull-down of a NAND2, series A, B from Y to ground:

    >>> net = [Switch("Y", "n1", "A"), Switch("n1", "VSS", "B")]
    >>> [conducts(net, "Y", ["VSS"], {"A": a, "B": b}) for a in (0, 1) for b in (0, 1)]
    [False, False, False, True]
    """
    rails = set(rails)
    return _reach(_adjacency(switches), node, rails, assignment, maybe=False)[1]


def find_floating(
    switches: Iterable[Switch], node: str, rails: Iterable[str], max_cases: int = 4096
) -> Floating | None:
    """An assignment under which ``node`` is joined to no rail, if any.

    Parameters
    ----------
    switches : iterable of Switch
        The network around ``node`` (its channel-connected component is
        enough; switches elsewhere never matter).
    node : str
    rails : iterable of str
        Every supply net (power and ground alike).
    max_cases : int
        Partial assignments to look at before giving up.

    Returns
    -------
    Floating or None
        None when every assignment drives ``node`` to some rail (the net is
        static).

    Raises
    ------
    SearchLimit
        After ``max_cases`` partial assignments without a decision.

    Notes
    -----
    Exact search over partial assignments (a Davis–Putnam style case
    split, from memory), with two closing rules per case:

    - *driven*: closed switches already join ``node`` to a rail; every
      completion is driven too (closing more switches only adds paths),
      so the case is closed.
    - *floating*: even the switches not known open do not join ``node``
      to any rail; every completion floats (opening more switches only
      removes paths), so the case is a witness and the search stops.

    Otherwise some undecided switch has an end on the nets already joined
    to ``node`` (a path through not-open switches leaves that set through
    an undecided one), and the search splits on its variable, the value
    that opens it first.  Each case costs two searches, O(s) for s
    switches; the number of cases is at most 2·2^k for k variables, but
    since every split decides a switch next to what ``node`` is already
    joined to, a case closes as soon as one conducting path or one cut is
    settled.  For a complementary series-parallel gate of k inputs the
    search meets each input about once per path through the gate (a NAND3
    or NOR3 closes in 7 cases); a dynamic node closes on its first
    floating case (clock off, inputs off), about one case per variable.

    Examples
    --------
    Static NAND2: pmos A, B from VDD to Y in parallel, nmos A, B in
    series to ground.

    >>> nand = [Switch("VDD", "Y", "A", False), Switch("VDD", "Y", "B", False),
    ...         Switch("Y", "n1", "A"), Switch("n1", "VSS", "B")]
    >>> find_floating(nand, "Y", ["VDD", "VSS"]) is None
    True

    Footless dynamic NAND2: clocked pmos precharge instead of the pull-up.

    >>> dyn = [Switch("VDD", "X", "CLK", False), Switch("X", "n1", "A"),
    ...        Switch("n1", "VSS", "B")]
    >>> find_floating(dyn, "X", ["VDD", "VSS"]).assignment
    {'A': False, 'B': False, 'CLK': True}
    """
    switches = list(switches)
    rails = set(rails)
    adj = _adjacency(switches)
    variables = sorted({s.var for s in switches if s.var is not None})
    stack: list[dict[str, bool]] = [{}]
    cases = 0
    while stack:
        assignment = stack.pop()
        cases += 1
        if cases > max_cases:
            raise SearchLimit(f"{node}: undecided after {max_cases} cases")
        joined, driven = _reach(adj, node, rails, assignment, maybe=False)
        if driven:
            continue
        _, can = _reach(adj, node, rails, assignment, maybe=True)
        if not can:
            full = {v: assignment.get(v, False) for v in variables}
            return Floating(full, cases)
        split = _split_switch(adj, joined, assignment)
        # Pushed last is tried first: the value that opens the switch.
        stack.append({**assignment, split.var: split.closed_when})
        stack.append({**assignment, split.var: not split.closed_when})
    return None


def _split_switch(adj, joined: set[str], assignment) -> Switch:
    """An undecided switch with an end on ``joined`` (one always exists
    when neither closing rule of :func:`find_floating` applies)."""
    for net in sorted(joined):
        for s in adj.get(net, ()):
            if s.state(assignment) is None:
                return s
    raise AssertionError("no undecided switch next to the joined nets")
