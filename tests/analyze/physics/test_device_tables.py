"""The per-process memory of measured device tables
(analyze.physics.device_tables.stage_tables): a stage asked for again gets
the tables it got before without reading or measuring anything, and a
change on disk, of the table file or of the model library, is seen at the
next call.

Reference: ngspice (Debian package) measures the tables, from a small
level-1 model library written in the test; what a table file says is
checked against the file as the test rewrites it, by hand.
"""

from __future__ import annotations

import dataclasses
import glob
import json
import os
import time

import pytest
from ngspice_run import require_ngspice

import analyze.simulator.ngspice as ngspice_mod
from analyze.search.foundry import prepare_stage
from analyze.stages.recognize import find_stages
from extract.tech import Models

from stage_circuits import TECH, inverter, make_circuit

pytestmark = pytest.mark.ngspice

_LIB = """* level-1 devices of our own
.lib tt
.model nch nmos level=1 vto={vto} kp=200u gamma=0.4 phi=0.8 cgso=0.3n cgdo=0.3n tox=4n
.model pch pmos level=1 vto=-0.48 kp=60u gamma=0.4 phi=0.8 cgso=0.3n cgdo=0.3n tox=4n
.endl tt
"""


def _bump(path):
    """A new modification time one second on (coarse file-system clocks)."""
    st = os.stat(path)
    os.utime(path, ns=(st.st_atime_ns, max(time.time_ns(), st.st_mtime_ns) + 10**9))


def _setup(tmp_path, monkeypatch, vto=0.45):
    monkeypatch.setenv("DYNSHARE_CACHE", str(tmp_path / "cache"))
    lib = tmp_path / "models.lib"
    lib.write_text(_LIB.format(vto=vto))
    tech = dataclasses.replace(TECH, models=Models(library=str(lib), corners=("tt",), nmos="nch", pmos="pch"))
    rows = [("MP", "pmos", "X", "CLK", "VDD", 1.0, 0.18), ("MA", "nmos", "X", "A", "n1", 1.0, 0.18),
            ("MB", "nmos", "n1", "B", "f", 1.0, 0.18), ("MF", "nmos", "f", "CLK", "VSS", 1.0, 0.18),
            *inverter("MI", "X", "OUT")]
    circuit = make_circuit(rows, tech)
    (stage,) = find_stages(circuit, tech).stages
    return lib, tech, circuit, stage


def _counted_runs(monkeypatch):
    runs = []
    real = ngspice_mod.run_deck

    def counted(*a, **k):
        runs.append(a[1] if len(a) > 1 else "")
        return real(*a, **k)
    monkeypatch.setattr(ngspice_mod, "run_deck", counted)
    return runs


def test_tables_asked_again_are_the_same_and_a_changed_table_file_is_read(tmp_path, monkeypatch):
    require_ngspice()
    _, tech, circuit, stage = _setup(tmp_path, monkeypatch)
    runs = _counted_runs(monkeypatch)
    first = prepare_stage(circuit, stage, tech).tables
    assert len(runs) == 4  # charges, currents, receiver response, clock edge
    again = prepare_stage(circuit, stage, tech).tables
    assert again is first and len(runs) == 4  # nothing measured or read again
    (path,) = glob.glob(str(tmp_path / "cache" / "tables" / "*.json"))
    # another process rewrites the table file: every switching point 0.1 V up
    data = json.loads(open(path).read())
    data["vm"] = [v + 0.1 for v in data["vm"]]
    with open(path, "w") as fh:
        json.dump(data, fh)
    _bump(path)
    changed = prepare_stage(circuit, stage, tech).tables
    assert changed is not first and len(runs) == 4
    assert changed.thresholds == {k: v + 0.1 for k, v in first.thresholds.items()}
    # the file removed: measured again, the numbers ngspice gave the first time
    os.unlink(path)
    remeasured = prepare_stage(circuit, stage, tech).tables
    assert len(runs) == 8 and remeasured.thresholds == first.thresholds


def test_a_changed_model_library_is_measured_again(tmp_path, monkeypatch):
    require_ngspice()
    lib, tech, circuit, stage = _setup(tmp_path, monkeypatch)
    runs = _counted_runs(monkeypatch)
    first = prepare_stage(circuit, stage, tech).tables
    assert prepare_stage(circuit, stage, tech).tables is first and len(runs) == 4
    # a higher nmos threshold in the library, written in place: the pruned
    # model file changes, so do the tables' key and the receiver's switching
    # point (a stronger-threshold nmos pulls down later: it rises)
    lib.write_text(_LIB.format(vto=0.6))
    _bump(lib)
    changed = prepare_stage(circuit, stage, tech).tables
    assert changed is not first and len(runs) == 8
    (rx,) = first.thresholds
    assert changed.thresholds[rx] > first.thresholds[rx] + 0.01
    assert len(glob.glob(str(tmp_path / "cache" / "tables" / "*.json"))) == 2
