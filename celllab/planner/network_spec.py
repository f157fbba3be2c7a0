"""The ``[network]`` table of a block file: what sits between the supply and the block's
regions, and how the network is analysed (display units; every unit in the field name).

The table says only what the rest of the block file does not: the block's supply, package
loop and ripple come from ``[block]``; each region's switching current (peak, edges, clock,
charge per cycle), its allowed droop (``droop_fraction``) and the decap of its idle logic
(``logic_activity``) come from its ``[[region]]`` table. Example (all values invented)::

    [network]
    ir_drop_limit_mV = 12           # DC drop allowed at any region node (entrance resistors)
    board_resistance_mohm = 2       # regulator + board up to the package pins
    board_inductance_nH = 2.0
    size_entrance_resistors = true  # size a damping resistor per region entrance
    fill_damping_weight = 1.0       # value the fill's damping at each region's worst peak

    [network.offchip_decap]         # optional, at the package pins
    capacitance_nF = 1000
    esr_mohm = 10
    esl_nH = 0.3

    [network.regions.alu]           # one per [[region]], by name
    grid_resistance_mohm = 5        # ring -> region node, loop
    grid_inductance_pH = 20
    wells_wiring_capacitance_nF = 2.0   # non-switching capacitance besides the idle logic's
    intrinsic_esr_mohm = 50         # series R of the region's own (non-fill) capacitance
    stimulus = "clock"              # droop in time: step | clock | samples
    # waveform_csv = "alu_burst.csv"  # stimulus "samples": t_ns,i_mA, relative to the block file

    [[network.links]]               # optional grid segment between two regions
    regions = ["alu", "mac"]
    resistance_mohm = 10
    inductance_pH = 10

The block file validates the table with the rest of the file (``planner.block``), so a bad
value is reported with the file, line, field, value and what is allowed; `rule_problems`
holds the checks that need the ``[[region]]`` tables. `read_waveform_csv` reads a current
waveform file (``t_ns,i_mA`` columns) with the same kind of messages.
"""

from __future__ import annotations

import csv
import difflib
import io
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field
from scipy.constants import giga, mega, milli, nano

from celllab.deck.load import read_text_file
from celllab.errors import PlanError, Problem
from celllab.planner.network import analysis_frequencies

if TYPE_CHECKING:
    from celllab.planner.block import Region

__all__ = [
    "STIMULI",
    "LinkSpec",
    "NetworkSpec",
    "OffChipSpec",
    "RegionSpec",
    "read_waveform_csv",
    "rule_problems",
]

#: Documented limits (process_decks/README.md, "Limits"): the network is solved as a dense
#: matrix over its regions at every frequency, so its size is bounded before any work.
MAX_NETWORK_REGIONS = 200
MAX_NETWORK_LINKS = 1000
#: Smallest value a "> 0" field takes, in its own unit: a positive number far below any real
#: network (5e-324 nF would become 0 F in SI, and divisions by it overflow).
MIN_POSITIVE = 1e-6
Stimulus = Literal["step", "clock", "samples"]
STIMULI: tuple[str, ...] = ("step", "clock", "samples")


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)


class OffChipSpec(_Strict):
    """Decoupling at the package pins (board or package capacitor)."""

    capacitance_nF: float = Field(ge=MIN_POSITIVE, le=1e9, description="capacitance, nF")
    esr_mohm: float = Field(0.0, ge=0, le=1e6, description="equivalent series resistance, mohm")
    esl_nH: float = Field(0.0, ge=0, le=1e3, description="equivalent series inductance, nH")


class RegionSpec(_Strict):
    """One region's path from the ring, its own non-fill capacitance and how the droop run
    drives it (its current itself is the ``[[region]]``'s)."""

    grid_resistance_mohm: float = Field(ge=0, le=1e6, description="ring -> region, mohm")
    grid_inductance_pH: float = Field(ge=0, le=1e6, description="ring -> region, pH")
    entrance_resistance_mohm: float = Field(0.0, ge=0, le=1e6,
                                            description="damping resistor at the entrance, mohm")
    wells_wiring_capacitance_nF: float = Field(
        0.0, ge=0, le=1e6, description="non-switching capacitance besides the idle logic's "
        "(wells, wiring), nF; the idle logic's own comes from the region's logic_activity")
    intrinsic_esr_mohm: float = Field(0.0, ge=0, le=1e9,
                                      description="series R of the region's own capacitance, "
                                      "mohm")
    ir_drop_limit_mV: float | None = Field(None, ge=MIN_POSITIVE, le=1e4,
                                           description="DC drop allowed at this region, mV")
    stimulus: Stimulus | None = Field(
        None, description="droop in time: step (the region wakes up), clock (its pulse "
        "train) or samples (waveform_csv); default clock when the region has clock_MHz, "
        "else step")
    base_current_mA: float = Field(0.0, ge=0, le=1e6,
                                   description="current before the step / between pulses, mA")
    step_delay_ns: float = Field(1.0, ge=0, le=1e6, description="when the step starts, ns")
    average_current_mA: float | None = Field(
        None, ge=MIN_POSITIVE, le=1e6, description="average current for the IR drop, mA (default: "
        "from the waveform)")
    waveform_csv: str | None = Field(None, min_length=1,
                                     description="t_ns,i_mA samples (stimulus 'samples'), "
                                     "relative to the block file")


