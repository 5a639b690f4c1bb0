"""Hostile and mistaken input: every case ends with exit 2 and one
``error:`` line naming the right file, or with the documented behaviour,
and nothing is overwritten.  Sources: the README's rules for bad input and
outputs; the GDSII record layout (GDSII Stream Format manual, from memory:
2-byte length, record type, data type; UNITS holds two 8-byte reals)."""

import json
import os
import stat
import subprocess
import sys

import gdstk
import pytest

ROOT = os.path.join(os.path.dirname(__file__), "..", "..", "..")
GDS = os.path.join(ROOT, "sample_layouts", "dsk18_cells.gds")
TECH = os.path.join(ROOT, "sample_layouts", "dsk18.toml")
SP = os.path.join(ROOT, "sample_layouts", "DYN_NAND3.sp")


def run(*args, env=None):
    e = dict(os.environ, **(env or {}))
    p = subprocess.run([sys.executable, "-m", "analyze", *args], capture_output=True, text=True, timeout=300, env=e)
    return p.returncode, p.stdout, p.stderr


def one_error(rc, err, *needles):
    assert rc == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    assert "Traceback" not in err and "internal error" not in err, err
    for n in needles:
        assert n in lines[0], lines[0]


@pytest.fixture
def nand3(tmp_path):
    lib = gdstk.read_gds(GDS)
    one = gdstk.Library(unit=1e-6, precision=1e-9)
    one.add(next(c for c in lib.cells if c.name == "DYN_NAND3"))
    path = tmp_path / "nand3.gds"
    one.write_gds(str(path))
    return path


def _records(data):
    pos = 0
    while pos + 4 <= len(data):
        length = int.from_bytes(data[pos : pos + 2], "big")
        yield pos, length, data[pos + 2]
        if data[pos + 2] == 0x04 or length < 4:
            return
        pos += length


def test_reader_crash_becomes_an_error(tmp_path, nand3):
    # A BOUNDARY whose XY record has another record type: gdstk itself
    # dies with a segmentation fault on this (checked when writing the
    # test); the record grammar check refuses it before gdstk reads it
    # (GDSII Stream Format manual, from memory: LIBSECUR is data type 2).
    data = bytearray(nand3.read_bytes())
    pos = next(p for p, _, t in _records(data) if t == 0x10)
    data[pos + 2] = 0x3B
    bad = tmp_path / "crash.gds"
    bad.write_bytes(bytes(data))
    out = tmp_path / "r.json"
    rc, so, se = run("check", str(bad), "--tech", TECH, "--json", str(out))
    one_error(rc, se, "crash.gds", "record", "the grammar says")
    assert not out.exists()


@pytest.mark.parametrize("unit_bytes, needle", [(bytes(8), "user units is 0"), (None, "not a usable length")])
def test_bad_units_record(tmp_path, nand3, unit_bytes, needle):
    data = bytearray(nand3.read_bytes())
    pos = next(p for p, _, t in _records(data) if t == 0x03)
    if unit_bytes is not None:
        data[pos + 4 : pos + 12] = unit_bytes
    else:
        data[pos + 12 : pos + 20] = bytes(8)  # database unit of 0 m
    bad = tmp_path / "units.gds"
    bad.write_bytes(bytes(data))
    one_error(*run("check", str(bad), "--tech", TECH)[::2], "units.gds", needle)


def test_label_that_is_not_text(tmp_path, nand3):
    data = bytearray(nand3.read_bytes())
    pos = next(p for p, _, t in _records(data) if t == 0x19)  # STRING
    data[pos + 4] = 0xFF
    bad = tmp_path / "label.gds"
    bad.write_bytes(bytes(data))
    one_error(*run("extract", str(bad), "--tech", TECH)[::2], "label.gds", "not valid text")


def test_flattened_size_limit(tmp_path, nand3):
    lib = gdstk.read_gds(str(nand3))
    top = lib.new_cell("BIG")
    top.add(gdstk.Reference(lib.cells[0], columns=200, rows=200, spacing=(20, 20)))
    path = tmp_path / "big.gds"
    lib.write_gds(str(path))
    rc, so, se = run("extract", str(path), "--tech", TECH, "--cell", "BIG", env={"DYNSHARE_MAX_SHAPES": "10000"})
    one_error(rc, se, "big.gds", "cell BIG", "more than the limit of 10,000")


