"""Which internal nodes need a precharge (predischarge) device.

For a stage that fails its check, :func:`find_flags` looks for the
smallest set of internal nodes whose pre-conditioning (precharge for an
n-type stage, predischarge for a p-type one) makes the worst case pass,
re-running the exact worst-case search of :mod:`analyze.search.worstcase` with
those nodes pre-conditioned.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations

from analyze.search.patterns import Choice
from analyze.physics.sharing import SharingModel
from analyze.search.worstcase import Found, worst_case
from extract.circuit import Circuit

__all__ = ["Flag", "find_flags", "SEARCH_BUDGET", "SET_LIMIT"]

#: Worst-case searches the exhaustive part may run.
SEARCH_BUDGET = 256
#: Candidate sets the exhaustive part may look at.
SET_LIMIT = 100_000


@dataclass
class Flag:
    """A node that needs a precharge (predischarge) device.

    Attributes
    ----------
    node : str
    action : str
        ``"add precharge device"`` or ``"add predischarge device"``.
    v_final_after : float
        Worst-case final dynamic-node voltage with every flag up to and
        including this one applied, V.
    location_um : tuple of float or None
        A point on the node (from the circuit's nets).
    between : tuple of str
        The evaluation devices the node sits between.
    """

    node: str
    action: str
    v_final_after: float
    location_um: tuple[float, float] | None
    between: tuple[str, ...]


def _candidates(model: SharingModel) -> list[int]:
    """Internal nodes that some pattern can join to the dynamic node and
    that are not pre-conditioned yet."""
    reach, _ = model.component((1 << len(model.devices)) - 1)
    return [i for i in range(1, len(model.nodes)) if (reach >> i) & 1 and not (model.precharged >> i) & 1]


def _bits(nodes) -> int:
    mask = 0
    for i in nodes:
        mask |= 1 << i
    return mask


def find_flags(
    circuit: Circuit, model: SharingModel, choices: list[Choice], required_u: float
) -> tuple[list[Flag], str | None]:
    """Flags that make the worst case pass, and a note when there are none.

    Parameters
    ----------
    circuit : Circuit
        For node locations.
    model : SharingModel
    choices : list of Choice
    required_u : float
        Normalised final voltage the worst case must reach
        (``threshold + guard`` for an n-type stage, ``vdd − threshold +
        guard`` for a p-type one).

    Returns
    -------
    flags : list of Flag
        Ordered so that each prefix is the best one can do with that many
        devices of the chosen set.
    note : str or None
        Why there are no flags, or that the set came from the greedy
        fallback and may not be the smallest.

    Notes
    -----
    Sets of candidate nodes are tried by increasing size; among passing
    sets of one size the one with the highest worst-case voltage wins
    (first in sorted order on a tie).  Pre-conditioning a node only raises
    every pattern's final voltage, so a failing worst case whose
    discharged shared nodes a set misses stays failing under it: such sets
    are skipped without a search (every failing worst case found is
    remembered).  When more than :data:`SEARCH_BUDGET` searches or
    :data:`SET_LIMIT` sets would be needed, a greedy fallback adds, one at
    a time, the discharged node of the current worst case whose
    pre-conditioning helps most.
    """
    found: dict[int, Found] = {}

    def search(mask: int) -> Found:
        if mask not in found:
            names = [model.nodes[i] for i in range(len(model.nodes)) if (mask >> i) & 1]
            found[mask] = worst_case(model.with_precharged(names), choices)
        return found[mask]

    def ok(mask: int) -> bool:
        return search(mask).u_final >= required_u

    def discharged(mask: int) -> int:
        return search(mask).component & ~(model.precharged | mask | 1)

    cands = _candidates(model)
    base = search(0)
    if base is None or base.u_final >= required_u:
        return [], None
    if not cands:
        return [], "no internal node shares charge with the dynamic node, so no precharge device can help"
    if not ok(_bits(cands)):
        u = search(_bits(cands)).u_final
        why = (
            "the receiver threshold plus guard is beyond the supply, so the stage cannot pass"
            if u >= model.vdd - 1e-9
            else "the dynamic node itself is too small for the charge it must share"
        )
        return [], (
            f"even with every internal node pre-conditioned the worst case ends at "
            f"{model.to_volts(u):.3f} V, still short of the receiver threshold plus guard: {why}"
        )
    chosen = _smallest(cands, search, ok, discharged)
    note = None
    if chosen is None:
        chosen = _greedy(search, ok, discharged)
        note = (
            "the exhaustive search for the fewest nodes ran out of its budget; "
            "these flags were chosen greedily and may not be the fewest"
        )
    return _ordered(circuit, model, chosen, search), note


def _smallest(cands, search, ok, discharged):
    """Exhaustive part of :func:`find_flags`: the best passing set of the
    smallest size, or None when the budget runs out."""
    misses = [discharged(0)]
    searches, looked = 0, 0
    for k in range(1, len(cands) + 1):
        best = None
        for nodes in combinations(cands, k):
            looked += 1
            if looked > SET_LIMIT:
                return None
            mask = _bits(nodes)
            if any(not (mask & m) for m in misses):
                continue
            searches += 1
            if searches > SEARCH_BUDGET:
                return None
            if ok(mask):
                if best is None or search(mask).u_final > search(best).u_final:
                    best = mask
            else:
                misses.append(discharged(mask))
        if best is not None:
            return best
    return None


def _greedy(search, ok, discharged) -> int:
    mask = 0
    while not ok(mask):
        options = [mask | (1 << i) for i in range(discharged(mask).bit_length()) if (discharged(mask) >> i) & 1]
        mask = max(options, key=lambda m: search(m).u_final)
    return mask


def _ordered(circuit: Circuit, model: SharingModel, chosen: int, search) -> list[Flag]:
    """The chosen nodes as flags, best first, each with its cumulative result."""
    action = "add precharge device" if model.stage.polarity == "n" else "add predischarge device"
    left = [i for i in range(len(model.nodes)) if (chosen >> i) & 1]
    applied, flags = 0, []
    while left:
        i = max(left, key=lambda j: (search(applied | (1 << j)).u_final, -j))
        left.remove(i)
        applied |= 1 << i
        name = model.nodes[i]
        net = circuit.nets.get(name)
        between = tuple(
            d for d, a, b in zip(model.devices, model.dev_a, model.dev_b) if i in (a, b)
        )
        flags.append(
            Flag(
                node=name,
                action=action,
                v_final_after=model.to_volts(search(applied).u_final),
                location_um=None if net is None else net.location_um,
                between=tuple(sorted(between)),
            )
        )
    return flags
