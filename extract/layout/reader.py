"""Reading a layout file: one cell, flattened, in µm.

GDSII (``.gds``) and OASIS (``.oas``) are read with gdstk.  The chosen
cell is flattened exactly (references with rotation, magnification,
x-reflection and array repetitions; paths become polygons; labels move
with their cell), and every coordinate is converted to µm using the
file's own user unit, then snapped to the file's database grid.

A GDSII stream is checked against the record grammar first
(:mod:`extract.layout.gdsii`), an OASIS file likewise
(:mod:`extract.layout.oasis`), so gdstk only reads well-formed streams.  Problems — a missing or unreadable file, a truncated or
corrupt stream, a
reference cycle, a reference to a cell that is not in the file, a cell
name that does not exist — raise :class:`extract.errors.InputError`.
"""

from __future__ import annotations

import os
import sys
import tempfile
import warnings
from dataclasses import dataclass, field

import numpy as np

from extract.errors import InputError
from extract.inputfile import read_input
from extract.limits import MAX_LABELS, MAX_LAYOUT_BYTES, MAX_SHAPES, env_limit
from extract.layout.gdsii import check_gds_grammar
from extract.layout.oasis import check_oasis_grammar

__all__ = ["FlatLabel", "FlatLayout", "LayoutFile", "open_layout", "flatten_cell", "read_layout", "top_cells"]


@dataclass(frozen=True)
class FlatLabel:
    """A text label after flattening: its text, position (µm) and
    ``(layer, texttype)``."""

    text: str
    x: float
    y: float
    layer: tuple[int, int]


@dataclass
class FlatLayout:
    """The flattened geometry of one cell.

    Attributes
    ----------
    path : str
        The file it came from.
    cell : str
        The cell name.
    grid_um : float
        The file's database unit in µm (coordinates are multiples of it).
    polygons : dict of (int, int) to list of ndarray
        Per ``(layer, datatype)``, each polygon an (n, 2) array in µm.
    labels : list of FlatLabel
    """

    path: str
    cell: str
    grid_um: float
    polygons: dict[tuple[int, int], list[np.ndarray]] = field(default_factory=dict)
    labels: list[FlatLabel] = field(default_factory=list)


class _QuietNative:
    """Send the C library's own stderr chatter to a scratch file while
    gdstk reads, so that a bad file yields one clean line from us."""

    def __enter__(self):
        try:
            sys.stderr.flush()
        except (OSError, ValueError, AttributeError):
            pass
        try:
            self._saved = os.dup(2)
        except OSError:  # standard error is closed: nothing to redirect
            self._saved = None
        self._tmp = tempfile.TemporaryFile()
        os.dup2(self._tmp.fileno(), 2)
        self._warn = warnings.catch_warnings(record=True)
        self.caught = self._warn.__enter__()
        warnings.simplefilter("always")
        return self

    def __exit__(self, *exc):
        self._warn.__exit__(*exc)
        try:
            sys.stderr.flush()
        except (OSError, ValueError, AttributeError):
            pass
        if self._saved is None:
            os.close(2)
        else:
            os.dup2(self._saved, 2)
            os.close(self._saved)
        self._tmp.seek(0)
        self.native = self._tmp.read().decode("utf-8", "replace")
        self._tmp.close()
        return False


def _probe(path: str, is_oas: bool) -> None:
    """Read the file once in a forked child first.

    gdstk is a C library that does not check its allocations: a file too
    big for the memory there is crashes the process instead of raising.  A
    crash in the child becomes a clean error here; where ``fork`` is not
    available nothing is probed.
    """
    if not hasattr(os, "fork"):
        return
    sys.stdout.flush()
    sys.stderr.flush()
    pid = os.fork()
    if pid == 0:  # child: read and touch every cell, then leave without cleanup
        code = 0
        try:
            null = os.open(os.devnull, os.O_WRONLY)
            os.dup2(null, 1)
            os.dup2(null, 2)
            import gdstk

            lib = gdstk.read_oas(path, unit=1e-6) if is_oas else gdstk.read_gds(path, unit=1e-6)
            for c in lib.cells:
                _ = c.name
                c.get_polygons(apply_repetitions=False, include_paths=True, depth=0)
                for lab in c.get_labels(apply_repetitions=False, depth=0):
                    _ = lab.text
        except BaseException:
            code = 3
        os._exit(code)
    _, status = os.waitpid(pid, 0)
    if os.WIFSIGNALED(status):
        kind = "OASIS" if is_oas else "GDSII"
        raise InputError(path, f"the {kind} reader (gdstk) died on this file (signal {os.WTERMSIG(status)}; out "
                               "of memory?)")


