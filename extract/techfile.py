"""Read and validate a TOML tech file into a :class:`extract.tech.Tech`.

Every key is checked before anything else uses the result: unknown keys,
missing keys, wrong types and impossible values each raise one
:class:`extract.errors.InputError` naming the file and the key path, written
the same way everywhere: ``layers.metal1.fringe``, ``mos.pmos.vt0``,
``nets.power[1]``.  A TOML syntax error names its line (``line 7``).

The tables and keys are described in the tech-file reference of the README.
"""

from __future__ import annotations

import difflib
import json
import math
import os
import re
from datetime import date, datetime, time

try:  # Python >= 3.11
    import tomllib
except ModuleNotFoundError:  # pragma: no cover - Python 3.10
    import tomli as tomllib

from .errors import InputError
from .inputfile import read_input
from .limits import MAX_TOML_BYTES, check_toml_depth
from .tech import CONDUCTOR_KINDS, LAYER_KINDS, Layer, Models, MosParams, NetRoles, Prelayout, Tech

__all__ = ["PLAUSIBLE", "load_tech", "parse_tech"]

_TOP_KEYS = ("process", "nets", "layers", "mos", "check", "prelayout", "netlist", "models")
_LAYER_KEYS = ("gds", "kind", "area", "fringe", "labels", "joins")
_WIRE_KINDS = ("poly", "metal")  # kinds that take `area` and `fringe`
_MOS_REQUIRED = ("vt0", "gamma", "phi", "kp", "cox", "cj", "cjsw", "mj", "mjsw", "pb")
_MOS_KEYS = ("models", "vt0", "gamma", "phi", "kp", "cox", "cgo",
             "cj", "cjsw", "cjswg", "mj", "mjsw", "pb", "pbsw", "mjswg", "pbswg")
#: Range rule of each MOS parameter (vt0 depends on the type, see _mos_table).
_MOS_RULES = {"gamma": ">=0", "phi": ">0", "kp": ">0", "cox": ">0", "cgo": ">=0",
              "cj": ">=0", "cjsw": ">=0", "cjswg": ">=0", "mj": "[0,1)",
              "mjsw": "[0,1)", "pb": ">0", "pbsw": ">0", "mjswg": "[0,1)", "pbswg": ">0"}
_RULES = {
    ">0": (lambda v: v > 0, "must be > 0"),
    ">=0": (lambda v: v >= 0, "must be >= 0"),
    "<0": (lambda v: v < 0, "must be < 0 (a pmos threshold is negative)"),
    "[0,1)": (lambda v: 0 <= v < 1, "must be in [0, 1)"),
}
#: Ranges a real process can have (units of the README's tables): a number
#: outside them is a unit mistake or a typo, and some (kp = 5e-324, pb =
#: 1e-308) would make the analysis' arithmetic meaningless.  Key -> (low, high).
PLAUSIBLE = {
    "vdd": (0.1, 50.0), "vt0": (0.01, 5.0), "gamma": (0.0, 5.0), "phi": (0.01, 3.0),
    "kp": (0.1, 1e4), "cox": (0.1, 100.0), "cgo": (0.0, 10.0), "cj": (0.0, 100.0), "cjsw": (0.0, 100.0),
    "cjswg": (0.0, 100.0), "mj": (0.0, 0.99), "mjsw": (0.0, 0.99), "mjswg": (0.0, 0.99), "pb": (0.05, 5.0),
    "pbsw": (0.05, 5.0), "pbswg": (0.05, 5.0), "area": (0.0, 100.0), "fringe": (0.0, 100.0),
    "contacted_length": (0.001, 100.0), "uncontacted_length": (0.001, 100.0),
}
_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+\Z")
_TOML_WHERE = re.compile(r"\s*\(at (?:line (\d+), column (\d+)|end of document)\)\s*\Z")


def load_tech(path, mos_optional: bool = False) -> Tech:
    """Read the tech file at ``path``.

    Parameters
    ----------
    path : str or os.PathLike
        The TOML file.  It is only read.
    mos_optional : bool
        Let a file with ``[models]`` leave out ``[mos.nmos]``/``[mos.pmos]``
        (the input of ``characterize``); ``Tech.mos`` then holds the tables
        that are there.

    Returns
    -------
    Tech
        With ``Tech.path`` the path string as given.

    Raises
    ------
    InputError
        When the file cannot be read, is not UTF-8 text, is not valid TOML
        or breaks any rule of the tech-file format (see :func:`parse_tech`).

    Examples
    --------
    >>> from pathlib import Path
    >>> import sample_layouts
    >>> tech = load_tech(Path(sample_layouts.__file__).parent / "dsk18.toml")
    >>> tech.name, tech.vdd, tech.mos["pmos"].vt0
    ('dsk18', 1.8, -0.48)
    """
    name = os.fspath(path)
    raw = read_input(name, "tech file", MAX_TOML_BYTES)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(name, "not UTF-8 text (TOML must be UTF-8)", place=f"line {line}") from None
    return parse_tech(text, name, mos_optional)


