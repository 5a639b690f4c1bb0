"""Mutated inputs of every kind, from the bundled samples, seeded and reproducible.

Each generator takes a ``random.Random`` and the base files and returns a
:class:`Case`: the files to write into a fresh folder, the command line
and the environment.  The same seed gives the same case on every machine.

Kinds: ``gds`` (byte, record-type, data-type, length and splice mutations of
a GDSII stream, and gdstk-built monsters: huge arrays, label arrays, deep
hierarchies), ``oasis`` (byte, field, CBLOCK and END mutations of an OASIS
file and hand-built monsters, see ``mutate_oasis.py``), ``tech`` (numbers
swapped for extreme values, keys dropped, deep nesting, broken bytes),
``spice`` (multipliers, deep and wide hierarchies, line mutations),
``constraints`` (the constraints TOML), ``args`` (odd arguments, outputs and
environment values).  Sources of the record layout: the GDSII Stream Format
manual, from memory (2-byte length, record type, data type).
"""

from __future__ import annotations

import io
import os
import random
import struct
import sys
from dataclasses import dataclass, field

sys.path.insert(0, os.path.dirname(__file__))

from mutate_oasis import oasis_mutation  # noqa: E402

__all__ = ["Case", "KINDS", "base_files", "make_case"]

ROOT = os.path.join(os.path.dirname(__file__), "..", "..")
SAMPLES = os.path.join(ROOT, "sample_layouts")
CELL = "DYN_NAND3"


@dataclass
class Case:
    """One fuzz input: ``files`` written into an empty folder, then
    ``dynshare *argv`` run there with ``env`` added."""

    kind: str
    seed: int
    argv: list[str]
    files: dict[str, bytes]
    env: dict[str, str] = field(default_factory=dict)
    outputs: list[str] = field(default_factory=list)  # files the run may write


def base_files() -> dict[str, bytes]:
    """The samples every mutation starts from: one cell as GDSII and OASIS
    (``cell.oas`` with CBLOCKs, ``cell0.oas`` without), the dsk18 tech file,
    its schematic, a constraints file."""
    import gdstk

    lib = gdstk.read_gds(os.path.join(SAMPLES, "dsk18_cells.gds"))
    one = gdstk.Library(unit=1e-6, precision=1e-9)
    one.add(next(c for c in lib.cells if c.name == CELL))
    out = {}
    for name, writer in (("cell.gds", one.write_gds), ("cell.oas", one.write_oas),
                         ("cell0.oas", lambda p: one.write_oas(p, compression_level=0))):
        path = os.path.join(os.environ.get("TMPDIR", "/tmp"), f"dynshare-fuzz-{os.getpid()}-{name}")
        writer(path)
        with open(path, "rb") as fh:
            out[name] = fh.read()
        os.unlink(path)
    with open(os.path.join(SAMPLES, "dsk18.toml"), "rb") as fh:
        out["tech.toml"] = fh.read()
    with open(os.path.join(SAMPLES, f"{CELL}.sp"), "rb") as fh:
        out["cell.sp"] = fh.read()
    out["c.toml"] = b'one_hot = [["A", "B"]]\ncomplement = [["B", "C"]]\nfixed = { C = 1 }\n'
    return out


# ----------------------------------------------------------------- bytes

EXTREMES = [b"0", b"-0.0", b"1e308", b"-1e308", b"5e-324", b"1e-308", b"nan", b"inf", b"-inf", b"1e3",
            b"99999999999999999999999", b'"x"', b"true", b"[]", b"{}", b"0x10", b"1_000", b"-1"]


def _flip(rng, data: bytes, n: int | None = None) -> bytes:
    b = bytearray(data)
    for _ in range(n or rng.randint(1, 4)):
        if not b:
            break
        i = rng.randrange(len(b))
        op = rng.randrange(4)
        if op == 0:
            b[i] = rng.randrange(256)
        elif op == 1:
            b[i] ^= 1 << rng.randrange(8)
        elif op == 2:
            del b[i: i + rng.randint(1, 16)]
        else:
            b[i:i] = bytes(rng.randrange(256) for _ in range(rng.randint(1, 8)))
    return bytes(b)


