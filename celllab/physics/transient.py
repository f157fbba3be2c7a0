"""Transient analysis of equivalent circuits over variants (SI: s, V, A, ohm, F, H, S).

`simulate` integrates a `celllab.physics.netlist.Netlist` (R, C, L and RCLINE elements whose
values are arrays over variants) driven by independent voltage and current sources, with
optional nonlinear elements, and returns the requested node voltages and branch currents
over time for every variant at once. `operating_point` gives the DC state.

Method
------
Modified nodal analysis (C.-W. Ho, A. E. Ruehli, P. A. Brennan, IEEE TCAS 22(6):504, 1975):
unknowns are the node voltages against ``ground``, one branch current per inductor, voltage
source and resistor below 1 mohm, and one activation state per rail clamp; the circuit is
``C dx/dt + G x + f(x) = b(t)``. Time stepping is TR-BDF2 (R. E. Bank, W. M. Coughran,
W. Fichtner, E. H. Grosse, D. J. Rose, R. K. Smith, IEEE TCAD 4(4):436, 1985; M. E. Hosea,
L. F. Shampine, Appl. Numer. Math. 20:21, 1996): a trapezoidal stage to t + gamma h followed
by a second-order backward-difference stage to t + h, gamma = 2 - sqrt(2). It is second
order and L-stable, so stiff parts (ps channel RC under a ns step) are damped instead of
ringing as under plain trapezoidal integration; rows without capacitance or inductance
(algebraic constraints) are enforced at every stage end. Both stages share the matrix
``M = G + C / (kappa h)``, kappa = gamma / 2, whose inverse is formed once per distinct step
for all variants (batched). Nonlinear elements enter by chord (modified Newton) iteration at
every stage: the inverse of M plus their Jacobian is kept across iterations, stages and steps
and formed again (batched, only for the variants still iterating) when an iteration contracts
too slowly; a variant whose update is within the tolerance (1e-8 + 1e-6 |x|) leaves the
iteration. When the nonlinear elements read and feed at most half of the unknowns (a rail
clamp on a linear cell: vdd, vss and the clamp's state), the iteration runs on those unknowns
z alone: with V = M^-1 U (U scatters the nonlinear branch currents i onto their rows) the
stage equation M x + U i(z) = rhs becomes z + V_z i(z) = (M^-1 rhs)_z, a Schur complement of
the linear rest of the circuit, whose chord matrix is a small (I + V_z di/dz)^-1; then
x = M^-1 rhs - V i(z). In exact arithmetic Newton on z and on x give the same iterates; the
tests hold the two paths equal. Where the nonlinear elements touch most unknowns but the
chord matrix is a narrow band with a few dense rows and columns (the cross-coupled pair: two
channel ladders whose segments all read their gate plate), the full-system chord matrix is
kept as a band LU and a Schur complement of the border (`_BorderedBand`) instead of a dense
inverse: the same iterates, at O(n) instead of O(n^3) per refresh. A step whose iteration does not converge is split in halves
(up to 8 levels). A linear circuit's stage, and its DC point, is one solve with M^-1 and one
refinement.

RCLINE elements become N-segment midpoint ladders (`ladder_expansion`). Unless given, N is
the smallest number with omega R C / N^2 <= 0.03 at omega = 1 / (10 h_min) for every line and
variant (the accuracy rule of the SPICE export, ~0.2 % ladder error, applied at the frequency
of a response ten steps long: a ladder misses only the line's behaviour at times shorter than
about R C / N^2), between 2 and 64; the result reports N and whether the cap was reached.

Validity: lumped, quasi-static elements; the nonlinear laws are those stated on each class.
"""

from __future__ import annotations

import difflib
import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics.constants import FloatArray
from celllab.physics.netlist import Element, Netlist, ladder_expansion

Waveform = Callable[[FloatArray], ArrayLike]
"""Source value versus time: called with times (n_t,) in s, returns values broadcastable to
(n_variant, n_t) (V for a voltage source, A for a current source)."""

GAMMA = 2.0 - np.sqrt(2.0)
"""TR-BDF2 stage fraction (the value that makes both stages share one matrix)."""
KAPPA = GAMMA / 2.0
_BDF_A = 1.0 / (GAMMA * (2.0 - GAMMA))
_BDF_B = (1.0 - GAMMA) ** 2 / (GAMMA * (2.0 - GAMMA))

SMOOTHING_V = 0.02
"""Width of the smoothed corners of the clamp's conduction and activation laws, V."""
LADDER_X_MAX = 0.03
"""Largest omega R C / N^2 of an expanded RCLINE at the step's Nyquist frequency."""
MIN_SEGMENTS, MAX_SEGMENTS = 2, 64
BRANCH_OHM = 1e-3
"""Resistors below this (in any variant) are stamped with a branch current."""
GMIN_S = 1e-12
"""Conductance from every node to ground (keeps capacitively floating nodes defined)."""
_MAX_NEWTON = 40
_MAX_SPLIT_DEPTH = 8
_ATOL, _RTOL = 1e-8, 1e-6

Polarity = Literal["n", "p"]


# --- public element and source types ----------------------------------------------------------


@dataclass(frozen=True)
class VoltageSource:
    """Independent voltage source: V(node_pos) - V(node_neg) = waveform(t), V.

    Its current ``i(name)`` is the current flowing from node_pos through the source to
    node_neg (the SPICE convention).
    """

    name: str
    node_pos: str
    node_neg: str
    waveform: Waveform


@dataclass(frozen=True)
class CurrentSource:
    """Independent current source: waveform(t) A flows from node_pos through the source to
    node_neg (the SPICE convention: a positive value draws current out of node_pos)."""

    name: str
    node_pos: str
    node_neg: str
    waveform: Waveform


@dataclass(frozen=True)
class SquareLawChannel:
    """A MOS channel between ``node_a`` and ``node_b`` under ``gate`` (lumped, symmetric).

    Attributes
    ----------
    name : str
    node_a, node_b, gate : str
    polarity : {"n", "p"}     n: electrons (conducts when the gate is above the channel)
    beta : array_like         mu Cox W / L, A/V^2, > 0
    v_threshold : array_like  threshold magnitude |V_T|, V (a negative value: on at zero bias)

    Notes
    -----
    With the local overdrive u_x = max(s (V_gate - V_x) - V_T, 0) at each end (s = +1 for n,
    -1 for p) the current from a to b is I = s (beta / 2) (u_b^2 - u_a^2). This is the
    Shichman-Hodges law (H. Shichman, D. A. Hodges, IEEE JSSC 3(3):285, 1968; SPICE level 1
    with LAMBDA = 0 and no body effect) for either terminal acting as source: triode
    beta [(V_GS - V_T) V_DS - V_DS^2 / 2], saturation beta (V_GS - V_T)^2 / 2, cut-off 0.
    Valid for long channels; no velocity saturation, channel-length modulation or
    sub-threshold current.
    """

    name: str
    node_a: str
    node_b: str
    gate: str
    polarity: Polarity
    beta: ArrayLike
    v_threshold: ArrayLike


@dataclass(frozen=True)
class DistributedChannel:
    """Make an RCLINE of the netlist a distributed MOS channel controlled by its plate.

    The line's series resistors after ladder expansion become `SquareLawChannel` segments
    whose gate is the line's plate (``node_b``); a segment carrying the fraction l of the
    line's resistance gets beta / l, so the chain of N segments is exactly the lumped
    square-law device of ``beta`` between the line's ends in DC (the integral of the local
    channel conductance, gradual-channel approximation), and each segment's charge sits on the
    line's distributed capacitance. At the line's operating resistance R_on and overdrive
    V_ov: beta = 1 / (R_on V_ov).

    Attributes
    ----------
    line : str                 name of an RCLINE element of the netlist (value > 0)
    polarity : {"n", "p"}
    beta : array_like          A/V^2 of the whole channel, > 0
    v_threshold : array_like   |V_T|, V
    body : str | None          node of the well/body under the channel
    c_body : array_like        channel-to-body (depletion) capacitance of the whole channel,
                               F, spread over the segment nodes; 0 for none
    v_flatband : array_like | None
        Signed gate-to-body flat-band voltage, V. When given, every segment node is also tied
        to ``body`` by an accumulation layer: a square-law path of the opposite polarity with
        threshold -s V_FB and the segment's beta, which carries the oxide's charge to the body
        when the gate is driven past flat band (an estimate of the majority-carrier path).
    """

    line: str
    polarity: Polarity
    beta: ArrayLike
    v_threshold: ArrayLike
    body: str | None = None
    c_body: ArrayLike = 0.0
    v_flatband: ArrayLike | None = None


@dataclass(frozen=True)
class RailClamp:
    """A supply clamp between node_pos (VDD) and node_neg (VSS) with a reverse diode.

    Attributes
    ----------
    name : str
    node_pos, node_neg : str
    v_on : array_like        forward turn-on voltage, V, > 0
    r_on : array_like        forward on-resistance, ohm, > 0
    t_response : array_like  first-order activation time constant, s, >= 0
    v_diode : array_like     reverse (node_neg to node_pos) diode turn-on, V, > 0
    r_diode : array_like     reverse diode resistance, ohm, > 0 (default: r_on)

    Notes
    -----
    With v = V(pos) - V(neg), w = `SMOOTHING_V` and sp(x) = w ln(1 + exp(x / w)) (a rounded
    max(x, 0)), the current from pos to neg is

        I = s sp(v - v_on) / r_on - sp(-v - v_diode) / r_diode,

    where the activation s (0..1) follows t_response ds/dt = a(v) - s with
    a(v) = (1 + tanh((v - v_on) / w)) / 2: off below v_on, the on-resistance above it once
    activated, with the response time of its trigger. A behavioural model of a triggered
    big-FET clamp (M.-D. Ker, IEEE TED 46(1):173, 1999, describes the circuits it stands for);
    snapback and the trigger's hold time are not modelled. ``i(name)`` is I; ``s(name)`` the
    activation.
    """

    name: str
    node_pos: str
    node_neg: str
    v_on: ArrayLike
    r_on: ArrayLike
    t_response: ArrayLike = 0.0
    v_diode: ArrayLike = 0.7
    r_diode: ArrayLike | None = None


