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

__all__ = ["Choice", "bind_blocks", "iter_counted", "count_counted"]

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


def count_counted(model: SharingModel, choices: list[Choice]) -> int:
    """The number of counted patterns, exactly.

    Parameters
    ----------
    model : SharingModel
    choices : list of Choice

    Returns
    -------
    int

    Notes
    -----
    Depth-first over the choices with memoisation.  At each step the
    choices whose devices cannot touch any node the dynamic node may still
    reach are *irrelevant*: they multiply the count by their option counts.
    The rest of the count depends only on the relevant choices and on how
    the devices turned on so far join their terminals (the boundary nodes,
    the dynamic node and the rail), which is the memo key.  A series or
    parallel ladder such as an n-leg mux takes O(n) states; the worst case
    is exponential in the width of the network.
    """
    memo: dict = {}
    full = [c.devices for c in choices]

    def f(on: int, undecided: tuple[int, ...]) -> int:
        comp, tied = model.component(on)
        if tied:
            return 0
        possible = on
        for i in undecided:
            possible |= full[i]
        reach, _ = model.component(possible)
        near = model.touching(reach)
        relevant = tuple(i for i in undecided if full[i] & near)
        mult = math.prod(len(choices[i].options) for i in undecided if not full[i] & near)
        if not relevant:
            return mult
        live = 0
        for i in relevant:
            live |= full[i] & near
        ends = {model.dev_a[d] for d in range(len(model.devices)) if (live >> d) & 1}
        ends |= {model.dev_b[d] for d in range(len(model.devices)) if (live >> d) & 1}
        boundary = sorted(ends | {0, RAIL})
        key = (relevant, tuple(boundary), _partition_key(model, on, boundary))
        if key not in memo:
            touch = model.touching(comp)
            pick = next((i for i in relevant if full[i] & touch), relevant[0])
            rest = tuple(i for i in relevant if i != pick)
            memo[key] = sum(f(on | mask, rest) for mask in choices[pick].on)
        return mult * memo[key]

    return f(model.always_on, tuple(range(len(choices))))
