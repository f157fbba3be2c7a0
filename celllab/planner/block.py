"""Block files: a block's empty space region by region, what each region draws, the budgets
of the fill and what the fill should achieve.

A block file is TOML (every number's unit is in its name)::

    [block]                         # the block and its package (lumped PDN figures)
    name = "dsp_core"
    deck = "lumen130"               # catalog deck the cells come from
    supply_V = 1.2                  # optional: default the deck's core supply
    switching_power_W = 0.1
    clock_GHz = 0.2
    activity = 0.15                 # switching factor of the logic, 0 < a <= 1
    current_step_A = 0.05
    ripple_fraction = 0.05
    package_inductance_nH = 0.8
    package_resistance_mohm = 20

    [candidates]                    # which catalog cells may fill (optional table)
    where = "height_rows <= 2"      # filter text in the catalog's language
    corner = "worst"                # "worst" (each figure at its worst corner) or a corner

    [budgets]                       # optional table
    leakage_uA = 15                 # whole fill, at the leakiest corner
    max_kinds = 3                   # distinct cells in the whole fill
    thin_oxide_area_mm2 = 0.02      # a direct limit on thin-oxide gate area, and/or
    [budgets.wearout]               # a failure target over a mission profile (the
                                    # smaller of the two areas applies)
    failure_ppm = 10
    [[budgets.wearout.mission]]
    years = 10
    temperature_C = 85
    # supply_V = 1.2                # optional: the block supply

    [objective]                     # optional table
    goal = "max_useful_cap"         # or "min_leakage" (meet every region target)
    mip_rel_gap = 0.005
    time_limit_s = 60

    [[region]]                      # one or more
    name = "mac_array"
    frequency_MHz = 400             # optional: from the rise time, the clock, or the block
    esd_safe_only = false
    quiet = false                   # true: no switching current of its own
    weight = 1.0                    # share of the objective
    # switching activity, one of: charge_per_cycle_pC | peak_current_mA + rise_time_ps
    # (+ fall_time_ps, + charge_per_cycle_pC for a flat-topped pulse) | switching_power_mW +
    # clock_MHz (a clock alone: frequency only; with a pulse: one pulse per clock period)
    peak_current_mA = 80
    rise_time_ps = 150
    fall_time_ps = 250
    clock_MHz = 400
    logic_activity = 0.2            # optional: non-switching logic adds intrinsic decap
    droop_fraction = 0.05           # optional: default the block's ripple_fraction
    min_cap_nF = 0.5                # optional targets (the largest applies)
    max_impedance_mohm = 300

    [[region.open_slots]]           # corner cells, pad-ring spacers: outline in um
    name = "ring_corners"
    role = "corner"                 # corner | spacer | filler | other
    width_um = 60
    height_um = 60
    count = 4

    [[region.row_gaps]]             # filler gaps in the rows: a histogram of widths
    name = "fillers"
    height_rows = 1
    width_sites = [4, 6, 8, 12, 16]
    count       = [900, 400, 350, 120, 60]

    [network]                       # optional: the supply network behind the regions
    ir_drop_limit_mV = 15           # (planner.network_spec: board, off-chip decap, a path
    board_inductance_nH = 1.5       # per region, links, analysis grid, damping options;
    [network.regions.mac_array]     # the package, supply, ripple and each region's current
    grid_resistance_mohm = 4        # come from the tables above)
    grid_inductance_pH = 15

``load_block`` reports every problem at once as a ``PlanError`` naming file, line, field,
the value given and what is allowed. Values stay in the units typed; the planner converts.
The single ``empty_sites`` count of earlier block files gets a migration message.
"""

from __future__ import annotations

import difflib
from dataclasses import replace
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, ValidationError

from celllab.deck.load import find_line, read_toml, validation_problems
from celllab.errors import PlanError, Problem
from celllab.planner.network_spec import NetworkSpec
from celllab.planner.network_spec import rule_problems as network_rules

__all__ = [
    "ACTIVITY_FIELDS",
    "GOALS",
    "ROLES",
    "BlockFile",
    "BlockParams",
    "Budgets",
    "CandidateParams",
    "Objective",
    "OpenSlots",
    "Region",
    "RowGaps",
    "Wearout",
    "WearoutPhase",
    "load_block",
    "parse_block",
]

Role = Literal["corner", "spacer", "filler", "other"]
ROLES: tuple[str, ...] = ("corner", "spacer", "filler", "other")
Goal = Literal["max_useful_cap", "min_leakage"]
GOALS: tuple[str, ...] = ("max_useful_cap", "min_leakage")
_NAME = r"^[A-Za-z][A-Za-z0-9_\-]{0,59}$"
_NAME_HELP = "letters, digits, _ or -, starting with a letter"

