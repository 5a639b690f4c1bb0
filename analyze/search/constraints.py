"""Input constraints: which input patterns can really occur.

A constraints file (TOML) has up to four keys::

    one_hot    = [["S0", "S1", "S2", "S3"]]   # exactly one of each group is 1
    complement = [["A", "A_N"]]               # always opposite values
    fixed      = { EN = 1 }                   # held at a value during evaluation
    low_in_precharge = ["A", "B"]             # driven by other dynamic stages

Constraints only remove patterns; ``low_in_precharge`` says when inputs
arrive (low, for a p-type stage high, during precharge; they change only
during evaluation), which decides the arrival cases that ``--simulate``
runs.  :func:`load_constraints` reads and
validates a file into a :class:`Constraints`; :func:`stage_blocks` turns it
into independent :class:`Block` variables for one stage's inputs, which is
what the pattern search branches over.

Net names match a stage input exactly or, failing that, without regard to
case when that picks out one input (SPICE netlists are case-insensitive).
"""

from __future__ import annotations

import re
try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib
from dataclasses import dataclass
from typing import Iterable

from extract.errors import InputError

__all__ = [
    "Constraints",
    "Block",
    "parse_constraints",
    "load_constraints",
    "check_constraints_apply",
    "stage_blocks",
]


@dataclass(frozen=True)
class Constraints:
    """Validated input constraints.

    Attributes
    ----------
    one_hot : tuple of tuple of str
        Groups of which exactly one net is 1.
    complement : tuple of (str, str)
        Pairs always at opposite values.
    fixed : tuple of (str, int)
        Nets held at 0 or 1.
    low_in_precharge : tuple of str
        Inputs at their precharge level until evaluation starts (driven
        by other dynamic stages).
    path : str
        The file they came from (for messages).

    Examples
    --------
    >>> c = parse_constraints({"one_hot": [["S0", "S1"]], "fixed": {"EN": 1}})
    >>> sorted(c.nets())
    ['EN', 'S0', 'S1']
    """

    one_hot: tuple[tuple[str, ...], ...] = ()
    complement: tuple[tuple[str, str], ...] = ()
    fixed: tuple[tuple[str, int], ...] = ()
    path: str = "<constraints>"
    low_in_precharge: tuple[str, ...] = ()

    def places(self) -> list[tuple[str, str]]:
        """Every ``(net, key path)`` the constraints name, in file order."""
        out = [(n, f"one_hot[{i}][{j}]") for i, g in enumerate(self.one_hot) for j, n in enumerate(g)]
        out += [(n, f"complement[{i}][{j}]") for i, p in enumerate(self.complement) for j, n in enumerate(p)]
        out += [(n, f"fixed.{n}") for n, _ in self.fixed]
        out += [(n, f"low_in_precharge[{i}]") for i, n in enumerate(self.low_in_precharge)]
        return out

    def nets(self) -> set[str]:
        """Every net named."""
        return {n for n, _ in self.places()}


@dataclass(frozen=True)
class Block:
    """Stage inputs whose values are chosen together.

    Attributes
    ----------
    nets : tuple of str
        Stage inputs, sorted.
    options : tuple of tuple of int
        Every allowed assignment of ``nets`` (values in ``nets`` order), in
        lexicographic order; a free input has ``((0,), (1,))``.
    """

    nets: tuple[str, ...]
    options: tuple[tuple[int, ...], ...]


def _names(value, path: str, place: str, size: int | None = None) -> tuple[str, ...]:
    if not isinstance(value, list):
        raise InputError(path, "must be an array of net names", place)
    for j, name in enumerate(value):
        if not isinstance(name, str) or not name.strip():
            raise InputError(path, "must be a net name (a non-empty string)", f"{place}[{j}]")
    names = tuple(n.strip() for n in value)
    if size is not None and len(names) != size:
        raise InputError(path, f"must name exactly {size} nets, found {len(names)}", place)
    if not names:
        raise InputError(path, "must name at least one net", place)
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise InputError(path, f"names net '{dup[0]}' more than once", place)
    return names


