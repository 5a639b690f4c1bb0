"""The exact worst-case charge-sharing pattern of a stage.

The worst case is the counted pattern with the lowest final dynamic-node
voltage (highest for a p-type stage; in the normalised view of
:mod:`analyze.physics.sharing` always the lowest).  Final voltages are compared in
the normalised view, rounded to 1e-9 V; ties are broken by the lexicographically smallest
pattern over the sorted inputs, so the answer is unique and does not
depend on the search order.

Two exact methods give the same answer: brute force over every allowed
pattern (small stages) and branch-and-bound over the constraint blocks
(large ones).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from analyze.search.patterns import Choice, iter_counted
from analyze.physics.sharing import SharingModel

__all__ = ["Found", "worst_case", "BRUTE_FORCE_LIMIT"]

#: ``method="auto"`` uses brute force up to this many allowed patterns.
BRUTE_FORCE_LIMIT = 1024

_DIGITS = 9  # final voltages compare rounded to 1e-9 V


@dataclass(frozen=True)
class Found:
    """The worst counted pattern.

    Attributes
    ----------
    values : tuple of int
        Input values in ``model.inputs`` order.
    component : int
        Bitmask of the nodes joined to the dynamic node.
    u_final : float
        Normalised final voltage, V.
    """

    values: tuple[int, ...]
    component: int
    u_final: float


def _brute(model: SharingModel, choices: list[Choice], below: float | None = None) -> Found | None:
    best = None
    for values, comp in iter_counted(model, choices):
        u = model.u_pattern(values, comp)
        if below is not None:
            if round(u, _DIGITS) < round(below, _DIGITS):
                return Found(values, comp, u)
            continue
        key = (round(u, _DIGITS), values)
        if best is None or key < best[0]:
            best = (key, comp, u)
    if best is None:
        return None
    (_, values), comp, u = best
    return Found(values, comp, u)


def _branch_and_bound(model: SharingModel, choices: list[Choice], seed, components, below=None) -> Found | None:
    n = len(choices)
    if components is None:
        components = {}

    def component(on: int) -> tuple[int, bool]:
        hit = components.get(on)
        if hit is None:
            hit = components[on] = model.component(on)
        return hit

    vals = [0] * len(model.inputs)
    for c in choices:
        for col, v in zip(c.columns, c.options[0]):
            vals[col] = v
    best: list = [None]  # ((rounded u, key), component, u)
    if below is not None:
        # a bar no pattern ties with (the empty key sorts first): only a
        # pattern strictly below it, after rounding, replaces it, and the
        # first one ends the search
        best[0] = ((round(below, _DIGITS), ()), None, below)
    elif seed is not None:
        values, comp = seed
        u = model.u_pattern(values, comp)
        best[0] = ((round(u, _DIGITS), tuple(values)), comp, u)

    def pruned(bound: float) -> bool:
        if best[0] is None:
            return False
        if below is not None and best[0][1] is not None:
            return True  # found one below the bar
        b = round(bound, _DIGITS)
        (bu, bkey), _, _ = best[0]
        return b > bu or (b == bu and tuple(vals) >= bkey)

    def set_option(c: Choice, k: int) -> None:
        for col, v in zip(c.columns, c.options[k]):
            vals[col] = v

    devices = [c.devices for c in choices]
    union = 0
    for d in devices:
        union |= d
    disjoint = sum(bin(d).count("1") for d in devices) == bin(union).count("1")  # each gate in one block

    def visit(on: int, comp: int, touch: int, undecided: int, undecided_dev: int, bound: float) -> None:
        # undecided: bitmask of choice indices; undecided_dev: their devices;
        # touch: the devices with a terminal in comp
        if pruned(bound):
            return
        pick, bits = -1, undecided
        while bits:  # the first undecided block (by index) driving a device at the component
            low = bits & -bits
            i = low.bit_length() - 1
            if devices[i] & touch:
                pick = i
                break
            bits ^= low
        if pick < 0:  # closed: undecided blocks cannot matter, take option 0
            u = model.u_final(comp, on)  # exact, at or above the bound
            key = (round(u, _DIGITS), tuple(vals))
            if best[0] is None or key < best[0][0]:
                best[0] = (key, comp, u)
            return
        rest = undecided & ~(1 << pick)
        if disjoint:
            rest_dev = undecided_dev & ~devices[pick]
        else:
            rest_dev, bits = 0, rest
            while bits:
                low = bits & -bits
                rest_dev |= devices[low.bit_length() - 1]
                bits ^= low
        possible_rest = on | rest_dev
        rest_reach, rest_tied = component(possible_rest)
        children = []
        for k, mask in enumerate(choices[pick].on):
            # both grow from a component already known: this one's, and what
            # the other undecided blocks could join
            on2 = on | mask
            comp2, tied = model.component_from(comp, False, on2, mask & ~on)
            if tied:
                continue
            reach, _ = model.component_from(rest_reach, rest_tied, possible_rest | mask, mask & ~possible_rest)
            children.append((round(model.bound(reach, comp2), _DIGITS), k, on2, comp2))
        children.sort(key=lambda t: (t[0], t[1]))
        c = choices[pick]
        for bnd, k, on2, comp2 in children:
            set_option(c, k)
            visit(on2, comp2, touch | model.touching(comp2 & ~comp), rest, rest_dev, bnd)
        set_option(c, 0)

    comp0, tied0 = component(model.always_on)
    if tied0:
        return None
    reach0, _ = component(model.always_on | union)
    visit(model.always_on, comp0, model.touching(comp0), (1 << n) - 1, union, model.bound(reach0, comp0))
    if best[0] is None or best[0][1] is None:
        return None
    (_, values), comp, u = best[0]
    return Found(values, comp, u)


def worst_case(
    model: SharingModel,
    choices: list[Choice],
    method: str = "auto",
    *,
    seed: tuple[tuple[int, ...], int] | None = None,
    components: dict | None = None,
    below: float | None = None,
) -> Found | None:
    """Find the worst counted pattern exactly.

    Parameters
    ----------
    model : SharingModel
    choices : list of Choice
        From :func:`analyze.search.patterns.bind_blocks`.
    method : {"auto", "brute", "bound"}
        ``"auto"``: brute force up to :data:`BRUTE_FORCE_LIMIT` allowed
        patterns, branch-and-bound beyond.
    seed : (values, component) or None
        A counted pattern the constraints allow (from an earlier search of
        the same stage under other pre-conditioned nodes): branch-and-bound
        starts with it as the best so far, so it prunes from the first
        node.  The answer does not depend on the seed.
    components : dict or None
        Cache of :meth:`SharingModel.component` by conducting-device mask,
        shared between searches of the same switch network (the component
        does not depend on which nodes are pre-conditioned).
    below : float or None
        Ask only whether the worst case is below this normalised voltage:
        return the first counted pattern found whose final voltage,
        rounded to 1e-9 V as the search compares them, is below it
        rounded (not necessarily the worst), or None when there is none,
        which the search proves as it proves a worst case, pruning every
        subtree whose bound reaches the bar.  ``seed`` is not used.

    Returns
    -------
    Found or None
        None when no allowed pattern counts (every one discharges the node),
        or, with ``below``, when none ends below it.

    Notes
    -----
    Branch-and-bound, depth first.  A partial assignment is dropped when
    its conducting devices already tie the dynamic node to the rail.  Its
    bound is the topology-free final voltage
    (:func:`analyze.physics.redistribution.final_voltage`) with every discharged
    node that undecided devices could still join (the rail blocks)
    together with only the precharged nodes joined through decided
    devices.  It is a valid lower bound: that voltage falls as discharged
    nodes join and rises as precharged ones do, and it is never above the
    topology-aware voltage of the same nodes
    (:func:`analyze.physics.redistribution.network_final_voltage`, which leaves,
    brute force and the reported result use), so no completion ends
    below it.
    A subtree is dropped when its bound is above the best, or equal to it
    while its lexicographically smallest completion (every undecided block
    at its first option: blocks are independent) is not smaller than the
    best pattern.  Only blocks driving a device on the boundary of the
    dynamic node's component are branched on, children best bound first;
    once no undecided device touches the component its final voltage is
    known (its conducting devices are all decided) and the remaining
    blocks take their first option.  Final voltages are cached per set of
    shared nodes and, where a component holds both discharged and
    precharged nodes, its conducting node pairs.  Worst case exponential;
    a 24-leg OR-mux takes under a hundred bound evaluations
    (about 25 distinct final-voltage solves).
    """
    if method not in ("auto", "brute", "bound"):
        raise ValueError(f"unknown method {method!r}")
    if method == "auto":
        size = math.prod(len(c.options) for c in choices)
        method = "brute" if size <= BRUTE_FORCE_LIMIT else "bound"
    if any(not c.options for c in choices):
        return None
    if method == "brute":
        return _brute(model, choices, below)
    return _branch_and_bound(model, choices, seed, components, below)