@dataclass(frozen=True)
class NonlinearConductance:
    """A two-terminal element with a supplied law: current(v) -> (I, dI/dv).

    ``current`` receives v = V(node_a) - V(node_b) as an (n_variant,) array and returns the
    current from node_a to node_b, A, and its derivative, S (both broadcastable to
    (n_variant,)); it must be continuous with a continuous derivative for Newton to converge.
    """

    name: str
    node_a: str
    node_b: str
    current: Callable[[FloatArray], tuple[ArrayLike, ArrayLike]]


Nonlinear = SquareLawChannel | DistributedChannel | RailClamp | NonlinearConductance
Source = VoltageSource | CurrentSource


def pwl(times: ArrayLike, values: ArrayLike) -> Waveform:
    """Piecewise-linear waveform through (times, values); constant outside the table.

    Parameters
    ----------
    times : array_like    (n_points,), s, increasing
    values : array_like   (n_points,) or (n_variant, n_points)
    """
    tt = np.asarray(times, dtype=float)
    vv = np.atleast_2d(np.asarray(values, dtype=float))
    if tt.ndim != 1 or tt.size < 1 or vv.shape[-1] != tt.size:
        raise ValueError(f"pwl: times {tt.shape} and values {vv.shape} do not match")
    if np.any(np.diff(tt) <= 0):
        raise ValueError("pwl: times must increase")

    def wave(t: FloatArray) -> FloatArray:
        t = np.asarray(t, dtype=float)
        if tt.size == 1:
            return np.broadcast_to(vv[:, :1], (vv.shape[0], t.size)).copy()
        k = np.clip(np.searchsorted(tt, t, side="right") - 1, 0, tt.size - 2)
        frac = np.clip((t - tt[k]) / (tt[k + 1] - tt[k]), 0.0, 1.0)
        return np.asarray(vv[:, k] * (1.0 - frac) + vv[:, k + 1] * frac, dtype=np.float64)

    return wave


def constant(value: ArrayLike) -> Waveform:
    """A waveform fixed at ``value`` (scalar or (n_variant,))."""
    v = np.asarray(value, dtype=float).reshape(-1, 1)
    return lambda t: np.broadcast_to(v, (v.shape[0], np.size(t)))


@dataclass(frozen=True)
class Expanded:
    """A circuit after RCLINE and distributed-channel expansion (what `simulate` integrates).

    ``elements`` are only R, C and L; ``nonlinear`` only `SquareLawChannel`, `RailClamp` and
    `NonlinearConductance` elements.
    """

    name: str
    elements: tuple[Element, ...]
    nonlinear: tuple[SquareLawChannel | RailClamp | NonlinearConductance, ...]
    n_segments: int
    line_nodes: dict[str, tuple[str, tuple[str, ...]]]
    """RCLINE name -> (plate node, segment nodes)."""

    def variant(self, index: int) -> tuple[Element, ...]:
        """The linear elements of one variant with plain float values (for rendering)."""
        return tuple(el.variant(index) for el in self.elements)


@dataclass(frozen=True)
class TransientResult:
    """Probed waveforms of every variant.

    Attributes
    ----------
    t : ndarray            (n_t,) s
    probes : dict          name -> (n_variant, n_t) array (V or A)
    n_segments : int       ladder segments used per RCLINE (0: none in the circuit)
    segments_capped : bool  True when N hit `MAX_SEGMENTS` (lines coarser than the rule)
    converged : ndarray    (n_variant,) bool: every Newton iteration converged
    split_steps : int      steps that had to be split for Newton convergence
    """

    t: FloatArray
    probes: dict[str, FloatArray]
    n_segments: int
    segments_capped: bool
    converged: NDArray[np.bool_]
    split_steps: int = 0


# --- expansion ---------------------------------------------------------------------------------


def auto_segments(netlist: Netlist, h_min: float) -> tuple[int, bool]:
    """Ladder segments for the RCLINEs of ``netlist`` at a smallest step ``h_min`` (s).

    Returns (N, capped): N = ceil(sqrt(R C / (10 h_min 0.03))) over all lines and variants,
    within [2, 64]; capped is True when 64 was not enough. (0, False) without RCLINEs.
    """
    lines = [el for el in netlist.elements if el.kind == "RCLINE"]
    if not lines:
        return 0, False
    rc = max(float(np.max(np.asarray(el.value) * np.asarray(el.c_total))) for el in lines)
    need = int(np.ceil(np.sqrt(rc / (10.0 * h_min * LADDER_X_MAX)))) if rc > 0 else 1
    return int(np.clip(need, MIN_SEGMENTS, MAX_SEGMENTS)), need > MAX_SEGMENTS


def expand(netlist: Netlist, nonlinear: Sequence[Nonlinear] = (), n_segments: int = 8) -> Expanded:
    """Expand RCLINEs into ladders and `DistributedChannel` lines into square-law segments."""
    distributed = {el.line: el for el in nonlinear if isinstance(el, DistributedChannel)}
    lines = {el.name: el for el in netlist.elements if el.kind == "RCLINE"}
    unknown = sorted(set(distributed) - set(lines))
    if unknown:
        raise ValueError(
            f"netlist {netlist.name}: DistributedChannel line(s) {unknown} are not RCLINE "
            f"elements; RCLINEs: {sorted(lines)}"
        )
    n = n_segments if lines else 0
    ladder = ladder_expansion(netlist, n) if lines else netlist
    line_nodes = {
        name: (el.node_b, tuple(f"{name}_{k}" for k in range(1, n + 1)))
        for name, el in lines.items()
    }
    elements: list[Element] = []
    extra: list[SquareLawChannel | RailClamp | NonlinearConductance] = []
    series = {
        name: re.compile(rf"^{re.escape(name)}_r\d+$") for name in distributed
    }
    for el in ladder.elements:
        owner = next((name for name, pat in series.items() if pat.match(el.name)), None)
        if owner is None or el.kind != "R":
            elements.append(el)
            continue
        spec, line = distributed[owner], lines[owner]
        r_total = np.asarray(line.value, dtype=float)
        if np.any(r_total <= 0):
            raise ValueError(f"DistributedChannel {owner}: the line resistance must be > 0")
        fraction = np.asarray(el.value, dtype=float) / r_total
        extra.append(
            SquareLawChannel(
                el.name, el.node_a, el.node_b, line.node_b, spec.polarity,
                np.asarray(spec.beta, dtype=float) / fraction, spec.v_threshold,
            )
        )
    for name, spec in distributed.items():
        plate, nodes = line_nodes[name]
        c_body = np.asarray(spec.c_body, dtype=float)
        if spec.body is None:
            if np.any(c_body > 0) or spec.v_flatband is not None:
                raise ValueError(f"DistributedChannel {name}: c_body/v_flatband need a body node")
            continue
        sign = 1.0 if spec.polarity == "n" else -1.0
        other: Polarity = "p" if spec.polarity == "n" else "n"
        for node in nodes:
            if np.any(c_body > 0):
                elements.append(Element("C", f"{node}_cb", node, spec.body, c_body / n))
            if spec.v_flatband is not None:
                extra.append(
                    SquareLawChannel(
                        f"{node}_acc", node, spec.body, plate, other,
                        np.asarray(spec.beta, dtype=float) * n,
                        -sign * np.asarray(spec.v_flatband, dtype=float),
                    )
                )
    kept = [el for el in nonlinear if not isinstance(el, DistributedChannel)]
    return Expanded(
        netlist.name,
        tuple(elements),
        tuple(kept) + tuple(extra),
        n,
        line_nodes,
    )


# --- assembly ----------------------------------------------------------------------------------


def _with_ground(x: FloatArray) -> FloatArray:
    """``x`` (k, n) with a column of zeros appended: index n reads the ground (0 V)."""
    out = np.empty((x.shape[0], x.shape[1] + 1))
    out[:, :-1] = x
    out[:, -1] = 0.0
    return out


def _vec(value: ArrayLike, n_var: int, what: str) -> FloatArray:
    arr = np.asarray(value, dtype=float).reshape(-1)
    if arr.size not in (1, n_var):
        raise ValueError(f"{what}: {arr.size} values for {n_var} variants")
    return np.broadcast_to(arr, (n_var,)).astype(float)


def _count_variants(netlist: Netlist, nonlinear: Sequence[Nonlinear]) -> int:
    sizes = {netlist.n_variant}
    for el in nonlinear:
        for attr in ("beta", "v_threshold", "c_body", "v_flatband", "v_on", "r_on",
                     "t_response", "v_diode", "r_diode"):
            value = getattr(el, attr, None)
            if value is not None:
                sizes.add(int(np.size(value)))
    sizes.discard(1)
    if len(sizes) > 1:
        raise ValueError(f"variant counts {sorted(sizes)} do not broadcast")
    return sizes.pop() if sizes else 1


Rows = NDArray[np.int_] | None
"""Variant rows a law is evaluated for (None: all)."""


def _take(param: FloatArray, rows: Rows) -> FloatArray:
    return param if rows is None else param[rows]


