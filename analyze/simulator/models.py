"""A foundry model library cut down to the devices a job needs.

Foundry libraries define every device of the process in every corner; a
simulator that loads one whole spends most of its time parsing models the
deck never uses (about 19 s for a full sky130 corner in ngspice 39, 0.2 s
for the two logic transistors).  :func:`prune_models` reads the library
as ngspice would — ``.lib FILE SECTION``, nested ``.include`` and ``.lib``
with paths relative to the including file — keeps only what the named
devices need, and writes one self-contained file, cached on disk.

Nothing here knows a particular foundry: the library is read as SPICE
statements and kept by reference.

Examples
--------
>>> import os, tempfile
>>> from extract.tech import Models
>>> folder = tempfile.mkdtemp()
>>> lib = os.path.join(folder, "lib.spice")
>>> _ = open(lib, "w").write('''* tiny library
... .lib tt
... .param sw=0
... .include "dev.spice"
... .endl tt
... ''')
>>> _ = open(os.path.join(folder, "dev.spice"), "w").write('''
... .param vt=0.4 unused=3
... .subckt mynfet d g s b w=1 l=1
... m1 d g s b nch.1 w={w} l={l}
... .ends
... .model nch.1 nmos level=1 vto={vt+sw}
... .model pch.1 pmos level=1
... ''')
>>> saved = os.environ.get("DYNSHARE_CACHE")
>>> os.environ["DYNSHARE_CACHE"] = folder
>>> pruned = prune_models(Models(library=lib, corners=("tt",)), "tt", ["mynfet"])
>>> [ln for ln in open(pruned.path).read().splitlines() if not ln.startswith("*")]
['.param sw=0', '.param vt=0.4', '.subckt mynfet d g s b w=1 l=1', 'm1 d g s b nch.1 w={w} l={l}', '.ends', '.model nch.1 nmos level=1 vto={vt+sw}']
>>> pruned.kinds["mynfet"], pruned.cached
('subckt', False)
>>> prune_models(Models(library=lib, corners=("tt",)), "tt", ["mynfet"]).cached
True
>>> _ = os.environ.pop("DYNSHARE_CACHE") if saved is None else os.environ.update(DYNSHARE_CACHE=saved)
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import tempfile
import threading
from dataclasses import dataclass, field

from extract.errors import InputError
from extract.netlist.expressions import parse_number
from extract.tech import Models

__all__ = ["PrunedModels", "Statement", "cache_dir", "prune_models", "read_library", "parses_done"]

#: Bump when the pruned file's content for the same inputs would change.
_FORMAT = 1

_IDENT = re.compile(r"(?<![\w.$])([A-Za-z_][\w$]*)(?![\w$])(?!\s*=(?!=))")
_ASSIGN = re.compile(r"(?<![\w.])([A-Za-z_][\w$]*)\s*=(?!=)")
_BIN = re.compile(r"^(.*)\.\d+$")
_LMIN = re.compile(r"(?<![\w.])lmin\s*=\s*\{?\s*([-+0-9.eE]+)", re.I)

_parses = 0


def parses_done() -> int:
    """How many times this process has read a library (cache misses).

    Examples
    --------
    >>> parses_done() >= 0
    True
    """
    return _parses


@dataclass
class Statement:
    """One top-level item of a model library.

    Parameters
    ----------
    kind : str
        ``"subckt"`` (a whole ``.subckt`` ... ``.ends`` block), ``"model"``,
        ``"param"`` (one assignment of a ``.param`` card), ``"func"``,
        ``"option"``, ``"global"``.
    name : str
        Lower-case name defined (binned ``NAME.N`` models: ``NAME``);
        ``""`` for options.
    text : str
        The statement's lines without comments.
    file : str
        The file it came from.
    line : int
        1-based line of its first line there.
    own : bool
        It is written directly in the loaded section (or top file), not in
        a file that section includes.
    """

    kind: str
    name: str
    text: str
    file: str
    line: int
    own: bool = False
    _refs: set | None = field(default=None, repr=False)

    def references(self) -> set[str]:
        """Lower-case identifiers used (not assigned) in the statement."""
        if self._refs is None:
            self._refs = {m.lower() for m in _IDENT.findall(self.text)} - {self.name}
        return self._refs


@dataclass(frozen=True)
class PrunedModels:
    """A pruned model file and what it holds.

    Parameters
    ----------
    path : str
        The pruned, self-contained SPICE file (in the cache folder).
    library : str
        The library it was cut from.
    corner : str or None
        The section loaded (``.lib LIBRARY CORNER``); None: the whole file.
    devices : tuple of str
        The devices asked for, as given.
    kinds : dict of str to str
        Lower-case device name -> ``"subckt"`` (instantiate with ``X``) or
        ``"model"`` (an ``M`` line).
    scale : float or None
        The library's ``.option scale``: instance lengths times this are
        metres; None when it sets none.
    min_length_m : dict of str to float or None
        Lower-case device name -> the smallest ``lmin`` of the binned
        models it uses, in metres (None when its models are not binned).
    cached : bool
        True when the file came from the cache without reading the library.
    """

    path: str
    library: str
    corner: str | None
    devices: tuple[str, ...]
    kinds: dict
    scale: float | None
    min_length_m: dict
    cached: bool = False


def cache_dir(*parts: str, create: bool = True) -> str:
    """The cache folder (``$DYNSHARE_CACHE`` or ``~/.cache/dynshare``) or a
    subfolder of it, created when missing (unless ``create`` is False).

    Returns
    -------
    str
    """
    base = os.environ.get("DYNSHARE_CACHE") or os.path.join(os.path.expanduser("~"), ".cache", "dynshare")
    path = os.path.join(base, *parts)
    if create:
        os.makedirs(path, exist_ok=True)
    return path


def _write_atomic(path: str, text: str) -> None:
    fd, tmp = tempfile.mkstemp(prefix=".dynshare-", dir=os.path.dirname(path))
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def _strip(line: str) -> str:
    """``line`` without a ``;`` comment or a ``$`` comment (at the start or
    after white space), neither counted inside braces or quotes."""
    if ";" not in line and "$" not in line:
        return line
    closing = None
    for i, ch in enumerate(line):
        if closing is not None:
            if ch == closing:
                closing = None
        elif ch in "{'\"":
            closing = "}" if ch == "{" else ch
        elif ch == ";" or (ch == "$" and (i == 0 or line[i - 1] in " \t")):
            return line[:i]
    return line


def _cards(path: str, shown: str):
    """(line number, text) of each card of a file: comments dropped,
    ``+`` continuations joined with newlines."""
    try:
        with open(path, encoding="utf-8", errors="replace") as fh:
            lines = fh.read().splitlines()
    except FileNotFoundError:
        raise InputError(shown, "file not found") from None
    except OSError as exc:
        raise InputError(shown, f"cannot read: {exc.strerror or exc}") from None
    cards: list[list] = []
    for number, raw in enumerate(lines, 1):
        text = raw.strip()
        if not text or text[0] == "*":
            continue
        text = _strip(text).rstrip()
        if not text:
            continue
        if text[0] == "+":
            if cards:
                cards[-1][1].append(text)
            continue
        cards.append([number, [text]])
    return [(n, "\n".join(parts)) for n, parts in cards]


def _unquote(word: str) -> str:
    return word.strip().strip("\"'")


class _Reader:
    """Reads a library as ngspice would, collecting statements in order."""

    def __init__(self):
        self.statements: list[Statement] = []
        self.files: dict[str, tuple[int, int]] = {}

    def _open(self, path: str, shown: str, place: tuple[str, int] | None):
        real = os.path.abspath(path)
        try:
            st = os.stat(real)
        except OSError:
            if place:
                raise InputError(place[0], f"included file not found: {shown}", f"line {place[1]}") from None
            raise InputError(shown, "model library not found") from None
        self.files[real] = (st.st_size, st.st_mtime_ns)
        return _cards(real, shown)

    def read(self, path: str, section: str | None, own: bool, place=None, depth: int = 0,
             shown: str | None = None, lib_folder: str | None = None):
        """Read ``path`` (the section ``section`` of it, or the whole file
        outside its sections).  ``lib_folder`` is the folder of the file
        whose section is being read (ngspice 39 looks for a nested
        ``.lib`` file there)."""
        if depth > 50:
            raise InputError(path, "includes nest more than 50 deep (a cycle?)")
        shown = shown or path
        cards = self._open(path, shown, place)
        folder = os.path.dirname(os.path.abspath(path))
        if section is not None or lib_folder is None:
            lib_folder = folder
        inside: str | None = None  # the section being read past, or loaded
        found = section is None
        sections: list[str] = []
        block: list[str] | None = None
        block_start = 0
        block_depth = 0
        control = False
        for number, text in cards:
            low = text.lower()
            word = low.split(None, 1)[0]
            if control:
                control = word != ".endc"
                continue
            if block is not None:
                block.append(text)
                if word == ".subckt":
                    block_depth += 1
                elif word == ".ends":
                    block_depth -= 1
                    if block_depth == 0:
                        self._add("subckt", block[0].split()[1].lower(), "\n".join(block), path, block_start,
                                  own)
                        block = None
                continue
            fields = text.split()
            if word in (".lib", ".library") and len(fields) == 2:  # a section starts
                sections.append(fields[1])
                inside = fields[1].lower()
                if section is not None and inside == section.lower():
                    found = True
                continue
            if word in (".endl",):
                inside = None
                continue
            wanted = inside is None if section is None else inside == section.lower()
            if not wanted:
                continue
            if word == ".end":
                break
            if word == ".control":
                control = True
            elif word in (".include", ".inc"):
                target = _unquote(text.split(None, 1)[1]) if len(fields) > 1 else ""
                full = target if os.path.isabs(target) else os.path.join(folder, target)
                self.read(full, None, False, (shown, number), depth + 1, shown=target, lib_folder=lib_folder)
            elif word in (".lib", ".library"):
                target = _unquote(fields[1])
                full = target
                if not os.path.isabs(target):
                    full = os.path.join(folder, target)
                    if not os.path.exists(full):
                        full = os.path.join(lib_folder, target)
                self.read(full, fields[2], False, (shown, number), depth + 1, shown=target)
            elif word == ".subckt":
                block, block_start, block_depth = [text], number, 1
            elif word == ".model" and len(fields) > 1:
                name = fields[1].lower()
                m = _BIN.match(name)
                self._add("model", m.group(1) if m else name, text, path, number, own)
            elif word == ".param":
                self._params(text, path, number, own)
            elif word == ".func" and len(fields) > 1:
                self._add("func", fields[1].split("(")[0].lower(), text, path, number, own)
            elif word in (".option", ".options", ".opt"):
                self._add("option", "", text, path, number, own)
            elif word == ".global":
                self._add("global", "", text, path, number, own)
        if block is not None:
            raise InputError(shown, f".subckt at line {block_start} has no .ends")
        if not found:
            listed = ", ".join(sections) if sections else "none"
            raise InputError(shown, f"no section {section!r} (.lib {section}); sections: {listed}")

    def _add(self, kind, name, text, path, line, own):
        self.statements.append(Statement(kind, name, text, path, line, own))

    def _params(self, text: str, path: str, line: int, own: bool):
        lines = text.split("\n")
        body = " ".join([lines[0][len(".param"):]] + [ln[1:] for ln in lines[1:]])
        marks = list(_ASSIGN.finditer(_mask(body)))
        for i, m in enumerate(marks):
            end = marks[i + 1].start() if i + 1 < len(marks) else len(body)
            value = body[m.end():end].strip()
            self._add("param", m.group(1).lower(), f".param {m.group(1)}={value}", path, line, own)


_EXPR = re.compile(r"\{[^{}]*\}|'[^']*'|\"[^\"]*\"")


def _mask(text: str) -> str:
    """``text`` with every brace or quoted expression blanked out (same
    length), so that only top-level ``name=`` assignments are seen."""
    while True:
        masked = _EXPR.sub(lambda m: " " * len(m.group(0)), text)
        if masked == text:
            return masked
        text = masked


def read_library(models: Models, corner: str | None) -> tuple[list[Statement], dict]:
    """Every statement a library section defines, in ngspice's order.

    Parameters
    ----------
    models : Models
        ``models.library`` is read.
    corner : str or None
        The section (``.lib LIBRARY corner``); None reads the file whole
        (its sections skipped, as an ``.include`` would).

    Returns
    -------
    (list of Statement, dict)
        The statements, and each file read -> (size, mtime in ns).

    Raises
    ------
    InputError
        A missing library or included file, a missing section, an
        unterminated ``.subckt``.

    Notes
    -----
    One pass over every line reached; a ``.param`` card is split into one
    statement per assignment so that unused parameters can be left out.
    """
    global _parses
    _parses += 1
    reader = _Reader()
    reader.read(models.library, corner, True)
    return reader.statements, reader.files


def _keep(statements: list[Statement], devices: list[str], library: str, corner: str | None):
    """Indices of the statements the devices need, and the lmin per device."""
    defined: dict[str, list[int]] = {}
    for i, st in enumerate(statements):
        if st.name:
            defined.setdefault(st.name, []).append(i)
    keep: set[int] = set()
    lmin: dict[str, float | None] = {}
    kinds: dict[str, str] = {}
    where = f"section {corner!r}" if corner else "the library"
    for device in devices:
        low = device.lower()
        hits = [i for i in defined.get(low, ()) if statements[i].kind in ("subckt", "model")]
        if not hits:
            raise InputError(library, f"device {device!r} is not defined in {where}")
        kinds[low] = statements[hits[0]].kind
        reached = _closure(statements, defined, hits)
        keep |= reached
        found = [parse_number(m) for i in reached if statements[i].kind in ("subckt", "model")
                 for m in _LMIN.findall(statements[i].text)]
        found = [v for v in found if v is not None and v > 0]
        lmin[low] = min(found) if found else None
    own = [i for i, st in enumerate(statements) if st.own or st.kind in ("option", "global")]
    keep |= _closure(statements, defined, own)
    return sorted(keep), kinds, lmin


def _closure(statements, defined, start) -> set[int]:
    keep = set(start)
    todo = list(start)
    while todo:
        i = todo.pop()
        for ref in statements[i].references():
            for j in defined.get(ref, ()):
                if j not in keep:
                    keep.add(j)
                    todo.append(j)
    return keep


def _scale(statements: list[Statement]) -> float | None:
    scale = None
    for st in statements:
        if st.kind == "option":
            m = re.search(r"(?<![\w.])scale\s*=\s*(\S+)", st.text, re.I)
            if m:
                scale = parse_number(m.group(1))
    return scale


def _fresh(files) -> bool:
    """True when every ``(path, size, mtime in ns)`` of ``files`` still
    holds: one ``os.stat`` per file."""
    stat = os.stat
    try:
        for path, size, mtime in files:
            st = stat(path)
            if st.st_size != size or st.st_mtime_ns != mtime:
                return False
    except OSError:
        return False
    return True


def _stamp(path: str):
    """``(size, mtime in ns, inode)`` of a file, None when it cannot be stat'ed."""
    try:
        st = os.stat(path)
    except OSError:
        return None
    return st.st_size, st.st_mtime_ns, st.st_ino


