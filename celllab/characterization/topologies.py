"""Per-topology evaluation: device models -> equivalent circuit -> Z(f) -> figures of merit.

Each ``_evaluate_*`` function takes a group of cells of one topology and returns a
``GroupResult`` whose arrays are (n_variant, n_corner[, n_freq | n_bias]). The equivalent circuit
of every variant x corner is one ``Netlist`` with flattened values (variant-major), solved in one
call of ``solve_impedance``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.constants import micro

from celllab.characterization.mos import MosGeometry, MosResult, characterize_mos
from celllab.characterization.oxide_stress import oxide_stress
from celllab.characterization.params import CornerSet
from celllab.physics import circuits, impedance, inductance
from celllab.physics.netlist import Netlist, solve_impedance

ESR_PROBE_HZ = 1.0e9


@dataclass
class GroupResult:
    n_variant: int
    n_corner: int
    z_ohm: np.ndarray                  # (n_v, n_c, n_f)
    summary: dict[str, np.ndarray]     # impedance.summarize, reshaped to (n_v, n_c, ...)
    cap_ox_F: np.ndarray
    leakage_A: np.ndarray
    e_ox_V_per_m: np.ndarray
    ttf_s: np.ndarray
    vbd_pulse_V: np.ndarray
    supply_V: np.ndarray
    netlist: Netlist
    cv_bias: np.ndarray | None = None
    cv_cap: np.ndarray | None = None
    cv_operating_V: np.ndarray | None = None
    cv_operating_F: np.ndarray | None = None
    flags: list[list[list[str]]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    def row(self, variant: int) -> tuple["GroupResult", int]:
        """(group holding this variant, its index there)."""
        return self, variant

    def netlist_for(self, variant: int, corner: int) -> Netlist:
        """The equivalent circuit of one variant at one corner (plain float values)."""
        return self.netlist.variant(variant * self.n_corner + corner)


def _flat(a: np.ndarray, n_v: int, n_c: int) -> np.ndarray:
    return np.broadcast_to(a, (n_v, n_c)).reshape(-1)


def _solve(net: Netlist, freq: np.ndarray, n_v: int, n_c: int) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    z = solve_impedance(net, freq)
    if z.shape[0] == 1 and n_v * n_c > 1:
        z = np.broadcast_to(z, (n_v * n_c, z.shape[-1]))
    summary = impedance.summarize(freq, z, esr_freqs_Hz=(ESR_PROBE_HZ,))
    shaped = {k: (v.reshape((n_v, n_c) + v.shape[1:]) if isinstance(v, np.ndarray) and v.ndim >= 1
                  and v.shape[0] == n_v * n_c else v) for k, v in summary.items()}
    return z.reshape(n_v, n_c, -1), shaped


def _supply(deck_corners: CornerSet, oxides: np.ndarray) -> np.ndarray:
    core = deck_corners.deck_value(lambda d: d.supplies.core_V)
    io = deck_corners.deck_value(lambda d: d.supplies.io_V)
    return np.where((oxides == "io")[:, None], io, core)


def _mos_geometry(cells: list[Any], geos: list[Any], per_device_rows: bool = True) -> MosGeometry:
    col = lambda values: np.asarray(values, dtype=float)[:, None]  # noqa: E731
    return MosGeometry(
        gate_length=col([g.gate_length_um for g in geos]) * micro,
        gate_width_row=col([g.gate_width_um / c.height_rows for g, c in zip(geos, cells)]) * micro,
        rows=col([c.height_rows for c in cells]),
        fingers=col([c.fingers for c in cells]),
        strips=col([c.fingers + 1 for c in cells]),
        contacted_ends=col([c.contacted_ends for c in cells]),
        gate_contacted_ends=col([c.gate_contacted_ends for c in cells]),
    )


def _loop_inductance(deck: Any, cells: list[Any], geos: list[Any]) -> np.ndarray:
    """Rail-pair loop inductance of each cell, H (n_v, 1)."""
    rail = deck.metal(deck.layout.rail_layer)
    length = np.array([g.cell_width_um for g in geos])[:, None] * micro
    sep = np.array([g.cell_height_um for g in geos])[:, None] * micro
    return inductance.loop_inductance(length, deck.layout.rail_width_um * micro, sep, rail.thickness_nm * 1e-9)


def _mos_roles(cells: list[Any]) -> np.ndarray:
    roles = []
    for c in cells:
        if c.topology == "nmos_inversion":
            roles.append("nmos")
        elif c.topology == "pmos_inversion":
            roles.append("pmos")
        elif c.topology == "accumulation":
            roles.append("acc_n" if c.accumulation_well == "n" else "acc_p")
        elif c.topology == "mos_mom":
            roles.append(c.mos_device)
        else:
            raise ValueError(c.topology)
    return np.array(roles)


def _single_mos(deck: Any, corners: CornerSet, cells: list[Any], geos: list[Any]) -> tuple[MosResult, np.ndarray, np.ndarray, MosGeometry]:
    oxides = np.array([c.oxide for c in cells])
    supply = _supply(corners, oxides)
    geo = _mos_geometry(cells, geos)
    res = characterize_mos(corners, oxides, _mos_roles(cells), geo, supply)
    return res, oxides, supply, geo


def _mos_circuit(res: MosResult, geo: MosGeometry, l_loop: np.ndarray, n_v: int, n_c: int, name: str) -> Netlist:
    return circuits.mos_decap_circuit(
        c_gate=_flat(res.c_gate, n_v, n_c), r_channel=_flat(res.r_channel, n_v, n_c),
        r_gate=_flat(res.r_gate, n_v, n_c), r_access=_flat(res.r_access, n_v, n_c),
        l_loop=_flat(l_loop, n_v, n_c), c_overlap=_flat(res.c_overlap, n_v, n_c),
        contacted_ends=int(geo.contacted_ends.flat[0]),  # one value per sub-group
        name=name)


def _evaluate_mos(topology: str, deck: Any, corners: CornerSet, cells: list[Any], geos: list[Any],
                  freq: np.ndarray) -> GroupResult:
    n_v, n_c = len(cells), len(corners.names)
    res, oxides, supply, geo = _single_mos(deck, corners, cells, geos)
    l_loop = _loop_inductance(deck, cells, geos)
    net = _mos_circuit(res, geo, l_loop, n_v, n_c, topology)
    z, summary = _solve(net, freq, n_v, n_c)
    stress = oxide_stress(corners, oxides, res.v_ox, res.v_gb, geo.gate_area)
    op_cap = res.c_gate + res.c_overlap
    return GroupResult(n_v, n_c, z, summary, res.c_ox_plain, stress.leakage_A, stress.e_ox_V_per_m, stress.ttf_s,
                       stress.vbd_pulse_V, supply, net, res.cv_bias, res.cv_cap, res.v_gb, op_cap, res.flags)


@dataclass
class MergedGroup:
    """Several GroupResults (sub-groups with different circuit structure) in one variant order."""

    parts: list[tuple[list[int], GroupResult]]

    def row(self, variant: int) -> tuple[GroupResult, int]:
        for idx, part in self.parts:
            if variant in idx:
                return part, idx.index(variant)
        raise IndexError(variant)


def _subgroup_key(topology: str, cell: Any, geo: Any) -> tuple[Any, ...]:
    """Cells whose equivalent circuits share one structure."""
    layers = tuple(la.name for la in geo.mom_layers)
    if topology == "mom":
        return (layers,)
    if topology == "mos_mom":
        return (cell.contacted_ends, layers)
    return (cell.contacted_ends,)


def _evaluate_one(topology: str, deck: Any, corners: CornerSet, cells: list[Any], geos: list[Any],
                  freq: np.ndarray) -> GroupResult:
    if topology in ("nmos_inversion", "pmos_inversion", "accumulation"):
        return _evaluate_mos(topology, deck, corners, cells, geos, freq)
    if topology == "cross_coupled":
        from celllab.characterization.pair import evaluate_cross_coupled

        return evaluate_cross_coupled(deck, corners, cells, geos, freq)
    if topology in ("mom", "mos_mom"):
        from celllab.characterization.metal import evaluate_metal

        return evaluate_metal(topology, deck, corners, cells, geos, freq)
    raise ValueError(f"unknown topology {topology!r}")


def evaluate(topology: str, deck: Any, corners: CornerSet, cells: list[Any], geos: list[Any],
             freq: np.ndarray) -> GroupResult | MergedGroup:
    """Evaluate a group of cells that share one topology (split by circuit structure)."""
    keys = [_subgroup_key(topology, c, g) for c, g in zip(cells, geos)]
    order = sorted(set(keys), key=keys.index)
    parts = []
    for key in order:  # a handful of circuit structures per topology, not one per variant
        idx = [i for i, k in enumerate(keys) if k == key]
        parts.append((idx, _evaluate_one(topology, deck, corners, [cells[i] for i in idx],
                                         [geos[i] for i in idx], freq)))
    return parts[0][1] if len(parts) == 1 else MergedGroup(parts)
