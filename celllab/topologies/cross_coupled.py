"""Cross-coupled (ESD-safe) pair: DC operating point, then both devices at their own bias.

Each row holds an NMOS (p-well, source/body on VSS) and a PMOS (n-well, source/body on VDD);
each gate is driven by the other device's drain (``celllab.physics.cross_coupled``). No gate
touches a rail, so the topology is ESD-safe. The internal nodes settle within the leakage
current x on-resistance of the rails; each device is then characterized at the gate bias the
operating point gives it with the same charge and mobility model as a tied device
(``characterization.mos``): at V_DS ~ 0 its channel resistance is the tied device's. The channels
enter the equivalent circuit as through RC lines (``circuits.cross_coupled_circuit``).

Geometry rule: an NMOS and a PMOS per row, as in the tied cell: in a core row the NMOS on the
p-well half and the PMOS on the n-well half; in an open region each takes (active row height -
well_spacing) / 2 before end caps (``geometry.device_band``; common practice, no source).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from scipy.constants import milli

from celllab.characterization.junctions import junction_leakage
from celllab.characterization.mos import characterize_mos
from celllab.characterization.oxide_stress import oxide_stress
from celllab.characterization.params import CornerSet
from celllab.physics import circuits
from celllab.physics import cross_coupled as pair
from celllab.topologies import common
from celllab.topologies.geometry import MOS_FIELDS, OUTLINE_FIELDS, nmos_and_pmos_per_row
from celllab.topologies.registry import Topology
from celllab.topologies.wells import BOTH_TYPES, biased_wells

#: Gate leakage against the node voltage inside the operating-point solve, I ~ V^n: an assumed
#: power law for the bracketing solve only (modelling choice, no source); the reported leakage
#: comes from ``oxide_stress`` at the solved bias.
LEAKAGE_VOLTAGE_EXPONENT = 2.5
#: Floor of the first-pass overdrive when it sets the on-resistance scale, V.
MIN_OVERDRIVE_V = 1.0 * milli


def evaluate(deck: Any, corners: CornerSet, cells: Sequence[Any], geos: Sequence[Any],
             freq: np.ndarray) -> common.GroupResult:
    """Figures of a group of cross-coupled cells (arrays over variant x corner)."""
    n_v, n_c = len(cells), len(corners.names)
    oxides = common.oxides_of(cells)
    vdd = common.supply(corners, common.rails_of(cells))
    geo_n, geo_p = common.mos_geometry(cells, geos), common.mos_geometry(cells, geos, device="pmos")
    nmos_role, pmos_role = np.array(["nmos"] * n_v), np.array(["pmos"] * n_v)
    # First pass at the full rail bias gives each device's channel model and leakage density.
    nmos0 = characterize_mos(corners, oxides, nmos_role, geo_n, vdd)
    pmos0 = characterize_mos(corners, oxides, pmos_role, geo_p, vdd)

    def resistive(first: Any) -> pair.ResistiveDevice:
        # The tied device's channel model at the rail (mobile charge / Cox with poly depletion and
        # centroid, same mobility), extended to nearby gate voltages at fixed mobility:
        # R_on(V_GS) = R(VDD) Q(VDD) / Q(V_GS), Q linear in V_GS with unit slope. Only the
        # operating-point solve uses it (node shifts of leakage x R_on, uV to mV).
        r_at_op = first.r_channel
        v_op = np.maximum(first.v_ov, MIN_OVERDRIVE_V)
        return pair.ResistiveDevice(np.abs(vdd) - v_op, lambda v: r_at_op * v_op / v)

    area_n, area_p = geo_n.gate_area, geo_p.gate_area
    lk_n = oxide_stress(corners, oxides, nmos_role, nmos0.v_ox, nmos0.v_gb, area_n).leakage_A
    lk_p = oxide_stress(corners, oxides, pmos_role, pmos0.v_ox, pmos0.v_gb, area_p).leakage_A
    supply_abs = np.abs(vdd)
    op = pair.operating_point(
        vdd, resistive(nmos0), resistive(pmos0),
        leakage_n=lambda v: lk_n * (np.abs(v) / supply_abs) ** LEAKAGE_VOLTAGE_EXPONENT,
        leakage_p=lambda v: lk_p * (np.abs(v) / supply_abs) ** LEAKAGE_VOLTAGE_EXPONENT)
    ok = np.asarray(op.converged, dtype=bool)
    v_gn = np.where(ok, op.v_y, vdd)            # NMOS gate-to-body bias
    v_gp = np.where(ok, vdd - op.v_x, vdd)      # PMOS |gate-to-body| bias
    # Each device at its own gate bias with V_DS ~ 0: the terminal voltages of a tied device,
    # so its channel resistance is the tied device's (same charge and mobility model).
    nmos = characterize_mos(corners, oxides, nmos_role, geo_n, v_gn)
    pmos = characterize_mos(corners, oxides, pmos_role, geo_p, v_gp)
    r_on_n, r_on_p = nmos.r_channel, pmos.r_channel

    flat = common.flat
    net = circuits.cross_coupled_circuit(
        c_n=flat(nmos.c_gate, n_v, n_c), c_p=flat(pmos.c_gate, n_v, n_c),
        r_on_n=flat(r_on_n, n_v, n_c), r_on_p=flat(r_on_p, n_v, n_c),
        r_gate_n=flat(nmos.r_gate + nmos.r_access, n_v, n_c), r_gate_p=flat(pmos.r_gate + pmos.r_access, n_v, n_c),
        l_loop=flat(common.loop_inductance(corners, geos), n_v, n_c), c_overlap_n=flat(nmos.c_overlap, n_v, n_c),
        c_overlap_p=flat(pmos.c_overlap, n_v, n_c))
    sol = common.solve(net, freq, n_v, n_c, common.lumped_limit(deck, geos))
    sn = oxide_stress(corners, oxides, nmos_role, nmos.v_ox, nmos.v_gb, area_n)
    sp = oxide_stress(corners, oxides, pmos_role, pmos.v_ox, pmos.v_gb, area_p)
    junction, junction_flags = junction_leakage(corners, *biased_wells(deck, cells, geos, [BOTH_TYPES] * n_v), vdd)
    flags = [[nmos.flags[i][j] + [f for f in pmos.flags[i][j] if f not in nmos.flags[i][j]]
              + ([] if ok[i, j] else ["pair_no_operating_point: no both-on state found; devices "
                                      "evaluated at the full rail voltage"])
              for j in range(n_c)] for i in range(n_v)]
    return common.GroupResult(
        n_variant=n_v, n_corner=n_c, z_ohm=sol.z_ohm, summary=sol.summary,
        cap_ox_F=nmos.c_ox_plain + pmos.c_ox_plain, gate_leakage_A=sn.leakage_A + sp.leakage_A,
        junction_leakage_A=junction, e_ox_V_per_m=np.maximum(sn.e_ox_V_per_m, sp.e_ox_V_per_m),
        # the two oxides' hazards add: the rate per area of the cell's whole gate is their
        # area-weighted mean (the halves of a core row differ in height)
        tddb_rate_per_s_m2=common.area_weighted(sn.tddb_rate_per_s_m2, area_n, sp.tddb_rate_per_s_m2, area_p),
        vbd_pulse_V=np.minimum(sn.vbd_pulse_V, sp.vbd_pulse_V), supply_V=vdd, netlist=net,
        # C-V against the rail voltage v (the first pass, both devices on the rail's grid): at
        # rail v the NMOS sees V_GB ~ +v and the PMOS V_GB ~ -v, and the sweeps run over the same
        # symmetric grid, so the PMOS curve is read backwards (as in the tied CMOS cell)
        cv_bias=nmos0.cv_bias, cv_cap=nmos0.cv_cap + pmos0.cv_cap[..., ::-1], cv_operating_V=v_gn,
        cv_operating_F=nmos.c_gate + pmos.c_gate + nmos.c_overlap + pmos.c_overlap,
        flags=common.merge_flags(flags, junction_flags),
        notes=["cross-coupled: internal nodes from the self-consistent DC operating point (gate leakage "
               "through the on-resistances); channels modelled as through RC lines"])


TOPOLOGIES = (
    Topology(name="cross_coupled", description="NMOS and PMOS whose gates hang on each other's drains",
             esd_safe=True, fields=OUTLINE_FIELDS | MOS_FIELDS, geometry=nmos_and_pmos_per_row, evaluate=evaluate,
             circuit_key=common.by_contacted_ends, order=40),
)
