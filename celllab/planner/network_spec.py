"""The ``[network]`` table of a block file: the supply network a block sits behind, each
region's path from the supply ring, its non-switching capacitance and its switching current.

Every number carries its unit in its name; `supply_network` and `region_activity` convert to
SI once. Example (all values invented)::

    [network]
    ripple_fraction = 0.05          # allowed supply ripple / V_DD (target impedance)
    ir_drop_limit_mV = 12           # DC drop allowed at any region node (entrance resistors)
    package_resistance_mohm = 20
    package_inductance_nH = 0.8
    board_resistance_mohm = 2       # regulator + board up to the package pins
    board_inductance_nH = 2.0
    size_entrance_resistors = true  # size a damping resistor per region entrance

    [network.offchip_decap]         # optional, at the package pins
    capacitance_nF = 1000
    esr_mohm = 10
    esl_nH = 0.3

    [network.regions.alu]
    grid_resistance_mohm = 5        # ring -> region node, loop
    grid_inductance_pH = 20
    intrinsic_capacitance_nF = 2.0  # non-switching logic, wells, wiring
    intrinsic_esr_mohm = 50

    [network.regions.alu.activity]
    stimulus = "clock"              # step | clock | samples
    peak_current_mA = 200
    rise_time_ps = 200
    fall_time_ps = 300
    clock_MHz = 200
    charge_per_cycle_pC = 120

    [[network.links]]               # optional grid segment between two regions
    regions = ["alu", "mac"]
    resistance_mohm = 10
    inductance_pH = 10

``load_network_spec`` reports every problem at once as a ``PlanError`` naming file, line,
field, the value given and what is allowed; `read_waveform_csv` does the same for a current
waveform file (``t_ns,i_mA`` columns).
"""

from __future__ import annotations

import csv
import difflib
import io
import re
from collections.abc import Mapping, Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, ValidationError
from scipy.constants import giga, mega, milli, nano, pico

from celllab.deck.load import find_line, read_toml, validation_problems
from celllab.errors import PlanError, Problem
from celllab.planner.network import (
    FillEntry,
    GridLink,
    OffChipDecap,
    RegionLoad,
    RegionPath,
    SupplyNetwork,
    analysis_frequencies,
)
from celllab.planner.network_figures import NetworkGoals
from celllab.planner.waveforms import Activity

__all__ = [
    "ActivitySpec",
    "LinkSpec",
    "NetworkFile",
    "NetworkSpec",
    "OffChipSpec",
    "RegionSpec",
    "load_network_spec",
    "network_goals",
    "parse_network_spec",
    "read_waveform_csv",
    "region_activity",
    "region_loads",
    "supply_network",
]

_NAME = r"^[A-Za-z][A-Za-z0-9_]{0,39}$"


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)


class OffChipSpec(_Strict):
    """Decoupling at the package pins (board or package capacitor)."""

    capacitance_nF: float = Field(gt=0, le=1e9, description="capacitance, nF")
    esr_mohm: float = Field(0.0, ge=0, le=1e6, description="equivalent series resistance, mohm")
    esl_nH: float = Field(0.0, ge=0, le=1e3, description="equivalent series inductance, nH")


class ActivitySpec(_Strict):
    """The region's switching current."""

    stimulus: Literal["step", "clock", "samples"] = Field(
        "clock", description="waveform for droop in time: step, clock or samples")
    peak_current_mA: float = Field(gt=0, le=1e6, description="step / pulse height, mA")
    rise_time_ps: float = Field(gt=0, le=1e9, description="0-100 % rise of the edge, ps")
    fall_time_ps: float | None = Field(None, gt=0, le=1e9,
                                       description="pulse fall, ps (default: rise_time_ps)")
    clock_MHz: float | None = Field(None, gt=0, le=1e5, description="clock frequency, MHz")
    charge_per_cycle_pC: float | None = Field(None, gt=0, le=1e9,
                                              description="charge of one clock pulse, pC")
    base_current_mA: float = Field(0.0, ge=0, le=1e6,
                                   description="current before the step / between pulses, mA")
    step_delay_ns: float = Field(1.0, ge=0, le=1e6, description="when the step starts, ns")
    average_current_mA: float | None = Field(
        None, gt=0, le=1e6, description="average current for the IR drop, mA (default: "
        "from the waveform)")
    waveform_csv: str | None = Field(None, min_length=1,
                                     description="t_ns,i_mA samples (stimulus 'samples'), "
                                     "relative to this file")


