"""The schematic reader (extract.netlist.reader) and its helpers.

Sources named beside each check:
- "SPICE syntax": the netlist conventions of Berkeley SPICE3 as ngspice
  reads them (ngspice manual, chapters on the input format, from memory);
  where a rule could be read two ways, ngspice 39 itself is asked (tests
  marked ngspice).
- "hand": a calculation written out in the test.
- "README": the documented interface (W/L/AD/AS/PD/PS units, PD includes the
  gate edge, net roles).
"""

from __future__ import annotations

import dataclasses
import math

import pytest
from ngspice_run import run_deck
from writer_fixtures import model_cards

from extract.errors import InputError
from extract.netlist.reader import parse_schematic, read_schematic
from extract.netlist.expressions import ExpressionError, evaluate, parse_number, value_of
from extract.netlist.cards import Card, read_cards, split_fields
from extract.tech import MosParams, NetRoles, Prelayout, Tech

_COMMON = dict(gamma=0.4, phi=0.8, mj=0.5, mjsw=0.33, pb=0.8, pbsw=0.8)
#: Numbers chosen for the hand calculations below (all parts distinct).
TECH = Tech(
    name="hand",
    vdd=1.8,
    nets=NetRoles(power=("VDD",), ground=("VSS",), clock=("CLK",)),
    layers={},
    mos={
        "nmos": MosParams("nmos", vt0=0.45, kp=200.0, cox=8.0, cgo=0.25, cj=1.0, cjsw=0.2,
                          cjswg=0.3, models=("nch", "nfet_x"), **_COMMON),
        "pmos": MosParams("pmos", vt0=-0.45, kp=80.0, cox=8.0, cgo=0.2, cj=1.2, cjsw=0.25,
                          cjswg=0.35, models=("pch",), **_COMMON),
    },
    prelayout=Prelayout(contacted_length=0.5, uncontacted_length=0.25),
)


def parse(text: str, **kw):
    return parse_schematic(text, "cell.sp", TECH, **kw)


def error(text: str, **kw) -> str:
    with pytest.raises(InputError) as info:
        parse(text, **kw)
    return str(info.value)


def cell(body: str, ports: str = "VDD VSS CLK A B X") -> str:
    return f".subckt CELL {ports}\n{body}\n.ends\n"


# ------------------------------------------------------------ numbers ----


@pytest.mark.parametrize(
    "text, value",
    [
        # SPICE syntax: scale suffixes, case-insensitive, trailing letters ignored
        ("1.2u", 1.2e-6), ("1.2um", 1.2e-6), ("10pF", 10e-12), ("2MEG", 2e6), ("2meg", 2e6),
        ("5M", 5e-3), ("5m", 5e-3), ("3k", 3e3), ("3kohm", 3e3), ("25mil", 25 * 25.4e-6),
        ("1f", 1e-15), ("4n", 4e-9), ("2g", 2e9), ("1t", 1e12), ("7a", 7e-18),
        (".5e-3", 0.5e-3), ("-3e-15", -3e-15), ("+2", 2.0), ("1e3u", 1e-3), ("5v", 5.0),
    ],
)
def test_spice_numbers(text, value):
    assert parse_number(text) == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize("text", ["wn", "", "-", "u1", "1.2.3", "{1}"])
def test_not_numbers(text):
    assert parse_number(text) is None  # SPICE syntax: a number starts with a digit or '.'


# -------------------------------------------------------- expressions ----

EXPRESSIONS = {
    # name: (expression, value by hand)
    "a": ("2*(wn+0.1u)/1u", 2 * (0.4 + 0.1)),
    "b": ("max(wn, 0.3u)*2e6 + sqrt(16) - abs(-3)", 0.8 + 4 - 3),
    "c": ("2**3**2", 64.0),  # left to right, (2**3)**2, as ngspice
    "d": ("2^3", 8.0),
    "e": ("-2**2", -4.0),  # power before unary minus
    "f": ("1.2meg/1k + 3m*1000", 1200 + 3),
    "g": ("(1+2)*3-4/2", 7.0),
    "h": ("2**-1", 0.5),
    "i": ("-3^2+1", -8.0),
    "j": ("4/2/2", 1.0),
    "k": ("min(3, 1) + max(-1, -2) + exp(0) + pow(3, 2)", 1 - 1 + 1 + 9),
    "l": ("log(100)", math.log(100)),  # natural logarithm, as ngspice
}


@pytest.mark.parametrize("name", sorted(EXPRESSIONS))
def test_expressions_by_hand(name):
    text, value = EXPRESSIONS[name]
    assert evaluate(text, {"wn": 0.4e-6}) == pytest.approx(value, rel=1e-12)


@pytest.mark.ngspice
def test_expressions_and_numbers_agree_with_ngspice():
    """ngspice (reference simulator) evaluates the same .param expressions
    and number spellings; a voltage source per value and an operating
    point print them back."""
    numbers = ["1.2um", "10pF", "5M", "2MEG", "3kohm", "25mil", ".5e-3"]
    lines = ["expression check", ".param wn=0.4u"]
    lines += [f".param p{k}={{{text}}}" for k, (text, _) in sorted(EXPRESSIONS.items())]
    lines += [f"Vp{k} p{k} 0 {{p{k}}}" for k in sorted(EXPRESSIONS)]
    lines += [f"Vn{i} n{i} 0 {text}" for i, text in enumerate(numbers)]
    names = [f"p{k}" for k in sorted(EXPRESSIONS)] + [f"n{i}" for i in range(len(numbers))]
    lines += ["R1 pa 0 1k", ".control", "op"]
    lines += [f"let x_{n} = v({n})" for n in names] + [f"print x_{n}" for n in names]
    lines += [".endc", ".end", ""]
    got = run_deck("\n".join(lines))
    for k, (text, _) in EXPRESSIONS.items():
        assert evaluate(text, {"wn": 0.4e-6}) == pytest.approx(got[f"x_p{k}"], rel=1e-6), text
    for i, text in enumerate(numbers):
        assert parse_number(text) == pytest.approx(got[f"x_n{i}"], rel=1e-6), text


