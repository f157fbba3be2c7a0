"""A plan's supply-network figures as plain data in display units (the ``network`` part of
``BlockPlan.to_dict``): every unit in the key, each worst-corner figure with its corner
beside it (``{"value": ..., "corner": ...}``), undefined numbers as None."""

from __future__ import annotations

import math
from typing import Any

from scipy.constants import femto, mega, micro, milli, nano

from celllab.planner.corners import NETWORK_FIGURES
from celllab.planner.network_figures import RegionFigures
from celllab.planner.supply import SupplyAnalysis

__all__ = ["DROOP_FIGURES", "network_dict"]

#: Droop figures: key in ``RegionFigures.droop``, display key, SI factor dividing the value.
DROOP_FIGURES: tuple[tuple[str, str, float], ...] = (
    ("first_droop", "first_droop_mV", milli),
    ("first_droop_time", "first_droop_time_ns", nano),
    ("worst_droop", "worst_droop_mV", milli),
    ("overshoot", "overshoot_mV", milli),
    ("ringing_frequency", "ringing_MHz", mega),
    ("ringing_q", "ringing_q", 1.0),
    ("settling_time", "settling_ns", nano),
    ("settled_droop", "settled_droop_mV", milli),
)


def _num(value: float | None, unit: float = 1.0) -> float | None:
    if value is None:
        return None
    v = float(value)
    return v / unit if math.isfinite(v) else None


def _at(value: float, corner: str, unit: float = 1.0) -> dict[str, Any]:
    return {"value": _num(value, unit), "corner": corner if math.isfinite(value) else None}


def _droop(figures: dict[str, tuple[float, str]]) -> dict[str, Any] | None:
    if not figures:
        return None
    return {key: _at(*figures[name], unit) for name, key, unit in DROOP_FIGURES
            if name in figures}


def _region(analysis: SupplyAnalysis, k: int, reg: RegionFigures) -> dict[str, Any]:
    figures = analysis.figures
    region = analysis.network.regions[k]
    check = reg.check
    out: dict[str, Any] = {
        "name": reg.name,
        "draws_current": region.activity is not None,
        "stimulus": None if region.activity is None else region.activity.stimulus,
        "target_mohm": _num(reg.target, milli),
        "band_MHz": [_num(reg.band[0], mega), _num(reg.band[1], mega)],
        "check": None if check is None else {
            "worst_z_over_target": _num(check.worst_ratio),
            "at_MHz": _num(check.worst_frequency, mega), "corner": reg.check_corner,
            "passes": bool(check.passes),
            "over_target_MHz": [[_num(a, mega), _num(b, mega)] for a, b in check.exceed_bands]},
        "resonances": [{"kind": t.kind, "f_MHz": _num(t.frequency, mega),
                        "z_mohm": _num(t.magnitude, milli), "q": _num(t.q),
                        "q_from": t.q_method, "corner": t.corner,
                        "corners_found": len(t.per_corner)} for t in reg.resonances],
        "transfer": [{"from": other, "z_mohm": _num(m, milli), "at_MHz": _num(f, mega),
                      "corner": c} for other, (m, f, c) in reg.transfer_peak.items()],
        "dc_drop_mV": _num(reg.dc_drop, milli),
        "top_peak": None if reg.top_peak is None else {
            "f_MHz": _num(reg.top_peak.frequency, mega),
            "z_mohm": _num(reg.top_peak.magnitude, milli), "q": _num(reg.top_peak.q),
            "corner": reg.top_peak.corner},
        "cell_damping": {
            "conductance_needed_S": _num(reg.conductance_needed),
            "cells": [{"cell": d.cell, "count": d.count, "f_MHz": _num(d.f0, mega),
                       "cap_fF": _num(d.capacitance, femto), "esr_at_f_ohm": _num(d.esr_at_f0),
                       "match_x": _num(d.match), "score": _num(d.score),
                       "conductance_S": _num(d.total_conductance)}
                      for d in reg.cell_damping]},
        "droop": _droop(reg.droop),
        "droop_with_entrance_resistors": _droop(reg.droop_after),
        "entrance": None,
    }
    trade = figures.damping
    if trade is not None:
        ac = (figures.damping_ac_power[k] if figures.damping_ac_power is not None
              else float("nan"))
        corners = figures.corners
        out["entrance"] = {
            "resistance_mohm": _num(trade.resistance[k], milli),
            "resistance_before_mohm": _num(trade.before_resistance[k], milli),
            "peak_before_mohm": _at(trade.peak_before.magnitude[k],
                                    corners[int(trade.peak_before.corner[k])], milli),
            "peak_after_mohm": _at(trade.peak_after.magnitude[k],
                                   corners[int(trade.peak_after.corner[k])], milli),
            "peak_before_over_target": _num(trade.peak_before.ratio[k]) if region.activity
            else None,
            "peak_after_over_target": _num(trade.peak_after.ratio[k]) if region.activity
            else None,
            "ir_drop_before_mV": _num(trade.ir_drop_before[k], milli),
            "ir_drop_after_mV": _num(trade.ir_drop_after[k], milli),
            "ir_drop_limit_mV": _num(trade.ir_drop_limit[k], milli),
            "dc_power_mW": _num(trade.power[k], milli),
            "harmonic_power_mW": _num(ac, milli),
        }
    return out