#: OASIS files gdstk needs more bytes than this for (estimated by the grammar check) are read
#: once in a forked child first.
PROBE_BYTES = 256 << 20


def _load_library(path: str):
    import gdstk

    data = read_input(path, "layout file", MAX_LAYOUT_BYTES)
    ext = os.path.splitext(path)[1].lower()
    is_oas = ext in (".oas", ".oasis") or data[:13] == b"%SEMI-OASIS\r\n"
    if not is_oas:
        check_gds_grammar(path, data)
    elif check_oasis_grammar(path, data).memory > PROBE_BYTES:
        # The grammar check rules out every native crash of gdstk found on malformed streams
        # (tests/extract/layout/test_oasis_grammar.py; none in thousands of fuzz cases without this
        # pre-read) and bounds what gdstk copies (extract/layout/oasis_memory.py).  It cannot know
        # the memory there is: gdstk does not check its allocations, so a well-formed file within
        # every limit can still crash it.  A file it will need much memory for is read in a forked
        # child first, so that such a crash becomes an error line.
        _probe(path, is_oas)
    with _QuietNative() as quiet:
        try:
            lib = gdstk.read_oas(path, unit=1e-6) if is_oas else gdstk.read_gds(path, unit=1e-6)
        except Exception:  # gdstk raises OSError/RuntimeError with no detail
            lib = None
    if lib is None:
        detail = quiet.native.strip().splitlines()
        why = detail[-1].replace("[GDSTK]", "").strip() if detail else "unreadable"
        kind = "OASIS" if is_oas else "GDSII"
        raise InputError(path, f"cannot read {kind} file: {why}")
    if not (lib.precision > 0 and 1e-13 <= lib.precision <= 1e-3):
        raise InputError(path, f"database unit of {lib.precision:g} m is not a usable length (1e-13 to 1e-3 m)")
    return lib, is_oas


def _reference_graph(path, lib) -> dict[str, list[str]]:
    """Cell name -> names of the cells it references (missing ones included)."""
    graph = {}
    try:
        for c in lib.cells:
            graph[c.name] = [ref.cell if isinstance(ref.cell, str) else ref.cell.name for ref in c.references]
    except (TypeError, UnicodeError):
        raise InputError(path, "a cell name is not valid text (bytes outside ASCII/UTF-8)") from None
    return graph


#: Most shapes a cell may flatten to (override with DYNSHARE_MAX_SHAPES).
MAX_FLAT_SHAPES = MAX_SHAPES


def _flat_count(lib, graph: dict[str, list[str]], start: str, repeated: bool = False,
                labels_only: bool = False) -> int:
    """Number of shapes ``start`` flattens to: own polygons, paths and
    labels (each times its own repetition count: OASIS repeats single
    elements) plus, per reference, the child's count times its repetition
    count.  With ``labels_only``, the labels alone.  Memoised over cells,
    O(cells + references + elements)."""
    cells = {c.name: c for c in lib.cells}
    memo: dict[str, int] = {}

    def reps(ref) -> int:
        rep = ref.repetition
        if rep is None or rep.size == 0:
            return 1
        return int(rep.size)

    stack = [start]
    seen = set()
    while stack:  # post-order without recursion
        name = stack[-1]
        if name in seen:
            stack.pop()
            if name not in memo:
                c = cells[name]
                own = c.labels if labels_only else (*c.polygons, *c.paths, *c.labels)
                n = sum(reps(e) for e in own) if repeated else len(own)
                for ref in c.references:
                    child = ref.cell if isinstance(ref.cell, str) else ref.cell.name
                    n += memo[child] * reps(ref)
                memo[name] = n
            continue
        seen.add(name)
        for child in graph[name]:
            if child not in seen:
                stack.append(child)
    return memo[start]


