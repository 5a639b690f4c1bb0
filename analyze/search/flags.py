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
from analyze.search.worstcase import _DIGITS, Found, worst_case
from extract.circuit import Circuit

__all__ = ["Flag", "find_flags", "SEARCH_BUDGET", "SET_LIMIT", "REFUTE_TRIES"]

#: Worst-case searches the exhaustive part may run.
SEARCH_BUDGET = 256
#: Candidate sets the exhaustive part may look at.
SET_LIMIT = 100_000
#: Latest pooled patterns tried against a candidate set before searching.
REFUTE_TRIES = 8


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


class _Searches:
    """Worst-case searches of one stage under different pre-conditioned
    sets, sharing their work.

    * every worst pattern found goes into a pool; a pool pattern is a
      counted pattern under any pre-conditioned set (the component does not
      depend on it), so its final voltage under a new set is an upper
      bound on that set's worst case, one final-voltage solve away;
    * searches start from the best pool pattern (``seed`` of
      :func:`analyze.search.worstcase.worst_case`) and share one cache of
      dynamic-node components.
    """

    def __init__(self, model: SharingModel, choices: list[Choice]):
        self.model, self.choices = model, choices
        self.found: dict[int, Found | None] = {}
        self.pool: list[tuple[tuple[int, ...], int]] = []
        self.components: dict = {}
        self.models: dict[int, SharingModel] = {}

    def under(self, mask: int) -> SharingModel:
        m = self.models.get(mask)
        if m is None:
            m = self.models[mask] = self.model.with_precharged([self.model.nodes[i] for i in _node_list(mask)])
        return m

    def u(self, mask: int, pattern) -> float:
        """Normalised final voltage of a counted ``pattern`` under ``mask``
        (only the pre-conditioned nodes inside its component matter)."""
        values, comp = pattern
        return self.under(mask & comp).u_pattern(values, comp)

    def search(self, mask: int, seed=None) -> Found | None:
        if mask not in self.found:
            if seed is None and self.pool:
                seed = min(self.pool, key=lambda p: self.u(mask, p))
            got = worst_case(self.under(mask), self.choices, seed=seed, components=self.components)
            self.found[mask] = got
            if got is not None:
                self.pool.append((got.values, got.component))
        return self.found[mask]

    def refuted(self, mask: int, required_u: float) -> bool:
        """True when one of the :data:`REFUTE_TRIES` latest pool patterns
        already ends below ``required_u`` under ``mask`` (a refuter moves
        to the end, so it is tried first next time)."""
        for k in range(len(self.pool) - 1, max(-1, len(self.pool) - 1 - REFUTE_TRIES), -1):
            if self.u(mask, self.pool[k]) < required_u:
                self.pool.append(self.pool.pop(k))
                return True
        return False

    def repaired(self, mask: int, node: int, pattern):
        """The variants of ``pattern`` with one choice next to ``node``
        switched to another option that leave ``node`` out of the
        component: the lowest ``(u, values, component)`` under ``mask``, an
        upper bound on its worst case (pre-conditioning ``node`` makes the
        worst pattern avoid it where it can).  ``pattern`` itself when no
        such variant counts.  Such variants hold no newly pre-conditioned
        node, so their final voltages are mostly cached already."""
        model = self.model
        values, comp = pattern
        best = None
        near = model.node_devices[node]
        on0 = model.conducting(values)
        for c in self.choices:
            if not c.devices & near:
                continue
            for opt, mask_on in zip(c.options, c.on):
                on = (on0 & ~c.devices) | mask_on
                if not (on0 & ~on & near):
                    continue  # turns off no device at the node: it stays joined
                vals = list(values)
                for col, v in zip(c.columns, opt):
                    vals[col] = v
                vals = tuple(vals)
                hit = self.components.get(on)
                if hit is None:
                    hit = self.components[on] = model.component(on)
                comp2, tied = hit
                if tied or (comp2 >> node) & 1:
                    continue
                u = self.u(mask, (vals, comp2))
                if best is None or (u, vals) < best[:2]:
                    best = (u, vals, comp2)
        return best if best is not None else (self.u(mask, pattern), values, comp)

    def beaten(self, mask: int, u_best: float) -> bool:
        """True when the worst case under ``mask`` is strictly below
        ``u_best`` (rounded as the search compares them): a search that
        stops at the first pattern below it (:func:`worst_case` with
        ``below``), cheaper than the worst case when it is well below."""
        return worst_case(self.under(mask), self.choices, components=self.components, below=u_best) is not None

    def best_addition(self, mask: int, options: list[int]) -> int:
        """The node ``i`` of ``options`` maximising the worst case under
        ``mask | 1 << i`` (the first on a tie), exactly, searching only the
        nodes whose pool bound could still win.  Where that bound (a
        repaired pattern) is above the best so far even after rounding, a
        node is first only asked whether its worst case is below the best
        (:meth:`beaten`): strictly below, it cannot win."""
        base = self.search(mask)
        bounds = []
        for i in options:
            u, vals, comp = self.repaired(mask | 1 << i, i, (base.values, base.component))
            bounds.append((u, i, (vals, comp)))
        bounds.sort(key=lambda t: (-t[0], t[1]))
        best = None
        for ub, i, seed in bounds:
            if best is not None and ub < best[0] - 1e-12:
                break  # sorted: no later bound reaches the best exact value
            m = mask | 1 << i
            if (best is not None and m not in self.found and round(ub, _DIGITS) > round(best[0], _DIGITS)
                    and self.beaten(m, best[0])):
                continue  # strictly below the best: it cannot win
            w = self.search(m, seed).u_final
            if best is None or w > best[0] or (w == best[0] and i < best[1]):
                best = (w, i)
        return best[1]


