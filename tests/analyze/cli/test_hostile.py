"""Issue 13, hostile and broken inputs: each case ends with exit 2 and one
``error:`` line (under 300 characters) naming the file at fault and the
place, and never with a crash, a hang or an internal error.

Sources: the README ("Hostile and broken inputs": the work limits, input
kinds, one-line errors; exit status 2 for bad input); the GDSII record
layout (GDSII Stream Format manual, from memory) for the label array; hand
counts of the shapes and devices written out per test.
"""

import os
import subprocess
import sys

import gdstk
import pytest

ROOT = os.path.join(os.path.dirname(__file__), "..", "..", "..")
GDS = os.path.join(ROOT, "sample_layouts", "dsk18_cells.gds")
TECH = os.path.join(ROOT, "sample_layouts", "dsk18.toml")


def run(*args, env=None, timeout=120, **kw):
    e = dict(os.environ, **(env or {}))
    p = subprocess.run([sys.executable, "-m", "analyze", *args], capture_output=True, text=True,
                       timeout=timeout, env=e, **kw)
    return p.returncode, p.stdout, p.stderr


def one_error(rc, err, *needles):
    assert rc == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    assert len(lines[0]) < 300, lines[0]
    assert "Traceback" not in err and "internal error" not in err, err
    for n in needles:
        assert n in lines[0], lines[0]
    return lines[0]


# ------------------------------------------------------------ input kinds

def test_fifo_device_and_directory_are_refused_at_once(tmp_path):
    fifo = tmp_path / "layout.gds"
    os.mkfifo(fifo)
    # a FIFO with no writer would block a reader forever: refused within the timeout
    one_error(*run("check", str(fifo), "--tech", TECH, timeout=60)[::2], "layout.gds", "FIFO")
    one_error(*run("check", "/dev/zero", "--tech", TECH)[::2], "/dev/zero", "character device")
    one_error(*run("check", GDS, "--tech", "/dev/zero")[::2], "/dev/zero", "not a tech file")
    one_error(*run("check", GDS, "--tech", str(tmp_path))[::2], "is a directory")
    one_error(*run("check", GDS, "--tech", TECH, "--cell", "DYN_NAND3", "--constraints", str(fifo))[::2],
              "layout.gds", "not a constraints file")
    one_error(*run("compare", GDS, "--tech", TECH, "--cell", "DYN_NAND3", "--schematic", "/dev/zero")[::2],
              "/dev/zero")


def test_empty_tech_name_is_quoted(tmp_path):
    line = one_error(*run("check", GDS, "--tech", "")[::2])
    assert line.startswith("error: '': ")


# ------------------------------------------------------------ work limits

def test_labels_and_arrays_count_against_the_shape_limit(tmp_path):
    # a cell of one label placed in a 30000 x 30000 array: 9e8 shapes by hand count,
    # beyond the 20 million of the README (labels were not counted before)
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    leaf = lib.new_cell("L")
    leaf.add(gdstk.Label("A", (0, 0), layer=4, texttype=10))
    top = lib.new_cell("TOP")
    top.add(gdstk.Reference(leaf, columns=30000, rows=30000, spacing=(1, 1)))
    path = tmp_path / "labels.gds"
    lib.write_gds(str(path))
    one_error(*run("extract", str(path), "--tech", TECH, "--cell", "TOP")[::2],
              "labels.gds", "cell TOP", "900,000,000 shapes", "20,000,000")


@pytest.mark.parametrize("value", ["1e3", "abc", "", "-5", "0"])
def test_odd_shape_limit_values_are_named(value):
    one_error(*run("extract", GDS, "--tech", TECH, "--cell", "DYN_NAND3", env={"DYNSHARE_MAX_SHAPES": value})[::2],
              "DYNSHARE_MAX_SHAPES", "environment variable", "whole number")


NETLIST_HEAD = ".subckt CELL X CLK VDD VSS\n"


def test_m_and_nf_beyond_the_device_limit(tmp_path):
    # M=100000 NF=100000 is 1e10 devices by hand; the README's limit is 2 million
    sp = tmp_path / "big.sp"
    sp.write_text(NETLIST_HEAD + "M1 X CLK VSS VSS nch W=1u L=0.18u M=100000 NF=100000\n.ends\n")
    one_error(*run("check", str(sp), "--tech", TECH, timeout=60)[::2], "big.sp", "line 1", "10,000,000,000 devices",
              "limit of 2,000,000")


def test_nested_instance_fan_out_is_stopped(tmp_path):
    # ten levels of 100 instances each: 1e20 instances by hand, stopped at the limit
    lines = [".subckt S0 A\n.ends\n"]
    for k in range(1, 11):
        lines.append(f".subckt S{k} A\n" + "".join(f"X{i} A S{k - 1}\n" for i in range(100)) + ".ends\n")
    lines.append(".subckt TOP A\nX1 A S10\n.ends\n")
    sp = tmp_path / "fan.sp"
    sp.write_text("".join(lines))
    one_error(*run("check", str(sp), "--tech", TECH, timeout=60)[::2], "fan.sp", "subcircuit instances")


def test_deep_subcircuit_chain(tmp_path):
    # a 20,000-deep chain (the RecursionError) against the README's depth limit of 200
    n = 20000
    text = ".subckt C0 A\nM1 A A 0 0 nch W=1u L=0.18u\n.ends\n" + "".join(
        f".subckt C{k} A\nX1 A C{k - 1}\n.ends\n" for k in range(1, n))
    sp = tmp_path / "deep.sp"
    sp.write_text(text)
    one_error(*run("check", str(sp), "--tech", TECH, timeout=60)[::2], "deep.sp", "nest more than 200 deep")


