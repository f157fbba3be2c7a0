"""What the fill does to the supply: a block file's ``[network]`` table and its regions turned
into the supply network (`planner.network`), loaded with a plan's fill, and evaluated (SI).

One source for every number: the supply, the package loop (``package_resistance_mohm``,
``package_inductance_nH``) and the default ripple come from ``[block]``; each region's current
(peak, edges, clock, charge per cycle), its allowed droop (``droop_fraction``) and the decap
of its idle logic (``logic_activity``, via ``sizing``) from its ``[[region]]``; the board, the
off-chip decap, each region's path and any further non-fill capacitance from ``[network]``.

    network = block_network(block, needs, supply, fills, samples, corners)
    goals = network_goals(block, options, naive_entries)
    figures = evaluate_network(network, goals)          # planner.network_figures

`analyse_supply` does all of it for a plan (`plan.plan_block` calls it): the plan's fill per
region (each chosen cell's stored per-corner circuit x its count), the naive comparison fill
(`naive.densest_fill`), waveform files read relative to the block file.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.constants import mega, milli, nano, pico

from celllab.errors import PlanError
from celllab.planner.block import BlockFile, Region
from celllab.planner.candidates import Candidate
from celllab.planner.naive import NaiveFill
from celllab.planner.network import (
    BlockNetwork,
    FillEntry,
    GridLink,
    OffChipDecap,
    RegionLoad,
    RegionPath,
    SupplyNetwork,
    build_network,
)
from celllab.planner.network_figures import NetworkFigures, NetworkGoals, evaluate_network
from celllab.planner.network_spec import (
    NetworkSpec,
    RegionSpec,
    default_stimulus,
    draws_current,
    read_waveform_csv,
)
from celllab.planner.sizing import RegionNeed
from celllab.planner.waveforms import Activity

__all__ = [
    "FULL_ANALYSIS",
    "FillDamping",
    "NetworkOptions",
    "SupplyAnalysis",
    "analyse_supply",
    "block_network",
    "cell_entries",
    "network_goals",
    "read_waveforms",
    "region_activity",
    "supply_network",
]

Progress = Callable[[str], None]
Samples = tuple[np.ndarray, np.ndarray]


@dataclass(frozen=True)
class NetworkOptions:
    """What to compute about the supply network (the slow parts can be left out).

    droop : the droop run in time (transient solver), with and without entrance resistors
    entrance : size entrance resistors (None: as the block file says,
               ``size_entrance_resistors``)
    fill_damping : value the fill's damping in the fill objective when the block file gives a
                   ``fill_damping_weight`` (one more fill solve)
    naive : compare emission with the naive densest-cell fill
    """

    droop: bool = True
    entrance: bool | None = None
    fill_damping: bool = True
    naive: bool = True


#: Everything: droop in time, the block file's entrance-resistor choice, fill damping, naive.
FULL_ANALYSIS = NetworkOptions()


@dataclass(frozen=True)
class FillDamping:
    """Damping through the fill (``[network] fill_damping_weight``), per region (SI).

    weight : the block file's weight
    frequency, corner : the resonance each region's credit was taken at (the highest in-band
        |Z| peak of the fill solved without the credit, at its worst corner); nan / "-" where
        the region had none
    peak_before : that peak's |Z| with the fill solved without the credit, ohm
    conductance_before, conductance_after : the fill's conductance at that frequency and
        corner, sum_i n_i Re(1 / Z_i), without / with the credit, S
    """

    weight: float
    regions: tuple[str, ...]
    frequency: np.ndarray
    corner: tuple[str, ...]
    peak_before: np.ndarray
    conductance_before: np.ndarray
    conductance_after: np.ndarray


@dataclass(frozen=True)
class SupplyAnalysis:
    """The supply network of a plan and its figures (SI).

    network : the network with the plan's fill;  figures : `evaluate_network` of it
    naive : the naive comparison fill per region (empty when not computed)
    fill_damping : what damping through the fill did (None: not used)
    options : what was computed;  seconds : time the analysis took
    """

    network: BlockNetwork
    figures: NetworkFigures
    naive: list[NaiveFill]
    fill_damping: FillDamping | None
    options: NetworkOptions
    seconds: float


def supply_network(block: BlockFile, supply: float) -> SupplyNetwork:
    """The block's supply network in SI: the package from ``[block]``, the rest from
    ``[network]`` (which must be given)."""
    spec = _spec(block)
    b = block.block
    off = spec.offchip_decap
    return SupplyNetwork(
        supply_voltage=float(supply),
        package_resistance=b.package_resistance_mohm * milli,
        package_inductance=b.package_inductance_nH * nano,
        paths={r.name: _path(spec.regions[r.name]) for r in block.region},
        board_resistance=spec.board_resistance_mohm * milli,
        board_inductance=spec.board_inductance_nH * nano,
        offchip_decap=None if off is None else OffChipDecap(off.capacitance_nF * nano,
                                                            off.esr_mohm * milli,
                                                            off.esl_nH * nano),
        links=tuple(GridLink(k.regions[0], k.regions[1], k.resistance_mohm * milli,
                             k.inductance_pH * pico) for k in spec.links),
    )


def _spec(block: BlockFile) -> NetworkSpec:
    if block.network is None:
        raise ValueError(f"{block.source_file}: the block file has no [network] table")
    return block.network


def _path(r: RegionSpec) -> RegionPath:
    return RegionPath(r.grid_resistance_mohm * milli, r.grid_inductance_pH * pico,
                      r.entrance_resistance_mohm * milli)


def read_waveforms(block: BlockFile) -> dict[str, Samples]:
    """Each ``waveform_csv`` of the ``[network]`` table, resolved relative to the block file:
    region -> (t s, i A). ``PlanError`` names the CSV file, row and column of a bad sample,
    or the block-file field of a waveform longer than the region's clock period."""
    spec = _spec(block)
    folder = Path(block.source_file).parent
    out: dict[str, Samples] = {}
    for region in block.region:
        rs = spec.regions[region.name]
        if rs.waveform_csv is None or not draws_current(region):
            continue
        path = Path(rs.waveform_csv)
        t, i = read_waveform_csv(path if path.is_absolute() else folder / path)
        if region.clock_MHz is not None and t[-1] - t[0] > 1 / (region.clock_MHz * mega) * (
                1 + 1e-12):
            raise PlanError([block.problem(
                f"network.regions.{region.name}.waveform_csv",
                f"the samples span {(t[-1] - t[0]) / nano:.4g} ns, longer than the region's "
                f"clock period ({1e3 / region.clock_MHz:.4g} ns)", rs.waveform_csv)])
        out[region.name] = (t, i)
    return out


