"""Partial and loop inductance of straight conductors: a cell's rail pair, bond wires (SI: m, H).

Partial-inductance method (A. E. Ruehli, "Inductance calculations in a complex integrated
circuit environment," IBM J. Res. Dev. 16(5):470-481, 1972): the loop inductance of a go-and-
return pair is L_loop = L_1 + L_2 - 2 M_12 from the partial self inductances of each conductor
and their partial mutual inductance, all for straight, parallel conductors of equal length l
with uniform (low-frequency) current. Formulas from F. W. Grover, *Inductance Calculations*,
Van Nostrand 1946 (Dover 2004), valid for l much larger than the cross-section.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike
from scipy.constants import mu_0

from celllab.physics.constants import FloatArray

_PREFACTOR = mu_0 / (2.0 * np.pi)
RECTANGLE_GMD_FACTOR = 0.2235
"""Geometric mean distance of a rectangle's area from itself ~ 0.2235 (w + t) (Grover 1946;
exact within 0.5 % for any aspect ratio)."""


def wire_self_inductance(
    length: ArrayLike, radius: ArrayLike, high_frequency: bool = False
) -> FloatArray:
    """Partial self inductance of a straight round wire, H.

    Notes
    -----
    L = (mu0 l / 2 pi) [ln(2 l / r) - 3/4] with uniform current, or - 1 when skin effect
    pushes the current to the surface (E. B. Rosa 1908; Grover 1946). l = 1 mm, r = 12.5 um:
    0.865 nH / 0.815 nH. Valid for l >> r.
    """
    l_w = np.asarray(length, dtype=float)
    r = np.asarray(radius, dtype=float)
    return _PREFACTOR * l_w * (np.log(2.0 * l_w / r) - (1.0 if high_frequency else 0.75))


def filament_mutual_inductance(length: ArrayLike, distance: ArrayLike) -> FloatArray:
    """Mutual inductance of two parallel, aligned filaments of equal length, H.

    Notes
    -----
    M = (mu0 l / 2 pi) [asinh(l/d) - sqrt(1 + d^2/l^2) + d/l] (Grover 1946, eq. for equal
    parallel filaments; Neumann's formula integrated exactly).
    """
    l_w = np.asarray(length, dtype=float)
    d = np.asarray(distance, dtype=float)
    return _PREFACTOR * l_w * (np.arcsinh(l_w / d) - np.sqrt(1.0 + (d / l_w) ** 2) + d / l_w)


def bar_self_inductance(length: ArrayLike, width: ArrayLike, thickness: ArrayLike) -> FloatArray:
    """Partial self inductance of a straight rectangular bar (a rail), H.

    Notes
    -----
    L = (mu0 l / 2 pi) [ln(2 l / (w + t)) + 1/2 + 0.2235 (w + t) / l] (Grover 1946 / Ruehli
    1972, uniform current). It is the filament formula at the rectangle's self geometric mean
    distance 0.2235 (w + t). Valid for l >> w + t.
    """
    l_w = np.asarray(length, dtype=float)
    wt = np.asarray(width, dtype=float) + np.asarray(thickness, dtype=float)
    return _PREFACTOR * l_w * (np.log(2.0 * l_w / wt) + 0.5 + RECTANGLE_GMD_FACTOR * wt / l_w)


def _log_potential_antiderivative(u: FloatArray, v: FloatArray) -> FloatArray:
    """F with d^4 F / du^2 dv^2 = ln sqrt(u^2 + v^2); even in u and v, F(0, v) finite."""
    u, v = np.abs(u), np.abs(v)
    r2 = u * u + v * v
    log_r2 = np.log(np.where(r2 > 0, r2, 1.0))
    atan_1 = np.where(u > 0, u**3 * v * np.arctan(v / np.where(u > 0, u, 1.0)), 0.0)
    atan_2 = np.where(v > 0, u * v**3 * np.arctan(u / np.where(v > 0, v, 1.0)), 0.0)
    return (
        (6.0 * u * u * v * v - u**4 - v**4) * log_r2 / 48.0
        + (atan_1 + atan_2) / 6.0
        - 25.0 / 48.0 * u * u * v * v
    )


def rectangle_gmd(width: ArrayLike, thickness: ArrayLike, offset: ArrayLike = 0.0) -> FloatArray:
    """Geometric mean distance between two equal w x t rectangles side by side, m.

    Parameters
    ----------
    width, thickness : array_like   rectangle sides, m, > 0
    offset : array_like             centre-to-centre distance along the width, m (0: the
                                    rectangle's GMD from itself; otherwise >= width)

    Returns
    -------
    ndarray   GMD, m (self: 0.2235 (w + t) within 0.5 %, Grover 1946)

    Notes
    -----
    ln g = mean of ln r over point pairs (Maxwell's GMD; Grover 1946 ch. 3). The fourfold
    integral equals the second central differences (steps w and t) of a fourth antiderivative
    F(u, v) of ln r, F = (6u^2v^2 - u^4 - v^4) ln(u^2 + v^2)/48 + [u^3 v atan(v/u) +
    u v^3 atan(u/v)]/6 - 25 u^2 v^2/48, divided by w^2 t^2 (derived here; checked against
    direct quadrature in the tests).
    """
    w = np.asarray(width, dtype=float)
    t = np.asarray(thickness, dtype=float)
    d = np.asarray(offset, dtype=float)
    total = np.zeros(np.broadcast_shapes(w.shape, t.shape, d.shape))
    for i, a in ((-1, 1.0), (0, -2.0), (1, 1.0)):
        for j, b in ((-1, 1.0), (0, -2.0), (1, 1.0)):
            total = total + a * b * _log_potential_antiderivative(d + i * w, j * t)
    return np.exp(total / (w * w * t * t))


def bar_mutual_inductance(
    length: ArrayLike, width: ArrayLike, thickness: ArrayLike, separation: ArrayLike
) -> FloatArray:
    """Partial mutual inductance of two parallel equal bars side by side, H.

    Parameters
    ----------
    length : array_like       common length, m
    width, thickness : array_like   cross-section of each bar, m
    separation : array_like   centre-to-centre distance along the width, m (>= width)

    Notes
    -----
    Filament formula at the geometric mean distance of the two cross-sections
    (`rectangle_gmd`; Grover 1946), valid for length >> separation.
    """
    return filament_mutual_inductance(length, rectangle_gmd(width, thickness, separation))


def loop_inductance(
    length: ArrayLike, width: ArrayLike, separation: ArrayLike, thickness: ArrayLike
) -> FloatArray:
    """Loop inductance of a rail pair (VDD and VSS strips side by side, opposite currents), H.

    Parameters
    ----------
    length : array_like       rail length, m
    width : array_like        rail width, m (both rails)
    separation : array_like   centre-to-centre distance of the rails, m (> width)
    thickness : array_like    metal thickness, m

    Returns
    -------
    ndarray   L_loop = 2 (L_self - M), H

    Notes
    -----
    Partial-inductance loop (Ruehli 1972) with `bar_self_inductance` and
    `bar_mutual_inductance` (exact cross-section GMD, so close rails are fine). End connections of the loop are not included (add them for short,
    wide loops); low-frequency (uniform current) values.
    """
    return 2.0 * (
        bar_self_inductance(length, width, thickness)
        - bar_mutual_inductance(length, width, thickness, separation)
    )