@pytest.mark.parametrize(
    "text, message",
    [
        ("wp*2", "unknown parameter 'wp'"),
        ("1/(wn-wn)", "division by zero"),
        ("2*(3", "expected ')'"),
        ("2 3", "unexpected 3.0"),
        ("sqrt(-1)", "sqrt of a negative number"),
        ("foo(1)", "unknown function 'foo'"),
        ("__import__(1)", "unknown function '__import__'"),  # no eval: names are data
        ("wn.real", "unknown parameter 'wn.real'"),
        ("min()", "min() takes 2 argument(s), got 0"),
        ("max(1, 5, 2)", "max() takes 2 argument(s), got 3"),  # ngspice misreads 3
        ("pow(2)", "pow() takes 2 argument"),
        ("2 # 3", "unexpected character '#'"),
        ("exp(1000)", "number too large"),
        ("(-8)**0.5", "fractional power"),
    ],
)
def test_expression_errors(text, message):
    with pytest.raises(ExpressionError, match=None) as info:
        evaluate(text, {"wn": 0.4e-6})
    assert message in str(info.value)


def test_value_forms():
    # SPICE syntax: {expr}, 'expr', "expr" and bare numbers; a bare name is an expression too
    p = {"w": 0.5}
    assert value_of("{w * 2}", p) == 1.0
    assert value_of("'w+1'", p) == 1.5
    assert value_of('"w-1"', p) == -0.5
    assert value_of("3k", p) == 3000.0
    assert value_of("w", p) == 0.5


# --------------------------------------------------------------- cards ----


def test_cards_comments_and_continuations():
    # SPICE syntax: '*' comment lines, ';' and ' $' inline comments, '+' continues the
    # card before it even across comment and blank lines.
    text = ("* title-like comment\n"
            "M1 d g s b nch ; first part\n"
            "* a comment inside\n"
            "\n"
            "+ W=1u $ width\n"
            "+ L={0.18u ; not a comment inside braces}\n"
            "C$1 d 0 1f\n")
    cards = read_cards(text, "x.sp")
    assert [(c.line, c.text) for c in cards] == [
        (2, "M1 d g s b nch W=1u L={0.18u ; not a comment inside braces}"),
        (7, "C$1 d 0 1f"),
    ]


def test_continuation_first_is_an_error():
    with pytest.raises(InputError) as info:
        read_cards("\n+ W=1u\n", "x.sp")
    assert str(info.value) == "x.sp: line 2: continuation line '+' with no line before it"


def test_fields():
    pos, par = split_fields(Card(1, ".subckt INV a y params: w = {1u * 2} l='0.18u'"), "x.sp")
    assert pos == [".subckt", "INV", "a", "y"]
    assert par == [("w", "w", "{1u * 2}"), ("l", "l", "'0.18u'")]


@pytest.mark.parametrize(
    "text, message",
    [
        ("M1 d g s b nch W={1u", "unclosed '{'"),
        ("M1 d g s b nch W='1u", "unclosed \"'\""),
        ("M1 d g s b nch W=1u = 2u", "'=' without a parameter name"),
        ("M1 d g s b nch W=", "parameter 'W' has no value"),
        ("M1 d g s b nch W=1u extra", "field 'extra' after the parameters"),
    ],
)
def test_field_errors(text, message):
    with pytest.raises(InputError) as info:
        split_fields(Card(4, text), "x.sp")
    assert str(info.value).startswith("x.sp: line 4: ") and message in str(info.value)


# ------------------------------------------------------------- M lines ----


def test_mos_units_keys_and_models():
    # README: W/L in metres in SPICE -> µm, AD/AS m² -> µm², PD/PS m -> µm;
    # SPICE syntax: keys and model names are case-insensitive.
    c = parse(cell("MN1 X A n1 VSS NCH w=1.2u l=180n Ad=0.6p as=6e-13 pD=3.4u PS=3.4e-6\n"
                   "MN2 n1 B VSS VSS nfet_X W=1u L=0.18u\n"
                   "MP1 X CLK VDD VDD pmos W=0.6u L=0.18u"))
    mn1 = c.device("MN1")
    assert (mn1.type, mn1.drain, mn1.gate, mn1.source, mn1.model) == ("nmos", "X", "A", "n1", "NCH")
    assert (mn1.w_um, mn1.l_um, mn1.ad_um2, mn1.as_um2, mn1.pd_um, mn1.ps_um) == (1.2, 0.18, 0.6, 0.6, 3.4, 3.4)
    assert c.device("MN2").type == "nmos"
    assert c.device("MP1").type == "pmos"  # the type name itself is always a model name


