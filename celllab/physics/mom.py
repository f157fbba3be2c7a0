"""Metal-finger (MOM) capacitors over a range of metal layers (SI: m, F, F/m, F/m^2, ohm).

Cross-section model (per layer, per gap between two adjacent interdigitated fingers, per unit
finger length), a sum of decoupled field regions:

* sidewall: the gap between the facing finger sides is a parallel plate, eps t / s;
* each horizontal face region (above and below the layer): the half-space or half-slab next to
  the finger faces, solved exactly by conformal mapping with the gap mouths taken as flux-free
  (thin-strip assumption). The facing environment is

  - ``open``: homogeneous half-space (top of the stack, bottom of the stack);
  - ``same``: the next layer's fingers above/below carry the same polarity (symmetry plane
    at mid-ILD is flux-free);
  - ``opposite``: vertically alternating polarity (mid-ILD plane at the mean potential), which
    adds the inter-layer plate coupling eps w / h with its fringe.

Cutting the field with flux-free sheets can only lower the capacitance, so the model is a lower
bound of the 2-D field solution of the infinite periodic array; it lies 2-8 % below a
finite-element solution for 0.3 <= w/s <= 2, 0.2 <= t/s <= 3, 0.2 <= h/p <= 5 (see the tests).
The open-face term equals the interior-electrode result for interdigital electrodes,
eps K(k)/K(k'), k = sin(pi w / (2 (w + s))) (derived here; same as R. Igreja, C. J. Dias,
Sens. Actuators A 112:291, 2004 — from memory). Finger tips, bus bars and the outermost
fingers' outward fringe are neglected (error ~ (w + s)/finger_length and 1/finger_count).
Adjacent layers are assumed to have aligned fingers of equal width and spacing; otherwise each
layer uses its own width and spacing for its half of the ILD (approximation).

Leakage through inter-metal dielectrics is negligible at core voltages and is not modelled.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike
from scipy.constants import epsilon_0
from scipy.special import ellipj, ellipk, ellipkm1

from celllab.physics.constants import FloatArray

Facing = Literal["open", "same", "opposite"]
FACINGS: tuple[Facing, ...] = ("open", "same", "opposite")

_THETA_TERMS = 6
"""Terms of the theta series; the nome is <= exp(-pi) so 6 terms reach machine precision."""
_MIN_ILD_OVER_PITCH = 0.005
"""Thinner inter-layer gaps are clipped here (elliptic modulus underflow); plate-dominated."""


def _moduli_from_ratio(ratio: FloatArray) -> FloatArray:
    """Modulus k with K'(k)/K(k) = ratio >= 1, from the Jacobi theta series of the nome."""
    q = np.exp(-np.pi * ratio)
    n = np.arange(0, _THETA_TERMS)[:, None]
    theta2 = 2.0 * np.exp(-np.pi * ratio / 4.0) * np.sum(q ** (n * (n + 1)), axis=0)
    theta3 = 1.0 + 2.0 * np.sum(q ** (n[1:] ** 2), axis=0)
    return (theta2 / theta3) ** 2


def _log_cosh_minus_one(x: FloatArray) -> FloatArray:
    """log(cosh x - 1) = log 2 + 2 log sinh(x/2) for x > 0, without overflow."""
    t = 0.5 * x
    log_sinh = np.where(t > 20.0, t - np.log(2.0), np.log(np.sinh(np.minimum(t, 20.0))))
    return np.log(2.0) + 2.0 * log_sinh


def _kk_ratio(y: FloatArray, s_sq: FloatArray) -> FloatArray:
    """K'(kappa)/(2 K(kappa)) of the standard two-electrode half-plane.

    ``y`` = 1/X and ``s_sq`` = 1 - 1/X for the cross-ratio X of the four boundary points, both
    passed as products of point differences so neither loses precision (y + s_sq = 1). Then
    kappa = y/(1 + s)^2 and kappa'^2 = 4 s/(1 + s)^2. For kappa < 1e-8, K' = ln(4/kappa).
    """
    s = np.sqrt(np.clip(s_sq, 0.0, 1.0))
    kappa = np.clip(y, 0.0, 1.0) / (1.0 + s) ** 2
    m = kappa * kappa
    m1 = 4.0 * s / (1.0 + s) ** 2  # kappa'^2
    tiny = kappa < 1e-8
    big_k = np.where(m <= 0.5, ellipk(np.minimum(m, 0.5)), ellipkm1(np.minimum(m1, 0.5)))
    big_kp = np.where(m1 <= 0.5, ellipk(np.minimum(m1, 0.5)), ellipkm1(np.clip(m, 1e-300, 0.5)))
    big_kp = np.where(tiny, np.log(4.0) - np.log(np.where(tiny, kappa, 1.0)), big_kp)
    return big_kp / (2.0 * big_k)