@dataclass
class _Family:
    """Nonlinear branches of one law: currents from row ``plus`` to row ``minus``."""

    plus: NDArray[np.int_]            # (m,) unknown index, -1 = none
    minus: NDArray[np.int_]
    controls: NDArray[np.int_]        # (m, K) unknown indices read, -1 = ground
    law: Callable[[FloatArray, Rows], tuple[FloatArray, FloatArray]]  # (v (rows, m, K), rows) -> I, dI
    names: tuple[str, ...]
    per_row: bool = True              # False: the law must see every variant (a supplied law)


def _square_law(sign: FloatArray, beta: FloatArray, vt: FloatArray) -> Callable[
        [FloatArray, Rows], tuple[FloatArray, FloatArray]]:
    def law(v: FloatArray, rows: Rows) -> tuple[FloatArray, FloatArray]:
        b, t = _take(beta, rows), _take(vt, rows)
        va, vb, vg = v[..., 0], v[..., 1], v[..., 2]
        ua = np.maximum(sign * (vg - va) - t, 0.0)
        ub = np.maximum(sign * (vg - vb) - t, 0.0)
        current = sign * 0.5 * b * (ub * ub - ua * ua)
        grad = np.empty(v.shape)
        grad[..., 0] = b * ua
        grad[..., 1] = -b * ub
        grad[..., 2] = b * (ub - ua)
        return current, grad

    return law


def _softplus(x: FloatArray) -> tuple[FloatArray, FloatArray]:
    """w ln(1 + exp(x/w)) and its derivative, overflow-safe."""
    z = x / SMOOTHING_V
    value = SMOOTHING_V * (np.maximum(z, 0.0) + np.log1p(np.exp(-np.abs(z))))
    slope = 0.5 * (1.0 + np.tanh(0.5 * z))
    return value, slope


def _clamp_law(v_on: FloatArray, g_on: FloatArray, v_d: FloatArray, g_d: FloatArray) -> Callable[
        [FloatArray, Rows], tuple[FloatArray, FloatArray]]:
    def law(v: FloatArray, rows: Rows) -> tuple[FloatArray, FloatArray]:
        gon, gd = _take(g_on, rows), _take(g_d, rows)
        vd = v[..., 0] - v[..., 1]
        s = v[..., 2]
        on, on_slope = _softplus(vd - _take(v_on, rows))
        rev, rev_slope = _softplus(-vd - _take(v_d, rows))
        current = s * gon * on - gd * rev
        dv = s * gon * on_slope + gd * rev_slope
        grad = np.empty(v.shape)
        grad[..., 0] = dv
        grad[..., 1] = -dv
        grad[..., 2] = gon * on
        return current, grad

    return law


def _activation_law(v_on: FloatArray) -> Callable[[FloatArray, Rows], tuple[FloatArray, FloatArray]]:
    def law(v: FloatArray, rows: Rows) -> tuple[FloatArray, FloatArray]:
        th = np.tanh((v[..., 0] - v[..., 1] - _take(v_on, rows)) / SMOOTHING_V)
        da = 0.5 * (1.0 - th * th) / SMOOTHING_V
        # state row: tau ds/dt + s - a(v) = 0, so the "current" leaving the row is -a(v)
        grad = np.empty(v.shape)
        grad[..., 0] = -da
        grad[..., 1] = da
        return -0.5 * (1.0 + th), grad

    return law


def _user_law(fn: Callable[[FloatArray], tuple[ArrayLike, ArrayLike]]) -> Callable[
        [FloatArray, Rows], tuple[FloatArray, FloatArray]]:
    def law(v: FloatArray, rows: Rows) -> tuple[FloatArray, FloatArray]:
        i, di = fn(v[..., 0, 0] - v[..., 0, 1])
        shape = v.shape[:-1]
        di_arr = np.broadcast_to(np.asarray(di, dtype=float)[..., None], shape)
        grad = np.stack([di_arr, -di_arr], axis=-1)
        return np.broadcast_to(np.asarray(i, dtype=float)[..., None], shape), grad

    return law


def _inverse(J: FloatArray) -> FloatArray:
    """Batched inverse; a singular (or non-finite) matrix gives NaN (its Newton fails)."""
    with np.errstate(all="ignore"):
        try:
            return np.asarray(np.linalg.inv(J), dtype=np.float64)
        except np.linalg.LinAlgError:
            out = np.full(J.shape, np.nan)
            for k in range(J.shape[0]):
                try:
                    out[k] = np.linalg.inv(J[k])
                except np.linalg.LinAlgError:
                    pass
            return out


def _matvec(A: FloatArray, x: FloatArray) -> FloatArray:
    """Batched A x: (v, n, n) @ (v, n) -> (v, n)."""
    return (A @ x[:, :, None])[:, :, 0]


class _BorderedBand:
    """Batched inverse of matrices whose pattern is a narrow band plus a few dense rows and
    columns (two channel ladders whose segments all read their gate plate).

    With the unknowns split into the inner set a (reordered by reverse Cuthill-McKee into a
    band of kl sub- and ku super-diagonals) and the border b (the unknowns with more than
    ``BORDER_DEGREE`` neighbours), J = [[A, E], [F, D]] and, with the Schur complement
    S = D - F A^-1 E (docs/references.md [97]: block elimination and the band LU), J^-1 = [[A^-1 + A^-1 E S^-1 F A^-1, -A^-1 E S^-1],
    [-S^-1 F A^-1, S^-1]]. A^-1 and A^-1 E of every variant come from one LAPACK band LU
    (dgbtrf/dgbtrs, partial pivoting) of the block-diagonal matrix that stacks the variants:
    O(n_a (kl + ku) (n_a + n_b)) per variant instead of O(n^3). Any zero pivot or non-finite
    result falls back to the dense batched inverse.
    """

    BORDER_DEGREE = 6
    MAX_BORDER = 8
    MAX_BAND = 6       # kl + ku
    MIN_SIZE = 24      # smaller systems: the dense inverse is as fast

    def __init__(self, inner: NDArray[np.int_], border: NDArray[np.int_], kl: int,
                 ku: int) -> None:
        self.inner, self.border, self.kl, self.ku = inner, border, kl, ku
        n_a = inner.size
        self.ldab = 2 * kl + ku + 1
        i, j = np.meshgrid(np.arange(n_a), np.arange(n_a), indexing="ij")
        keep = (i - j <= kl) & (j - i <= ku)
        self._i, self._j = i[keep], j[keep]
        self._row = kl + ku + self._i - self._j  # band storage row of A[i, j]
        order = np.concatenate([inner, border])
        self._undo = np.argsort(order)

    @classmethod
    def plan(cls, pattern: NDArray[np.bool_]) -> _BorderedBand | None:
        """The split of a structural pattern (n, n), or None where it does not pay."""
        from scipy.sparse import csr_matrix
        from scipy.sparse.csgraph import reverse_cuthill_mckee

        n = pattern.shape[0]
        sym = pattern | pattern.T
        np.fill_diagonal(sym, False)
        degree = sym.sum(axis=1)
        border = np.flatnonzero(degree > cls.BORDER_DEGREE)
        rest = np.flatnonzero(degree <= cls.BORDER_DEGREE)
        if n < cls.MIN_SIZE or border.size > cls.MAX_BORDER or rest.size < n // 2:
            return None
        sub = sym[np.ix_(rest, rest)]
        perm = reverse_cuthill_mckee(csr_matrix(sub.astype(float)), symmetric_mode=True)
        i, j = np.nonzero(pattern[np.ix_(rest[perm], rest[perm])])
        kl = int(max(0, np.max(i - j, initial=0)))
        ku = int(max(0, np.max(j - i, initial=0)))
        if kl + ku > cls.MAX_BAND:
            return None
        return cls(rest[perm], border, kl, ku)

    def factor(self, J: FloatArray) -> _BandFactors:
        """The factors of every variant's J (k, n, n); see `_BandFactors`."""
        from scipy.linalg.lapack import dgbtrf, dgbtrs

        a, b = self.inner, self.border
        k, n_a = J.shape[0], a.size
        A = J[:, a[:, None], a]
        E = J[:, a[:, None], b]
        F = np.ascontiguousarray(J[:, b[:, None], a])
        D = J[:, b[:, None], b]
        ab = np.zeros((k, n_a, self.ldab))  # column j of the stacked band storage: ab[., j, .]
        ab[:, self._j, self._row] = A[:, self._i, self._j]
        with np.errstate(all="ignore"):
            lu, piv, _ = dgbtrf(ab.reshape(k * n_a, self.ldab).T, self.kl, self.ku,
                                overwrite_ab=1)
            lu = lu.T.reshape(k, n_a, self.ldab)
            pivot = lu[:, :, self.kl + self.ku]  # diagonal of U
            bad = ~np.all(np.isfinite(lu), axis=(1, 2)) | np.any(pivot == 0.0, axis=1)
            piv = piv.reshape(k, n_a) - (np.arange(k) * n_a)[:, None]
            if np.any(bad):  # keep the stacked solve finite; these rows go dense
                lu[bad] = 0.0
                lu[bad, :, self.kl + self.ku] = 1.0
                piv[bad] = np.arange(n_a)
            A_inv_E, _ = dgbtrs(lu.reshape(k * n_a, self.ldab).T, self.kl, self.ku,
                                np.asfortranarray(E.reshape(k * n_a, -1)),
                                (piv + (np.arange(k) * n_a)[:, None]).reshape(-1))
            A_inv_E = A_inv_E.reshape(k, n_a, b.size)
            S_inv = _inverse(D - F @ A_inv_E)
            bad |= ~(np.all(np.isfinite(S_inv), axis=(1, 2))
                     & np.all(np.isfinite(A_inv_E), axis=(1, 2)))
        return _BandFactors(lu, piv.astype(np.int32), np.ascontiguousarray(A_inv_E), S_inv, F,
                            bad)