def parse_tech(text: str, path: str, mos_optional: bool = False) -> Tech:
    """Parse and validate the text of a tech file.

    Parameters
    ----------
    text : str
        TOML source.
    path : str
        Name of the file, used in messages and kept as ``Tech.path``.
    mos_optional : bool
        As for :func:`load_tech`.

    Returns
    -------
    Tech
        Layers in file order; omitted optional keys take their defaults
        (``cjswg`` = ``cjsw``, ``pbsw`` = ``pb``, ``mjswg`` = ``mjsw``,
        ``pbswg`` = ``pbsw``, ``cgo`` = 0, ``models`` =
        (), ``nets.clock`` = (), ``check.guard`` = 0, ``[prelayout]`` those
        of :class:`extract.tech.Prelayout`).

    Raises
    ------
    InputError
        The first problem found, with ``place`` the TOML line of a syntax
        error or the key path of the offending key.

    Notes
    -----
    Tables are checked in the order process, nets, layers, mos, check,
    prelayout; within a table, unknown keys first, then missing ones, then
    types and values.  Layer cross-references (``joins``, duplicate
    ``gds`` pairs and label pairs) are checked once all layers are read.
    Cost is linear in the size of the file.

    Examples
    --------
    >>> mos = "vt0={}, gamma=0.4, phi=0.8, kp={}, cox=8, cj=1, cjsw=0.2, mj=0.5, mjsw=0.3, pb=0.8"
    >>> text = f'''
    ... process = {{ name = "tiny", vdd = 1.8 }}
    ... nets = {{ power = ["VDD"], ground = ["VSS"] }}
    ... layers.diff = {{ gds = [1, 0], kind = "diffusion" }}
    ... layers.poly = {{ gds = [2, 0], kind = "poly", area = 0.1 }}
    ... mos.nmos = {{ {mos.format(0.4, 200)} }}
    ... mos.pmos = {{ {mos.format(-0.4, 60)} }}
    ... '''
    >>> tech = parse_tech(text, "tiny.toml")
    >>> list(tech.layers), tech.mos["nmos"].cjswg, tech.mos["nmos"].pbsw, tech.guard
    (['diff', 'poly'], 0.2, 0.8, 0.0)
    >>> parse_tech(text.replace("area = 0.1", "area = -1"), "t.toml")
    Traceback (most recent call last):
    ...
    extract.errors.InputError: t.toml: layers.poly.area: must be >= 0, got -1
    """
    reader = _Reader(path)
    check_toml_depth(text, path)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = str(exc)
        where = _TOML_WHERE.search(message)
        place = "end of file"
        if where:
            message = message[: where.start()]
            if where.group(1):
                place = f"line {where.group(1)}"
                message += f" (column {where.group(2)})"
        reader.fail(place, f"invalid TOML: {message}")
    optional = mos_optional and "models" in data
    reader.keys(data, "", _TOP_KEYS, ("process", "nets") if optional else ("process", "nets", "mos"))
    name, vdd = _process(reader, data["process"])
    nets = _nets(reader, data["nets"])
    layers = _layers(reader, data["layers"]) if "layers" in data else {}
    mos = _mos(reader, data.get("mos", {}), optional)
    guard, evaluation_ns = _check(reader, data.get("check"), vdd)
    prelayout = _prelayout(reader, data.get("prelayout"))
    scale, ignore = _netlist(reader, data.get("netlist"))
    models = _models(reader, data.get("models"), path)
    return Tech(name=name, vdd=vdd, nets=nets, layers=layers, mos=mos,
                guard=guard, prelayout=prelayout, path=path, netlist_scale=scale, netlist_ignore=ignore,
                models=models, evaluation_ns=evaluation_ns)


