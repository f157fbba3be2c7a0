"""Fuzzing cell files, and characterizing what ``check`` accepts on decks at their limits.

Cell data: generated families and single cells, hostile values included, checked against the
invented lumen130 deck: accepted (every variant then resolves to a geometry) or refused with
problems naming the file and the field.

Built cells: plausible small families on demo decks whose parameters sit at their documented
limits. What ``check`` accepts must characterize and pass the catalog's checks (``build``
refuses nothing ``check`` accepted), with every metric finite or empty with a flag naming it.
"""

from __future__ import annotations

import typing
from collections import Counter
from pathlib import Path
from typing import Any

import annotated_types
from hypothesis import given
from hypothesis import strategies as st
from pydantic import BaseModel

from celllab.catalog.store import prepare_cell, validate_run
from celllab.catalog.validate import metric_problem
from celllab.cells import parse_cells, resolve
from celllab.cells.schema import GEOMETRY_FIELDS, TOPOLOGIES
from celllab.deck import Deck, load_deck, numeric_paths
from celllab.engine import characterize
from celllab.errors import CellError, DeckError

from .conftest import fuzz_settings
from .strategies import assert_located, scalars

DECKS = Path(__file__).resolve().parents[2] / "process_decks"
LUMEN = load_deck(DECKS / "lumen130.toml")
FILE = "fuzz_cells.toml"

PLAUSIBLE: dict[str, st.SearchStrategy[Any]] = {
    "width_sites": st.sampled_from([2, 4, 8, 12, 16, 24, 40, 64]),
    "height_rows": st.sampled_from([1, 1, 2, 3]),
    "fingers": st.sampled_from([1, 2, 3, 4, 8]),
    "gate_length_um": st.sampled_from([0.05, 0.12, 0.2, 0.35, 0.5, 1.0, 3.0]),
    "gate_width_um": st.sampled_from([0.1, 0.12, 0.3, 0.8, 1.5, 5.0]),
    "contacted_ends": st.sampled_from([1, 2]),
    "gate_contacted_ends": st.sampled_from([1, 2]),
    "accumulation_well": st.sampled_from(["n", "p"]),
    "mos_device": st.sampled_from(["nmos", "pmos"]),
    "mom_bottom": st.sampled_from(["M1", "M2", "M3", "M4"]),
    "mom_top": st.sampled_from(["M2", "M3", "M4", "M5"]),
    "finger_width_um": st.sampled_from([0.2, 0.3, 0.5]),
    "finger_space_um": st.sampled_from([0.21, 0.3, 0.6]),
    "mom_alternate": st.booleans(),
}


def field_value(name: str, hostile: bool) -> st.SearchStrategy[Any]:
    plain = PLAUSIBLE[name]
    if not hostile:
        return plain
    sweep = st.one_of(st.lists(plain, min_size=1, max_size=3),
                      st.fixed_dictionaries({"start": scalars(), "stop": scalars()},
                                            optional={"step": scalars(), "count": scalars(),
                                                      "spacing": st.sampled_from(["log", "linear", "x"])}))
    return st.one_of(plain, plain, sweep, scalars())


@st.composite
def cell_entries(draw: st.DrawFn, hostile: bool = True) -> dict[str, Any]:
    """One [[family]] or [[cell]] table; with ``hostile`` about one field in six gets an edge
    value, a sweep or a value of the wrong type."""

    def rough() -> bool:
        return hostile and draw(st.integers(0, 5)) == 0

    entry: dict[str, Any] = {
        "name": draw(st.one_of(st.sampled_from(["fa", "x1", "9bad", "a" * 90, "b\x1bc"]), st.text(max_size=6))
                     if rough() else st.sampled_from(["fa", "fb", "fc"])),
        "topology": draw(st.one_of(st.sampled_from(["nmos_inv", "", "MOM"]), st.text(max_size=5))
                         if rough() else st.sampled_from(TOPOLOGIES)),
    }
    if draw(st.booleans()):
        entry["oxide"] = draw(st.sampled_from(["thick", "", "IO"]) if rough() else st.sampled_from(["core", "io"]))
    for name in draw(st.lists(st.sampled_from(GEOMETRY_FIELDS), max_size=4, unique=True)):
        entry[name] = draw(field_value(name, rough()))
    entry.setdefault("width_sites", draw(field_value("width_sites", rough())))
    if rough() and draw(st.booleans()):
        entry[draw(st.sampled_from(["skip_unfit", "family", "description", "colour"]))] = draw(scalars())
    return entry


