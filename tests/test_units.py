"""Display units <-> SI: one table, checked against hand-written conversion factors."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.units import UNITS, from_si, to_si, unit_from_name

# Definitions of the SI prefixes and units (BIPM SI Brochure, 9th ed., tables 7 and 8; the
# Julian year of 365.25 days; 0 degC = 273.15 K; ppm = one part in 10^6), written out here
# independently of scipy.
EXPECTED = [
    ("nm", 1.0, 1e-9), ("um", 2.5, 2.5e-6), ("um^2", 4.0, 4e-12), ("fF", 3.0, 3e-15),
    ("fF/um", 1.0, 1e-9), ("fF/um^2", 1.0, 1e-3), ("pH", 7.0, 7e-12), ("GHz", 2.0, 2e9),
    ("MHz", 5.0, 5e6), ("ps", 1.0, 1e-12), ("ms", 3.0, 3e-3), ("nA", 4.0, 4e-9),
    ("MV/cm", 10.0, 1e9), ("A/cm^2", 1.0, 1e4), ("cm^-3", 1e17, 1e23),
    ("cm^2/(V s)", 400.0, 0.04), ("years", 1.0, 365.25 * 86400.0), ("degC", 25.0, 298.15),
    ("nA/nF", 2.0, 2.0), ("ohm", 3.0, 3.0), ("ppm/K", 3900.0, 3.9e-3),
]


@pytest.mark.parametrize(("unit", "shown", "si"), EXPECTED, ids=[e[0] for e in EXPECTED])
def test_conversion_factors(unit: str, shown: float, si: float) -> None:
    # Source: SI Brochure prefix definitions (see EXPECTED); rel 1e-12
    assert to_si(shown, unit) == pytest.approx(si, rel=1e-12)
    assert from_si(si, unit) == pytest.approx(shown, rel=1e-12)


@given(value=st.floats(-1e12, 1e12, allow_nan=False), unit=st.sampled_from(sorted(UNITS)))
def test_round_trip(value: float, unit: str) -> None:
    assert from_si(to_si(value, unit), unit) == pytest.approx(value, rel=1e-12, abs=1e-9)


def test_arrays_and_unknown_units() -> None:
    out = to_si(np.array([1.0, 2.0]), "nm")
    assert isinstance(out, np.ndarray) and out[1] == pytest.approx(2e-9)
    with pytest.raises(ValueError, match="allowed: .*fF"):
        to_si(1.0, "femtofarad")
    assert math.isnan(from_si(math.nan, "GHz"))


@pytest.mark.parametrize(("name", "unit"), [
    ("cap_density_fF_per_um2", "fF/um^2"), ("leakage_nA_per_nF", "nA/nF"), ("leakage_nA", "nA"),
    ("mu0_cm2_per_Vs", "cm^2/(V s)"), ("theta_per_V", "1/V"), ("vth_V", "V"), ("t_ref_C", "degC"),
    ("oxide_field_MV_per_cm", "MV/cm"), ("gate_doping_cm3", "cm^-3"), ("fingers", ""),
    ("metal_sheet_ppm_per_K", "ppm/K"),
])
def test_unit_from_name(name: str, unit: str) -> None:
    assert unit_from_name(name) == unit
