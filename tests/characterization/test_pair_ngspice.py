"""Cross-coupled pair at transistor level: ngspice BSIM4 (level 54) against our models.

Conditions: NMOS (source/body VSS) and PMOS (source/body VDD), W = L = 10 um each, NMOS gate on
the PMOS drain (y) and PMOS gate on the NMOS drain (x); model cards written from the same
parameters as tests/physics/test_mos_ngspice.py (TOXE = TOXP = 2 nm, NDEP = NSUB = 1e17 cm^-3,
NGATE = 1e20 cm^-3, VFB = our work-function flat band, overlaps/junctions/gate tunnelling off,
capMod = 2, quasi-static, 27 degC). The operating point comes from ``.op``; the pair's rail-to-rail
capacitance from an AC analysis at 1 MHz (omega R_on C ~ 1e-5: the low-frequency limit).
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest

from celllab.physics import cross_coupled
from celllab.physics import mos_cv as m
from celllab.physics import oxide as o

pytestmark = pytest.mark.skipif(shutil.which("ngspice") is None,
                                reason="ngspice binary not on PATH (Debian package ngspice)")

T = 300.15
DOPING = 1e17 * 1e6
NGATE = 1e20 * 1e6
T_OX = 2e-9
W = L = 10e-6
FREQ = 1e6


def _card(name: str, polarity: str, vfb: float) -> str:
    return (f".model {name} {polarity} level=54 version=4.8 capmod=2\n"
            f"+ toxe={T_OX:g} toxp={T_OX:g} toxm={T_OX:g} dtox=0 epsrox=3.9 epsrsub=11.7 epsrgate=11.7\n"
            f"+ ndep=1e17 nsub=1e17 ngate=1e20 vfb={vfb:.6f}\n"
            "+ cgso=0 cgdo=0 cgbo=0 cgsl=0 cgdl=0 cf=0 dlc=0 dwc=0 lint=0 wint=0 cjs=0 cjd=0 cjsws=0\n"
            "+ cjswd=0 cjswgs=0 cjswgd=0 k3=0 lpe0=0 dvt0=0 dvt0w=0 igcmod=0 igbmod=0 rgatemod=0\n"
            "+ trnqsmod=0 acnqsmod=0 tnom=27\n")


@pytest.mark.parametrize("vdd", [1.2, 1.5])
def test_pair_operating_point_and_capacitance_match_bsim4(tmp_path: Path, vdd: float) -> None:
    # Source: ngspice BSIM4 .op and AC of the same pair; nodes within 10 mV, capacitance within 5 %
    vfb_n = float(m.flatband_voltage("n+poly", DOPING, "p", T))
    vfb_p = float(m.flatband_voltage("p+poly", DOPING, "n", T))
    netlist = f"""cross-coupled decap pair
vdd vdd 0 dc {vdd} ac 1
mn x y 0 0 nch w={W:g} l={L:g}
mp y x vdd vdd pch w={W:g} l={L:g}
{_card("nch", "nmos", vfb_n)}{_card("pch", "pmos", -vfb_p)}.options temp=27
.nodeset v(x)=0 v(y)={vdd}
.control
op
print v(x) v(y)
ac lin 1 {FREQ:g} {FREQ:g}
let cpair = abs(imag(i(vdd)))/(2*pi*{FREQ:g})
print cpair
quit 0
.endc
.end
"""
    (tmp_path / "pair.cir").write_text(netlist)
    run = subprocess.run(["ngspice", "-b", "pair.cir"], capture_output=True, text=True, cwd=tmp_path,
                         timeout=60, check=False)
    out = run.stdout
    vx = float(re.search(r"^v\(x\)\s*=\s*(\S+)", out, re.M).group(1))  # type: ignore[union-attr]
    vy = float(re.search(r"^v\(y\)\s*=\s*(\S+)", out, re.M).group(1))  # type: ignore[union-attr]
    c_spice = float(re.search(r"^cpair\s*=\s*(\S+)", out, re.M).group(1))  # type: ignore[union-attr]

    cox = float(o.oxide_capacitance_per_area(3.9, T_OX))
    vt_n = float(m.threshold_voltage(vfb_n, cox, DOPING, "p", T))
    vt_p = float(m.threshold_voltage(vfb_p, cox, DOPING, "n", T))
    dev_n = cross_coupled.SquareLawDevice(beta=400e-4 * cox, v_threshold=abs(vt_n))
    dev_p = cross_coupled.SquareLawDevice(beta=150e-4 * cox, v_threshold=abs(vt_p))
    op = cross_coupled.operating_point(vdd, dev_n, dev_p)  # gate tunnelling off, as in the cards
    assert float(op.v_x) == pytest.approx(vx, abs=0.010)
    assert float(op.v_y) == pytest.approx(vy, abs=0.010)

    common = dict(cox=cox, body_doping=DOPING, temperature=T, gate_doping=NGATE, centroid=True)
    c_n = m.mos_capacitance_per_area(float(op.v_y), vfb=vfb_n, body_type="p", **common)
    c_p = m.mos_capacitance_per_area(float(op.v_x) - vdd, vfb=vfb_p, body_type="n", **common)
    c_ours = float((c_n + c_p) * W * L)
    assert 0.5 * 2 * cox * W * L < c_spice < 1.1 * 2 * cox * W * L
    assert c_ours == pytest.approx(c_spice, rel=0.05), (c_ours, c_spice, vx, vy)
