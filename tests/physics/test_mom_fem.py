"""MOM capacitance per unit length against a 2-D electrostatic finite-element solution.

Reference: scikit-fem, quadratic triangles on a graded tensor mesh of one period cell of the
infinite interdigitated array (x from one finger centre to the next, mirror symmetry there:
natural boundary), homogeneous dielectric, free space 3 pitches above and below the metal
(field decays as exp(-pi y / p), < 1e-4 there). Laplace's equation with Dirichlet values on
every node inside or on a conductor (1 on one polarity, 0 on the other); the capacitance per
unit length is the field energy, C = eps integral |grad u|^2 for a unit potential difference.
The cell holds one gap per layer, i.e. the model's sum of C_gap over the layers.
Tolerance: 10 %; the model is a lower bound (flux-free cuts), so it must not exceed the FEM
value by more than its discretization error (0.5 %).
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy.constants import epsilon_0
from skfem import Basis, BilinearForm, ElementTriP2, MeshTri, asm, condense, solve
from skfem.helpers import dot, grad

from celllab.physics import mom

UNIT = 0.1e-6  # geometry below in units of 100 nm
EPS_R = 3.0


def _graded_axis(
    breaks: list[float], h_min: float, h_max: float, growth: float = 1.25
) -> np.ndarray:
    """Grid points refined geometrically towards every break point (conductor edges)."""
    points = [breaks[0]]
    for a, b in itertools.pairwise(breaks):
        half = 0.5 * (b - a)
        steps, x, h = [], 0.0, h_min
        while x + h < half:
            x += h
            steps.append(x)
            h = min(h * growth, h_max)
        s = np.array(steps)
        points.extend(np.concatenate([a + s, [a + half], b - s[::-1], [b]]))
    return np.unique(np.round(np.array(points), 12))


def _fem_capacitance_over_eps(
    width: float, spacing: float, layers: list[tuple[float, float, int]], h_min_frac: float = 1 / 20
) -> float:
    """C / eps per unit length of one period cell; layers = (y_bottom, thickness, left polarity)."""
    p = width + spacing
    ys = sorted({y for yb, t, _ in layers for y in (yb, yb + t)})
    h_min = min([width, spacing] + [t for _, t, _ in layers]) * h_min_frac
    x = _graded_axis([0.0, width / 2, p - width / 2, p], h_min, p / 8)
    y = _graded_axis([ys[0] - 3 * p, *ys, ys[-1] + 3 * p], h_min, p / 4)
    mesh = MeshTri.init_tensor(x, y)
    basis = Basis(mesh, ElementTriP2())
    stiffness = asm(BilinearForm(lambda u, v, _: dot(grad(u), grad(v))), basis)
    dx, dy = basis.doflocs
    tol = 1e-9 * h_min
    u = np.zeros(basis.N)
    fixed = np.zeros(basis.N, dtype=bool)
    for yb, t, left_polarity in layers:
        in_layer = (dy >= yb - tol) & (dy <= yb + t + tol)
        left = in_layer & (dx <= width / 2 + tol)
        right = in_layer & (dx >= p - width / 2 - tol)
        u[left], u[right] = left_polarity, 1 - left_polarity
        fixed |= left | right
    u = solve(*condense(stiffness, np.zeros(basis.N), x=u, D=np.flatnonzero(fixed)))
    return float(u @ (stiffness @ u))


def _model_over_eps(
    width: float, spacing: float, thickness: float, n_layers: int, ild: float, alternate: bool
) -> float:
    layer = mom.MomLayer(
        thickness=thickness * UNIT,
        finger_width=width * UNIT,
        spacing=spacing * UNIT,
        finger_length=1.0,
        finger_count=2,
        eps_r=EPS_R,
        ild_height=ild * UNIT,
        eps_r_ild=EPS_R,
    )
    res = mom.mom_capacitor([layer] * n_layers, alternate_polarity=alternate)
    return float(res.capacitance) / (epsilon_0 * EPS_R)


@pytest.mark.parametrize(
    ("width", "spacing", "thickness"),
    [(1.0, 1.0, 2.0), (0.5, 1.0, 2.0), (2.0, 1.0, 1.0), (1.0, 2.0, 0.5), (1.0, 0.5, 1.0)],
)
def test_single_layer_against_fem(width: float, spacing: float, thickness: float) -> None:
    # Source: scikit-fem 2-D Laplace solution of the same cross-section (module docstring); 10 %
    fem = _fem_capacitance_over_eps(width, spacing, [(-thickness / 2, thickness, 1)])
    model = _model_over_eps(width, spacing, thickness, 1, 1.0, False)
    assert model == pytest.approx(fem, rel=0.10, abs=0)
    assert model <= fem * 1.005


@pytest.mark.parametrize(
    ("width", "spacing", "thickness", "ild", "alternate"),
    [
        (1.0, 1.0, 1.0, 1.0, True),
        (1.0, 1.0, 1.0, 1.0, False),
        (1.0, 0.5, 2.0, 0.5, True),
        (2.0, 1.0, 1.0, 2.0, False),
        (1.0, 1.0, 1.0, 0.3, True),
    ],
)
def test_two_layers_against_fem(
    width: float, spacing: float, thickness: float, ild: float, alternate: bool
) -> None:
    # Source: scikit-fem 2-D Laplace solution of the same two-layer cross-section; 10 %
    lower = (-ild / 2 - thickness, thickness, 1)
    upper = (ild / 2, thickness, 0 if alternate else 1)
    fem = _fem_capacitance_over_eps(width, spacing, [lower, upper])
    model = _model_over_eps(width, spacing, thickness, 2, ild, alternate)
    assert model == pytest.approx(fem, rel=0.10, abs=0)
    assert model <= fem * 1.005


def test_fem_reference_is_mesh_converged() -> None:
    # Source: the reference itself: halving the smallest cell changes C by < 0.5 %
    coarse = _fem_capacitance_over_eps(1.0, 1.0, [(-0.5, 1.0, 1)], 1 / 20)
    fine = _fem_capacitance_over_eps(1.0, 1.0, [(-0.5, 1.0, 1)], 1 / 40)
    assert coarse == pytest.approx(fine, rel=5e-3, abs=0)
