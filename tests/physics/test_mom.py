"""MOM capacitor model: published formulas, limits of the conformal-map terms, ESR bookkeeping."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.constants import epsilon_0, femto, micro

from celllab.physics import mom


def test_sakurai_tamaru_check_values() -> None:
    # Source: docs/references.md [61] (Sakurai & Tamaru 1983): W = H = T = S gives
    # C1/eps = 3.95, C21/eps = 0.79 (rel 1e-9); in SiO2 C1 = 136.40 aF/um, C21 = 27.28 aF/um
    # (rel 1e-4)
    c1, c21 = mom.sakurai_tamaru(1e-6, 1e-6, 1e-6, 1e-6, 1.0)
    assert c1 / epsilon_0 == pytest.approx(3.95, rel=1e-9, abs=0)
    assert c21 / epsilon_0 == pytest.approx(0.79, rel=1e-9, abs=0)
    c1, c21 = mom.sakurai_tamaru(1e-6, 1e-6, 1e-6, 1e-6, 3.9)
    assert c1 * micro / 1e-18 == pytest.approx(136.40, rel=1e-4, abs=0)
    assert c21 * micro / 1e-18 == pytest.approx(27.28, rel=1e-4, abs=0)


def test_sidewall_density_check_value() -> None:
    # Source: docs/references.md [60] [DF]: sidewall-only density eps t / (s p), eps_r 3.0,
    # t 0.2 um, w = s = 0.1 um -> 0.2656 fF/um^2 per layer; rel 1e-3 (quoted to 4 digits)
    per_length = mom.sidewall_capacitance(3.0, 0.2e-6, 0.1e-6)
    density = per_length / 0.2e-6
    assert density * 1e-12 / femto == pytest.approx(0.2656, rel=1e-3, abs=0)


def test_open_face_self_dual_point() -> None:
    # Source: K(k)/K(k') = 1 at k = k' = sin(pi/4), i.e. w = s (complete elliptic integrals,
    # Abramowitz & Stegun 17.3); rel 1e-12
    assert float(mom.face_cell_capacitance(1.0, 1.0, "open")) == pytest.approx(
        1.0, rel=1e-12, abs=0
    )


@pytest.mark.parametrize(("w", "s"), [(1.0, 1.0), (0.4, 1.0), (2.5, 1.0)])
def test_slab_faces_tend_to_open_face(w: float, s: float) -> None:
    # Source: a far-away neighbour layer does not matter (limit h -> inf); rel 1e-9
    open_face = mom.face_cell_capacitance(w, s, "open")
    for facing in ("same", "opposite"):
        far = mom.face_cell_capacitance(w, s, facing, 30.0 * (w + s))  # type: ignore[arg-type]
        assert far == pytest.approx(open_face, rel=1e-9, abs=0)


@pytest.mark.parametrize(("w", "s"), [(1.0, 1.0), (0.4, 1.0), (2.5, 1.0)])
def test_thin_slab_limits(w: float, s: float) -> None:
    # Source: parallel-plate limits of the half-slab cell (derived): opposite polarity ->
    # plate eps (w/2)/(h/2) = w/h, same polarity -> gap plate (h/2)/(s/2) = h/s, with a
    # positive fringe correction of order h/w (resp. -h/s); within 6 % at h = 0.02 p
    h = 0.02 * (w + s)
    opp = float(mom.face_cell_capacitance(w, s, "opposite", h)) / (w / h)
    same = float(mom.face_cell_capacitance(w, s, "same", h)) / (h / s)
    assert 1.0 < opp < 1.06
    assert 0.94 < same < 1.0


@pytest.mark.parametrize("facing", ["same", "opposite"])
def test_continuous_across_the_two_mappings(facing: str) -> None:
    # Source: the upright (sn) and rotated (1/dn) mappings describe the same rectangle at
    # h = p/2 (derived); rel 1e-6 for a 1e-7 change of h either side
    below = mom.face_cell_capacitance(1.0, 1.5, facing, 1.25 * (1 - 1e-7))  # type: ignore[arg-type]
    above = mom.face_cell_capacitance(1.0, 1.5, facing, 1.25 * (1 + 1e-7))  # type: ignore[arg-type]
    assert float(below) == pytest.approx(float(above), rel=1e-6, abs=0)


def _layer(**kw: object) -> mom.MomLayer:
    base: dict[str, object] = {
        "thickness": 0.2e-6,
        "finger_width": 0.1e-6,
        "spacing": 0.1e-6,
        "finger_length": 10e-6,
        "finger_count": 20,
        "eps_r": 3.0,
        "ild_height": 0.2e-6,
        "eps_r_ild": 3.0,
        "sheet_resistance": 0.2,
        "via_resistance": 0.0,
    }
    base.update(kw)
    return mom.MomLayer(**base)  # type: ignore[arg-type]


def test_single_layer_bookkeeping() -> None:
    # Source: C = (N - 1) l C_gap, area = (N w + (N - 1) s) l, ESR = (R_f/3)(4N - 6)/(N - 1)^2
    # (derived in mom.py); rel 1e-12
    res = mom.mom_capacitor([_layer()])
    gap = mom.sidewall_capacitance(
        3.0, 0.2e-6, 0.1e-6
    ) + epsilon_0 * 3.0 * mom.face_cell_capacitance(0.1e-6, 0.1e-6, "open")
    assert res.capacitance == pytest.approx(19 * 10e-6 * gap, rel=1e-12, abs=0)
    assert res.area == pytest.approx((20 * 0.1e-6 + 19 * 0.1e-6) * 10e-6, rel=1e-12, abs=0)
    r_f = 0.2 * 10e-6 / 0.1e-6
    assert res.esr_lf == pytest.approx(r_f / 3 * (4 * 20 - 6) / 19**2, rel=1e-12, abs=0)


def test_two_fingers_esr_is_two_one_end_lines() -> None:
    # Source: two fingers fed from opposite ends each dissipate like a one-end RC line, R/3
    # (Larsson 1997): ESR = 2 R_f / 3; rel 1e-12
    res = mom.mom_capacitor([_layer(finger_count=2)])
    assert res.esr_lf == pytest.approx(2 * 20.0 / 3, rel=1e-12, abs=0)


def test_alternating_polarity_adds_plate_coupling() -> None:
    layers = [_layer(), _layer(), _layer()]
    same = mom.mom_capacitor(layers, alternate_polarity=False)
    alt = mom.mom_capacitor(layers, alternate_polarity=True)
    both = mom.mom_capacitor(layers, alternate_polarity=np.array([False, True]))
    assert alt.capacitance > same.capacitance
    np.testing.assert_allclose(both.capacitance, [same.capacitance, alt.capacitance], rtol=1e-12)
    assert both.layer_capacitance.shape == (3, 2)
    # the middle layer has ILD neighbours on both sides, so the largest share
    assert alt.layer_capacitance[1] > alt.layer_capacitance[0]
    np.testing.assert_allclose(alt.layer_capacitance.sum(axis=0), alt.capacitance, rtol=1e-12)


def test_stack_esr_weights_layers_by_capacitance_squared() -> None:
    # Source: parallel series-RC branches: ESR_lf = sum R_i C_i^2 / C^2 (expansion in omega);
    # rel 1e-12
    res = mom.mom_capacitor(
        [_layer(via_resistance=2.0), _layer(sheet_resistance=0.05, via_resistance=1.0)]
    )
    branch = res.layer_line_resistance / 3 + res.layer_via_resistance
    expected = np.sum(branch * res.layer_capacitance**2) / res.capacitance**2
    assert res.esr_lf == pytest.approx(expected, rel=1e-12, abs=0)


def test_too_few_fingers_rejected() -> None:
    with pytest.raises(ValueError, match="finger_count"):
        mom.mom_capacitor([_layer(finger_count=1)])
    with pytest.raises(ValueError, match="facing"):
        mom.face_cell_capacitance(1.0, 1.0, "sideways")  # type: ignore[arg-type]


@given(
    w=st.floats(0.05e-6, 1e-6),
    s=st.floats(0.05e-6, 1e-6),
    h=st.floats(0.02e-6, 2e-6),
    alt=st.booleans(),
)
def test_capacitance_monotone_in_geometry(w: float, s: float, h: float, alt: bool) -> None:
    # common practice, no source: C grows with finger count and length and with metal
    # thickness, falls with spacing and ILD height (alternating polarity)
    def cap(**kw: object) -> float:
        base: dict[str, object] = {"finger_width": w, "spacing": s, "ild_height": h}
        base.update(kw)
        return float(mom.mom_capacitor([_layer(**base), _layer(**base)], alt).capacitance)  # type: ignore[arg-type]

    c0 = cap()
    assert c0 > 0
    assert cap(finger_count=30) > c0
    assert cap(finger_length=20e-6) == pytest.approx(2 * c0, rel=1e-12, abs=0)
    assert cap(thickness=0.3e-6) > c0
    assert cap(spacing=1.1 * s) < c0
    if alt:  # strictly only while the neighbour layer is within reach (h < 2 pitches)
        assert cap(ild_height=1.1 * h) <= c0
        if h < 2 * (w + s):
            assert cap(ild_height=1.1 * h) < c0