class LinkSpec(_Strict):
    """A grid segment joining two regions."""

    regions: list[str] = Field(min_length=2, max_length=2, description="the two regions joined")
    resistance_mohm: float = Field(ge=0, le=1e6, description="mohm")
    inductance_pH: float = Field(0.0, ge=0, le=1e6, description="pH")


class NetworkSpec(_Strict):
    """The ``[network]`` table of a block file."""

    ir_drop_limit_mV: float | None = Field(
        None, ge=MIN_POSITIVE, le=1e4, description="DC drop allowed at a region node, mV (needed to size "
        "entrance resistors)")
    board_resistance_mohm: float = Field(0.0, ge=0, le=1e6, description="board path, mohm")
    board_inductance_nH: float = Field(0.0, ge=0, le=1e3, description="board path, nH")
    offchip_decap: OffChipSpec | None = None
    regions: dict[str, RegionSpec] = Field(min_length=1, max_length=MAX_NETWORK_REGIONS,
                                           description="[[region]] name -> its path")
    links: list[LinkSpec] = Field(default_factory=list, max_length=MAX_NETWORK_LINKS)
    size_entrance_resistors: bool = Field(
        False, description="size a damping resistor at each region entrance")
    fill_damping_weight: float = Field(
        0.0, ge=0, le=100, description="weight of each fill cell's damping of its region's "
        "worst resonance in the fill objective (0: off; goal max_useful_cap)")
    f_min_MHz: float = Field(0.1, ge=MIN_POSITIVE, le=1e5, description="analysis from, MHz")
    f_max_GHz: float = Field(10.0, ge=MIN_POSITIVE, le=1e3, description="analysis up to, GHz")
    points_per_decade: int = Field(40, ge=5, le=400, description="analysis grid density")
    emission_f_max_MHz: float = Field(1000.0, ge=MIN_POSITIVE, le=1e5,
                                      description="highest clock harmonic for emission, MHz")
    probe_ohm: float = Field(1.0, ge=MIN_POSITIVE, le=1e3,
                             description="ground-return probe resistance, ohm")
    droop_segments: int | None = Field(
        None, ge=2, le=256, description="RC-line ladder segments of the droop run (default: "
        "sized at the ringing frequency)")

    def frequencies(self) -> np.ndarray:
        """The analysis grid, Hz."""
        return analysis_frequencies(self.f_min_MHz * mega, self.f_max_GHz * giga,
                                    self.points_per_decade)


def _pulse_given(region: Region) -> bool:
    return region.peak_current_mA is not None and region.rise_time_ps is not None


def draws_current(region: Region) -> bool:
    """The region has a switching current of its own for the network (a pulse, not quiet)."""
    return not region.quiet and _pulse_given(region)


def default_stimulus(region: Region, spec: RegionSpec) -> str:
    """The droop stimulus of a region: as given, else clock with a clock, else step."""
    if spec.stimulus is not None:
        return spec.stimulus
    return "clock" if region.clock_MHz is not None else "step"