def _check_tree(path: str, graph: dict[str, list[str]], start: str) -> None:
    """Raise on a reference cycle or a missing cell reachable from ``start``.

    Iterative depth-first search, O(cells + references).
    """
    state: dict[str, int] = {start: 1}
    stack = [(start, iter(graph[start]))]
    trail = [start]
    while stack:
        name, it = stack[-1]
        child = next(it, None)
        if child is None:
            stack.pop()
            trail.pop()
            state[name] = 2
            continue
        if child not in graph:
            raise InputError(path, f"references cell {child!r}, which is not in the file", f"cell {name}")
        if state.get(child) == 1:
            cycle = trail[trail.index(child) :] + [child]
            raise InputError(path, "reference cycle: " + " -> ".join(cycle), f"cell {start}")
        if child not in state:
            state[child] = 1
            trail.append(child)
            stack.append((child, iter(graph[child])))


def _a_cycle(graph: dict[str, list[str]]) -> list[str]:
    """A reference cycle of a graph in which every cell is referenced, each
    cell referencing the next: from the first cell, parents are followed
    until one repeats (every cell has one); the cycle starts at its first
    name.  O(cells + references).

    >>> _a_cycle({"A": ["B", "L"], "B": ["A"], "L": []})
    ['A', 'B', 'A']
    """
    parent: dict[str, str] = {}
    for name, children in graph.items():
        for child in children:
            parent.setdefault(child, name)
    name, seen, order = min(graph), {}, []
    while name not in seen:
        seen[name] = len(order)
        order.append(name)
        name = parent[name]
    cycle = order[seen[name]:][::-1]
    first = cycle.index(min(cycle))
    cycle = cycle[first:] + cycle[:first]
    return cycle + [cycle[0]]


def top_cells(graph: dict[str, list[str]]) -> list[str]:
    """Cells that no other cell references, sorted.

    >>> top_cells({"A": [], "B": ["A"], "C": []})
    ['B', 'C']
    """
    used = {child for children in graph.values() for child in children}
    return sorted(name for name in graph if name not in used)


@dataclass
class LayoutFile:
    """A layout file read once, from which cells are flattened on demand."""

    path: str
    lib: object
    graph: dict[str, list[str]]
    oasis: bool = False  #: OASIS repeats single elements; GDSII does not

    @property
    def cells(self) -> list[str]:
        """Every cell defined in the file, sorted."""
        return sorted(self.graph)


def open_layout(path: str) -> LayoutFile:
    """Read a GDSII or OASIS file (see :func:`read_layout` for the errors)."""
    lib, is_oas = _load_library(path)
    return LayoutFile(path, lib, _reference_graph(path, lib), is_oas)


def check_flat_size(layout: LayoutFile, cell: str) -> None:
    """Refuse ``cell`` before any work when it flattens to more shapes or
    labels than the limits (both the flat and the hierarchical extraction
    call it first).

    Raises
    ------
    InputError
        A reference cycle, or a limit passed (naming the count and the limit).
    """
    path, lib, graph = layout.path, layout.lib, layout.graph
    _check_tree(path, graph, cell)
    limit = env_limit("DYNSHARE_MAX_SHAPES", MAX_FLAT_SHAPES)
    count = _flat_count(lib, graph, cell, layout.oasis)
    if count > limit:
        raise InputError(
            path, f"flattens to {count:,} shapes (polygons, paths and labels), more than the limit of {limit:,} "
            "(set DYNSHARE_MAX_SHAPES)", f"cell {cell}"
        )
    label_limit = env_limit("DYNSHARE_MAX_LABELS", MAX_LABELS)
    labels = _flat_count(lib, graph, cell, layout.oasis, labels_only=True)
    if labels > label_limit:
        raise InputError(path, f"flattens to {labels:,} text labels, more than the limit of {label_limit:,} "
                               "(set DYNSHARE_MAX_LABELS)", f"cell {cell}")