@dataclass
class _BandFactors:
    """Per-variant factors of a bordered-band chord matrix (`_BorderedBand`): the band LU of
    A (band storage per variant, block-relative pivots), A^-1 E, S^-1 and F; ``bad`` rows
    (zero pivot or non-finite) are solved with a dense inverse ``dense`` instead."""

    lu: FloatArray                  # (v, n_a, ldab)
    piv: NDArray[np.int32]          # (v, n_a)
    A_inv_E: FloatArray             # (v, n_a, n_b)
    S_inv: FloatArray               # (v, n_b, n_b)
    F: FloatArray                   # (v, n_b, n_a)
    bad: NDArray[np.bool_]          # (v,)
    dense: FloatArray | None = None  # (v, n, n) where bad


def _band_solve(band: _BorderedBand, fac: _BandFactors, rows: NDArray[np.int_] | None,
                r: FloatArray) -> FloatArray:
    """J^-1 r for the variants ``rows`` (None: all) of the factors ``fac``; r (k, n)."""
    from scipy.linalg.lapack import dgbtrs

    a, b = band.inner, band.border
    k, n_a = r.shape[0], a.size
    if rows is None:
        lu, piv, A_inv_E, S_inv, F, bad = (fac.lu, fac.piv, fac.A_inv_E, fac.S_inv, fac.F,
                                           fac.bad)
    else:
        lu, piv, A_inv_E, S_inv, F, bad = (fac.lu[rows], fac.piv[rows], fac.A_inv_E[rows],
                                           fac.S_inv[rows], fac.F[rows], fac.bad[rows])
    offsets = np.arange(0, k * n_a, n_a, dtype=np.int32)[:, None]
    with np.errstate(all="ignore"):
        y, _ = dgbtrs(lu.reshape(k * n_a, band.ldab).T, band.kl, band.ku,
                      r[:, a].reshape(-1, 1), (piv + offsets).reshape(-1))
        y = y.reshape(k, n_a)
        x_b = _matvec(S_inv, r[:, b] - _matvec(F, y))
        out = np.empty_like(r)
        out[:, a] = y - _matvec(A_inv_E, x_b)
        out[:, b] = x_b
        if np.any(bad):
            assert fac.dense is not None
            pick = np.flatnonzero(bad)
            full = pick if rows is None else rows[pick]
            out[pick] = _matvec(fac.dense[full], r[pick])
    return out


@dataclass(frozen=True)
class _StageOperators:
    """Per-step operators of `_System.stage_operators` (arrays over variants)."""

    V: FloatArray                   # (v, n, m)  M^-1 U
    W: FloatArray                   # (v, p, m)  V on the nonlinear unknowns
    first: FloatArray               # (v, n, n)  M^-1 (C / (kappa h) - D G)
    second: FloatArray              # (v, n, n)  M^-1 C / (kappa h)
    history_U: FloatArray           # (v, n, m)  M^-1 D U
    Minv: FloatArray | None         # (v, n, n)  M^-1, kept only when there are sources


