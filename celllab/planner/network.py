"""A block's power network as one netlist: supply -> board -> package -> ring -> grid -> regions
(SI: ohm, H, F, V, A, Hz).

Topology (every series path is a loop value: supply and return together)::

    supply (ideal, AC ground "gnd")
      -- board R, L --> board  [-- off-chip decap ESL, ESR, C --> gnd]
      -- [1 ohm probe] -- package R, L --> ring
      -- per region: entrance R (damping) --> grid R, L --> region node
    region node: the fill (each chosen cell's per-corner equivalent circuit x count),
                 the intrinsic non-switching capacitance with its ESR, the switching current
    optional links: grid R, L between two region nodes

The whole network is a `celllab.physics.netlist.Netlist` whose variants are the corners
(`BlockNetwork.netlist`): the fill of each region is its cells' stored circuits, stacked over
corners and scaled by count (`scale_parallel`: exact for identical copies). For speed the
frequency-domain solves reduce every cell kind to its admittance first (one `solve_impedance`
per circuit structure, over cells x corners x frequencies) and attach it to the region node as
a shunt of the small backbone netlist (`solve_transfer`): exact, since a fill is a one-port
between the region node and ground. The tests compare both routes and ngspice.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics.netlist import (
    Element,
    Netlist,
    scale_parallel,
    solve_impedance,
    solve_transfer,
    stack_variants,
    structure_key,
)
from celllab.planner.waveforms import Activity

__all__ = [
    "GROUND",
    "RING",
    "BlockNetwork",
    "DcState",
    "FillEntry",
    "GridLink",
    "OffChipDecap",
    "RegionLoad",
    "RegionPath",
    "SupplyNetwork",
    "analysis_frequencies",
    "build_network",
    "entry_node",
    "region_node",
]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]

GROUND = "gnd"
BOARD = "board"
RING = "ring"
PACKAGE_IN = "pkg_in"
_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_\-]{0,59}$")
#: Node-name endings the network gives a region's own nodes (a region named like another's
#: node would share it).
_NODE_SUFFIXES = ("_entry", "_int")


def region_node(name: str) -> str:
    """Node name of a region's supply node."""
    return f"r_{name}"


def entry_node(name: str) -> str:
    """Node between a region's entrance resistor and its grid segment."""
    return f"r_{name}_entry"


def analysis_frequencies(f_min: float = 1e5, f_max: float = 1e10, per_decade: int = 40
                         ) -> FloatArray:
    """Log-spaced analysis grid from ``f_min`` to ``f_max`` Hz, ``per_decade`` points/decade."""
    if not (0 < f_min < f_max) or per_decade < 1:
        raise ValueError("need 0 < f_min < f_max and per_decade >= 1")
    n = int(np.ceil(np.log10(f_max / f_min) * per_decade)) + 1
    return np.geomspace(f_min, f_max, n)


@dataclass(frozen=True)
class OffChipDecap:
    """Board or package decoupling at the package pins: C (F), ESR (ohm), ESL (H)."""

    capacitance: float
    esr: float = 0.0
    esl: float = 0.0


@dataclass(frozen=True)
class RegionPath:
    """From the supply ring to one region's node: the entrance (damping) resistor, then the
    on-die grid segment. Ohm, H; loop values."""

    grid_resistance: float
    grid_inductance: float
    entrance_resistance: float = 0.0


@dataclass(frozen=True)
class GridLink:
    """A grid segment joining two regions' nodes directly (ohm, H)."""

    region_a: str
    region_b: str
    resistance: float
    inductance: float = 0.0


