"""Tests of extract.techfile: the TOML tech-file reader.

Sources of the expected outcomes:
- "README tech-file keys": the documented tech-file keys, types and units (the
  tables process, nets, layers, mos, check and the layer kinds);
- "README tech-file reference": the documented validation rules (ranges,
  defaults, key-path style), each one reasoned out by hand next to the case;
- "dsk18.toml": the demo file itself, its numbers copied by hand below;
- TOML 1.0 specification (toml.io) for what is and is not valid syntax.
"""

from __future__ import annotations

import copy
import math
import os
try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib
from pathlib import Path

import pytest
import tomli_w
from hypothesis import given, settings, strategies as st

import sample_layouts
from extract.errors import InputError
from extract.tech import Layer, MosParams, NetRoles, Prelayout
from extract.techfile import load_tech, parse_tech

DSK18 = Path(sample_layouts.__file__).parent / "dsk18.toml"

# A minimal valid file: only required keys, plus a cut and an nwell so that
# the cross-layer rules have something to point at.
MINIMAL = """
[process]
name = "mini"
vdd = 1.2

[nets]
power = ["VDD"]
ground = ["VSS"]

[layers.diff]
gds = [1, 0]
kind = "diffusion"

[layers.poly]
gds = [2, 0]
kind = "poly"

[layers.contact]
gds = [3, 0]
kind = "cut"
joins = ["diff", "poly", "metal1"]

[layers.metal1]
gds = [4, 0]
kind = "metal"

[layers.nwell]
gds = [5, 0]
kind = "nwell"

[mos.nmos]
vt0 = 0.4
gamma = 0.3
phi = 0.7
kp = 300
cox = 9.0
cj = 1.0
cjsw = 0.2
mj = 0.5
mjsw = 0.33
pb = 0.75

[mos.pmos]
vt0 = -0.4
gamma = 0.35
phi = 0.7
kp = 90.0
cox = 9.0
cj = 1.2
cjsw = 0.3
mj = 0.45
mjsw = 0.3
pb = 0.85
"""

DELETE = object()


def edited(edits: dict) -> str:
    """MINIMAL with each dotted key path set to a value (or deleted)."""
    data = copy.deepcopy(tomllib.loads(MINIMAL))
    for dotted, value in edits.items():
        *parents, last = dotted.split(".")
        table = data
        for part in parents:
            table = table.setdefault(part, {})
        if value is DELETE:
            del table[last]
        else:
            table[last] = value
    return tomli_w.dumps(data)


def error_of(text: str, file: str = "t.toml") -> InputError:
    with pytest.raises(InputError) as info:
        parse_tech(text, file)
    err = info.value
    assert err.file == file
    assert "\n" not in str(err)
    return err


# --------------------------------------------------------------------- loading

