"""``dynshare check`` as a program: ``python -m analyze check ...`` in a
subprocess on the bundled sample cells.

Sources of the expected values, named beside each check:

* the README: "Using it" (exit status 0 / 1 / 2, one ``error:`` line, ``--json
  -`` puts only the report on stdout, outputs written whole), "The
  charge-sharing model" (``margin_v``, ``status``, flags) and "JSON report"
  (every key of the ``check`` report);
* sample_layouts/README.md: DYN_NAND3 passes, DYN_NAND3_LONG fails,
  STATIC_NAND2 has no dynamic stage, PDYN_NOR2 is the p-type cell;
* the [check] guard of sample_layouts/dsk18.toml, read here with tomllib.

The runs are started together once per module (a small thread pool), so
the file costs a few process start-ups (about 1 s of CPU each).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[3]
SAMPLES = ROOT / "sample_layouts"
GDS = SAMPLES / "dsk18_cells.gds"
TECH = SAMPLES / "dsk18.toml"
GUARD = tomllib.loads(TECH.read_text(encoding="utf-8"))["check"]["guard"]  # 0.05 V
ROUND = 2.5e-6  # V: report numbers are rounded to 1e-6, a difference of two to 2e-6

BAD_NET = 'one_hot = [["S0", "S1", "S2", "SX"]]\n'  # SX is no input of DOMINO_MUX4
BAD_TOML = '# select groups\none_hot = [["S0", "S1"]\nfixed = { D0 = 0 }\n'  # array not closed


def _check(*args) -> list[str]:
    return [sys.executable, "-m", "analyze", "check", str(GDS), "--tech", str(TECH), *args]


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("check_cli")
    for name, text in (("bad_net", BAD_NET), ("bad_toml", BAD_TOML)):
        (tmp / f"{name}.toml").write_text(text)
    jobs = {
        "nand3": _check("--cell", "DYN_NAND3", "--json", "-"),
        "long": _check("--cell", "DYN_NAND3_LONG", "--json", "-"),
        "pnor": _check("--cell", "PDYN_NOR2", "--json", "-"),
        "static": _check("--cell", "STATIC_NAND2"),
        "file1": _check("--cell", "DYN_NAND3_LONG", "--json", str(tmp / "one.json"),
                        "--html", str(tmp / "one.html")),
        "file2": _check("--cell", "DYN_NAND3_LONG", "--json", str(tmp / "two.json")),
    }
    for name in ("bad_net", "bad_toml"):
        jobs[name] = _check("--cell", "DOMINO_MUX4", "--constraints", str(tmp / f"{name}.toml"))
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))

    def run(cmd):
        return subprocess.run(cmd, capture_output=True, text=True, timeout=300, cwd=tmp, env=env)

    with ThreadPoolExecutor(max_workers=2) as pool:
        done = dict(zip(jobs, pool.map(run, jobs.values())))
    done["tmp"] = tmp
    return done


def _report(runs, name) -> dict:
    proc = runs[name]
    assert "Traceback" not in proc.stderr
    return json.loads(proc.stdout)


# ------------------------------------------------------------ exit status
def test_exit_status(runs):
    # sample_layouts/README.md: DYN_NAND3 passes, LONG "fails", STATIC_NAND2
    # has no dynamic stage (README: "A cell with no dynamic stage says so and
    # exits 0"); PDYN_NOR2 passes.
    assert runs["nand3"].returncode == 0, runs["nand3"].stderr
    assert runs["long"].returncode == 1, runs["long"].stderr
    assert runs["pnor"].returncode == 0, runs["pnor"].stderr
    assert runs["static"].returncode == 0, runs["static"].stderr
    assert "no dynamic stage" in runs["static"].stdout


# ------------------------------------------------------------- the report
def test_json_to_stdout_is_only_json(runs):
    # README: "--json - writes the report to standard output (and then
    # nothing else goes there)".
    for name in ("nand3", "long", "pnor"):
        out = runs[name].stdout
        assert out.startswith("{") and out.endswith("}\n")
        json.loads(out)  # the whole of stdout parses


NET_KEYS = {"name", "cap_ff", "parts_ff", "location_um"}
PARTS = {"junction_area", "junction_sidewall", "junction_gate_edge", "wire", "gate", "overlap"}
DEVICE_KEYS = {"name", "type", "drain", "gate", "source", "w_um", "l_um",
               "ad_um2", "as_um2", "pd_um", "ps_um"}
STAGE_KEYS = {"dynamic_node", "polarity", "clock", "footed", "inputs", "internal_nodes",
              "keepers", "threshold_v", "margin_v", "status", "worst_case", "flags"}
WORST_KEYS = {"inputs", "shared_nodes", "v_final", "v_final_linear", "droop_v"}
FLAG_KEYS = {"node", "action", "v_final_after"}


@pytest.mark.parametrize("name, cell", [("nand3", "DYN_NAND3"), ("long", "DYN_NAND3_LONG"),
                                        ("pnor", "PDYN_NOR2")])
def test_json_has_every_documented_key(runs, name, cell):
    # README "JSON report": the keys of check --json (others may be added).
    rep = _report(runs, name)
    assert {"tool", "version", "cell", "vdd", "nets", "devices", "stages"} <= set(rep)
    assert (rep["tool"], rep["cell"], rep["vdd"]) == ("dynshare", cell, 1.8)
    assert isinstance(rep["version"], str) and rep["version"]
    names = {n["name"] for n in rep["nets"]}
    for net in rep["nets"]:
        assert NET_KEYS <= set(net)
        assert PARTS <= set(net["parts_ff"])
        # cap_ff is the total of the parts (README: "cap_ff (total at zero bias)").
        assert sum(net["parts_ff"][k] for k in PARTS) == pytest.approx(net["cap_ff"], abs=1e-5)
        x, y = net["location_um"]
        assert isinstance(x, (int, float)) and isinstance(y, (int, float))
    for dev in rep["devices"]:
        assert DEVICE_KEYS <= set(dev)
        assert dev["type"] in ("nmos", "pmos")
        assert {dev["drain"], dev["gate"], dev["source"]} <= names
    assert len(rep["stages"]) == 1
    for st in rep["stages"]:
        assert STAGE_KEYS <= set(st)
        assert st["polarity"] in ("n", "p") and st["status"] in ("pass", "fail")
        assert isinstance(st["footed"], bool)
        wc = st["worst_case"]
        assert WORST_KEYS <= set(wc)
        assert set(wc["inputs"]) == set(st["inputs"]) and set(wc["inputs"].values()) <= {0, 1}
        assert set(wc["shared_nodes"]) <= set(st["internal_nodes"])
        # droop from the start level: VDD for n-type, 0 V for p-type (README).
        start = rep["vdd"] if st["polarity"] == "n" else 0.0
        assert wc["droop_v"] == pytest.approx(abs(start - wc["v_final"]), abs=ROUND)
        for flag in st["flags"]:
            assert FLAG_KEYS <= set(flag)


@pytest.mark.parametrize("name", ["nand3", "long", "pnor"])
def test_margin_and_status(runs, name):
    # README "The charge-sharing model": margin_v = v_final − threshold_v
    # (p-type: threshold_v − v_final); status fail when margin_v < guard.
    rep = _report(runs, name)
    for st in rep["stages"]:
        v, th = st["worst_case"]["v_final"], st["threshold_v"]
        margin = v - th if st["polarity"] == "n" else th - v
        assert st["margin_v"] == pytest.approx(margin, abs=ROUND)
        assert (st["status"] == "fail") == (st["margin_v"] < GUARD)
    assert runs[name].returncode == (1 if any(s["status"] == "fail" for s in rep["stages"]) else 0)
    if name == "pnor":
        assert rep["stages"][0]["polarity"] == "p"  # the p-type formula was the one used


def test_flags_on_the_failing_cell(runs):
    # README: on a failing stage, flags name internal nodes whose precharge
    # restores margin_v >= guard; v_final_after is the worst case with every
    # flag up to it applied, so the last one clears threshold + guard.
    (st,) = _report(runs, "long")["stages"]
    assert st["status"] == "fail" and st["flags"]
    for flag in st["flags"]:
        assert flag["node"] in st["internal_nodes"]
        assert "precharge" in flag["action"]
    after = [f["v_final_after"] for f in st["flags"]]
    assert after == sorted(after)  # each added precharge only helps
    assert after[-1] > st["threshold_v"] + GUARD
    for name in ("nand3", "pnor"):  # passing stages carry no flags
        assert all(s["flags"] == [] for s in _report(runs, name)["stages"])


# ------------------------------------------------------------ constraints
def _one_error_line(proc) -> str:
    # README: "A status-2 run prints a single line to standard error,
    # beginning error:" — never a traceback.
    assert proc.returncode == 2, proc.stdout + proc.stderr
    lines = proc.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error:"), proc.stderr
    return lines[0]


def test_constraint_on_a_net_that_is_not_an_input(runs):
    # README "Input constraints": a constraint naming a net that is not an
    # input of any stage is an error (exit 2).
    line = _one_error_line(runs["bad_net"])
    assert "bad_net.toml" in line and "'SX'" in line and "one_hot[0][3]" in line


def test_malformed_constraints_file(runs):
    # The unclosed array starts on line 2; the TOML reader notices on line 3.
    line = _one_error_line(runs["bad_toml"])
    assert "bad_toml.toml" in line and "line 3" in line


# ----------------------------------------------------------- output files
def test_json_file_is_whole_and_deterministic(runs):
    # README: an output file is written whole (temporary name, then rename)
    # and the same input gives the same file.
    tmp = runs["tmp"]
    assert runs["file1"].returncode == runs["file2"].returncode == 1
    one, two = (tmp / "one.json").read_bytes(), (tmp / "two.json").read_bytes()
    assert one == two
    assert json.loads(one)["cell"] == "DYN_NAND3_LONG"
    assert one.decode() == runs["long"].stdout  # the same report as on stdout
    assert not [p.name for p in tmp.iterdir() if p.name.startswith(".")]  # no temporary left
    # With --json OUT the human-readable text still goes to stdout.
    assert "DYN_NAND3_LONG" in runs["file2"].stdout and not runs["file2"].stdout.startswith("{")


def test_html_report_is_written(runs):
    html = (runs["tmp"] / "one.html").read_text(encoding="utf-8")
    assert html.startswith("<!DOCTYPE html>")
    assert "DYN_NAND3_LONG" in html and html.rstrip().endswith("</html>")