@dataclass(frozen=True)
class SupplyNetwork:
    """The shared part of the network and each region's path from the ring (SI).

    Attributes
    ----------
    supply_voltage : float           V (nominal; the network is solved for deviations from it)
    package_resistance, package_inductance : float   ohm, H: package + bond loop
    paths : mapping region -> RegionPath
    board_resistance, board_inductance : float       ohm, H: regulator and board up to the
                                     package pins (needed when an off-chip decap is given)
    offchip_decap : OffChipDecap | None
    links : tuple of GridLink
    """

    supply_voltage: float
    package_resistance: float
    package_inductance: float
    paths: Mapping[str, RegionPath]
    board_resistance: float = 0.0
    board_inductance: float = 0.0
    offchip_decap: OffChipDecap | None = None
    links: tuple[GridLink, ...] = ()

    def __post_init__(self) -> None:
        problems = []
        values: dict[str, float] = {
            "supply_voltage": self.supply_voltage,
            "package_resistance": self.package_resistance,
            "package_inductance": self.package_inductance,
            "board_resistance": self.board_resistance,
            "board_inductance": self.board_inductance,
        }
        for name, p in self.paths.items():
            if not _NAME.match(name):
                problems.append(f"region name {name!r} -> letters, digits, _ and -, first a "
                                "letter (at most 60)")
            clash = [o for o in self.paths for end in _NODE_SUFFIXES if name == o + end]
            if clash:
                problems.append(f"region name {name!r} -> clashes with a node of region "
                                f"{clash[0]!r}: rename one of them")
            values.update({f"paths.{name}.grid_resistance": p.grid_resistance,
                           f"paths.{name}.grid_inductance": p.grid_inductance,
                           f"paths.{name}.entrance_resistance": p.entrance_resistance})
        if self.offchip_decap is not None:
            d = self.offchip_decap
            values.update({"offchip_decap.esr": d.esr, "offchip_decap.esl": d.esl})
            if not (np.isfinite(d.capacitance) and d.capacitance > 0):
                problems.append(f"offchip_decap.capacitance = {d.capacitance!r} -> must be > 0")
            if self.board_resistance == 0 and self.board_inductance == 0:
                problems.append("offchip_decap needs a board path (board_resistance or "
                                "board_inductance > 0): an ideal supply would short it")
        for k, link in enumerate(self.links):
            values.update({f"links[{k}].resistance": link.resistance,
                           f"links[{k}].inductance": link.inductance})
            for end in (link.region_a, link.region_b):
                if end not in self.paths:
                    problems.append(f"links[{k}]: no region {end!r}; regions: "
                                    + ", ".join(self.paths))
            if link.region_a == link.region_b:
                problems.append(f"links[{k}] joins region {link.region_a!r} to itself")
        for name, value in values.items():
            if not (np.isfinite(value) and value >= 0):
                problems.append(f"{name} = {value!r} -> must be finite and >= 0")
        if not self.supply_voltage > 0:
            problems.append("supply_voltage must be > 0")
        if not self.paths:
            problems.append("paths: at least one region")
        if problems:
            raise ValueError("; ".join(problems))

    @property
    def region_names(self) -> tuple[str, ...]:
        return tuple(self.paths)

    def entrance_resistances(self) -> FloatArray:
        """The entrance resistors in region order, ohm."""
        return np.array([p.entrance_resistance for p in self.paths.values()], dtype=float)

    def with_entrance(self, resistances: ArrayLike) -> SupplyNetwork:
        """The same network with the entrance resistors set (region order), ohm."""
        r = np.broadcast_to(np.asarray(resistances, dtype=float), (len(self.paths),))
        paths = {n: replace(p, entrance_resistance=float(v))
                 for (n, p), v in zip(self.paths.items(), r)}
        return replace(self, paths=paths)


@dataclass(frozen=True)
class FillEntry:
    """``count`` copies of one catalog cell; ``circuits`` maps corner -> its one-variant
    equivalent circuit (ports: driven rail, reference rail), as stored in the catalog."""

    cell: str
    circuits: Mapping[str, Netlist]
    count: float