def _flat_cell_points(ratio: FloatArray, y_arg: FloatArray) -> tuple[FloatArray, ...]:
    """Theta-series values for a flat cell (ratio = K~'/K~ >= 1 of the rotated rectangle).

    Returns (k, D, 1 - D, D - k) with D = dn(v, k') = -1/sn(-K + i v, k) evaluated through
    the imaginary transformation dn(v, k') = dc(i v, k) = theta2(0) theta3(iy) /
    (theta3(0) theta2(iy)), y = pi v / (2K) (Whittaker & Watson ch. 21-22). Theta2 terms are
    scaled by q^(-1/4) and combined in the exponent, so nothing overflows.
    """
    n = np.arange(0, _THETA_TERMS)[:, None]
    pr = np.pi * ratio
    q = np.exp(-pr)
    t2 = np.sum(q ** (n * (n + 1)), axis=0)
    t3 = 1.0 + 2.0 * np.sum(q ** (n[1:] ** 2), axis=0)
    d2 = np.sum(np.exp(-pr * n * (n + 1) + _log_cosh_minus_one((2 * n + 1) * y_arg)), axis=0)
    d3 = 2.0 * np.sum(np.exp(-pr * n[1:] ** 2 + _log_cosh_minus_one(2 * n[1:] * y_arg)), axis=0)
    a2, a3 = t2 + d2, t3 + d3
    k = 4.0 * np.exp(-0.5 * pr) * (t2 / t3) ** 2
    dn = t2 * a3 / (t3 * a2)
    one_minus_dn = (t3 * d2 - t2 * d3) / (t3 * a2)
    dn_minus_k = (t2 / t3) * (a3 / a2 - 4.0 * np.exp(-0.5 * pr) * t2 / t3)
    return k, dn, one_minus_dn, dn_minus_k


