"""MOS+MOM stacks: a single-device MOS decap with a MOM finger capacitor above it, in parallel.

The MOS device (``mos_device``: nmos or pmos, gate on a rail) makes the cell not ESD-safe.
Geometry rule: one MOS device per row as in ``single_mos``, and MOM fingers over the whole
outline as in ``mom``. Evaluation: ``circuits.mos_mom_stack_circuit`` with the device of
``characterization.mos`` and the finger figures of ``topologies.mom``.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from celllab.characterization.junctions import junction_leakage
from celllab.characterization.oxide_stress import oxide_stress
from celllab.characterization.params import CornerSet
from celllab.physics import circuits
from celllab.topologies import common
from celllab.topologies.geometry import MOM_FIELDS, MOS_FIELDS, OUTLINE_FIELDS, Geometry, place_mom
from celllab.topologies.mom import LayerValues, mom_figures
from celllab.topologies.registry import Topology
from celllab.topologies.single_mos import one_device_per_row
from celllab.topologies.wells import biased_wells


def device_and_fingers(spec: Any, deck: Any, geo: Geometry) -> None:
    """One MOS device per row, MOM fingers over the whole outline."""
    one_device_per_row(spec, deck, geo)
    place_mom(spec, deck, geo)


def contacts_and_layers(cell: Any, geo: Geometry) -> tuple[Any, ...]:
    """Circuit-structure key: channel contacts and MOM layer range."""
    return (cell.contacted_ends, tuple(la.name for la in geo.mom_layers))


def evaluate(deck: Any, corners: CornerSet, cells: Sequence[Any], geos: Sequence[Any],
             freq: np.ndarray) -> common.GroupResult:
    """Figures of a group of MOS+MOM cells sharing contacts and layer range."""
    n_v, n_c = len(cells), len(corners.names)
    fig = mom_figures(corners, cells, geos)
    per = LayerValues(fig, n_v, n_c)
    dev = common.mos_devices(corners, cells, geos, np.array([c.mos_device for c in cells]))
    res = dev.result
    flat = common.flat
    net = circuits.mos_mom_stack_circuit(
        c_gate=flat(res.c_gate, n_v, n_c), r_channel=flat(res.r_channel, n_v, n_c),
        c_mom=per.capacitance, r_fingers=per.line_resistance, r_gate=flat(res.r_gate, n_v, n_c),
        r_access=flat(res.r_access, n_v, n_c), c_overlap=flat(res.c_overlap, n_v, n_c),
        contacted_ends=2 if int(cells[0].contacted_ends) == 2 else 1, r_vias=per.via_resistance,
        l_loop=flat(common.loop_inductance(corners, geos), n_v, n_c))
    sol = common.solve(net, freq, n_v, n_c, common.lumped_limit(deck, geos))
    roles = np.array([c.mos_device for c in cells])
    stress = oxide_stress(corners, dev.oxides, roles, res.v_ox, res.v_gb, dev.geometry.gate_area)
    junction, junction_flags = junction_leakage(corners, *biased_wells(deck, cells, geos, roles), dev.supply_V)
    c_mom = np.broadcast_to(fig.capacitance, (n_v, n_c))
    return common.GroupResult(
        n_variant=n_v, n_corner=n_c, z_ohm=sol.z_ohm, summary=sol.summary, cap_ox_F=res.c_ox_plain + c_mom,
        gate_leakage_A=stress.leakage_A, junction_leakage_A=junction, e_ox_V_per_m=stress.e_ox_V_per_m,
        tddb_rate_per_s_m2=stress.tddb_rate_per_s_m2,
        vbd_pulse_V=stress.vbd_pulse_V, supply_V=dev.supply_V, netlist=net, cv_bias=res.cv_bias,
        cv_cap=res.cv_cap + c_mom[..., None], cv_operating_V=res.v_gb,
        cv_operating_F=res.c_gate + res.c_overlap + c_mom, flags=common.merge_flags(res.flags, junction_flags),
        notes=["MOS+MOM: MOS decap and finger capacitor in parallel in one footprint"])


TOPOLOGIES = (
    Topology(name="mos_mom", description="MOS decap with a MOM finger capacitor above it",
             esd_safe=False, fields=OUTLINE_FIELDS | MOS_FIELDS | MOM_FIELDS | {"mos_device"},
             geometry=device_and_fingers, evaluate=evaluate, circuit_key=contacts_and_layers, order=60),
)
