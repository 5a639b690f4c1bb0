"""The exact foundry-model worst case of a wide stage, by branch and bound.

A stage with more counted patterns than
:data:`analyze.search.foundry.EXHAUSTIVE` cannot have each one solved with
the models (an OR of 24 two-high legs has 2.8·10^11).  The lumped model's
ranked patterns give a worst found, ``w``; :func:`exact_worst` then proves
it the worst over every counted pattern and arrival case, or finds the
patterns that could be worse and solves them.

It walks the constraint blocks' options depth first (the order of
:func:`analyze.search.patterns.iter_counted`).  At each partial pattern
the charge balance of :func:`analyze.physics.bound.equalised_bound` is
evaluated at the one voltage ``w`` plus the solver's tolerance, each stack
piece at its largest over the input values still open (p-type: smallest).
That balance never falls below any pattern's own (the bound's argument,
given there), and it rises with the voltage, so where it is negative
every pattern below the partial one has its bound above that voltage and
so ends above ``w`` (p-type: the mirror) and the branch is dropped.  The patterns at the leaves are the
only ones that could end at or past ``w``; they are solved with
:func:`analyze.search.foundry.solve_candidates` (which drops again those
whose own bound is past the worst found).

Notes
-----
One pass per arrival case.  Per piece, every combination of its inputs'
values is tabulated once at that voltage (one charge sum each); a node of
the walk costs O(pieces) and the walk gives up past :data:`NODES` nodes
or :data:`LEAVES` leaves (the ranked worst case and the bound over every
pattern then stand, as before).  A piece whose inputs have more than
:data:`analyze.physics.bound.COMBINATIONS` combinations, or tables that
are not nondecreasing (the balance would not rise with the voltage),
gives up too.  On an OR of legs the walk follows the worst pattern and
drops every other branch at once: a few nodes per input.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from itertools import product

import numpy as np

from analyze.physics.bound import COMBINATIONS, bound_parts
from analyze.physics.settling import BOUND_TOLERANCE
from analyze.search.cases import arrival_cases, late_inputs
from analyze.search.foundry import solve_candidates

__all__ = ["ExactWorst", "exact_worst", "bounded_patterns", "flags_hold", "LEAVES", "NODES"]

#: Patterns left at the leaves of one case's walk before it gives up.
LEAVES = 1024
#: Nodes of one case's walk before it gives up.
NODES = 50_000


@dataclass
class ExactWorst:
    """What :func:`exact_worst` proved.

    Attributes
    ----------
    worst : WorstCase
        The worst over every counted pattern and case (``case`` set).
    solved : list of WorstCase
        The patterns the walk left (each possibly worse than the ranked
        worst case), every case together, each once.
    nodes : int
        Nodes the walks visited.
    """

    worst: object
    solved: list
    nodes: int


def exact_worst(prep, circuit, stage, tech, constraints, model, choices, found) -> ExactWorst | None:
    """The worst case over every counted pattern and arrival case, from the
    worst ``found`` among ranked patterns.

    Parameters
    ----------
    prep : analyze.search.foundry.FoundryStage
    circuit, stage, tech, constraints
    model : analyze.physics.sharing.SharingModel
    choices : list of analyze.search.patterns.Choice
        The constraint blocks (:func:`analyze.search.analysis._prepared`).
    found : WorstCase
        The worst of the ranked patterns with the models (``case`` set).

    Returns
    -------
    ExactWorst or None
        None when a walk gives up (see the module's notes).

    Notes
    -----
    Among equal final voltages ``found`` is kept, then the first case in
    :func:`analyze.search.cases.arrival_cases`' order.
    """
    n_type = stage.polarity == "n"
    sign = 1.0 if n_type else -1.0
    best, solved, nodes = found, [], 0
    for case in arrival_cases(circuit, stage, constraints):
        walk = bounded_patterns(prep, circuit, stage, tech, constraints, model, choices, case, found.v_final)
        if walk is None:
            return None
        leaves, visited = walk
        nodes += visited
        seen = {tuple(sorted(wc.inputs.items())) for wc in solved}
        solved += [wc for wc in leaves if tuple(sorted(wc.inputs.items())) not in seen]
        if not leaves:
            continue
        wc = solve_candidates(prep, circuit, stage, tech, constraints, leaves, cases=(case,))
        if wc is not None and sign * wc.v_final < sign * best.v_final:
            best = wc
    return ExactWorst(best, solved, nodes)


def bounded_patterns(prep, circuit, stage, tech, constraints, model, choices, case: str, worst_v: float,
                     precharged=frozenset()):
    """The counted patterns of one arrival case that the bound cannot show
    to end past ``worst_v`` (n-type: its bound above it plus
    :data:`analyze.physics.settling.BOUND_TOLERANCE`; p-type: below
    it less that), as WorstCase, and the walk's node count; None when the
    walk gives up.  Nodes in ``precharged`` start precharged
    (predischarged) as well.

    Examples
    --------
    See ``tests/analyze/search/test_branch_bound.py`` (sky130 stages: the
    walk's worst against every counted pattern solved).
    """
    ctx = prep.context
    n_type = stage.polarity == "n"
    sign = 1.0 if n_type else -1.0
    late = late_inputs(circuit, stage, constraints, case)
    # the model's inputs: a gate held at a supply or clocked is none
    inputs = set(model.inputs)
    parts = bound_parts(ctx, stage.internal_nodes, inputs, late, precharged)
    if not ctx.increasing([parts.x, *sorted(parts.inside)]):
        return None
    v = float(worst_v) + sign * BOUND_TOLERANCE
    grounded = {stage.rail, stage.footer_node} - {None}

    def is_input(d):
        return d.gate in inputs and d.name not in stage.keepers

    def state(value):
        """A device's state index for its input's logical value: 0 off, 1
        on (a p-type stage's devices conduct at 0)."""
        return value if n_type else 1 - value

    base = sign * parts.rest(parts.x, v) + sign * parts.receivers(v)
    units = []  # per unit: its inputs, [(values, signed sum)] of its counted combinations
    for d, states in parts.own:
        if not is_input(d):
            base += sign * parts.on_x(d, states[0], v)
            continue
        rows = []
        for value in (0, 1):
            if state(value) and grounded & {d.drain, d.source}:
                continue  # on, it ties the dynamic node to the rail: not counted
            k = state(value) if len(states) > 1 else 0
            rows.append(((value,), sign * parts.on_x(d, states[k], v)))
        units.append(((d.gate,), rows))
    pieces = []  # unit index, fingerprint of the piece's physics
    for nodes_in, devices in parts.pieces:
        names = list(dict.fromkeys(d.gate for d, _, _ in devices if is_input(d)))
        pieces.append((len(units), _fingerprint(ctx, stage, parts, nodes_in, devices, names, late,
                                                inputs, precharged)))
        if 2 ** len(names) > COMBINATIONS:
            return None
        rows = []
        for values in product((0, 1), repeat=len(names)):
            at = dict(zip(names, values))
            choice = tuple(state(at[d.gate]) if is_input(d) and len(states) > 1 else 0 for d, states, _ in devices)
            joined = parts.joined(devices, choice)
            tied = any(is_input(d) and state(at[d.gate]) and grounded & {d.drain, d.source}
                       and {d.drain, d.source} & joined for d, _, _ in devices)
            if not tied:
                rows.append((values, sign * parts.piece_sum(devices, choice, v)))
        units.append((tuple(names), rows))

    by_input = {}
    for u, (names, _) in enumerate(units):
        for n in names:
            by_input.setdefault(n, []).append(u)
    fixed = {}
    # interchangeable pieces (the same physics, each input its own free
    # block): only patterns whose pieces' values do not increase along the
    # walk are visited, one for each set of permuted patterns
    order = [[model.inputs[c] for c in ch.columns] for ch in choices]
    block_of = {n: k for k, names in enumerate(order) for n in names}
    free = {names[0] for names, ch in zip(order, choices)
            if len(names) == 1 and sorted(ch.options) == [(0,), (1,)]}
    classes = {}
    for u, fp in pieces:
        names = units[u][0]
        if fp is not None and all(n in free and by_input[n] == [u] for n in names):
            classes.setdefault(fp, []).append(u)
    before = {}  # unit -> the member of its class completed just before it
    done_at = {u: max((block_of[n] for n in units[u][0]), default=-1) for u in range(len(units))}
    for members in classes.values():
        members.sort(key=lambda u: (done_at[u], u))
        for a, b in zip(members, members[1:]):
            if done_at[a] < done_at[b]:
                before[b] = a
    completes = {}
    for b in before:
        completes.setdefault(done_at[b], []).append(b)

    def values_of(u):
        return tuple(fixed[n] for n in units[u][0])

    def best(u):
        names, rows = units[u]
        top = -math.inf
        for values, s in rows:
            if s > top and all(fixed.get(n, val) == val for n, val in zip(names, values)):
                top = s
        return top

    tops = [best(u) for u in range(len(units))]
    leaves, count = [], [0]

    def walk(k):
        count[0] += 1
        if count[0] > NODES or len(leaves) > LEAVES:
            raise _GiveUp
        if base + sum(tops) < 0.0:
            return  # every pattern below ends past the worst found
        if k == len(choices):
            values = tuple(int(fixed[n]) for n in model.inputs)
            comp, tied = model.component(model.conducting(values))
            if not tied:
                leaves.append(model.outcome(values, comp))
            return
        names = order[k]
        touched = sorted({u for n in names for u in by_input.get(n, ())})
        saved = [tops[u] for u in touched]
        for option in choices[k].options:
            fixed.update(zip(names, option))
            if any(values_of(before[u]) < values_of(u) for u in completes.get(k, ())):
                continue  # a permutation of a pattern visited
            for u in touched:
                tops[u] = best(u)
            walk(k + 1)
        for n in names:
            del fixed[n]
        for u, t in zip(touched, saved):
            tops[u] = t

    # inputs on no piece (their devices join nothing the bound counts) are
    # walked too: a leaf needs every value
    try:
        walk(0)
    except _GiveUp:
        return None
    return leaves, count[0]


def flags_hold(prep, circuit, stage, tech, constraints, model, choices, nodes, need_v: float):
    """A counted pattern that, with ``nodes`` precharged (predischarged),
    ends short of ``need_v`` (n-type: below it) in some arrival case, or
    None when every one ends at or past it: the walk of
    :func:`bounded_patterns` at ``need_v`` with those nodes precharged, its
    leaves solved.

    Returns
    -------
    WorstCase, None or False
        The worst leaf short of ``need_v`` (``case`` set); None when there
        is none; False when a walk gives up.
    """
    n_type = stage.polarity == "n"
    sign = 1.0 if n_type else -1.0
    pre = frozenset(nodes)
    for case in arrival_cases(circuit, stage, constraints):
        walk = bounded_patterns(prep, circuit, stage, tech, constraints, model, choices, case, need_v, pre)
        if walk is None:
            return False
        leaves = walk[0]
        if not leaves:
            continue
        wc = solve_candidates(prep, circuit, stage, tech, constraints, leaves, cases=(case,), precharged=pre)
        if wc is not None and sign * (wc.v_final - need_v) < 0.0:
            return wc
    return None


def _fingerprint(ctx, stage, parts, nodes_in, devices, names, late, inputs, precharged):
    """What the solver sees of a stack piece, its nets renamed by first
    appearance (the dynamic node, rail and footer node by role): two pieces
    with equal fingerprints give the same final voltage with their inputs'
    values swapped.  None when a device's gate is a net other than an input
    or a clock-like net shared by the stage."""
    tables = ctx.tables
    local = {parts.x: "X", stage.rail: "rail"}
    if stage.footer_node is not None:
        local[stage.footer_node] = "foot"
    inputs = {n: k for k, n in enumerate(names)}
    out = []
    for d, _, _ in devices:
        for t in (d.drain, d.source):
            local.setdefault(t, len(local))
        if d.gate in inputs:
            gate = ("input", inputs[d.gate], d.gate in late)
        elif d.gate in inputs or d.gate in local or d.gate in set(nodes_in):
            return None
        else:
            gate = ("net", d.gate)
        tabs = tuple(sorted((k[1], a.tobytes()) for k, a in tables.terminals.items() if k[0] == d.name))
        cur = tables.currents.get(d.name)
        out.append((d.type, d.w_um, d.l_um, local[d.drain], local[d.source], gate, d.name in stage.evaluation,
                    d.name in stage.keepers, tabs, None if cur is None else np.asarray(cur, dtype=float).tobytes()))
    for n in sorted(nodes_in, key=lambda n: local.get(n, len(local))):
        if n not in local:
            return None
        r = ctx.rest(n)
        out.append((local[n], n in stage.secondary_precharge or n in precharged, float(r.c_lin), r.c0.tobytes(), r.pb.tobytes(),
                    r.m.tobytes(), r.body_high.tobytes()))
    return tuple(out)


class _GiveUp(Exception):
    """Raised inside :func:`bounded_patterns` past its limits."""