def flatten_cell(layout: LayoutFile, cell: str | None = None, layers=None) -> FlatLayout:
    """Flatten one cell of an opened file (see :func:`read_layout`)."""
    path, lib, graph = layout.path, layout.lib, layout.graph
    if cell is None:
        tops = top_cells(graph)
        if len(tops) != 1:
            if not tops:
                cycle = _a_cycle(graph)
                raise InputError(path, "has no top cell: every cell is referenced (reference cycle: "
                                       + " -> ".join(cycle) + ")", f"cell {cycle[0]}")
            listing = ", ".join(tops[:20]) + (" ..." if len(tops) > 20 else "")
            raise InputError(path, f"has {len(tops)} top cells, choose one with --cell: {listing}")
        cell = tops[0]
    if cell not in graph:
        raise InputError(path, f"no cell named {cell!r} in the file", f"cell {cell}")
    check_flat_size(layout, cell)

    top = next(c for c in lib.cells if c.name == cell)
    grid_um = lib.precision / 1e-6 if lib.precision > 0 else 1e-3
    wanted = None if layers is None else {tuple(x) for x in layers}
    flat = FlatLayout(path=path, cell=cell, grid_um=grid_um)
    with _QuietNative():
        if wanted is None:
            polys = top.get_polygons(apply_repetitions=True, include_paths=True, depth=None)
        else:  # gdstk filters: shapes on other layers never become Python objects
            polys = [poly for layer, datatype in sorted(wanted) for poly in top.get_polygons(
                apply_repetitions=True, include_paths=True, depth=None, layer=layer, datatype=datatype)]
        labels = top.get_labels(apply_repetitions=True, depth=None)
    by_key: dict[tuple[int, int], list] = {}
    snapped: list[np.ndarray] = []
    for poly in polys:
        key = (int(poly.layer), int(poly.datatype))
        if wanted is None or key in wanted:
            by_key.setdefault(key, []).append(poly.points)
    for key, arrays in by_key.items():
        arrays = [a for a in arrays if len(a) >= 3]
        if not arrays:
            continue
        # snapped to the grid all at once, then split into views per polygon
        snapped.append(np.round(np.concatenate(arrays).astype(float) / grid_um) * grid_um)
        ends = np.cumsum([len(a) for a in arrays]).tolist()
        flat.polygons[key] = [snapped[-1][i:j] for i, j in zip([0] + ends[:-1], ends)]
    # label origins snapped at once (np.rint rounds half to even, as round() does)
    origins = np.array([lab.origin for lab in labels], dtype=float).reshape(-1, 2)
    snapped_origins = np.rint(origins / grid_um) * grid_um + 0.0  # + 0.0: no negative zero, as round() gives
    if not np.isfinite(snapped_origins).all():  # round() refuses these: keep its error
        snapped_origins = [[round(v / grid_um) * grid_um for v in lab.origin] for lab in labels]
    try:
        for lab, (x, y) in zip(labels, np.asarray(snapped_origins).tolist()):
            flat.labels.append(FlatLabel(str(lab.text), x, y, (int(lab.layer), int(lab.texttype))))
    except (TypeError, UnicodeError):
        raise InputError(path, "a text label is not valid text (bytes outside ASCII/UTF-8)", f"cell {cell}") from None
    for coords in snapped:
        if not np.isfinite(coords).all() or np.abs(coords).max() > 1e8:
            raise InputError(path, "coordinates beyond 100 m: not a usable layout", f"cell {cell}")
    return flat


def read_layout(path: str, cell: str | None = None, layers=None) -> FlatLayout:
    """Read ``path`` and flatten one cell.

    Parameters
    ----------
    path : str
        A GDSII or OASIS file.
    cell : str, optional
        The cell to read; when omitted the file must have exactly one top cell.
    layers : iterable of (int, int), optional
        Only these ``(layer, datatype)`` pairs are kept (all when None).

    Returns
    -------
    FlatLayout

    Raises
    ------
    InputError
        Missing/unreadable/corrupt file, unknown cell, no single top cell,
        a reference cycle or a reference to a missing cell below the cell.

    Notes
    -----
    gdstk does the flattening (``Cell.get_polygons`` / ``get_labels`` over
    all depths with repetitions applied).  Coordinates are snapped to the
    file's database unit so that transforms such as 90° rotations do not
    leave 1e-16 µm slivers.  Cost is linear in the flattened shape count.
    """
    return flatten_cell(open_layout(path), cell, layers)