def test_dsk18_loads_with_exact_values():
    # Source: dsk18.toml, every number copied by hand from the file.
    tech = load_tech(str(DSK18))
    assert tech.path == str(DSK18)
    assert (tech.name, tech.vdd, tech.guard) == ("dsk18", 1.8, 0.05)
    assert tech.nets == NetRoles(power=("VDD",), ground=("VSS",), clock=("CLK",))
    assert tech.prelayout == Prelayout(contacted_length=0.48, uncontacted_length=0.26)
    assert list(tech.layers) == ["active", "poly", "contact", "metal1", "via1", "metal2",
                                 "nimplant", "pimplant", "nwell"]  # file order
    assert tech.layers["active"] == Layer("active", (10, 0), "diffusion")
    assert tech.layers["poly"] == Layer("poly", (20, 0), "poly", 0.09, 0.04, ((20, 5),))
    assert tech.layers["contact"] == Layer("contact", (30, 0), "cut",
                                           joins=("active", "poly", "metal1"))
    assert tech.layers["metal1"] == Layer("metal1", (40, 0), "metal", 0.035, 0.045, ((40, 5),))
    assert tech.layers["via1"] == Layer("via1", (45, 0), "cut", joins=("metal1", "metal2"))
    assert tech.layers["metal2"] == Layer("metal2", (50, 0), "metal", 0.020, 0.040, ((50, 5),))
    assert tech.layers["nimplant"] == Layer("nimplant", (60, 0), "nimplant")
    assert tech.layers["pimplant"] == Layer("pimplant", (61, 0), "pimplant")
    assert tech.layers["nwell"] == Layer("nwell", (70, 0), "nwell")
    assert tech.mos["nmos"] == MosParams(
        type="nmos", vt0=0.45, gamma=0.45, phi=0.85, kp=280.0, cox=8.5, cgo=0.25,
        cj=0.95, cjsw=0.22, cjswg=0.22, mj=0.40, mjsw=0.30, pb=0.80, pbsw=0.80,
        models=("nch", "nfet"))
    assert tech.mos["pmos"] == MosParams(
        type="pmos", vt0=-0.48, gamma=0.40, phi=0.80, kp=65.0, cox=8.5, cgo=0.25,
        cj=1.10, cjsw=0.28, cjswg=0.28, mj=0.45, mjsw=0.32, pb=0.85, pbsw=0.85,
        models=("pch", "pfet"))


def test_minimal_file_takes_the_defaults():
    # Source: README tech-file reference — cjswg defaults to cjsw, pbsw to pb, cgo to 0, models to
    # (); nets.clock to (); check.guard to 0; [prelayout] to Prelayout();
    # area/fringe/labels/joins to their empty values.
    tech = parse_tech(MINIMAL, "mini.toml")
    nmos, pmos = tech.mos["nmos"], tech.mos["pmos"]
    assert (nmos.cjswg, nmos.pbsw, nmos.cgo, nmos.models) == (0.2, 0.75, 0.0, ())
    assert (pmos.cjswg, pmos.pbsw, pmos.cgo, pmos.models) == (0.3, 0.85, 0.0, ())
    assert tech.nets.clock == ()
    assert tech.guard == 0.0
    assert tech.prelayout == Prelayout()
    assert tech.layers["poly"] == Layer("poly", (2, 0), "poly")
    assert tech.path == "mini.toml"


def test_integers_are_accepted_as_floats():
    # Source: README tech-file reference — "ints accepted where floats are expected".  kp = 300 is
    # written as an integer in MINIMAL.
    tech = parse_tech(edited({"process.vdd": 2}), "t.toml")
    assert tech.vdd == 2.0 and isinstance(tech.vdd, float)
    assert isinstance(tech.mos["nmos"].kp, float)


def test_explicit_optional_values_are_kept():
    # Source: README tech-file keys; each value given explicitly must come back as is.
    text = edited({"mos.nmos.cjswg": 0.5, "mos.nmos.pbsw": 0.9, "mos.nmos.cgo": 0.3,
                   "mos.nmos.models": ["n1"], "nets.clock": ["CK", "CKB"],
                   "check.guard": 0.1, "prelayout.contacted_length": 0.6,
                   "layers.metal1.labels": [[4, 10], [4, 11]]})
    tech = parse_tech(text, "t.toml")
    nmos = tech.mos["nmos"]
    assert (nmos.cjswg, nmos.pbsw, nmos.cgo, nmos.models) == (0.5, 0.9, 0.3, ("n1",))
    assert tech.nets.clock == ("CK", "CKB")
    assert tech.guard == 0.1
    assert tech.prelayout == Prelayout(contacted_length=0.6)
    assert tech.layers["metal1"].labels == ((4, 10), (4, 11))


def test_range_edges_that_are_allowed():
    # Source: README tech-file reference — mj, mjsw in [0, 0.99] so both ends are allowed; cj etc.
    # >= 0 so 0 is allowed; guard in [0, vdd).
    text = edited({"mos.nmos.mj": 0, "mos.nmos.mjsw": 0.99, "mos.nmos.cj": 0,
                   "mos.pmos.gamma": 0, "check.guard": 1.19})
    tech = parse_tech(text, "t.toml")
    assert (tech.mos["nmos"].mj, tech.mos["nmos"].mjsw, tech.guard) == (0.0, 0.99, 1.19)