def region_activity(region: Region, spec: RegionSpec, samples: Samples | None = None
                    ) -> Activity | None:
    """The region's current for the network (SI), from its ``[[region]]`` table and the
    stimulus of its ``[network.regions]`` entry; None for a region without a current pulse
    (quiet, or no activity given)."""
    if not draws_current(region):
        return None
    assert region.peak_current_mA is not None and region.rise_time_ps is not None
    stimulus = default_stimulus(region, spec)
    return Activity(
        peak_current=region.peak_current_mA * milli,
        rise_time=region.rise_time_ps * pico,
        fall_time=None if region.fall_time_ps is None else region.fall_time_ps * pico,
        clock_frequency=None if region.clock_MHz is None else region.clock_MHz * mega,
        charge_per_cycle=(None if region.charge_per_cycle_pC is None
                          else region.charge_per_cycle_pC * pico),
        samples=samples if stimulus == "samples" else None,
        stimulus=stimulus,  # type: ignore[arg-type]
        base_current=spec.base_current_mA * milli,
        step_delay=spec.step_delay_ns * nano,
        average_current=(None if spec.average_current_mA is None
                         else spec.average_current_mA * milli),
    )


def cell_entries(cells: Sequence[tuple[Candidate | object, int]]) -> list[FillEntry]:
    """Fill entries from (cell, count) pairs; a cell is anything with ``name`` and ``record``
    (a `Candidate`, a `result.CellUse`): its stored per-corner circuits. ``PlanError`` when a
    cell has none stored."""
    out = []
    for cell, count in cells:
        if count <= 0:
            continue
        record = cell.record  # type: ignore[attr-defined]
        if not record.netlist:
            raise PlanError.single(
                "<catalog>", "", f"cell {record.name} has no stored equivalent circuit: "
                "rebuild the catalog with this version of celllab")
        out.append(FillEntry(record.name, dict(record.netlist), float(count)))
    return out