def _records(data: bytes):
    pos, out = 0, []
    while pos + 4 <= len(data):
        length = int.from_bytes(data[pos: pos + 2], "big")
        out.append((pos, length))
        if data[pos + 2] == 0x04 or length < 4:
            break
        pos += length
    return out


def _gds_record_mutation(rng, data: bytes) -> bytes:
    recs = _records(data)
    b = bytearray(data)
    pos, length = rng.choice(recs)
    op = rng.randrange(6)
    if op == 0:  # record type, e.g. an ENDEL turned into LIBNAME or STRNAME
        b[pos + 2] = rng.choice([0x02, 0x06, 0x12, rng.randrange(0x3C)])
    elif op == 1:  # data type
        b[pos + 3] = rng.randrange(7)
    elif op == 2:  # length
        b[pos: pos + 2] = struct.pack(">H", rng.choice([0, 2, 3, 4, length + 2, length - 2, 0xFFFF]))
    elif op == 3:  # a record copied in elsewhere
        q, n = rng.choice(recs)
        b[pos:pos] = data[q: q + n]
    elif op == 4:  # a record dropped
        del b[pos: pos + length]
    else:  # truncated
        del b[rng.randrange(len(b)):]
    return bytes(b)


def _gds_monster(rng) -> bytes:
    import gdstk

    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    leaf = lib.new_cell("LEAF")
    which = rng.randrange(4)
    if which == 0:  # a label cell in a huge array
        leaf.add(gdstk.Label("A", (0, 0), layer=4, texttype=10))
        n = rng.choice([3000, 30000])
        lib.new_cell("TOP").add(gdstk.Reference(leaf, columns=n, rows=n, spacing=(1, 1)))
    elif which == 1:  # arrays of arrays
        leaf.add(gdstk.rectangle((0, 0), (1, 1), layer=1))
        prev = leaf
        for k in range(rng.randint(2, 6)):
            cell = lib.new_cell(f"L{k}")
            cell.add(gdstk.Reference(prev, columns=rng.randint(1, 200), rows=rng.randint(1, 200), spacing=(2, 2)))
            prev = cell
    elif which == 2:  # deep hierarchy
        leaf.add(gdstk.rectangle((0, 0), (1, 1), layer=1))
        prev = leaf
        for k in range(rng.choice([50, 500, 3000])):
            cell = lib.new_cell(f"D{k}")
            cell.add(gdstk.Reference(prev, (1, 0)))
            prev = cell
    else:  # coordinates at the edge of the 4-byte range
        big = 2_000_000.0 * rng.choice([1, -1])
        leaf.add(gdstk.rectangle((big, big), (big + 1, big + 1), layer=1))
        leaf.add(gdstk.Label("VDD\x01", (big, big), layer=4, texttype=10))
    buf = io.BytesIO()
    path = os.path.join(os.environ.get("TMPDIR", "/tmp"), f"dynshare-fuzz-m{os.getpid()}.gds")
    lib.write_gds(path)
    with open(path, "rb") as fh:
        buf.write(fh.read())
    os.unlink(path)
    return buf.getvalue()


def _toml_mutation(rng, text: bytes) -> bytes:
    lines = text.split(b"\n")
    op = rng.randrange(6)
    nums = [i for i, ln in enumerate(lines) if b"=" in ln and not ln.lstrip().startswith(b"#")]
    if op <= 1 and nums:  # a value swapped for an extreme one
        i = rng.choice(nums)
        key = lines[i].split(b"=", 1)[0]
        lines[i] = key + b"= " + rng.choice(EXTREMES)
    elif op == 2 and nums:  # a key dropped
        del lines[rng.choice(nums)]
    elif op == 3:  # deep nesting
        depth = rng.choice([50, 150, 5000])
        lines.insert(rng.randrange(len(lines) + 1), b"deep = " + b"[" * depth + b"]" * depth)
    elif op == 4:  # lines shuffled or duplicated
        i = rng.randrange(len(lines))
        lines.insert(rng.randrange(len(lines)), lines[i])
    else:
        return _flip(rng, text)
    return b"\n".join(lines)


