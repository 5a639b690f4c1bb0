"""The worst case with the foundry models' device charges.

When the tech file has ``[models]``, :func:`foundry_worst_case` re-solves
the candidate patterns of a stage with
:func:`analyze.physics.device_charge.final_voltage_with_devices` for every
input-arrival case the constraints allow (:mod:`analyze.search.cases`),
and takes the lowest final voltage (p-type: highest).  The receiver
threshold is the switching point measured from the same models.

Candidates: every counted pattern when there are at most
:data:`EXHAUSTIVE` of them (exact over patterns and cases); otherwise the
:data:`RANKED` worst patterns with distinct shared nodes of the lumped
model (:func:`analyze.search.analysis.worst_patterns`), which is then a
ranking heuristic, said in the result's note.

Notes
-----
One ngspice run per stage (cached, :mod:`analyze.physics.device_tables`),
then per candidate and case one root search over table lookups (about a
millisecond).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from analyze.physics.device_charge import (charge_context, clock_setup, final_voltage_with_devices, gate_levels,
                                           table_devices)
from analyze.physics.device_tables import stage_tables
from analyze.search.cases import arrival_cases, low_in_precharge, top_inputs

__all__ = ["FoundryOutcome", "foundry_worst_case", "EXHAUSTIVE", "RANKED"]

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


def foundry_worst_case(circuit, stage, tech, constraints, candidates, note=None, cases=None) -> FoundryOutcome:
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

    Returns
    -------
    FoundryOutcome
        ``worst`` is None when no pattern counts.
    """
    vdd = float(tech.vdd)
    n_type = stage.polarity == "n"
    corner = tech.models.corners[0] if tech.models.corners else None
    tdevs = table_devices(circuit, stage)
    levels = {}
    for d in tdevs:
        vt = abs(tech.mos[d.type].vt0)
        levels[d.name] = {0.0, vdd, vdd - vt, vt}
    tops = [d.name for d in tdevs if d.name in stage.evaluation and stage.dynamic_node in (d.drain, d.source)]
    tables = stage_tables(circuit, stage, tech, levels, corner, passes=tops,
                          clock=clock_setup(circuit, stage, tech, tdevs))
    ctx = charge_context(circuit, stage, tech, tables)
    if tables.thresholds:
        vms = list(tables.thresholds.values())
        threshold = max(vms) if n_type else min(vms)
    else:
        threshold = 0.5 * vdd
    cases = arrival_cases(circuit, stage, constraints) if cases is None else tuple(cases)
    late_top = top_inputs(circuit, stage) | low_in_precharge(stage, constraints)
    start_x, start_int = (vdd, 0.0) if n_type else (0.0, vdd)
    worst, worst_v = None, None
    for wc in candidates:
        group = [stage.dynamic_node, *wc.shared_nodes]
        start = {n: start_int for n in group}
        start.update({n: (vdd if n_type else 0.0) for n in stage.secondary_precharge if n in start})
        start[stage.dynamic_node] = start_x
        on = 1 if n_type else 0
        passes = [p for p in tops if wc.inputs.get(circuit.device(p).gate) == on]
        for case in cases:
            late = set(stage.inputs) if case == "rising" else late_top
            lv = gate_levels(circuit, stage, tech, wc.inputs, late, tdevs)
            v = final_voltage_with_devices(ctx, group, lv, start, passes=passes)
            # the window opens with the node at its start: its extreme is never past it
            v = min(v, start_x) if n_type else max(v, start_x)
            if worst is None or (v < worst_v if n_type else v > worst_v):
                worst, worst_v = replace(wc, v_final=v, droop_v=abs(start_x - v), case=case), v
    return FoundryOutcome(worst, threshold, corner, note)
