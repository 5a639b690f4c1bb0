"""Counted input patterns of a stage: enumerate them, count them.

A pattern *counts* when the evaluation network does not join the dynamic
node to the rail.  The search variables are the constraint blocks of
:func:`analyze.search.constraints.stage_blocks`; :func:`bind_blocks` ties them to
a :class:`~analyze.physics.sharing.SharingModel` as :class:`Choice` objects that
know which devices each option turns on.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Iterator

import numpy as np

from analyze.search.constraints import Block
from analyze.physics.sharing import RAIL, SharingModel

__all__ = ["Choice", "bind_blocks", "iter_counted", "count_counted", "COUNT_BUDGET"]

#: Patterns evaluated together by :func:`iter_counted`.
CHUNK = 4096


@dataclass(frozen=True)
class Choice:
    """A constraint block bound to a model.

    Attributes
    ----------
    columns : tuple of int
        Indices into ``model.inputs`` of the block's nets.
    options : tuple of tuple of int
        Allowed values of those nets, lexicographic.
    on : tuple of int
        Per option, bitmask of the devices it makes conduct.
    devices : int
        Bitmask of every device the block's nets drive.
    """

    columns: tuple[int, ...]
    options: tuple[tuple[int, ...], ...]
    on: tuple[int, ...]
    devices: int


def bind_blocks(model: SharingModel, blocks: list[Block]) -> list[Choice]:
    """Bind ``blocks`` (over ``model.inputs``) to ``model``'s devices.

    Inputs no block names become free blocks.  Cost O(blocks · options · devices).
    """
    named = {n for b in blocks for n in b.nets}
    blocks = list(blocks) + [Block((n,), ((0,), (1,))) for n in model.inputs if n not in named]
    out = []
    for b in sorted(blocks, key=lambda b: b.nets[0]):
        cols = tuple(model.inputs.index(n) for n in b.nets)
        ons, every = [], 0
        for opt in b.options:
            mask = 0
            for d, (i, v) in enumerate(zip(model.dev_input, model.dev_on)):
                if i in cols:
                    every |= 1 << d
                    if opt[cols.index(i)] == v:
                        mask |= 1 << d
            ons.append(mask)
        out.append(Choice(cols, tuple(b.options), tuple(ons), every))
    return out


def _grid(choices: list[Choice], n_inputs: int, prefix: list[int]) -> np.ndarray:
    """Input values of every pattern with the first choices at ``prefix``
    and the rest enumerated in order (last choice fastest)."""
    rest = choices[len(prefix):]
    sizes = [len(c.options) for c in rest]
    count = math.prod(sizes)
    values = np.zeros((count, n_inputs), dtype=np.int8)
    for c, k in zip(choices, prefix):
        values[:, list(c.columns)] = c.options[k]
    if rest:
        picks = np.indices(sizes).reshape(len(sizes), -1)
        for c, pick in zip(rest, picks):
            values[:, list(c.columns)] = np.asarray(c.options, dtype=np.int8)[pick]
    return values


def _bitmasks(rows: np.ndarray) -> list[int]:
    """Each boolean row as an ``int`` bitmask (bit i = column i)."""
    if rows.shape[1] <= 62:
        return (rows.astype(np.int64) @ (np.int64(1) << np.arange(rows.shape[1], dtype=np.int64))).tolist()
    packed = np.packbits(rows, axis=1, bitorder="little")
    return [int.from_bytes(r.tobytes(), "little") for r in packed]


def iter_counted(model: SharingModel, choices: list[Choice]) -> Iterator[tuple[tuple[int, ...], int]]:
    """Every counted pattern as ``(values, component bitmask)``.

    Parameters
    ----------
    model : SharingModel
    choices : list of Choice

    Yields
    ------
    values : tuple of int
        Input values in ``model.inputs`` order.
    component : int
        Bitmask of the nodes joined to the dynamic node.

    Notes
    -----
    Order: choices in order, options in order, the last choice fastest.
    The leading choices are walked depth first, dropping a partial pattern
    as soon as its conducting devices tie the dynamic node to the rail;
    the trailing choices (at most :data:`CHUNK` patterns) are evaluated
    together with :meth:`SharingModel.components_batch`.
    """
    if any(not c.options for c in choices):
        return  # the constraints allow no pattern at all
    split = len(choices)
    while split > 0 and math.prod(len(c.options) for c in choices[split - 1:]) <= CHUNK:
        split -= 1
    prefix: list[int] = []

    def walk(on: int):
        if model.component(on)[1]:
            return
        if len(prefix) == split:
            values = _grid(choices, len(model.inputs), prefix)
            if values.shape[0] == 0:
                return
            counted, reach = model.components_batch(values)
            masks = _bitmasks(reach[counted])
            for row, mask in zip(values[counted].tolist(), masks):
                yield tuple(row), mask
            return
        c = choices[len(prefix)]
        for k, mask in enumerate(c.on):
            prefix.append(k)
            yield from walk(on | mask)
            prefix.pop()

    yield from walk(model.always_on)


class _OverBudget(Exception):
    """Raised inside :func:`count_counted` when the state budget runs out."""


def _partition_key(model: SharingModel, on: int, boundary: list[int]) -> tuple[int, ...]:
    """Label each of ``boundary`` (node indices, RAIL allowed) by the smallest
    boundary member joined to it through devices ``on`` (the rail joins)."""
    parent: dict[int, int] = {}

    def find(x: int) -> int:
        parent.setdefault(x, x)
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    d = 0
    while on:
        if on & 1:
            ra, rb = find(model.dev_a[d]), find(model.dev_b[d])
            if ra != rb:
                parent[ra] = rb
        on >>= 1
        d += 1
    label: dict[int, int] = {}
    for x in boundary:
        label.setdefault(find(x), x)
    return tuple(label[find(x)] for x in boundary)


def _bits_of(mask: int) -> list[int]:
    """Indices of the set bits of ``mask``, ascending."""
    out = []
    while mask:
        low = mask & -mask
        out.append(low.bit_length() - 1)
        mask ^= low
    return out


def _independent_groups(model: SharingModel, comp: int, on: int, live: list[int]) -> list[list[int]]:
    """Split choices into groups that cannot interact.

    ``live[k]`` is the device bitmask of the k-th choice that can still
    matter.  Nodes are joined through those devices and the conducting ones
    ``on``, never through the dynamic node's component ``comp`` or the rail;
    choices meeting in a class of nodes are one group.  A path from the
    dynamic node to the rail leaves ``comp`` for the last time and then runs
    inside one class, so the pattern is counted exactly when no group ties
    the node: the count is the product of the groups' counts.
    """
    parent: dict[int, int] = {}

    def find(x: int) -> int:
        root = x
        while parent.get(root, root) != root:
            root = parent[root]
        while x != root:
            parent[x], x = root, parent.get(x, x)
        return root

    def inner(x: int) -> bool:
        return x != RAIL and not (comp >> x) & 1

    every = 0
    for m in live:
        every |= m
    for d in _bits_of(every | (on & ~every & model.touching(~comp & model.all_nodes))):
        a, b = model.dev_a[d], model.dev_b[d]
        if inner(a) and inner(b):
            ra, rb = find(a), find(b)
            if ra != rb:
                parent[ra] = rb
    owner: dict[int, int] = {}  # node class -> group leader (a choice index)
    lead = list(range(len(live)))

    def top(k: int) -> int:
        while lead[k] != k:
            lead[k] = lead[lead[k]]
            k = lead[k]
        return k

    for k, m in enumerate(live):
        for d in _bits_of(m):
            for x in (model.dev_a[d], model.dev_b[d]):
                if inner(x):
                    r = find(x)
                    if r in owner:
                        a, b = top(owner[r]), top(k)
                        if a != b:
                            lead[max(a, b)] = min(a, b)
                    else:
                        owner[r] = k
    groups: dict[int, list[int]] = {}
    for k in range(len(live)):
        groups.setdefault(top(k), []).append(k)
    return list(groups.values())


def _classes(model: SharingModel, comp: int, mask: int) -> int:
    """Number of distinct nodes the devices ``mask`` touch outside
    ``comp`` and the rail."""
    seen = set()
    for d in _bits_of(mask):
        for x in (model.dev_a[d], model.dev_b[d]):
            if x != RAIL and not (comp >> x) & 1:
                seen.add(x)
    return len(seen)


#: Memoised sub-counts :func:`count_counted` may create before it gives up.
COUNT_BUDGET = 200_000


def count_counted(model: SharingModel, choices: list[Choice], budget: int | None = None) -> int | None:
    """The number of counted patterns, exactly, or None past ``budget``.

    Parameters
    ----------
    model : SharingModel
    choices : list of Choice
    budget : int or None
        Most distinct sub-counts to compute (each costs O(devices));
        None for :data:`COUNT_BUDGET`.

    Returns
    -------
    int or None
        None when the count would need more than ``budget`` sub-counts
        (the report then says the patterns were not counted).

    Notes
    -----
    Depth-first over the choices with memoisation.  At each step

    1. choices whose devices cannot touch any node the dynamic node may
       still reach are *irrelevant*: they multiply the count by their
       option counts;
    2. the relevant choices fall into *independent groups*
       (:func:`_independent_groups`: they meet only at the dynamic node's
       component and the rail), and the count is the product of the
       groups' counts;
    3. each group branches on its choice that touches the most internal
       nodes (a block spanning several legs, such as a one-hot select,
       goes first, and its options leave the legs independent), then on
       one next to the dynamic node's component (the last joined node);
       a group's count is memoised on its choices and on how the
       conducting devices join their terminals (the boundary nodes, the
       dynamic node and the rail).

    Bound: on a series-parallel network whose constraint blocks each lie
    in one parallel branch, every branch is counted on its own and a
    branch of k devices takes O(k) memoised states, so the count costs
    O(devices²) operations; a block coupling b branches multiplies that
    by its option count, once (O(options · devices²) for a one-hot select
    over every leg).  Bridges between branches make the memo key a set
    partition of the boundary, exponential in its width in the worst case;
    past ``budget`` states the count gives up rather than run on.

    Examples
    --------
    Two legs X – A – n – B – rail and X – C – rail: a pattern counts unless
    A = B = 1 or C = 1, so 3 · 1 = 3 of the 8 patterns count.

    >>> from analyze.physics.sharing import SharingModel
    >>> from analyze.physics.charge import NodeCharge
    >>> import numpy as np
    >>> q = NodeCharge.linear(1.0, 1.8)
    >>> m = SharingModel(None, 1.8, ("X", "n"), (q, q), np.ones(2), 0, ("A", "B", "C"),
    ...                  ("MA", "MB", "MC"), (0, 1, 0), (1, RAIL, RAIL), (0, 1, 2), (1, 1, 1), 1.35)
    >>> from analyze.search.constraints import Block
    >>> count_counted(m, bind_blocks(m, []))
    3
    """
    budget = COUNT_BUDGET if budget is None else budget
    memo: dict = {}
    full = [c.devices for c in choices]
    sizes = [len(c.options) for c in choices]

    def f(on: int, undecided: tuple[int, ...]) -> int:
        comp, tied = model.component(on)
        if tied:
            return 0
        possible = on
        for i in undecided:
            possible |= full[i]
        reach, _ = model.component(possible)
        near = model.touching(reach)
        relevant = [i for i in undecided if full[i] & near]
        total = 1
        for i in undecided:
            if not full[i] & near:
                total *= sizes[i]
        if not relevant:
            return total
        live = [full[i] & near for i in relevant]
        for group in _independent_groups(model, comp, on, live):
            total *= group_count(on, comp, tuple(relevant[k] for k in group), [live[k] for k in group])
            if total == 0:
                return 0
        return total

    def group_count(on: int, comp: int, group: tuple[int, ...], live: list[int]) -> int:
        every = 0
        for m in live:
            every |= m
        ends = {RAIL, 0}
        for d in _bits_of(every):
            ends.add(model.dev_a[d])
            ends.add(model.dev_b[d])
        boundary = sorted(ends)
        key = (group, tuple(boundary), _partition_key(model, on, boundary))
        hit = memo.get(key)
        if hit is not None:
            return hit
        if len(memo) >= budget:
            raise _OverBudget
        touch = model.touching(comp)
        pick = max(range(len(group)), key=lambda k: (_classes(model, comp, live[k]),
                                                     bool(live[k] & touch), -k))
        rest = group[:pick] + group[pick + 1:]
        value = 0
        for mask in choices[group[pick]].on:
            value += f(on | mask, rest)
        memo[key] = value
        return value

    try:
        return f(model.always_on, tuple(range(len(choices))))
    except _OverBudget:
        return None