def test_load_tech_reads_without_writing(tmp_path):
    # Source: project rule — inputs are never written.  A byte-order mark is
    # skipped (hand reasoning: editors on some systems add one).
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + MINIMAL.encode())
    before = (path.read_bytes(), os.stat(path).st_mtime_ns)
    tech = load_tech(path)
    assert tech.name == "mini" and tech.path == str(path)
    assert (path.read_bytes(), os.stat(path).st_mtime_ns) == before


# ------------------------------------------------------------ file and syntax

def test_missing_file(tmp_path):
    name = str(tmp_path / "nope.toml")
    with pytest.raises(InputError) as info:
        load_tech(name)
    assert (info.value.file, info.value.place) == (name, None)
    assert "not found" in info.value.message


def test_directory_is_not_a_tech_file(tmp_path):
    with pytest.raises(InputError) as info:
        load_tech(tmp_path)
    assert info.value.file == str(tmp_path) and "directory" in info.value.message


def test_not_utf8(tmp_path):
    # Source: TOML 1.0 — a TOML file must be valid UTF-8; 0xff never is.
    path = tmp_path / "latin.toml"
    path.write_bytes(b'[process]\nname = "\xff"\n')
    with pytest.raises(InputError) as info:
        load_tech(path)
    assert info.value.place == "line 2" and "UTF-8" in info.value.message


@pytest.mark.parametrize("text, place", [
    # Source: TOML 1.0 — a key needs a value (line 3 holds "vdd =").
    ('[process]\nname = "x"\nvdd =\n', "line 3"),
    # Source: TOML 1.0 — a table may not be defined twice (second header on line 3).
    ("[process]\nvdd = 1\n[process]\n", "line 3"),
    # Source: TOML 1.0 — a string must close; the parser reaches the end first.
    ('[process]\nname = "x', "end of file"),
])
def test_toml_syntax_errors_name_the_line(text, place):
    err = error_of(text)
    assert err.place == place and err.message.startswith("invalid TOML")


def test_message_format_is_file_place_message():
    # Source: README tech-file reference — messages like "t.toml: layers.poly.area: must be >= 0, got -1".
    err = error_of(edited({"layers.poly.area": -1}))
    assert str(err) == "t.toml: layers.poly.area: must be >= 0, got -1"


# ------------------------------------------------------- every error, one place
#
# Each case: edits to MINIMAL, the key path the error must name, and a piece of
# the message.  Source of each: the README rule quoted in the comment above
# the group; the expected place follows by hand from which key breaks it.