def block_network(block: BlockFile, needs: Sequence[RegionNeed], supply: float,
                  fills: Mapping[str, Sequence[FillEntry]], samples: Mapping[str, Samples],
                  corners: Sequence[str]) -> BlockNetwork:
    """The block's network with ``fills`` at the region nodes (region name -> entries).

    Each region's own capacitance is its idle logic's decap (``needs[r].intrinsic``) plus the
    table's ``wells_wiring_capacitance_nF``, behind ``intrinsic_esr_mohm``.
    """
    spec = _spec(block)
    loads = []
    for region, need in zip(block.region, needs, strict=True):
        rs = spec.regions[region.name]
        try:
            activity = region_activity(region, rs, samples.get(region.name))
        except ValueError as exc:  # a shape the table checks cannot see (e.g. samples)
            raise PlanError([block.problem(f"network.regions.{region.name}", str(exc),
                                           has_value=False)]) from None
        loads.append(RegionLoad(region.name, tuple(fills.get(region.name, ())),
                                need.intrinsic + rs.wells_wiring_capacitance_nF * nano,
                                rs.intrinsic_esr_mohm * milli, activity))
    return build_network(supply_network(block, supply), loads, corners)


def network_goals(block: BlockFile, options: NetworkOptions = FULL_ANALYSIS,
                  naive: Mapping[str, Sequence[FillEntry]] | None = None) -> NetworkGoals:
    """What the network is checked against (SI): each region's ripple from its
    ``droop_fraction`` (else the block's ``ripple_fraction``), IR-drop limits, the grid."""
    spec = _spec(block)
    ripple = {r.name: (r.droop_fraction if r.droop_fraction is not None
                       else block.block.ripple_fraction) for r in block.region}
    limit = {}
    for r in block.region:
        mv = spec.regions[r.name].ir_drop_limit_mV
        mv = mv if mv is not None else spec.ir_drop_limit_mV
        limit[r.name] = mv * milli if mv is not None else float("inf")
    size = spec.size_entrance_resistors if options.entrance is None else options.entrance
    return NetworkGoals(ripple_fraction=ripple, ir_drop_limit=limit, freq=spec.frequencies(),
                        emission_f_max=spec.emission_f_max_MHz * mega, probe=spec.probe_ohm,
                        size_entrance=size, droop=options.droop, naive_fill=naive,
                        droop_segments=spec.droop_segments)


def analyse_supply(block: BlockFile, needs: Sequence[RegionNeed], supply: float,
                   fills: Mapping[str, Sequence[FillEntry]], corners: Sequence[str],
                   naive: list[NaiveFill], options: NetworkOptions = FULL_ANALYSIS,
                   fill_damping: FillDamping | None = None,
                   samples: Mapping[str, Samples] | None = None,
                   progress: Progress | None = None) -> SupplyAnalysis:
    """Build and evaluate the network of a fill (see the module docstring).

    Raises ``PlanError`` for a waveform file that cannot be read or does not fit its region.
    """
    say = progress or (lambda _text: None)
    say("supply network: building it with the fill")
    t0 = time.perf_counter()
    samples = read_waveforms(block) if samples is None else samples
    network = block_network(block, needs, supply, fills, samples, corners)
    naive_entries = None
    if options.naive and naive:
        naive_entries = {n.region: cell_entries(n.cells) for n in naive}
    goals = network_goals(block, options, naive_entries)
    figures = evaluate_network(network, goals, say)
    return SupplyAnalysis(network, figures, naive if options.naive else [], fill_damping,
                          options, time.perf_counter() - t0)
