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
from celllab.cells.schema import GEOMETRY_FIELDS
from celllab.deck import Deck, load_deck, numeric_paths
from celllab.engine import characterize
from celllab.errors import CellError, DeckError
from celllab.topologies import REGISTRY
from celllab.topologies.geometry import PLACEMENTS

from .conftest import fuzz_settings
from .strategies import assert_located, pick, scalars

DECKS = Path(__file__).resolve().parents[2] / "process_decks"
LUMEN = load_deck(DECKS / "lumen130.toml")
DEMO = {name: load_deck(DECKS / f"{name}.toml") for name in ("lumen130", "tarn40lp", "quill28hk")}
FILE = "fuzz_cells.toml"

PLAUSIBLE: dict[str, st.SearchStrategy[Any]] = {
    "width_sites": st.sampled_from([2, 8, 12, 16, 24, 40, 64]),
    "height_rows": st.sampled_from([1, 1, 2, 3]),
    "placement": st.sampled_from(PLACEMENTS),
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


def _rough(plain: st.SearchStrategy[Any]) -> st.SearchStrategy[Any]:
    sweep = st.one_of(st.lists(plain, min_size=1, max_size=3),
                      st.fixed_dictionaries({"start": scalars(), "stop": scalars()},
                                            optional={"step": scalars(), "count": scalars(),
                                                      "spacing": st.sampled_from(["log", "linear", "x"])}))
    return st.one_of(plain, sweep, scalars())


#: Field values built once: plausible ones, and rough ones (sweeps, edge values, wrong types).
ROUGH = {name: _rough(plain) for name, plain in PLAUSIBLE.items()}
NAMES_PLAIN = st.sampled_from(["fa", "fb", "fc"])
NAMES_ROUGH = st.one_of(st.sampled_from(["fa", "x1", "9bad", "a" * 90, "b\x1bc"]), st.text(max_size=6))
TOPOLOGY_ROUGH = st.one_of(st.sampled_from(["nmos_inv", "", "MOM"]), st.text(max_size=5))
OXIDES = ["core", "io"]
#: The fields each topology takes (from the registry, so a topology added later is fuzzed too).
TOPOLOGIES = REGISTRY.names()
FIELDS_OF = {name: sorted(REGISTRY[name].fields) for name in TOPOLOGIES}
#: Rails: the built-in ones, tarn40lp's named rail (unknown on lumen130), and names no deck has.
RAILS_PLAIN = ["core", "io"]
RAILS_ROUGH = st.one_of(st.sampled_from(["", "vaux", "CORE", "io ", "r" * 30, "1v8", "core\n"]),
                        st.text(max_size=6), scalars())
EXTRA_KEYS = ["skip_unfit", "family", "description", "colour"]


@st.composite
def cell_entries(draw: st.DrawFn, hostile: bool = True) -> dict[str, Any]:
    """One [[family]] or [[cell]] table; with ``hostile`` about one field in six gets an edge
    value, a sweep or a value of the wrong type."""

    def rough() -> bool:
        return hostile and draw(st.integers(0, 5)) == 0

    entry: dict[str, Any] = {
        "name": draw(NAMES_ROUGH) if rough() else pick(draw, ["fa", "fb", "fc"]),
        "topology": draw(TOPOLOGY_ROUGH) if rough() else pick(draw, list(TOPOLOGIES)),
    }
    if draw(st.booleans()):
        entry["oxide"] = pick(draw, ["thick", "", "IO"]) if rough() else pick(draw, OXIDES)
    if draw(st.integers(0, 3)) == 0:
        entry["rail"] = draw(RAILS_ROUGH) if rough() else pick(draw, RAILS_PLAIN)
    for _ in range(draw(st.integers(0, 4))):
        if rough():
            name = pick(draw, list(GEOMETRY_FIELDS))
            entry[name] = draw(ROUGH[name])
        else:  # a field the topology takes
            name = pick(draw, FIELDS_OF.get(entry["topology"], list(GEOMETRY_FIELDS)))
            entry[name] = draw(PLAUSIBLE[name])
    if "width_sites" not in entry:
        entry["width_sites"] = draw(ROUGH["width_sites"] if rough() else PLAUSIBLE["width_sites"])
    if rough() and draw(st.booleans()):
        entry[pick(draw, EXTRA_KEYS)] = draw(scalars())
    return entry


ENTRIES = cell_entries()
PLAIN_ENTRIES = cell_entries(hostile=False)
ENTRY_LISTS = st.lists(ENTRIES, min_size=1, max_size=3)


@st.composite
def cell_files(draw: st.DrawFn) -> dict[str, Any]:
    data: dict[str, Any] = {}
    for _ in range(draw(st.integers(1, 2))):
        data.setdefault(pick(draw, ["family", "cell"]), []).extend(draw(ENTRY_LISTS))
    for i, entry in enumerate(e for entries in data.values() for e in entries):
        if entry.get("name") in ("fa", "fb", "fc") and draw(st.integers(0, 4)):
            entry["name"] += str(i)  # mostly distinct names; sometimes a repeat
    if draw(st.integers(0, 19)) == 0:
        data[pick(draw, ["family", "cell", "invented", "extra"])] = draw(scalars())
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
    options = numeric_paths(deck)
    for _ in range(draw(st.integers(1, 4))):
        path = pick(draw, options)
        lo, hi = _bounds(path)
        choices = [v for v in (lo, hi) if v is not None]
        if choices:
            changes[path] = pick(draw, choices)
    return changes


@st.composite
def limit_cases(draw: st.DrawFn) -> tuple[Deck, list[dict[str, Any]]]:
    deck = DEMO[pick(draw, list(DEMO))]
    try:
        deck = deck.with_changes(_limit_changes(deck, draw))
    except DeckError:
        pass  # limits that break a cross-field rule: keep the demo deck (the deck fuzzer covers it)
    entries = draw(st.lists(PLAIN_ENTRIES, min_size=1, max_size=2))
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