CASES = [
    # unknown keys, at every level
    ({"extra": 1}, "extra", "unknown key"),
    ({"process.vd": 1.8}, "process.vd", "did you mean 'vdd'"),
    ({"nets.clk": ["CLK"]}, "nets.clk", "allowed: power, ground, clock"),
    ({"layers.poly.fringes": 0.1}, "layers.poly.fringes", "did you mean 'fringe'"),
    ({"mos.cmos": {}}, "mos.cmos", "unknown key"),
    ({"mos.nmos.vto": 0.4}, "mos.nmos.vto", "did you mean 'vt0'"),
    ({"check.gaurd": 0.1}, "check.gaurd", "did you mean 'guard'"),
    ({"prelayout.length": 0.1}, "prelayout.length", "unknown key"),
    # wrong types (ints are numbers, booleans are not)
    ({"process": 3}, "process", "must be a table, got integer 3"),
    ({"process.vdd": "1.8"}, "process.vdd", 'must be a number, got string "1.8"'),
    ({"process.vdd": True}, "process.vdd", "got boolean true"),
    ({"mos.nmos.kp": False}, "mos.nmos.kp", "got boolean false"),
    ({"process.vdd": math.nan}, "process.vdd", "finite"),
    ({"mos.pmos.cox": math.inf}, "mos.pmos.cox", "finite"),
    ({"process.name": 5}, "process.name", "must be a string"),
    ({"process.name": " "}, "process.name", "must not be empty"),
    ({"nets.power": "VDD"}, "nets.power", "must be an array"),
    ({"nets.power": ["VDD", 3]}, "nets.power[1]", "must be a string"),
    ({"nets.clock": [""]}, "nets.clock[0]", "must not be empty"),
    ({"layers": 1}, "layers", "must be a table"),
    ({"layers.poly": 3}, "layers.poly", "must be a table"),
    ({"layers.poly.kind": 2}, "layers.poly.kind", "must be one of"),
    ({"mos.nmos": [1]}, "mos.nmos", "must be a table"),
    ({"mos.nmos.models": "nch"}, "mos.nmos.models", "must be an array"),
    ({"mos.nmos.models": ["nch", 1]}, "mos.nmos.models[1]", "must be a string"),
    ({"layers.contact.joins": "diff"}, "layers.contact.joins", "must be an array"),
    ({"layers.contact.joins": ["diff", 7]}, "layers.contact.joins[1]", "must be a string"),
    ({"layers.poly.labels": [2, 10]}, "layers.poly.labels[0]", "non-negative integers"),
    ({"layers.poly.labels": [[2, "10"]]}, "layers.poly.labels[0]", "[layer, texttype]"),
    # missing required tables and keys
    ({"process": DELETE}, "process", "required table is missing"),
    ({"nets": DELETE}, "nets", "required table is missing"),
    ({"layers": {}}, "layers", "needs at least one layer of kind 'diffusion'"),
    ({"mos": DELETE}, "mos", "required table is missing"),
    ({"mos.pmos": DELETE}, "mos.pmos", "required table is missing"),
    ({"process.vdd": DELETE}, "process.vdd", "required key is missing"),
    ({"process.name": DELETE}, "process.name", "required key is missing"),
    ({"nets.power": DELETE}, "nets.power", "required key is missing"),
    ({"nets.ground": DELETE}, "nets.ground", "required key is missing"),
    ({"nets.ground": []}, "nets.ground", "at least one"),
    ({"layers.poly.gds": DELETE}, "layers.poly.gds", "required key is missing"),
    ({"layers.poly.kind": DELETE}, "layers.poly.kind", "required key is missing"),
    ({"layers.diff": DELETE, "layers.contact.joins": ["poly", "metal1"]},
     "layers", "kind 'diffusion'"),
    ({"layers.poly.kind": "metal"}, "layers", "kind 'poly'"),
    ({"layers": {}}, "layers", "kind 'diffusion'"),
    # impossible values
    ({"process.vdd": 0}, "process.vdd", "must be > 0, got 0"),
    ({"process.vdd": -1.8}, "process.vdd", "must be > 0, got -1.8"),
    ({"mos.nmos.vt0": 0}, "mos.nmos.vt0", "must be > 0"),
    ({"mos.nmos.vt0": -0.4}, "mos.nmos.vt0", "must be > 0"),
    ({"mos.pmos.vt0": 0.4}, "mos.pmos.vt0", "must be < 0"),
    ({"mos.pmos.vt0": 0}, "mos.pmos.vt0", "must be < 0"),
    ({"mos.pmos.mj": 1}, "mos.pmos.mj", "must be in [0, 1), got 1"),
    ({"mos.nmos.mjsw": -0.1}, "mos.nmos.mjsw", "must be in [0, 1)"),
    ({"check.guard": -0.01}, "check.guard", "must be >= 0"),
    ({"check.guard": 1.2}, "check.guard", "must be < process.vdd (1.2), got 1.2"),
    ({"check.guard": 5}, "check.guard", "must be < process.vdd"),
    ({"prelayout.contacted_length": 0}, "prelayout.contacted_length", "must be > 0"),
    ({"prelayout.uncontacted_length": -0.2}, "prelayout.uncontacted_length", "must be > 0"),
    ({"layers.metal1.fringe": -0.01}, "layers.metal1.fringe", "must be >= 0"),
    # gds pairs
    ({"layers.poly.gds": [2]}, "layers.poly.gds", "two non-negative integers [layer, datatype]"),
    ({"layers.poly.gds": [2, 0, 0]}, "layers.poly.gds", "two non-negative"),
    ({"layers.poly.gds": [-2, 0]}, "layers.poly.gds", "two non-negative"),
    ({"layers.poly.gds": [2.0, 0]}, "layers.poly.gds", "got array [2.0, 0]"),
    ({"layers.poly.gds": [True, 0]}, "layers.poly.gds", "two non-negative"),
    ({"layers.poly.gds": "2/0"}, "layers.poly.gds", "two non-negative"),
    ({"layers.metal1.gds": [2, 0]}, "layers.metal1.gds", "gds pair of layer 'poly'"),
    # kinds, joins, area/fringe, labels
    ({"layers.poly.kind": "polysilicon"}, "layers.poly.kind", 'got string "polysilicon"'),
    ({"layers.poly.joins": ["diff", "metal1"]}, "layers.poly.joins", "only cut layers"),
    ({"layers.contact.joins": ["diff", "metal9"]}, "layers.contact.joins[1]",
     "no layer named 'metal9'"),
    ({"layers.contact.joins": ["diff", "nwell"]}, "layers.contact.joins[1]",
     "'nwell' is a nwell layer"),
    ({"layers.via": {"gds": [6, 0], "kind": "cut", "joins": ["metal1", "contact"]}},
     "layers.via.joins[1]", "is a cut layer"),
    ({"layers.contact.joins": ["poly"]}, "layers.contact.joins", "at least two"),
    ({"layers.contact.joins": []}, "layers.contact.joins", "at least two"),
    ({"layers.contact.joins": ["poly", "poly"]}, "layers.contact.joins[1]", "listed twice"),
    ({"layers.contact.joins": DELETE}, "layers.contact", "needs 'joins'"),
    ({"layers.diff.area": 0.5}, "layers.diff.area", "only poly and metal layers"),
    ({"layers.contact.fringe": 0.1}, "layers.contact.fringe", "only poly and metal layers"),
    ({"layers.nwell.area": 0.1}, "layers.nwell.area", "this layer is nwell"),
    ({"layers.contact.labels": [[3, 1]]}, "layers.contact.labels", "only conductor"),
    ({"layers.nwell.labels": [[5, 1]]}, "layers.nwell.labels", "only conductor"),
    ({"layers.poly.labels": [[9, 1]], "layers.metal1.labels": [[4, 1], [9, 1]]},
     "layers.metal1.labels[1]", "already labels layer 'poly'"),
    # a net name in two roles (compared without case, as Tech.role_of does)
    ({"nets.ground": ["VDD"]}, "nets.ground[0]", "already listed in nets.power[0]"),
    ({"nets.ground": ["VSS", "vdd"]}, "nets.ground[1]", "already listed in nets.power[0]"),
    ({"nets.clock": ["CLK", "VSS"]}, "nets.clock[1]", "already listed in nets.ground[0]"),
    # a SPICE model name meaning both types
    ({"mos.nmos.models": ["nch"], "mos.pmos.models": ["pch", "NCH"]},
     "mos.pmos.models[1]", "also listed for nmos"),
]