class RegionSpec(_Strict):
    """One region's path from the ring, its own capacitance and its activity."""

    grid_resistance_mohm: float = Field(ge=0, le=1e6, description="ring -> region, mohm")
    grid_inductance_pH: float = Field(ge=0, le=1e6, description="ring -> region, pH")
    entrance_resistance_mohm: float = Field(0.0, ge=0, le=1e6,
                                            description="damping resistor at the entrance, mohm")
    intrinsic_capacitance_nF: float = Field(ge=0, le=1e6,
                                            description="non-switching capacitance, nF")
    intrinsic_esr_mohm: float = Field(0.0, ge=0, le=1e9, description="its series R, mohm")
    ripple_fraction: float | None = Field(None, gt=0, lt=1,
                                          description="allowed ripple / V_DD for this region")
    ir_drop_limit_mV: float | None = Field(None, gt=0, le=1e4,
                                           description="DC drop allowed at this region, mV")
    activity: ActivitySpec | None = Field(
        None, description="the switching current; absent: a quiet region (no current of its own)")


class LinkSpec(_Strict):
    """A grid segment joining two regions."""

    regions: list[str] = Field(min_length=2, max_length=2, description="the two regions joined")
    resistance_mohm: float = Field(ge=0, le=1e6, description="mohm")
    inductance_pH: float = Field(0.0, ge=0, le=1e6, description="pH")


class NetworkSpec(_Strict):
    """The ``[network]`` table."""

    supply_V: float | None = Field(None, gt=0, le=10,
                                   description="supply, V (default: the block's supply)")
    ripple_fraction: float = Field(0.05, gt=0, lt=1, description="allowed ripple / V_DD")
    ir_drop_limit_mV: float = Field(gt=0, le=1e4,
                                    description="DC drop allowed at a region node, mV")
    package_resistance_mohm: float = Field(ge=0, le=1e6, description="package loop, mohm")
    package_inductance_nH: float = Field(ge=0, le=1e3, description="package loop, nH")
    board_resistance_mohm: float = Field(0.0, ge=0, le=1e6, description="board path, mohm")
    board_inductance_nH: float = Field(0.0, ge=0, le=1e3, description="board path, nH")
    offchip_decap: OffChipSpec | None = None
    regions: dict[str, RegionSpec] = Field(min_length=1, description="region name -> region")
    links: list[LinkSpec] = Field(default_factory=list)
    size_entrance_resistors: bool = Field(
        False, description="size a damping resistor at each region entrance")
    f_min_MHz: float = Field(0.1, gt=0, le=1e5, description="analysis from, MHz")
    f_max_GHz: float = Field(10.0, gt=0, le=1e3, description="analysis up to, GHz")
    points_per_decade: int = Field(40, ge=5, le=400, description="analysis grid density")
    emission_f_max_MHz: float = Field(1000.0, gt=0, le=1e5,
                                      description="highest clock harmonic for emission, MHz")
    probe_ohm: float = Field(1.0, gt=0, le=1e3,
                             description="ground-return probe resistance, ohm")

    def frequencies(self) -> np.ndarray:
        """The analysis grid, Hz."""
        return analysis_frequencies(self.f_min_MHz * mega, self.f_max_GHz * giga,
                                    self.points_per_decade)


class NetworkFile(_Strict):
    """A file holding a ``[network]`` table (other tables belong to the block planner)."""

    model_config = ConfigDict(extra="ignore", frozen=True, strict=True)
    network: NetworkSpec

    _file: str = PrivateAttr(default="<network>")
    _text: str | None = PrivateAttr(default=None)

    @property
    def source_file(self) -> str:
        return self._file

    def problem(self, dotted: str, message: str, value: Any = None,
                has_value: bool = True) -> Problem:
        """A located problem about field ``dotted`` of this file."""
        parts: list[str | int] = [int(p) if p.isdigit() else p
                                  for p in dotted.replace("[", ".").replace("]", "").split(".")]
        line = None
        while parts and line is None:  # an absent key: the line of its table
            line = find_line(self._text, parts)
            parts = parts[:-1]
        return Problem(self._file, dotted, message, value, line, has_value)


