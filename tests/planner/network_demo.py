"""The demo supply network on real cells: a catalog built from the invented lumen130 decks,
the ``[network]`` table of the demo block, and a fill for each region (standing in for the
planner's choice; invented counts), plus an ngspice rendering of the same network for the
checks."""

from __future__ import annotations

import re
import shutil
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np

from celllab.catalog import Catalog, open_catalog
from celllab.demo import build_demo_catalog
from celllab.export.spice import render_spice_subckt, spice_name, spice_number
from celllab.planner.block import load_block
from celllab.planner.naive import densest_fill
from celllab.planner.network import BlockNetwork, FillEntry, region_node
from celllab.planner.network_figures import NetworkGoals
from celllab.planner.plan import network_corners, prepare_fill
from celllab.planner.supply import block_network, cell_entries, network_goals

REPO = Path(__file__).resolve().parents[2]
BLOCK_TOML = REPO / "process_decks" / "blocks" / "lumen130_dsp.toml"
DECK = "lumen130"
SUPPLY_V = 1.2
#: The fill of each region (cell name, count): invented, standing in for the fill planner.
DEMO_FILL: dict[str, list[tuple[str, int]]] = {
    "mac_array": [("lm_ncap-w32-h1-f4", 3000), ("lm_xcap-w16-h1-f4", 2000)],
    "pad_ring": [("lm_mom-w16-h1-toM5-alt1", 400), ("lm_xcap-w16-h1-f2", 300)],  # ESD-safe
}


def build_lumen_catalog(folder: Path) -> Catalog:
    (folder / "cells").mkdir(parents=True, exist_ok=True)
    shutil.copy(REPO / "process_decks" / "lumen130.toml", folder)
    shutil.copy(REPO / "process_decks" / "cells" / "lumen130_cells.toml", folder / "cells")
    return open_catalog(build_demo_catalog(folder / "demo.sqlite", folder=folder, esd=False))


def fill_entries(catalog: Catalog, choice: Mapping[str, Sequence[tuple[str, int]]]
                 ) -> dict[str, list[FillEntry]]:
    out = {}
    for region, cells in choice.items():
        entries = []
        for name, count in cells:
            record = catalog.cell(name, deck=DECK)
            entries.append(FillEntry(name, dict(record.netlist), count))
        out[region] = entries
    return out


def demo_network(catalog: Catalog) -> tuple[BlockNetwork, NetworkGoals]:
    """The demo block's network with ``DEMO_FILL``; the goals compare with the planner's
    naive densest-cell fill of the block's gaps."""
    block = load_block(BLOCK_TOML)
    prep = prepare_fill(block, catalog)
    network = block_network(block, prep.needs, prep.ctx.supply, fill_entries(catalog, DEMO_FILL),
                            {}, network_corners(prep.ctx))
    naive = {n.region: cell_entries(n.cells)
             for n in densest_fill(block, prep.cells, prep.problem.allowed)}
    return network, network_goals(block, naive=naive)


# ------------------------------------------------------------------------- ngspice rendering


def _node(name: str) -> str:
    return "0" if name == "gnd" else re.sub(r"[^A-Za-z0-9_]", "_", name)


def spice_network(network: BlockNetwork, catalog: Catalog, corner: str,
                  entrance: object = None, probe: float = 0.0, deck: str = DECK) -> list[str]:
    """The network at one corner as ngspice lines: the backbone element by element, each fill
    cell as its exported subcircuit instantiated with m = count."""
    lines = []
    for el in network.backbone(entrance, probe).elements:
        value = float(np.asarray(el.value))
        a, b = _node(el.node_a), _node(el.node_b)
        name = re.sub(r"[^A-Za-z0-9_]", "_", el.name)
        if el.kind in ("R", "L") and value == 0.0:
            lines.append(f"V{name} {a} {b} 0")
        else:
            lines.append(f"{el.kind}{name} {a} {b} {spice_number(value)}")
    for region in network.regions:
        for k, entry in enumerate(region.fill):
            sub = f"{spice_name(entry.cell)}_{_node(region.name)}_{k}"
            record = catalog.cell(entry.cell, deck=deck)
            lines.append(render_spice_subckt(record, corner=corner, subckt_name=sub))
            lines.append(f"X{_node(region.name)}_{k} {_node(region_node(region.name))} 0 {sub} "
                         f"m={spice_number(entry.count)}")
    return lines