class _System:
    """Assembled matrices, sources and nonlinear families of an expanded circuit."""

    use_band = True
    """Transient chord matrices of large circuits whose pattern is a band with a few dense
    rows and columns (the pair's channel ladders) are inverted through `_BorderedBand`; False:
    batched dense inverses (the reference path of the equivalence tests)."""

    use_reduced = True
    """Transient stages iterate on the nonlinear unknowns (`newton_reduced`); False: the
    full-system chord iteration `newton` (the reference path of the equivalence tests)."""

    def __init__(self, expanded: Expanded, sources: Sequence[Source], ground: str,
                 n_var: int, gmin: float) -> None:
        nodes: dict[str, None] = {}
        for el in expanded.elements:
            for node in el.nodes:
                nodes.setdefault(node, None)
        for nl in expanded.nonlinear:
            for attr in ("node_a", "node_b", "gate", "node_pos", "node_neg"):
                if hasattr(nl, attr):
                    nodes.setdefault(getattr(nl, attr), None)
        for src in sources:
            nodes.setdefault(src.node_pos, None)
            nodes.setdefault(src.node_neg, None)
        if ground not in nodes:
            raise ValueError(f"ground node {ground!r} is not in the circuit")
        node_list = [n for n in nodes if n != ground]
        names = [el.name for el in expanded.elements] + [el.name for el in expanded.nonlinear] + [
            s.name for s in sources]
        duplicates = sorted({n for n in names if names.count(n) > 1})
        if duplicates:
            raise ValueError(f"duplicate element/source names {duplicates}")
        branch = [el for el in expanded.elements if el.kind == "L" or (
            el.kind == "R" and np.any(np.asarray(el.value) < BRANCH_OHM))]
        vsources = [s for s in sources if isinstance(s, VoltageSource)]
        clamps = [el for el in expanded.nonlinear if isinstance(el, RailClamp)]
        self.index: dict[str, int] = {n: k for k, n in enumerate(node_list)}
        self.index[ground] = -1
        self.n_nodes = len(node_list)
        labels = list(node_list)
        self.branch_index: dict[str, int] = {}
        branched: list[Element | VoltageSource] = [*branch, *vsources]
        for item in branched:
            self.branch_index[item.name] = len(labels)
            labels.append(f"i({item.name})")
        self.state_index: dict[str, int] = {}
        for clamp in clamps:
            self.state_index[clamp.name] = len(labels)
            labels.append(f"s({clamp.name})")
        self.labels = labels
        self.n = n = len(labels)
        self.n_var = n_var
        self.ground = ground
        self.elements = {el.name: el for el in expanded.elements}
        self.expanded = expanded
        G = np.zeros((n_var, n + 1, n + 1))
        C = np.zeros((n_var, n + 1, n + 1))
        ix = self.index

        def stamp(mat: FloatArray, a: int, b: int, value: FloatArray) -> None:
            mat[:, a, a] += value
            mat[:, b, b] += value
            mat[:, a, b] -= value
            mat[:, b, a] -= value

        for el in expanded.elements:
            a, b = ix[el.node_a], ix[el.node_b]
            value = _vec(el.value, n_var, f"element {el.name}")
            if el.name in self.branch_index:
                k = self.branch_index[el.name]
                G[:, a, k] += 1.0
                G[:, b, k] -= 1.0
                G[:, k, a] += 1.0
                G[:, k, b] -= 1.0
                (C if el.kind == "L" else G)[:, k, k] -= value
            elif el.kind == "R":
                stamp(G, a, b, 1.0 / value)
            elif el.kind == "C":
                stamp(C, a, b, value)
            else:  # pragma: no cover - expand() leaves only R, C, L
                raise ValueError(f"element {el.name}: kind {el.kind} not expanded")
        for src in vsources:
            k = self.branch_index[src.name]
            a, b = ix[src.node_pos], ix[src.node_neg]
            G[:, a, k] += 1.0
            G[:, b, k] -= 1.0
            G[:, k, a] += 1.0
            G[:, k, b] -= 1.0
        for clamp in clamps:
            k = self.state_index[clamp.name]
            G[:, k, k] += 1.0
            C[:, k, k] += _vec(clamp.t_response, n_var, f"{clamp.name}.t_response")
        diag = np.arange(self.n_nodes)
        G[:, diag, diag] += gmin
        self.G = np.ascontiguousarray(G[:, :n, :n])
        self.C = np.ascontiguousarray(C[:, :n, :n])
        self.dynamic = np.any(self.C != 0.0, axis=2)  # (n_var, n) rows with a time derivative
        self.sources = list(sources)
        self.families = self._families(expanded.nonlinear, clamps)
        self.m = sum(f.plus.size for f in self.families)
        plus = np.concatenate([f.plus for f in self.families]) if self.families else np.zeros(0, int)
        minus = np.concatenate([f.minus for f in self.families]) if self.families else np.zeros(0, int)
        U = np.zeros((n + 1, self.m))
        U[plus, np.arange(self.m)] += 1.0
        U[minus, np.arange(self.m)] -= 1.0
        self.U = U[:n]
        self.plus, self.minus = plus, minus
        # every branch's controls padded to three with -1 (the ground column of x_ext)
        self.controls = np.full((self.m, 3), -1)
        self._slices: list[tuple[slice, int]] = []
        start = 0
        for fam in self.families:
            size, k = fam.plus.size, fam.controls.shape[1]
            self.controls[start : start + size, :k] = fam.controls
            self._slices.append((slice(start, start + size), k))
            start += size
        self._cache: dict[float | None, tuple[FloatArray, FloatArray | None]] = {}
        self._chord: dict[float | None, FloatArray | _BandFactors] = {}
        # the unknowns the nonlinear elements read or feed (the reduced Newton's unknowns z)
        touched = np.concatenate([self.controls.reshape(-1), plus, minus])
        self.nl_index = np.unique(touched[touched >= 0])
        self.p = p = self.nl_index.size
        position = np.full(n + 1, p)  # unknown -> position in z; ground (-1 = n) -> p (a zero)
        position[self.nl_index] = np.arange(p)
        self.controls_z = position[self.controls]
        # (3, m, p) one-hot: d f_j / d z = sum_c grads[j, c] onehot[c, j]
        self._onehot = np.zeros((3, self.m, p + 1))
        for c in range(3):
            self._onehot[c, np.arange(self.m), self.controls_z[:, c]] = 1.0
        self._onehot = np.ascontiguousarray(self._onehot[:, :, :p])
        self.per_row = all(fam.per_row for fam in self.families)
        self._stage_ops: dict[float, _StageOperators] = {}
        self._chord_z: dict[float, FloatArray] = {}
        self._c_scaled: dict[float, FloatArray] = {}

    def _families(self, nonlinear: Sequence[SquareLawChannel | RailClamp | NonlinearConductance],
                  clamps: Sequence[RailClamp]) -> list[_Family]:
        ix, n_var = self.index, self.n_var
        out: list[_Family] = []
        chans = [el for el in nonlinear if isinstance(el, SquareLawChannel)]
        if chans:
            for el in chans:
                if el.polarity not in ("n", "p"):
                    raise ValueError(f"{el.name}: polarity = {el.polarity!r} -> 'n' or 'p'")
            beta = np.stack([_vec(el.beta, n_var, f"{el.name}.beta") for el in chans], axis=1)
            if np.any(~(beta > 0)):
                raise ValueError("SquareLawChannel beta must be > 0")
            vt = np.stack([_vec(el.v_threshold, n_var, f"{el.name}.v_threshold")
                           for el in chans], axis=1)
            sign = np.array([1.0 if el.polarity == "n" else -1.0 for el in chans])
            out.append(_Family(
                np.array([ix[el.node_a] for el in chans]), np.array([ix[el.node_b] for el in chans]),
                np.array([[ix[el.node_a], ix[el.node_b], ix[el.gate]] for el in chans]),
                _square_law(sign, beta, vt), tuple(el.name for el in chans)))
        if clamps:
            def col(attr: str, default: ArrayLike | None = None) -> FloatArray:
                return np.stack([_vec(default if getattr(c, attr) is None and default is not None
                                      else getattr(c, attr), n_var, f"{c.name}.{attr}")
                                 for c in clamps], axis=1)
            v_on, r_on, v_d = col("v_on"), col("r_on"), col("v_diode")
            r_d = np.stack([_vec(c.r_on if c.r_diode is None else c.r_diode, n_var,
                                 f"{c.name}.r_diode") for c in clamps], axis=1)
            t_resp = col("t_response")
            if np.any(~(v_on > 0)) or np.any(~(r_on > 0)) or np.any(~(v_d > 0)) or np.any(
                    ~(r_d > 0)) or np.any(~(t_resp >= 0)):
                raise ValueError("RailClamp: v_on, r_on, v_diode, r_diode must be > 0, "
                                 "t_response >= 0")
            pos = np.array([ix[c.node_pos] for c in clamps])
            neg = np.array([ix[c.node_neg] for c in clamps])
            state = np.array([self.state_index[c.name] for c in clamps])
            out.append(_Family(pos, neg, np.stack([pos, neg, state], axis=1),
                               _clamp_law(v_on, 1.0 / r_on, v_d, 1.0 / r_d),
                               tuple(c.name for c in clamps)))
            out.append(_Family(state, np.full(len(clamps), -1), np.stack([pos, neg], axis=1),
                               _activation_law(v_on), tuple(f"s({c.name})" for c in clamps)))
        for nl in nonlinear:
            if isinstance(nl, NonlinearConductance):
                a, b = ix[nl.node_a], ix[nl.node_b]
                out.append(_Family(np.array([a]), np.array([b]), np.array([[a, b]]),
                                   _user_law(nl.current), (nl.name,), per_row=False))
        return out

    # -- nonlinear evaluation ------------------------------------------------------------------

    def evaluate(self, x: FloatArray, rows: NDArray[np.int_] | None = None
                 ) -> tuple[FloatArray, FloatArray, NDArray[np.int_]]:
        """Branch currents (k, m), gradients (k, m, 3) and control indices (m, 3) of the k
        variants ``rows`` (None: all) at their unknowns ``x`` (k, n)."""
        v = _with_ground(x)[:, self.controls]

        def every_variant() -> FloatArray:  # the other variants padded with the first row's
            full = np.repeat(v[:1], self.n_var, axis=0)
            full[rows] = v
            return full

        currents, grads = self._laws(v, rows, every_variant)
        return currents, grads, self.controls

    def evaluate_z(self, z: FloatArray, rows: NDArray[np.int_] | None,
                   z_all: FloatArray) -> tuple[FloatArray, FloatArray]:
        """`evaluate` on the reduced unknowns ``z`` (len(rows), p) of the variants ``rows``
        (None: all); ``z_all`` (n_var, p) holds every variant's z for a law that must see all."""
        z_ext = _with_ground(z)

        def every_variant() -> FloatArray:
            full = _with_ground(z_all)
            full[rows] = z_ext
            return full[:, self.controls_z]

        return self._laws(z_ext[:, self.controls_z], rows, every_variant)

    def _laws(self, v: FloatArray, rows: NDArray[np.int_] | None,
              every_variant: Callable[[], FloatArray]) -> tuple[FloatArray, FloatArray]:
        """Currents (k, m) and gradients (k, m, 3) of every family at control voltages ``v``
        (k, m, 3) of the variants ``rows``; a supplied law that must see every variant gets
        ``every_variant()`` (n_var, m, 3) and its rows are kept."""
        k = v.shape[0]
        currents = np.empty((k, self.m))
        grads = np.zeros((k, self.m, 3))
        full: FloatArray | None = None
        for fam, (sl, n_ctrl) in zip(self.families, self._slices):
            if fam.per_row or rows is None:
                i, g = fam.law(v[:, sl, :n_ctrl], rows)
            else:
                full = every_variant() if full is None else full
                i_all, g_all = fam.law(full[:, sl, :n_ctrl], None)
                i, g = i_all[rows], g_all[rows]
            currents[:, sl] = i
            grads[:, sl, :n_ctrl] = g
        return currents, grads

    def nonlinear_rows(self, currents: FloatArray) -> FloatArray:
        """f(x): the nonlinear currents scattered onto their rows, (n_var, n)."""
        if self.m == 0:
            return np.zeros((currents.shape[0], self.n))
        return currents @ self.U.T

    def branch_current(self, name: str, currents: FloatArray) -> FloatArray:
        start = 0
        for fam in self.families:
            if name in fam.names:
                return currents[:, start + fam.names.index(name)]
            start += fam.plus.size
        raise KeyError(name)

    # -- linear algebra ------------------------------------------------------------------------

    def matrices(self, h: float | None) -> tuple[FloatArray, FloatArray | None]:
        """(M, M^-1) for a step h (None: DC); the inverse only for linear circuits."""
        key = None if h is None else float(h)
        if key not in self._cache:
            M = self.G.copy() if h is None else self.G + self.C / (KAPPA * h)
            self._cache[key] = (M, None if self.m else np.linalg.inv(M))
        return self._cache[key]

    def jacobian_inverse(self, h: float | None, grads: FloatArray,
                         rows: NDArray[np.int_] | None = None) -> FloatArray | _BandFactors:
        """(M + d f / d x)^-1 at the given branch gradients, cached as the chord matrix.

        ``rows``: the variants ``grads`` belong to (None: all); only their rows of the cached
        chord matrix are formed again. A transient chord matrix with a bordered-band pattern
        (`band_plan`) is kept as its factors instead (`_band_solve` applies it)."""
        key = None if h is None else float(h)
        M = self.matrices(h)[0]
        if rows is not None:
            M = M[rows]
        k = grads.shape[0]
        J = np.zeros((k, self.n + 1, self.n + 1))
        J[:, : self.n, : self.n] = M
        ctrl = self.controls.reshape(-1)
        for plus, sign in ((self.plus, 1.0), (self.minus, -1.0)):
            np.add.at(J, (slice(None), np.repeat(plus, 3), ctrl),  # type: ignore[arg-type]  # numpy stubs
                      sign * grads.reshape(k, -1))
        band = self.band_plan() if h is not None else None
        if band is not None:
            return self._band_chord(key, band, J[:, : self.n, : self.n], rows)
        inverse = _inverse(J[:, : self.n, : self.n])
        if rows is None:
            self._chord[key] = inverse
            return inverse
        chord = self._chord.get(key)
        if not isinstance(chord, np.ndarray):
            chord = np.full((self.n_var, self.n, self.n), np.nan)
            self._chord[key] = chord
        chord[rows] = inverse
        return chord

    def _band_chord(self, key: float | None, band: _BorderedBand, J: FloatArray,
                    rows: NDArray[np.int_] | None) -> _BandFactors:
        """`jacobian_inverse` kept as bordered-band factors (`_BorderedBand`)."""
        fac = band.factor(J)
        if np.any(fac.bad):
            fac.dense = np.full(J.shape, np.nan)
            fac.dense[fac.bad] = _inverse(J[fac.bad])
        if rows is None:
            self._chord[key] = fac
            return fac
        chord = self._chord.get(key)
        if not isinstance(chord, _BandFactors):
            n_a, n_b = band.inner.size, band.border.size
            chord = self._chord[key] = _BandFactors(
                np.zeros((self.n_var, n_a, band.ldab)), np.zeros((self.n_var, n_a), np.int32),
                np.zeros((self.n_var, n_a, n_b)), np.zeros((self.n_var, n_b, n_b)),
                np.zeros((self.n_var, n_b, n_a)), np.ones(self.n_var, dtype=bool),
                np.full((self.n_var, self.n, self.n), np.nan))
        for name in ("lu", "piv", "A_inv_E", "S_inv", "F", "bad"):
            getattr(chord, name)[rows] = getattr(fac, name)
        if np.any(fac.bad):
            if chord.dense is None:
                chord.dense = np.full((self.n_var, self.n, self.n), np.nan)
            chord.dense[rows] = fac.dense
        return chord

    def band_plan(self) -> _BorderedBand | None:
        """The bordered-band inverse of the chord matrices (`_BorderedBand.plan`), or None."""
        if not hasattr(self, "_band"):
            pattern = np.any(self.G != 0.0, axis=0) | np.any(self.C != 0.0, axis=0)
            ext = np.zeros((self.n + 1, self.n + 1), dtype=bool)
            ext[np.repeat(self.plus, 3), self.controls.reshape(-1)] = True
            ext[np.repeat(self.minus, 3), self.controls.reshape(-1)] = True
            pattern |= ext[: self.n, : self.n]
            self._band = _BorderedBand.plan(pattern) if self.use_band else None
        return self._band

    def scaled_C(self, h: float) -> FloatArray:
        """C / (kappa h), cached per step."""
        key = float(h)
        if key not in self._c_scaled:
            self._c_scaled[key] = self.C / (KAPPA * h)
        return self._c_scaled[key]

    def stage_operators(self, h: float) -> _StageOperators:
        """The step-h operators of a TR-BDF2 step solved on the nonlinear unknowns (cached).

        With M = G + C / (kappa h), D the rows with a time derivative and U the scatter of the
        nonlinear branch currents i onto their rows, the stage equation M x + U i(x_z) = rhs
        reads x = M^-1 rhs - V i(z), V = M^-1 U, and on the nonlinear unknowns z alone
        z + W i(z) = (M^-1 rhs)_z, W = V_z (a Schur complement of the linear rest of the
        circuit). The stage right-hand sides of `simulate` need only M^-1 rhs:
        first stage  M^-1 (C/(kappa h) - D G) x_n - M^-1 D U i(x_n) + M^-1 (b_g + D b_n),
        second stage M^-1 C/(kappa h) (a x_g - b x_n) + M^-1 b_1.
        """
        key = float(h)
        ops = self._stage_ops.get(key)
        if ops is None:
            C_scaled = self.C / (KAPPA * h)
            Minv = _inverse(self.G + C_scaled)
            V = np.ascontiguousarray(Minv @ self.U)
            first = Minv @ (C_scaled - np.where(self.dynamic[:, :, None], self.G, 0.0))
            second = Minv @ C_scaled
            history_U = Minv @ np.where(self.dynamic[:, :, None], self.U, 0.0)
            ops = self._stage_ops[key] = _StageOperators(
                V, np.ascontiguousarray(V[:, self.nl_index, :]), first, second, history_U,
                Minv if self.sources else None)
        return ops

    def _chord_z_inverse(self, W: FloatArray, grads: FloatArray) -> FloatArray:
        """(I + W d i / d z)^-1 for the given rows' W (k, p, m) and gradients (k, m, 3)."""
        Di = np.einsum("kjc,cjq->kjq", grads, self._onehot)  # (k, m, p)
        J = W @ Di
        J[:, np.arange(self.p), np.arange(self.p)] += 1.0
        return _inverse(J)

    def newton_z(self, h: float, y: FloatArray, x0: FloatArray, max_iter: int = _MAX_NEWTON
                 ) -> tuple[FloatArray, NDArray[np.bool_], int]:
        """Solve M x + f(x) = rhs for a step h from x0 on the nonlinear unknowns only, given
        y = M^-1 rhs; same (x, converged per variant, iterations) contract as `newton`.

        Chord iteration on z + W i(z) = y_z (see `stage_operators`), variant by variant: a
        variant leaves the iteration once its update is within the tolerance; its chord matrix
        (I + W di/dz)^-1, kept across iterations, stages and steps of the same h, is formed
        again when its iteration grows (the update is then retried) or contracts by less than
        half. Then x = y - V i(z): the linear unknowns follow exactly from the nonlinear ones.
        """
        ops = self.stage_operators(h)
        V, W = ops.V, ops.W
        n_var = x0.shape[0]
        y_z = y[:, self.nl_index]
        z = np.array(x0[:, self.nl_index])
        key = float(h)
        chord = self._chord_z.get(key)
        if chord is None:
            chord = self._chord_z[key] = np.zeros((n_var, self.p, self.p))
            stale = np.ones(n_var, dtype=bool)  # no chord yet
        else:
            stale = np.zeros(n_var, dtype=bool)
        done = np.zeros(n_var, dtype=bool)
        active = np.arange(n_var)
        previous = np.full(n_var, np.inf)
        fresh = np.zeros(n_var, dtype=bool)
        it = 0
        while it < max_iter:
            it += 1
            whole = active.size == n_var
            rows = None if whole else active
            za = z if whole else z[active]
            Wa = W if whole else W[active]
            with np.errstate(over="ignore", invalid="ignore"):
                currents, grads = self.evaluate_z(za, rows, z)
                resid = za - (y_z if whole else y_z[active]) + (Wa @ currents[:, :, None])[:, :, 0]
            refresh = stale[active]
            if np.any(refresh):
                pick = active[refresh]
                chord[pick] = self._chord_z_inverse(W[pick], np.nan_to_num(grads[refresh]))
                fresh[pick] = True
                stale[pick] = False
            ca = chord if whole else chord[active]
            dz = (ca @ resid[:, :, None])[:, :, 0]
            with np.errstate(over="ignore", invalid="ignore"):
                scaled = np.max(np.abs(dz) / (_ATOL + _RTOL * np.abs(za)), axis=1, initial=0.0)
            scaled = np.where(np.isfinite(scaled), scaled, np.inf)
            prev_a = previous[active]
            growing = (scaled > prev_a) & ~fresh[active]
            if np.any(growing):
                # a stale chord diverges: keep z for these rows, form their chord and retry
                stale[active[growing]] = True
                keep = ~growing
                active_step, dz, scaled, prev_a = (active[keep], dz[keep], scaled[keep],
                                                   prev_a[keep])
            else:
                active_step = active
            if active_step.size:
                z_new = z[active_step] - np.where(np.isfinite(dz), dz, 0.0)
                z[active_step] = z_new
                ok = (scaled <= 1.0) & np.all(np.isfinite(z_new), axis=1)
                done[active_step] = ok
                with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
                    theta = scaled / prev_a
                    slow = theta > 0.5
                stale[active_step[slow & ~ok]] = True
                previous[active_step] = scaled
                fresh[active_step] = False
            active = np.flatnonzero(~done)
            if active.size == 0:
                break
        with np.errstate(over="ignore", invalid="ignore"):
            currents, _ = self.evaluate_z(z, None, z)
            x = y - (V @ currents[:, :, None])[:, :, 0]
        return x, done, it

    def newton(self, h: float | None, rhs: FloatArray, x0: FloatArray,
               limit_V: float | None = None, max_iter: int = _MAX_NEWTON
               ) -> tuple[FloatArray, NDArray[np.bool_], int]:
        """Solve M x + f(x) = rhs from x0; returns (x, converged per variant, iterations).

        Linear circuits: one solve and one refinement with the cached inverse of M (exact; no
        update limit). Nonlinear: chord (modified Newton) iteration with a Jacobian inverse kept
        across iterations, stages and steps of the same h, formed again (for the variants still
        iterating) whenever an iteration contracts by less than half (common practice in stiff
        integrators, e.g. Hairer & Wanner, Solving ODEs II, IV.8). A variant whose update is
        within the tolerance is left as it is. ``limit_V`` caps node-voltage updates (DC).
        """
        M, Minv = self.matrices(h)
        x = x0.copy()
        n_var = x.shape[0]
        if self.m == 0:  # linear: solve, then refine once
            assert Minv is not None
            for _ in range(2):
                x = x - _matvec(Minv, _matvec(M, x) - rhs)
            return x, np.ones(n_var, dtype=bool), 2
        done = np.zeros(n_var, dtype=bool)
        key = None if h is None else float(h)
        chord = self._chord.get(key)
        previous = np.full(n_var, np.inf)
        fresh = False
        active = np.arange(n_var)  # variants still iterating (a converged one is left as is)
        it = 0
        while it < max_iter:
            it += 1
            whole = active.size == n_var
            rows = None if whole else active
            xa = x if whole else x[active]
            with np.errstate(over="ignore", invalid="ignore"):
                currents, grads, _ = self.evaluate(xa, rows)
                resid = (_matvec(M if whole else M[active], xa) - (rhs if whole else rhs[active])
                         + self.nonlinear_rows(currents))
            if chord is None:  # formed again for the variants still iterating only
                chord = self.jacobian_inverse(h, np.nan_to_num(grads), rows)
                fresh = True
            if isinstance(chord, _BandFactors):
                band = self.band_plan()
                assert band is not None
                dx = _band_solve(band, chord, rows, resid)
            else:
                dx = _matvec(chord if whole else chord[active], resid)
            if limit_V is not None:
                worst = np.max(np.abs(dx[:, : self.n_nodes]), axis=1, initial=0.0)
                dx *= np.minimum(1.0, limit_V / np.maximum(worst, 1e-300))[:, None]
            with np.errstate(over="ignore", invalid="ignore"):
                scaled = np.max(np.abs(dx) / (_ATOL + _RTOL * np.abs(xa)), axis=1)
            scaled = np.where(np.isfinite(scaled), scaled, np.inf)
            prev_a = previous[active]
            if np.any(scaled > prev_a) and not fresh:
                # a stale chord diverges: keep x, form the Jacobian here and try again
                chord = None
                continue
            xa = xa - np.where(np.isfinite(dx), dx, 0.0)
            x[active] = xa
            ok = (scaled <= 1.0) & np.all(np.isfinite(xa), axis=1)
            done[active] = ok
            if np.all(ok):
                break
            if np.any((scaled > 0.5 * prev_a) & ~ok):
                chord = None  # slow contraction: the Jacobian moved, form it again
            previous[active] = scaled
            active = active[~ok]
            fresh = False
        return x, done, it

    # -- sources -------------------------------------------------------------------------------

    def source_values(self, times: FloatArray) -> FloatArray:
        """(n_source, n_var, n_t) values at ``times``."""
        out = np.empty((len(self.sources), self.n_var, times.size))
        for k, src in enumerate(self.sources):
            value = np.asarray(src.waveform(times), dtype=float)
            try:
                out[k] = np.broadcast_to(value, (self.n_var, times.size))
            except ValueError:
                raise ValueError(f"source {src.name}: waveform returned shape {value.shape}, "
                                 f"expected (n_t,) or ({self.n_var}, n_t)") from None
        return out

    def rhs(self, values: FloatArray) -> FloatArray:
        """b for source values (n_source, n_var) -> (n_var, n)."""
        b = np.zeros((self.n_var, self.n + 1))
        for k, src in enumerate(self.sources):
            if isinstance(src, VoltageSource):
                b[:, self.branch_index[src.name]] += values[k]
            else:
                b[:, self.index[src.node_pos]] -= values[k]
                b[:, self.index[src.node_neg]] += values[k]
        return b[:, : self.n]