@pytest.mark.parametrize("edits, place, fragment", CASES,
                         ids=[f"{i}-{c[1]}" for i, c in enumerate(CASES)])
def test_each_error_names_its_place(edits, place, fragment):
    err = error_of(edited(edits))
    assert err.place == place
    assert fragment in err.message


@pytest.mark.parametrize("kind", ["nmos", "pmos"])
@pytest.mark.parametrize("key", ["vt0", "gamma", "phi", "kp", "cox", "cj", "cjsw", "mj",
                                 "mjsw", "pb"])
def test_every_required_mos_key(kind, key):
    # Source: README tech-file reference — mos.nmos and mos.pmos need all ten of these keys.
    err = error_of(edited({f"mos.{kind}.{key}": DELETE}))
    assert (err.place, err.message) == (f"mos.{kind}.{key}", "required key is missing")


# Source: README tech-file reference — kp, cox, pb, pbsw, phi must be > 0; cj, cjsw, cjswg, cgo,
# gamma, area, fringe must be >= 0.  Hand reasoning: 0 breaks "> 0" only, a
# small negative value breaks both.
POSITIVE = ["kp", "cox", "pb", "pbsw", "phi"]
NON_NEGATIVE = ["cj", "cjsw", "cjswg", "cgo", "gamma"]