@dataclass(frozen=True)
class RegionLoad:
    """What sits at a region's node: the fill, the logic's own capacitance and its current.

    Attributes
    ----------
    name : str
    fill : sequence of FillEntry        the chosen cells and their counts
    intrinsic_capacitance : float       F, >= 0: non-switching logic, wells, wiring
    intrinsic_esr : float               ohm, >= 0: its series resistance
    activity : Activity | None          the switching current (`planner.waveforms`); None for
                                        a quiet region (no switching of its own, e.g. a pad
                                        ring): it has no target of its own and draws nothing,
                                        but its node still sees the others' currents
    """

    name: str
    fill: Sequence[FillEntry]
    intrinsic_capacitance: float
    intrinsic_esr: float
    activity: Activity | None

    def __post_init__(self) -> None:
        object.__setattr__(self, "fill", tuple(self.fill))
        problems = []
        if not (np.isfinite(self.intrinsic_capacitance) and self.intrinsic_capacitance >= 0):
            problems.append(f"intrinsic_capacitance = {self.intrinsic_capacitance!r} -> >= 0")
        if not (np.isfinite(self.intrinsic_esr) and self.intrinsic_esr >= 0):
            problems.append(f"intrinsic_esr = {self.intrinsic_esr!r} -> >= 0")
        for entry in self.fill:
            if not (np.isfinite(entry.count) and entry.count > 0):
                problems.append(f"fill {entry.cell}: count = {entry.count!r} -> must be > 0")
            if not entry.circuits:
                problems.append(f"fill {entry.cell}: no circuit")
        if problems:
            raise ValueError(f"region {self.name}: " + "; ".join(problems))


@dataclass(frozen=True)
class DcState:
    """DC operating point of the network for the regions' average currents (SI).

    drop : (n_region,) V            supply minus region node voltage
    entrance_current : (n_region,) A   through each entrance resistor (ring -> region)
    entrance_power : (n_region,) W     I^2 R in each entrance resistor
    total_current : float A         drawn from the supply
    """

    drop: FloatArray
    entrance_current: FloatArray
    entrance_power: FloatArray
    total_current: float


def _series(name: str, a: str, b: str, r: float, ind: float) -> list[Element]:
    """R then L from a to b (either may be absent; both zero: a zero-ohm short)."""
    if r > 0 and ind > 0:
        return [Element("R", f"{name}_r", a, f"{name}_mid", r),
                Element("L", f"{name}_l", f"{name}_mid", b, ind)]
    if ind > 0:
        return [Element("L", f"{name}_l", a, b, ind)]
    return [Element("R", f"{name}_r", a, b, r)]