def test_model_card_gives_a_type():
    # SPICE syntax: `.model NAME nmos|pmos ...`
    c = parse(".model myn nmos (level=1 vto=0.4)\n" + cell("M1 X A VSS VSS myn W=1u L=0.18u"))
    assert c.device("M1").type == "nmos"


def test_m_and_nf_are_separate_devices():
    # Our convention (module docstring): M=m copies of full W with the given AD/PD each;
    # NF=k fingers of W/k with AD/k, PD/k; together m·k devices Mname.1..
    c = parse(cell("MA X A VSS VSS nch W=1u L=0.18u AD=0.5p AS=0.5p PD=3u PS=3u M=2\n"
                   "MB X B VSS VSS nch W=1u L=0.18u AD=0.5p AS=0.5p PD=3u PS=3u NF=2\n"
                   "MC X CLK VSS VSS nch W=2u L=0.18u AD=1p AS=1p PD=6u PS=6u M=2 NF=2"))
    names = [d.name for d in c.devices]
    assert names == ["MA.1", "MA.2", "MB.1", "MB.2", "MC.1", "MC.2", "MC.3", "MC.4"]
    assert [(d.w_um, d.ad_um2, d.pd_um) for d in c.devices[:4]] == [
        (1.0, 0.5, 3.0), (1.0, 0.5, 3.0), (0.5, 0.25, 1.5), (0.5, 0.25, 1.5)]
    assert {(d.w_um, d.ad_um2, d.pd_um) for d in c.devices[4:]} == {(1.0, 0.5, 3.0)}
    # Hand, X's nmos junction (drains; field = PD - W, gate edge = W per device):
    #   MA 2 copies  x (0.5, 3 - 1, 1)         = (1.0, 4, 2)
    #   MB 2 fingers x (0.25, 1.5 - 0.5, 0.5)  = (0.5, 2, 1)
    #   MC 4 devices x (0.5, 3 - 1, 1)         = (2.0, 8, 4)   -> (3.5, 14, 7)
    j = c.nets["X"].junctions["nmos"]
    assert (j.area_um2, j.field_perimeter_um, j.gate_perimeter_um) == pytest.approx((3.5, 14.0, 7.0))


@pytest.mark.parametrize(
    "body, line, message",
    [
        ("M1 X A VSS VSS nch3 W=1u L=0.18u", 2, "M1: unknown model nch3 (tech file models nmos: nch, nfet_x; pmos: pch)"),
        ("M1 X A VSS nch W=1u L=0.18u", 2, "M1: an M line needs drain gate source bulk model, got 4 field(s)"),
        ("M1 X A VSS VSS nch L=0.18u", 2, "M1: W is missing"),
        ("M1 X A VSS VSS nch W=-1u L=0.18u", 2, "M1: W must be positive, got -1e-06"),
        ("M1 X A VSS VSS nch W=1u L=0.18u AD=-1p", 2, "M1: AD must be >= 0, got -1e-12"),
        ("M1 X A VSS VSS nch W=1 L=0.18u", 2, "M1: W=1 is 1e+06 µm with scale 1; SPICE values are in metres (write 1u for 1 µm, 1p for 1 µm²); for lengths in µm set [netlist] scale = 1e-6 in the tech file"),
        ("M1 X A VSS VSS nch W=1u L=0.18u M=1.5", 2, "M1: M must be a whole number from 1 to 100000, got 1.5"),
        ("M1 X A VSS VSS nch W=1u L=0.18u NF=0", 2, "M1: NF must be a whole number from 1 to 100000, got 0"),
        ("M1 X A VSS VSS nch W=1u W=2u L=0.18u", 2, "M1: W is given twice"),
        ("M1 X A VSS VSS nch W={wq} L=0.18u", 2, "M1: W: unknown parameter 'wq'"),
        ("M1 X A VSS VSS nch W=1u L=0.18u\nm1 X B VSS VSS nch W=1u L=0.18u", 3,
         "element m1 is defined twice in CELL (first at line 2)"),
    ],
)
def test_mos_errors(body, line, message):
    # README: bad input names the file and the line
    assert error(cell(body)) == f"cell.sp: line {line}: {message}"


def test_unknown_instance_parameters_are_a_finding():
    c = parse(cell("M1 X A VSS VSS nch W=1u L=0.18u nrd=1 sa=0.2u"))
    assert any("ignored instance parameters (not used by the analysis): nrd, sa (on M1)" in f.message for f in c.findings)


# ------------------------------------------------------------- C lines ----


def test_capacitors_are_wire_estimates():
    # Our convention (module docstring): a C to ground, node 0 or a supply adds to the
    # signal side only; between two signal nets it adds to both.
    c = parse(cell("M1 X A n1 VSS nch W=1u L=0.18u\nM2 n1 B VSS VSS nch W=1u L=0.18u\n"
                   "C1 X 0 1.5f\nC2 VSS n1 0.25f\nC3 X n1 c=0.5f\nC4 X VDD 1f m=2\nC5 VDD VSS 10f"))
    assert c.nets["X"].cap.wire == pytest.approx(1.5 + 0.5 + 2.0)
    assert c.nets["n1"].cap.wire == pytest.approx(0.25 + 0.5)
    assert c.nets["VSS"].cap.wire == 0 and c.nets["VDD"].cap.wire == 0
    assert "0" not in c.nets  # SPICE syntax: node 0 is ground -> the tech's first ground net
    assert any("C5 joins no signal net" in f.message for f in c.findings)
    shorted = parse(cell("M1 X A VSS VSS nch W=1u L=0.18u\nC1 X x 1f"))
    assert shorted.nets["X"].cap.wire == 0  # hand: a capacitor across one net stores nothing
    assert any("C1 has both ends on one net" in f.message for f in shorted.findings)


