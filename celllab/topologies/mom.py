"""MOM finger capacitors: interdigitated metal fingers over the rails, no gate oxide.

ESD-safe (no gate at all). Variants are grouped by their layer range (a handful of groups);
within a group every layer's dimensions are arrays over variants, evaluated by
``physics.mom.mom_capacitor``.

Geometry rule: fingers over the whole outline on the layers ``mom_bottom`` .. ``mom_top``
(``geometry.place_mom``).

Vias: each comb of a layer reaches the rail layer through the via stack below it, one via stack
at each finger's bus end; the two combs are in series around the loop, so a layer's lumped via
resistance is 2 x (sum of via resistances down to the rails) / (fingers / 2).

Corners: the process values of the metals (thickness, printed-width bias, heights and so the
inter-layer dielectric, permittivities, sheet and via resistances at the corner temperature)
come from each corner's deck; the drawn finger width and space, count and length are the cell's
geometry. The printed finger is w + bias wide and the gap s - bias (pitch kept).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from scipy.constants import micro, nano

from celllab.characterization.params import CornerSet
from celllab.physics import circuits, mom
from celllab.topologies import common
from celllab.topologies.geometry import MOM_FIELDS, OUTLINE_FIELDS, Geometry, place_mom
from celllab.topologies.registry import Topology

#: Dielectric height assumed above the top metal of the deck, m (no layer above).
TOP_ILD_M = 0.5 * micro
#: Smallest inter-layer dielectric height the field model is given, m.
MIN_ILD_M = 1.0 * nano
#: Columns a cell without gate oxide leaves empty (its flag names each, so none reads as a failure).
NO_OXIDE_COLUMNS = ("tddb_fit_per_mm2", "pulse_vbd_V", "hbm_oxide_peak_V", "hbm_over_vbd_ns", "hbm_margin_V",
                    "cdm_oxide_peak_V", "cdm_over_vbd_ns", "cdm_margin_V", "hbm_oxide_share_pct",
                    "esd_series_helps", "broken_oxide_mA", "broken_oxide_mW", "broken_oxide_ok")
NO_GATE_OXIDE = ("no_gate_oxide: " + ", ".join(NO_OXIDE_COLUMNS)
                 + " are empty (a mom cell has no gate oxide to stress, zap or break)")


def _layer_arrays(corners: CornerSet, geos: Sequence[Any], position: int) -> mom.MomLayer:
    """One layer of a group's MOM stacks as (n_variant, n_corner) arrays, SI."""
    layers = [g.mom_layers[position] for g in geos]
    name = layers[0].name

    def at_corners(getter: Any) -> np.ndarray:
        return corners.deck_value(lambda d: getter(d, [m.name for m in d.metals].index(name)))

    def ild(d: Any, idx: int) -> float:
        this = d.metals[idx]
        if idx + 1 >= len(d.metals):
            return TOP_ILD_M
        return max((d.metals[idx + 1].height_nm - this.height_nm - this.thickness_nm) * nano, MIN_ILD_M)

    def above(d: Any, idx: int) -> Any:
        return d.metals[min(idx + 1, len(d.metals) - 1)]

    def via_stack(d: Any, idx: int) -> float:
        rail = [m.name for m in d.metals].index(d.layout.rail_layer)
        return float(sum(d.metals[k].via_below_ohm for k in range(rail + 1, idx + 1)))

    col = lambda attr: np.array([getattr(la, attr) for la in layers], dtype=float)[:, None]  # noqa: E731
    count = col("finger_count")
    bias = at_corners(lambda d, i: d.metals[i].width_bias_nm) * nano
    return mom.MomLayer(
        thickness=at_corners(lambda d, i: d.metals[i].thickness_nm) * nano,
        finger_width=col("finger_width_um") * micro + bias, spacing=col("finger_space_um") * micro - bias,
        finger_length=col("finger_length_um") * micro, finger_count=count,
        eps_r=at_corners(lambda d, i: d.metals[i].ild_eps_r), ild_height=at_corners(ild),
        eps_r_ild=at_corners(lambda d, i: above(d, i).ild_eps_r),
        sheet_resistance=at_corners(lambda d, i: d.metals[i].sheet_ohm_per_sq),
        via_resistance=4.0 * at_corners(via_stack) / count)


