"""Simulate the worst cases of a stage with the foundry's models.

:func:`simulate_stage` takes the worst few patterns the analysis found
(:func:`analyze.search.analysis.worst_patterns`), every input-arrival case
the constraints allow (:mod:`analyze.search.cases`), with and without
the keeper's help, and runs them per corner in one ngspice process each
(:mod:`analyze.simulate.deck`, :mod:`analyze.simulator`).  The receiver's
switching threshold comes from the same models (a DC sweep of each
receiving inverter: the input voltage where output equals input).

The verdict per case: ``margin_v = v_min − threshold_v`` (p-type:
``threshold_v − v_max``), ``fail`` below the tech file's guard.  The keeper
is in the simulation; the droop without its help is reported beside it.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np

from analyze.search.analysis import StageResult, worst_patterns
from analyze.search.constraints import Constraints
from analyze.search.cases import arrival_cases, input_levels
from analyze.simulate.deck import EVAL_NS, MAX_INSTANCES, Run, stage_deck, stage_devices
from extract.circuit import Circuit
from extract.errors import InputError
from extract.tech import Tech

__all__ = ["SimulatedCase", "simulate_stage", "simulate_result", "device_models"]


@dataclass
class SimulatedCase:
    """One pattern, arrival case and corner, simulated.

    Attributes
    ----------
    corner : str or None
        None: the library included whole.
    case : str
        ``"rising"`` or ``"settled"``.
    inputs : dict of str to int
        The pattern (evaluation values).
    v_min : float
        Lowest dynamic-node voltage within the evaluation window (p-type:
        highest), keeper included, V.
    t_min_ns : float
        When it was reached, ns after evaluation started.
    receiver_peak_v : float or None
        The first receiver output's extreme in the window (its glitch).
    threshold_v : float
        Receiver switching threshold from the same models.
    margin_v : float
    status : str
    v_min_without_keeper, margin_without_keeper_v : float or None
        The same with the keeper's gate tied off (None: no keeper).
    waveform : tuple of numpy.ndarray or None
        ``(t in ns after evaluation starts, V(X))`` with the keeper.
    """

    corner: str | None
    case: str
    inputs: dict
    v_min: float
    t_min_ns: float
    receiver_peak_v: float | None
    threshold_v: float
    margin_v: float
    status: str
    v_min_without_keeper: float | None = None
    margin_without_keeper_v: float | None = None
    waveform: tuple | None = field(default=None, repr=False)


def device_models(circuit: Circuit, tech: Tech, devices, defines=None) -> dict[str, str]:
    """Device name -> the library device it is simulated as.

    A device read from a netlist keeps its own model name when the library
    defines it (``defines(name)`` is true); otherwise, and for extracted
    devices, it is the ``[models]`` device of its type.

    Parameters
    ----------
    circuit, tech
    devices : iterable of Device
    defines : callable, optional
        ``defines(name) -> bool``; default: only the ``[models]`` names.

    Examples
    --------
    >>> from extract.circuit import Device
    >>> from extract.tech import Models, MosParams, NetRoles
    >>> n = MosParams("nmos", 0.45, 0.4, 0.8, 200, 8, 0, 1.0, 0.25, 0.25, 0.5, 0.33, 0.8, 0.8)
    >>> t = Tech("t", 1.8, NetRoles(), {}, {"nmos": n, "pmos": n}, models=Models("m.lib", (), "nf", "pf"))
    >>> d = [Device("M1", "nmos", "a", "g", "b", 1, .15, model="nf_lvt"), Device("M2", "pmos", "a", "g", "b", 1, .15)]
    >>> device_models(Circuit("c", {}, d), t, d, defines=lambda name: name == "nf_lvt")
    {'M1': 'nf_lvt', 'M2': 'pf'}
    >>> device_models(Circuit("c", {}, d), t, d)["M1"]
    'nf'
    """
    default = {"nmos": tech.models.nmos, "pmos": tech.models.pmos}
    known = {v.lower() for v in default.values()}
    out = {}
    for d in devices:
        own = d.model
        keep = own and (own.lower() in known or (defines is not None and defines(own)))
        out[d.name] = own if keep else default[d.type]
    return out


def _library_defines(tech: Tech, corner):
    """``defines(name)``: whether the library section defines a device of that
    name (pruning for it alone succeeds; cached by the pruner)."""
    from analyze.simulator.models import prune_models

    seen: dict[str, bool] = {}

    def defines(name: str) -> bool:
        key = name.lower()
        if key not in seen:
            try:
                prune_models(tech.models, corner, [name])
                seen[key] = True
            except InputError:
                seen[key] = False
        return seen[key]

    return defines


def _corners(tech: Tech, wanted) -> list:
    have = list(tech.models.corners)
    if not wanted:
        return have or [None]
    out = []
    for c in wanted:
        match = [h for h in have if h.lower() == c.lower()]
        if have and not match:
            raise InputError(tech.path, f"corner {c} is not in models.corners ({', '.join(have)})", "--corner")
        out.append(match[0] if match else c)
    return out


def simulate_result(circuit: Circuit, result: StageResult, tech: Tech, constraints: Constraints | None = None,
                    corners=None, count: int = 3) -> StageResult:
    """``result`` with its simulation attached (see :func:`simulate_stage`)
    and the notes of what the decks had to assume."""
    notes: list[str] = []
    sims = simulate_stage(circuit, result, tech, constraints, corners, count, notes=notes)
    return result.with_simulation(sims, sorted(set(notes)))


def simulate_stage(circuit: Circuit, result: StageResult, tech: Tech, constraints: Constraints | None = None,
                   corners=None, count: int = 3, notes: list | None = None) -> list[SimulatedCase]:
    """Simulate the worst patterns of one stage at every corner.

    Parameters
    ----------
    circuit, tech, constraints
    result : StageResult
        The analysis of the stage (its worst case comes first).
    corners : list of str, optional
        Default: the tech file's ``[models] corners`` (or the whole library).
    count : int
        Distinct worst patterns to simulate.
    notes : list, optional
        Receives what the decks had to assume (an undriven gate tied off).

    Returns
    -------
    list of SimulatedCase
        Per corner, case and pattern, in that order; empty when no pattern
        counts.

    Raises
    ------
    InputError
        No ``[models]``, a corner or device the library lacks, no ngspice,
        a simulation that fails.

    Notes
    -----
    Patterns × cases × (keeper on, off) copies of the stage per corner,
    a few copies per ngspice run (ngspice's set-up time grows faster than
    linearly with device instances per deck, see
    :func:`analyze.simulate.deck.stage_deck`), the runs of a corner in
    parallel, one process per core; the models are pruned to the devices
    used (:func:`analyze.simulator.models.prune_models`, cached).
    """
    from analyze.simulator.models import prune_models
    from analyze.simulator.ngspice import run_deck

    if tech.models is None:
        raise InputError(tech.path, "--simulate needs a [models] table (the foundry model library)", "models")
    stage = result.stage
    patterns = worst_patterns(circuit, stage, tech, constraints, count)
    if result.worst_case is not None:
        # the analysis' own worst case first (with the foundry models it may
        # differ from the lumped ranking), then the lumped runners-up
        first = result.worst_case
        patterns = [first] + [p for p in patterns if p.inputs != first.inputs][: max(0, count - 1)]
    if not patterns:
        return []
    cases = arrival_cases(circuit, stage, constraints)
    runs, keys = [], []
    for case in cases:
        for wc in patterns:
            levels = input_levels(circuit, stage, wc.inputs, case, constraints)
            runs.append(Run(levels, True))
            keys.append((case, wc))
            if stage.keepers:
                runs.append(Run(levels, False))
                keys.append(None)
    devices = stage_devices(circuit, stage)
    corner_list = _corners(tech, corners)
    models = device_models(circuit, tech, devices, _library_defines(tech, corner_list[0]))
    n_type = stage.polarity == "n"
    out = []
    # keep each keeper-less run with its keeper run, and each deck small
    per_deck = max(2, MAX_INSTANCES // max(1, len(devices)))
    groups, group = [], []
    for r in range(len(runs)):
        if len(group) >= per_deck and keys[r] is not None:
            groups.append(group)
            group = []
        group.append(r)
    groups.append(group)
    for corner in corner_list:
        pruned = prune_models(tech.models, corner, sorted(set(models.values())))
        jobs = []
        for g, members in enumerate(groups):
            sd = stage_deck(circuit, stage, tech, [runs[r] for r in members], include=pruned.path, models=models,
                            kinds=pruned.kinds, scale=pruned.scale, with_threshold=g == 0,
                            title=f"dynshare: stage {stage.dynamic_node} of {circuit.cell}, corner "
                            f"{corner or 'library'}, part {g + 1} of {len(groups)}")
            if notes is not None:
                notes.extend(sd.notes)
            expect = [m["v"] for m in sd.measures] + sd.thresholds
            purpose = (f"simulation of stage {stage.dynamic_node} of {circuit.cell} at corner "
                       f"{corner or '(whole library)'}")
            jobs.append((sd, members, purpose, expect))
        try:
            with ThreadPoolExecutor(max_workers=max(1, min(len(jobs), os.cpu_count() or 1))) as pool:
                results = list(pool.map(lambda j: run_deck(j[0].text, j[2], expect=j[3], tables=[j[0].table]),
                                        jobs))
        except InputError as exc:
            if exc.file == "ngspice":  # the program itself is missing: say so as it is
                raise
            # name the input whose stage could not be simulated
            raise InputError(circuit.source or circuit.cell, f"{exc.file}: {exc.message}",
                             f"stage {stage.dynamic_node}, corner {corner or '(library)'}") from None
        first = jobs[0][0]
        vms = [results[0].scalar(name) for name in first.thresholds]
        if vms:
            threshold = max(vms) if n_type else min(vms)
        else:
            threshold = 0.5 * tech.vdd
        for (sd, members, _, _), res in zip(jobs, results):
            table = res.tables[sd.table]
            t_ns = table[:, 0] * 1e9 - EVAL_NS
            keep = t_ns >= -0.2
            for i, r in enumerate(members):
                key = keys[r]
                if key is None:
                    continue
                case, wc = key
                m = sd.measures[i]
                v = res.scalar(m["v"])
                margin = v - threshold if n_type else threshold - v
                sim = SimulatedCase(
                    corner=corner, case=case, inputs=dict(wc.inputs), v_min=v,
                    t_min_ns=res.scalar(m["t"]) * 1e9 - EVAL_NS,
                    receiver_peak_v=res.scalar(m["out"]) if m["out"] else None,
                    threshold_v=threshold, margin_v=margin, status="fail" if margin < tech.guard else "pass",
                    waveform=(t_ns[keep], table[keep, 1 + i]),
                )
                if i + 1 < len(members) and keys[members[i + 1]] is None:
                    v2 = res.scalar(sd.measures[i + 1]["v"])
                    sim.v_min_without_keeper = v2
                    sim.margin_without_keeper_v = v2 - threshold if n_type else threshold - v2
                if not (np.isfinite(sim.v_min) and np.isfinite(sim.threshold_v)):
                    raise InputError(circuit.source or circuit.cell, f"stage {stage.dynamic_node}: the simulation "
                                     f"at corner {corner} gave no finite voltage")
                out.append(sim)
    return out