# --- probes ------------------------------------------------------------------------------------

_PROBE = re.compile(r"^\s*(v|i|vc|s)\(\s*([A-Za-z0-9_]+)\s*(?:,\s*([A-Za-z0-9_]+)\s*)?\)\s*$")


@dataclass
class _Probe:
    plus: NDArray[np.int_]          # (k,) unknown indices (-1 ground)
    minus: NDArray[np.int_]
    scale: FloatArray               # (n_var, k)
    nonlinear: str | None = None    # name of a nonlinear branch (current probes)
    members: int = 1


def _parse_probe(system: _System, text: str) -> _Probe:
    match = _PROBE.match(text)
    if match is None:
        raise ValueError(f"probe {text!r}: write v(node), v(node_a,node_b), i(element), "
                         "s(clamp) or vc(rcline)")
    kind, first, second = match.groups()
    ix, n_var = system.index, system.n_var
    ones = np.ones((n_var, 1))

    def node(name: str) -> int:
        if name not in ix:
            close = difflib.get_close_matches(name, list(ix), n=5)
            hint = f"; did you mean {', '.join(close)}?" if close else ""
            raise ValueError(f"probe {text!r}: no node {name!r}{hint}")
        return ix[name]

    if kind == "v":
        return _Probe(np.array([node(first)]),
                      np.array([node(second) if second else -1]), ones)
    if second is not None:
        raise ValueError(f"probe {text!r}: {kind}() takes one name")
    if kind == "s":
        if first not in system.state_index:
            raise ValueError(f"probe {text!r}: no rail clamp {first!r}")
        return _Probe(np.array([system.state_index[first]]), np.array([-1]), ones)
    if kind == "vc":
        lines = system.expanded.line_nodes
        if first not in lines:
            raise ValueError(f"probe {text!r}: no RCLINE {first!r}; lines: {sorted(lines)}")
        plate, seg = lines[first]
        k = len(seg)
        return _Probe(np.full(k, node(plate)), np.array([node(s) for s in seg]),
                      np.ones((n_var, k)), members=k)
    if first in system.branch_index:
        return _Probe(np.array([system.branch_index[first]]), np.array([-1]), ones)
    el = system.elements.get(first)
    if el is not None and el.kind == "R":
        g = 1.0 / _vec(el.value, n_var, el.name)
        return _Probe(np.array([ix[el.node_a]]), np.array([ix[el.node_b]]), g[:, None])
    if el is not None:
        raise ValueError(f"probe {text!r}: the current of a capacitor is not probed")
    if any(first in fam.names for fam in system.families):
        return _Probe(np.zeros(0, int), np.zeros(0, int), np.zeros((n_var, 0)), nonlinear=first)
    if any(s.name == first for s in system.sources):
        raise ValueError(f"probe {text!r}: a current source's current is its waveform")
    raise ValueError(f"probe {text!r}: no element {first!r}")


