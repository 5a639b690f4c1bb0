"""Flags proven with the foundry models.

:func:`analyze.search.flags.find_flags` chooses the nodes to precharge
(predischarge) with the lumped model, whose exact search can afford many
candidate sets.  With ``[models]`` the verdict is the foundry models', so
the flags must be proven with them: :func:`prove_flags` re-solves the worst
case (every candidate pattern, every arrival case) with each prefix of the
lumped model's ordered flags applied, keeps the shortest prefix that passes,
and when none does, adds nodes greedily by the models until the stage passes
or no internal node is left.

Notes
-----
Each trial is one :func:`analyze.search.foundry.solve_candidates` over the
candidates and cases (about a millisecond per pattern and case); prefixes
cost at most ``len(flags)`` trials and the greedy part at most ``k · n``
for ``k`` added nodes among ``n`` internal nodes, each of its trials after
the first in a round stopped as soon as one pattern shows it cannot beat
the best option so far (the result is the one solving every trial whole
gives).
"""

from __future__ import annotations

from analyze.search.flags import Flag
from analyze.search.foundry import solve_candidates

__all__ = ["prove_flags"]


def prove_flags(prep, circuit, stage, tech, constraints, candidates, flags, threshold_v):
    """The flags that make the foundry models' worst case pass.

    Parameters
    ----------
    prep : FoundryStage
        :func:`analyze.search.foundry.prepare_stage` of the stage.
    circuit, stage, tech, constraints
    candidates : list of WorstCase
        The patterns the foundry-model worst case is taken over.
    flags : list of Flag
        The lumped model's flags, best first (may be empty).
    threshold_v : float
        The receivers' switching point from the models.

    Returns
    -------
    flags : list of Flag
        Each with ``v_final_after`` from the models.
    note : str
        How the flags were proven, or why no set of flags passes.

    Examples
    --------
    With no candidate pattern nothing needs a flag:

    >>> from types import SimpleNamespace as NS
    >>> st = NS(polarity="n", internal_nodes=(), secondary_precharge={}, evaluation=())
    >>> prove_flags(None, None, st, NS(guard=0.0, vdd=1.8), None, [], [], 0.9)
    ([], 'no pattern shares charge')
    """
    if not candidates:
        return [], "no pattern shares charge"
    n_type = stage.polarity == "n"
    sign = 1.0 if n_type else -1.0
    memo = {}

    def worst_v(nodes, beaten=None) -> float:
        """The worst case's V(X) with ``nodes`` pre-conditioned; with
        ``beaten`` (V), a value at or past it where the worst is (only
        the worst itself is remembered)."""
        key = frozenset(nodes)
        if key in memo:
            return memo[key]
        wc = solve_candidates(prep, circuit, stage, tech, constraints, candidates, precharged=key, stop_at=beaten)
        v = float(tech.vdd) if wc is None and n_type else (0.0 if wc is None else wc.v_final)
        if beaten is None or sign * v > sign * beaten:
            memo[key] = v
        return v

    def passes(v: float) -> bool:
        return sign * (v - threshold_v) >= tech.guard

    shared = {n for wc in candidates for n in wc.shared_nodes}
    free = [n for n in stage.internal_nodes if n in shared and n not in stage.secondary_precharge]
    action = "add precharge device" if n_type else "add predischarge device"

    for k in range(1, len(flags) + 1):
        if passes(worst_v([f.node for f in flags[:k]])):
            kept = [_with_v(f, worst_v([g.node for g in flags[:j + 1]])) for j, f in enumerate(flags[:k])]
            note = "flags proven with the foundry models (every candidate pattern and arrival case)"
            if k < len(flags):
                note += f"; they need only {k} of the lumped model's {len(flags)}"
            return kept, note

    chosen = [_with_v(f, worst_v([g.node for g in flags[:j + 1]])) for j, f in enumerate(flags)]
    applied = [f.node for f in chosen]
    while not passes(worst_v(applied)):
        options = [n for n in free if n not in applied]
        if not options:
            return chosen, (f"even with every internal node pre-conditioned the foundry models' worst case ends "
                            f"at {worst_v(applied):.3f} V, short of the receiver threshold plus guard")
        # the option whose worst case ends best, the first among equals; an
        # option is solved only until it is known not to beat the best so far
        best, best_v = None, None
        for n in options:
            v = worst_v([*applied, n], best_v)
            if best is None or sign * v > sign * best_v:
                best, best_v = n, v
        applied.append(best)
        net = circuit.nets.get(best)
        ends = {name: circuit.device(name) for name in stage.evaluation}  # the stage's devices, not the circuit's
        between = tuple(sorted(name for name, d in ends.items() if best in (d.drain, d.source)))
        chosen.append(Flag(node=best, action=action, v_final_after=worst_v(applied),
                           location_um=None if net is None else net.location_um, between=between))
    added = len(chosen) - len(flags)
    how = (f"{added} added to the lumped model's {len(flags)} by the models" if flags else
           "chosen by the models: the lumped model passes the stage")
    return chosen, f"flags proven with the foundry models (every candidate pattern and arrival case); {how}"


def _with_v(flag: Flag, v: float) -> Flag:
    return Flag(flag.node, flag.action, v, flag.location_um, flag.between)