def _spice_mutation(rng, text: bytes) -> bytes:
    lines = text.split(b"\n")
    op = rng.randrange(7)
    mlines = [i for i, ln in enumerate(lines) if ln[:1] in (b"M", b"m")]
    if op == 0 and mlines:  # huge multipliers
        i = rng.choice(mlines)
        lines[i] += b" " + rng.choice([b"M=100000 NF=100000", b"M=1e9", b"NF=0", b"M=-1", b"mult=50000 M=50000"])
    elif op == 1:  # a deep chain of subcircuits
        n = rng.choice([100, 300, 300, 20000])
        chain = [b".subckt Z0 A", b"M1 A A 0 0 nch W=1u L=0.18u", b".ends"]
        for k in range(1, n):
            chain += [b".subckt Z%d A" % k, b"X1 A Z%d" % (k - 1), b".ends"]
        lines = chain + [b".subckt TOPZ A", b"X1 A Z%d" % (n - 1), b".ends"]
    elif op == 2:  # wide fan-out
        width = rng.choice([3, 100])
        sub = [b".subckt W0 A", b"M1 A A 0 0 nch W=1u L=0.18u", b".ends"]
        for k in range(1, 6):
            sub += [b".subckt W%d A" % k] + [b"X%d A W%d" % (i, k - 1) for i in range(width)] + [b".ends"]
        lines = sub + [b".subckt TOPW A", b"X1 A W5", b".ends"]
    elif op == 3 and mlines:  # a value swapped for an extreme one
        i = rng.choice(mlines)
        parts = lines[i].split(b" ")
        j = rng.randrange(1, len(parts))
        parts[j] = parts[j].split(b"=")[0] + b"=" + rng.choice(EXTREMES) if b"=" in parts[j] else rng.choice(EXTREMES)
        lines[i] = b" ".join(parts)
    elif op == 4:  # an include of something odd
        lines.insert(1, b".include " + rng.choice([b"/dev/zero", b"/", b"missing.sp", b"cell.sp", b"'/dev/stdin'"]))
    elif op == 5 and len(lines) > 2:
        del lines[rng.randrange(len(lines))]
    else:
        return _flip(rng, text)
    return b"\n".join(lines)


# ----------------------------------------------------------------- cases

def _layout_case(kind, seed, rng, base) -> Case:
    name = "cell.gds" if kind == "gds" else "cell.oas"
    env: dict = {}
    if kind == "gds":
        r = rng.random()
        data = (_gds_record_mutation(rng, base[name]) if r < 0.6 else _flip(rng, base[name]) if r < 0.9
                else _gds_monster(rng))
    else:
        data, env = oasis_mutation(rng, base)
    cmd = rng.choice(["extract", "check", "check"])
    argv = [cmd, name, "--tech", "tech.toml", "--json", "r.json"]
    if rng.random() < 0.5 and data is not base[name]:
        argv += ["--cell", CELL] if rng.random() < 0.7 else []
    return Case(kind, seed, argv, {name: data, "tech.toml": base["tech.toml"]}, env, outputs=["r.json"])


def _tech_case(seed, rng, base) -> Case:
    tech = _toml_mutation(rng, base["tech.toml"])
    argv = ["check", "cell.gds", "--tech", "tech.toml", "--cell", CELL, "--json", "r.json", "--html", "r.html"]
    return Case("tech", seed, argv, {"cell.gds": base["cell.gds"], "tech.toml": tech},
                outputs=["r.json", "r.html"])


