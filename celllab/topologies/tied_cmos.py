"""Tied CMOS decap: an NMOS and a PMOS per row, each gate tied to the opposite rail.

The NMOS (p-well, source/body on the ground rail) has its n+ gate on the power rail; the PMOS
(n-well, source/body on the power rail) has its p+ gate on the ground rail. Both gate oxides sit
directly across the rails, so the cell is not ESD-safe. It is the tied counterpart of the
cross-coupled pair: the same two devices in the same footprint, without the series channel.

Geometry rule (``geometry.device_band``, stated in ``celllab.topologies.geometry``; common
practice, no source): in a core row the NMOS takes the p-well half and the PMOS the n-well half
of every row, so the cell uses both halves; in an open region each device takes (active row
height - well_spacing) / 2. Both devices share the gate columns (same fingers and gate length).

Evaluation: each device from ``characterization.mos`` at the cell's rail voltage (V_GB = +V for
the NMOS, -V for the PMOS), each with its distributed-channel circuit
(``circuits.mos_decap_circuit``), the two in parallel behind the rail-pair loop inductance
(``circuits.tied_cmos_circuit``). Gate leakage adds (electrons through the NMOS oxide, holes
through the PMOS oxide), with the reverse current of the row's n-well (``topologies.wells``);
the TDDB hazards of the two oxides add (``common.area_weighted``).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from celllab.characterization.junctions import junction_leakage
from celllab.characterization.mos import characterize_mos
from celllab.characterization.oxide_stress import oxide_stress
from celllab.characterization.params import CornerSet
from celllab.physics import circuits
from celllab.topologies import common
from celllab.topologies.geometry import MOS_FIELDS, OUTLINE_FIELDS, nmos_and_pmos_per_row
from celllab.topologies.registry import Topology
from celllab.topologies.wells import BOTH_TYPES, biased_wells


def evaluate(deck: Any, corners: CornerSet, cells: Sequence[Any], geos: Sequence[Any],
             freq: np.ndarray) -> common.GroupResult:
    """Figures of a group of tied CMOS cells sharing one channel-contact scheme."""
    n_v, n_c = len(cells), len(corners.names)
    oxides = common.oxides_of(cells)
    rail = common.supply(corners, common.rails_of(cells))
    geo_n, geo_p = common.mos_geometry(cells, geos), common.mos_geometry(cells, geos, device="pmos")
    nmos_role, pmos_role = np.array(["nmos"] * n_v), np.array(["pmos"] * n_v)
    nmos = characterize_mos(corners, oxides, nmos_role, geo_n, rail)
    pmos = characterize_mos(corners, oxides, pmos_role, geo_p, rail)
    flat = common.flat

    def branch(res: Any, name: str) -> Any:
        return circuits.mos_decap_circuit(
            c_gate=flat(res.c_gate, n_v, n_c), r_channel=flat(res.r_channel, n_v, n_c),
            r_gate=flat(res.r_gate, n_v, n_c), r_access=flat(res.r_access, n_v, n_c), l_loop=0.0,
            c_overlap=flat(res.c_overlap, n_v, n_c), contacted_ends=cells[0].contacted_ends, name=name)

    net = circuits.tied_cmos_circuit(branch(nmos, "nmos"), branch(pmos, "pmos"),
                                     l_loop=flat(common.loop_inductance(corners, geos), n_v, n_c))
    sol = common.solve(net, freq, n_v, n_c, common.lumped_limit(deck, geos))
    sn = oxide_stress(corners, oxides, nmos_role, nmos.v_ox, nmos.v_gb, geo_n.gate_area)
    sp = oxide_stress(corners, oxides, pmos_role, pmos.v_ox, pmos.v_gb, geo_p.gate_area)
    junction, junction_flags = junction_leakage(corners, *biased_wells(deck, cells, geos, [BOTH_TYPES] * n_v), rail)
    flags = [[nmos.flags[i][j] + [f for f in pmos.flags[i][j] if f not in nmos.flags[i][j]]
              for j in range(n_c)] for i in range(n_v)]
    return common.GroupResult(
        n_variant=n_v, n_corner=n_c, z_ohm=sol.z_ohm, summary=sol.summary,
        cap_ox_F=nmos.c_ox_plain + pmos.c_ox_plain, gate_leakage_A=sn.leakage_A + sp.leakage_A,
        junction_leakage_A=junction, e_ox_V_per_m=np.maximum(sn.e_ox_V_per_m, sp.e_ox_V_per_m),
        tddb_rate_per_s_m2=common.area_weighted(sn.tddb_rate_per_s_m2, geo_n.gate_area,
                                                sp.tddb_rate_per_s_m2, geo_p.gate_area),
        vbd_pulse_V=np.minimum(sn.vbd_pulse_V, sp.vbd_pulse_V), supply_V=rail, netlist=net,
        # C-V against the rail voltage v: the NMOS sees V_GB = +v and the PMOS V_GB = -v; both
        # sweeps run over the same symmetric grid, so the PMOS curve is read backwards
        cv_bias=nmos.cv_bias, cv_cap=nmos.cv_cap + pmos.cv_cap[..., ::-1], cv_operating_V=nmos.v_gb,
        cv_operating_F=nmos.c_gate + pmos.c_gate + nmos.c_overlap + pmos.c_overlap,
        flags=common.merge_flags(flags, junction_flags),
        notes=["tied CMOS: NMOS on the p-well half, PMOS on the n-well half, gates on the opposite "
               "rails; the two decaps in parallel"])


TOPOLOGIES = (
    Topology(name="tied_cmos", description="NMOS and PMOS side by side, each gate tied to the opposite rail",
             esd_safe=False, fields=OUTLINE_FIELDS | MOS_FIELDS, geometry=nmos_and_pmos_per_row,
             evaluate=evaluate, circuit_key=common.by_contacted_ends, order=35),
)