@st.composite
def cell_files(draw: st.DrawFn) -> dict[str, Any]:
    data: dict[str, Any] = {}
    for kind in draw(st.lists(st.sampled_from(["family", "cell"]), min_size=1, max_size=2)):
        data.setdefault(kind, []).extend(draw(st.lists(cell_entries(), min_size=1, max_size=3)))
    if draw(st.integers(0, 19)) == 0:
        data[draw(st.sampled_from(["family", "cell", "invented", "extra"]))] = draw(scalars())
    return data


@fuzz_settings("cell_data")
@given(data=cell_files())
def test_cell_files_are_accepted_or_located(data: dict[str, Any], outcomes: Counter[str]) -> None:
    outcomes["cell_data.cases"] += 1
    try:
        specs = parse_cells(data, LUMEN, FILE)
    except CellError as exc:
        assert_located(exc, FILE)
        outcomes["cell_data.rejected"] += 1
        return
    for spec in specs:
        geo = resolve(spec, LUMEN)
        assert 0 < geo.area_um2 < float("inf")
    outcomes["cell_data.accepted"] += 1


# --------------------------------------------------------------------------- decks at their limits


def _bounds(path: str) -> tuple[float | None, float | None]:
    """(lower, upper) bound of the deck parameter at a dotted path, from the deck schema."""
    parts = [p for p in path.replace("[", ".").replace("]", "").split(".") if p]
    model: Any = Deck
    i = 0
    while True:
        field = model.model_fields[parts[i]]
        if i == len(parts) - 1:
            lo = hi = None
            for meta in field.metadata:
                if isinstance(meta, annotated_types.Ge):
                    lo = float(meta.ge)  # type: ignore[arg-type]
                elif isinstance(meta, annotated_types.Gt):
                    lo = float(meta.gt)  # type: ignore[arg-type]
                elif isinstance(meta, annotated_types.Le):
                    hi = float(meta.le)  # type: ignore[arg-type]
            return lo, hi
        ann = field.annotation
        if typing.get_origin(ann) in (dict, list):
            model, i = typing.get_args(ann)[-1], i + 2  # skip the key or index
        else:
            model, i = next(a for a in (ann, *typing.get_args(ann))
                            if isinstance(a, type) and issubclass(a, BaseModel)), i + 1


def _limit_changes(deck: Deck, draw: st.DrawFn) -> dict[str, float]:
    """One to four parameters set to a documented bound (just inside an open one)."""
    changes = {}
    for path in draw(st.lists(st.sampled_from(numeric_paths(deck)), min_size=1, max_size=4, unique=True)):
        lo, hi = _bounds(path)
        choices = [v for v in (lo, hi) if v is not None]
        if choices:
            changes[path] = draw(st.sampled_from(choices))
    return changes


@st.composite
def limit_cases(draw: st.DrawFn) -> tuple[Deck, list[dict[str, Any]]]:
    deck = load_deck(DECKS / f"{draw(st.sampled_from(['lumen130', 'tarn40lp', 'quill28hk']))}.toml")
    try:
        deck = deck.with_changes(_limit_changes(deck, draw))
    except DeckError:
        pass  # limits that break a cross-field rule: keep the demo deck (the deck fuzzer covers it)
    entries = draw(st.lists(cell_entries(hostile=False), min_size=1, max_size=2))
    return deck, [{**e, "name": f"{e['name']}{i}"} for i, e in enumerate(entries)]


@fuzz_settings("cells_built")
@given(case=limit_cases())
def test_checked_cells_characterize_and_store(case: tuple[Deck, list[dict[str, Any]]],
                                              outcomes: Counter[str]) -> None:
    deck, entries = case
    outcomes["cells_built.cases"] += 1
    try:
        specs = parse_cells({"family": entries}, deck, FILE)
    except CellError as exc:
        assert_located(exc, FILE)
        outcomes["cells_built.rejected"] += 1
        return
    if len(specs) > 24:
        specs = specs[:24]
    run = characterize(deck, specs)
    validate_run(run)  # the catalog's checks: build stores what check accepted
    for cell in run.cells:
        prepare_cell(cell)
        for c in cell.corners:
            for m, value in c.metrics.items():
                assert metric_problem(m, value, c.flags) is None, (cell.name, c.corner, m, value, c.flags)
    outcomes["cells_built.accepted"] += 1
