"""Cross-coupled (ESD-safe) pair: DC operating point, then both devices at their own bias.

Each row holds an NMOS (p-well, source/body on VSS) and a PMOS (n-well, source/body on VDD);
each gate is driven by the other device's drain (``celllab.physics.cross_coupled``). The
internal nodes settle within the leakage current x on-resistance of the rails; each device's
capacitance is then evaluated at the gate bias the operating point gives it, and the channels
enter the equivalent circuit as through RC lines (``circuits.cross_coupled_circuit``).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from celllab.characterization.mos import characterize_mos
from celllab.characterization.oxide_stress import oxide_stress
from celllab.characterization.params import CornerSet
from celllab.physics import circuits, cross_coupled


def evaluate_cross_coupled(deck: Any, corners: CornerSet, cells: list[Any], geos: list[Any],
                           freq: np.ndarray) -> Any:
    from celllab.characterization.topologies import (
        GroupResult,
        _flat,
        _loop_inductance,
        _mos_geometry,
        _solve,
        _supply,
    )

    n_v, n_c = len(cells), len(corners.names)
    oxides = np.array([c.oxide for c in cells])
    vdd = _supply(corners, oxides)
    geo = _mos_geometry(cells, geos)
    # First pass at the full rail bias gives each device's channel model and leakage density.
    nmos0 = characterize_mos(corners, oxides, np.array(["nmos"] * n_v), geo, vdd)
    pmos0 = characterize_mos(corners, oxides, np.array(["pmos"] * n_v), geo, vdd)
    vth_n = np.abs(corners.device_table(oxides, np.array(["nmos"] * n_v), "vth_V"))
    vth_p = np.abs(corners.device_table(oxides, np.array(["pmos"] * n_v), "vth_V"))

    def resistive(first: Any, vth: np.ndarray) -> cross_coupled.ResistiveDevice:
        # R_on(V_ov) = L / (W mu_eff Cox V_ov) with the first-pass effective mobility; the
        # first-pass overdrive already includes poly depletion and centroid (mobile charge / Cox).
        r_at_op = first.r_channel
        v_op = np.maximum(first.v_ov, 1e-3)
        return cross_coupled.ResistiveDevice(vth, lambda v: r_at_op * v_op / v)

    area = geo.gate_area
    lk_n = oxide_stress(corners, oxides, nmos0.v_ox, nmos0.v_gb, area).leakage_A
    lk_p = oxide_stress(corners, oxides, pmos0.v_ox, pmos0.v_gb, area).leakage_A
    supply_abs = np.abs(vdd)
    op = cross_coupled.operating_point(
        vdd, resistive(nmos0, vth_n), resistive(pmos0, vth_p),
        leakage_n=lambda v: lk_n * (np.abs(v) / supply_abs) ** 2.5,
        leakage_p=lambda v: lk_p * (np.abs(v) / supply_abs) ** 2.5)
    ok = np.asarray(op.converged, dtype=bool)
    v_gn = np.where(ok, op.v_y, vdd)            # NMOS gate-to-body bias
    v_gp = np.where(ok, vdd - op.v_x, vdd)      # PMOS |gate-to-body| bias
    nmos = characterize_mos(corners, oxides, np.array(["nmos"] * n_v), geo, v_gn)
    pmos = characterize_mos(corners, oxides, np.array(["pmos"] * n_v), geo, v_gp)
    r_on_n = np.where(ok & np.isfinite(op.r_on_n), op.r_on_n, nmos.r_channel)
    r_on_p = np.where(ok & np.isfinite(op.r_on_p), op.r_on_p, pmos.r_channel)

    l_loop = _loop_inductance(deck, cells, geos)
    net = circuits.cross_coupled_circuit(
        c_n=_flat(nmos.c_gate, n_v, n_c), c_p=_flat(pmos.c_gate, n_v, n_c),
        r_on_n=_flat(r_on_n, n_v, n_c), r_on_p=_flat(r_on_p, n_v, n_c),
        r_gate_n=_flat(nmos.r_gate + nmos.r_access, n_v, n_c), r_gate_p=_flat(pmos.r_gate + pmos.r_access, n_v, n_c),
        l_loop=_flat(l_loop, n_v, n_c), c_overlap_n=_flat(nmos.c_overlap, n_v, n_c),
        c_overlap_p=_flat(pmos.c_overlap, n_v, n_c))
    z, summary = _solve(net, freq, n_v, n_c)
    sn = oxide_stress(corners, oxides, nmos.v_ox, nmos.v_gb, area)
    sp = oxide_stress(corners, oxides, pmos.v_ox, pmos.v_gb, area)
    flags = [[nmos.flags[i][j] + [f for f in pmos.flags[i][j] if f not in nmos.flags[i][j]]
              + ([] if ok[i, j] else ["pair_no_operating_point: no both-on state found; devices "
                                      "evaluated at the full rail voltage"])
              for j in range(n_c)] for i in range(n_v)]
    # C-V: NMOS and PMOS swept together against the rail voltage
    cv_cap = nmos.cv_cap + pmos.cv_cap
    return GroupResult(
        n_v, n_c, z, summary, nmos.c_ox_plain + pmos.c_ox_plain, sn.leakage_A + sp.leakage_A,
        np.maximum(sn.e_ox_V_per_m, sp.e_ox_V_per_m), _series_life(sn.ttf_s, sp.ttf_s, corners, oxides),
        np.minimum(sn.vbd_pulse_V, sp.vbd_pulse_V), vdd, net, nmos.cv_bias, cv_cap, v_gn,
        nmos.c_gate + pmos.c_gate + nmos.c_overlap + pmos.c_overlap, flags,
        notes=["cross-coupled: internal nodes from the self-consistent DC operating point (gate leakage "
               "through the on-resistances); channels modelled as through RC lines"])


def _series_life(t_n: np.ndarray, t_p: np.ndarray, corners: CornerSet, oxides: np.ndarray) -> np.ndarray:
    """Life of two oxides that both must survive (weakest link, same Weibull slope), s."""
    from celllab.characterization.oxide_stress import _sub_table

    beta = _sub_table(corners, oxides, "reliability", "weibull_beta")
    # F_total = 1 - (1-F_n)(1-F_p); for small F with a common slope: t = (t_n^-b + t_p^-b)^(-1/b)
    return (t_n ** -beta + t_p ** -beta) ** (-1.0 / beta)