@pytest.mark.parametrize(
    "body, message",
    [
        ("C1 X 0", "C1: a C line needs two nodes and a value"),
        ("C1 X 0 1f 2f", "C1: a C line needs two nodes and a value"),
        ("C1 X 0 -1f", "C1: capacitance must be >= 0, got -1e-15"),
        ("C1 X 0 {cw}", "C1: value: unknown parameter 'cw'"),
    ],
)
def test_capacitor_errors(body, message):
    assert error(cell(body)) == f"cell.sp: line 2: {message}"


# ------------------------------------------------------ hierarchy, params ----

INV = ".subckt INV a y vdd vss wp=1.2u wn=0.6u\nMP y a vdd vdd pch W=wp L=0.18u\nMN y a vss vss nch W=wn L=0.18u\n.ends INV\n"


def test_flattening_with_hierarchical_names():
    text = INV + (
        ".subckt BUF2 in out vdd vss\nX1 in mid vdd vss INV\nX2 mid out vdd vss INV wp=2.4u\n.ends\n"
        ".subckt TOP A Y VDD VSS\nXB A Y VDD VSS BUF2\n.ends\n"
    )
    c = parse(text)  # TOP is the only subcircuit no other one instantiates
    assert c.cell == "TOP"
    assert [d.name for d in c.devices] == ["XB/X1/MN", "XB/X1/MP", "XB/X2/MN", "XB/X2/MP"]
    assert c.device("XB/X1/MP").drain == "XB/mid" and c.device("XB/X2/MN").gate == "XB/mid"
    assert c.device("XB/X2/MP").w_um == 2.4 and c.device("XB/X1/MP").w_um == 1.2  # override, default
    assert sorted(c.nets) == ["A", "VDD", "VSS", "XB/mid", "Y"]
    assert [n for n, net in c.nets.items() if net.labelled] == ["A", "VDD", "VSS", "Y"]
    assert c.nets["VDD"].role == "power" and c.nets["XB/mid"].role == "signal"


def test_instance_multiplier_makes_copies():
    c = parse(INV + ".subckt TOP A Y VDD VSS\nX1 A Y VDD VSS INV m=2\n.ends\n")
    assert [d.name for d in c.devices] == ["X1.1/MN", "X1.1/MP", "X1.2/MN", "X1.2/MP"]


def test_parameter_scopes():
    # Our convention: global .param, then the subcircuit's defaults (unless the X line
    # overrides them), then its local .param cards, each seeing those before it.
    text = (".param wbase=0.5u\n.param w2={2*wbase}\n"
            ".subckt LEG d g s k=1\n.param wl={k*w2}\nM1 d g s s nch W=wl L={wbase/2.5}\n.ends\n"
            ".subckt TOP X A VSS\nX1 X A VSS LEG\nX2 X A VSS LEG k=3\n.ends\n")
    c = parse(text)
    assert c.device("X1/M1").w_um == pytest.approx(1.0)  # hand: 1 * 2 * 0.5
    assert c.device("X2/M1").w_um == pytest.approx(3.0)  # hand: 3 * 2 * 0.5
    assert c.device("X1/M1").l_um == pytest.approx(0.2)


def test_global_nets_and_ground_node():
    # SPICE syntax: .global nets are not prefixed; node 0 is ground
    c = parse(".global vdd\n.subckt INVG a y\nMP y a vdd vdd pch W=1u L=0.18u\nMN y a 0 0 nch W=1u L=0.18u\n.ends\n"
              ".subckt TOP A Y\nX1 A Y INVG\n.ends\n")
    assert c.device("X1/MP").source == "vdd" and c.device("X1/MN").source == "VSS"
    assert c.nets["vdd"].role == "power" and c.nets["VSS"].role == "ground"


def test_dot_commands_in_any_case():
    # SPICE syntax: keywords are case-insensitive
    c = parse(".PARAM WX=2U\n.SUBCKT INV A Y VDD VSS\nMP Y A VDD VDD PCH W={wx} L=0.18U\n.ENDS INV\n.END\n")
    assert c.cell == "INV" and c.device("MP").w_um == 2.0 and c.device("MP").type == "pmos"


def test_case_insensitive_nets_keep_the_port_spelling():
    c = parse(cell("M1 x a vss vss nch W=1u L=0.18u", ports="X A VSS"))
    assert sorted(c.nets) == ["A", "VSS", "X"]


def test_test_bench_lines_are_ignored():
    # SPICE syntax: a deck's title line, sources and analyses outside the .subckt;
    # .control ... .endc is not netlist; nothing after .end is read.
    text = ("DYN test bench\nVdd VDD 0 1.8\n.tran 1p 1n\n.control\nrun\nplot v(x)\n.endc\n"
            + cell("M1 X A VSS VSS nch W=1u L=0.18u", "X A VSS") + ".end\nthis is not read {\n")
    c = parse(text)
    assert [d.name for d in c.devices] == ["M1"]
    assert any("ignored 3 line(s) outside any .subckt" in f.message for f in c.findings)


