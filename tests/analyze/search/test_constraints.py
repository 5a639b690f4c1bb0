"""Input constraints (analyze.search.constraints): file reading, errors, blocks.

The meaning of one_hot / complement / fixed is the definition in the
constraints file format (hand-enumerated option lists below).
"""

from __future__ import annotations

import pytest

from analyze.search.constraints import (
    check_constraints_apply,
    load_constraints,
    parse_constraints,
    stage_blocks,
)
from analyze.stages.stage import Stage
from extract.errors import InputError


def _stage(inputs, node="X"):
    return Stage(node, "n", "CLK", "VDD", "VSS", (), (), None, None, tuple(inputs), ())


def _write(tmp_path, text):
    p = tmp_path / "c.toml"
    p.write_text(text)
    return str(p)


def test_load_good_file(tmp_path):
    path = _write(tmp_path, 'one_hot = [["S0", "S1", "S2"]]\ncomplement = [["A", "A_N"]]\n'
                            "fixed = { EN = 1 }\n")
    c = load_constraints(path)
    assert c.one_hot == (("S0", "S1", "S2"),)
    assert c.complement == (("A", "A_N"),)
    assert c.fixed == (("EN", 1),)
    assert c.path == path


@pytest.mark.parametrize(
    "text, place, words",
    [
        ('one_hot = [["S0", 3]]\n', "one_hot[0][1]", "net name"),
        ('one_hot = "S0"\n', "one_hot", "array"),
        ('one_hot = [["S0", "S0"]]\n', "one_hot[0]", "more than once"),
        ("one_hot = [[]]\n", "one_hot[0]", "at least one"),
        ('complement = [["A", "B", "C"]]\n', "complement[0]", "exactly 2"),
        ("fixed = { EN = 2 }\n", "fixed.EN", "0 or 1"),
        ("fixed = { EN = true }\n", "fixed.EN", "0 or 1"),
        ('fixed = ["EN"]\n', "fixed", "table"),
        ('onehot = [["A", "B"]]\n', "onehot", "unknown key"),
        ("one_hot = [[\n", "line", "not valid TOML"),
    ],
)
def test_bad_files_name_the_place(tmp_path, text, place, words):
    path = _write(tmp_path, text)
    with pytest.raises(InputError) as err:
        load_constraints(path)
    line = err.value.line()
    assert line.startswith(path + ": ")
    assert place in line and words in line
    assert "\n" not in line


def test_missing_and_binary_files(tmp_path):
    # Source: README "Hostile and broken inputs" — a missing file is "file not found" for every input.
    with pytest.raises(InputError, match="file not found"):
        load_constraints(str(tmp_path / "nope.toml"))
    p = tmp_path / "b.toml"
    p.write_bytes(b"\xff\xfe\x00")
    with pytest.raises(InputError, match="UTF-8"):
        load_constraints(str(p))


def test_constraint_on_unknown_net_is_an_error():
    c = parse_constraints({"one_hot": [["S0", "S9"]]}, "c.toml")
    with pytest.raises(InputError) as err:
        check_constraints_apply(c, [_stage(["S0", "S1"]), _stage(["A"], "Y")], "c.toml")
    assert err.value.line() == "c.toml: one_hot[0][1]: net 'S9' is not an input of any stage"
    # A net that is an input of some other stage is fine.
    check_constraints_apply(parse_constraints({"fixed": {"A": 0}}), [_stage(["S0"]), _stage(["A"], "Y")],
                            "c.toml")
    check_constraints_apply(None, [_stage(["S0"])], "c.toml")


def test_contradiction_is_an_error():
    c = parse_constraints({"complement": [["A", "B"]], "fixed": {"A": 1, "B": 1}}, "c.toml")
    with pytest.raises(InputError, match="allow no input pattern for the stage at 'X'"):
        check_constraints_apply(c, [_stage(["A", "B"])], "c.toml")


def test_blocks_by_hand():
    c = parse_constraints({"one_hot": [["S0", "S1", "S2"]], "complement": [["A", "A_N"]],
                           "fixed": {"EN": 0}})
    blocks = {b.nets: b.options for b in stage_blocks(c, ["A", "A_N", "EN", "S0", "S1", "S2", "Z"])}
    assert blocks == {
        ("A", "A_N"): ((0, 1), (1, 0)),
        ("EN",): ((0,),),
        ("S0", "S1", "S2"): ((0, 0, 1), (0, 1, 0), (1, 0, 0)),
        ("Z",): ((0,), (1,)),
    }


def test_blocks_restricted_to_the_stage():
    # One-hot group with a member outside this stage: at most one here.
    # Complement with one side outside: no constraint.  Fixed outside: none.
    c = parse_constraints({"one_hot": [["S0", "S1", "S2"]], "complement": [["A", "Q"]],
                           "fixed": {"EN": 1}})
    blocks = {b.nets: b.options for b in stage_blocks(c, ["A", "S0", "S1"])}
    assert blocks == {("A",): ((0,), (1,)), ("S0", "S1"): ((0, 0), (0, 1), (1, 0))}


def test_overlapping_constraints_merge():
    # S0 in a one-hot group and complementary to T: S0 = 1 forces S1 = 0, T = 0.
    c = parse_constraints({"one_hot": [["S0", "S1"]], "complement": [["S0", "T"]]})
    (block,) = stage_blocks(c, ["S0", "S1", "T"])
    assert block.nets == ("S0", "S1", "T")
    assert block.options == ((0, 1, 1), (1, 0, 0))


def test_names_match_without_case_when_unique():
    c = parse_constraints({"fixed": {"en": 1}})
    assert {b.nets: b.options for b in stage_blocks(c, ["EN"])} == {("EN",): ((1,),)}
    check_constraints_apply(c, [_stage(["EN"])], "c.toml")
