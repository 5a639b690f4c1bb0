"""The worst case with the foundry models' device charges.

When the tech file has ``[models]``, :func:`foundry_worst_case` re-solves
the candidate patterns of a stage with
:func:`analyze.physics.settling.final_voltage_with_devices` for every
input-arrival case the constraints allow (:mod:`analyze.search.cases`),
and takes the lowest final voltage (p-type: highest).  The receiver
threshold is the switching point measured from the same models.

Candidates: every counted pattern when there are at most
:data:`EXHAUSTIVE` of them (exact over patterns and cases); otherwise the
:data:`RANKED` worst patterns with distinct shared nodes of the lumped
model (:func:`analyze.search.analysis.worst_patterns`), whose worst
:func:`analyze.search.branch_bound.exact_worst` then proves the worst over
every pattern (or finds and solves those that could be worse); where that
walk gives up, the ranked worst stands, said in the result's note.

Notes
-----
A few ngspice runs per stage (cached, :mod:`analyze.physics.device_tables`),
then per distinct group, gate levels and case one charge-conservation solve
(a root search, and past the pass limit a small stiff ODE: milliseconds).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from analyze.physics.device_charge import charge_context, clock_setup, gate_levels, table_devices
from analyze.physics.settling import BOUND_TOLERANCE, settle
from analyze.physics.device_tables import stage_tables
from analyze.physics.threshold import pass_limit
from analyze.search.cases import arrival_cases, late_inputs

__all__ = ["FoundryOutcome", "FoundryStage", "foundry_worst_case", "prepare_stage", "solve_candidates",
           "precharged_through",
           "EXHAUSTIVE", "RANKED"]

#: Up to this many counted patterns, every one is solved.
EXHAUSTIVE = 256
#: Past that, this many of the lumped model's worst patterns.
RANKED = 16


@dataclass
class FoundryOutcome:
    """What :func:`foundry_worst_case` found.

    Attributes
    ----------
    worst : WorstCase or None
        With ``case`` set; None when no pattern counts.
    threshold_v : float
        The receivers' switching point from the models.
    corner : str or None
    note : str or None
        How the candidates were chosen, when not every counted pattern.
    """

    worst: object
    threshold_v: float
    corner: object
    note: object


@dataclass
class FoundryStage:
    """What the foundry-model solve of one stage prepares once
    (:func:`prepare_stage`): its table devices, measured tables, solver
    context and the receivers' switching point; ``solved`` remembers final voltages by
    what they depend on, ``pending`` the solves whose creep is left
    (:func:`solve_candidates`)."""

    devices: list
    tables: object
    context: object
    threshold_v: float
    corner: object
    solved: dict = field(default_factory=dict)
    pending: dict = field(default_factory=dict)


def prepare_stage(circuit, stage, tech) -> FoundryStage:
    """Measure (or read from the cache) the stage's device tables and
    prepare the solver (a few ngspice runs per stage and corner, cached)."""
    vdd = float(tech.vdd)
    corner = tech.models.corners[0] if tech.models.corners else None
    tdevs = table_devices(circuit, stage)
    levels = {}
    for d in tdevs:
        vt = abs(tech.mos[d.type].vt0)
        levels[d.name] = {0.0, vdd, vdd - vt, vt}
    evaluation = [d.name for d in tdevs if d.name in stage.evaluation]
    tables = stage_tables(circuit, stage, tech, levels, corner, passes=evaluation,
                          clock=clock_setup(circuit, stage, tech, tdevs))
    ctx = charge_context(circuit, stage, tech, tables)
    if tables.thresholds:
        vms = list(tables.thresholds.values())
        threshold = max(vms) if stage.polarity == "n" else min(vms)
    else:
        threshold = 0.5 * vdd
    return FoundryStage(tdevs, tables, ctx, threshold, corner)


def solve_candidates(prep: FoundryStage, circuit, stage, tech, constraints, candidates, cases=None,
                     precharged=frozenset(), stop_at=None):
    """The worst of ``candidates`` over the arrival cases with the models:
    a WorstCase with ``case`` set, or None when there are no candidates.
    Nodes in ``precharged`` (and the stage's own secondary precharge) start
    at the precharge level.  With ``stop_at`` (V), the search may end at the
    first pattern and case found at or past it (n-type: at or below; p-type:
    at or above), returned in place of the worst: a caller that only needs
    to know whether the worst is past ``stop_at`` need not solve the rest.
    A result short of ``stop_at`` is always the worst.

    Notes
    -----
    The worst is the lowest final voltage (p-type: highest), the first of
    the candidates and cases in order among equals.  The creep past the
    pass limit (a stiff ODE) is the costly part of a solve; a pattern and
    case whose proven bound (:class:`analyze.physics.settling.Settling`)
    is already past the worst found cannot be the worst and is left out,
    so the creeps are solved in the order of their bounds, the most
    promising first.  The result is the same as solving every one.
    """
    vdd = float(tech.vdd)
    n_type = stage.polarity == "n"
    sign = 1.0 if n_type else -1.0
    cases = arrival_cases(circuit, stage, constraints) if cases is None else tuple(cases)
    start_x, start_int = (vdd, 0.0) if n_type else (0.0, vdd)
    pre = set(stage.secondary_precharge) | set(precharged)
    items, values, pending = [], {}, []
    for wc in candidates:
        group = [stage.dynamic_node, *wc.shared_nodes]
        start = {n: (start_x if n in pre else start_int) for n in group}
        start[stage.dynamic_node] = start_x
        on = 1 if n_type else 0
        members = set(group)
        links = [(d.name, d.drain, d.source) for d in prep.devices
                 if d.name in stage.evaluation and wc.inputs.get(d.gate) == on
                 and d.drain in members and d.source in members]
        for case in cases:
            late = late_inputs(circuit, stage, constraints, case)
            lv = gate_levels(circuit, stage, tech, wc.inputs, late, prep.devices)
            st = precharged_through(prep, stage, tech, wc.inputs, late, pre, start)
            # the result depends only on the group, its starts, the levels of
            # the devices on it and which of them conduct
            key = (tuple(group), tuple(st[n] for n in group), tuple(links),
                   tuple((d.name, lv.before[d.name], lv.after[d.name]) for d in prep.devices
                         if d.drain in members or d.source in members))
            k = len(items)
            items.append((wc, case, key))
            if key in prep.solved:
                values[k] = prep.solved[key]
                continue
            settling = _settling(prep, key, group, lv, st, links)
            if settling.finish is None:
                values[k] = prep.solved[key] = settling.value()
            else:
                pending.append((k, settling))

    def clipped(v):
        # the window opens with the node at its start: its extreme is never past it
        return min(v, start_x) if n_type else max(v, start_x)

    # the worst found so far, as sign · V (lowest is worst); unproven bounds
    # first, then the most promising bound first
    found = [sign * clipped(v) for v in values.values()]
    w = min(found) if found else None
    cut = None if stop_at is None else sign * float(stop_at)

    def stopped():
        """The first item (in order) at or past ``stop_at`` among those solved."""
        k = min(k for k, v in values.items() if sign * clipped(v) <= cut)
        wc, case, _ = items[k]
        v = clipped(values[k])
        return replace(wc, v_final=v, droop_v=abs(start_x - v), case=case)

    if cut is not None and w is not None and w <= cut:
        return stopped()
    pending.sort(key=lambda ks: (ks[1].bound is not None, 0.0 if ks[1].bound is None else sign * ks[1].bound,
                                 ks[0]))
    for k, settling in pending:
        key = items[k][2]
        if key not in prep.solved:
            b = settling.bound
            if b is not None and w is not None and sign * clipped(b - sign * BOUND_TOLERANCE) > w:
                continue  # ends past the worst found: not the worst
            prep.solved[key] = settling.value()
        values[k] = prep.solved[key]
        w = sign * clipped(values[k]) if w is None else min(w, sign * clipped(values[k]))
        if cut is not None and w <= cut:
            return stopped()
    if any(v != v for v in values.values()):
        # a NaN: solve everything, so the scan below meets what it always met
        for k, settling in pending:
            if k not in values:
                values[k] = prep.solved[items[k][2]] = settling.value()
    worst, worst_v = None, None
    for k in sorted(values):
        wc, case, _ = items[k]
        v = clipped(values[k])
        if worst is None or (v < worst_v if n_type else v > worst_v):
            worst, worst_v = replace(wc, v_final=v, droop_v=abs(start_x - v), case=case), v
    return worst


def _settling(prep: FoundryStage, key, group, levels, start, links):
    """The :class:`analyze.physics.settling.Settling` of one group,
    remembered by ``key`` while its creep is unsolved (two candidates or
    cases can share a key)."""
    memo = prep.pending
    if key not in memo:
        memo[key] = settle(prep.context, group, levels, start, links=links)
    return memo[key]


def precharged_through(prep: FoundryStage, stage, tech, inputs: dict, late: set, pre: set, start: dict) -> dict:
    """Start voltages with what the precharge reaches through conducting
    devices: an internal node joined during precharge (through evaluation
    devices whose inputs already hold their on level) to the dynamic node or
    to a precharged internal node starts at the pass limit
    V_lim = VDD − VT(V_lim) (p-type: |VT| above ground) unless it starts
    further; the precharged nodes themselves at the rail.

    Source: the pass-transistor limit of an nmos passing a high level
    (Weste & Harris, CMOS VLSI Design, 4th ed., sec. 2.5.4, from memory);
    the precharge phase is long enough to reach it (common practice).
    """
    n_type = stage.polarity == "n"
    vdd = float(tech.vdd)
    on = 1 if n_type else 0
    v_lim = pass_limit(tech.mos["nmos" if n_type else "pmos"], vdd)
    v_lim = v_lim if n_type else vdd - v_lim
    adj = {}
    for d in prep.devices:
        if d.name in stage.evaluation and d.gate in inputs and d.gate not in late and inputs[d.gate] == on:
            adj.setdefault(d.drain, []).append(d.source)
            adj.setdefault(d.source, []).append(d.drain)
    seen = {stage.dynamic_node, *pre}
    todo = list(seen)
    while todo:
        n = todo.pop()
        for m in adj.get(n, ()):
            if m not in seen and m in stage.internal_nodes:
                seen.add(m)
                todo.append(m)
    out = dict(start)
    for n in seen - {stage.dynamic_node, *pre}:
        if n in out:
            out[n] = max(out[n], v_lim) if n_type else min(out[n], v_lim)
    return out


def foundry_worst_case(circuit, stage, tech, constraints, candidates, note=None, cases=None,
                       precharged=frozenset()) -> FoundryOutcome:
    """The worst pattern and arrival case with the foundry models.

    Parameters
    ----------
    circuit, stage, tech
        ``tech.models`` must be set; its first corner is used.
    constraints : Constraints or None
    candidates : list of WorstCase
        The patterns to solve (see the module text for how they are chosen,
        :func:`analyze.search.analysis.analyze_stage`).
    note : str, optional
        Said in the result (how the candidates were chosen).
    cases : iterable of str, optional
        Only these arrival cases (default: every case the constraints allow).
    precharged : iterable of str, optional
        Internal nodes that start precharged (predischarged) as well.

    Returns
    -------
    FoundryOutcome
        ``worst`` is None when no pattern counts.
    """
    prep = prepare_stage(circuit, stage, tech)
    worst = solve_candidates(prep, circuit, stage, tech, constraints, candidates, cases, precharged)
    return FoundryOutcome(worst, prep.threshold_v, prep.corner, note)