def test_special_output_file_is_written_not_replaced(tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    reader = subprocess.Popen(["cat", str(fifo)], stdout=subprocess.PIPE)
    rc, so, se = run("extract", GDS, "--tech", TECH, "--cell", "DYN_NAND3", "--json", str(fifo))
    got = reader.communicate(timeout=60)[0]
    assert rc == 0, se
    assert json.loads(got)["cell"] == "DYN_NAND3"
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)  # still a FIFO, not replaced


def test_symlinked_output_keeps_the_link(tmp_path):
    target, link = tmp_path / "real.json", tmp_path / "link.json"
    target.write_text("{}")
    link.symlink_to(target)
    rc, so, se = run("extract", GDS, "--tech", TECH, "--cell", "DYN_NAND3", "--json", str(link))
    assert rc == 0 and link.is_symlink() and json.loads(target.read_text())["cell"] == "DYN_NAND3"
    assert oct(os.stat(target).st_mode & 0o777) != "0o600"


def test_unwritable_output_names_the_output(tmp_path):
    rc, so, se = run("check", GDS, "--tech", TECH, "--cell", "DYN_NAND3", "--json", str(tmp_path / "no" / "r.json"))
    one_error(rc, se, str(tmp_path / "no" / "r.json"), "folder does not exist")


def test_demo_refuses_the_samples_folder_and_a_file(tmp_path):
    before = open(SP, "rb").read()
    one_error(*run("demo", "--out", os.path.join(ROOT, "sample_layouts"))[::2], "bundled samples")
    assert open(SP, "rb").read() == before
    f = tmp_path / "file"
    f.write_text("x")
    one_error(*run("demo", "--out", str(f))[::2], "not a folder")


def test_deeply_nested_expression_names_the_netlist(tmp_path):
    deep = "(" * 3000 + "1.0u" + ")" * 3000
    text = open(SP).read().replace("W=1.0u", "W={" + deep + "}", 1)
    assert text != open(SP).read()
    bad = tmp_path / "deep.sp"
    bad.write_text(text)
    rc, so, se = run("compare", GDS, "--cell", "DYN_NAND3", "--schematic", str(bad), "--tech", TECH)
    one_error(rc, se, "deep.sp", "nested too deeply")


def test_capacitor_without_unit_suffix(tmp_path):
    text = open(SP).read()
    lines = [l for l in text.splitlines() if l.upper().startswith("C")]
    assert lines, "the sample schematic has a wire estimate"
    name, a, b, _ = lines[0].split()[:4]
    bad = tmp_path / "farad.sp"
    bad.write_text(text.replace(lines[0], f"{name} {a} {b} 1.3"))
    rc, so, se = run("compare", GDS, "--cell", "DYN_NAND3", "--schematic", str(bad), "--tech", TECH)
    one_error(rc, se, "farad.sp", "not a wire capacitance")


def test_library_constraint_naming_no_input(tmp_path):
    c = tmp_path / "c.toml"
    c.write_text('one_hot = [["S0", "S1", "S2", "SX"]]\n')
    one_error(*run("check", GDS, "--tech", TECH, "--all-cells", "--constraints", str(c))[::2], "c.toml", "SX")


def test_wrong_layer_numbers_warn(tmp_path):
    tech = tmp_path / "t.toml"
    tech.write_text(open(TECH).read().replace("gds  = [10, 0]", "gds  = [11, 0]"))
    rc, so, se = run("check", GDS, "--tech", str(tech), "--cell", "DYN_NAND3")
    assert rc == 0 and "no dynamic stage" in so
    assert "tech layer active [11, 0] has no shapes" in se


def test_one_empty_layer_of_two_diffusion_layers_is_no_warning(tmp_path):
    # hand: a second diffusion layer (a tap layer, as the sky130 tech file
    # has) with no shapes in the cell is normal; only a kind with no shapes
    # at all points at wrong layer numbers
    tech = tmp_path / "t.toml"
    tech.write_text(open(TECH).read().replace(
        "[layers.poly]", '[layers.tap]\ngds  = [12, 0]\nkind = "diffusion"\n\n[layers.poly]'))
    rc, so, se = run("check", GDS, "--tech", str(tech), "--cell", "DYN_NAND3")
    assert rc == 0 and "has no shapes" not in se
