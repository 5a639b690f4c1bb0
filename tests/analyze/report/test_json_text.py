"""The report's JSON text (analyze.report.json_text).

Source of every check: the standard library's ``json.dumps(value,
indent=2, ensure_ascii=False, allow_nan=False)``, the text the reports
have always had; the piecewise encoder must give the same bytes.
"""

from __future__ import annotations

import json
import math

import pytest
from hypothesis import given, settings, strategies as st

from analyze.report.json_report import dump_pieces, dumps
from analyze.report.json_text import Rows, json_pieces
from extract.errors import InputError

_SCALARS = (st.none() | st.booleans() | st.integers(-10**20, 10**20) | st.text(max_size=6)
            | st.floats(allow_nan=False, allow_infinity=False))
_VALUES = st.recursive(_SCALARS, lambda inner: st.lists(inner, max_size=4)
                       | st.dictionaries(st.text(max_size=5), inner, max_size=4), max_leaves=25)


def _reference(report: dict) -> str:
    return json.dumps(report, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


@settings(max_examples=400, deadline=None)
@given(st.dictionaries(st.text(max_size=6), _VALUES, max_size=5))
def test_same_text_as_the_standard_library(report):
    assert "".join(json_pieces(report)) == _reference(report)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.dictionaries(st.text(max_size=4), _VALUES, max_size=4), max_size=5))
def test_rows_written_as_lists(rows):
    made = Rows(lambda: iter(rows), len(rows))
    assert dumps({"tool": "dynshare", "nets": made}) == _reference({"tool": "dynshare", "nets": rows})


def test_keys_that_are_not_strings_and_tuples():
    # json.dumps turns non-string keys into strings and tuples into lists
    report = {"a": {1: "x", 2.5: [1, (2, 3)], None: True}, "b": (1, "é\n\"")}
    assert dumps(report) == _reference(report)


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_non_finite_refused_naming_the_place(bad):
    rows = Rows(lambda: iter([{"v": 1.0}, {"v": bad}]), 2)
    with pytest.raises(InputError, match=r"devices\[1\]\.v: is"):
        "".join(dump_pieces({"devices": rows}))


def test_a_report_failing_while_written_leaves_no_file(tmp_path):
    # Hand reasoning (the promise "outputs whole or not at all"): the JSON
    # is written piece by piece into a temporary file; a non-finite number
    # found on the way fails the commit, and neither the output nor a
    # temporary file is left, while an earlier file at that path is kept.
    from analyze.cli.output import OutputSet

    out = tmp_path / "r.json"
    out.write_text("old\n")
    rows = Rows(lambda: iter([{"v": 1.0}] * 1000 + [{"v": math.nan}]), 1001)
    outputs = OutputSet()
    outputs.add(str(out), dump_pieces({"devices": rows}))
    with pytest.raises(InputError, match=r"devices\[1000\]\.v"):
        outputs.commit()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.json"] and out.read_text() == "old\n"