def network_dict(analysis: SupplyAnalysis) -> dict[str, Any]:
    """The supply-network part of a plan in display units (see the module docstring)."""
    figures = analysis.figures
    trade = figures.damping
    labels = list(figures.emission)
    emission = {
        "probe_ohm": next(iter(figures.emission.values())).probe if figures.emission else None,
        "bands": [{"band": b.band.name, "f_lo_MHz": b.band.f_lo / mega,
                   "f_hi_MHz": b.band.f_hi / mega,
                   "level_dBuV": {n: _num(b.level_dBuV[n]) for n in labels},
                   "corner": {n: b.corner[n] for n in labels},
                   "change_dB": {n: _num(b.change_dB[n]) for n in labels}}
                  for b in figures.emission_bands],
        "harmonics": {name: {"f_MHz": (s.freq / mega).tolist(),
                             "level_dBuV": [_num(v) for v in s.worst()[0]],
                             "corner": [s.corners[int(c)] for c in s.worst()[1]]}
                      for name, s in figures.emission.items()},
    }
    fd = analysis.fill_damping
    fill_damping = None
    if fd is not None:
        after = {reg.name: reg.top_peak for reg in figures.regions}
        fill_damping = {"weight": fd.weight, "regions": [
            {"name": name, "f_MHz": _num(fd.frequency[k], mega),
             "corner": fd.corner[k] if math.isfinite(fd.frequency[k]) else None,
             "peak_before_mohm": _num(fd.peak_before[k], milli),
             "peak_after_mohm": (_num(after[name].magnitude, milli)  # type: ignore[union-attr]
                                 if after.get(name) is not None else None),
             "conductance_before_S": _num(fd.conductance_before[k]),
             "conductance_after_S": _num(fd.conductance_after[k])}
            for k, name in enumerate(fd.regions)]}
    return {
        "policy": NETWORK_FIGURES.rule,
        "corners": list(figures.corners),
        "analysis_s": analysis.seconds,
        "computed": {"droop": figures.droop_run is not None,
                     "entrance_resistors": trade is not None,
                     "fill_damping": fd is not None,
                     "naive_fill": bool(analysis.naive)},
        "freq_MHz": [_num(figures.freq[0], mega), _num(figures.freq[-1], mega)],
        "regions": [_region(analysis, k, reg) for k, reg in enumerate(figures.regions)],
        "entrance_resistors": None if trade is None else {
            "converged": bool(trade.converged), "message": trade.message,
            "worst_over_target_before": _num(trade.objective_before),
            "worst_over_target_after": _num(trade.objective_after)},
        "emission": emission,
        "naive_fill": [{"region": n.region, "cells": {c.name: k for c, k in n.cells},
                        "cap_nF": n.cap / nano, "leakage_uA": n.leakage / micro,
                        "oxide_area_um2": n.oxide_area / micro**2}
                       for n in analysis.naive],
        "fill_damping": fill_damping,
        "droop_run": None if figures.droop_run is None else {
            "t_end_ns": float(figures.droop_run.t[-1] / nano),
            "steps": int(figures.droop_run.t.size - 1),
            "ladder_segments": int(figures.droop_run.n_segments)},
        "notes": list(figures.notes),
    }
