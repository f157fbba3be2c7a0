"""Block planning: fill a block's empty space, region by region and gap class by gap class,
with catalog decap cells, within leakage, thin-oxide and ESD budgets.

    from celllab.planner import load_block, plan_block
    block = load_block("process_decks/blocks/lumen130_dsp.toml")
    plan = plan_block(block, catalog)           # BlockPlan (SI)
    plan.regions[0].cells                       # chosen cells and counts of one region
    plan.to_dict()                              # display units for scripts

Modules (no I/O beyond loading the block file; renderers live in ``celllab.export.plan``):

===============  ==============================================================
block            the block file: regions, gap classes, budgets, objective
sizing           per-region frequency of interest and capacitance target
corners          the named corner policies (which corner each figure is taken at)
wearout          thin-oxide area budget from a failure target over a mission
packing          exact patterns of cells per in-row gap, grid copies per open slot
fill             the MILP (scipy.optimize.milp / HiGHS)
binding          which constraints bound the fill (LP duals, re-solves)
candidates       catalog rows -> per-cell arrays (the only catalog reader here)
plan             ``plan_block`` and the result types
impedance        the block's lumped PDN impedance from the chosen cells' stored Z(f)
===============  ==============================================================
"""

from __future__ import annotations

import importlib
from typing import Any

#: Public name -> submodule that defines it (loaded on first use).
_LAZY: dict[str, str] = {
    "BlockFile": "block",
    "load_block": "block",
    "parse_block": "block",
    "BlockPlan": "plan",
    "CellUse": "plan",
    "ChosenCell": "plan",
    "ClassFill": "plan",
    "RegionFill": "plan",
    "plan_block": "plan",
    "CornerPolicy": "corners",
    "POLICIES": "corners",
}

__all__ = list(_LAZY)


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        module = importlib.import_module(f"celllab.planner.{_LAZY[name]}")
        return getattr(module, name)
    raise AttributeError(f"module 'celllab.planner' has no attribute {name!r}")
