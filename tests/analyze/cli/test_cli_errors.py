"""Bad input on the command line: exit 2, one ``error:`` line naming the
file and place, no traceback, no output file left behind (the behaviour
the README promises for every command)."""

import subprocess
import sys

import gdstk
import pytest

from drawing import TECH, nmos_stack, write  # noqa: E402


def run(*args, cwd=None):
    proc = subprocess.run(
        [sys.executable, "-m", "analyze", *args], capture_output=True, text=True, cwd=cwd, timeout=120
    )
    return proc.returncode, proc.stdout, proc.stderr


def assert_one_error(rc, err, *needles):
    assert rc == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("error: ")
    assert "Traceback" not in err
    for n in needles:
        assert n in lines[0], lines[0]


@pytest.fixture
def good(tmp_path):
    return write(tmp_path, "good.gds", nmos_stack(gdstk.Cell("T")))


def test_extract_ok_writes_outputs(tmp_path, good):
    out = tmp_path / "o.json"
    rc, so, se = run("extract", good, "--tech", TECH, "--json", str(out), "--spice", str(tmp_path / "o.sp"))
    assert rc == 0, se
    assert out.exists() and (tmp_path / "o.sp").exists()
    assert "2 devices" in so


def test_json_to_stdout_is_alone(good):
    import json

    rc, so, se = run("extract", good, "--tech", TECH, "--json", "-")
    assert rc == 0
    doc = json.loads(so)  # nothing else on stdout
    assert doc["tool"] == "dynshare" and doc["cell"] == "T"
    assert {n["name"] for n in doc["nets"]} >= {"X", "VSS", "A", "B"}


def _bad_layouts(tmp_path, good):
    data = open(good, "rb").read()
    trunc = tmp_path / "trunc.gds"
    trunc.write_bytes(data[: len(data) // 2])
    junk = tmp_path / "junk.gds"
    junk.write_bytes(b"\x00\x07garbage" * 20)
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    a, b = lib.new_cell("A"), lib.new_cell("B")
    a.add(gdstk.Reference(b))
    b.add(gdstk.Reference(a))
    cyc = tmp_path / "cycle.gds"
    lib.write_gds(str(cyc))
    lib2 = gdstk.Library(unit=1e-6, precision=1e-9)
    lib2.new_cell("X").add(gdstk.Reference("NOPE"))
    missing = tmp_path / "missing.gds"
    lib2.write_gds(str(missing))
    two = write(tmp_path, "two.gds", nmos_stack(gdstk.Cell("T1")), nmos_stack(gdstk.Cell("T2")))
    return [
        (str(trunc), [], ["trunc.gds", "truncated"]),
        (str(junk), [], ["junk.gds", "byte 0"]),
        (str(cyc), ["--cell", "A"], ["cycle.gds", "reference cycle"]),
        (str(cyc), [], ["cycle.gds", "no top cell"]),
        (str(missing), [], ["missing.gds", "NOPE"]),
        (two, [], ["two.gds", "T1, T2"]),
        (good, ["--cell", "NOSUCH"], ["good.gds", "NOSUCH"]),
        (str(tmp_path / "absent.gds"), [], ["absent.gds", "not found"]),
    ]


@pytest.mark.parametrize("command", ["extract", "check"])
def test_bad_layouts(tmp_path, good, command):
    for path, extra, needles in _bad_layouts(tmp_path, good):
        out = tmp_path / f"out-{command}.json"
        rc, so, se = run(command, path, "--tech", TECH, *extra, "--json", str(out))
        assert_one_error(rc, se, *needles)
        assert not out.exists()
        assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".dynshare-")] == []


def test_bad_tech_is_reported_with_key(tmp_path, good):
    bad = tmp_path / "bad.toml"
    bad.write_text(open(TECH).read().replace("vdd = 1.8", "vdd = -1.8"))
    before = bad.read_bytes()
    rc, so, se = run("extract", good, "--tech", str(bad), "--json", str(tmp_path / "o.json"))
    assert_one_error(rc, se, "bad.toml", "process.vdd")
    assert bad.read_bytes() == before and not (tmp_path / "o.json").exists()


def test_output_over_input_is_refused(tmp_path, good):
    before = open(good, "rb").read()
    rc, so, se = run("extract", good, "--tech", TECH, "--json", good)
    assert_one_error(rc, se, "overwrite an input")
    assert open(good, "rb").read() == before


def test_usage_error_is_one_line():
    rc, so, se = run("extract")
    assert_one_error(rc, se)
    rc, so, se = run("frobnicate")
    assert_one_error(rc, se)