def _node_list(mask: int) -> list[int]:
    out, i = [], 0
    while mask:
        if mask & 1:
            out.append(i)
        mask >>= 1
        i += 1
    return out


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
    are skipped without a search.  Every worst pattern found is pooled: a
    set under which a pooled pattern still ends below the requirement
    fails without a search (one cached final-voltage solve), and searches
    start from the best pooled pattern.  A refuted set counts against the
    budget as the search it saves, so the sets tried, the answer and the
    point of giving up are those of a search of every set.  When more than
    :data:`SEARCH_BUDGET` searches or :data:`SET_LIMIT` sets would be needed, a greedy fallback
    adds, one at a time, the discharged node of the current worst case
    whose pre-conditioning helps most.  Each greedy step (and the ordering
    of the flags) bounds every option by a pooled pattern repaired to
    avoid the new node and searches exactly only the options whose bound
    can still win, best bound first; on a wide OR that is one search a
    step, so k flags among n legs cost O(k) searches and O(k · n) solves.
    """
    work = _Searches(model, choices)

    def ok(mask: int) -> bool:
        return work.search(mask).u_final >= required_u

    def discharged(mask: int) -> int:
        return work.search(mask).component & ~(model.precharged | mask | 1)

    cands = _candidates(model)
    base = work.search(0)
    if base is None or base.u_final >= required_u:
        return [], None
    if not cands:
        return [], "no internal node shares charge with the dynamic node, so no precharge device can help"
    if not ok(_bits(cands)):
        u = work.search(_bits(cands)).u_final
        why = (
            "the receiver threshold plus guard is beyond the supply, so the stage cannot pass"
            if u >= model.vdd - 1e-9
            else "the dynamic node itself is too small for the charge it must share"
        )
        return [], (
            f"even with every internal node pre-conditioned the worst case ends at "
            f"{model.to_volts(u):.3f} V, still short of the receiver threshold plus guard: {why}"
        )
    chosen = _smallest(cands, work, ok, discharged, required_u)
    note = None
    if chosen is None:
        chosen = _greedy(work, ok, discharged)
        note = (
            "the exhaustive search for the fewest nodes ran out of its budget; "
            "these flags were chosen greedily and may not be the fewest"
        )
    return _ordered(circuit, model, chosen, work), note


def _smallest(cands, work, ok, discharged, required_u):
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
            searches += 1  # a refuted set counts as the search it saves
            if searches > SEARCH_BUDGET:
                return None
            if mask not in work.found and work.refuted(mask, required_u):
                continue
            if ok(mask):
                if best is None or work.search(mask).u_final > work.search(best).u_final:
                    best = mask
            else:
                misses.append(discharged(mask))
        if best is not None:
            return best
    return None


def _greedy(work, ok, discharged) -> int:
    mask = 0
    while not ok(mask):
        mask |= 1 << work.best_addition(mask, _node_list(discharged(mask)))
    return mask


def _ordered(circuit: Circuit, model: SharingModel, chosen: int, work) -> list[Flag]:
    """The chosen nodes as flags, best first, each with its cumulative result."""
    action = "add precharge device" if model.stage.polarity == "n" else "add predischarge device"
    left = _node_list(chosen)
    applied, flags = 0, []
    while left:
        i = work.best_addition(applied, left) if len(left) > 1 else left[0]
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
                v_final_after=model.to_volts(work.search(applied).u_final),
                location_um=None if net is None else net.location_um,
                between=tuple(sorted(between)),
            )
        )
    return flags