def _rule_problems(spec: NetworkFile) -> list[Problem]:
    """Cross-field rules pydantic's per-field checks cannot see."""
    net, out = spec.network, []
    names = list(net.regions)
    for name in names:
        if not re.match(_NAME, name):
            out.append(spec.problem(f"network.regions.{name}", "region name: letters, digits "
                                    "and _, first a letter (at most 40)", name))
    if net.offchip_decap is not None and net.board_resistance_mohm == 0 \
            and net.board_inductance_nH == 0:
        out.append(spec.problem("network.offchip_decap", "needs a board path "
                                "(board_resistance_mohm or board_inductance_nH > 0): an ideal "
                                "supply would short it", has_value=False))
    for k, link in enumerate(net.links):
        for end in link.regions:
            if end not in net.regions:
                guess = difflib.get_close_matches(end, names, n=1)
                out.append(spec.problem(f"network.links[{k}].regions", "no such region; "
                                        "allowed: " + ", ".join(names)
                                        + (f". Did you mean {guess[0]!r}?" if guess else ""),
                                        end))
        if link.regions[0] == link.regions[1]:
            out.append(spec.problem(f"network.links[{k}].regions", "a link joins two "
                                    "different regions", list(link.regions)))
        if link.resistance_mohm == 0 and link.inductance_pH == 0:
            out.append(spec.problem(f"network.links[{k}]", "resistance_mohm or inductance_pH "
                                    "must be > 0 (a zero link merges the regions)",
                                    has_value=False))
    if net.f_min_MHz * mega >= net.f_max_GHz * giga:
        out.append(spec.problem("network.f_min_MHz", f"must be below f_max_GHz "
                                f"({net.f_max_GHz} GHz)", net.f_min_MHz))
    for name, region in net.regions.items():
        a, where = region.activity, f"network.regions.{name}.activity"
        if a is None:
            continue
        if a.stimulus == "clock" and a.clock_MHz is None:
            out.append(spec.problem(f"{where}.clock_MHz", "required for stimulus 'clock'",
                                    has_value=False))
        if a.stimulus == "samples" and a.waveform_csv is None:
            out.append(spec.problem(f"{where}.waveform_csv", "required for stimulus 'samples'",
                                    has_value=False))
        if a.stimulus != "samples" and a.waveform_csv is not None:
            out.append(spec.problem(f"{where}.waveform_csv", "only used with stimulus "
                                    "'samples'", a.waveform_csv))
        fall = (a.fall_time_ps if a.fall_time_ps is not None else a.rise_time_ps) * pico
        edges = a.rise_time_ps * pico + fall
        flat = 0.0
        if a.charge_per_cycle_pC is not None:
            least = a.peak_current_mA * milli * 0.5 * edges
            flat = a.charge_per_cycle_pC * pico / (a.peak_current_mA * milli) - 0.5 * edges
            if a.charge_per_cycle_pC * pico < least * (1 - 1e-9):
                out.append(spec.problem(f"{where}.charge_per_cycle_pC", f"must be at least "
                                        f"{least / pico:.4g} pC (a triangle pulse of the given "
                                        "peak and edges)", a.charge_per_cycle_pC))
        if a.clock_MHz is not None and a.stimulus != "samples":
            length = edges + max(flat, 0.0)
            if length > 1.0 / (a.clock_MHz * mega) * (1 + 1e-9):
                out.append(spec.problem(f"{where}.clock_MHz", f"the pulse lasts "
                                        f"{length / nano:.4g} ns, longer than a clock period "
                                        f"({1e3 / a.clock_MHz:.4g} ns)", a.clock_MHz))
    return out


def parse_network_spec(data: dict[str, Any], file: str = "<network>", text: str | None = None
                       ) -> NetworkFile:
    """Validate parsed TOML holding a ``[network]`` table; ``PlanError`` lists every problem."""
    try:
        spec = NetworkFile.model_validate(data)
    except ValidationError as exc:
        problems = validation_problems(exc, file, text, NetworkFile)
        raise PlanError([replace(p, line=p.line or find_line(text, p.field.split(".")[:1]))
                         for p in problems]) from None
    spec._file, spec._text = file, text
    problems = _rule_problems(spec)
    if problems:
        raise PlanError(problems)
    return spec


def load_network_spec(path: str | Path) -> NetworkFile:
    """Load and validate the ``[network]`` table of a TOML file."""
    data, text = read_toml(path, PlanError)
    return parse_network_spec(data, str(path), text)