@pytest.mark.parametrize(
    "text, place, message",
    [
        (".subckt A x\nL1 x 0 1n\n.ends", "line 2", "L1 (inductor) is not supported in a cell"),
        (".subckt A x\nV1 x 0 1\n.ends", "line 2", "V1 (voltage source) is not supported"),
        (".subckt A x\nI1 x 0 1u\n.ends", "line 2", "I1 (current source) is not supported"),
        (".subckt A x\nL1 x 0 1n\n.ends", "line 2", "L1 (inductor) is not supported"),
        (".include models.sp\n.subckt A x\n.ends", "line 1", ".include models.sp: file not found"),
        (".subckt A x\n.lib cmos.lib tt\n.ends", "line 2", ".lib inside .subckt A is not supported"),
        (".subckt A x\n.subckt B y\n.ends\n.ends", "line 2", ".subckt inside .subckt A (line 1)"),
        ("\n.subckt A x\nM1 x x 0 0 nch W=1u L=1u\n", "line 2", ".subckt A has no .ends"),
        (".ends", "line 1", ".ends without .subckt"),
        (".subckt A x\n.ends B", "line 2", ".ends B closes .subckt A (line 1)"),
        (".subckt A x x\n.ends", "line 1", "port x appears twice in .subckt A"),
        (".subckt A x\n.ends\n.subckt a y\n.ends", "line 3", "subcircuit a is defined twice (first at line 1)"),
        (".subckt A x\n.tran 1n 1u\n.ends", "line 2", ".tran is not allowed inside .subckt A"),
        (".param 1u", "line 1", ".param needs name=value pairs only"),
        (".param a={b}\n.param b=1\n.subckt A x\n.ends", "line 1", "a: unknown parameter 'b'"),
        (".control\nop\n.subckt A x\n.ends", "line 1", ".control has no .endc"),
        (".model\n.subckt A x\n.ends", "line 1", ".model needs a name and a type"),
        (".model nch pmos\n.subckt A x\n.ends", "line 1", "model nch is pmos here but nmos in the tech file"),
    ],
)
def test_structure_errors(text, place, message):
    err = error(text)
    assert err.startswith(f"cell.sp: {place}: ") and message in err, err


@pytest.mark.parametrize(
    "text, place, message",
    [
        (INV + ".subckt T a\nX1 a y INV\n.ends", "line 6", "X1: INV has 4 port(s) (a y vdd vss), 2 node(s) given"),
        (".subckt T a\nX1 a FOO\n.ends", "line 2", "X1: no subcircuit named FOO in this file"),
        (INV + ".subckt T a y v g\nX1 a y v g INV wq=1u\n.ends", "line 6",
         "X1: INV has no parameter wq (it has: wn, wp)"),
        (".subckt A p\nXB p B\n.ends\n.subckt B p\nXA p A\n.ends", "line 5", "XB/XA: recursive instantiation a → b → a"),
        (".subckt S\nX1 S\n.ends", "line 2", "X1: recursive instantiation s → s"),
        (".subckt T a\nX1\n.ends", "line 2", "X1 names no subcircuit"),
    ],
)
def test_hierarchy_errors(text, place, message):
    subckt = "A" if "XA p A" in text else None
    err = error(text, subckt=subckt)
    assert err == f"cell.sp: {place}: {message}", err


def test_choosing_the_top():
    two = ".subckt A x\n.ends\n.subckt B y\n.ends\n"
    assert error(two) == "cell.sp: several top-level subcircuits: A, B; name the one to read"
    assert parse(two, subckt="b").cell == "B"  # SPICE syntax: names are case-insensitive
    assert error(two, subckt="C") == "cell.sp: no subcircuit named C (the file defines: A, B)"
    assert error("* nothing\n") == "cell.sp: no .subckt in the file: define the cell as a .subckt"
    cyc = ".subckt A p\nXB p B\n.ends\n.subckt B p\nXA p A\n.ends\n"
    assert error(cyc) == "cell.sp: every subcircuit is instantiated by another (A, B); name the cell"


def test_file_errors(tmp_path):
    missing = tmp_path / "none.sp"
    with pytest.raises(InputError) as info:
        read_schematic(missing, TECH)
    assert str(info.value) == f"{missing}: file not found"
    good = tmp_path / "inv.sp"
    good.write_bytes(INV.encode() + b"* caf\xe9 in latin-1\n")
    before = good.read_bytes()
    c = read_schematic(good, TECH)
    assert c.source == str(good) and len(c.devices) == 2
    assert good.read_bytes() == before  # inputs are never written


# ------------------------------------------------- capacitance by hand ----

HAND = """* precharge pmos, two-device nmos stack, wire estimate on X
.subckt HAND VDD VSS CLK A B X
MP X CLK VDD VDD pch W=0.6u L=0.18u AD=0.3p PD=2.2u
MA X A n1 VSS nch W=1u L=0.18u
MB n1 B VSS VSS nch W=1u L=0.2u
C1 X 0 1f
.ends
"""


