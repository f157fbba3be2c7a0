"""Cell files at and beyond their limits: sweep sizes, range bounds, physical minimums, repeats.

Limits (process_decks/README.md, "Limits"): a family sweeps at most ``MAX_VARIANTS_PER_FAMILY``
variants and a file at most ``MAX_VARIANTS_PER_FILE``; sizes are counted with exact integers
before anything is expanded. A drawn gate is at least the oxide's minimum width and length.
Every problem names the file, the field and, where the text has it, the line.
"""

from __future__ import annotations

import itertools
import math
from pathlib import Path
from typing import Any

import pytest

from celllab.cells import expand, load_cells, parse_cells
from celllab.cells.expand import MAX_VARIANTS_PER_FAMILY, MAX_VARIANTS_PER_FILE, VariantRegistry
from celllab.deck import Deck
from celllab.errors import CellError


def family(**fields: Any) -> dict[str, Any]:
    return {"family": [{"name": "fx", "topology": "nmos_inversion", **fields}]}


def _problems(data: dict[str, Any], deck: Deck | None = None) -> list[str]:
    with pytest.raises(CellError) as info:
        parse_cells(data, deck, file="cells.toml")
    assert all(p.file == "cells.toml" for p in info.value.problems)
    return [str(p) for p in info.value.problems]


def test_sweep_size_beyond_int64_is_refused_before_expanding(monkeypatch: pytest.MonkeyPatch) -> None:
    # 5 sweeps of 8192 values: 2**65 variants, which wraps to 0 in a 64-bit product
    def no_expansion(*args: object) -> None:
        raise AssertionError("the sweep was expanded")

    monkeypatch.setattr(expand.itertools, "product", no_expansion)
    sweep = {"start": 1, "stop": 8192}
    data = family(width_sites=sweep, height_rows=sweep, fingers=sweep, contacted_ends=sweep,
                  gate_contacted_ends=sweep)
    (message,) = _problems(data)
    assert "family[0]" in message and str(8192**5) in message
    assert f"at most {MAX_VARIANTS_PER_FAMILY}" in message


def test_sweep_size_just_over_the_limit_is_refused() -> None:
    over = MAX_VARIANTS_PER_FAMILY + 1
    (message,) = _problems(family(width_sites=list(range(1, over + 1))))
    assert f"sweeps {over} variants" in message


def test_variants_per_file_are_limited() -> None:
    per = MAX_VARIANTS_PER_FAMILY // 2
    n_families = MAX_VARIANTS_PER_FILE // per + 1
    data = {"family": [{"name": f"f{i}", "topology": "mom", "width_sites": {"start": 1, "stop": per}}
                       for i in range(n_families)]}
    messages = _problems(data)
    assert any(f"at most {MAX_VARIANTS_PER_FILE}" in m for m in messages)


@pytest.mark.parametrize("bad", [
    {"start": math.nan, "stop": 1.0},
    {"start": 0.1, "stop": math.inf},
    {"start": -math.inf, "stop": 0.5},
    {"start": 0.1, "stop": 0.5, "step": math.nan},
    {"start": 0.1, "stop": 0.5, "step": math.inf},
    {"start": 0.1, "stop": math.nan, "count": 3},
    {"start": 0.1, "stop": math.inf, "count": 3, "spacing": "log"},
    {"start": 1e-300, "stop": 1e300, "step": 1e-300},
])
def test_non_finite_or_unbounded_ranges_are_refused(bad: dict[str, float]) -> None:
    (message,) = _problems(family(width_sites=8, gate_length_um=bad))
    assert "family[0].gate_length_um" in message


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
def test_non_finite_scalars_and_list_items_are_refused(value: float) -> None:
    messages = _problems(family(width_sites=8, gate_width_um=value))
    assert any("gate_width_um" in m for m in messages)
    messages = _problems(family(width_sites=8, gate_width_um=[1.0, value]))
    assert any("gate_width_um" in m for m in messages)