def face_cell_capacitance(
    width: ArrayLike,
    spacing: ArrayLike,
    facing: Facing,
    ild_height: ArrayLike | None = None,
) -> FloatArray:
    """Capacitance / eps of one face cell: half a finger face to the gap-centre plane.

    Parameters
    ----------
    width, spacing : array_like   finger width w and spacing s, m, > 0
    facing : {"open", "same", "opposite"}   environment of the face (module docstring)
    ild_height : array_like       dielectric height h to the next layer, m (not for "open")

    Returns
    -------
    ndarray   C_cell / eps (unitless); a gap's face region contributes eps C_cell / 2 per unit
              length

    Notes
    -----
    The cell is the rectangle [0, p/2] x [0, h/2] (p = w + s): finger face on [0, w/2] of the
    bottom side, flux-free rest of the bottom and the finger-centre side, the gap-centre side
    at the mid potential, the mid-ILD side flux-free ("same") or at the mid potential
    ("opposite"). The rectangle is mapped onto the upper half-plane with Jacobi sn (tall cells,
    h >= p/2) or, rotated by 90 degrees, with sn(-K + i v) = -1/dn(v, k') (flat cells); the
    four-point problem then follows from the cross-ratio: C/eps = K'(kappa)/(2 K(kappa)).
    "open" is the limit h -> inf: K(k)/K(k'), k = sin(pi w / 2p). Inter-layer gaps thinner
    than 0.005 p are clipped there (plate limit, modulus underflow).
    """
    if facing not in FACINGS:
        raise ValueError(f"facing = {facing!r} -> allowed: {', '.join(FACINGS)}")
    w = np.asarray(width, dtype=float)
    sp = np.asarray(spacing, dtype=float)
    p = w + sp
    if facing == "open":
        m = np.sin(0.5 * np.pi * w / p) ** 2
        m1 = np.cos(0.5 * np.pi * w / p) ** 2
        return ellipk(m) / ellipk(m1)
    if ild_height is None:
        raise ValueError(f"facing = {facing!r} needs ild_height")
    h = np.maximum(np.asarray(ild_height, dtype=float), _MIN_ILD_OVER_PITCH * p)
    w, sp, p, h = np.broadcast_arrays(w, sp, p, h)
    a, b = 0.5 * p, 0.5 * h
    out = np.empty(w.shape)
    tall = 2.0 * b >= a
    opposite = facing == "opposite"
    if np.any(tall):
        # points (-1, t_w, 1, 1/k) ["same"] or (-1, t_w, 1, -1/k) ["opposite"], t_w = sn(u)
        k = _moduli_from_ratio(2.0 * b[tall] / a[tall])
        u = (0.5 * w[tall] - 0.5 * a[tall]) * 2.0 * ellipk(k * k) / a[tall]
        sn, cn, _, _ = ellipj(u, k * k)
        one_minus = np.where(sn > 0, cn * cn / (1.0 + sn), 1.0 - sn)
        one_plus = np.where(sn < 0, cn * cn / (1.0 - sn), 1.0 + sn)
        if opposite:
            den = 2.0 * (1.0 + k * sn)
            y, s_sq = one_minus * (1.0 - k) / den, one_plus * (1.0 + k) / den
        else:
            den = 2.0 * (1.0 - k * sn)
            y, s_sq = one_minus * (1.0 + k) / den, one_plus * (1.0 - k) / den
        out[tall] = _kk_ratio(y, s_sq)
    flat = ~tall
    if np.any(flat):
        # cell rotated by 90 degrees; points scaled by k: (-1, -k/D, -k, k) ["same"] or
        # (-1, -k/D, -k, 1) ["opposite"], D = dn(v, k'), v = s K~ / b -> y = pi s / h
        k, dn, one_minus_dn, dn_minus_k = _flat_cell_points(
            2.0 * a[flat] / b[flat], np.pi * sp[flat] / h[flat]
        )
        if opposite:
            den = (1.0 - k) * (dn + k)
            y, s_sq = 2.0 * k * one_minus_dn / den, dn_minus_k * (1.0 + k) / den
        else:
            den = (1.0 - k) * (1.0 + dn)
            y, s_sq = one_minus_dn * (1.0 + k) / den, 2.0 * dn_minus_k / den
        out[flat] = _kk_ratio(y, s_sq)
    return out


def sidewall_capacitance(eps_r: ArrayLike, thickness: ArrayLike, spacing: ArrayLike) -> FloatArray:
    """Parallel-plate coupling between facing finger sidewalls, eps0 eps_r t / s, F/m."""
    return (
        epsilon_0
        * np.asarray(eps_r, dtype=float)
        * np.asarray(thickness, dtype=float)
        / np.asarray(spacing, dtype=float)
    )


def sakurai_tamaru(
    width: ArrayLike, height: ArrayLike, thickness: ArrayLike, spacing: ArrayLike, eps_r: ArrayLike
) -> tuple[FloatArray, FloatArray]:
    """Line-to-plane and line-to-neighbour capacitance per length of lines over a ground plane.

    Parameters
    ----------
    width, height, thickness, spacing : array_like   W, H (to the plane), T, S, m
    eps_r : array_like                               dielectric relative permittivity

    Returns
    -------
    (C1, C21) : ndarrays   F/m; a line between two neighbours has C1 + 2 C21 in total

    Notes
    -----
    T. Sakurai, K. Tamaru, IEEE TED ED-30(2):183-185, 1983:
    C1/eps = 1.15 (W/H) + 2.80 (T/H)^0.222,
    C21/eps = [0.03 (W/H) + 0.83 (T/H) - 0.07 (T/H)^0.222] (S/H)^-1.34.
    Quoted accuracy about 10 % for 0.3 < W/H, T/H < 10, 0.5 < S/H < 10.
    """
    eps = epsilon_0 * np.asarray(eps_r, dtype=float)
    h = np.asarray(height, dtype=float)
    wh = np.asarray(width, dtype=float) / h
    th = np.asarray(thickness, dtype=float) / h
    sh = np.asarray(spacing, dtype=float) / h
    c1 = eps * (1.15 * wh + 2.80 * th**0.222)
    c21 = eps * (0.03 * wh + 0.83 * th - 0.07 * th**0.222) * sh**-1.34
    return c1, c21


