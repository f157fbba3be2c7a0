"""Family expansion: sweeps, variant names, content hashes, what-if changes."""

from __future__ import annotations

import hashlib
import itertools
import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.cells import GEOMETRY_FIELDS, CellSpec, cell_hash, load_cells, parse_cells
from celllab.deck import Deck, load_deck
from celllab.errors import CellError
from celllab.topologies import REGISTRY


def family(**fields: Any) -> dict[str, Any]:
    """Parsed cell-file data holding one family."""
    return {"family": [{"name": "fx", "topology": "nmos_inversion", **fields}]}


# --- sweeps ------------------------------------------------------------------------------------

def test_list_sweeps_expand_to_the_cartesian_product() -> None:
    specs = parse_cells(family(width_sites=[2, 4, 8], fingers=[1, 2], contacted_ends=[1, 2]))
    got = {(s.width_sites, s.fingers, s.contacted_ends) for s in specs}
    assert got == set(itertools.product([2, 4, 8], [1, 2], [1, 2]))
    assert len(specs) == 12


def test_scalars_do_not_multiply() -> None:
    specs = parse_cells(family(width_sites=8, fingers=2, height_rows=2))
    assert [(s.width_sites, s.fingers, s.height_rows) for s in specs] == [(8, 2, 2)]


@pytest.mark.parametrize(("rng", "values"), [
    ({"start": 1, "stop": 4}, [1, 2, 3, 4]),              # integer range, step 1, inclusive
    ({"start": 2, "stop": 9, "step": 3}, [2, 5, 8]),
    ({"start": 4, "stop": 4}, [4]),
])
def test_integer_ranges(rng: dict[str, Any], values: list[int]) -> None:
    specs = parse_cells(family(width_sites=rng))
    assert [s.width_sites for s in specs] == values
    assert all(type(s.width_sites) is int for s in specs)


def test_linear_count_range_matches_linspace() -> None:
    specs = parse_cells(family(width_sites=16, gate_length_um={"start": 0.1, "stop": 0.5, "count": 5}))
    # Source: numpy.linspace (reference library); rel 1e-12
    np.testing.assert_allclose([s.gate_length_um for s in specs], np.linspace(0.1, 0.5, 5), rtol=1e-12)


def test_float_step_range() -> None:
    specs = parse_cells(family(width_sites=16, gate_length_um={"start": 0.1, "stop": 0.3, "step": 0.05}))
    np.testing.assert_allclose([s.gate_length_um for s in specs], [0.1, 0.15, 0.2, 0.25, 0.3], rtol=1e-12)


def test_log_range_is_geometric() -> None:
    specs = parse_cells(family(width_sites=16,
                               gate_length_um={"start": 0.1, "stop": 1.0, "count": 3, "spacing": "log"}))
    lengths = [s.gate_length_um for s in specs]
    # geometric progression: equal ratios, 0.1 -> sqrt(0.1) -> 1.0 (values kept to 12 decimals)
    assert lengths == pytest.approx([0.1, 0.1 ** 0.5, 1.0], rel=1e-11)
    assert lengths[1] / lengths[0] == pytest.approx(lengths[2] / lengths[1], rel=1e-10)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(1, 64), min_size=1, max_size=4, unique=True),
       st.lists(st.integers(1, 8), min_size=1, max_size=3, unique=True),
       st.lists(st.sampled_from([1, 2]), min_size=1, max_size=2, unique=True))
def test_product_size_and_unique_names(widths: list[int], fingers: list[int], ends: list[int]) -> None:
    specs = parse_cells(family(width_sites=widths, fingers=fingers, gate_contacted_ends=ends))
    assert len(specs) == len(widths) * len(fingers) * len(ends)
    assert len({s.name for s in specs}) == len(specs)
    assert len({s.content_hash for s in specs}) == len(specs)


def test_families_and_single_cells_together() -> None:
    data = family(width_sites=[4, 8])
    data["cell"] = [{"name": "solo", "topology": "mom", "width_sites": 12}]
    specs = parse_cells(data)
    assert [s.name for s in specs] == ["fx-w4-h1", "fx-w8-h1", "solo"]
    assert [s.family for s in specs] == ["fx", "fx", ""]


# --- names ---------------------------------------------------------------------------------------

def test_names_tag_the_swept_fields_in_geometry_order() -> None:
    # the TOML key order must not matter: tags follow GEOMETRY_FIELDS
    specs = parse_cells(family(contacted_ends=[1, 2], fingers=[2], width_sites=[4], gate_length_um=[0.15, 0.3],
                               height_rows=2))
    assert [s.name for s in specs] == ["fx-w4-h2-L0p15-e1", "fx-w4-h2-L0p15-e2", "fx-w4-h2-L0p3-e1",
                                       "fx-w4-h2-L0p3-e2"]


