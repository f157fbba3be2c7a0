"""Liberty library views of decap cells: one ``.lib`` library per corner.

Liberty (Liberty Reference Manual and Liberty User Guide, Vol. 1, open-source Liberty release)
describes a library of cells at one operating point, so a multi-corner catalog becomes one file
per corner (``<deck>_<corner>.lib``). Each file holds:

* the library units (``time_unit``, ``voltage_unit``, ``current_unit``,
  ``pulling_resistance_unit``, ``leakage_power_unit``, ``capacitive_load_unit``),
* ``voltage_map`` entries for the supply and ground nets of the rails the cells decouple
  (each cell's ``rail``: core, io or a named rail of the deck's ``[supplies]``),
* one ``operating_conditions`` group named after the corner (``process : 1`` - the corner's
  process is described by its name, not by a derating factor - and the corner's temperature
  and core supply) and ``default_operating_conditions``,
* ``define`` statements for the user attributes that carry the catalog's numbers
  (``celllab_cap_fF``, ``celllab_esr_ohm``, the leakage parts, the cell hash),
* one ``cell`` group per cell: ``area`` (um^2), ``is_decap_cell : true`` (the cell-level
  Boolean that marks a decoupling-capacitor cell), ``dont_touch``/``dont_use`` (a physical-only
  cell: optimization must not remove it, synthesis must not pick it),
  ``cell_leakage_power`` and one ``leakage_power`` group (a decap has no logic pins, hence one
  state), and a ``pg_pin`` per rail with ``pg_type`` ``primary_power``/``primary_ground`` and
  its ``voltage_name``.

Leakage power is V x I at the corner: the cell's supply there (``CornerResult.supply_V``) times
the sum of its leakage currents (:func:`leakage_parts`). With ``voltage_unit`` 1 V and
``leakage_power_unit`` 1 nW a current in nA gives the power in nW directly. Numbers are written
with Python's shortest round-trip representation, so a reader gets back exactly the stored value.
No tool-specific extension is used.
"""

from __future__ import annotations

import datetime
import math
import os
import re
import textwrap
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from celllab import MODEL_VERSION, __version__
from celllab.errors import ExportError, Problem
from celllab.export import CAUTION
from celllab.export.files import write_files_atomic, write_text_atomic
from celllab.records import CellResult, CornerResult

__all__ = [
    "LIBRARY_UNITS",
    "USER_ATTRIBUTES",
    "LeakageParts",
    "cell_leakage_power_nW",
    "leakage_parts",
    "liberty_filename",
    "library_name",
    "render_liberty",
    "write_liberty",
    "write_liberty_set",
]

#: Library units (Liberty Reference Manual, library-level unit attributes).
LIBRARY_UNITS: dict[str, str] = {
    "time_unit": '"1ns"',
    "voltage_unit": '"1V"',
    "current_unit": '"1uA"',
    "pulling_resistance_unit": '"1kohm"',
    "leakage_power_unit": '"1nW"',
}
CAPACITIVE_LOAD_UNIT = "(1, ff)"

#: User-defined cell attributes: name -> (Liberty type, description). Units are in the names.
USER_ATTRIBUTES: dict[str, tuple[str, str]] = {
    "celllab_cap_fF": ("float", "low-frequency capacitance at the operating bias, fF"),
    "celllab_esr_ohm": ("float", "low-frequency equivalent series resistance, ohm"),
    "celllab_gate_leakage_nA": ("float", "gate (oxide tunnelling) leakage current, nA"),
    "celllab_junction_leakage_nA": ("float", "junction leakage current, nA"),
    "celllab_cell_hash": ("string", "content hash of the cell definition"),
}

_IDENTIFIER = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")


@dataclass(frozen=True)
class LeakageParts:
    """Leakage currents of one cell at one corner, nA."""

    gate_nA: float
    junction_nA: float

    @property
    def total_nA(self) -> float:
        return self.gate_nA + self.junction_nA