#: The three ways to state a region's switching activity (fields of each).
ACTIVITY_FIELDS: dict[str, tuple[str, ...]] = {
    "charge": ("charge_per_cycle_pC",),
    "pulse": ("peak_current_mA", "rise_time_ps", "fall_time_ps"),
    "power": ("switching_power_mW", "clock_MHz"),
}


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)


class BlockParams(_Strict):
    """The block, its load and the package it sits behind (the lumped PDN figures)."""

    name: str = Field(pattern=_NAME, description="block name: " + _NAME_HELP)
    deck: str = Field(min_length=1, description="catalog deck the cells come from")
    supply_V: float | None = Field(None, gt=0, le=10,
                                   description="supply, V; omitted: the deck's core supply")
    switching_power_W: float = Field(gt=0, le=1e3, description="dynamic power of the block, W")
    clock_GHz: float = Field(gt=0, le=100, description="clock frequency, GHz")
    activity: float = Field(gt=0, le=1, description="switching factor of the logic, 0 < a <= 1")
    current_step_A: float = Field(gt=0, le=1e3, description="worst load current step, A")
    ripple_fraction: float = Field(gt=0, lt=1, description="allowed supply ripple / V_DD")
    package_inductance_nH: float = Field(gt=0, le=1e3,
                                         description="package + board loop inductance, nH")
    package_resistance_mohm: float = Field(ge=0, le=1e6,
                                           description="package + board loop resistance, mohm")


class CandidateParams(_Strict):
    """Which catalog cells may fill the block and at which corner they are judged."""

    where: str = Field("", description="catalog filter text, e.g. 'height_rows = 1'")
    corner: str = Field("worst", min_length=1,
                        description="'worst' (each figure at its worst corner) or a corner")


class WearoutPhase(_Strict):
    """One phase of the mission profile."""

    years: float = Field(gt=0, le=100, description="duration of the phase, years")
    temperature_C: float = Field(ge=-55, le=200, description="junction temperature, degC")
    supply_V: float | None = Field(None, gt=0, le=10,
                                   description="gate voltage, V; omitted: the block supply")


class Wearout(_Strict):
    """Thin-oxide area budget from a failure target over a mission profile."""

    failure_ppm: float = Field(gt=0, lt=1e6,
                               description="allowed fraction of parts whose fill oxide breaks "
                               "down during the mission, ppm")
    mission: list[WearoutPhase] = Field(min_length=1, max_length=100,
                                        description="mission phases")


class Budgets(_Strict):
    """Limits on the whole fill."""

    leakage_uA: float | None = Field(None, ge=0, le=1e9,
                                     description="fill leakage at the leakiest corner, uA; "
                                     "omitted: no limit")
    max_kinds: int = Field(3, ge=1, le=500, description="distinct cells in the whole fill")
    thin_oxide_area_mm2: float | None = Field(None, ge=0, le=1e4,
                                              description="thin-oxide gate area of the fill, "
                                              "mm^2; omitted: no limit")
    wearout: Wearout | None = None
    esd_survive: bool = Field(False, description="leave out cells whose stored HBM or CDM margin "
                              "(hbm_margin_V, cdm_margin_V at the planning corner) is negative: the "
                              "deck's [esd] zap breaks their oxide; cells without ESD figures stay in")
    broken_oxide_ok: bool = Field(False, description="leave out cells whose broken oxide draws more "
                                  "than the rail's fault current limit (broken_oxide_ok = 0)")


class Objective(_Strict):
    """What the fill should achieve and how hard the solver tries."""

    goal: Goal = Field("max_useful_cap",
                       description="max_useful_cap: most C_eff at each region's frequency; "
                       "min_leakage: meet every region target at the least leakage")
    mip_rel_gap: float = Field(5e-3, ge=0, le=0.5,
                               description="relative gap to the best bound at which the solver "
                               "stops (the models' own uncertainty is far larger than 0.5 %)")
    time_limit_s: float = Field(60.0, gt=0, le=3600, description="solver time limit, s")


class OpenSlots(_Strict):
    """A class of open-region slots (no row structure): corner cells, pad-ring spacers."""

    name: str = Field(pattern=_NAME, description="gap class name: " + _NAME_HELP)
    role: Role = Field("other", description="corner | spacer | filler | other")
    width_um: float = Field(gt=0, le=1e5, description="slot width, um")
    height_um: float = Field(gt=0, le=1e5, description="slot height, um")
    count: int = Field(ge=1, le=10**8, description="number of such slots")