@dataclass(frozen=True)
class MomLayer:
    """One metal layer of an interdigitated finger capacitor (arrays over variants).

    Attributes
    ----------
    thickness : metal thickness t, m
    finger_width : w, m
    spacing : finger-to-finger gap s, m
    finger_length : l, m
    finger_count : fingers in this layer (both polarities), >= 2
    eps_r : relative permittivity between the fingers (intra-layer dielectric)
    ild_height : dielectric height from the top of this layer to the next layer, m
    eps_r_ild : relative permittivity of that inter-layer dielectric (and of the half-space
        above the top layer)
    sheet_resistance : finger sheet resistance, ohm/sq
    via_resistance : series resistance from this layer's two combs to the cell terminals
        (both polarities together), ohm
    """

    thickness: ArrayLike
    finger_width: ArrayLike
    spacing: ArrayLike
    finger_length: ArrayLike
    finger_count: ArrayLike
    eps_r: ArrayLike
    ild_height: ArrayLike
    eps_r_ild: ArrayLike
    sheet_resistance: ArrayLike = 0.0
    via_resistance: ArrayLike = 0.0


@dataclass(frozen=True)
class MomResult:
    """MOM capacitor figures; per-layer arrays have shape (n_layer, n_variant).

    Attributes
    ----------
    capacitance : total C, F
    layer_capacitance : C of each layer's share (its sidewalls and its halves of the ILDs), F
    gap_capacitance_per_length : per layer, per gap, per unit finger length, F/m
    area : footprint (widest layer x its finger length), m^2
    density : capacitance / area, F/m^2
    layer_density : layer_capacitance / area, F/m^2
    layer_line_resistance : per layer, total R of the equivalent one-end-fed RC line whose
        low-frequency ESR is R/3 (fingers of both combs, distributed), ohm
    layer_via_resistance : per layer, ohm
    finger_resistance : equivalent line R of the whole stack (ESR_lf = R/3 + via part), ohm
    via_resistance : equivalent lumped via resistance of the whole stack, ohm
    esr_lf : low-frequency ESR of the stack, ohm
    """

    capacitance: FloatArray
    layer_capacitance: FloatArray
    gap_capacitance_per_length: FloatArray
    area: FloatArray
    density: FloatArray
    layer_density: FloatArray
    layer_line_resistance: FloatArray
    layer_via_resistance: FloatArray
    finger_resistance: FloatArray
    via_resistance: FloatArray
    esr_lf: FloatArray


def interdigitated_line_resistance(
    sheet_resistance: ArrayLike,
    finger_length: ArrayLike,
    finger_width: ArrayLike,
    finger_count: ArrayLike,
) -> FloatArray:
    """Total R of the RC line equivalent to one layer's interdigitated fingers, ohm.

    Notes
    -----
    Finger resistance R_f = R_sq l / w. At low frequency each gap carries the same current and
    each finger is fed from its bus at one end with the current leaving uniformly along it, so
    a finger dissipates like a one-end-fed RC line (R/3, Larsson 1997). With N fingers (two
    outer ones loaded by one gap, N - 2 inner ones by two) the layer ESR is
    (R_f / 3)(4N - 6)/(N - 1)^2 -> the returned line R is R_f (4N - 6)/(N - 1)^2.
    """
    n = np.asarray(finger_count, dtype=float)
    r_f = (
        np.asarray(sheet_resistance, dtype=float)
        * np.asarray(finger_length, dtype=float)
        / np.asarray(finger_width, dtype=float)
    )
    return r_f * (4.0 * n - 6.0) / (n - 1.0) ** 2


