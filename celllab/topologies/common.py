"""What every topology's evaluation shares: the group result, the circuit solve and MOS set-up.

A topology evaluates a *group* of cells at once: arrays are (n_variant, n_corner[, n_freq |
n_bias]), SI units (F, ohm, H, V, A, s, V/m). The equivalent circuit of every variant x corner
is one ``Netlist`` with flattened values (variant-major), solved in one call of
``solve_impedance``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.constants import giga, micro, nano, speed_of_light

from celllab.characterization.mos import MosGeometry, MosResult, characterize_mos
from celllab.characterization.params import CornerSet
from celllab.physics import circuits, impedance, inductance
from celllab.physics.netlist import Netlist, solve_impedance

#: Frequency at which the ``esr_1GHz_ohm`` metric reads Re Z, Hz.
ESR_PROBE_HZ = 1.0 * giga
#: SRF and cutoff above the swept band are searched in the circuit up to this factor x its top
#: at most (and never beyond ``lumped_limit``).
BEYOND_BAND_FACTOR = 1e3
#: Cell size, in wavelengths, up to which a lumped circuit holds (common practice, no source).
LUMPED_WAVELENGTHS = 10.0


@dataclass(kw_only=True)
class GroupResult:
    """Figures of one topology group; arrays (n_variant, n_corner[, ...]), SI units."""

    n_variant: int
    n_corner: int
    z_ohm: np.ndarray                  # (n_v, n_c, n_f) complex ohm
    summary: dict[str, np.ndarray]     # impedance.summarize, reshaped to (n_v, n_c, ...)
    cap_ox_F: np.ndarray               # plain Cox x area (plus metal capacitance), F
    gate_leakage_A: np.ndarray         # gate tunnelling current at the supply, A
    junction_leakage_A: np.ndarray     # reverse current of biased well junctions, A (NaN: not modelled)
    e_ox_V_per_m: np.ndarray           # SiO2-equivalent oxide field, V/m
    tddb_rate_per_s_m2: np.ndarray     # mission-average TDDB failures per second per m^2 of gate oxide
    vbd_pulse_V: np.ndarray            # pulse breakdown voltage, V
    supply_V: np.ndarray               # rail voltage, V
    netlist: Netlist                   # values over n_variant x n_corner (variant-major)
    cv_bias: np.ndarray | None = None  # (n_v, n_c, n_bias) V
    cv_cap: np.ndarray | None = None   # (n_v, n_c, n_bias) F
    cv_operating_V: np.ndarray | None = None
    cv_operating_F: np.ndarray | None = None
    flags: list[list[list[str]]] = field(default_factory=list)   # [variant][corner] -> flags
    notes: list[str] = field(default_factory=list)

    def row(self, variant: int) -> tuple["GroupResult", int]:
        """(group holding this variant, its index there)."""
        return self, variant

    def netlist_for(self, variant: int, corner: int) -> Netlist:
        """The equivalent circuit of one variant at one corner (plain float values)."""
        return self.netlist.variant(variant * self.n_corner + corner)


@dataclass
class MergedGroup:
    """Several GroupResults (sub-groups with different circuit structure) in one variant order."""

    parts: list[tuple[list[int], GroupResult]]

    def row(self, variant: int) -> tuple[GroupResult, int]:
        for idx, part in self.parts:
            if variant in idx:
                return part, idx.index(variant)
        raise IndexError(variant)


@dataclass(frozen=True)
class Solution:
    """A solved group circuit: Z (n_v, n_c, n_f) and its figures of merit (n_v, n_c, ...)."""

    z_ohm: np.ndarray
    summary: dict[str, np.ndarray]


def flat(a: np.ndarray, n_v: int, n_c: int) -> np.ndarray:
    """(n_v, n_c)-broadcastable array -> (n_v * n_c,), variant-major (netlist value order)."""
    return np.broadcast_to(a, (n_v, n_c)).reshape(-1)


def series_inductance(net: Netlist, n: int) -> np.ndarray:
    """(n,) loop inductance of each flattened variant, H: the ``l_loop`` element (0 without one)."""
    try:
        value = net.element("l_loop").value
    except KeyError:
        value = 0.0
    return np.broadcast_to(np.asarray(value, dtype=float), (n,)).copy()


def solve(net: Netlist, freq: np.ndarray, n_v: int, n_c: int, lumped_limit_Hz: np.ndarray | None = None) -> Solution:
    """Solve the group's circuit over ``freq`` (Hz) and summarize each variant x corner.

    The usable bandwidth is read with the loop inductance removed and capped at the SRF
    (``impedance.summarize``). Where the SRF or the cutoff lies above the sweep, the circuit is
    searched up to where it still describes the cell, ``lumped_limit_Hz`` (n_v,) (default
    ``BEYOND_BAND_FACTOR`` x the sweep's top; ``lumped_limit``), by
    ``impedance.extend_beyond_sweep``: the summary then carries the computed value with
    ``*_beyond_band`` set, or, where nothing is found up there, that limit with ``*_is_bound`` set
    (a lower bound, never a result).
    """
    n = n_v * n_c
    z = solve_impedance(net, freq)
    if z.shape[0] == 1 and n > 1:
        z = np.broadcast_to(z, (n, z.shape[-1]))
    l_series = series_inductance(net, n)
    summary = impedance.summarize(freq, z, esr_freqs_Hz=(ESR_PROBE_HZ,), series_inductance=l_series)
    limit = (np.full(n_v, BEYOND_BAND_FACTOR * freq[-1]) if lumped_limit_Hz is None
             else np.minimum(np.asarray(lumped_limit_Hz, dtype=float).reshape(n_v), BEYOND_BAND_FACTOR * freq[-1]))
    summary.update(_beyond_band(net, freq, summary, l_series, np.repeat(limit, n_c)))
    shaped = {k: (v.reshape((n_v, n_c) + v.shape[1:]) if isinstance(v, np.ndarray) and v.ndim >= 1
                  and v.shape[0] == n_v * n_c else v) for k, v in summary.items()}
    return Solution(z.reshape(n_v, n_c, -1), shaped)


def merge_flags(*parts: list[list[list[str]]]) -> list[list[list[str]]]:
    """[variant][corner] flag lists joined part by part, each flag once, in first-seen order."""
    merged: list[list[list[str]]] = []
    for per_variant in zip(*parts):
        merged.append([list(dict.fromkeys(f for part in per_corner for f in part)) for per_corner in zip(*per_variant)])
    return merged


def _beyond_band(net: Netlist, freq: np.ndarray, summary: dict[str, np.ndarray], l_series: np.ndarray,
                 top: np.ndarray) -> dict[str, np.ndarray]:
    """SRF and bandwidth above the sweep from the circuit (searched up to ``top`` (n,) Hz), with
    their beyond-band and bound marks."""
    n = top.size
    srf, bw_rc = summary["srf_Hz"], summary["bandwidth_rc_Hz"]
    need_srf, need_bw = np.isposinf(srf), np.isposinf(bw_rc)
    out = {"srf_beyond_band": need_srf.copy(), "srf_is_bound": np.zeros(n, dtype=bool),
           "bandwidth_beyond_band": np.zeros(n, dtype=bool), "bandwidth_is_bound": np.zeros(n, dtype=bool)}
    if not np.any(need_srf | need_bw):
        return out
    top = np.maximum(top, freq[-1])
    ext = impedance.extend_beyond_sweep(lambda f: _broadcast_rows(solve_impedance(net, f), n), float(freq[-1]),
                                        summary["c_lf_F"], l_series, need_srf, need_bw, top,
                                        impedance_rows=lambda f, rows: _broadcast_rows(
                                            solve_impedance(net.take(rows), f), len(rows)))
    srf = np.where(need_srf, ext["srf_Hz"], srf)
    out["srf_is_bound"] = np.isposinf(srf)
    srf = np.where(out["srf_is_bound"], top, srf)
    bw_rc = np.where(need_bw, ext["bandwidth_rc_Hz"], bw_rc)
    bandwidth = impedance.capped_bandwidth(bw_rc, srf)
    # the bandwidth is a bound only where it rests on a bound (an SRF not found, or no cutoff)
    out["bandwidth_is_bound"] = (out["srf_is_bound"] & (bandwidth >= srf)) | np.isposinf(bandwidth)
    bandwidth = np.where(np.isposinf(bandwidth), top, bandwidth)
    out["bandwidth_beyond_band"] = bandwidth > freq[-1]
    out.update(srf_Hz=srf, bandwidth_rc_Hz=bw_rc, bandwidth_Hz=bandwidth)
    return out


def _broadcast_rows(z: np.ndarray, n: int) -> np.ndarray:
    return np.broadcast_to(z, (n, z.shape[-1])) if z.shape[0] == 1 and n > 1 else z


def lumped_limit(deck: Any, geos: Sequence[Any]) -> np.ndarray:
    """(n_v,) highest frequency at which a cell's lumped equivalent circuit still holds, Hz.

    A lumped circuit describes a structure smaller than about a tenth of the wavelength (common
    practice, no source): f = c / (10 sqrt(eps_r) d) with d the cell's larger outline dimension
    and eps_r the dielectric around its rail layer. A 10 um cell in eps_r 3.9: 1.5 THz.
    """
    eps_r = deck.metal(deck.layout.rail_layer).ild_eps_r
    size = np.array([max(g.cell_width_um, g.cell_height_um) for g in geos]) * micro
    return np.asarray(speed_of_light / (LUMPED_WAVELENGTHS * np.sqrt(eps_r) * size), dtype=float)


def area_weighted(rate_a: np.ndarray, area_a: np.ndarray, rate_b: np.ndarray, area_b: np.ndarray) -> np.ndarray:
    """Rate per unit area of two oxides together, (rate_a A_a + rate_b A_b) / (A_a + A_b).

    Independent weakest-link failures: the hazards (rate x area) add (series system).
    """
    return np.asarray((rate_a * area_a + rate_b * area_b) / (area_a + area_b), dtype=float)


def oxides_of(cells: Sequence[Any]) -> np.ndarray:
    """(n_variant,) oxide flavour names."""
    return np.array([c.oxide for c in cells])


def rails_of(cells: Sequence[Any]) -> np.ndarray:
    """(n_variant,) names of the rail each cell decouples ("core", "io" or a named rail)."""
    return np.array([c.rail for c in cells])


def supply(corners: CornerSet, rails: np.ndarray) -> np.ndarray:
    """(n_variant, n_corner) voltage of each variant's rail at each corner, V.

    ``rails`` holds rail names ("core", "io" or a deck's named rail); the characterization supply
    follows the rail a cell decouples, not its oxide.
    """
    names, index = np.unique(np.asarray(rails, dtype=str), return_inverse=True)
    table = np.array([[d.supply_for(str(n)) for d in corners.decks] for n in names], dtype=float)
    return table[index.reshape(-1)]


def mos_geometry(cells: Sequence[Any], geos: Sequence[Any], device: str = "first") -> MosGeometry:
    """Per-variant MOS geometry (n_variant, 1) in SI from the resolved geometries (um).

    ``device``: "first" for the cell's device (the NMOS of a two-device cell), "pmos" for the
    PMOS of a two-device cell (``Geometry.pmos_gate_width_um``).
    """
    col = lambda values: np.asarray(values, dtype=float)[:, None]  # noqa: E731
    width = [g.pmos_gate_width_um if device == "pmos" else g.gate_width_um for g in geos]
    return MosGeometry(
        gate_length=col([g.gate_length_um for g in geos]) * micro,
        gate_width_row=col([w / c.height_rows for w, c in zip(width, cells)]) * micro,
        rows=col([c.height_rows for c in cells]),
        fingers=col([c.fingers for c in cells]),
        strips=col([c.fingers + 1 for c in cells]),
        contacted_ends=col([c.contacted_ends for c in cells]),
        gate_contacted_ends=col([c.gate_contacted_ends for c in cells]),
    )


def loop_inductance(corners: CornerSet, geos: Sequence[Any]) -> np.ndarray:
    """Rail-pair loop inductance of each cell at each corner, H (n_v, n_c).

    The rail's printed width (drawn + the rail layer's ``width_bias_nm``) and thickness come from
    each corner's deck.
    """
    def rail(d: Any) -> Any:
        return d.metal(d.layout.rail_layer)

    width = (corners.deck_value(lambda d: d.layout.rail_width_um) * micro
             + corners.deck_value(lambda d: rail(d).width_bias_nm) * nano)
    thickness = corners.deck_value(lambda d: rail(d).thickness_nm) * nano
    length = np.array([g.cell_width_um for g in geos])[:, None] * micro
    sep = np.array([g.cell_height_um for g in geos])[:, None] * micro
    return inductance.loop_inductance(length, width, sep, thickness)


@dataclass(frozen=True)
class MosDevices:
    """One MOS device per variant, characterized at the rail voltage."""

    result: MosResult
    oxides: np.ndarray
    supply_V: np.ndarray
    geometry: MosGeometry


def mos_devices(corners: CornerSet, cells: Sequence[Any], geos: Sequence[Any], roles: np.ndarray) -> MosDevices:
    """Characterize one MOS device per cell in the given device ``roles`` (``mos.ROLES``)."""
    oxides = oxides_of(cells)
    rail = supply(corners, rails_of(cells))
    geo = mos_geometry(cells, geos)
    return MosDevices(characterize_mos(corners, oxides, roles, geo, rail), oxides, rail, geo)


def mos_circuit(res: MosResult, geo: MosGeometry, l_loop: np.ndarray, n_v: int, n_c: int, name: str) -> Netlist:
    """The tied-gate MOS decap circuit of a group (``circuits.mos_decap_circuit``)."""
    return circuits.mos_decap_circuit(
        c_gate=flat(res.c_gate, n_v, n_c), r_channel=flat(res.r_channel, n_v, n_c),
        r_gate=flat(res.r_gate, n_v, n_c), r_access=flat(res.r_access, n_v, n_c),
        l_loop=flat(l_loop, n_v, n_c), c_overlap=flat(res.c_overlap, n_v, n_c),
        contacted_ends=2 if int(geo.contacted_ends.flat[0]) == 2 else 1,  # one value per sub-group
        name=name)


def by_contacted_ends(cell: Any, geo: Any) -> tuple[Any, ...]:
    """Circuit-structure key of MOS cells: the channel is contacted at one end or both."""
    return (cell.contacted_ends,)
