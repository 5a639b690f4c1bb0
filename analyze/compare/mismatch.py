"""Say precisely where a schematic and a layout differ.

:func:`explain` is called by :func:`analyze.compare.match.match_circuits` when the
two circuits do not match, and returns the one-line message of the error.
It tries, in order:

1. The same structure with a W or L out of tolerance: every such device,
   e.g. ``W of MN2 is 1.20 µm in layout (M5), 1.00 µm in schematic
   (tolerance 2%)``.
2. Series stacks with the same devices in another order:
   ``stack order differs: layout X–[B]–n1–[A]–VSS, schematic X–[A]–n1–[B]–VSS``
   (nets plain, gate nets in brackets).
3. Devices without a counterpart, by their connections to ports: a
   device whose gate is the same port on both sides but whose channel
   nets differ is reported as connected differently; the rest as having
   no counterpart.
4. Otherwise the nets and devices around which the neighbourhoods first
   differ (from the colour refinement).

Notes
-----
A *stack* is a maximal chain of devices of one type joined through nets
that have exactly two channel terminals, no gate and no port.  Finding
them is linear in the number of devices; comparing them uses multisets.
"""

from __future__ import annotations

from collections import Counter, defaultdict

import networkx as nx

from analyze.compare.groups import DeviceGroup, Side

__all__ = ["explain", "stacks", "describe_stack"]

_MAX_MESSAGES = 6


def _fmt(x: float) -> str:
    return f"{x:.2f}"


def _size_messages(side_s: Side, side_l: Side, mapping: dict, w_tol: float, l_tol: float) -> list[str]:
    out = []
    for node_l, node_s in sorted(mapping.items(), key=lambda kv: side_s.groups[kv[1][1]].names
                                 if kv[1][0] == "d" else ()):
        if node_l[0] != "d":
            continue
        gl, gs = side_l.groups[node_l[1]], side_s.groups[node_s[1]]
        for what, vl, vs, tol in (("W", gl.w, gs.w, w_tol), ("L", gl.l, gs.l, l_tol)):
            if abs(vl - vs) > tol * abs(vs) + 1e-9:
                out.append(f"{what} of {gs.label} is {_fmt(vl)} µm in layout ({gl.label}), "
                           f"{_fmt(vs)} µm in schematic (tolerance {tol * 100:g}%)")
    return out


def stacks(side: Side) -> list[list]:
    """Series stacks of one side.

    Parameters
    ----------
    side : Side

    Returns
    -------
    list of list
        Each stack as ``[net, group index, net, group index, ..., net]``
        from one end to the other.  Rings are left out.
    """
    groups = side.groups
    channel: dict[str, list[int]] = defaultdict(list)
    gates = Counter(g.gate for g in groups)
    for i, g in enumerate(groups):
        for e in g.ends:
            channel[e].append(i)
    h = nx.MultiGraph()
    h.add_nodes_from(range(len(groups)))
    for net, idx in channel.items():
        if (len(idx) == 2 and idx[0] != idx[1] and gates[net] == 0 and net not in side.seeds
                and groups[idx[0]].type == groups[idx[1]].type):
            h.add_edge(idx[0], idx[1], net=net)
    out = []
    for comp in nx.connected_components(h):
        sub = h.subgraph(comp)
        ends = [n for n in sub if sub.degree(n) <= 1]
        if sub.number_of_edges() != len(comp) - 1 or not ends:
            continue
        node = min(ends)
        prev_net = None
        first = groups[node]
        links = {d["net"] for _, _, d in sub.edges(node, data=True)}
        outer = [e for e in first.ends if e not in links] or [first.ends[0]]
        seq: list = [outer[0]]
        seen = {node}
        while True:
            seq.append(node)
            nxt = [(m, d["net"]) for _, m, d in sub.edges(node, data=True) if m not in seen]
            if not nxt:
                g = groups[node]
                rest = list(g.ends)
                rest.remove(prev_net if prev_net is not None else seq[0])
                seq.append(rest[0])
                break
            m, net = nxt[0]
            seq.append(net)
            prev_net, node = net, m
            seen.add(m)
        out.append(seq)
    return out


def _labels(side: Side, seq: list) -> tuple:
    lab = []
    for k, x in enumerate(seq):
        net = x if k % 2 == 0 else side.groups[x].gate
        lab.append(side.seeds.get(net, ""))
    return tuple(lab)


def _oriented(side: Side, seq: list) -> tuple[list, tuple]:
    """The stack read from its signal end towards a supply (else by name)."""
    lab = _labels(side, seq)
    rev = lab[::-1]

    def rank(net: str, labels: tuple):
        net_obj = side.circuit.nets.get(net)
        rail = net_obj is not None and net_obj.role in ("power", "ground")
        return (rail, labels[0], labels)

    if rank(seq[0], lab) <= rank(seq[-1], rev):
        return seq, lab
    return seq[::-1], rev


def describe_stack(side: Side, seq: list) -> str:
    """``X–[A]–n1–[B]–VSS``: nets by name, gate nets in brackets."""
    return "–".join(x if k % 2 == 0 else f"[{side.groups[x].gate}]" for k, x in enumerate(seq))