def mom_capacitor(
    layers: Sequence[MomLayer],
    alternate_polarity: ArrayLike = False,
    eps_r_below: ArrayLike | None = None,
) -> MomResult:
    """Capacitance, density and ESR of an interdigitated MOM capacitor over a layer range.

    Parameters
    ----------
    layers : sequence of MomLayer   bottom to top, contiguous metal levels
    alternate_polarity : array_like of bool   True: a finger's polarity flips from layer to
        layer (woven / checkerboard); False: same polarity stacked (vertical walls)
    eps_r_below : array_like, optional   dielectric under the bottom layer (default: the bottom
        layer's eps_r)

    Returns
    -------
    MomResult

    Notes
    -----
    C_gap,i = eps_i t_i / s_i + sum over the two faces of eps_face C_cell / 2 (see
    `face_cell_capacitance`); C_i = (N_i - 1) l_i C_gap,i; C = sum_i C_i. Layers are parallel
    branches R_i = R_line,i/3 + R_via,i with C_i, so the stack's low-frequency ESR is
    sum_i R_i C_i^2 / C^2 (parallel RC branches).
    """
    if not layers:
        raise ValueError("layers is empty -> at least one MomLayer needed")
    alt = np.asarray(alternate_polarity, dtype=bool)
    n_layer = len(layers)
    gaps = []
    for i, lay in enumerate(layers):
        w, sp = lay.finger_width, lay.spacing
        c = sidewall_capacitance(lay.eps_r, lay.thickness, sp)
        # top face: next layer above (half of this layer's ILD) or open
        if i < n_layer - 1:
            same = face_cell_capacitance(w, sp, "same", lay.ild_height)
            opp = face_cell_capacitance(w, sp, "opposite", lay.ild_height)
            top = np.where(alt, opp, same)
        else:
            top = face_cell_capacitance(w, sp, "open")
        c = c + 0.5 * epsilon_0 * np.asarray(lay.eps_r_ild, dtype=float) * top
        # bottom face: previous layer below (half of its ILD) or open
        if i > 0:
            below = layers[i - 1]
            same = face_cell_capacitance(w, sp, "same", below.ild_height)
            opp = face_cell_capacitance(w, sp, "opposite", below.ild_height)
            bottom = np.where(alt, opp, same)
            eps_bottom = below.eps_r_ild
        else:
            bottom = face_cell_capacitance(w, sp, "open")
            eps_bottom = lay.eps_r if eps_r_below is None else eps_r_below
        c = c + 0.5 * epsilon_0 * np.asarray(eps_bottom, dtype=float) * bottom
        gaps.append(c)
    count_list = [np.asarray(la.finger_count, dtype=float) for la in layers]
    if any(np.any(n < 2) for n in count_list):
        raise ValueError("finger_count must be >= 2 in every layer")
    per_layer = {
        "gap": gaps,
        "count": count_list,
        "length": [np.asarray(la.finger_length, dtype=float) for la in layers],
        "width": [
            n * np.asarray(la.finger_width, dtype=float)
            + (n - 1.0) * np.asarray(la.spacing, dtype=float)
            for n, la in zip(count_list, layers)
        ],
        "r_line": [
            interdigitated_line_resistance(
                la.sheet_resistance, la.finger_length, la.finger_width, la.finger_count
            )
            for la in layers
        ],
        "r_via": [np.asarray(la.via_resistance, dtype=float) for la in layers],
    }
    shape = np.broadcast_shapes(*(np.shape(v) for vals in per_layer.values() for v in vals))
    stacked = {
        key: np.stack([np.broadcast_to(v, shape) for v in vals]) for key, vals in per_layer.items()
    }
    gap, length = stacked["gap"], stacked["length"]
    layer_c = (stacked["count"] - 1.0) * length * gap
    area = np.max(stacked["width"] * length, axis=0)
    total = np.sum(layer_c, axis=0)
    r_line, r_via = stacked["r_line"], stacked["r_via"]
    weight = (layer_c / total) ** 2
    finger_r = np.sum(r_line * weight, axis=0)
    via_r = np.sum(r_via * weight, axis=0)
    return MomResult(
        capacitance=total,
        layer_capacitance=layer_c,
        gap_capacitance_per_length=gap,
        area=area,
        density=total / area,
        layer_density=layer_c / area,
        layer_line_resistance=r_line,
        layer_via_resistance=r_via,
        finger_resistance=finger_r,
        via_resistance=via_r,
        esr_lf=finger_r / 3.0 + via_r,
    )