def _probe_values(system: _System, probes: Sequence[_Probe], x: FloatArray,
                  currents: FloatArray | None) -> FloatArray:
    x_ext = np.concatenate([x, np.zeros((x.shape[0], 1))], axis=1)
    out = np.empty((x.shape[0], len(probes)))
    for k, p in enumerate(probes):
        if p.nonlinear is not None:
            assert currents is not None
            out[:, k] = system.branch_current(p.nonlinear, currents)
            continue
        values = p.scale * (x_ext[:, p.plus] - x_ext[:, p.minus])
        if p.members == 1:
            out[:, k] = values[:, 0]
        else:  # the member with the largest magnitude, with its sign
            pick = np.argmax(np.abs(values), axis=1)
            out[:, k] = values[np.arange(values.shape[0]), pick]
    return out


# --- public entry points -----------------------------------------------------------------------


def _prepare(netlist: Netlist, sources: Sequence[Source], nonlinear: Sequence[Nonlinear],
             ground: str | None, n_segments: int | None, h_min: float, gmin: float
             ) -> tuple[_System, int, bool]:
    if n_segments is None:
        n_seg, capped = auto_segments(netlist, h_min)
    else:
        if n_segments < 1:
            raise ValueError(f"n_segments = {n_segments} -> must be >= 1")
        n_seg, capped = n_segments, False
    expanded = expand(netlist, nonlinear, max(n_seg, 1))
    n_var = _count_variants(netlist, nonlinear)
    system = _System(expanded, sources, ground or netlist.ports[1], n_var, gmin)
    return system, (n_seg if expanded.line_nodes else 0), capped


def _initial_vector(system: _System, values: Mapping[str, ArrayLike] | None) -> FloatArray:
    x = np.zeros((system.n_var, system.n))
    values = dict(values or {})
    if "*" in values:
        x[:, : system.n_nodes] = _vec(values.pop("*"), system.n_var, "initial voltage *")[:, None]
    for name, value in values.items():
        if name not in system.index or system.index[name] < 0:
            raise ValueError(f"initial voltage for {name!r}: not a (non-ground) node")
        x[:, system.index[name]] = _vec(value, system.n_var, f"initial voltage {name}")
    return x


def _consistent(system: _System, x0: FloatArray, b0: FloatArray, h_min: float) -> FloatArray:
    """Satisfy the algebraic rows at t = 0 while keeping the capacitor charges and inductor
    currents of ``x0``: one backward-Euler step of 1e-6 h_min (a source that is already on
    at t = 0 then acts as a step at 0+, as in SPICE with ``uic``)."""
    h = 1e-6 * h_min / KAPPA  # so that C / (KAPPA h) = C / (1e-6 h_min)
    rhs = b0 + _matvec(system.C / (KAPPA * h), x0)
    x, _, _ = system.newton(h, rhs, x0)
    return x


def operating_point(
    netlist: Netlist,
    sources: Sequence[Source] = (),
    nonlinear: Sequence[Nonlinear] = (),
    *,
    t: float = 0.0,
    nodeset: Mapping[str, ArrayLike] | None = None,
    ground: str | None = None,
    n_segments: int = 4,
    gmin: float = GMIN_S,
) -> dict[str, FloatArray]:
    """DC operating point: capacitors open, inductors shorted, sources at time ``t``.

    Parameters
    ----------
    netlist, sources, nonlinear : as for `simulate`
    nodeset : mapping node -> V   starting guess for Newton (selects among several DC states,
                                   e.g. the both-on state of a cross-coupled pair)
    ground : str                  reference node (default: the netlist's second port)
    n_segments : int              ladder segments per RCLINE (a DC solution is exact for any N)
    gmin : float                  S from every node to ground

    Returns
    -------
    dict   node name -> V (n_variant,), ``i(name)`` -> branch current A, ``s(name)`` -> clamp
           activation, for every unknown; raises RuntimeError when Newton does not converge

    Notes
    -----
    Newton iteration with node-voltage updates limited to 1 V per iteration (common practice
    in SPICE-like solvers, no source); nodes reached only through capacitors settle at 0 V
    through gmin. `operating_point_status` returns the values with a per-variant
    convergence flag instead of raising.
    """
    values, ok = operating_point_status(netlist, sources, nonlinear, t=t, nodeset=nodeset,
                                        ground=ground, n_segments=n_segments, gmin=gmin)
    if not np.all(ok):
        bad = np.flatnonzero(~ok)[:10].tolist()
        raise RuntimeError(f"operating point did not converge for variants {bad}")
    return values


def operating_point_status(
    netlist: Netlist,
    sources: Sequence[Source] = (),
    nonlinear: Sequence[Nonlinear] = (),
    *,
    t: float = 0.0,
    nodeset: Mapping[str, ArrayLike] | None = None,
    ground: str | None = None,
    n_segments: int = 4,
    gmin: float = GMIN_S,
) -> tuple[dict[str, FloatArray], NDArray[np.bool_]]:
    """`operating_point` values and a (n_variant,) bool: Newton converged for that variant."""
    system, _, _ = _prepare(netlist, sources, nonlinear, ground, n_segments, 1.0, gmin)
    rhs = system.rhs(system.source_values(np.array([float(t)]))[..., 0])
    x0 = _initial_vector(system, nodeset)
    x, ok, _ = system.newton(None, rhs, x0, limit_V=1.0, max_iter=200)
    return {label: x[:, k] for k, label in enumerate(system.labels)}, ok