def _key(path: str, key: str | int) -> str:
    """Key path of ``key`` inside ``path``: ``a.b``, ``a.b[2]``, ``a."odd name"``."""
    if isinstance(key, int):
        return f"{path}[{key}]"
    part = key if _BARE_KEY.match(key) else json.dumps(key, ensure_ascii=False)
    return f"{path}.{part}" if path else part


def _toml_type(value) -> str:
    """The TOML name of the type of a parsed value."""
    for kind, name in ((bool, "boolean"), (int, "integer"), (float, "float"), (str, "string"),
                       (list, "array"), (dict, "table"), (datetime, "date-time"),
                       (date, "date"), (time, "time")):
        if isinstance(value, kind):
            return name
    return type(value).__name__  # pragma: no cover - tomllib makes no other types


def _show(value) -> str:
    """A short TOML-like rendering of a value for a message."""
    if isinstance(value, bool):
        text = "true" if value else "false"
    elif isinstance(value, str):
        text = json.dumps(value, ensure_ascii=False)
    elif isinstance(value, list):
        text = "[" + ", ".join(_show(v) for v in value) + "]"
    elif isinstance(value, dict):
        text = "{...}"
    else:
        text = str(value)
    return text if len(text) <= 40 else text[:37] + "..."


def _got(value) -> str:
    return f"got {_toml_type(value)} {_show(value)}"


class _Reader:
    """Type and range checks that report against one file."""

    def __init__(self, file: str):
        self.file = file

    def fail(self, place: str, message: str):
        raise InputError(self.file, message, place=place or None)

    def keys(self, table, path, allowed, required=()):
        """Check that ``table`` is a table with no unknown and no missing keys."""
        if not isinstance(table, dict):
            self.fail(path, f"must be a table, {_got(table)}")
        for key in table:
            if key not in allowed:
                near = difflib.get_close_matches(key, allowed, n=1)
                hint = f" (did you mean {near[0]!r}?)" if near else ""
                self.fail(_key(path, key), f"unknown key{hint}; allowed: {', '.join(allowed)}")
        for key in required:
            if key not in table:
                kind = "table" if path == "" or path == "mos" else "key"
                self.fail(_key(path, key), f"required {kind} is missing")

    def number(self, table, path, key, rule=None, default=None) -> float:
        """A finite float (integers accepted, booleans not), obeying ``rule``."""
        if key not in table:
            return default
        place, value = _key(path, key), table[key]
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(place, f"must be a number, {_got(value)}")
        if not math.isfinite(value):
            self.fail(place, f"must be a finite number, got {value}")
        if rule is not None:
            test, message = _RULES[rule]
            if not test(value):
                self.fail(place, f"{message}, got {value}")
        if key in PLAUSIBLE:
            low, high = PLAUSIBLE[key]
            if not low <= abs(value) <= high:
                sign = "-" if value < 0 else ""
                self.fail(place, f"{value:g} is outside what a real process has ({sign}{low:g} to {sign}{high:g}; "
                                 "see the README's tech-file tables): a unit mistake?")
        return float(value)

    def string(self, value, place) -> str:
        """A non-empty string."""
        if not isinstance(value, str):
            self.fail(place, f"must be a string, {_got(value)}")
        if not value.strip():
            self.fail(place, "must not be empty")
        return value

    def array(self, value, place, nonempty=False) -> list:
        if not isinstance(value, list):
            self.fail(place, f"must be an array, {_got(value)}")
        if nonempty and not value:
            self.fail(place, "must list at least one name")
        return value

    def strings(self, table, path, key, nonempty=False) -> tuple[str, ...]:
        """An array of non-empty strings; () when the key is absent."""
        place = _key(path, key)
        items = self.array(table.get(key, []), place, nonempty)
        return tuple(self.string(v, _key(place, i)) for i, v in enumerate(items))

    def pair(self, value, place, second: str) -> tuple[int, int]:
        """Two non-negative integers ``[layer, second]``."""
        if (not isinstance(value, list) or len(value) != 2
                or any(isinstance(v, bool) or not isinstance(v, int) or v < 0 for v in value)):
            self.fail(place, f"must be two non-negative integers [layer, {second}], {_got(value)}")
        return (value[0], value[1])


def _process(r: _Reader, table) -> tuple[str, float]:
    r.keys(table, "process", ("name", "vdd"), ("name", "vdd"))
    name = r.string(table["name"], "process.name")
    return name, r.number(table, "process", "vdd", ">0")


