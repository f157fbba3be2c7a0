"""MOM finger capacitors and MOS+MOM stacks.

Variants are grouped by their layer range (a handful of groups); within a group every layer's
dimensions are arrays over variants, evaluated by ``physics.mom.mom_capacitor``.

Vias: each comb of a layer reaches the rail layer through the via stack below it, one via stack
at each finger's bus end; the two combs are in series around the loop, so a layer's lumped via
resistance is 2 x (sum of via resistances down to the rails) / (fingers / 2).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy.constants import micro

from celllab.characterization.params import CornerSet
from celllab.physics import circuits, mom

#: Dielectric height assumed above the top metal of the deck, m (no layer above).
TOP_ILD_M = 0.5e-6


def _layer_arrays(deck: Any, geos: list[Any], position: int, n_layers: int) -> mom.MomLayer:
    names = [m.name for m in deck.metals]
    layers = [g.mom_layers[position] for g in geos]
    idx = names.index(layers[0].name)
    this = deck.metals[idx]
    above = deck.metals[idx + 1] if idx + 1 < len(deck.metals) else None
    ild = (above.height_nm - this.height_nm - this.thickness_nm) * 1e-9 if above else TOP_ILD_M
    rail = names.index(deck.layout.rail_layer)
    via_stack = sum(deck.metals[k].via_below_ohm for k in range(rail + 1, idx + 1))
    col = lambda attr: np.array([getattr(la, attr) for la in layers], dtype=float)  # noqa: E731
    count = col("finger_count")
    return mom.MomLayer(
        thickness=col("thickness_um") * micro, finger_width=col("finger_width_um") * micro,
        spacing=col("finger_space_um") * micro, finger_length=col("finger_length_um") * micro,
        finger_count=count, eps_r=this.ild_eps_r, ild_height=max(ild, 1e-9),
        eps_r_ild=above.ild_eps_r if above else this.ild_eps_r, sheet_resistance=this.sheet_ohm_per_sq,
        via_resistance=4.0 * via_stack / count)


def mom_figures(deck: Any, cells: list[Any], geos: list[Any]) -> mom.MomResult:
    """MOM capacitance and resistances for cells sharing one layer range (arrays over variants)."""
    n_layers = len(geos[0].mom_layers)
    layers = [_layer_arrays(deck, geos, p, n_layers) for p in range(n_layers)]
    below = deck.metals[[m.name for m in deck.metals].index(geos[0].mom_layers[0].name) - 1].ild_eps_r
    return mom.mom_capacitor(layers, alternate_polarity=np.array([c.mom_alternate for c in cells]),
                             eps_r_below=below)


def evaluate_metal(topology: str, deck: Any, corners: CornerSet, cells: list[Any], geos: list[Any],
                    freq: np.ndarray) -> Any:
    from celllab.characterization.mos import characterize_mos
    from celllab.characterization.oxide_stress import oxide_stress
    from celllab.characterization.topologies import (
        GroupResult,
        _flat,
        _loop_inductance,
        _mos_geometry,
        _mos_roles,
        _solve,
        _supply,
    )

    n_v, n_c = len(cells), len(corners.names)
    fig = mom_figures(deck, cells, geos)
    l_loop = _loop_inductance(deck, cells, geos)
    oxides = np.array([c.oxide for c in cells])
    supply = _supply(corners, oxides)
    c_layers = fig.layer_capacitance            # (n_layer, n_v)
    r_layers = fig.layer_line_resistance
    v_layers = fig.layer_via_resistance

    def per_layer(a: np.ndarray) -> np.ndarray:  # (n_layer, n_v) -> (n_layer, n_v * n_c)
        return np.repeat(np.broadcast_to(a, c_layers.shape), n_c, axis=1)

    if topology == "mom":
        net = circuits.mom_circuit(per_layer(c_layers), per_layer(r_layers), per_layer(v_layers),
                                   _flat(l_loop, n_v, n_c))
        z, summary = _solve(net, freq, n_v, n_c)
        nan = np.full((n_v, n_c), np.nan)
        zero = np.zeros((n_v, n_c))
        flags = [[_mom_flags(cells[i]) for _ in range(n_c)] for i in range(n_v)]
        return GroupResult(n_v, n_c, z, summary, np.broadcast_to(fig.capacitance[:, None], (n_v, n_c)).copy(),
                           zero, zero, nan, nan, supply, net, flags=flags,
                           notes=["MOM: lateral finger coupling with conformal-mapping face terms (a lower "
                                  "bound of the 2-D field solution); leakage through inter-metal dielectric "
                                  "not modelled (negligible)"])
    geo = _mos_geometry(cells, geos)
    res = characterize_mos(corners, oxides, _mos_roles(cells), geo, supply)
    ends = int(cells[0].contacted_ends)
    net = circuits.mos_mom_stack_circuit(
        c_gate=_flat(res.c_gate, n_v, n_c), r_channel=_flat(res.r_channel, n_v, n_c),
        c_mom=per_layer(c_layers), r_fingers=per_layer(r_layers), r_gate=_flat(res.r_gate, n_v, n_c),
        r_access=_flat(res.r_access, n_v, n_c), c_overlap=_flat(res.c_overlap, n_v, n_c), contacted_ends=ends,
        r_vias=per_layer(v_layers), l_loop=_flat(l_loop, n_v, n_c))
    z, summary = _solve(net, freq, n_v, n_c)
    stress = oxide_stress(corners, oxides, res.v_ox, res.v_gb, geo.gate_area)
    c_mom = fig.capacitance[:, None]
    return GroupResult(n_v, n_c, z, summary, res.c_ox_plain + c_mom, stress.leakage_A, stress.e_ox_V_per_m,
                       stress.ttf_s, stress.vbd_pulse_V, supply, net, res.cv_bias, res.cv_cap + c_mom[..., None],
                       res.v_gb, res.c_gate + res.c_overlap + c_mom, res.flags,
                       notes=["MOS+MOM: MOS decap and finger capacitor in parallel in one footprint"])


def _mom_flags(cell: Any) -> list[str]:
    return ["no_gate_oxide: tddb_life_years and pulse_vbd_V are empty (a mom cell has no gate oxide)"]