class RowGaps(_Strict):
    """A class of in-row gaps of one height: a histogram of widths."""

    name: str = Field(pattern=_NAME, description="gap class name: " + _NAME_HELP)
    role: Role = Field("filler", description="corner | spacer | filler | other")
    height_rows: int = Field(1, ge=1, le=8, description="gap height, placement rows")
    width_sites: list[Annotated[int, Field(ge=1, le=100_000)]] = Field(
        min_length=1, max_length=4096, description="distinct gap widths, placement sites")
    count: list[Annotated[int, Field(ge=0, le=10**8)]] = Field(
        min_length=1, max_length=4096, description="number of gaps of each width")


class Region(_Strict):
    """A part of the block with its own switching activity and its own gaps."""

    name: str = Field(pattern=_NAME, description="region name: " + _NAME_HELP)
    frequency_MHz: float | None = Field(None, gt=0, le=1e6,
                                        description="frequency at which the fill must still "
                                        "decouple, MHz")
    esd_safe_only: bool = Field(False, description="only cells with no gate tied to a rail")
    quiet: bool = Field(False, description="the region draws no switching current of its own")
    weight: float = Field(1.0, gt=0, le=1e6, description="weight in the objective")
    charge_per_cycle_pC: float | None = Field(None, gt=0, le=1e9,
                                              description="charge drawn per cycle, pC")
    peak_current_mA: float | None = Field(None, gt=0, le=1e6,
                                          description="peak of the switching current pulse, mA")
    rise_time_ps: float | None = Field(None, gt=0, le=1e7, description="pulse rise time, ps")
    fall_time_ps: float | None = Field(None, gt=0, le=1e7,
                                       description="pulse fall time, ps (default: rise time)")
    switching_power_mW: float | None = Field(None, gt=0, le=1e6,
                                             description="dynamic power of the region, mW")
    clock_MHz: float | None = Field(None, gt=0, le=1e6, description="region clock, MHz")
    logic_activity: float | None = Field(None, gt=0, le=1,
                                         description="switching factor of the region's logic "
                                         "(its non-switching part adds intrinsic decap)")
    droop_fraction: float | None = Field(None, gt=0, lt=1,
                                         description="allowed droop / V_DD; default the "
                                         "block's ripple_fraction")
    min_cap_nF: float | None = Field(None, ge=0, le=1e6,
                                     description="minimum useful fill capacitance, nF")
    max_impedance_mohm: float | None = Field(None, gt=0, le=1e9,
                                             description="fill impedance limit at the "
                                             "frequency of interest, mohm")
    open_slots: list[OpenSlots] = Field(default_factory=list, max_length=1000)
    row_gaps: list[RowGaps] = Field(default_factory=list, max_length=1000)

    def activity_form(self) -> str | None:
        """Which of ``ACTIVITY_FIELDS`` the region uses (None: no activity given; a clock
        alone only sets the frequency of interest; a pulse with a charge per cycle is a
        flat-topped pulse)."""
        given = _forms(self)
        if set(given) == {"charge", "pulse"}:
            return "pulse"
        return given[0] if len(given) == 1 else None


def _forms(r: Region) -> list[str]:
    """The activity forms a region gives fields of (a clock alone is none of them)."""
    return [form for form, names in ACTIVITY_FIELDS.items()
            if any(getattr(r, n) is not None for n in names if n != "clock_MHz")]


class BlockFile(_Strict):
    """A whole block file. ``source_file``/``line_of`` locate later (catalog-side) problems.

    ``network`` is the supply network behind the regions (``planner.network_spec``); None:
    no network analysis.
    """

    block: BlockParams
    candidates: CandidateParams = Field(
        default_factory=lambda: CandidateParams.model_validate({}))
    budgets: Budgets = Field(default_factory=lambda: Budgets.model_validate({}))
    objective: Objective = Field(default_factory=lambda: Objective.model_validate({}))
    region: list[Region] = Field(min_length=1, max_length=200)
    network: NetworkSpec | None = None

    _file: str = PrivateAttr(default="<block>")
    _text: str | None = PrivateAttr(default=None)

    @property
    def source_file(self) -> str:
        return self._file

    def line_of(self, dotted: str) -> int | None:
        """Line of a dotted field (``"region[1].row_gaps[0].count"``) in the source text."""
        return find_line(self._text, _split_dotted(dotted))

    def problem(self, dotted: str, message: str, value: Any = None,
                has_value: bool = True) -> Problem:
        """A located problem about field ``dotted`` of this file."""
        return Problem(self._file, dotted, message, value, self.line_of(dotted), has_value)