def rule_problems(net: NetworkSpec, regions: Sequence[Region], goal: str
                  ) -> list[tuple[str, Any, str]]:
    """Checks of the ``[network]`` table that pydantic's per-field checks cannot see, with
    the block's regions: (dotted field, value or None, message)."""
    out: list[tuple[str, Any, str]] = []
    names = [r.name for r in regions]
    for name in net.regions:
        if name not in names:
            guess = difflib.get_close_matches(name, names, n=1)
            out.append((f"network.regions.{name}", name, "no [[region]] of that name; allowed: "
                        + ", ".join(names) + (f". Did you mean {guess[0]!r}?" if guess else "")))
    for i, region in enumerate(regions):
        if region.name not in net.regions:
            out.append((f"region[{i}].name", region.name, "the supply network needs this "
                        f"region's path: add a [network.regions.{region.name}] table "
                        "(grid_resistance_mohm, grid_inductance_pH)"))
    if net.offchip_decap is not None and net.board_resistance_mohm == 0 \
            and net.board_inductance_nH == 0:
        out.append(("network.offchip_decap", None, "needs a board path "
                    "(board_resistance_mohm or board_inductance_nH > 0): an ideal supply would "
                    "short it"))
    for k, link in enumerate(net.links):
        for end in link.regions:
            if end not in names:
                guess = difflib.get_close_matches(end, names, n=1)
                out.append((f"network.links[{k}].regions", end, "no such region; allowed: "
                            + ", ".join(names)
                            + (f". Did you mean {guess[0]!r}?" if guess else "")))
        if link.regions[0] == link.regions[1]:
            out.append((f"network.links[{k}].regions", list(link.regions),
                        "a link joins two different regions"))
        if link.resistance_mohm == 0 and link.inductance_pH == 0:
            out.append((f"network.links[{k}]", None, "resistance_mohm or inductance_pH must be "
                        "> 0 (a zero link merges the regions)"))
    if net.f_min_MHz * mega >= net.f_max_GHz * giga:
        out.append(("network.f_min_MHz", net.f_min_MHz,
                    f"must be below f_max_GHz ({net.f_max_GHz} GHz)"))
    if net.fill_damping_weight > 0 and goal != "max_useful_cap":
        out.append(("network.fill_damping_weight", net.fill_damping_weight,
                    "the fill's damping is valued in the max_useful_cap objective: set "
                    "[objective] goal = 'max_useful_cap' or the weight to 0"))
    by_name = {r.name: (i, r) for i, r in enumerate(regions)}
    if net.size_entrance_resistors and net.ir_drop_limit_mV is None:
        lacking = [n for n, s in net.regions.items()
                   if s.ir_drop_limit_mV is None and n in by_name]
        if lacking:
            out.append(("network.ir_drop_limit_mV", None, "required with "
                        "size_entrance_resistors = true (or give ir_drop_limit_mV in "
                        + ", ".join(f"[network.regions.{n}]" for n in lacking) + ")"))
    for name, spec in net.regions.items():
        if name not in by_name:
            continue
        i, region = by_name[name]
        at = f"network.regions.{name}"
        current = draws_current(region)
        if not region.quiet and region.activity_form() is not None and not _pulse_given(region):
            out.append((f"region[{i}]", region.name, "the supply network needs this region's "
                        "current pulse: give peak_current_mA and rise_time_ps (with "
                        "fall_time_ps, clock_MHz, and charge_per_cycle_pC for a flat top), or "
                        "mark it quiet = true"))
            continue
        driven = [f for f in ("stimulus", "waveform_csv", "average_current_mA")
                  if getattr(spec, f) is not None]
        driven += [f for f, d in (("base_current_mA", 0.0),) if getattr(spec, f) != d]
        if not current:
            for f in driven:
                out.append((f"{at}.{f}", getattr(spec, f), "only for a region that draws a "
                            "current (peak_current_mA and rise_time_ps in its [[region]])"))
            continue
        stimulus = default_stimulus(region, spec)
        if stimulus == "clock" and region.clock_MHz is None:
            out.append((f"{at}.stimulus", stimulus, f"needs clock_MHz in the [[region]] "
                        f"{region.name!r} table"))
        if stimulus == "samples" and spec.waveform_csv is None:
            out.append((f"{at}.waveform_csv", None, "required for stimulus 'samples'"))
        if stimulus != "samples" and spec.waveform_csv is not None:
            out.append((f"{at}.waveform_csv", spec.waveform_csv,
                        "only used with stimulus 'samples'"))
    return out


def read_waveform_csv(path: str | Path) -> tuple[np.ndarray, np.ndarray]:
    """Current samples from a CSV with a ``t_ns,i_mA`` header: (t s, i A).

    ``#`` lines are comments. Raises ``PlanError`` naming the file, the row and the column for
    a missing header, a non-number, times that do not increase, or fewer than two rows.
    """
    text = read_text_file(path, PlanError, kind="CSV (t_ns,i_mA)")
    rows = [(n, line) for n, line in enumerate(text.splitlines(), start=1)
            if line.strip() and not line.lstrip().startswith("#")]
    if not rows:
        raise PlanError.single(str(path), "", "empty waveform file (header t_ns,i_mA expected)")
    header_line, header = rows[0]
    columns = [c.strip() for c in next(csv.reader(io.StringIO(header)))]
    if columns != ["t_ns", "i_mA"]:
        raise PlanError([Problem(str(path), "header", "must be exactly t_ns,i_mA", header,
                                 header_line)])
    problems, t, i = [], [], []
    for n, line in rows[1:]:
        cells = [c.strip() for c in next(csv.reader(io.StringIO(line)))]
        if len(cells) != 2:
            problems.append(Problem(str(path), f"row {n}", "needs two values: t_ns,i_mA",
                                    line, n))
            continue
        values = []
        for name, cell in zip(("t_ns", "i_mA"), cells):
            try:
                v = float(cell)
            except ValueError:
                v = float("nan")
            if not np.isfinite(v):
                problems.append(Problem(str(path), f"row {n}.{name}", "not a finite number",
                                        cell, n))
            values.append(v)
        t.append(values[0])
        i.append(values[1])
    if not problems:
        if len(t) < 2:
            problems.append(Problem(str(path), "rows", "at least two samples needed",
                                    len(t), has_value=True))
        else:
            bad = np.flatnonzero(np.diff(t) <= 0)
            if bad.size:
                n = rows[1 + int(bad[0]) + 1][0]
                problems.append(Problem(str(path), f"row {n}.t_ns", "times must increase",
                                        t[int(bad[0]) + 1], n))
    if problems:
        raise PlanError(problems)
    return np.asarray(t) * nano, np.asarray(i) * milli
