"""Synthetic (invented) cell records for the exporter tests.

Each cell's equivalent circuits (corner name -> ``celllab.physics.netlist.Netlist``, as the
engine stores them) are real netlists with corner-scaled values, and every corner's Z(f) comes
from ``solve_impedance`` on that corner's circuit, so
exports can be checked against outside tools (ngspice, scikit-rf). Metrics are derived from
the responses where that is simple (C, ESR, SRF, bandwidth) and otherwise plausible invented
numbers. No foundry data: the deck name and values are made up.
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Callable
from typing import Any

import numpy as np
import pytest

from celllab.physics.netlist import Element, Netlist, parallel, solve_impedance
from celllab.records import METRIC_NAMES, CellResult, CornerResult, CVCurve, FrequencyResponse

DECK_NAME = "invented_demo130"
FREQ_HZ = np.logspace(6, 11, 51)  # 1 MHz .. 100 GHz, 10 per decade

#: corner -> (temperature_C, supply_V, resistance factor, capacitance factor)
CORNERS: dict[str, tuple[float, float, float, float]] = {
    "typ_25C": (25.0, 1.2, 1.0, 1.0),
    "slow_125C": (125.0, 1.08, 1.35, 0.97),
    "fast_m40C": (-40.0, 1.32, 0.82, 1.02),
}


def mos_decap_netlist() -> Netlist:
    """NMOS-inversion-like decap: ESL, gate R, channel RC line (both ends to the rail)."""
    return Netlist(
        "mos",
        (
            Element("L", "esl", "vdd", "gate_in", 5e-12),
            Element("R", "rgate", "gate_in", "g", 20.0),
            Element("RCLINE", "channel", "sd", "g", 500.0, c_total=110e-15, contacted_ends=2),
            Element("R", "rsd", "sd", "vss", 5.0),
            Element("C", "overlap", "g", "vss", 10e-15),
            Element("R", "rleak", "g", "sd", 1.2e9),
        ),
    )


def cross_coupled_netlist() -> Netlist:
    """Cross-coupled-like pair: two branches (series device R + channel line) in parallel
    behind a shared loop inductance; one branch fed through a distributed wire."""
    n_branch = Netlist(
        "mn",
        (
            Element("RCLINE", "wire", "vdd", "vss", 2000.0, c_total=2e-15, node_far="x"),
            Element("RCLINE", "ch", "vss", "x", 600.0, c_total=80e-15, contacted_ends=2),
        ),
    )
    p_branch = Netlist(
        "mp",
        (
            Element("R", "ron", "vss", "y", 1500.0),
            Element("RCLINE", "ch", "vdd", "y", 800.0, c_total=60e-15, contacted_ends=2),
        ),
    )
    return parallel(
        "xcp", [n_branch, p_branch], series=[Element("L", "loop", "vdd", "xcp_in", 8e-12)]
    )


def mom_netlist() -> Netlist:
    """MOM-like finger capacitor: plate C, finger ESR, ESL, and a zero-ohm strap."""
    return Netlist(
        "mom",
        (
            Element("R", "strap", "vdd", "a", 0.0),
            Element("L", "esl", "a", "b", 3e-12),
            Element("R", "esr", "b", "c", 2.0),
            Element("C", "plates", "c", "vss", 50e-15),
        ),
    )


KINDS: dict[str, tuple[Callable[[], Netlist], str, str, bool, float]] = {
    # kind -> (builder, topology, oxide, esd_safe, gate area um^2)
    "mos": (mos_decap_netlist, "nmos_inversion", "core", False, 8.0),
    "xcp": (cross_coupled_netlist, "cross_coupled", "core", True, 9.5),
    "mom": (mom_netlist, "mom", "core", True, 0.0),
}


def corner_netlist(netlist: Netlist, r_factor: float, c_factor: float) -> Netlist:
    factors: dict[str, Any] = {}
    for el in netlist.elements:
        if el.kind == "RCLINE":
            factors[el.name] = (r_factor, c_factor)
        elif el.kind == "R":
            factors[el.name] = r_factor
        elif el.kind == "C":
            factors[el.name] = c_factor
    return netlist.scaled(factors)


def metrics_from_response(freq: np.ndarray, z: np.ndarray, area_um2: float) -> dict[str, float]:
    omega = 2 * np.pi * freq
    c_eff = -1.0 / (omega * z.imag)
    cap = float(c_eff[0])
    sign_change = np.flatnonzero(np.diff(np.sign(z.imag)) != 0)
    srf_GHz = float(freq[sign_change[0]] / 1e9) if sign_change.size else math.nan
    below = np.flatnonzero(c_eff < cap / math.sqrt(2))
    bandwidth_GHz = float(freq[below[0]] / 1e9) if below.size else math.nan
    esr = float(z.real[0])
    leakage_nA = 0.9 * cap * 1e15 / 100
    known = {
        "cap_fF": cap * 1e15,
        "cap_density_fF_per_um2": cap * 1e15 / area_um2,
        "cap_ox_fF": cap * 1e15 * 1.08,
        "esr_ohm": esr,
        "esr_1GHz_ohm": float(np.interp(9.0, np.log10(freq), z.real)),
        "bandwidth_GHz": bandwidth_GHz,
        "srf_GHz": srf_GHz,
        "srf_is_bound": 0.0,
        "bandwidth_is_bound": 0.0,
        "tau_ps": esr * cap * 1e12,
        "leakage_nA": leakage_nA,
        "leakage_nA_per_nF": leakage_nA / (cap * 1e9),
        "gate_leakage_nA": 0.8 * leakage_nA,
        "junction_leakage_nA": 0.2 * leakage_nA,
    }
    # Any other metric gets an invented, distinct positive number.
    return {name: known.get(name, 1.5 + 0.37 * index) for index, name in enumerate(METRIC_NAMES)}


def cv_curve(cap_F: float, supply_V: float) -> CVCurve:
    bias = np.linspace(-supply_V, supply_V, 25)
    cap = cap_F * (0.62 + 0.38 * np.tanh(3 * (bias - 0.3)))
    return CVCurve(bias, cap, supply_V, float(np.interp(supply_V, bias, cap)))


def build_cell(
    kind: str = "mos",
    name: str | None = None,
    response: FrequencyResponse | None = None,
    notes: list[str] | None = None,
    corners: tuple[str, ...] = tuple(CORNERS),
) -> CellResult:
    builder, topology, oxide, esd_safe, gate_area = KINDS[kind]
    netlist = builder()
    area = 2.88 * (4 if kind != "mom" else 6)
    results = []
    for corner in corners:
        temperature, supply, r_factor, c_factor = CORNERS[corner]
        if response is None:
            z = solve_impedance(corner_netlist(netlist, r_factor, c_factor), FREQ_HZ)[0]
            corner_response = FrequencyResponse(FREQ_HZ.copy(), z)
        else:
            corner_response = response
        freq, z = corner_response.freq_Hz, corner_response.z_ohm
        if freq.size > 2:
            metrics = metrics_from_response(freq, z, area)
        else:
            metrics = {name: 1.0 for name in METRIC_NAMES}
        if kind == "mom" and "tddb_fit_per_mm2" in metrics:
            metrics["tddb_fit_per_mm2"] = math.nan  # no thin oxide in the model
        cv = cv_curve(metrics["cap_fF"] * 1e-15, supply) if kind != "mom" else None
        metrics = {k: float(v) for k, v in metrics.items()}
        flags = ["channel length near the model's lower limit"] if corner == "slow_125C" else []
        results.append(
            CornerResult(corner, temperature, supply, metrics, corner_response, cv, flags)
        )
    return CellResult(
        name=name or f"INV_{kind.upper()}_W2_L1",
        cell_hash=hashlib.sha256(f"{kind}/{name}".encode()).hexdigest()[:12],
        family=f"{kind}_family",
        topology=topology,
        oxide=oxide,
        geometry={"finger_width_um": 2.0, "gate_length_um": 1.0, "fingers": 4},
        area_um2=area,
        width_sites=4 if kind != "mom" else 6,
        height_rows=1,
        gate_area_um2=gate_area,
        esd_safe=esd_safe,
        corners=results,
        netlist={corner: corner_netlist(netlist, *CORNERS[corner][2:]) for corner in corners},
        notes=list(notes or []),
    )


@pytest.fixture
def deck_name() -> str:
    return DECK_NAME


@pytest.fixture(scope="session")
def library() -> list[CellResult]:
    """One cell of each circuit kind, three corners each."""
    return [build_cell("mos"), build_cell("xcp", name="XCP.4x2-core"), build_cell("mom")]


@pytest.fixture
def make_cell() -> Callable[..., CellResult]:
    return build_cell