@pytest.mark.parametrize("kind", ["nmos", "pmos"])
@pytest.mark.parametrize("key, value", [(k, v) for k in POSITIVE for v in (0, -0.1)]
                         + [(k, -0.1) for k in NON_NEGATIVE])
def test_mos_ranges(kind, key, value):
    err = error_of(edited({f"mos.{kind}.{key}": value}))
    assert err.place == f"mos.{kind}.{key}"
    rule = "must be > 0" if key in POSITIVE else "must be >= 0"
    assert err.message == f"{rule}, got {value}"


@pytest.mark.parametrize("key", ["area", "fringe"])
@pytest.mark.parametrize("layer", ["poly", "metal1"])
def test_wire_caps_may_not_be_negative(layer, key):
    assert error_of(edited({f"layers.{layer}.{key}": -1})).place == f"layers.{layer}.{key}"


def test_odd_layer_names_are_quoted_in_the_key_path():
    # Source: TOML 1.0 — a key with a space must be written quoted, so the key
    # path names it the way the user writes it.
    text = MINIMAL.replace("[layers.metal1]", '[layers."metal 1"]').replace(
        '"metal1"]', '"metal 1"]') + '\n[layers."metal 1".x]\n'
    err = error_of(text)
    assert err.place == 'layers."metal 1".x'


def test_date_is_not_a_number():
    # Source: TOML 1.0 has date values; the message names the TOML type.
    err = error_of(MINIMAL.replace("vdd = 1.2", "vdd = 1979-05-27"))
    assert err.place == "process.vdd" and "got date 1979-05-27" in err.message


# ----------------------------------------------------------- range properties

def accepted_iff(key: str, value: float, allowed: bool, read) -> None:
    """``key = value`` loads (and ``read(tech)`` gives it back) exactly when allowed."""
    text = edited({key: value})
    if allowed:
        assert read(parse_tech(text, "t.toml")) == value
    else:
        assert error_of(text).place == key


@settings(max_examples=60, deadline=None)
@given(st.floats(allow_nan=True, allow_infinity=True))
def test_vdd_accepted_exactly_when_finite_and_positive(vdd):
    # Source: README tech-file reference — vdd <= 0 is impossible, a supply must be a finite number,
    # and a real process's supply is 0.1 V to 50 V (the README's plausible range).
    accepted_iff("process.vdd", vdd, math.isfinite(vdd) and 0.1 <= vdd <= 50, lambda t: t.vdd)


@settings(max_examples=60, deadline=None)
@given(st.floats(min_value=-2, max_value=2))
def test_grading_exponent_accepted_exactly_in_unit_interval(mj):
    # Source: README tech-file reference — mj outside [0, 1) is impossible (the SPICE depletion
    # charge formula divides by 1 - mj), and above 0.99 beyond any real junction (plausible range).
    accepted_iff("mos.pmos.mj", mj, 0 <= mj <= 0.99, lambda t: t.mos["pmos"].mj)