@dataclass(frozen=True)
class BlockNetwork:
    """The supply network with every region's load, over corners (see the module docstring).

    Build with `build_network`. Frequency-domain results are arrays over (corner, frequency,
    ...); ``corners`` names the first axis.
    """

    supply: SupplyNetwork
    regions: tuple[RegionLoad, ...]
    corners: tuple[str, ...]
    _cache: dict[bytes, dict[str, ComplexArray]] = field(
        default_factory=dict, repr=False, compare=False)
    _groups: dict[str, Any] = field(default_factory=dict, repr=False, compare=False)

    @property
    def region_names(self) -> tuple[str, ...]:
        return tuple(r.name for r in self.regions)

    @property
    def region_nodes(self) -> list[str]:
        return [region_node(r.name) for r in self.regions]

    def with_fill(self, fills: Mapping[str, Sequence[FillEntry]]) -> BlockNetwork:
        """The same network with each region's fill replaced (regions not named: no fill);
        the intrinsic capacitance and activity stay. Corners stay those of this network."""
        unknown = sorted(set(fills) - set(self.region_names))
        if unknown:
            raise ValueError(f"no region(s) {unknown}; regions: {list(self.region_names)}")
        regions = [replace(r, fill=tuple(fills.get(r.name, ()))) for r in self.regions]
        corners = self.corners if any(fills.values()) else None
        if corners is None:
            return BlockNetwork(self.supply, tuple(regions), self.corners)
        return build_network(self.supply, regions, corners)

    # ------------------------------------------------------------------ netlists

    def backbone(self, entrance: ArrayLike | None = None, probe: float = 0.0) -> Netlist:
        """Everything but the fills, one variant: supply path, ring, grid, intrinsic decap.

        ``entrance`` overrides the entrance resistors (ohm, region order); ``probe`` > 0 puts a
        resistor (ohm) in series with the package loop (the 1 ohm arrangement for emission).
        """
        s = self.supply if entrance is None else self.supply.with_entrance(entrance)
        elements: list[Element] = []
        has_board = s.board_resistance > 0 or s.board_inductance > 0
        board = BOARD if has_board else GROUND
        if has_board:
            elements += _series("board", GROUND, BOARD, s.board_resistance, s.board_inductance)
        if s.offchip_decap is not None:
            d = s.offchip_decap
            elements += _series("offchip", BOARD, "offchip_c", d.esr, d.esl)
            elements.append(Element("C", "offchip_c", "offchip_c", GROUND, d.capacitance))
        pkg_from = board
        if probe > 0:
            elements.append(Element("R", "probe", board, PACKAGE_IN, probe))
            pkg_from = PACKAGE_IN
        elements += _series("pkg", pkg_from, RING, s.package_resistance, s.package_inductance)
        for region in self.regions:
            name, path = region.name, s.paths[region.name]
            node, entry = region_node(name), entry_node(name)
            elements.append(Element("R", f"{name}_entrance", RING, entry,
                                    path.entrance_resistance))
            elements += _series(f"{name}_grid", entry, node, path.grid_resistance,
                                path.grid_inductance)
            if region.intrinsic_capacitance > 0:
                if region.intrinsic_esr > 0:
                    elements.append(Element("R", f"{name}_int_esr", node, f"{node}_int",
                                            region.intrinsic_esr))
                    elements.append(Element("C", f"{name}_int_c", f"{node}_int", GROUND,
                                            region.intrinsic_capacitance))
                else:
                    elements.append(Element("C", f"{name}_int_c", node, GROUND,
                                            region.intrinsic_capacitance))
        for k, link in enumerate(s.links):
            elements += _series(f"link{k}", region_node(link.region_a),
                                region_node(link.region_b), link.resistance, link.inductance)
        return Netlist("block_backbone", tuple(elements), (self.region_nodes[0], GROUND))

    def fill_netlist(self, region: RegionLoad, k: int) -> Netlist:
        """Fill entry ``k`` of ``region``: its circuits stacked over corners, scaled by count."""
        entry = region.fill[k]
        try:
            stacked = stack_variants(entry.cell, [entry.circuits[c] for c in self.corners])
        except ValueError as exc:
            raise ValueError(f"region {region.name}, cell {entry.cell}: {exc}") from None
        return scale_parallel(stacked, entry.count)

    def netlist(self, entrance: ArrayLike | None = None, probe: float = 0.0) -> Netlist:
        """The whole network as one netlist, variants = corners (for time stepping, SPICE)."""
        elements = list(self.backbone(entrance, probe).elements)
        for region in self.regions:
            node = region_node(region.name)
            for k in range(len(region.fill)):
                part = self.fill_netlist(region, k)
                prefix = f"{region.name}_f{k}_"
                mapping = {part.ports[0]: node, part.ports[1]: GROUND}

                def rename(n: str | None, mapping: dict[str, str] = mapping,
                           prefix: str = prefix) -> str | None:
                    return None if n is None else mapping.get(n, prefix + n)

                for el in part.elements:
                    elements.append(replace(el, name=prefix + el.name, node_a=rename(el.node_a),
                                            node_b=rename(el.node_b),
                                            node_far=rename(el.node_far)))
        return Netlist("block_network", tuple(elements), (self.region_nodes[0], GROUND))

    # ------------------------------------------------------------------ frequency domain

    def _frequencies(self, freq: ArrayLike) -> FloatArray:
        """(n_freq,) shared by all corners, or (n_corner, n_freq): one row per corner."""
        f = np.asarray(freq, dtype=float)
        if f.ndim == 2 and f.shape[0] not in (1, len(self.corners)):
            raise ValueError(f"freq has {f.shape[0]} rows for {len(self.corners)} corners")
        if f.ndim not in (1, 2):
            raise ValueError(f"freq has shape {f.shape} -> (n_freq,) or (n_corner, n_freq)")
        return f

    def _fill_groups(self) -> list[tuple[list[tuple[str, FillEntry]], Netlist]]:
        """Fill cells grouped by circuit structure, each group's circuits stacked as variants
        (cell-major, corner-minor); built once per network."""
        if "groups" in self._groups:
            return self._groups["groups"]
        groups: dict[Any, list[tuple[str, FillEntry]]] = {}
        for region in self.regions:
            for entry in region.fill:
                first = entry.circuits[self.corners[0]]
                groups.setdefault(structure_key(first), []).append((region.name, entry))
        out = []
        for members in groups.values():
            try:
                stacked = stack_variants("group", [e.circuits[c] for _, e in members
                                                   for c in self.corners])
            except ValueError as exc:
                names = ", ".join(sorted({e.cell for _, e in members}))
                raise ValueError(f"cells {names}: circuits differ between corners ({exc})"
                                 ) from None
            out.append((members, stacked))
        self._groups["groups"] = out
        return out

    def fill_admittance(self, freq: ArrayLike) -> dict[str, ComplexArray]:
        """Each region's fill admittance, S, (n_corner, n_freq); cached per frequency grid.

        ``freq``: (n_freq,) Hz, or (n_corner, n_freq) for a grid per corner. Cells of one
        circuit structure are solved together: variants = cells x corners.
        """
        f = self._frequencies(freq)
        key = f.tobytes() + bytes(str(f.shape), "ascii")
        if key in self._cache:
            return self._cache[key]
        n_corner = len(self.corners)
        rows = np.broadcast_to(f if f.ndim == 2 else f[None, :], (n_corner, f.shape[-1]))
        out = {r.name: np.zeros((n_corner, f.shape[-1]), dtype=complex) for r in self.regions}
        for members, stacked in self._fill_groups():
            z = solve_impedance(stacked, np.tile(rows, (len(members), 1)))
            z = z.reshape(len(members), n_corner, f.shape[-1])
            for (name, entry), z_cell in zip(members, z):
                out[name] += entry.count / z_cell
        if len(self._cache) > 8:
            self._cache.clear()
        self._cache[key] = out
        return out

    def transfer(self, freq: ArrayLike, observe: Sequence[str] | None = None,
                 entrance: ArrayLike | None = None, probe: float = 0.0) -> ComplexArray:
        """V(observe) / I(region), ohm, (n_corner, n_freq, n_observe, n_region): 1 A pushed
        into each region node in turn (``observe`` default: the region nodes). ``freq``:
        (n_freq,) Hz or (n_corner, n_freq)."""
        f = self._frequencies(freq)
        shunts = {region_node(n): y for n, y in self.fill_admittance(f).items()
                  if np.any(y != 0)}
        z = solve_transfer(self.backbone(entrance, probe), f, self.region_nodes,
                           observe, shunts)
        return np.array(np.broadcast_to(z, (len(self.corners),) + z.shape[1:]))

    def z_matrix(self, freq: ArrayLike, entrance: ArrayLike | None = None) -> ComplexArray:
        """Z-matrix at the region nodes, ohm, (n_corner, n_freq, n_region, n_region):
        diagonal = the impedance each region sees, off-diagonal = transfer impedances."""
        return self.transfer(freq, None, entrance)

    def package_transfer(self, freq: ArrayLike, entrance: ArrayLike | None = None,
                         probe: float = 0.0) -> ComplexArray:
        """I_package / I_region: current into the chip through the package loop per ampere
        drawn by each region, (n_corner, n_freq, n_region), complex, unitless.

        Notes
        -----
        I_pkg = (V_ring - V_pkg_from) / (R_pkg + j w L_pkg) for 1 A pushed into the region node
        (the region drawing -1 A), so the ratio to the drawn current has that sign; -> 1 at DC.
        """
        f = np.asarray(freq, dtype=float).reshape(-1)
        s = self.supply
        has_board = s.board_resistance > 0 or s.board_inductance > 0
        start = PACKAGE_IN if probe > 0 else (BOARD if has_board else GROUND)
        v = self.transfer(f, [RING, start], entrance, probe)
        z_pkg = s.package_resistance + 2j * np.pi * f * s.package_inductance
        return (v[:, :, 0, :] - v[:, :, 1, :]) / z_pkg[None, :, None]

    # ------------------------------------------------------------------ DC

    def mean_currents(self) -> FloatArray:
        """Each region's average current, A (`Activity.mean_current`; 0 for a quiet region)."""
        return np.array([0.0 if r.activity is None else r.activity.mean_current()
                         for r in self.regions], dtype=float)

    @property
    def activities(self) -> list[Activity | None]:
        """Each region's activity (None: quiet), in region order."""
        return [r.activity for r in self.regions]

    def dc_state(self, entrance: ArrayLike | None = None) -> DcState:
        """DC drops and entrance-resistor currents for the regions' average currents.

        Notes
        -----
        Capacitors open, inductors shorts; the fill's leakage paths are left out (GOhm-class per
        cell against mohm of grid: well below 1e-6 of the drop). Linear superposition of the
        region currents through the resistive network.
        """
        back = self.backbone(entrance)
        dc_elements = []
        for el in back.elements:
            if el.kind == "C":
                continue
            dc_elements.append(replace(el, kind="R", value=0.0) if el.kind == "L" else el)
        dc = Netlist("block_dc", tuple(dc_elements), back.ports)
        nodes = self.region_nodes
        entries = [entry_node(r.name) for r in self.regions]
        v = solve_transfer(dc, [1.0], nodes, [RING, *entries, *nodes])[0, 0].real
        current = self.mean_currents()
        volts = v @ current
        r_ent = (self.supply.entrance_resistances() if entrance is None
                 else np.broadcast_to(np.asarray(entrance, dtype=float), (len(nodes),)))
        n = len(nodes)
        # volts: rise per ampere pushed in; a drawn current lowers the nodes by as much, so the
        # current from ring to entry is (volts_entry - volts_ring) / R per ampere drawn
        across = volts[1:1 + n] - volts[0]
        grid = np.array([self.supply.paths[r.name].grid_resistance for r in self.regions])
        linked = {r for link in self.supply.links for r in (link.region_a, link.region_b)}
        alone = np.array([r.name not in linked for r in self.regions])
        # the entry node is a plain series point: the entrance current is the grid current
        i_ent = np.full(n, np.nan)
        np.divide(across, r_ent, out=i_ent, where=r_ent > 0)
        via_grid = np.full(n, np.nan)
        np.divide(volts[1 + n:] - volts[1:1 + n], grid, out=via_grid, where=grid > 0)
        i_ent = np.where(np.isnan(i_ent), via_grid, i_ent)
        i_ent = np.where(np.isnan(i_ent) & alone, current, i_ent)
        return DcState(drop=volts[1 + n:], entrance_current=i_ent,
                       entrance_power=np.where(r_ent > 0, i_ent * i_ent * r_ent, 0.0),
                       total_current=float(current.sum()))


