"""``dynshare characterize`` on bad input: one ``error:`` line, exit 2, no
output file.  The library is a small hand-written one (nothing here needs
a foundry's models); the expected messages are the contract in the
README ("Characterising a foundry process")."""

from pathlib import Path

import pytest

import sample_layouts
from analyze.cli.main import main


def _tech(tmp_path, library="lib.spice", nmos="nch_dev", corners='["tt"]', mos=False):
    (tmp_path / "lib.spice").write_text(""".lib tt
.model nch_dev nmos level=1 vto=0.4 kp=200u
.model pch_dev pmos level=1 vto=-0.4 kp=80u
.endl tt
""")
    src = Path(sample_layouts.__file__).parent / "dsk18.toml"
    kept, skip = [], False
    for line in src.read_text().splitlines():
        if line.startswith("["):
            skip = line.startswith("[mos") and not mos
        if not skip:
            kept.append(line)
    tech = tmp_path / "in.toml"
    tech.write_text("\n".join(kept) + f'\n[models]\nlibrary = "{library}"\ncorners = {corners}\n'
                    f'nmos = "{nmos}"\npmos = "pch_dev"\nlength = 1\n')
    return tech


def _run(capsys, *argv):
    code = main(["characterize", *argv])
    err = capsys.readouterr().err
    return code, err


@pytest.fixture(autouse=True)
def _cache(tmp_path, monkeypatch):
    monkeypatch.setenv("DYNSHARE_CACHE", str(tmp_path / "cache"))


def _one_error_line(err):
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    assert "Traceback" not in err
    return lines[0]


def test_missing_library(tmp_path, capsys):
    tech = _tech(tmp_path, library="nowhere.spice")
    code, err = _run(capsys, "--tech", str(tech), "--out", str(tmp_path / "o.toml"))
    assert code == 2
    assert _one_error_line(err) == f"error: {tmp_path / 'nowhere.spice'}: model library not found"
    assert not (tmp_path / "o.toml").exists()


def test_unknown_corner_writes_nothing(tmp_path, capsys):
    tech = _tech(tmp_path)
    code, err = _run(capsys, "--tech", str(tech), "--out", str(tmp_path / "o.toml"), "--corner", "tt",
                     "--corner", "xx")
    assert code == 2
    line = _one_error_line(err)
    assert line.endswith("lib.spice: no section 'xx' (.lib xx); sections: tt")
    assert not list(tmp_path.glob("o*.toml"))


def test_device_not_in_library(tmp_path, capsys):
    tech = _tech(tmp_path, nmos="sky130_fd_pr__nfet_01v8")
    code, err = _run(capsys, "--tech", str(tech), "--out", str(tmp_path / "o.toml"))
    assert code == 2
    assert _one_error_line(err).endswith("lib.spice: device 'sky130_fd_pr__nfet_01v8' is not defined in section 'tt'")


def test_ngspice_missing(tmp_path, capsys, monkeypatch):
    tech = _tech(tmp_path)
    monkeypatch.setenv("PATH", str(tmp_path))  # a PATH without ngspice
    code, err = _run(capsys, "--tech", str(tech), "--out", str(tmp_path / "o.toml"))
    assert code == 2
    assert _one_error_line(err) == "error: ngspice: not found on PATH; install it (Debian: apt-get install ngspice)"
    assert not (tmp_path / "o.toml").exists()


def test_output_over_the_input_is_refused(tmp_path, capsys):
    tech = _tech(tmp_path)
    before = tech.read_text()
    code, err = _run(capsys, "--tech", str(tech), "--out", str(tech))
    assert code == 2
    assert "would overwrite an input file" in _one_error_line(err)
    assert tech.read_text() == before


def test_no_models_table(tmp_path, capsys):
    src = Path(sample_layouts.__file__).parent / "dsk18.toml"
    code, err = _run(capsys, "--tech", str(src), "--out", str(tmp_path / "o.toml"))
    assert code == 2
    assert _one_error_line(err).endswith("dsk18.toml: models: characize needs a [models] table naming the model "
                                         "library and the nmos/pmos devices".replace("characize", "characterize"))


def test_mos_tables_still_required_by_check(tmp_path, capsys):
    # The contract: [mos.*] may be left out for characterize only.
    tech = _tech(tmp_path)
    gds = Path(sample_layouts.__file__).parent / "dsk18_cells.gds"
    assert main(["check", str(gds), "--tech", str(tech), "--cell", "DYN_NAND3"]) == 2
    assert _one_error_line(capsys.readouterr().err).endswith("in.toml: mos: required table is missing")


@pytest.mark.ngspice
def test_models_without_junctions_are_an_input_error(tmp_path, capsys):
    from ngspice_run import require_ngspice

    require_ngspice()
    # Hand reasoning: a level-1 card without CJ/CJSW has no drain-body
    # capacitance, so there is nothing to fit.
    tech = _tech(tmp_path)
    code, err = _run(capsys, "--tech", str(tech), "--out", str(tmp_path / "o.toml"))
    assert code == 2
    assert _one_error_line(err).endswith("nch_dev (tt): the models give no junction capacitance for the drain "
                                         "geometry AD/PD; cannot fit cj, cjsw, cjswg")
    assert not (tmp_path / "o.toml").exists()


def test_temperature_out_of_range_writes_nothing(tmp_path, capsys):
    tech = _tech(tmp_path)
    code, err = _run(capsys, "--tech", str(tech), "--out", str(tmp_path / "o.toml"), "--temp", "-300")
    assert code == 2
    assert _one_error_line(err) == (f"error: {tech}: --temp: must be a temperature in °C above -273.15 and "
                                    "at most 500, got -300")
    assert not (tmp_path / "o.toml").exists()