def _stack_messages(side_s: Side, side_l: Side) -> tuple[list[str], set[int], set[int]]:
    def keyed(side):
        out = []
        for seq in stacks(side):
            seq, lab = _oriented(side, seq)
            kind = side.groups[seq[1]].type
            loose = (kind, lab[0], lab[-1], tuple(sorted(lab[1::2])))
            out.append(((kind, lab), loose, seq))
        return out

    ks, kl = keyed(side_s), keyed(side_l)
    exact = Counter(k for k, _, _ in ks) & Counter(k for k, _, _ in kl)
    spare_s, spare_l = Counter(exact), Counter(exact)

    def leftover(items, spare):
        out = []
        for k, loose, seq in items:
            if spare[k]:
                spare[k] -= 1
            else:
                out.append((loose, seq))
        return out

    left_s, left_l = leftover(ks, spare_s), leftover(kl, spare_l)
    messages, used_s, used_l = [], set(), set()
    for loose, seq_s in left_s:
        for j, (loose_l, seq_l) in enumerate(left_l):
            if loose_l == loose and len(seq_s) > 3:
                messages.append(f"stack order differs: layout {describe_stack(side_l, seq_l)}, "
                                f"schematic {describe_stack(side_s, seq_s)}")
                used_s.update(seq_s[1::2])
                used_l.update(seq_l[1::2])
                del left_l[j]
                break
    return messages, used_s, used_l


def _device_text(side: Side, g: DeviceGroup) -> str:
    return f"{g.type} W={_fmt(g.w)} L={_fmt(g.l)}, gate {g.gate}, between {g.ends[0]} and {g.ends[1]}"


def _device_messages(side_s: Side, side_l: Side, skip_s: set[int], skip_l: set[int]) -> list[str]:
    def signatures(side, skip):
        out = defaultdict(list)
        for i, g in enumerate(side.groups):
            if i not in skip:
                ends = tuple(sorted(side.seeds.get(e, "") for e in g.ends))
                out[(g.type, side.seeds.get(g.gate, ""), ends)].append(g)
        return out

    sig_s, sig_l = signatures(side_s, skip_s), signatures(side_l, skip_l)
    only_s, only_l = [], []
    for key in sorted(set(sig_s) | set(sig_l)):
        a, b = sig_s.get(key, []), sig_l.get(key, [])
        only_s += a[len(b):]
        only_l += b[len(a):]
    messages = []
    for gs in list(only_s):
        gate = side_s.seeds.get(gs.gate)
        partner = next((gl for gl in only_l if gate and side_l.seeds.get(gl.gate) == gate
                        and gl.type == gs.type), None)
        if partner is not None:
            messages.append(f"{gs.label} (gate {gs.gate}) is between {gs.ends[0]} and {gs.ends[1]} in "
                            f"the schematic, but layout {partner.label} is between {partner.ends[0]} "
                            f"and {partner.ends[1]}")
            only_s.remove(gs)
            only_l.remove(partner)
    messages += [f"device {g.label} ({_device_text(side_s, g)}) has no layout counterpart" for g in only_s]
    messages += [f"layout device {g.label} ({_device_text(side_l, g)}) has no schematic counterpart"
                 for g in only_l]
    return messages


def _node_name(side: Side, node) -> str:
    return node[1] if node[0] == "n" else side.groups[node[1]].label


def _neighbourhood_message(side_s: Side, side_l: Side, history) -> str:
    for col_l, col_s in history:
        cl, cs = Counter(col_l.values()), Counter(col_s.values())
        if cl != cs:
            extra_l = sorted(_node_name(side_l, n) for n, c in col_l.items() if cl[c] > cs[c])
            extra_s = sorted(_node_name(side_s, n) for n, c in col_s.items() if cs[c] > cl[c])
            return (f"connections differ around layout {', '.join(extra_l[:8]) or '-'} and schematic "
                    f"{', '.join(extra_s[:8]) or '-'}")
    return "the circuits differ, although every device and net has a counterpart of the same kind"


def explain(side_s: Side, side_l: Side, history, mapping: dict | None, w_tol: float, l_tol: float) -> str:
    """The one-line reason why two circuits do not match.

    Parameters
    ----------
    side_s, side_l : Side
        Schematic and layout, prepared by :func:`analyze.compare.match.match_circuits`.
    history : list
        Colour refinement rounds, each ``[layout colours, schematic colours]``
        (:meth:`analyze.compare.refine.Refiner.rounds`).
    mapping : dict or None
        A structural isomorphism layout -> schematic when one exists (then
        only sizes differ).
    w_tol, l_tol : float

    Returns
    -------
    str
    """
    if mapping is not None:
        messages = _size_messages(side_s, side_l, mapping, w_tol, l_tol)
    else:
        messages, used_s, used_l = _stack_messages(side_s, side_l)
        messages += _device_messages(side_s, side_l, used_s, used_l)
    if not messages:
        messages = [_neighbourhood_message(side_s, side_l, history)]
    more = len(messages) - _MAX_MESSAGES
    text = "; ".join(messages[:_MAX_MESSAGES]) + (f"; and {more} more" if more > 0 else "")
    return f"schematic and layout differ: {text}"