def _spice_case(seed, rng, base) -> Case:
    sp = _spice_mutation(rng, base["cell.sp"])
    files = {"cell.gds": base["cell.gds"], "tech.toml": base["tech.toml"], "cell.sp": sp}
    if rng.random() < 0.5:
        argv = ["check", "cell.sp", "--tech", "tech.toml", "--json", "r.json"]
    else:
        argv = ["compare", "cell.gds", "--tech", "tech.toml", "--cell", CELL, "--schematic", "cell.sp",
                "--json", "r.json"]
    return Case("spice", seed, argv, files, outputs=["r.json"])


def _constraints_case(seed, rng, base) -> Case:
    c = _toml_mutation(rng, base["c.toml"]) if rng.random() < 0.8 else rng.choice([
        b'fixed = { A = 2 }', b'one_hot = [["A"]]', b'low_in_precharge = ["A", "A"]', b"\xff\xfe",
        b'fixed = { "A\\nB" = 1 }', b"one_hot = " + b"[" * 3000 + b"]" * 3000])
    argv = ["check", "cell.gds", "--tech", "tech.toml", "--cell", CELL, "--constraints", "c.toml",
            "--json", "r.json"]
    return Case("constraints", seed, argv, {"cell.gds": base["cell.gds"], "tech.toml": base["tech.toml"],
                                            "c.toml": c}, outputs=["r.json"])


def _args_case(seed, rng, base) -> Case:
    files = {"cell.gds": base["cell.gds"], "tech.toml": base["tech.toml"], "cell.sp": base["cell.sp"]}
    env = {}
    odd = ["", "-", "\n", "A\nB", "/dev/full", "/dev/zero", ".", "cell.gds", "tech.toml", "x" * 5000,
           "nope/r.json", "r.json", "r.html", "\x1b[31m", "--json"]
    op = rng.randrange(8)
    outputs = []
    if op == 0:
        argv = ["check", "cell.gds", "--tech", "tech.toml", "--cell", rng.choice(odd)]
    elif op == 1:
        argv = ["check", "cell.gds", "--tech", "tech.toml", "--cell", CELL, "--json", rng.choice(odd),
                "--html", rng.choice(odd)]
        outputs = [a for a in argv[7::2] if a in ("r.json", "r.html")]
    elif op == 2:
        argv = ["check", "cell.gds", "--tech", "tech.toml", "--all-cells", "--jobs",
                rng.choice(["0", "-3", "100000", "2", "x", "1e3"])]
    elif op == 3:
        argv = ["extract", "cell.gds", "--tech", "tech.toml", "--json", "r.json", "--spice", rng.choice(odd),
                "--spef", "r.spef"]
        outputs = ["r.json", "r.spef"] + (["r.html"] if argv[7] == "r.html" else [])
    elif op == 4:
        argv = ["check", rng.choice(odd), "--tech", rng.choice(odd)]
    elif op == 5:
        env["DYNSHARE_MAX_SHAPES"] = rng.choice(["1e3", "abc", "", "-1", "0", "10", "1_000", " 5 ", "9" * 30])
        argv = ["extract", "cell.gds", "--tech", "tech.toml", "--json", "r.json"]
        outputs = ["r.json"]
    elif op == 6:
        env["DYNSHARE_MAX_DEVICES"] = rng.choice(["1e3", "abc", "", "3", "1"])
        argv = ["check", "cell.sp", "--tech", "tech.toml", "--json", "r.json"]
        outputs = ["r.json"]
    else:
        argv = ["compare", "cell.gds", "--tech", "tech.toml", "--cell", CELL, "--schematic", rng.choice(odd),
                "--json", "r.json"]
        outputs = ["r.json"]
    return Case("args", seed, argv, files, env, outputs)


KINDS = ("gds", "oasis", "tech", "spice", "constraints", "args")


def make_case(kind: str, seed: int, base: dict[str, bytes]) -> Case:
    """The case ``seed`` of ``kind`` (reproducible: the seed alone decides)."""
    rng = random.Random(f"{kind}:{seed}")
    if kind in ("gds", "oasis"):
        return _layout_case(kind, seed, rng, base)
    return {"tech": _tech_case, "spice": _spice_case, "constraints": _constraints_case,
            "args": _args_case}[kind](seed, rng, base)