def mom_figures(corners: CornerSet, cells: Sequence[Any], geos: Sequence[Any]) -> mom.MomResult:
    """MOM capacitance and resistances for cells sharing one layer range, arrays (n_variant, n_corner)."""
    layers = [_layer_arrays(corners, geos, p) for p in range(len(geos[0].mom_layers))]
    bottom = geos[0].mom_layers[0].name
    below = corners.deck_value(lambda d: d.metals[[m.name for m in d.metals].index(bottom) - 1].ild_eps_r)
    return mom.mom_capacitor(layers, alternate_polarity=np.array([c.mom_alternate for c in cells])[:, None],
                             eps_r_below=below)


class LayerValues:
    """A MOM group's per-layer C, finger R and via R over variant x corner, for the circuit."""

    def __init__(self, fig: mom.MomResult, n_v: int, n_c: int) -> None:
        self.capacitance = _flat_layers(fig.layer_capacitance, n_v, n_c)
        self.line_resistance = _flat_layers(fig.layer_line_resistance, n_v, n_c)
        self.via_resistance = _flat_layers(fig.layer_via_resistance, n_v, n_c)


def _flat_layers(a: np.ndarray, n_v: int, n_c: int) -> np.ndarray:
    """(n_layer, n_v, n_c) -> (n_layer, n_v * n_c), variant-major like ``common.flat``."""
    return np.broadcast_to(a, (a.shape[0], n_v, n_c)).reshape(a.shape[0], n_v * n_c)


def layers_between(cell: Any, geo: Geometry) -> tuple[Any, ...]:
    """Circuit-structure key: cells sharing one layer range share one circuit."""
    return (tuple(la.name for la in geo.mom_layers),)


def evaluate(deck: Any, corners: CornerSet, cells: Sequence[Any], geos: Sequence[Any],
             freq: np.ndarray) -> common.GroupResult:
    """Figures of a group of MOM cells sharing one layer range."""
    n_v, n_c = len(cells), len(corners.names)
    fig = mom_figures(corners, cells, geos)
    per = LayerValues(fig, n_v, n_c)
    net = circuits.mom_circuit(per.capacitance, per.line_resistance, per.via_resistance,
                               common.flat(common.loop_inductance(corners, geos), n_v, n_c))
    sol = common.solve(net, freq, n_v, n_c, common.lumped_limit(deck, geos))
    nan = np.full((n_v, n_c), np.nan)
    zero = np.zeros((n_v, n_c))
    return common.GroupResult(
        n_variant=n_v, n_corner=n_c, z_ohm=sol.z_ohm, summary=sol.summary,
        cap_ox_F=np.broadcast_to(fig.capacitance, (n_v, n_c)).copy(), gate_leakage_A=zero,
        junction_leakage_A=zero, e_ox_V_per_m=zero, tddb_rate_per_s_m2=nan, vbd_pulse_V=nan,
        supply_V=common.supply(corners, common.rails_of(cells)),
        netlist=net, flags=[[[NO_GATE_OXIDE] for _ in range(n_c)] for _ in range(n_v)],
        notes=["MOM: lateral finger coupling with conformal-mapping face terms (a lower bound of the 2-D "
               "field solution); leakage through inter-metal dielectric not modelled (negligible)"])


TOPOLOGIES = (
    Topology(name="mom", description="metal finger capacitor over the rails (no gate oxide)", esd_safe=True,
             fields=OUTLINE_FIELDS | MOM_FIELDS, geometry=place_mom, evaluate=evaluate,
             circuit_key=layers_between, order=50),
)
