"""Single-device MOS decaps: the gate on one rail, channel (or accumulated body) on the other.

``nmos_inversion``: n+ gate over a p-well in inversion; ``pmos_inversion``: p+ gate over an
n-well in inversion; ``accumulation``: n+ gate in an n-well (or p+ in a p-well) in
accumulation. None is ESD-safe: the gate oxide sits directly across the rails.

Geometry rule (``geometry.device_band``, stated in ``celllab.topologies.geometry``): one device
per row. In a core row the NMOS sits on the p-well half and the PMOS on the n-well half, the
other half left to its well. An accumulation device's well is on the other rail than the row's
well of its type, so the cell is one well island over the row height: the n-well device keeps
``nwell_to_nwell_space_um`` from the power-rail and side edges (the row's n-wells on the power
rail), the p-well device (isolated p-well in a deep n-well) keeps ``deep_nwell_space_um`` from
the ground-rail and side edges. In an open region the device fills the active row height (the
p-well accumulation device keeps its deep-n-well spacing all round). Common practice, no source.
Evaluation: the device model of ``characterization.mos`` at the cell's rail voltage, the
distributed-channel circuit of ``physics.circuits.mos_decap_circuit``, the oxide stress of
``characterization.oxide_stress`` and the well-junction leakage of ``characterization.junctions``
over the wells of ``topologies.wells``.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from celllab.characterization.junctions import junction_leakage
from celllab.characterization.oxide_stress import oxide_stress
from celllab.characterization.params import CornerSet
from celllab.topologies import common
from celllab.topologies.geometry import (
    MOS_FIELDS,
    OUTLINE_FIELDS,
    Geometry,
    device_band,
    place_mos,
)
from celllab.topologies.registry import Evaluate, Topology
from celllab.topologies.wells import biased_wells


def device_role(spec: Any) -> str:
    """The device role (``characterization.mos.ROLES``) of a one-device cell."""
    if spec.topology == "pmos_inversion":
        return "pmos"
    if spec.topology == "accumulation":
        return _accumulation_role(spec)
    if spec.topology == "mos_mom":
        return str(spec.mos_device)
    return "nmos"


def one_device_per_row(spec: Any, deck: Any, geo: Geometry) -> None:
    """One MOS device per row, in the band its well and the cell's placement give it."""
    place_mos(spec, deck, geo, [device_band(spec, deck, device_role(spec))])


def evaluate_tied_gate(topology: str, deck: Any, corners: CornerSet, cells: Sequence[Any], geos: Sequence[Any],
                       freq: np.ndarray, roles: np.ndarray) -> common.GroupResult:
    """A group of single-device decaps whose devices play ``roles`` (``mos.ROLES``)."""
    n_v, n_c = len(cells), len(corners.names)
    dev = common.mos_devices(corners, cells, geos, roles)
    res = dev.result
    net = common.mos_circuit(res, dev.geometry, common.loop_inductance(corners, geos), n_v, n_c, topology)
    sol = common.solve(net, freq, n_v, n_c, common.lumped_limit(deck, geos))
    stress = oxide_stress(corners, dev.oxides, roles, res.v_ox, res.v_gb, dev.geometry.gate_area)
    junction, junction_flags = junction_leakage(corners, *biased_wells(deck, cells, geos, roles), dev.supply_V)
    return common.GroupResult(
        n_variant=n_v, n_corner=n_c, z_ohm=sol.z_ohm, summary=sol.summary, cap_ox_F=res.c_ox_plain,
        gate_leakage_A=stress.leakage_A, junction_leakage_A=junction, e_ox_V_per_m=stress.e_ox_V_per_m,
        tddb_rate_per_s_m2=stress.tddb_rate_per_s_m2, vbd_pulse_V=stress.vbd_pulse_V, supply_V=dev.supply_V,
        netlist=net, cv_bias=res.cv_bias, cv_cap=res.cv_cap, cv_operating_V=res.v_gb,
        cv_operating_F=res.c_gate + res.c_overlap, flags=common.merge_flags(res.flags, junction_flags))


def _evaluator(topology: str, role: Callable[[Any], str]) -> Evaluate:
    def evaluate(deck: Any, corners: CornerSet, cells: Sequence[Any], geos: Sequence[Any],
                 freq: np.ndarray) -> common.GroupResult:
        return evaluate_tied_gate(topology, deck, corners, cells, geos, freq, np.array([role(c) for c in cells]))

    return evaluate


def _accumulation_role(cell: Any) -> str:
    return "acc_n" if cell.accumulation_well == "n" else "acc_p"


TOPOLOGIES = (
    Topology(name="nmos_inversion", description="n+ gate over a p-well in inversion, gate on VDD",
             esd_safe=False, fields=OUTLINE_FIELDS | MOS_FIELDS, geometry=one_device_per_row,
             evaluate=_evaluator("nmos_inversion", lambda c: "nmos"), circuit_key=common.by_contacted_ends,
             order=10),
    Topology(name="pmos_inversion", description="p+ gate over an n-well in inversion, gate on VSS",
             esd_safe=False, fields=OUTLINE_FIELDS | MOS_FIELDS, geometry=one_device_per_row,
             evaluate=_evaluator("pmos_inversion", lambda c: "pmos"), circuit_key=common.by_contacted_ends,
             order=20),
    Topology(name="accumulation", description="gate over a well of the same type, in accumulation",
             esd_safe=False, fields=OUTLINE_FIELDS | MOS_FIELDS | {"accumulation_well"},
             geometry=one_device_per_row, evaluate=_evaluator("accumulation", _accumulation_role),
             circuit_key=common.by_contacted_ends, order=30),
)