def parse_constraints(data: dict, path: str = "<constraints>") -> Constraints:
    """Validate parsed TOML ``data`` into :class:`Constraints`.

    Parameters
    ----------
    data : dict
    path : str
        File name for messages.

    Returns
    -------
    Constraints

    Raises
    ------
    InputError
        Naming the key path (``one_hot[1][0]``, ``fixed.EN``, ...) of what is wrong.

    Examples
    --------
    >>> parse_constraints({"complement": [["A", "A_N"]]}).complement
    (('A', 'A_N'),)
    >>> parse_constraints({"fixed": {"EN": 2}}, "c.toml")
    Traceback (most recent call last):
    ...
    extract.errors.InputError: c.toml: fixed.EN: must be 0 or 1
    """
    unknown = sorted(set(data) - {"one_hot", "complement", "fixed", "low_in_precharge"})
    if unknown:
        raise InputError(path, "unknown key (expected one_hot, complement, fixed, low_in_precharge)", unknown[0])
    groups: list[tuple] = []
    for key, size in (("one_hot", None), ("complement", 2)):
        value = data.get(key, [])
        if not isinstance(value, list):
            raise InputError(path, "must be an array of arrays of net names", key)
        groups.append(tuple(_names(g, path, f"{key}[{i}]", size) for i, g in enumerate(value)))
    fixed = data.get("fixed", {})
    if not isinstance(fixed, dict):
        raise InputError(path, "must be a table of net = 0 or 1", "fixed")
    for name, val in fixed.items():
        if isinstance(val, bool) or val not in (0, 1):
            raise InputError(path, "must be 0 or 1", f"fixed.{name}")
    low = data.get("low_in_precharge", [])
    low = _names(low, path, "low_in_precharge") if low != [] else ()
    return Constraints(groups[0], groups[1], tuple((n, int(v)) for n, v in fixed.items()), path, low)


_TOML_LINE = re.compile(r"\(at line (\d+), column \d+\)")


def load_constraints(path: str) -> Constraints:
    """Read and validate a constraints file.

    Parameters
    ----------
    path : str

    Returns
    -------
    Constraints

    Raises
    ------
    InputError
        File missing or unreadable, not TOML (naming the line), or a bad key.
    """
    from extract.inputfile import read_input
    from extract.limits import MAX_TOML_BYTES, check_toml_depth

    raw = read_input(path, "constraints file", MAX_TOML_BYTES)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(path, "not UTF-8 text (TOML must be UTF-8)", f"line {line}") from None
    check_toml_depth(text, path)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        line = _TOML_LINE.search(msg)
        if line:
            place = f"line {line.group(1)}"
        elif "end of document" in msg:
            place = f"line {max(1, len(raw.splitlines()))}"
        else:
            place = None
        msg = _TOML_LINE.sub("", msg).replace("(at end of document)", "at the end of the file")
        raise InputError(path, "not valid TOML: " + msg.strip(), place) from None
    return parse_constraints(data, path)


def _resolver(inputs: Iterable[str]):
    inputs = tuple(inputs)
    exact = set(inputs)
    folded: dict[str, list[str]] = {}
    for n in inputs:
        folded.setdefault(n.upper(), []).append(n)

    def resolve(name: str) -> str | None:
        if name in exact:
            return name
        hits = folded.get(name.upper(), [])
        return hits[0] if len(hits) == 1 else None

    return resolve


def check_constraints_apply(constraints: Constraints | None, stages, path: str) -> None:
    """Check that ``constraints`` fit the recognised stages.

    Parameters
    ----------
    constraints : Constraints or None
    stages : iterable of Stage
    path : str
        The constraints file, for messages.

    Raises
    ------
    InputError
        When a net it names is not an input of any stage (naming the net
        and its key path), or when it leaves some stage no input pattern.

    Examples
    --------
    >>> from analyze.stages.stage import Stage
    >>> s = Stage("X", "n", "CLK", "VDD", "VSS", (), (), None, None, ("A", "B"), ())
    >>> check_constraints_apply(parse_constraints({"fixed": {"A": 1}}), [s], "c.toml")
    >>> check_constraints_apply(parse_constraints({"fixed": {"Q": 1}}), [s], "c.toml")
    Traceback (most recent call last):
    ...
    extract.errors.InputError: c.toml: fixed.Q: net 'Q' is not an input of any stage
    """
    if constraints is None:
        return
    stages = list(stages)
    resolvers = [_resolver(s.inputs) for s in stages]
    for net, place in constraints.places():
        if not any(r(net) for r in resolvers):
            raise InputError(path, f"net '{net}' is not an input of any stage", place)
    for s in stages:
        if any(not b.options for b in stage_blocks(constraints, s.inputs)):
            raise InputError(
                path, f"the constraints allow no input pattern for the stage at '{s.dynamic_node}'"
            )