@pytest.mark.parametrize("which", ["tech", "constraints"])
def test_deeply_nested_toml(tmp_path, which):
    # 5000 nested arrays: the TOML reader would recurse past Python's stack
    deep = tmp_path / "deep.toml"
    deep.write_text("a = " + "[" * 5000 + "]" * 5000 + "\n")
    args = ["--tech", str(deep)] if which == "tech" else ["--tech", TECH, "--cell", "DYN_NAND3",
                                                          "--constraints", str(deep)]
    one_error(*run("check", GDS, *args)[::2], "deep.toml", "line 1", "nest more than 100 deep")


def test_jobs_is_cut_to_the_cores_with_a_warning(tmp_path):
    rc, so, se = run("check", GDS, "--tech", TECH, "--all-cells", "--jobs", "100000")
    assert rc in (0, 1), se
    assert "warning: --jobs 100000 is more than the" in se and "ran " in se


# ------------------------------------------------------------ streams and names

def test_closed_and_full_stdout(tmp_path):
    args = [sys.executable, "-m", "analyze", "check", GDS, "--tech", TECH, "--cell", "DYN_NAND3"]
    p = subprocess.run(args, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, timeout=120,
                       preexec_fn=lambda: os.close(1))
    one_error(p.returncode, p.stderr, "<stdout>", "closed")
    with open("/dev/full", "w") as full:
        p = subprocess.run(args, stdout=full, stderr=subprocess.PIPE, text=True, timeout=120)
    one_error(p.returncode, p.stderr, "<stdout>", "No space left")


def test_closed_stderr_still_exits_2(tmp_path):
    p = subprocess.run([sys.executable, "-m", "analyze", "check", "/dev/zero", "--tech", TECH],
                       stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, timeout=120, preexec_fn=lambda: os.close(2))
    assert p.returncode == 2


def test_a_name_with_a_newline_stays_on_one_line():
    line = one_error(*run("check", GDS, "--tech", TECH, "--cell", "A\nB")[::2], "dsk18_cells.gds")
    assert "cell A\\nB" in line


# ------------------------------------------------------------ outputs: all or none

def test_second_output_unwritable_leaves_no_first(tmp_path):
    # README: the outputs of a run appear together or not at all
    out = tmp_path / "r.json"
    rc, so, se = run("check", GDS, "--tech", TECH, "--cell", "DYN_NAND3", "--json", str(out), "--html", "/dev/full")
    one_error(rc, se, "/dev/full", "No space left")
    assert not out.exists()
    assert [p.name for p in tmp_path.iterdir()] == []  # no temporary file left


def test_failed_rename_puts_back_what_was_replaced(tmp_path, monkeypatch):
    # hand-made failure of the second rename: the first target gets its old content back
    from analyze.cli.output import OutputSet
    from extract.errors import InputError

    a, b = tmp_path / "a.json", tmp_path / "b.html"
    a.write_text("old a")
    real_replace, calls = os.replace, []

    def failing(src, dst):
        calls.append(dst)
        if len(calls) == 2:
            raise PermissionError(13, "Permission denied")
        return real_replace(src, dst)

    monkeypatch.setattr(os, "replace", failing)
    outs = OutputSet()
    outs.add(str(a), "new a")
    outs.add(str(b), "new b")
    with pytest.raises(InputError, match="b.html: cannot write: Permission denied"):
        outs.commit()
    monkeypatch.setattr(os, "replace", real_replace)
    assert a.read_text() == "old a" and not b.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.json"]


def test_reports_name_inputs_alike_from_any_folder(tmp_path):
    # README: reports name an input by its file name, whatever the working folder
    sp = os.path.join(ROOT, "sample_layouts", "DYN_NAND3.sp")
    outs = []
    for k, cwd in enumerate((ROOT, tmp_path)):
        j = tmp_path / f"c{k}.json"
        h = tmp_path / f"c{k}.html"
        rel = os.path.relpath(sp, cwd)
        env = {"PYTHONPATH": os.path.abspath(ROOT)}
        rc, so, se = run("compare", os.path.relpath(GDS, cwd), "--tech", os.path.relpath(TECH, cwd), "--cell",
                         "DYN_NAND3", "--schematic", rel, "--json", str(j), "--html", str(h), cwd=cwd, env=env)
        assert rc in (0, 1), se
        outs.append((j.read_bytes(), h.read_bytes()))
    assert outs[0] == outs[1]
    assert b'"schematic": "DYN_NAND3.sp"' in outs[0][0]


def test_multiplier_given_by_a_parameter_is_stopped_on_the_way(tmp_path):
    # M from an expression escapes the floor count before the walk; the running count stops it
    # (1000 x 1000 x 10 = 1e7 devices by hand, above the 2 million of the README)
    sp = tmp_path / "param.sp"
    sp.write_text(".param big=1000\n.subckt L A\nM1 A A 0 0 nch W=1u L=0.18u M=big\n.ends\n"
                  ".subckt T A\nX1 A L M={big}\n" + "".join(f"X{i} A L M={{big}}\n" for i in range(2, 11)) + ".ends\n")
    one_error(*run("check", str(sp), "--tech", TECH, timeout=60)[::2], "param.sp", "2,000,000 devices")


def test_two_outputs_to_stdout_are_refused():
    # found by the long fuzz run (args seed 1353): JSON and HTML mixed on stdout is no JSON;
    # README: `--json -` writes the report to standard output "and then nothing else goes there"
    one_error(*run("check", GDS, "--tech", TECH, "--cell", "DYN_NAND3", "--json", "-", "--html", "-")[::2],
              "only one output can go to stdout")