def leakage_parts(result: CornerResult) -> LeakageParts:
    """The leakage currents (gate, junction) of a cell at one corner, nA.

    Reads ``gate_leakage_nA`` and ``junction_leakage_nA`` where the catalog has them; a record
    without a gate part counts its ``leakage_nA`` (gate tunnelling) as the gate part, and one
    without a junction part, or with an empty one (the deck gives no junction densities; the row
    carries a flag), counts 0 nA of junction leakage, as the catalog's ``leakage_nA`` does.
    """
    metrics = result.metrics
    gate = metrics.get("gate_leakage_nA", metrics.get("leakage_nA"))
    junction = metrics.get("junction_leakage_nA", 0.0)
    if gate is None:
        raise ValueError("no leakage_nA metric")
    junction = 0.0 if junction is None or math.isnan(float(junction)) else junction
    return LeakageParts(float(gate), float(junction))


def cell_leakage_power_nW(result: CornerResult) -> float:
    """Leakage power at the corner: P = V_supply x (I_gate + I_junction); V x nA = nW."""
    return float(result.supply_V) * leakage_parts(result).total_nA


def library_name(deck_name: str, corner: str) -> str:
    """The library (and file stem) name ``<deck>_<corner>``, reduced to ``[A-Za-z0-9_]``."""
    return re.sub(r"[^A-Za-z0-9_]", "_", f"{deck_name}_{corner}")


def liberty_filename(deck_name: str, corner: str) -> str:
    return f"{library_name(deck_name, corner)}.lib"


def _number(value: float, what: str, problems: list[Problem], cell: str) -> str | None:
    number = float(value)
    if not math.isfinite(number):
        problems.append(
            Problem(
                f"cell {cell}", what, "not a finite number; a Liberty view cannot hold it", number
            )
        )
        return None
    return _plain_number(number)


def _plain_number(value: float) -> str:
    """Shortest round-trip decimal (``repr``), without a trailing ``.0``."""
    text = repr(float(value))
    return text[:-2] if text.endswith(".0") else text


def _name(text: str) -> str:
    """A Liberty name: as is when it is a plain identifier, else double-quoted."""
    return text if _IDENTIFIER.match(text) else '"' + _string_body(text) + '"'


def _string_body(text: str) -> str:
    return " ".join(str(text).replace("\\", "/").replace('"', "'").split())


def _comment_block(lines: Iterable[str]) -> list[str]:
    out = ["/*"]
    for line in lines:
        flat = _string_body(line).replace("*/", "* /")
        out += [" * " + part for part in textwrap.wrap(flat, width=94)] or [" *"]
    out.append(" */")
    return out


def _corner_of(deck: Any, corner: str) -> Any:
    if corner not in deck.corners:
        raise ExportError(
            [
                Problem(
                    f"deck {deck.name}",
                    "corner",
                    "not a corner of the deck; allowed: " + ", ".join(deck.corners),
                    corner,
                )
            ]
        )
    return deck.at_corner(corner)


def _cell_corner(cell: CellResult, corner: str) -> CornerResult:
    try:
        return cell.corner(corner)
    except KeyError:
        have = ", ".join(c.corner for c in cell.corners) or "none"
        raise ExportError(
            [
                Problem(
                    f"cell {cell.name}",
                    "corner",
                    f"no results at this corner; the cell was characterized at: {have}",
                    corner,
                )
            ]
        ) from None