def _nets(r: _Reader, table) -> NetRoles:
    r.keys(table, "nets", ("power", "ground", "clock"), ("power", "ground"))
    roles = {role: r.strings(table, "nets", role, nonempty=role != "clock")
             for role in ("power", "ground", "clock")}
    seen: dict[str, str] = {}  # upper-case name -> place of first listing
    for role, names in roles.items():
        for i, net in enumerate(names):
            place = _key(_key("nets", role), i)
            first = seen.setdefault(net.upper(), place)
            if first != place and not first.startswith(f"nets.{role}["):
                r.fail(place, f"net {net!r} is already listed in {first}; "
                              "a net has one role (names compare without case)")
    return NetRoles(**roles)


def _layers(r: _Reader, table) -> dict[str, Layer]:
    if not isinstance(table, dict):
        r.fail("layers", f"must be a table, {_got(table)}")
    layers: dict[str, Layer] = {}
    gds_owner: dict[tuple[int, int], str] = {}
    label_owner: dict[tuple[int, int], str] = {}
    for name, spec in table.items():
        path = _key("layers", name)
        layer = _one_layer(r, name, spec, path)
        other = gds_owner.setdefault(layer.gds, name)
        if other != name:
            r.fail(_key(path, "gds"), f"{list(layer.gds)} is already the gds pair of layer "
                                      f"{other!r}; two layers cannot share one")
        for i, pair in enumerate(layer.labels):
            other = label_owner.setdefault(pair, name)
            if other != name:
                r.fail(_key(_key(path, "labels"), i),
                       f"{list(pair)} already labels layer {other!r}; a text pair names one layer")
        layers[name] = layer
    for name, layer in layers.items():
        path = _key(_key("layers", name), "joins")
        for i, target in enumerate(layer.joins):
            if target not in layers:
                r.fail(_key(path, i), f"no layer named {target!r}")
            if layers[target].kind not in CONDUCTOR_KINDS:
                r.fail(_key(path, i), f"{target!r} is a {layers[target].kind} layer; a cut joins "
                                      f"conductor layers ({', '.join(CONDUCTOR_KINDS)})")
            if target in layer.joins[:i]:
                r.fail(_key(path, i), f"{target!r} is listed twice")
        if layer.kind == "cut" and len(layer.joins) < 2:
            r.fail(path, f"a cut must join at least two conductor layers, got {len(layer.joins)}")
    kinds = {layer.kind for layer in layers.values()}
    for needed in ("diffusion", "poly"):
        if needed not in kinds:
            r.fail("layers", f"needs at least one layer of kind {needed!r} to find transistors")
    return layers


def _one_layer(r: _Reader, name: str, spec, path: str) -> Layer:
    """The checks that need only this layer's own table."""
    r.keys(spec, path, _LAYER_KEYS, ("gds", "kind"))
    kind = spec["kind"]
    if kind not in LAYER_KINDS:
        r.fail(_key(path, "kind"), f"must be one of {', '.join(LAYER_KINDS)}; {_got(kind)}")
    for key, kinds, what in (("area", _WIRE_KINDS, "poly and metal"),
                             ("fringe", _WIRE_KINDS, "poly and metal"),
                             ("labels", CONDUCTOR_KINDS, "conductor (diffusion, poly, metal)"),
                             ("joins", ("cut",), "cut")):
        if key in spec and kind not in kinds:
            r.fail(_key(path, key), f"only {what} layers take {key!r}; this layer is {kind}")
    if kind == "cut" and "joins" not in spec:
        r.fail(path, "a cut layer needs 'joins', the conductor layers it connects")
    labels = r.array(spec.get("labels", []), _key(path, "labels"))
    return Layer(
        name=name,
        gds=r.pair(spec["gds"], _key(path, "gds"), "datatype"),
        kind=kind,
        area=r.number(spec, path, "area", ">=0", 0.0),
        fringe=r.number(spec, path, "fringe", ">=0", 0.0),
        labels=tuple(r.pair(v, _key(_key(path, "labels"), i), "texttype")
                     for i, v in enumerate(labels)),
        joins=r.strings(spec, path, "joins"),
    )


def _mos(r: _Reader, table, optional: bool = False) -> dict[str, MosParams]:
    r.keys(table, "mos", ("nmos", "pmos"), () if optional else ("nmos", "pmos"))
    mos = {kind: _mos_table(r, kind, table[kind]) for kind in ("nmos", "pmos") if kind in table}
    nmos_models = {m.upper() for m in mos["nmos"].models} if "nmos" in mos else set()
    for i, model in enumerate(mos["pmos"].models if "pmos" in mos else ()):
        if model.upper() in nmos_models:
            r.fail(f"mos.pmos.models[{i}]", f"model {model!r} is also listed for nmos "
                                            "(names compare without case)")
    return mos


