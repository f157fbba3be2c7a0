"""The MOS device model over corners: roles, minority-carrier supply, channel resistance."""

from __future__ import annotations

import numpy as np
import pytest

from celllab.characterization.mos import MosGeometry, characterize_mos
from celllab.characterization.params import CornerSet
from celllab.physics import mos_cv, oxide
from celllab.units import to_si

GEO = MosGeometry(*(np.array([[v]]) for v in (1e-6, 2e-6, 1.0, 4.0, 5.0, 2.0, 1.0)))


@pytest.mark.parametrize("role, inversion_side", [("acc_n", -1.0), ("acc_p", 1.0)])
def test_accumulation_cv_goes_into_deep_depletion(lumen130, role: str, inversion_side: float) -> None:
    # Source: docs/references.md [25]: with majority-carrier contacts only, the far side of flat
    # band cannot invert; the quasi-static curve keeps falling (deep depletion) and stays below
    # the high-frequency minimum of [23] once past threshold. Overlap capacitance is removed first.
    corners = CornerSet.from_deck(lumen130, ["typ_25C"])
    res = characterize_mos(corners, np.array(["core"]), np.array([role]), GEO, np.array([[1.2]]))
    bias = res.cv_bias[0, 0]
    intrinsic = (res.cv_cap[0, 0] - res.c_overlap[0, 0]) / GEO.gate_area[0, 0]
    far = inversion_side * bias > 1.5  # past threshold (V_FB ~ +-0.1 V, V_T - V_FB ~ +-1.0 V here)
    assert far.sum() >= 5
    side = np.argsort(inversion_side * bias)
    tail = intrinsic[side][inversion_side * bias[side] > 0.2]
    assert np.all(np.diff(tail) < 0)  # monotonic fall, no inversion upturn
    doping = to_si(lumen130.wells.nwell_doping_cm3 if role == "acc_n" else lumen130.wells.pwell_doping_cm3,
                   "cm^-3")
    c_min = float(mos_cv.hf_min_capacitance(res.cox[0, 0], doping, corners.temperature_K[0]))
    assert np.all(intrinsic[far] < c_min)
    # an inversion device of the same oxide comes back up toward C_ox on its inversion side
    inv = characterize_mos(corners, np.array(["core"]), np.array(["nmos" if role == "acc_p" else "pmos"]), GEO,
                           np.array([[1.2]]))
    inv_intrinsic = (inv.cv_cap[0, 0] - inv.c_overlap[0, 0]) / GEO.gate_area[0, 0]
    cox = float(oxide.oxide_capacitance_per_area(3.9, lumen130.oxides["core"].eot_m))
    assert inv_intrinsic.max() > 0.6 * cox