def test_capacitance_by_hand():
    """Hand calculation with TECH (nmos cj 1.0, cjsw 0.2, cjswg 0.3, cox 8, cgo 0.25;
    pmos cj 1.2, cjsw 0.25, cjswg 0.35, cox 8, cgo 0.2; prelayout 0.5 / 0.25 µm).
    Formulas: C = cj·A + cjsw·P_field + cjswg·P_gate (SPICE area–perimeter junction
    model, gate edge split as in BSIM3), cox·W·L gate, cgo·W overlap per side.

    Geometry:
      MP drain X : given AD 0.3, PD 2.2 -> gate edge 0.6, field 2.2 - 0.6 = 1.6
      MP source VDD : estimated, contacted 0.5: area 0.6·0.5 = 0.3, PS 2·0.6 + 2·0.5 = 2.2
      MA drain X : estimated, contacted: area 1·0.5 = 0.5, field 1 + 2·0.5 = 2.0, gate 1
      n1 : internal stack node (two nmos channel terminals, not a port, not a gate):
           one strip W × uncontacted = 1 × 0.25 shared by MA and MB, so each terminal
           carries half of it: AS(MA) = AD(MB) = 1·0.25/2 = 0.125 and
           PS(MA) = PD(MB) = W + 0.25 = 1.25 (own gate edge 1, field 0.25).
           Sum: area 2·0.125 = 0.25 (= the strip 1 × 0.25), field 2·0.25 = 0.5 (the strip's
           two ends), gate 2·1 = 2 (its two gate edges)
    X:
      junction_area      = 1.2·0.3 + 1.0·0.5  = 0.36 + 0.5  = 0.86
      junction_sidewall  = 0.25·1.6 + 0.2·2.0 = 0.4 + 0.4   = 0.80
      junction_gate_edge = 0.35·0.6 + 0.3·1.0 = 0.21 + 0.3  = 0.51
      overlap            = 0.2·0.6 + 0.25·1.0 = 0.12 + 0.25 = 0.37
      wire 1.0 (C1), gate 0                  -> total 3.54
    n1: area 1.0·0.25 = 0.25, sidewall 0.2·0.5 = 0.1, gate edge 0.3·2 = 0.6,
        overlap 2·0.25 = 0.5 -> 0.25 + 0.1 + 0.6 + 0.5 = 1.45
    A : gate 8·1·0.18 = 1.44, overlap 2·0.25·1 = 0.5
    B : gate 8·1·0.2 = 1.6, overlap 0.5
    CLK: gate 8·0.6·0.18 = 0.864, overlap 2·0.2·0.6 = 0.24
    VSS: MB source, contacted: area 0.5, field 2.0, gate 1 -> 0.5 + 0.4 + 0.3, overlap 0.25
    """
    c = parse(HAND)
    expect = {
        "X": dict(junction_area=0.86, junction_sidewall=0.80, junction_gate_edge=0.51, wire=1.0, gate=0.0, overlap=0.37),
        "n1": dict(junction_area=0.25, junction_sidewall=0.1, junction_gate_edge=0.6, wire=0.0, gate=0.0, overlap=0.5),
        "A": dict(junction_area=0.0, junction_sidewall=0.0, junction_gate_edge=0.0, wire=0.0, gate=1.44, overlap=0.5),
        "B": dict(junction_area=0.0, junction_sidewall=0.0, junction_gate_edge=0.0, wire=0.0, gate=1.6, overlap=0.5),
        "CLK": dict(junction_area=0.0, junction_sidewall=0.0, junction_gate_edge=0.0, wire=0.0, gate=0.864, overlap=0.24),
        "VSS": dict(junction_area=0.5, junction_sidewall=0.4, junction_gate_edge=0.3, wire=0.0, gate=0.0, overlap=0.25),
    }
    for net, parts in expect.items():
        assert c.nets[net].cap.as_dict() == pytest.approx(parts, abs=1e-12), net
    assert c.nets["X"].cap_ff == pytest.approx(3.54)
    assert c.nets["n1"].cap_ff == pytest.approx(1.45)
    mp = c.device("MP")
    assert (mp.ad_um2, mp.pd_um, mp.as_um2, mp.ps_um) == pytest.approx((0.3, 2.2, 0.3, 2.2))
    # hand: MA drain X contacted 1·0.5 = 0.5, 2·1 + 2·0.5 = 3.0; source n1 half strip 0.125, 1.25
    ma = c.device("MA")
    assert (ma.ad_um2, ma.pd_um, ma.as_um2, ma.ps_um) == pytest.approx((0.5, 3.0, 0.125, 1.25))
    mb = c.device("MB")
    assert (mb.ad_um2, mb.pd_um, mb.as_um2, mb.ps_um) == pytest.approx((0.125, 1.25, 0.5, 3.0))
    j = c.nets["n1"].junctions["nmos"]
    assert (j.area_um2, j.field_perimeter_um, j.gate_perimeter_um) == pytest.approx((0.25, 0.5, 2.0))
    assert set(c.nets["X"].junctions) == {"nmos", "pmos"}