def _mos_table(r: _Reader, kind: str, table) -> MosParams:
    path = _key("mos", kind)
    r.keys(table, path, _MOS_KEYS, _MOS_REQUIRED)
    rules = dict(_MOS_RULES, vt0=">0" if kind == "nmos" else "<0")
    values = {key: r.number(table, path, key, rules[key]) for key in _MOS_KEYS[1:]}
    defaults = {"cgo": 0.0, "cjswg": values["cjsw"], "pbsw": values["pb"]}
    for key, default in defaults.items():
        if values[key] is None:
            values[key] = default
    for key, default in (("mjswg", values["mjsw"]), ("pbswg", values["pbsw"])):
        if values[key] is None:
            values[key] = default
    return MosParams(type=kind, models=r.strings(table, path, "models"), **values)


def _check(r: _Reader, table, vdd: float) -> tuple[float, float]:
    if table is None:
        return 0.0, 1.0
    r.keys(table, "check", ("guard", "evaluation_ns"))
    guard = r.number(table, "check", "guard", ">=0", 0.0)
    if guard >= vdd:
        r.fail("check.guard", f"must be < process.vdd ({vdd:g}), got {table['guard']}")
    evaluation = r.number(table, "check", "evaluation_ns", ">0", 1.0)
    if evaluation > 1e6:
        r.fail("check.evaluation_ns", f"must be at most 1e6 ns (1 ms), got {table['evaluation_ns']}")
    return guard, evaluation


def _netlist(r: _Reader, table) -> tuple[float | None, tuple[str, ...]]:
    """``[netlist] scale`` (None when absent: the reader's default) and ``ignore``."""
    if table is None:
        return None, ()
    r.keys(table, "netlist", ("scale", "ignore"))
    ignore = r.strings(table, "netlist", "ignore")
    scale = r.number(table, "netlist", "scale", ">0")
    if scale is not None and not 1e-12 <= scale <= 1.0:
        r.fail("netlist.scale", f"must be between 1e-12 and 1 (metres per netlist unit; "
                                f"1e-6 for lengths in µm), got {table['scale']}")
    return scale, ignore


def _models(r: _Reader, table, path: str) -> Models | None:
    """``[models]``: the library path is made absolute against the tech file."""
    if table is None:
        return None
    r.keys(table, "models", ("library", "corners", "nmos", "pmos", "length", "temperature"),
           ("library", "nmos", "pmos"))
    length = r.number(table, "models", "length", ">0")
    if length is not None and length > 1000:
        r.fail("models.length", f"must be at most 1000 µm, got {table['length']}")
    temperature = r.number(table, "models", "temperature", None, 27.0)
    if not -273.15 < temperature <= 500.0:
        r.fail("models.temperature", f"must be a temperature in °C above -273.15 and at most 500, "
                                     f"got {table['temperature']}")
    library = r.string(table["library"], "models.library")
    if not os.path.isabs(library) and not path.startswith("<"):
        library = os.path.join(os.path.dirname(os.path.abspath(path)), library)
    corners = r.strings(table, "models", "corners")
    for i, corner in enumerate(corners):
        if not _BARE_KEY.match(corner):
            r.fail(f"models.corners[{i}]", f"a corner is a section name (letters, digits, _ -), got {corner!r}")
        if corner.lower() in (c.lower() for c in corners[:i]):
            r.fail(f"models.corners[{i}]", f"{corner!r} is listed twice")
    devices = {}
    for kind in ("nmos", "pmos"):
        devices[kind] = r.string(table[kind], f"models.{kind}")
        if not re.fullmatch(r"[A-Za-z_][\w.$]*", devices[kind]):
            r.fail(f"models.{kind}", f"not a SPICE device name: {devices[kind]!r}")
    return Models(library=library, corners=corners, length_um=length, temperature_c=float(temperature), **devices)


def _prelayout(r: _Reader, table) -> Prelayout:
    if table is None:
        return Prelayout()
    keys = ("contacted_length", "uncontacted_length")
    r.keys(table, "prelayout", keys)
    base = Prelayout()
    return Prelayout(**{k: r.number(table, "prelayout", k, ">0", getattr(base, k)) for k in keys})