def _stage_rules(constraints: Constraints | None, inputs: tuple[str, ...]):
    """The constraints restricted to ``inputs``: list of (kind, nets, value)."""
    if constraints is None:
        return []
    resolve = _resolver(inputs)
    rules = []
    for group in constraints.one_hot:
        present = [resolve(n) for n in group if resolve(n)]
        if present:
            rules.append(("hot", tuple(present), len(present) == len(group)))
    for a, b in constraints.complement:
        ra, rb = resolve(a), resolve(b)
        if ra and rb:
            rules.append(("not", (ra, rb), None))
    for name, value in constraints.fixed:
        r = resolve(name)
        if r:
            rules.append(("fix", (r,), value))
    return rules


def _allowed(rule, values: dict[str, int]) -> bool:
    """False when the partial assignment ``values`` already breaks ``rule``."""
    kind, nets, arg = rule
    got = [values[n] for n in nets if n in values]
    if kind == "fix":
        return not got or got[0] == arg
    if kind == "not":
        return len(got) < 2 or got[0] != got[1]
    ones = sum(got)
    if ones > 1:
        return False
    return not arg or ones == 1 or len(got) < len(nets)


def _options(nets: tuple[str, ...], rules) -> tuple[tuple[int, ...], ...]:
    """Every assignment of ``nets`` obeying ``rules``, lexicographic (DFS, 0 before 1)."""
    out: list[tuple[int, ...]] = []
    values: dict[str, int] = {}

    def walk(i: int) -> None:
        if i == len(nets):
            out.append(tuple(values[n] for n in nets))
            return
        for v in (0, 1):
            values[nets[i]] = v
            if all(_allowed(r, values) for r in rules):
                walk(i + 1)
            del values[nets[i]]

    walk(0)
    return tuple(out)


def stage_blocks(constraints: Constraints | None, inputs: Iterable[str]) -> list[Block]:
    """Independent input variables of one stage.

    Parameters
    ----------
    constraints : Constraints or None
    inputs : iterable of str
        The stage's inputs.

    Returns
    -------
    list of Block
        Inputs joined by constraints (directly or through shared nets) form
        one block whose options are all assignments the constraints allow;
        each other input is a free block.  Sorted by first net.  A block with
        no option means no pattern is allowed.

    Notes
    -----
    Restricted to a stage, a one-hot group some of whose nets are not
    inputs of it becomes "at most one is 1"; a complement pair with one net
    missing and a fixed value on a missing net drop out.  Options are
    enumerated by depth-first search with the rules checked on each
    partial assignment, so the cost is about (options × block size × rules).

    Examples
    --------
    >>> c = parse_constraints({"one_hot": [["S0", "S1", "S2"]], "complement": [["S0", "T"]]})
    >>> [(b.nets, b.options) for b in stage_blocks(c, ["A", "S0", "S1", "T"])]
    [(('A',), ((0,), (1,))), (('S0', 'S1', 'T'), ((0, 0, 1), (0, 1, 1), (1, 0, 0)))]
    """
    inputs = tuple(sorted(set(inputs)))
    rules = _stage_rules(constraints, inputs)
    parent = {n: n for n in inputs}

    def find(n: str) -> str:
        while parent[n] != n:
            parent[n] = parent[parent[n]]
            n = parent[n]
        return n

    for _, nets, _ in rules:
        for n in nets[1:]:
            parent[find(n)] = find(nets[0])
    groups: dict[str, list[str]] = {}
    for n in inputs:
        groups.setdefault(find(n), []).append(n)
    blocks = []
    for nets in groups.values():
        nets_t = tuple(sorted(nets))
        mine = [r for r in rules if r[1][0] in nets]
        blocks.append(Block(nets_t, _options(nets_t, mine)))
    return sorted(blocks, key=lambda b: b.nets[0])