def test_stack_node_rule_is_counted_before_the_nf_split():
    """Our convention: the internal-node test counts M lines, so a stack of two NF=2
    devices still has an uncontacted middle node, and its estimate is made on the whole
    device width and then split: with NF=k each finger gets 1/k of the terminal's AD and
    PD (the totals, as BSIM4 reads them), so fingering does not change the node.

    Hand, W = 1 per device, uncontacted 0.25, contacted 0.5:
      n1 (MA, MB both NF=2): each terminal AD = 1·0.25/2 = 0.125, PD = 1 + 0.25 = 1.25;
         per finger (W 0.5) AD 0.0625, PD 0.625 -> gate edge 0.5, field 0.125.
         Four finger terminals: area 4·0.0625 = 0.25, field 4·0.125 = 0.5, gate 4·0.5 = 2.0,
         the same strip 1 × 0.25 (two ends 0.25, two gate edges 1) as
      n3 (MF, MG unfingered): 2·0.125 = 0.25, field 2·0.25 = 0.5, gate 2·1 = 2.0.
      n2 is also a gate (of ME), so it is contacted: area 1·0.5 + 1·0.5 = 1.0."""
    c = parse(cell("MA X A n1 VSS nch W=1u L=0.18u NF=2\nMB n1 B VSS VSS nch W=1u L=0.18u NF=2\n"
                   "MF X A n3 VSS nch W=1u L=0.18u\nMG n3 B VSS VSS nch W=1u L=0.18u\n"
                   "MC X A n2 VSS nch W=1u L=0.18u\nMD n2 B VSS VSS nch W=1u L=0.18u\n"
                   "ME VSS n2 VSS VSS nch W=1u L=0.18u AD=0 AS=0 PD=0 PS=0"))
    j = c.nets["n1"].junctions["nmos"]
    assert (j.area_um2, j.field_perimeter_um, j.gate_perimeter_um) == pytest.approx((0.25, 0.5, 2.0))
    assert c.nets["n1"].cap.as_dict() == pytest.approx(c.nets["n3"].cap.as_dict())
    for finger in ("MA.1", "MA.2"):
        d = c.device(finger)
        # hand: W 1/2 = 0.5; source n1 0.125/2, 1.25/2; drain X contacted 0.5/2, 3.0/2
        assert (d.w_um, d.as_um2, d.ps_um, d.ad_um2, d.pd_um) == pytest.approx((0.5, 0.0625, 0.625, 0.25, 1.5))
    assert (c.device("MB.2").ad_um2, c.device("MB.2").pd_um) == pytest.approx((0.0625, 0.625))
    assert c.nets["n2"].junctions["nmos"].area_um2 == pytest.approx(1.0)
    # AD=0 PD=0 (a diffusion counted elsewhere): no junction at all, as level 1 sees it
    assert c.device("ME").pd_um == 0


@pytest.mark.ngspice
def test_junction_and_wire_capacitance_agree_with_ngspice():
    """ngspice (reference) reads the same netlist text (params, braces, suffixes,
    M=2, C lines, a nested instance) and measures each signal net's zero-bias
    capacitance by AC analysis with every node at 0 V DC: it must equal the
    reader's junction + wire parts.  Level 1 has one sidewall coefficient for
    the whole PD and no gate capacitance without tox (ngspice level-1 behaviour, checked by hand;
    notes), so the tech used here has cjswg = cjsw and no overlap."""
    mos = {t: dataclasses.replace(p, cjswg=p.cjsw, cgo=0.0) for t, p in TECH.mos.items()}
    tech = dataclasses.replace(TECH, mos=mos)
    netlist = (
        ".param wn=1u cx=1.5f\n"
        ".subckt INVX a y vdd vss\n"
        "MP y a vdd vdd pch W=1.2u L=0.18u AD=0.6p AS=0.6p PD=3.2u PS=3.2u\n"
        "MN y a vss vss nch W=0.6u L=0.18u AD=0.3p AS=0.3p PD=2.2u PS=2.2u\n"
        ".ends\n"
        ".subckt DUT VDD VSS CLK A B X OUT\n"
        "MP1 X CLK VDD VDD pch W=0.6u L=0.18u AD=0.288p AS=0.288p PD={2*0.6u+2*0.48u} PS=2.16um\n"
        "MA X A n1 VSS nch W={wn} L=0.18u AD=0.48p AS=2.6e-13 PD=2.96u PS=2.52u M=2\n"
        "MB n1 B VSS VSS nch W='wn' L=0.18u AD=0.26p AS=0.48p PD=2.52u PS=2.96u\n"
        "XI X OUT VDD VSS INVX\n"
        "C1 X 0 {cx}\nC2 n1 X 0.5f\n"
        ".ends\n"
    )
    c = parse_schematic(netlist, "dut.sp", tech)
    ports = ["VDD", "VSS", "CLK", "A", "B", "X", "OUT"]
    measure = {"X": "t_X", "n1": "x1.n1", "OUT": "t_OUT"}
    nodes = [f"t_{p}" for p in ports] + ["x1.n1"]
    lines = ["* zero-bias AC capacitance of the schematic", netlist, *model_cards(tech),
             "X1 " + " ".join(f"t_{p}" for p in ports) + " DUT"]
    lines += [f"vs{i} {n} 0 dc 0 ac 0" for i, n in enumerate(nodes)]
    lines.append(".control")
    for name, node in measure.items():
        src = f"vs{nodes.index(node)}"
        lines += [f"alter @{src}[acmag] = 1", "ac lin 1 1e6 1e6",
                  f"let c_{name} = -imag(i({src}))/(2*pi*1e6)", f"print c_{name}", f"alter @{src}[acmag] = 0"]
    lines += [".endc", ".end", ""]
    got = run_deck("\n".join(lines))
    for name in measure:
        net = c.nets[name]
        # C2 joins X and n1; the other end is held at 0 V while one is driven, so each
        # side sees the whole 0.5 fF, which is how the reader counts it.
        assert net.cap.junction + net.cap.wire == pytest.approx(got[f"c_{name.lower()}"] * 1e15, rel=0.01), name
    # hand, for n1: 2·(1.0·0.26 + 0.2·2.52) [MA, M=2] + 1.0·0.26 + 0.2·2.52 [MB] + 0.5 wire
    assert c.nets["n1"].cap.junction + c.nets["n1"].cap.wire == pytest.approx(
        3 * (0.26 + 0.2 * 2.52) + 0.5)
    assert math.isclose(c.nets["X"].cap.wire, 2.0)