def build_network(supply: SupplyNetwork, regions: Sequence[RegionLoad],
                  corners: Sequence[str] | None = None) -> BlockNetwork:
    """Assemble the block network and check that regions, paths and corners agree.

    Parameters
    ----------
    supply : SupplyNetwork         shared path and each region's path from the ring
    regions : sequence of RegionLoad   one per region of ``supply.paths`` (same names)
    corners : sequence of str, optional   corners to evaluate; default every corner all fill
                                   cells share, in the first cell's order

    Raises
    ------
    ValueError   naming the region, cell or corner that does not fit
    """
    names = [r.name for r in regions]
    problems = []
    if len(set(names)) != len(names):
        problems.append(f"duplicate region names in {names}")
    missing = [n for n in names if n not in supply.paths]
    extra = [n for n in supply.paths if n not in names]
    if missing:
        problems.append(f"regions without a path from the ring: {missing}")
    if extra:
        problems.append(f"paths for regions that are not loaded: {extra}")
    entries = [e for r in regions for e in r.fill]
    if corners is None:
        if entries:
            shared = [c for c in entries[0].circuits
                      if all(c in e.circuits for e in entries)]
            if not shared:
                problems.append("the fill cells share no corner")
            corners = shared
        else:
            corners = ["nominal"]
    for region in regions:
        for entry in region.fill:
            lacking = [c for c in corners if c not in entry.circuits]
            if lacking:
                problems.append(f"region {region.name}, cell {entry.cell}: no circuit for "
                                f"corner(s) {lacking}; it has {list(entry.circuits)}")
            for corner, nl in entry.circuits.items():
                if nl.n_variant != 1:
                    problems.append(f"region {region.name}, cell {entry.cell}, corner "
                                    f"{corner}: {nl.n_variant} variants, expected one")
    if problems:
        raise ValueError("; ".join(problems))
    ordered = tuple(sorted(regions, key=lambda r: list(supply.paths).index(r.name)))
    return BlockNetwork(supply, ordered, tuple(corners))