#: Per process: each cache entry as last read or written, by manifest path:
#: the stamps of the manifest and of the pruned file, the files the library
#: was read from with their sizes and modification times, and what the
#: manifest holds.  A hit reads neither the manifest nor the key's JSON
#: again; it is used only while every one of those files is unchanged.
_MEMO: dict = {}
_MEMO_LOCK = threading.Lock()
#: Per process: the cache key of (library, corner, devices).
_KEYS: dict = {}


def prune_models(models: Models, corner: str | None, devices) -> PrunedModels:
    """The devices' definitions from a library section, as one file.

    Parameters
    ----------
    models : Models
        The library (``models.library``, an absolute path).
    corner : str or None
        Section to load as ``.lib LIBRARY corner``; None: the whole file.
    devices : iterable of str
        Device names (subcircuits or models) to keep, e.g.
        ``models.nmos`` and ``models.pmos``.

    Returns
    -------
    PrunedModels
        ``path`` is a file in ``cache_dir("models")`` holding, in the
        library's order: its ``.option`` and ``.global`` cards, the
        statements written directly in the section, and every ``.subckt``,
        ``.model``, ``.param`` and ``.func`` the devices reach.

    Raises
    ------
    InputError
        Naming the library: missing file, missing section, device not
        defined; or naming an including file and line: missing include.

    Notes
    -----
    What is kept is the transitive closure of references: from each
    device's definition (a subcircuit, or a model with binned variants
    ``NAME.N``) and from the section's own statements, every identifier
    used — instance model and subcircuit names, parameter names in
    expressions — pulls in the statements defining it.  Relative paths:
    an ``.include`` is found from the including file's folder; a nested
    ``.lib FILE SECTION`` from there or, failing that, from the folder of
    the library file whose section is being read (where ngspice 39 looks).  Subcircuit-local
    ``.param`` lines stay inside their block.  Element lines, analyses and
    ``.control`` blocks of the library are dropped.

    The cache key is the library path, the section, the devices and this
    module's format; the entry records size and modification time of every
    file read and is used only while all of them are unchanged.  A hit
    reads no library file (see :func:`parses_done`); a hit on an entry
    this process has read or written before reads no file at all (its
    manifest is remembered with the manifest's and the pruned file's size,
    modification time and inode): it costs one ``os.stat`` per library
    file, about 0.4 ms for the 170 files of a sky130 corner.  A miss costs one
    pass over every line of the section's files (seconds for a large
    foundry library) plus a regular-expression scan of the kept text.
    """
    library = os.path.abspath(models.library)
    devices = tuple(devices)
    ask = (library, corner, devices)
    known = _KEYS.get(ask)
    if known is None:
        wanted = sorted({d.lower() for d in devices})
        key_text = json.dumps([library, corner, wanted, _FORMAT])
        known = _KEYS[ask] = (key_text, hashlib.sha256(key_text.encode()).hexdigest()[:24])
    key_text, key = known
    folder = cache_dir("models", create=False)
    manifest_path = os.path.join(folder, f"{key}.json")
    spice_path = os.path.join(folder, f"{key}.spice")
    hit = _MEMO.get(manifest_path)
    if hit is not None and hit[0] == _stamp(manifest_path) and hit[1] == _stamp(spice_path) and _fresh(hit[2]):
        kinds, scale, lmin = hit[3]
        return PrunedModels(spice_path, library, corner, devices, dict(kinds), scale, dict(lmin), cached=True)
    try:
        stamp = _stamp(manifest_path)
        with open(manifest_path, encoding="utf-8") as fh:
            manifest = json.load(fh)
        files = tuple((p, *v) for p, v in manifest["files"].items())
        spice_stamp = _stamp(spice_path)
        if manifest.get("key") == key_text and None not in (stamp, spice_stamp) and _fresh(files):
            held = (manifest["kinds"], manifest["scale"], manifest["min_length_m"])
            with _MEMO_LOCK:
                _MEMO[manifest_path] = (stamp, spice_stamp, files, held)
            return PrunedModels(spice_path, library, corner, devices, dict(held[0]), held[1], dict(held[2]),
                                cached=True)
    except (OSError, ValueError, KeyError, TypeError):
        pass
    cache_dir("models")  # created for the new entry
    statements, files = read_library(Models(library=library, corners=models.corners,
                                            nmos=models.nmos, pmos=models.pmos), corner)
    keep, kinds, lmin = _keep(statements, list(devices), models.library, corner)
    kept = [statements[i] for i in keep]
    head = [
        "* Model file written by dynshare: the statements of a foundry library",
        "* that the devices below need, nothing else.",
        f"* library: {library}",
        f"* section: {corner if corner else '(whole file)'}",
        f"* devices: {' '.join(devices)}",
    ]
    text = "\n".join(head + [st.text for st in kept]) + "\n"
    scale = _scale(kept)
    _write_atomic(spice_path, text)
    _write_atomic(manifest_path, json.dumps({"key": key_text, "files": files, "kinds": kinds,
                                             "scale": scale, "min_length_m": lmin}))
    stamps = (_stamp(manifest_path), _stamp(spice_path))
    if None not in stamps:
        with _MEMO_LOCK:
            _MEMO[manifest_path] = (*stamps, tuple((p, *v) for p, v in files.items()), (kinds, scale, lmin))
    return PrunedModels(spice_path, library, corner, devices, dict(kinds), scale, dict(lmin), cached=False)