# ------------------------------------------------------ bundled samples ----

SAMPLES = __import__("pathlib").Path(__file__).resolve().parents[3] / "sample_layouts"


def test_sample_dyn_nand3_schematic():
    """sample_layouts/DYN_NAND3.sp with the dsk18 tech.  Hand calculation with the
    dsk18 numbers (nmos cj 0.95, cjsw = cjswg 0.22, pmos cj 1.10, cjsw = cjswg 0.28,
    cox 8.5, cgo 0.25; prelayout 0.48 / 0.26 µm):
      X  pmos drains MPRE (AD .288, PD 2.16, W .6) + MKEEP (.144, 1.56, .3):
           area .432·1.10 = .4752, field (1.56 + 1.26)·.28 = .7896, gate .9·.28 = .252
         nmos drain MA (AD .48, PD 2.96, W 1): .48·.95 = .456, 1.96·.22 = .4312, 1·.22 = .22
         gate of the inverter: 8.5·.18·(.6 + 1.2) = 2.754
         overlap .25·(.6 + .3 + 1) + 2·.25·(.6 + 1.2) = .475 + .9 = 1.375, wire 1.3 (CWX)
         total .9312 + 1.2208 + .472 + 2.754 + 1.375 + 1.3 = 8.053
      n1 (MA source, MB drain, both estimated as an internal stack node: one strip
         W × .26 shared, each terminal AD = W·.26/2, PD = W + .26):
         area 2·(1·.26/2) = .26 -> .95·.26 = .247,
         field 2·.26 = .52 -> .22·.52 = .1144, gate 2·1 = 2 -> .44,
         overlap .25·(1 + 1) = .5 -> .247 + .1144 + .44 + .5 = 1.3014
         (the drawn n1 piece of the layout: 1.0 × .26, perimeter 2.52 = 2.0 gate + .52
         field, sample_layouts/README.md, gives the same 1.3014)
      n2 (MB source, MC drain, W 1 both): the same as n1 -> 1.3014
      n3 (MC source W 1, MFOOT drain W 1.2): area 1·.26/2 + 1.2·.26/2 = .13 + .156 = .286
         -> .2717, field .26 + .26 = .52 -> .1144, gate 1 + 1.2 = 2.2 -> .484,
         overlap .25·2.2 = .55 -> .2717 + .1144 + .484 + .55 = 1.4201
    """
    from extract.techfile import load_tech

    tech = load_tech(SAMPLES / "dsk18.toml")
    c = read_schematic(SAMPLES / "DYN_NAND3.sp", tech)
    assert c.cell == "DYN_NAND3"
    assert sorted(d.name for d in c.devices) == ["MA", "MB", "MC", "MFOOT", "MINVN", "MINVP", "MKEEP", "MPRE"]
    assert [n for n in c.nets if c.nets[n].labelled] == ["A", "B", "C", "CLK", "OUT", "VDD", "VSS", "X"]
    assert c.device("MKEEP").l_um == 0.36 and c.device("MFOOT").w_um == 1.2
    assert c.nets["X"].cap.junction_area == pytest.approx(0.9312)
    assert c.nets["X"].cap_ff == pytest.approx(8.053)
    assert c.nets["n1"].cap.junction_area == pytest.approx(0.247)
    assert c.nets["n1"].cap_ff == pytest.approx(1.3014)
    assert c.nets["n2"].cap_ff == pytest.approx(1.3014)
    assert c.nets["n3"].cap.junction_area == pytest.approx(0.2717)
    assert c.nets["n3"].cap_ff == pytest.approx(1.4201)
    # DYN_NAND3_LONG.sp gives no AD/AS/PD/PS at all; the contacted estimates (W·0.48,
    # 2W + 0.96) are the very values DYN_NAND3.sp writes on X, so X comes out the same.
    long = read_schematic(SAMPLES / "DYN_NAND3_LONG.sp", tech)
    assert long.nets["X"].cap.as_dict() == pytest.approx(c.nets["X"].cap.as_dict())
    assert long.device("MA").w_um == 1.0 and long.device("MKEEP").l_um == 0.36


@pytest.mark.parametrize("sep", [" / INV", " /INV"])
def test_cdl_slash_before_the_subcircuit_name(sep):
    # CDL syntax (the SkyWater sky130_fd_sc_hd macro_sparecell.cdl writes
    # `XI2 LO LO VGND VNB VPB VPWR nd2right / sky130_fd_sc_hd__nand2_2`):
    # the slash separates the nodes from the subcircuit name; it is no node
    c = parse(INV + f".subckt TOP A Y VDD VSS\nXI1 A Y VDD VSS{sep}\n.ends\n")
    assert [d.name for d in c.devices] == ["XI1/MN", "XI1/MP"]
    assert c.device("XI1/MN").gate == "A" and c.device("XI1/MN").drain == "Y"
    # a slash inside a node name stays part of the name (SPICE syntax)
    c = parse(INV + ".subckt TOP A Y VDD VSS\nX1 A u/y VDD VSS INV\n.ends\n", subckt="TOP")
    assert "X1/MN" in [d.name for d in c.devices] and "u/y" in c.nets