def _cell_lines(
    cell: CellResult, result: CornerResult, deck_at_corner: Any, problems: list[Problem]
) -> list[str]:
    try:
        power, ground = deck_at_corner.supplies.rail_nets(cell.rail)
        expected_V = deck_at_corner.supply_for(cell.rail)
    except KeyError:
        problems.append(
            Problem(
                f"cell {cell.name}",
                "rail",
                "the deck has no such supply rail; allowed: "
                + ", ".join(deck_at_corner.supplies.rail_names()),
                cell.rail,
            )
        )
        return []
    if not math.isclose(result.supply_V, expected_V, rel_tol=1e-9, abs_tol=1e-12):
        problems.append(
            Problem(
                f"cell {cell.name}",
                f"corners.{result.corner}.supply_V",
                f"characterized at {result.supply_V:g} V but the deck gives "
                f"{expected_V:g} V at this corner; export with the deck the cell "
                "was characterized under",
                result.supply_V,
            )
        )
    try:
        parts = leakage_parts(result)
    except ValueError:
        problems.append(
            Problem(
                f"cell {cell.name}",
                "leakage_nA",
                "missing: the record has no leakage current",
                has_value=False,
            )
        )
        return []
    area = _number(cell.area_um2, "area_um2", problems, cell.name)
    leak = _number(cell_leakage_power_nW(result), "cell_leakage_power", problems, cell.name)
    if area is None or leak is None:
        return []
    lines = [
        f"  cell ({_name(cell.name)}) {{",
        f"    area : {area} ;",
        "    is_decap_cell : true ;",
        "    dont_touch : true ;",
        "    dont_use : true ;",
        f"    cell_leakage_power : {leak} ;",
    ]
    user = {
        "celllab_cap_fF": result.metrics.get("cap_fF"),
        "celllab_esr_ohm": result.metrics.get("esr_ohm"),
        "celllab_gate_leakage_nA": parts.gate_nA,
        "celllab_junction_leakage_nA": parts.junction_nA,
    }
    for key, value in user.items():
        if value is None or not math.isfinite(float(value)):
            lines.append(f"    /* {key}: not available at this corner */")
        else:
            lines.append(f"    {key} : {_plain_number(value)} ;")
    lines += [
        f'    celllab_cell_hash : "{_string_body(cell.cell_hash)}" ;',
        "    leakage_power () {",
        f"      related_pg_pin : {power} ;",
        f"      value : {leak} ;",
        "    }",
        f"    pg_pin ({power}) {{",
        "      pg_type : primary_power ;",
        f"      voltage_name : {power} ;",
        "    }",
        f"    pg_pin ({ground}) {{",
        "      pg_type : primary_ground ;",
        f"      voltage_name : {ground} ;",
        "    }",
        "  }",
    ]
    return lines