def _split_dotted(dotted: str) -> list[str | int]:
    out: list[str | int] = []
    for part in dotted.replace("]", "").replace("[", ".").split("."):
        if part:
            out.append(int(part) if part.isdigit() else part)
    return out


# --------------------------------------------------------------------------- checks

_MIGRATION = {
    ("block", "empty_sites"): (
        "the single free-site count is replaced by an inventory of gaps: add [[region]] "
        "tables with [[region.row_gaps]] (height_rows, width_sites = [...], count = [...]) "
        "and [[region.open_slots]] (width_um, height_um, count)"),
    ("block", "row_sites"): (
        "no longer used: each [[region.row_gaps]] states its own width_sites and height_rows"),
    ("block", "leakage_budget_uA"): "moved: write leakage_uA under [budgets]",
    ("fill",): ("the [fill] table is split: where and corner go under [candidates], max_kinds "
                "under [budgets], require_esd_safe becomes esd_safe_only on each [[region]]"),
}


def _migration_problems(data: dict[str, Any], file: str, text: str | None) -> list[Problem]:
    problems = []
    for path, message in _MIGRATION.items():
        node: Any = data
        for key in path:
            node = node.get(key) if isinstance(node, dict) else None
        if node is not None:
            dotted = ".".join(path)
            problems.append(Problem(file, dotted, "earlier block-file layout: " + message,
                                    node, find_line(text, list(path)),
                                    has_value=not isinstance(node, dict)))
    return problems


def _unique(named: list[tuple[str, str]], what: str) -> list[tuple[str, Any, str]]:
    """(path, name) pairs -> a problem at each repeated name."""
    seen: set[str] = set()
    out = []
    for path, name in named:
        if name in seen:
            out.append((f"{path}.name", name, f"{what} names must be unique"))
        seen.add(name)
    return out


def _region_rules(i: int, r: Region) -> list[tuple[str, Any, str]]:
    """Cross-field rules of one region: (dotted field, value, message)."""
    at = f"region[{i}]"
    out: list[tuple[str, Any, str]] = []
    if not r.open_slots and not r.row_gaps:
        out.append((at, r.name, "a region needs at least one [[region.open_slots]] or "
                    "[[region.row_gaps]] table"))
    # a clock alone only sets the frequency of interest; the power form starts with the power;
    # a charge per cycle with a pulse sets the pulse's flat top
    forms = _forms(r)
    if set(forms) == {"charge", "pulse"}:
        forms = ["pulse"]
    if r.quiet and forms:
        given = next(n for n in ACTIVITY_FIELDS[forms[0]] if getattr(r, n) is not None)
        out.append((f"{at}.{given}", getattr(r, given),
                    "a quiet region draws no switching current: leave out its activity "
                    "(or set quiet = false)"))
    elif len(forms) > 1:
        out.append((f"{at}.{ACTIVITY_FIELDS[forms[1]][0]}",
                    getattr(r, ACTIVITY_FIELDS[forms[1]][0]),
                    "give the switching activity one way only: charge_per_cycle_pC, or "
                    "peak_current_mA with rise_time_ps (and fall_time_ps), or "
                    "switching_power_mW with clock_MHz"))
    elif forms == ["pulse"] and (r.peak_current_mA is None or r.rise_time_ps is None):
        missing = "rise_time_ps" if r.rise_time_ps is None else "peak_current_mA"
        out.append((f"{at}.{missing}", None, "required with the other pulse fields "
                    "(peak_current_mA, rise_time_ps; fall_time_ps defaults to the rise time)"))
    elif forms == ["power"] and r.clock_MHz is None:
        out.append((f"{at}.clock_MHz", None, "required with switching_power_mW"))
    elif forms == ["pulse"]:
        out += _pulse_rules(at, r)
    if r.logic_activity is not None and not forms:
        out.append((f"{at}.logic_activity", r.logic_activity,
                    "needs the region's switching activity (charge, pulse or power)"))
    out += _unique([(f"{at}.open_slots[{j}]", s.name) for j, s in enumerate(r.open_slots)]
                   + [(f"{at}.row_gaps[{j}]", g.name) for j, g in enumerate(r.row_gaps)],
                   "gap class (within a region)")
    for j, g in enumerate(r.row_gaps):
        gat = f"{at}.row_gaps[{j}]"
        if len(g.count) != len(g.width_sites):
            out.append((f"{gat}.count", g.count, f"needs one count per width: "
                        f"{len(g.width_sites)} widths, {len(g.count)} counts"))
        if len(set(g.width_sites)) != len(g.width_sites):
            twice = next(w for w in g.width_sites if g.width_sites.count(w) > 1)
            out.append((f"{gat}.width_sites", twice, "widths must be distinct (add the "
                        "counts of one width together)"))
    return out


