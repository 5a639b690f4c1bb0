"""The ngspice runner: values and tables read back, failures reported as
one-line input errors.  Sources: hand calculations written in each test;
ngspice 39 (Debian) is the simulator run."""

import os

import numpy as np
import pytest
from ngspice_run import require_ngspice

from analyze.simulator import ngspice
from analyze.simulator.ngspice import deck, parse_values, run_deck, runs_started
from extract.errors import InputError


@pytest.mark.ngspice
def test_several_analyses_in_one_run_values_and_tables():
    require_ngspice()
    # Hand calculation: a 1k/3k divider from 2 V gives 1.5 V at b; a DC
    # sweep of V1 over 0, 1, 2 V gives 0, 0.75, 1.5 V.  The RC low-pass
    # 1 kOhm / 1 nF has its -3 dB corner at 1/(2 pi 1e-6 s) = 159.155 kHz,
    # where |H| = 1/sqrt(2).
    before = runs_started()
    text = deck("divider", None, ["V1 a 0 dc 2 ac 1", "R1 a b 1k", "R2 b 0 3k", "R3 a c 1k", "C1 c 0 1n"],
                ["op", "print v(b)", "dc V1 0 2 1", "wrdata sweep.txt v(b)",
                 "ac lin 1 159.154943k 159.154943k", "let h = mag(v(c))", "print h",
                 "let both = vector(3) * 2", "print line both"])
    result = run_deck(text, "divider check", expect=["v(b)", "h"], tables=["sweep.txt"])
    assert runs_started() == before + 1
    assert result.scalar("v(b)") == pytest.approx(1.5, rel=1e-9)
    assert result.scalar("h") == pytest.approx(2 ** -0.5, rel=1e-6)
    table = result.tables["sweep.txt"]
    assert result.columns["sweep.txt"] == ["v-sweep", "v(b)"]
    assert np.allclose(table, [[0, 0], [1, 0.75], [2, 1.5]])
    assert np.array_equal(result.values["both"], [0.0, 2.0, 4.0])


def test_parse_values_scalars_and_lines():
    # Hand-written ngspice output: the later of two lines with one name wins.
    out = "Doing analysis at TEMP = 27.0 and TNOM = 27.0\nx = 1.5e-03\ny = ( 1 2\n\t3 )\nx = 2\n"
    values = parse_values(out)
    assert values["x"].tolist() == [2.0]
    assert values["y"].tolist() == [1.0, 2.0, 3.0]
    assert "doing" not in values and "temp" not in values


@pytest.mark.ngspice
def test_a_deck_that_does_not_converge_names_its_purpose_and_the_message():
    require_ngspice()
    # Hand reasoning: two ideal sources of 1 V and 2 V across one node
    # have no solution.
    text = deck("conflict", None, ["V1 a 0 1", "V2 a 0 2"], ["op", "print v(a)"])
    with pytest.raises(InputError) as err:
        run_deck(text, "operating point of the clash", expect=["v(a)"])
    line = err.value.line()
    assert line.startswith("operating point of the clash: ngspice simulation did not converge")
    assert "timestep too small" in line.lower()
    assert "\n" not in line


@pytest.mark.ngspice
def test_missing_include_and_missing_value_are_errors():
    require_ngspice()
    with pytest.raises(InputError, match="Could not find include file"):
        run_deck(deck("x", "/no/such/models.spice", ["V1 a 0 1", "R1 a 0 1k"], ["op", "print v(a)"]),
                 "include check", expect=["v(a)"])
    with pytest.raises(InputError, match="missing nothere"):
        run_deck(deck("x", None, ["V1 a 0 1", "R1 a 0 1k"], ["op", "print v(a)"]), "value check",
                 expect=["nothere"])


def test_ngspice_missing_from_path(monkeypatch, tmp_path):
    monkeypatch.setenv("PATH", str(tmp_path))
    with pytest.raises(InputError) as err:
        run_deck(deck("x", None, ["V1 a 0 1"], ["op"]), "anything")
    assert err.value.line() == "ngspice: not found on PATH; install it (Debian: apt-get install ngspice)"
    assert os.environ["PATH"] == str(tmp_path)
    assert ngspice.NGSPICE == "ngspice"


@pytest.mark.ngspice
@pytest.mark.parametrize("given", [None, "2"])
def test_openmp_threads_one_unless_set(monkeypatch, given):
    """ngspice itself reports the thread count it was started with (its
    ``shell`` command echoes the environment): one unless the caller set
    OMP_NUM_THREADS, then the caller's."""
    require_ngspice()
    if given is None:
        monkeypatch.delenv("OMP_NUM_THREADS", raising=False)
    else:
        monkeypatch.setenv("OMP_NUM_THREADS", given)
    text = deck("threads", None, ["V1 a 0 1", "R1 a 0 1k"], ["shell echo threads=$OMP_NUM_THREADS", "op",
                                                             "print v(a)"])
    result = run_deck(text, "thread check", expect=["v(a)"])
    assert f"threads={given or '1'}" in result.log