def test_name_tags_for_words_and_booleans() -> None:
    data = {"family": [{"name": "mm", "topology": "mos_mom", "width_sites": 8, "mos_device": ["nmos", "pmos"],
                        "mom_top": ["M3", "M4"], "mom_alternate": [False, True]}]}
    names = [s.name for s in parse_cells(data)]
    assert names[:3] == ["mm-w8-h1-nmos-toM3-alt0", "mm-w8-h1-nmos-toM3-alt1", "mm-w8-h1-nmos-toM4-alt0"]
    assert len(names) == 8


def test_names_are_stable_and_unique(demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    for deck_file, cell_file in demo_deck_paths.values():
        deck = load_deck(deck_file)
        first = [s.name for s in load_cells(cell_file, deck)]
        again = [s.name for s in load_cells(cell_file, deck)]
        assert first == again
        assert len(set(first)) == len(first)


# --- content hash ---------------------------------------------------------------------------------

def _spec(**fields: Any) -> CellSpec:
    return CellSpec.model_validate({"name": "c", "topology": "nmos_inversion", "width_sites": 8, **fields})


def test_hash_is_sha256_of_topology_oxide_rail_and_geometry() -> None:
    spec = _spec(fingers=2)
    body = {"topology": "nmos_inversion", "oxide": "core", "rail": "core",
            **{f: getattr(spec, f) for f in GEOMETRY_FIELDS}}
    assert body["placement"] == "core_row"
    expected = hashlib.sha256(json.dumps(body, sort_keys=True, separators=(",", ":")).encode()).hexdigest()[:16]
    assert cell_hash(spec) == spec.content_hash == expected


def test_hash_ignores_name_and_family() -> None:
    a = _spec(fingers=2)
    b = _spec(fingers=2, name="renamed", family="another")
    assert a.content_hash == b.content_hash


@pytest.mark.parametrize(("field", "value"), [
    ("width_sites", 9), ("height_rows", 2), ("fingers", 3), ("gate_length_um", 0.5), ("gate_width_um", 1.0),
    ("contacted_ends", 1), ("gate_contacted_ends", 2), ("accumulation_well", "p"), ("mos_device", "pmos"),
    ("mom_alternate", True), ("topology", "pmos_inversion"), ("oxide", "io"), ("rail", "io"),
    ("placement", "open_region"),
])
def test_hash_changes_with_each_geometry_field(field: str, value: Any) -> None:
    base = _spec()
    assert getattr(base, field) != value
    assert _spec(**{field: value}).content_hash != base.content_hash


@pytest.mark.parametrize("field", ["mom_bottom", "mom_top", "finger_width_um", "finger_space_um"])
def test_hash_changes_with_each_mom_field(field: str) -> None:
    base = CellSpec(name="m", topology="mom", width_sites=8)
    value = {"mom_bottom": "M2", "mom_top": "M4", "finger_width_um": 0.3, "finger_space_um": 0.3}[field]
    assert base.model_copy(update={field: value}).content_hash != base.content_hash


def test_every_geometry_field_is_a_cell_field() -> None:
    assert set(GEOMETRY_FIELDS) <= set(CellSpec.model_fields)
    assert set(REGISTRY) == {"nmos_inversion", "pmos_inversion", "accumulation", "tied_cmos", "cross_coupled",
                               "mom", "mos_mom"}


def test_rail_follows_the_oxide_unless_given() -> None:
    assert _spec().rail == "core" and _spec(oxide="io").rail == "io"
    thick_on_core = _spec(oxide="io", rail="core")
    assert (thick_on_core.oxide, thick_on_core.rail) == ("io", "core")
    assert thick_on_core.content_hash != _spec(oxide="io").content_hash
    with pytest.raises(ValueError, match="rail"):
        _spec(rail="Core Rail")


def test_placement_sweeps_with_short_name_tags() -> None:
    data = {"family": [{"name": "pl", "topology": "nmos_inversion", "width_sites": 8,
                        "placement": ["core_row", "open_region"]}]}
    specs = parse_cells(data)
    assert [(s.name, s.placement) for s in specs] == [("pl-w8-h1-row", "core_row"), ("pl-w8-h1-open", "open_region")]
    with pytest.raises(CellError) as info:
        parse_cells({"cell": [{"name": "x", "topology": "mom", "width_sites": 4, "placement": "pad_ring"}]})
    assert "core_row" in str(info.value) and "open_region" in str(info.value)


def test_rail_is_one_value_per_family_and_checked_against_the_deck(lumen130: Deck) -> None:
    with pytest.raises(CellError) as info:
        parse_cells(family(width_sites=8, rail=["core", "io"]))
    assert info.value.problems[0].field == "family[0].rail" and "cannot be swept" in info.value.problems[0].message
    with pytest.raises(CellError) as info:
        parse_cells(family(width_sites=8, rail="analog"), lumen130)
    (problem,) = info.value.problems
    assert "rail" in problem.field and "allowed: core, io" in problem.message


def test_esd_safe_topologies() -> None:
    # contract: no gate tied directly to a rail in cross_coupled and mom cells
    safe = {t for t in REGISTRY if CellSpec(name="c", topology=t, width_sites=8).esd_safe}
    assert safe == {"cross_coupled", "mom"}


# --- skip_unfit ---------------------------------------------------------------------------------

def test_skip_unfit_drops_only_what_does_not_fit(lumen130: Deck) -> None:
    # lumen130: 4 sites = 1.7 um; 4 fingers need 5 strips x 0.36 um + 2 x 0.11 um = 2.02 um > 1.7 um
    data = family(width_sites=[4, 8], fingers=[1, 4], skip_unfit=True)
    names = [s.name for s in parse_cells(data, lumen130)]
    assert names == ["fx-w4-h1-f1", "fx-w8-h1-f1", "fx-w8-h1-f4"]
    with pytest.raises(CellError) as info:
        parse_cells(family(width_sites=[4, 8], fingers=[1, 4]), lumen130)
    assert [p.field for p in info.value.problems] == ["family[0].fingers (variant fx-w4-h1-f4)"]


def test_without_a_deck_no_geometry_is_checked() -> None:
    specs = parse_cells(family(width_sites=1, fingers=64))
    assert specs[0].fingers == 64


# --- what-if changes ------------------------------------------------------------------------------

def test_with_changes_revalidates_and_rehashes(lumen130: Deck) -> None:
    spec = parse_cells(family(width_sites=8, fingers=2), lumen130)[0]
    wider = spec.with_changes({"width_sites": 16}, lumen130)
    assert wider.width_sites == 16 and wider.fingers == 2
    assert wider.name == spec.name                      # the caller renames when it wants to
    assert wider.content_hash != spec.content_hash
    assert spec.with_changes({"width_sites": 16}, name="fx-w16").name == "fx-w16"
    assert spec.with_changes({}).content_hash == spec.content_hash


def test_with_changes_rejects_unknown_fields_with_a_suggestion() -> None:
    with pytest.raises(CellError) as info:
        _spec().with_changes({"finger": 2})
    (problem,) = info.value.problems
    assert problem.field == "finger"
    assert "did you mean 'fingers'?" in problem.message


def test_with_changes_checks_geometry_against_the_deck(lumen130: Deck) -> None:
    spec = _spec(width_sites=4)
    assert spec.with_changes({"fingers": 8}).fingers == 8          # no deck: schema only
    with pytest.raises(CellError) as info:
        spec.with_changes({"fingers": 8}, lumen130)
    assert "fingers" in info.value.problems[0].field
    assert "do not fit" in info.value.problems[0].message
    with pytest.raises(CellError):
        spec.with_changes({"fingers": 0})                            # schema: fingers >= 1


def test_renamed_variant_rewrites_the_tags_of_changed_fields() -> None:
    from celllab.cells.expand import renamed_variant

    # the naming rule of variant_name: family, then w<sites>, h<rows>, then swept fields' tags
    assert renamed_variant("lm_ncap-w8-h1-f2", {"fingers": 2}, {"fingers": 4}) == "lm_ncap-w8-h1-f4"
    assert renamed_variant("lm_ncap-w8-h1-f2", {"width_sites": 8, "fingers": 2},
                           {"width_sites": 16, "fingers": 2}) == "lm_ncap-w16-h1-f2"
    assert renamed_variant("lm_ncap-w8-h1", {"fingers": 1}, {"fingers": 3}) == "lm_ncap-w8-h1-f3"
    assert renamed_variant("lm_ncap-w8-h1", {"gate_length_um": None},
                           {"gate_length_um": 0.25}) == "lm_ncap-w8-h1-L0p25"
    assert renamed_variant("x-w8-h1", {"fingers": 2}, {"fingers": 2}) == "x-w8-h1"