def _pulse_rules(at: str, r: Region) -> list[tuple[str, Any, str]]:
    """A pulse holds at least its triangle's charge and fits in one clock period."""
    out: list[tuple[str, Any, str]] = []
    assert r.peak_current_mA is not None and r.rise_time_ps is not None
    fall = r.fall_time_ps if r.fall_time_ps is not None else r.rise_time_ps
    edges_ps = r.rise_time_ps + fall
    flat_ps = 0.0
    if r.charge_per_cycle_pC is not None:
        least_pC = r.peak_current_mA * edges_ps / 2 * 1e-3  # mA x ps = 1e-3 pC
        if r.charge_per_cycle_pC < least_pC * (1 - 1e-9):
            out.append((f"{at}.charge_per_cycle_pC", r.charge_per_cycle_pC,
                        f"must be at least {least_pC:.4g} pC with a pulse (the triangle of "
                        "peak_current_mA, rise_time_ps and fall_time_ps holds that much)"))
        flat_ps = max(r.charge_per_cycle_pC / r.peak_current_mA * 1e3 - edges_ps / 2, 0.0)
    if r.clock_MHz is not None:
        period_ps = 1e6 / r.clock_MHz
        if edges_ps + flat_ps > period_ps * (1 + 1e-9):
            out.append((f"{at}.clock_MHz", r.clock_MHz, f"the pulse lasts "
                        f"{(edges_ps + flat_ps) / 1e3:.4g} ns, longer than a clock period "
                        f"({period_ps / 1e3:.4g} ns)"))
    return out


def _rule_problems(block: BlockFile) -> list[tuple[str, Any, str]]:
    out = _unique([(f"region[{i}]", r.name) for i, r in enumerate(block.region)], "region")
    for i, r in enumerate(block.region):
        out += _region_rules(i, r)
    if block.network is not None:
        out += network_rules(block.network, block.region, block.objective.goal)
    if block.objective.goal == "min_leakage" and not any(
            r.min_cap_nF or r.max_impedance_mohm or (r.activity_form() and not r.quiet)
            for r in block.region):
        out.append(("objective.goal", block.objective.goal,
                    "min_leakage needs a target in at least one region (min_cap_nF, "
                    "max_impedance_mohm or a switching activity to size from)"))
    return out


def _suggest_table(problems: list[Problem]) -> list[Problem]:
    """'Did you mean' for an unknown top-level table (pydantic only lists the fields)."""
    out = []
    for p in problems:
        if "." not in p.field and "[" not in p.field and p.message.startswith("unknown field"):
            guess = difflib.get_close_matches(p.field, list(BlockFile.model_fields), n=1)
            if guess and "did you mean" not in p.message:
                p = replace(p, message=f"unknown table; did you mean {guess[0]!r}?")
        out.append(p)
    return out


def _line(text: str | None, dotted: str) -> int | None:
    """Line of a field, or of the nearest enclosing table it would go in when absent."""
    parts = _split_dotted(dotted)
    line = None
    while parts and line is None:
        line = find_line(text, parts)
        parts = parts[:-1]
    return line


def parse_block(data: dict[str, Any], file: str = "<block>", text: str | None = None) -> BlockFile:
    """Validate already-parsed TOML data; ``PlanError`` lists every problem."""
    migration = _migration_problems(data, file, text)
    if migration:
        raise PlanError(migration)
    try:
        block = BlockFile.model_validate(data)
    except ValidationError as exc:
        problems = validation_problems(exc, file, text, BlockFile)
        # a missing key has no line of its own: point at its table
        problems = [replace(p, line=p.line or find_line(text, _split_dotted(p.field)[:-1]))
                    if p.field else p for p in problems]
        raise PlanError(_suggest_table(problems)) from None
    rules = _rule_problems(block)
    if rules:
        raise PlanError([Problem(file, dotted, message, value, _line(text, dotted),
                                 value is not None)
                         for dotted, value, message in rules])
    block._file, block._text = file, text
    return block


def load_block(path: str | Path) -> BlockFile:
    """Load and validate one block file (TOML)."""
    data, text = read_toml(path, PlanError)
    return parse_block(data, str(path), text)
