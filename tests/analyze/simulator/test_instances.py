"""Instance lines in SI units and under ``.option scale`` give the device
the geometry dynshare means.  Source: the Shichman-Hodges (SPICE level 1)
saturation current Id = KP/2 * W/L * (Vgs - VTO)^2 (Rabaey, Digital
Integrated Circuits, ch. 3, from memory), evaluated by hand below, and
ngspice 39 running a level-1 model card."""

import pytest
from ngspice_run import require_ngspice

from analyze.simulator.instances import transistor_line
from analyze.simulator.ngspice import deck, run_deck


@pytest.mark.ngspice
@pytest.mark.parametrize("scale", [None, 1e-6])
def test_level1_current_matches_hand_calculation(scale):
    require_ngspice()
    # KP = 100 uA/V^2, W/L = 2 um / 1 um, Vgs - VTO = 1.5 - 0.5 = 1 V,
    # Vds = 2 V (saturation), LAMBDA = 0: Id = 50e-6 * 2 * 1 = 100 uA.
    line = transistor_line("1", ("d", "g", "0", "0"), "nch", "model", scale, 2.0, 1.0, 1.0, 1.0, 4.0, 4.0)
    assert line.startswith("M1 d g 0 0 nch w=")
    options = [".option scale=1e-6"] if scale else []
    text = deck("level 1", None, [".model nch nmos level=1 kp=100u vto=0.5", line, "Vd d 0 2", "Vg g 0 1.5"],
                ["op", "let id = -i(Vd)", "print id"], options=options)
    # (1e-6 relative: ngspice's GMIN of 1e-12 S across 2 V adds 2 pA.)
    assert run_deck(text, "level-1 current", expect=["id"]).scalar("id") == pytest.approx(100e-6, rel=1e-6)


@pytest.mark.ngspice
@pytest.mark.parametrize("scale", [None, 1e-6])
def test_junction_area_and_perimeter_units(scale):
    require_ngspice()
    # Level-1 junction at zero bias: C = CJ*AD + CJSW*PD.  With CJ = 1e-3
    # F/m^2, CJSW = 1e-10 F/m, AD = 2 um^2, PD = 6 um:
    # 2e-12 * 1e-3 + 6e-6 * 1e-10 = 2e-15 + 0.6e-15 = 2.6 fF.  Measured as
    # the AC current into the drain at 1 MHz with the device off (W tiny,
    # no overlap, CGDO = 0), gate/source/body at AC ground.
    line = transistor_line("1", ("d", "0", "0", "0"), "nch", "model", scale, 1.0, 1.0, 2.0, 0.0, 6.0, 0.0)
    options = [".option scale=1e-6"] if scale else []
    model = ".model nch nmos level=1 kp=100u vto=0.5 cj=1e-3 cjsw=1e-10 mj=0.5 mjsw=0.33 pb=0.8"
    text = deck("junction", None, [model, line, "Vd d 0 dc 0 ac 1"],
                ["ac lin 1 1meg 1meg", "let c = abs(imag(i(Vd)))/(2*pi*1e6)", "print c"], options=options)
    assert run_deck(text, "junction units", expect=["c"]).scalar("c") == pytest.approx(2.6e-15, rel=1e-6)
