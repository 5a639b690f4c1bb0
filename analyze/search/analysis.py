"""Charge-sharing check of one dynamic stage: the public entry points.

:func:`analyze_stage` finds the exact worst-case pattern, the receiver
threshold, the margin, pass/fail and, for a failing stage, the nodes that
need a precharge (predischarge) device.  :func:`evaluate_pattern` and
:func:`iter_counted_patterns` look at single patterns.

Physics (n-type; a p-type stage is the mirror image): the dynamic node
starts at VDD, internal nodes at 0 V except those precharged; inputs are 0
or VDD; the footer conducts.  A pattern counts when the evaluation network
does not join the dynamic node to the rail.  ``v_final`` comes from charge
conservation with SPICE junction depletion charge and the body-effect pass
limit (:mod:`analyze.physics.redistribution`), ``v_final_linear`` from zero-bias
capacitances, the threshold from the square-law inverter formula
(:mod:`analyze.physics.threshold`).

Constraints are an :class:`analyze.search.constraints.Constraints` (from
:func:`analyze.search.constraints.load_constraints`) or None for none.

Examples
--------
A footless domino NAND2 with linear capacitances only and no body effect
(pass limit 1.8 − 0.45 = 1.35 V): the worst case shares n1 with X,
30 fF · 1.8 V / 40 fF = 1.35 V; three of the four patterns count.

>>> from extract.circuit import CapParts, Circuit, Device, Net
>>> from extract.tech import MosParams, NetRoles, Tech
>>> from analyze.stages.stage import Stage
>>> p = dict(gamma=0.0, phi=0.8, kp=200.0, cox=8.0, cgo=0.0, cj=1.0, cjsw=0.2,
...          cjswg=0.2, mj=0.5, mjsw=0.33, pb=0.8, pbsw=0.8)
>>> tech = Tech("t", 1.8, NetRoles(), {}, {"nmos": MosParams("nmos", 0.45, **p),
...                                         "pmos": MosParams("pmos", -0.45, **p)})
>>> nets = {n: Net(n, cap=CapParts(wire=c)) for n, c in [("X", 30.0), ("n1", 10.0)]}
>>> devs = [Device("MA", "nmos", "X", "A", "n1", 1.0, 0.18),
...         Device("MB", "nmos", "n1", "B", "VSS", 1.0, 0.18)]
>>> st = Stage("X", "n", "CLK", "VDD", "VSS", (), ("MA", "MB"), None, None, ("A", "B"), ("n1",))
>>> circuit = Circuit("nand2", nets, devs)
>>> r = analyze_stage(circuit, st, tech)
>>> r.worst_case.inputs, round(r.worst_case.v_final, 6), r.counted_patterns, r.status
({'A': 1, 'B': 0}, 1.35, 3, 'pass')
>>> evaluate_pattern(circuit, st, tech, {"A": 1, "B": 1}) is None
True
>>> [w.inputs for w in iter_counted_patterns(circuit, st, tech, limit=2)]
[{'A': 0, 'B': 0}, {'A': 0, 'B': 1}]
>>> find_worst_case(circuit, st, tech).shared_nodes
['n1']
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from itertools import islice
from typing import Iterator

from analyze.search.constraints import Constraints, check_constraints_apply, stage_blocks
from analyze.search.contexts import MODELS_UNUSABLE, StageContexts
from analyze.search.flags import Flag, find_flags
from analyze.search.patterns import bind_blocks, count_counted, iter_counted
from analyze.physics.sharing import SharingModel, WorstCase, build_model
from analyze.stages.recognize import find_stages
from analyze.stages.stage import Stage
from analyze.physics.threshold import receiver_threshold
from analyze.search.worstcase import worst_case
from extract.circuit import Circuit
from extract.tech import Tech
from extract.errors import InputError

__all__ = [
    "WorstCase",
    "Flag",
    "StageResult",
    "analyze_stage",
    "analyse_circuit",
    "find_worst_case",
    "evaluate_pattern",
    "iter_counted_patterns",
    "worst_patterns",
]


@dataclass
class StageResult:
    """The check of one stage.

    Attributes
    ----------
    stage : Stage
    threshold_v : float
        Receiver switching threshold, V.
    margin_v : float
        ``v_final − threshold_v`` (n-type) or ``threshold_v − v_final``
        (p-type), V.
    status : str
        ``"fail"`` when ``margin_v < tech.guard``, else ``"pass"``.
    worst_case : WorstCase or None
        None when no allowed pattern counts; the margin is then taken with
        the dynamic node at its starting level (VDD, or 0 V for p-type).
    flags : list of Flag
    flag_note : str or None
    counted_patterns : int or None
        Number of counted patterns the constraints allow; None when the
        count gave up (:data:`analyze.search.patterns.COUNT_BUDGET`).
    simulation : list
        Simulated cases (:class:`analyze.simulate.run.SimulatedCase`) when
        ``--simulate`` ran; then ``status`` is the simulated verdict and
        ``analysis_status`` the analysis' own.
    analysis_status : str or None
    simulation_notes : list of str
        What the simulation had to assume (an undriven gate tied off, ...).
    physics : str
        The model of the final voltage and threshold: ``"level-1 (tech
        file)"`` (the lumped model with the tech file's numbers) or
        ``"foundry models, corner C"`` (device charges and switching point
        measured from ``[models]``, :mod:`analyze.search.foundry`), with
        ``", T C"`` (°C) after it when ``[models] temperature`` is not 27.
    physics_note : str or None
    """

    stage: Stage
    threshold_v: float
    margin_v: float
    status: str
    worst_case: WorstCase | None
    flags: list[Flag] = field(default_factory=list)
    flag_note: str | None = None
    counted_patterns: int | None = 0
    simulation: list = field(default_factory=list)
    analysis_status: str | None = None
    simulation_notes: list = field(default_factory=list)
    physics: str = "level-1 (tech file)"
    physics_note: str | None = None

    def with_simulation(self, sims: list, notes=()) -> "StageResult":
        """This result with ``sims`` attached and the simulated verdict:
        fail when any simulated case fails."""
        from dataclasses import replace

        if not sims:
            return self
        status = "fail" if any(s.status == "fail" for s in sims) else "pass"
        return replace(self, simulation=list(sims), analysis_status=self.status, status=status,
                       simulation_notes=list(notes))


def _prepared(circuit, stage, tech, constraints, precharged):
    model = build_model(circuit, stage, tech, precharged)
    return model, bind_blocks(model, stage_blocks(constraints, model.inputs))


def _finite_or_refuse(stage: Stage, tech: Tech, threshold: float, wc) -> None:
    """Refuse a result that is not a finite number: NaN compares false
    with everything, so ``margin < guard`` would pass it.  The numbers come
    from the tech file's ``[mos.*]`` tables and the node capacitances, so
    the tech file is named as the cause."""
    place = f"stage {stage.dynamic_node}"
    if not math.isfinite(threshold):
        raise InputError(tech.path or "tech", f"the receiver switching threshold is {threshold}, not a finite "
                         "voltage: the mos.nmos/mos.pmos numbers (kp, vt0) give no answer", place)
    if wc is not None:
        for name in ("v_final", "v_final_linear"):
            value = getattr(wc, name)
            if not math.isfinite(value):
                raise InputError(tech.path or "tech", f"{name} is {value}, not a finite voltage: the junction "
                                 "numbers (cj, mj, pb) or the node capacitances give no answer", place)


def analyze_stage(
    circuit: Circuit,
    stage: Stage,
    tech: Tech,
    constraints: Constraints | None = None,
    *,
    precharged=frozenset(),
) -> StageResult:
    """Check ``stage`` for charge sharing.

    Parameters
    ----------
    circuit : Circuit
    stage : Stage
    tech : Tech
    constraints : Constraints or None
    precharged : iterable of str
        Internal nodes to treat as precharged (predischarged) in addition
        to the stage's own secondary precharge.

    Returns
    -------
    StageResult

    Notes
    -----
    Worst case by :func:`analyze.search.worstcase.worst_case`, count by
    :func:`analyze.search.patterns.count_counted`, flags by
    :func:`analyze.search.flags.find_flags` (failing stages only).
    """
    try:
        model, choices = _prepared(circuit, stage, tech, constraints, precharged)
        threshold = receiver_threshold(circuit, stage, tech)
        found = worst_case(model, choices)
        wc = None if found is None else model.outcome(found.values, found.component)
    except (ZeroDivisionError, OverflowError, ValueError) as exc:
        if isinstance(exc, ValueError) and "nan" not in str(exc).lower():
            raise
        raise InputError(tech.path or "tech", "the charge-sharing solution is not a finite number with "
                         "these mos.nmos/mos.pmos numbers and node capacitances", f"stage {stage.dynamic_node}") from None
    counted = count_counted(model, choices)
    physics, physics_note = "level-1 (tech file)", None
    prep = candidates = exact = None
    if tech.models is not None and not precharged:
        from analyze.search.foundry import EXHAUSTIVE, RANKED, prepare_stage, solve_candidates

        # the lumped model's patterns, from the model prepared above
        # (what iter_counted_patterns and worst_patterns would prepare again)
        if counted is not None and counted <= EXHAUSTIVE:
            candidates, chosen = [model.outcome(values, comp) for values, comp in iter_counted(model, choices)], None
        else:
            candidates = _ranked(model, choices, stage, wc, RANKED)
            chosen = (f"foundry-model worst case taken over the lumped model's {len(candidates)} worst patterns "
                      f"with distinct shared nodes (more than {EXHAUSTIVE} counted patterns)")
        try:
            prep = prepare_stage(circuit, stage, tech)
        except InputError as exc:
            # the library cannot simulate these devices (outside its bins, ...):
            # the lumped model stands, and the report says why
            physics_note = f"{MODELS_UNUSABLE} ({exc.line()}); level-1 numbers used"
        else:
            found_f = solve_candidates(prep, circuit, stage, tech, constraints, candidates)
            if chosen is not None and found_f is not None:
                from analyze.search.branch_bound import exact_worst

                exact = exact_worst(prep, circuit, stage, tech, constraints, model, choices, found_f)
                if exact is not None:
                    ranked = len(candidates)
                    found_f, chosen = exact.worst, None
                    candidates = candidates + exact.solved
                    every = "every" if counted is None else f"all {counted}"
                    physics_note = (f"foundry-model worst case exact over {every} counted patterns and "
                                    f"every arrival case: the lumped model's {ranked} "
                                    f"worst patterns, then a branch and bound ({exact.nodes} partial patterns "
                                    f"bounded, {len(exact.solved)} left to solve)")
            if found_f is not None:
                wc = replace(found_f, v_final_linear=wc.v_final_linear if wc else found_f.v_final_linear)
            threshold = prep.threshold_v
            physics = f"foundry models, corner {prep.corner or '(library)'}"
            if tech.models.temperature_c != 27.0:
                physics += f", {tech.models.temperature_c:g} C"
            if chosen is not None:
                physics_note = _ranked_verdict_note(prep, circuit, stage, tech, constraints, wc, chosen)
    v = model.to_volts(model.vdd) if wc is None else wc.v_final
    n_type = stage.polarity == "n"
    margin = v - threshold if n_type else threshold - v
    _finite_or_refuse(stage, tech, threshold, wc)
    status = "fail" if margin < tech.guard else "pass"
    flags, note = [], None
    if status == "fail":
        need = threshold + tech.guard if n_type else tech.vdd - threshold + tech.guard
        flags, note = find_flags(circuit, model, choices, need)
        if prep is not None:
            from analyze.search.foundry_flags import prove_flags

            lumped = flags
            flags, note = prove_flags(prep, circuit, stage, tech, constraints, candidates, lumped, threshold)
            if exact is not None:
                flags, note = _flags_over_every_pattern(prep, circuit, stage, tech, constraints, model, choices,
                                                        candidates, flags, lumped, threshold, note)
    return StageResult(
        stage=stage,
        threshold_v=threshold,
        margin_v=margin,
        status=status,
        worst_case=wc,
        flags=flags,
        flag_note=note,
        counted_patterns=counted,
        physics=physics,
        physics_note=physics_note,
    )


#: Rounds of :func:`_flags_over_every_pattern`: each adds one pattern the
#: flags fall short on and proves the flags again.
FLAG_ROUNDS = 8


def _flags_over_every_pattern(prep, circuit, stage, tech, constraints, model, choices, candidates, flags,
                              lumped_flags, threshold, note):
    """Flags of a wide stage that hold over every counted pattern: the
    flags proven over the ranked patterns and the walk's leaves are checked
    by the branch and bound (:func:`analyze.search.branch_bound.flags_hold`);
    a pattern they fall short on joins the candidates and the flags are
    proven again, up to :data:`FLAG_ROUNDS` times.  Returns the flags and
    the note, which says how it ended."""
    from analyze.search.branch_bound import flags_hold
    from analyze.search.foundry_flags import prove_flags

    n_type = stage.polarity == "n"
    need = threshold + tech.guard if n_type else threshold - tech.guard
    for _ in range(FLAG_ROUNDS):
        if not flags:
            return flags, note
        short = flags_hold(prep, circuit, stage, tech, constraints, model, choices, [f.node for f in flags], need)
        if short is None:
            return flags, note + "; they hold over every counted pattern and arrival case (branch and bound)"
        if short is False:
            return flags, note + "; over every counted pattern not checked (the branch and bound gave up)"
        candidates = candidates + [short]
        flags, note = prove_flags(prep, circuit, stage, tech, constraints, candidates, lumped_flags, threshold)
    return flags, note + (f"; after {FLAG_ROUNDS} patterns added from the branch and bound, some counted "
                          "pattern may still end past the threshold plus guard with them")


def _ranked_verdict_note(prep, circuit, stage, tech, constraints, wc, chosen: str) -> str:
    """What the ranked foundry-model worst case proves: a failing pattern
    found is a witness; a pass is proven by
    :func:`analyze.physics.bound.equalised_bound` when the bound
    itself clears the threshold plus guard."""
    from analyze.physics.bound import equalised_bound

    n_type = stage.polarity == "n"
    sign = 1.0 if n_type else -1.0
    if wc is not None and sign * (wc.v_final - prep.threshold_v) < tech.guard:
        return chosen + "; the failing pattern found is a witness, so the verdict is exact"
    from analyze.search.cases import low_in_precharge, top_inputs

    late = top_inputs(circuit, stage) | low_in_precharge(stage, constraints)
    bound = equalised_bound(prep.context, stage.internal_nodes, stage.inputs, late)
    if bound is not None and sign * (bound - prep.threshold_v) >= tech.guard:
        return (chosen + f"; the pass is proven: no counted pattern in any arrival case ends "
                f"{'below' if n_type else 'above'} {bound:.3f} V (bound over every pattern)")
    shown = "no bound" if bound is None else f"the bound over every pattern is {bound:.3f} V"
    return chosen + f"; the pass is not proven ({shown}): simulate the stage or constrain its inputs"


def find_worst_case(
    circuit: Circuit,
    stage: Stage,
    tech: Tech,
    constraints: Constraints | None = None,
    *,
    precharged=frozenset(),
) -> WorstCase | None:
    """The exact worst case alone (no threshold, count or flags).

    Parameters
    ----------
    circuit, stage, tech
    constraints : Constraints or None
    precharged : iterable of str

    Returns
    -------
    WorstCase or None
        None when no allowed pattern counts.
    """
    model, choices = _prepared(circuit, stage, tech, constraints, precharged)
    found = worst_case(model, choices)
    return None if found is None else model.outcome(found.values, found.component)


def _values(model: SharingModel, inputs: dict[str, int]) -> tuple[int, ...]:
    missing = [n for n in model.inputs if n not in inputs]
    if missing:
        raise ValueError(f"no value for input {missing[0]!r}")
    bad = [n for n in model.inputs if inputs[n] not in (0, 1)]
    if bad:
        raise ValueError(f"input {bad[0]!r} must be 0 or 1")
    return tuple(int(inputs[n]) for n in model.inputs)


def evaluate_pattern(
    circuit: Circuit, stage: Stage, tech: Tech, inputs: dict[str, int], *, precharged=frozenset()
) -> WorstCase | None:
    """What one input pattern does to the dynamic node.

    Parameters
    ----------
    circuit, stage, tech
    inputs : dict of str to int
        A value (0 or 1) for every stage input; other keys are ignored.
    precharged : iterable of str

    Returns
    -------
    WorstCase or None
        None when the pattern joins the dynamic node to the rail.

    Raises
    ------
    ValueError
        When an input has no value or a value other than 0 or 1.
    """
    model = build_model(circuit, stage, tech, precharged)
    values = _values(model, inputs)
    comp, tied = model.component(model.conducting(values))
    return None if tied else model.outcome(values, comp)


def iter_counted_patterns(
    circuit: Circuit,
    stage: Stage,
    tech: Tech,
    constraints: Constraints | None = None,
    limit: int | None = None,
) -> Iterator[WorstCase]:
    """Every counted pattern the constraints allow, with its result.

    Parameters
    ----------
    circuit, stage, tech
    constraints : Constraints or None
    limit : int or None
        Stop after this many.

    Yields
    ------
    WorstCase

    Notes
    -----
    Order of :func:`analyze.search.patterns.iter_counted` (constraint blocks by
    first input, options lexicographic, last block fastest).  Patterns are
    evaluated in vectorised chunks and final voltages cached per set of
    shared nodes (and, where discharged and precharged nodes share, per
    set of conducting node pairs among them).
    """
    model, choices = _prepared(circuit, stage, tech, constraints, frozenset())
    if limit is not None and limit <= 0:
        return
    for k, (values, comp) in enumerate(iter_counted(model, choices), start=1):
        yield model.outcome(values, comp)
        if limit is not None and k >= limit:
            return


def analyse_circuit(circuit, tech, constraints=None, constraints_path=None, progress=None, reuse=True,
                    solve=None):
    """Recognise the stages of ``circuit`` and analyse each one.

    ``progress``, when given, is called with the number of stages once they
    are recognised and returns the function to call after each stage is
    analysed (see :meth:`analyze.cli.progress.Steps.counted`).

    ``reuse`` (default True): stages with the same context are analysed
    once and the result renamed (:class:`analyze.search.contexts.StageContexts`);
    False analyses every stage on its own.  The results are the same.

    ``solve`` (with ``reuse``): the distinct contexts are analysed by it
    first, elsewhere (:meth:`analyze.search.contexts.StageContexts.prefetch`:
    the workers of a cluster); the results are the same.

    Returns
    -------
    recognition : analyze.stages.recognize.Recognition
    results : list of StageResult
    """
    recognition = find_stages(circuit, tech)
    if constraints is not None:
        check_constraints_apply(constraints, recognition.stages, constraints_path)
    contexts = StageContexts(circuit, tech, constraints, analyze_stage) if reuse else None
    if reuse and solve is not None:
        contexts.prefetch(recognition.stages, solve)
    tick = progress(len(recognition.stages)) if progress else None
    results = []
    for st in recognition.stages:
        results.append(contexts.analyse(st) if reuse else analyze_stage(circuit, st, tech, constraints))
        if tick:
            tick()
    return recognition, results


def worst_patterns(
    circuit: Circuit,
    stage: Stage,
    tech: Tech,
    constraints: Constraints | None = None,
    count: int = 3,
    scan: int = 4096,
) -> list[WorstCase]:
    """The worst few counted patterns with distinct shared nodes, worst first.

    Parameters
    ----------
    circuit, stage, tech
    constraints : Constraints or None
    count : int
        At most this many.
    scan : int
        Counted patterns looked at for the runners-up (in the order of
        :func:`iter_counted_patterns`); the first is always the exact worst
        case of :func:`find_worst_case`, whatever ``scan`` is.

    Returns
    -------
    list of WorstCase
        Empty when no allowed pattern counts.

    Notes
    -----
    Patterns that share the same nodes end at the same voltage in this
    model, so only one of them (the first met) stands for its set.  Cost:
    the exact search plus the enumeration of at most ``scan`` patterns,
    one evaluation per set of shared nodes.
    """
    model, choices = _prepared(circuit, stage, tech, constraints, frozenset())
    found = worst_case(model, choices)
    best = None if found is None else model.outcome(found.values, found.component)
    return _ranked(model, choices, stage, best, count, scan)


def _ranked(model, choices, stage, best, count, scan=4096):
    """:func:`worst_patterns` on a prepared model whose exact worst case
    ``best`` is known."""
    if best is None:
        return []
    chosen = {tuple(sorted(best.shared_nodes)): best}
    others: dict[tuple, WorstCase] = {}
    # the patterns of iter_counted_patterns(..., limit=scan), each made a
    # WorstCase only when it is the first with its shared nodes
    for values, comp in islice(iter_counted(model, choices), max(0, scan)):
        k = tuple(sorted(model.shared_of(comp)))
        if k not in chosen and k not in others:
            others[k] = model.outcome(values, comp)
    sign = 1.0 if stage.polarity == "n" else -1.0
    ranked = sorted(others.values(), key=lambda wc: (sign * wc.v_final, sorted(wc.inputs.items())))
    return [best, *ranked[: max(0, count - 1)]]