@settings(max_examples=60, deadline=None)
@given(st.floats(min_value=-1, max_value=3))
def test_guard_accepted_exactly_below_vdd(guard):
    # Source: README tech-file reference — check.guard < 0 or >= vdd is impossible (vdd = 1.2 here).
    accepted_iff("check.guard", guard, 0 <= guard < 1.2, lambda t: t.guard)


def test_a_tech_file_for_netlists_needs_no_layers():
    """[layers] may be left out: such a file reads netlists only, and a
    layout read with it is refused with a line naming the tech file."""
    from extract.layout.pipeline import tech_layers

    text = DSK18.read_text()
    start = text.index("[layers.active]")
    end = text.index("[mos.nmos]")
    tech = parse_tech(text[:start] + text[end:], "netlists.toml")
    assert tech.layers == {}
    with pytest.raises(InputError) as err:
        tech_layers(tech)
    assert err.value.line().startswith("netlists.toml: layers: has no [layers] tables")


@pytest.mark.parametrize("table, place, message", [
    ("[netlist]\nscale = 0", "netlist.scale", "must be > 0"),
    ("[netlist]\nscale = 2.0", "netlist.scale", "must be between 1e-12 and 1"),
    ("[netlist]\nunits = 1", "netlist.units", "unknown key"),
    ("[models]\nlibrary = 'm.lib'\nnmos = 'n'", "models.pmos", "required key is missing"),
    ("[models]\nlibrary = 'm.lib'\nnmos = 'n'\npmos = 'p p'", "models.pmos", "not a SPICE device name"),
    ("[models]\nlibrary = 'm.lib'\nnmos = 'n'\npmos = 'p'\ncorners = ['tt', 'TT']", "models.corners[1]",
     "listed twice"),
    ("[check]\nevaluation_ns = -1", "check.evaluation_ns", "must be > 0"),
])
def test_netlist_models_and_evaluation_keys_are_checked(table, place, message):
    """The tables added for netlists and foundry models are validated like
    the rest (keys from the README's tech-file reference)."""
    text = DSK18.read_text().replace("[check]\nguard", "[checkx]\nguard") if "[check]" in table else DSK18.read_text()
    if "[check]" in table:
        text = text.replace("[checkx]\nguard = 0.05        # V above the receiver threshold\n", "")
    with pytest.raises(InputError) as err:
        parse_tech(text + "\n" + table + "\n", "t.toml")
    assert err.value.line().startswith(f"t.toml: {place}: ") and message in err.value.line(), err.value.line()


def test_models_library_is_relative_to_the_tech_file(tmp_path):
    """models.library is taken relative to the tech file's folder."""
    path = tmp_path / "t.toml"
    path.write_text(DSK18.read_text() + "\n[models]\nlibrary = 'pdk/m.lib'\ncorners = ['tt']\n"
                    "nmos = 'nfet'\npmos = 'pfet'\n[netlist]\nscale = 1e-6\n")
    tech = load_tech(path)
    assert tech.models.library == str(tmp_path / "pdk" / "m.lib")
    assert tech.models.corners == ("tt",) and tech.netlist_scale == 1e-6



# ------------------------------------------------ gate-edge grading, [models] length, characterize input

def test_gate_edge_grading_defaults_to_the_sidewall_and_can_be_set():
    # Source: README tech-file reference — mjswg defaults to mjsw, pbswg to pbsw.
    nmos = parse_tech(MINIMAL, "mini.toml").mos["nmos"]
    assert (nmos.mjswg, nmos.pbswg) == (0.33, 0.75)
    nmos = parse_tech(edited({"mos.nmos.mjswg": 0.8, "mos.nmos.pbswg": 0.95}), "t.toml").mos["nmos"]
    assert (nmos.mjswg, nmos.pbswg, nmos.mjsw, nmos.pbsw) == (0.8, 0.95, 0.33, 0.75)
    assert "must be in [0, 1)" in str(error_of(edited({"mos.nmos.mjswg": 1.0})))
    assert "must be > 0" in str(error_of(edited({"mos.pmos.pbswg": 0})))