@pytest.mark.parametrize("width", [1e-300, 5e-324, 1e-3])
def test_gate_width_below_the_oxide_minimum_is_refused(lumen130: Deck, width: float) -> None:
    (message,) = _problems({"cell": [{"name": "tiny", "topology": "nmos_inversion", "width_sites": 8,
                                      "gate_width_um": width}]}, lumen130)
    minimum = lumen130.oxides["core"].min_width_um
    assert "cell[0].gate_width_um" in message and f"{minimum:g}" in message


def test_gate_width_at_the_oxide_minimum_is_accepted(lumen130: Deck) -> None:
    minimum = lumen130.oxides["core"].min_width_um
    (spec,) = parse_cells({"cell": [{"name": "narrow", "topology": "nmos_inversion", "width_sites": 8,
                                     "gate_width_um": minimum}]}, lumen130)
    assert spec.gate_width_um == minimum


def test_explicit_minimum_width_in_the_deck_applies(lumen130: Deck) -> None:
    data = lumen130.model_dump(mode="json")
    data["oxides"]["core"]["min_gate_width_um"] = 0.5
    wide_rule = Deck.model_validate(data)
    (message,) = _problems({"cell": [{"name": "n", "topology": "nmos_inversion", "width_sites": 8,
                                      "gate_width_um": 0.4}]}, wide_rule)
    assert "0.5" in message


CELLS_TWO_FAMILIES_SAME_GEOMETRY = """\
[[family]]
name = "fa"
topology = "nmos_inversion"
width_sites = [4, 8]

[[family]]
name = "fb"
topology = "nmos_inversion"
width_sites = [8, 16]
"""


def test_same_geometry_from_two_families_is_located(tmp_path: Path, lumen130: Deck) -> None:
    path = tmp_path / "cells.toml"
    path.write_text(CELLS_TWO_FAMILIES_SAME_GEOMETRY)
    with pytest.raises(CellError) as info:
        load_cells(path, lumen130)
    (problem,) = info.value.problems
    assert problem.file == str(path) and problem.line == 6
    assert problem.field.startswith("family[1]") and "family[0]" in problem.message


def test_repeats_across_files_are_located(tmp_path: Path, lumen130: Deck) -> None:
    a, b = tmp_path / "a.toml", tmp_path / "b.toml"
    a.write_text('[[family]]\nname = "fa"\ntopology = "mom"\nwidth_sites = [8, 12]\n')
    b.write_text('# same cells again\n[[cell]]\nname = "fa-w8-h1"\ntopology = "pmos_inversion"\n'
                 'width_sites = 8\n\n[[cell]]\nname = "other"\ntopology = "mom"\nwidth_sites = 12\n')
    seen = VariantRegistry()
    load_cells(a, lumen130, seen=seen)
    with pytest.raises(CellError) as info:
        load_cells(b, lumen130, seen=seen)
    by_field = {p.field: p for p in info.value.problems}
    assert set(by_field) == {"cell[0].name", "cell[1]"}
    assert all(p.file == str(b) for p in info.value.problems)
    assert by_field["cell[0].name"].line == 3 and str(a) in by_field["cell[0].name"].message
    assert by_field["cell[1]"].line == 7 and "same geometry" in by_field["cell[1]"].message


def test_family_names_follow_the_name_rule() -> None:
    messages = _problems({"cell": [{"name": "ok", "family": "fam\x1b[31mred\nx", "topology": "mom",
                                    "width_sites": 8}]})
    assert any("cell[0].family" in m for m in messages)
    assert not any("\x1b" in m or "\n" in m for m in messages)


def test_expansion_stays_lazy_for_accepted_sweeps() -> None:
    # the limit is checked with exact integers, and the expansion is the cartesian product
    sizes = [7, 11, 13]
    specs = parse_cells(family(width_sites=list(range(20, 27)), fingers=list(range(1, 12)),
                               height_rows=[1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13]))
    assert len(specs) == math.prod(sizes) == len(list(itertools.product(*map(range, sizes))))


@pytest.mark.parametrize("bad", [
    {"start": 2**63, "stop": 2**63},
    {"start": -(2**70), "stop": 4},
    {"start": 1, "stop": 4, "step": 2**64},
])
def test_range_bounds_beyond_any_field_are_refused(bad: dict[str, int]) -> None:
    (message,) = _problems(family(width_sites=bad))
    assert "family[0].width_sites" in message