def supply_network(spec: NetworkSpec, supply_V: float | None = None) -> SupplyNetwork:
    """The spec's network in SI (`planner.network.SupplyNetwork`).

    ``supply_V`` is used when the table gives none (the block's supply); one of them must be
    given.
    """
    supply = spec.supply_V if spec.supply_V is not None else supply_V
    if supply is None:
        raise ValueError("no supply voltage: give network.supply_V or the block's supply")
    off = spec.offchip_decap
    return SupplyNetwork(
        supply_voltage=float(supply),
        package_resistance=spec.package_resistance_mohm * milli,
        package_inductance=spec.package_inductance_nH * nano,
        paths={name: RegionPath(r.grid_resistance_mohm * milli, r.grid_inductance_pH * pico,
                                r.entrance_resistance_mohm * milli)
               for name, r in spec.regions.items()},
        board_resistance=spec.board_resistance_mohm * milli,
        board_inductance=spec.board_inductance_nH * nano,
        offchip_decap=None if off is None else OffChipDecap(off.capacitance_nF * nano,
                                                            off.esr_mohm * milli,
                                                            off.esl_nH * nano),
        links=tuple(GridLink(k.regions[0], k.regions[1], k.resistance_mohm * milli,
                             k.inductance_pH * pico) for k in spec.links),
    )


def region_activity(spec: RegionSpec, samples: tuple[np.ndarray, np.ndarray] | None = None
                    ) -> Activity | None:
    """The region's `Activity` in SI (None for a quiet region); ``samples`` (s, A) from
    `read_waveform_csv`."""
    a = spec.activity
    if a is None:
        return None
    return Activity(
        peak_current=a.peak_current_mA * milli,
        rise_time=a.rise_time_ps * pico,
        fall_time=None if a.fall_time_ps is None else a.fall_time_ps * pico,
        clock_frequency=None if a.clock_MHz is None else a.clock_MHz * mega,
        charge_per_cycle=None if a.charge_per_cycle_pC is None else a.charge_per_cycle_pC * pico,
        samples=samples,
        stimulus=a.stimulus,
        base_current=a.base_current_mA * milli,
        step_delay=a.step_delay_ns * nano,
        average_current=None if a.average_current_mA is None else a.average_current_mA * milli,
    )


def read_waveform_csv(path: str | Path) -> tuple[np.ndarray, np.ndarray]:
    """Current samples from a CSV with a ``t_ns,i_mA`` header: (t s, i A).

    ``#`` lines are comments. Raises ``PlanError`` naming the file, the row and the column for
    a missing header, a non-number, times that do not increase, or fewer than two rows.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise PlanError.single(str(path), "", "waveform file not found") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise PlanError.single(str(path), "", f"cannot read waveform file: {exc}") from None
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


def region_loads(spec: NetworkSpec, fills: Mapping[str, Sequence[FillEntry]],
                 samples: Mapping[str, tuple[np.ndarray, np.ndarray]] | None = None
                 ) -> list[RegionLoad]:
    """One `RegionLoad` per region of the table, with the planner's fill for it.

    Parameters
    ----------
    spec : NetworkSpec
    fills : mapping region -> fill entries (a region not named gets no fill)
    samples : mapping region -> (t s, i A) for regions with stimulus 'samples' (from
              `read_waveform_csv`, path resolved by the caller)
    """
    unknown = sorted(set(fills) - set(spec.regions))
    if unknown:
        raise ValueError(f"fills for unknown region(s) {unknown}; regions: {list(spec.regions)}")
    out = []
    for name, region in spec.regions.items():
        out.append(RegionLoad(name, tuple(fills.get(name, ())),
                              region.intrinsic_capacitance_nF * nano,
                              region.intrinsic_esr_mohm * milli,
                              region_activity(region, (samples or {}).get(name))))
    return out


def network_goals(spec: NetworkSpec,
                  naive_fill: Mapping[str, Sequence[FillEntry]] | None = None) -> NetworkGoals:
    """The checks the table asks for (`planner.network_figures.NetworkGoals`, SI)."""
    names = list(spec.regions)
    ripple = {n: (r.ripple_fraction if r.ripple_fraction is not None else spec.ripple_fraction)
              for n, r in spec.regions.items()}
    limit = {n: (r.ir_drop_limit_mV if r.ir_drop_limit_mV is not None
                 else spec.ir_drop_limit_mV) * milli for n, r in spec.regions.items()}
    return NetworkGoals(ripple_fraction={n: ripple[n] for n in names},
                        ir_drop_limit={n: limit[n] for n in names},
                        freq=spec.frequencies(), emission_f_max=spec.emission_f_max_MHz * mega,
                        probe=spec.probe_ohm, size_entrance=spec.size_entrance_resistors,
                        naive_fill=naive_fill)