_MODELS = {"models.library": "lib.spice", "models.nmos": "n", "models.pmos": "p"}


def test_models_length_is_optional_and_positive():
    # Source: README, "Characterising a foundry process": [models] length in um.
    assert parse_tech(edited(_MODELS), "/x/t.toml").models.length_um is None
    assert parse_tech(edited({**_MODELS, "models.length": 0.15}), "/x/t.toml").models.length_um == 0.15
    assert str(error_of(edited({**_MODELS, "models.length": -1}))) == "t.toml: models.length: must be > 0, got -1"


def test_models_temperature_defaults_to_27_and_is_checked():
    # Source: README, "With the foundry's models": [models] temperature in degrees C, the
    # .temp of every deck with the models; 27 C (SPICE's nominal temperature) when absent.
    assert parse_tech(edited(_MODELS), "/x/t.toml").models.temperature_c == 27.0
    assert parse_tech(edited({**_MODELS, "models.temperature": 125}), "/x/t.toml").models.temperature_c == 125.0
    assert parse_tech(edited({**_MODELS, "models.temperature": -40.5}), "/x/t.toml").models.temperature_c == -40.5
    assert str(error_of(edited({**_MODELS, "models.temperature": -300}))) == (
        "t.toml: models.temperature: must be a temperature in °C above -273.15 and at most 500, got -300")
    assert "must be a number" in str(error_of(edited({**_MODELS, "models.temperature": "hot"})))


def test_characterize_input_may_leave_out_mos_only_with_models():
    # Source: the contract — "With [models], [mos.nmos]/[mos.pmos] may be left out of the input
    # to characterize"; check still needs them.
    text = edited({**_MODELS, "mos": DELETE})
    assert parse_tech(text, "t.toml", mos_optional=True).mos == {}
    assert str(error_of(text)) == "t.toml: mos: required table is missing"
    with pytest.raises(InputError, match="mos: required table is missing"):
        parse_tech(edited({"mos": DELETE}), "t.toml", mos_optional=True)
    half = parse_tech(edited({**_MODELS, "mos.pmos": DELETE}), "t.toml", mos_optional=True)
    assert list(half.mos) == ["nmos"]


# ------------------------------------------------------ plausible ranges (issue 13)

@pytest.mark.parametrize("key, value", [
    # the inputs that ended in NaN verdicts or internal errors
    ("mos.pmos.kp", 5e-324), ("mos.nmos.kp", 1e308), ("mos.nmos.pb", 1e-308), ("mos.nmos.cox", 1e308),
    # each side of a few ranges (README tech-file tables: "plausible" column)
    ("mos.nmos.vt0", 6.0), ("mos.pmos.vt0", -0.001), ("mos.nmos.phi", 3.5), ("mos.nmos.cj", 101.0),
    ("mos.pmos.pbsw", 0.04), ("layers.metal1.fringe", 200.0), ("process.vdd", 0.05),
])
def test_implausible_numbers_are_refused(key, value):
    # Source: README tech-file reference, "Plausible ranges" (a real process's numbers); every
    # value here is beyond them by hand comparison.
    err = error_of(edited({key: value}))
    assert err.place == key and "outside what a real process has" in err.message


def test_plausible_edges_are_accepted():
    # Source: README plausible ranges — both ends are inclusive.
    tech = parse_tech(edited({"mos.nmos.kp": 1e4, "mos.pmos.kp": 0.1, "mos.nmos.pb": 5.0,
                              "mos.pmos.vt0": -5.0, "process.vdd": 50}), "t.toml")
    assert (tech.mos["nmos"].kp, tech.mos["pmos"].kp, tech.mos["pmos"].vt0) == (1e4, 0.1, -5.0)
