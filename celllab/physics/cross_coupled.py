"""Cross-coupled ("ESD-safe") decap pair: DC operating point and equivalent network (SI: V, A,
ohm, F).

Topology (X. Meng, K. Arabi, R. Saleh, Proc. ISQED 2006)::

            VDD ───────────┬──────────────┐
                         MP source/body   │
                 x ──gate┤ MP             │
                         MP drain ── y    │
                                          │
                 y ──gate┤ MN             │
                         MN drain ── x    │
                         MN source/body   │
            VSS ───────────┴──────────────┘

NMOS MN (source/body at VSS) has its gate on node y, the PMOS drain; PMOS MP (source/body at
VDD) has its gate on node x, the NMOS drain. In the operating state both devices are on with
V_DS ~ 0: x ~ VSS, y ~ VDD. The only DC currents are the gate-leakage currents: MN's gate
current flows VDD -> MP channel -> y -> MN gate -> VSS, and MP's flows VDD -> MP gate -> x ->
MN channel -> VSS, so x = V_DS,n(I_g,p) and y = VDD - V_DS,p(I_g,n), solved self-consistently
because each device's overdrive depends on the other node.

Small-signal model: each channel is a through RC line from its source to its drain
(`celllab.physics.circuits.cross_coupled_circuit`): the PMOS channel carries C_n's current from
source to drain and C_p's own displacement current, in phase at low frequency, giving the
low-frequency ESR of `pair_esr_low_frequency_distributed` (7/12 (R_on,n + R_on,p) for equal C).
A lumped "two branches" picture (branch n = R_on,p + ESR_n + C_n in parallel with
branch p = R_on,n + ESR_p + C_p, (R_on,n + R_on,p)/4 for equal C) treats those two currents as if
they flowed in separate resistors and reads about 2.3x low; it is not used.

R_on is the channel resistance of the device at its operating point: V_DS ~ 0 and
V_GS ~ VDD, the terminal voltages of the same device tied as a plain decap, so R_on is that
device's channel resistance from the same mobile-charge and mobility model
(`celllab.characterization.mos`), not a square-law overdrive estimate.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics import circuits
from celllab.physics.constants import FloatArray
from celllab.physics.netlist import Netlist, parallel, solve_impedance

LeakageModel = Callable[[FloatArray], FloatArray]
"""Gate current (A, >= 0) as a function of the gate-to-source/body voltage magnitude (V)."""


@dataclass(frozen=True)
class SquareLawDevice:
    """Long-channel square-law MOSFET in triode (SPICE level 1 with LAMBDA = 0).

    Attributes
    ----------
    beta : mu Cox W/L, A/V^2 (KP W/L), > 0
    v_threshold : threshold voltage magnitude |V_T|, V (positive for NMOS and PMOS)

    Notes
    -----
    I_D = beta [(V_GS - V_T) V_DS - V_DS^2 / 2] for 0 <= V_DS <= V_GS - V_T (Sze & Ng 2007
    ch. 6; H. Shichman, D. A. Hodges, IEEE JSSC 3(3):285, 1968). Source tied to body, so no
    body effect.
    """

    beta: ArrayLike
    v_threshold: ArrayLike

    def on_resistance(self, v_overdrive: ArrayLike) -> FloatArray:
        """Channel resistance at V_DS -> 0: 1 / (beta V_ov), ohm (inf when off)."""
        v = np.asarray(v_overdrive, dtype=float)
        with np.errstate(divide="ignore"):
            return np.where(
                v > 0, 1.0 / (np.asarray(self.beta, dtype=float) * np.maximum(v, 0)), np.inf
            )

    def drain_voltage(self, v_overdrive: ArrayLike, current: ArrayLike) -> FloatArray:
        """|V_DS| carrying ``current`` in triode: V_ov - sqrt(V_ov^2 - 2 I / beta), V.

        ``nan`` where the device is off or the current exceeds the triode range (saturation).
        """
        v = np.asarray(v_overdrive, dtype=float)
        disc = v * v - 2.0 * np.asarray(current, dtype=float) / np.asarray(self.beta, dtype=float)
        ok = (v > 0) & (disc >= 0)
        root = np.sqrt(np.where(ok, disc, 0.0))
        # V_ov - sqrt(V_ov^2 - 2I/beta) written without cancellation
        with np.errstate(invalid="ignore", divide="ignore"):
            vds = (2.0 * np.asarray(current, dtype=float) / np.asarray(self.beta, dtype=float)) / (
                v + root
            )
        return np.where(ok, vds, np.nan)


@dataclass(frozen=True)
class ResistiveDevice:
    """A device described only by its on-resistance versus overdrive (ohmic, V_DS = I R_on).

    Attributes
    ----------
    v_threshold : threshold magnitude, V; the overdrive is |V_GS| - v_threshold. With a
        charge-sheet channel model use the effective threshold |V_GS,op| - Q_mob/C_ox at a
        reference bias, so the overdrive there is the mobile-charge overdrive Q_mob/C_ox
    resistance : callable V_ov -> R_on, ohm (e.g. L / (W mu_eff Cox V_ov) from a channel model)
    """

    v_threshold: ArrayLike
    resistance: Callable[[FloatArray], FloatArray]

    def on_resistance(self, v_overdrive: ArrayLike) -> FloatArray:
        """R_on(V_ov), ohm; inf where V_ov <= 0."""
        v = np.asarray(v_overdrive, dtype=float)
        return np.where(v > 0, self.resistance(np.maximum(v, 1e-12)), np.inf)

    def drain_voltage(self, v_overdrive: ArrayLike, current: ArrayLike) -> FloatArray:
        """|V_DS| = I R_on(V_ov), V; nan where off."""
        r = self.on_resistance(v_overdrive)
        return np.where(
            np.isfinite(r),
            np.asarray(current, dtype=float) * np.where(np.isfinite(r), r, 0.0),
            np.nan,
        )


Device = SquareLawDevice | ResistiveDevice


def leakage_from_resistance(resistance: ArrayLike) -> LeakageModel:
    """Ohmic gate leakage model I = V / R (R in ohm)."""
    r = np.asarray(resistance, dtype=float)
    return lambda v: np.asarray(v, dtype=float) / r


def no_leakage(v: FloatArray) -> FloatArray:
    """Ideal insulating gate: zero current."""
    return np.zeros_like(np.asarray(v, dtype=float))


@dataclass(frozen=True)
class OperatingPoint:
    """DC state of the pair (arrays over variants).

    Attributes
    ----------
    v_x : NMOS drain = PMOS gate, V against VSS
    v_y : PMOS drain = NMOS gate, V against VSS
    v_overdrive_n, v_overdrive_p : V_GS - V_T of each device, V
    r_on_n, r_on_p : small-signal channel resistance at the operating point, ohm
    i_gate_n, i_gate_p : gate leakage currents, A
    converged : bool per variant (False: no both-on state, e.g. V_DD below the thresholds or
        leakage beyond what the devices can carry)
    """

    v_x: FloatArray
    v_y: FloatArray
    v_overdrive_n: FloatArray
    v_overdrive_p: FloatArray
    r_on_n: FloatArray
    r_on_p: FloatArray
    i_gate_n: FloatArray
    i_gate_p: FloatArray
    converged: NDArray[np.bool_]


def operating_point(
    vdd: ArrayLike,
    nmos: Device,
    pmos: Device,
    leakage_n: LeakageModel = no_leakage,
    leakage_p: LeakageModel = no_leakage,
    max_iterations: int = 200,
    tolerance: float = 1e-12,
) -> OperatingPoint:
    """Self-consistent DC node voltages of the cross-coupled pair.

    Parameters
    ----------
    vdd : array_like      supply, V (VSS = 0)
    nmos, pmos : Device   `SquareLawDevice` or `ResistiveDevice`
    leakage_n : callable  NMOS gate current versus V_GS,n = v_y (to VSS), A
    leakage_p : callable  PMOS gate current versus V_SG,p = vdd - v_x (from VDD), A
    max_iterations : int  fixed-point iterations (all variants at once)
    tolerance : float     convergence on both node voltages, V

    Returns
    -------
    OperatingPoint

    Notes
    -----
    Fixed point x = V_DS,n(V_ov,n(y), I_g,p(x)), y = VDD - V_DS,p(V_ov,p(x), I_g,n(y)) with
    V_ov,n = y - V_T,n and V_ov,p = VDD - x - |V_T,p|, started from x = 0, y = VDD. It is a
    contraction while the drops are small against the overdrives (the practical case); the
    gate current is returned entirely to the source/body rail (the drain sits within mV of it).
    Small-signal r_on is d V_DS / d I at the operating current, i.e. 1/(beta sqrt(V_ov^2 -
    2 I/beta)) for a square-law device.
    """
    v = np.asarray(vdd, dtype=float)
    x = np.zeros_like(v)
    y = v.copy()
    converged = np.zeros(v.shape, dtype=bool)
    for _ in range(max_iterations):
        ig_n = leakage_n(y)
        ig_p = leakage_p(v - x)
        x_new = nmos.drain_voltage(y - np.asarray(nmos.v_threshold, dtype=float), ig_p)
        y_new = v - pmos.drain_voltage(v - x - np.asarray(pmos.v_threshold, dtype=float), ig_n)
        change = np.maximum(np.abs(x_new - x), np.abs(y_new - y))
        x, y = x_new, y_new
        converged = np.isfinite(change) & (change <= tolerance)
        if np.all(converged | ~np.isfinite(change)):
            break
    vov_n = y - np.asarray(nmos.v_threshold, dtype=float)
    vov_p = v - x - np.asarray(pmos.v_threshold, dtype=float)
    ig_n, ig_p = leakage_n(y), leakage_p(v - x)
    return OperatingPoint(
        v_x=np.where(converged, x, np.nan),
        v_y=np.where(converged, y, np.nan),
        v_overdrive_n=vov_n,
        v_overdrive_p=vov_p,
        r_on_n=_small_signal_resistance(nmos, vov_n, ig_p),
        r_on_p=_small_signal_resistance(pmos, vov_p, ig_n),
        i_gate_n=ig_n,
        i_gate_p=ig_p,
        converged=converged,
    )


def _small_signal_resistance(device: Device, v_ov: FloatArray, current: FloatArray) -> FloatArray:
    if isinstance(device, SquareLawDevice):
        beta = np.asarray(device.beta, dtype=float)
        disc = v_ov * v_ov - 2.0 * current / beta
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(disc > 0, 1.0 / (beta * np.sqrt(np.where(disc > 0, disc, 1.0))), np.inf)
    return device.on_resistance(v_ov)


def pair_capacitance(c_n: ArrayLike, c_p: ArrayLike) -> FloatArray:
    """Low-frequency capacitance of the pair, C_n + C_p, F."""
    return np.asarray(c_n, dtype=float) + np.asarray(c_p, dtype=float)


def pair_esr_low_frequency_distributed(
    r_on_n: ArrayLike,
    r_on_p: ArrayLike,
    c_n: ArrayLike,
    c_p: ArrayLike,
    r_gate_n: ArrayLike = 0.0,
    r_gate_p: ArrayLike = 0.0,
) -> FloatArray:
    """Low-frequency ESR of the pair with each channel a distributed line, ohm.

    Notes
    -----
    Dissipation of the omega -> 0 current pattern (derived here): with I_n = C_n/C and
    I_p = C_p/C per ampere (C = C_n + C_p), the PMOS channel carries I_n through its whole
    length plus C_p's displacement current leaving uniformly along it, the NMOS channel the
    mirror image, so
    ESR = R_on,p (I_n^2 + I_n I_p + I_p^2/3) + R_on,n (I_p^2 + I_p I_n + I_n^2/3)
    + R_g,n I_n^2 + R_g,p I_p^2; equal C: 7/12 (R_on,n + R_on,p) + (R_g,n + R_g,p)/4.
    Agrees with `solve_impedance` of `cross_coupled_circuit` at low frequency.
    """
    cn, cp = np.asarray(c_n, dtype=float), np.asarray(c_p, dtype=float)
    i_n, i_p = cn / (cn + cp), cp / (cn + cp)
    return (
        np.asarray(r_on_p, dtype=float) * (i_n * i_n + i_n * i_p + i_p * i_p / 3.0)
        + np.asarray(r_on_n, dtype=float) * (i_p * i_p + i_p * i_n + i_n * i_n / 3.0)
        + np.asarray(r_gate_n, dtype=float) * i_n * i_n
        + np.asarray(r_gate_p, dtype=float) * i_p * i_p
    )


def tied_esr_low_frequency(
    r_channel_n: ArrayLike,
    r_channel_p: ArrayLike,
    c_n: ArrayLike,
    c_p: ArrayLike,
    r_gate_n: ArrayLike = 0.0,
    r_gate_p: ArrayLike = 0.0,
) -> FloatArray:
    """Low-frequency ESR of the same two devices as plain tied decaps in parallel, ohm.

    Notes
    -----
    Each device is `circuits.mos_decap_circuit` with the channel contacted at both ends:
    ESR_i = R_ch,i / 12 + R_g,i (docs/references.md [41]); two such branches in parallel have the
    C^2-weighted low-frequency ESR (ESR_n C_n^2 + ESR_p C_p^2) / (C_n + C_p)^2 ([44]).
    Equal C and no gate resistance: (R_ch,n + R_ch,p) / 48.
    """
    cn, cp = np.asarray(c_n, dtype=float), np.asarray(c_p, dtype=float)
    esr_n = np.asarray(r_channel_n, dtype=float) / 12.0 + np.asarray(r_gate_n, dtype=float)
    esr_p = np.asarray(r_channel_p, dtype=float) / 12.0 + np.asarray(r_gate_p, dtype=float)
    return np.asarray((esr_n * cn**2 + esr_p * cp**2) / (cn + cp) ** 2, dtype=np.float64)


def tied_circuit(
    c_n: ArrayLike,
    c_p: ArrayLike,
    r_channel_n: ArrayLike,
    r_channel_p: ArrayLike,
    r_gate_n: ArrayLike = 0.0,
    r_gate_p: ArrayLike = 0.0,
) -> Netlist:
    """The pair's two devices as plain tied decaps in parallel (`circuits.mos_decap_circuit`,
    channels contacted at both ends, gates straight on their rails)."""
    parts = [
        circuits.mos_decap_circuit(c, r, r_g, contacted_ends=2, name=f"tied_{label}")
        for label, c, r, r_g in (("n", c_n, r_channel_n, r_gate_n), ("p", c_p, r_channel_p, r_gate_p))
    ]
    return parallel("tied_pair", parts)


@dataclass(frozen=True)
class TiedComparison:
    """Pair versus the same two devices tied straight to the rails (arrays over variants).

    Attributes
    ----------
    capacitance_lost : C_tied - C_pair at low frequency, F (bias-dependent C only)
    capacitance_lost_fraction : capacitance_lost / C_tied
    c_eff_lost_fraction : 1 - C_eff,pair / C_eff,tied at ``freq`` (..., n_freq)
    esr_gain : ESR_pair - ESR_tied at low frequency, ohm
    esr_ratio : ESR_pair / ESR_tied at low frequency
    corner_ratio : lumped RC corner of the pair over that of the tied cells
        (ESR_tied C_tied) / (ESR_pair C_pair)
    """

    capacitance_lost: FloatArray
    capacitance_lost_fraction: FloatArray
    c_eff_lost_fraction: FloatArray
    esr_gain: FloatArray
    esr_ratio: FloatArray
    corner_ratio: FloatArray


def compare_to_tied(
    c_n: ArrayLike,
    c_p: ArrayLike,
    r_on_n: ArrayLike,
    r_on_p: ArrayLike,
    r_gate_n: ArrayLike = 0.0,
    r_gate_p: ArrayLike = 0.0,
    c_n_tied: ArrayLike | None = None,
    c_p_tied: ArrayLike | None = None,
    freq: ArrayLike = (1e6,),
) -> TiedComparison:
    """What the cross-coupling costs against the same devices with gates tied to the rails.

    Parameters
    ----------
    c_n, c_p : array_like          gate capacitances at the pair's operating point, F
    r_on_n, r_on_p : array_like    channel (source-to-drain) resistances, ohm: the tied devices'
                                   channel resistance at V_GS = VDD (the pair's devices sit at
                                   V_DS ~ 0, the same terminal voltages, hence the same R)
    r_gate_n, r_gate_p : array_like  gate plus access resistance of each device, ohm
    c_n_tied, c_p_tied : optional  capacitances with the full rail voltage on the gates, F
                                   (default: the same as c_n, c_p)
    freq : array_like              frequencies for the C_eff comparison, Hz

    Returns
    -------
    TiedComparison

    Notes
    -----
    Both sides use the networks the engine characterizes: the pair is
    `circuits.cross_coupled_circuit` (each channel a through RC line that also carries the other
    device's gate current), the tied reference `tied_circuit`. Low-frequency ESRs are the closed
    forms `pair_esr_low_frequency_distributed` and `tied_esr_low_frequency` (both equal the
    solver's low-frequency limit); equal C, no gate resistance: 7/12 against 1/48 of
    (R_on,n + R_on,p), a ratio of 28.
    """
    cn, cp = np.asarray(c_n, dtype=float), np.asarray(c_p, dtype=float)
    cnt = cn if c_n_tied is None else np.asarray(c_n_tied, dtype=float)
    cpt = cp if c_p_tied is None else np.asarray(c_p_tied, dtype=float)
    c_pair, c_tied = pair_capacitance(cn, cp), pair_capacitance(cnt, cpt)
    esr_pair = pair_esr_low_frequency_distributed(r_on_n, r_on_p, cn, cp, r_gate_n, r_gate_p)
    esr_tied = tied_esr_low_frequency(r_on_n, r_on_p, cnt, cpt, r_gate_n, r_gate_p)
    f = np.atleast_1d(np.asarray(freq, dtype=float))
    shape = np.broadcast_shapes(cn.shape, cp.shape, cnt.shape, cpt.shape, np.shape(r_on_n),
                                np.shape(r_on_p), np.shape(r_gate_n), np.shape(r_gate_p))

    def flat(a: ArrayLike) -> FloatArray:
        return np.broadcast_to(np.asarray(a, dtype=float), shape).reshape(-1)

    z_pair = solve_impedance(
        circuits.cross_coupled_circuit(flat(cn), flat(cp), flat(r_on_n), flat(r_on_p),
                                       flat(r_gate_n), flat(r_gate_p)), f)
    z_tied = solve_impedance(
        tied_circuit(flat(cnt), flat(cpt), flat(r_on_n), flat(r_on_p), flat(r_gate_n),
                     flat(r_gate_p)), f)
    w = 2.0 * np.pi * f
    ceff_pair = (-1.0 / (w * np.imag(z_pair))).reshape(shape + f.shape)
    ceff_tied = (-1.0 / (w * np.imag(z_tied))).reshape(shape + f.shape)
    return TiedComparison(
        capacitance_lost=c_tied - c_pair,
        capacitance_lost_fraction=(c_tied - c_pair) / c_tied,
        c_eff_lost_fraction=1.0 - ceff_pair / ceff_tied,
        esr_gain=esr_pair - esr_tied,
        esr_ratio=esr_pair / esr_tied,
        corner_ratio=(esr_tied * c_tied) / (esr_pair * c_pair),
    )