def render_liberty(
    cells: Sequence[CellResult],
    deck: Any,
    corner: str,
    date: str | None = None,
    model_version: str = MODEL_VERSION,
) -> str:
    """Render the cells' Liberty library at one corner.

    Parameters
    ----------
    cells : sequence of CellResult   characterized under ``deck``; each needs ``corner``
    deck : celllab.deck.Deck   the deck they were characterized under (names, supplies, corners)
    corner : str   one of the deck's corners
    date : str, optional   the library's ``date`` (default: today, ISO 8601)
    model_version : str   written in the header

    Returns
    -------
    str   the ``.lib`` text, ``\\n`` line ends

    Raises
    ------
    ExportError   unknown corner, no cells, duplicate names, a cell without that corner, a
        non-finite area or leakage, or a cell whose supply differs from the deck's
    """
    if not cells:
        raise ExportError(
            [
                Problem(
                    f"deck {deck.name}",
                    "cells",
                    "no cell to write; the selection is empty",
                    has_value=False,
                )
            ]
        )
    at_corner = _corner_of(deck, corner)
    names = [c.name for c in cells]
    duplicates = sorted({n for n in names if names.count(n) > 1})
    if duplicates:
        raise ExportError(
            [
                Problem(
                    f"deck {deck.name}",
                    "cells",
                    "a library holds each cell once; given more than once",
                    ", ".join(duplicates),
                )
            ]
        )
    results = [_cell_corner(c, corner) for c in cells]
    supplies = at_corner.supplies
    corner_def = deck.corners[corner]
    rails = {c.rail for c in cells} | {"core"}
    voltages: dict[str, float] = {}
    for rail in supplies.rail_names():  # the rails the cells sit on, in the deck's order
        if rail in rails:
            power, ground = supplies.rail_nets(rail)
            voltages.setdefault(power, at_corner.supply_for(rail))
            voltages.setdefault(ground, 0.0)
    today = date or datetime.date.today().isoformat()
    lib = library_name(deck.name, corner)
    core_power = supplies.core_power_net
    header = _comment_block(
        [
            f"celllab {__version__} Liberty library view: decoupling cells of deck {deck.name} at "
            f"corner {corner}",
            f"deck: {deck.name} (content hash {deck.content_hash}); models: {model_version}; "
            f"written {today}; {len(cells)} cell" + ("" if len(cells) == 1 else "s"),
            f"corner {corner}: T = {corner_def.temperature_C:g} degC; "
            + "; ".join(f"{net} = {v:g} V" for net, v in voltages.items()),
            f"CAUTION: estimate. {CAUTION}",
            "units: area um^2; leakage power nW; user attributes (celllab_*) carry their unit "
            "in their name",
            "cell_leakage_power = supply voltage x (gate + junction leakage current) at this corner",
        ]
    )
    lines = [*header, f"library ({lib}) {{", "  delay_model : table_lookup ;"]
    lines += [f"  {key} : {value} ;" for key, value in LIBRARY_UNITS.items()]
    lines += [
        f"  capacitive_load_unit {CAPACITIVE_LOAD_UNIT} ;",
        f'  date : "{today}" ;',
        f'  revision : "celllab {__version__}, {_string_body(model_version)}" ;',
        f'  comment : "Estimates from analytic models, not sign-off. {_string_body(CAUTION)}" ;',
    ]
    lines += [f"  define ({key}, cell, {kind}) ;" for key, (kind, _) in USER_ATTRIBUTES.items()]
    lines += [
        "  nom_process : 1 ;",
        f"  nom_temperature : {_plain_number(corner_def.temperature_C)} ;",
        f"  nom_voltage : {_plain_number(voltages[core_power])} ;",
    ]
    lines += [f"  voltage_map ({net}, {_plain_number(v)}) ;" for net, v in voltages.items()]
    lines += [
        f"  operating_conditions ({_name(corner)}) {{",
        "    process : 1 ;",
        f"    temperature : {_plain_number(corner_def.temperature_C)} ;",
        f"    voltage : {_plain_number(voltages[core_power])} ;",
        "  }",
        f"  default_operating_conditions : {_name(corner)} ;",
    ]
    problems: list[Problem] = []
    for cell, result in zip(cells, results):
        lines += _cell_lines(cell, result, at_corner, problems)
    if problems:
        raise ExportError(problems)
    lines.append("}")
    return "\n".join(lines) + "\n"


def write_liberty(
    path: str | os.PathLike[str],
    cells: Sequence[CellResult],
    deck: Any,
    corner: str,
    date: str | None = None,
    force: bool = False,
) -> Path:
    """Write :func:`render_liberty` output to ``path`` atomically (``force``: replace a file)."""
    return write_text_atomic(path, render_liberty(cells, deck, corner, date=date), force)


def write_liberty_set(
    folder: str | os.PathLike[str],
    cells: Sequence[CellResult],
    deck: Any,
    corners: Sequence[str] | None = None,
    date: str | None = None,
    force: bool = False,
) -> list[Path]:
    """One library per corner (default: every corner of the deck) into ``folder``.

    Every file is rendered and every target checked before the first is written, so a bad
    corner or cell, or an existing file without ``force``, leaves the folder as it was.
    Returns the paths written, in corner order.
    """
    chosen = list(corners) if corners is not None else list(deck.corners)
    texts: dict[str, str] = {}
    owner: dict[str, str] = {}
    for c in chosen:
        name = liberty_filename(deck.name, c)
        if name in texts:
            raise ExportError([Problem(str(folder), "corners", f"corners {owner[name]!r} and {c!r} give the "
                                       f"same library name {name}; write them separately", c)])
        texts[name], owner[name] = render_liberty(cells, deck, c, date=date), c
    return write_files_atomic(folder, texts, force=force)