def simulate(
    netlist: Netlist,
    sources: Sequence[Source] = (),
    *,
    t_stop: float | None = None,
    dt: float | None = None,
    t_points: ArrayLike | None = None,
    probes: Sequence[str] | Mapping[str, str] | None = None,
    nonlinear: Sequence[Nonlinear] = (),
    initial: Literal["zero", "dc"] = "zero",
    initial_voltages: Mapping[str, ArrayLike] | None = None,
    nodeset: Mapping[str, ArrayLike] | None = None,
    ground: str | None = None,
    n_segments: int | None = None,
    gmin: float = GMIN_S,
) -> TransientResult:
    """Transient response of every variant of a circuit.

    Parameters
    ----------
    netlist : Netlist               R, C, L, RCLINE elements (values over variants)
    sources : sequence              `VoltageSource` / `CurrentSource` with waveforms of time
    t_stop, dt : float              uniform grid 0, dt, ..., t_stop (s); or
    t_points : array_like           any increasing grid starting at 0 (s); steps of equal
                                    length share one matrix inverse, so a grid made of a few
                                    uniform stretches costs a few inversions
    probes : sequence or mapping    ``v(node)``, ``v(node_a,node_b)`` (V); ``i(element)``
                                    (A: R, L, voltage source, any nonlinear element, from its
                                    first to its second node); ``s(clamp)`` (activation);
                                    ``vc(line)``: voltage across an RCLINE's distributed
                                    capacitance (plate minus line), the segment with the largest
                                    magnitude, signed. A mapping names them; default: every
                                    node voltage against ground
    nonlinear : sequence            `SquareLawChannel`, `DistributedChannel`, `RailClamp`,
                                    `NonlinearConductance`
    initial : {"zero", "dc"}        "zero": every unknown 0 except ``initial_voltages``
                                    (node -> V, like SPICE ``.ic`` with ``uic``; the key
                                    ``"*"`` sets every node not listed); "dc": the
                                    operating point at t = 0 (``nodeset`` guides Newton)
    ground : str                    reference node (default: the netlist's second port)
    n_segments : int | None         ladder segments per RCLINE (None: the accuracy rule in the
                                    module docstring)
    gmin : float                    S from every node to ground

    Returns
    -------
    TransientResult   probes (n_variant, n_t) at every grid time, and solver diagnostics

    Notes
    -----
    TR-BDF2 on modified nodal analysis (see the module docstring). Fixed user grid: accuracy
    is set by the step; halve dt to check convergence. Put grid points on the corners of
    piecewise-linear sources (`piecewise_grid`): a corner inside a step is smoothed over that
    step. A source already on at t = 0 acts as a step at 0+. Second-order accurate: an RC step
    response with h = tau/50 is within ~1e-4 of exp(-t/tau).
    """
    if t_points is None:
        if t_stop is None or dt is None or not (t_stop > 0 and dt > 0):
            raise ValueError("give t_points, or t_stop > 0 and dt > 0")
        n_steps = int(np.ceil(t_stop / dt - 1e-9))
        times = np.linspace(0.0, n_steps * dt, n_steps + 1)
    else:
        times = np.asarray(t_points, dtype=float).reshape(-1)
        if times.size < 2 or times[0] != 0.0 or np.any(np.diff(times) <= 0):
            raise ValueError("t_points must start at 0 and increase (at least two points)")
    # steps equal to 9 significant digits share one matrix inverse
    steps = np.array([float(f"{h:.9e}") for h in np.diff(times)])
    system, n_seg, capped = _prepare(netlist, sources, nonlinear, ground, n_segments,
                                     float(np.min(steps)), gmin)
    if probes is None:
        probe_map = {n: f"v({n})" for n in system.index if system.index[n] >= 0}
    elif isinstance(probes, Mapping):
        probe_map = dict(probes)
    else:
        probe_map = {p: p for p in probes}
    parsed = [_parse_probe(system, text) for text in probe_map.values()]
    needs_currents = any(p.nonlinear is not None for p in parsed)

    if initial == "dc":
        if initial_voltages:
            raise ValueError("initial_voltages apply to initial='zero'; use nodeset with 'dc'")
        op = operating_point(netlist, sources, nonlinear, nodeset=nodeset, ground=ground,
                             n_segments=max(n_seg, 1), gmin=gmin)
        x = np.stack([op[label] for label in system.labels], axis=1)
    elif initial == "zero":
        x = _initial_vector(system, initial_voltages)
    else:
        raise ValueError(f"initial = {initial!r} -> 'zero' or 'dc'")

    n_t = times.size
    stage_times = np.concatenate([times, times[:-1] + GAMMA * steps])
    values = system.source_values(stage_times)
    if initial == "zero":
        x = _consistent(system, x, system.rhs(values[..., 0]), float(np.min(steps)))
    out = np.empty((system.n_var, n_t, len(parsed)))
    currents, _, _ = system.evaluate(x)
    out[:, 0] = _probe_values(system, parsed, x, currents if needs_currents else None)
    converged = np.ones(system.n_var, dtype=bool)
    split = 0

    def source_rhs(k_time: int | None, t: float) -> FloatArray:
        if k_time is not None:
            return system.rhs(values[..., k_time])
        return system.rhs(system.source_values(np.array([t]))[..., 0])

    reduce = bool(system.m) and system.use_reduced and 2 * system.p <= system.n

    def stages(x_n: FloatArray, h: float, b_n: FloatArray, b_g: FloatArray, b_1: FloatArray
               ) -> tuple[FloatArray, NDArray[np.bool_]]:
        cur, _, _ = system.evaluate(x_n)
        if reduce:  # the same stages through M^-1 (`_System.stage_operators`)
            ops = system.stage_operators(h)
            y1 = _matvec(ops.first, x_n) - _matvec(ops.history_U, cur)
            if ops.Minv is not None:
                y1 += _matvec(ops.Minv, b_g + np.where(system.dynamic, b_n, 0.0))
            x_g, ok1, _ = system.newton_z(h, y1, x_n)
            y2 = _matvec(ops.second, _BDF_A * x_g - _BDF_B * x_n)
            if ops.Minv is not None:
                y2 += _matvec(ops.Minv, b_1)
            x_1, ok2, _ = system.newton_z(h, y2, x_n + (x_g - x_n) / GAMMA)
            return x_1, ok1 & ok2
        C_scaled = system.scaled_C(h)
        r_n = b_n - _matvec(system.G, x_n) - system.nonlinear_rows(cur)
        rhs1 = b_g + _matvec(C_scaled, x_n) + np.where(system.dynamic, r_n, 0.0)
        x_g, ok1, _ = system.newton(h, rhs1, x_n)
        hist = _BDF_A * x_g - _BDF_B * x_n
        rhs2 = b_1 + _matvec(C_scaled, hist)
        guess = x_n + (x_g - x_n) / GAMMA
        x_1, ok2, _ = system.newton(h, rhs2, guess)
        return x_1, ok1 & ok2

    def advance(x_n: FloatArray, t: float, h: float, b_n: FloatArray, b_g: FloatArray,
                b_1: FloatArray, depth: int) -> tuple[FloatArray, NDArray[np.bool_], int]:
        x_1, ok = stages(x_n, h, b_n, b_g, b_1)
        if np.all(ok) or depth >= _MAX_SPLIT_DEPTH:
            return x_1, ok, 0
        half = 0.5 * h
        b_mid = source_rhs(None, t + half)
        xa, oka, sa = advance(x_n, t, half, b_n, source_rhs(None, t + GAMMA * half), b_mid,
                              depth + 1)
        xb, okb, sb = advance(xa, t + half, half, b_mid,
                              source_rhs(None, t + half + GAMMA * half), b_1, depth + 1)
        return xb, oka & okb, 1 + sa + sb

    b_now = source_rhs(0, 0.0)
    for k in range(n_t - 1):
        b_next = source_rhs(k + 1, times[k + 1])
        b_gamma = source_rhs(n_t + k, times[k] + GAMMA * steps[k])
        x, ok, s = advance(x, times[k], float(steps[k]), b_now, b_gamma, b_next, 0)
        converged &= ok
        split += s
        b_now = b_next
        if needs_currents:
            currents, _, _ = system.evaluate(x)
        out[:, k + 1] = _probe_values(system, parsed, x, currents if needs_currents else None)
    result = {name: out[:, :, j] for j, name in enumerate(probe_map)}
    return TransientResult(times, result, n_seg, capped, converged, split)


def piecewise_grid(stretches: Sequence[tuple[float, float]]) -> FloatArray:
    """A time grid made of uniform stretches: ((t_end_1, step_1), (t_end_2, step_2), ...), s.

    Each stretch runs from the previous end (0 first) to t_end with a step that divides it
    evenly (rounded up to a whole number of steps); few distinct steps keep `simulate` to a
    few matrix inversions.
    """
    points = [np.zeros(1)]
    start = 0.0
    for end, step in stretches:
        if not (end > start and step > 0):
            raise ValueError(f"grid stretch ({end}, {step}) must end after {start} with step > 0")
        n = int(np.ceil((end - start) / step - 1e-9))
        points.append(np.linspace(start, end, n + 1)[1:])
        start = end
    return np.concatenate(points)


__all__ = [
    "CurrentSource",
    "DistributedChannel",
    "Expanded",
    "NonlinearConductance",
    "RailClamp",
    "SquareLawChannel",
    "TransientResult",
    "VoltageSource",
    "Waveform",
    "auto_segments",
    "constant",
    "expand",
    "operating_point",
    "operating_point_status",
    "piecewise_grid",
    "pwl",
    "simulate",
]
