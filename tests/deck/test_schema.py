"""The process deck model: field documentation, oxide arithmetic, validators, JSON round trip."""

from __future__ import annotations

import copy
import functools
import re
import types
import typing
from pathlib import Path
from typing import Any

import annotated_types
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from pydantic import BaseModel, ValidationError

from celllab.deck import Deck, OxideFlavour, load_deck, numeric_paths, schema
from celllab.errors import DeckError

DECK_DIR = Path(__file__).resolve().parents[2] / "process_decks"
DEMO = ("lumen130", "tarn40lp", "quill28hk")

DECK_MODELS = [
    schema.ProcessInfo, schema.DeviceParams, schema.LeakageParams, schema.Tunnelling, schema.ReliabilityParams,
    schema.OxideFlavour, schema.Wells, schema.Junctions, schema.JunctionLeakage, schema.Resistances,
    schema.MetalLayer, schema.Layout, schema.Supplies, schema.AnalysisBand, schema.Corner, schema.RailDomain, schema.Mission,
    schema.EsdTargets, schema.Deck,
]


@functools.cache
def demo_deck(name: str) -> Deck:
    return load_deck(DECK_DIR / f"{name}.toml")


def _oxide(**overrides: Any) -> dict[str, Any]:
    """A valid oxide flavour as plain data (copied from lumen130's core oxide)."""
    data = copy.deepcopy(demo_deck("lumen130").oxides["core"].model_dump(mode="json"))
    data.update(overrides)
    return data


# --- documentation ------------------------------------------------------------------------

@pytest.mark.parametrize("model", DECK_MODELS, ids=lambda m: m.__name__)
def test_every_field_is_described(model: type[BaseModel]) -> None:
    # process_decks/README.md is generated from these descriptions
    undocumented = [n for n, f in model.model_fields.items()
                    if not (f.description or "").strip() and not _holds_tables(f.annotation)]
    assert undocumented == []


def _holds_tables(ann: Any) -> bool:
    """A sub-table (model) or a container of them: documented by its own fields."""
    return any(isinstance(a, type) and issubclass(a, BaseModel) for a in (ann, *typing.get_args(ann)))


@pytest.mark.parametrize("model", DECK_MODELS, ids=lambda m: m.__name__)
def test_models_forbid_unknown_fields_and_are_frozen(model: type[BaseModel]) -> None:
    assert model.model_config.get("extra") == "forbid"
    assert model.model_config.get("frozen") is True


def test_frozen_deck_rejects_assignment() -> None:
    deck = demo_deck("lumen130")
    with pytest.raises(ValidationError):
        deck.supplies.core_V = 2.0  # type: ignore[misc]


# --- oxide arithmetic ---------------------------------------------------------------------

@pytest.mark.parametrize(("t_ox_nm", "eps_r", "eot_nm"), [
    (2.0, 3.9, 2.0),        # SiO2 is its own EOT
    (3.0, 20.0, 0.585),     # Source: docs/references.md [11] [DF], 3 nm at k = 20; rel 1e-12
    (1.95, 4.3, 1.95 * 3.9 / 4.3),  # tarn40lp core SiON: EOT = t 3.9/k (same source)
])
def test_eot_from_physical_thickness(t_ox_nm: float, eps_r: float, eot_nm: float) -> None:
    # Source: EOT = sum_i t_i 3.9/k_i (docs/references.md [11], Taur & Ning §2.3); rel 1e-12
    ox = OxideFlavour.model_validate(_oxide(t_ox_nm=t_ox_nm, eps_r=eps_r))
    assert ox.eot_m == pytest.approx(eot_nm * 1e-9, rel=1e-12)
    assert ox.physical_thickness_m == pytest.approx(t_ox_nm * 1e-9, rel=1e-12)


def test_eot_only_oxide_uses_eot_for_both_thicknesses() -> None:
    ox = OxideFlavour.model_validate(_oxide(t_ox_nm=None, eot_nm=1.2, eps_r=25.0))
    assert ox.eot_m == pytest.approx(1.2e-9, rel=1e-12)
    assert ox.physical_thickness_m == pytest.approx(1.2e-9, rel=1e-12)


def test_tarn40lp_core_eot_from_its_sion() -> None:
    core = demo_deck("tarn40lp").oxides["core"]
    # Source: EOT = t 3.9/k (docs/references.md [11]); 1.95 nm at k = 4.3 -> 1.7686 nm; rel 1e-4
    assert core.eot_m == pytest.approx(1.7686e-9, rel=1e-4)


# --- cross-field validators (model level; file-level messages are in tests/test_bad_input.py)

@pytest.mark.parametrize(("overrides", "accepted"), [
    ({"gate": "metal", "gate_doping_cm3": None, "nmos_gate_workfunction_eV": 4.2,
      "pmos_gate_workfunction_eV": 5.0}, True),
    ({"gate": "metal", "gate_doping_cm3": None}, False),             # no work functions, no vfb
    ({"gate": "p_poly"}, True),
    ({"gate": "p_poly", "gate_doping_cm3": None}, False),
    ({"t_ox_nm": None, "eot_nm": None}, False),
    ({"eot_nm": 1.0}, False),                                        # both thicknesses
    ({"breakdown_field_pulse_MV_per_cm": 14.0}, True),               # pulse == DC is allowed
    ({"breakdown_field_pulse_MV_per_cm": 13.9}, False),
])
def test_oxide_validators(overrides: dict[str, Any], accepted: bool) -> None:
    data = _oxide(**overrides)
    if accepted:
        OxideFlavour.model_validate(data)
    else:
        with pytest.raises(ValidationError):
            OxideFlavour.model_validate(data)


def test_metal_gate_may_give_flat_band_voltages_instead_of_work_functions() -> None:
    data = _oxide(gate="metal", gate_doping_cm3=None)
    data["nmos"]["vfb_V"] = -0.9
    data["pmos"]["vfb_V"] = 0.9
    ox = OxideFlavour.model_validate(data)
    assert ox.nmos.vfb_V == -0.9


@pytest.mark.parametrize(("leakage", "accepted"), [
    ({"model": "direct_tunnel"}, True),
    ({"model": "reference", "j_ref_A_per_cm2": 1.0, "j_ref_t_ox_nm": 1.2, "j_ref_V": 1.0}, True),
    ({"model": "reference", "j_ref_A_per_cm2": 1.0, "j_ref_t_ox_nm": 1.2}, False),
    ({"model": "reference"}, False),
])
def test_reference_leakage_needs_all_three_reference_values(leakage: dict[str, Any], accepted: bool) -> None:
    if accepted:
        assert schema.LeakageParams.model_validate(leakage).model == leakage["model"]
    else:
        with pytest.raises(ValidationError, match="needs"):
            schema.LeakageParams.model_validate(leakage)


def test_io_oxide_is_optional_and_core_is_required() -> None:
    data = demo_deck("lumen130").model_dump(mode="json")
    no_io = copy.deepcopy(data)
    del no_io["oxides"]["io"]
    assert list(Deck.model_validate(no_io).oxides) == ["core"]
    no_core = copy.deepcopy(data)
    del no_core["oxides"]["core"]
    with pytest.raises(ValidationError, match="'core' oxide flavour is required"):
        Deck.model_validate(no_core)


# --- helpers on the deck ---------------------------------------------------------------------

def test_deck_helpers() -> None:
    deck = demo_deck("tarn40lp")
    assert deck.name == "tarn40lp"
    assert deck.corner_names() == ["typ_25C", "slow_125C", "fast_m40C", "leaky_125C"]
    assert deck.metal("M3").height_nm == 680
    with pytest.raises(KeyError):
        deck.metal("M9")
    assert deck.supply_for("core") == 1.1
    assert deck.supply_for("io") == 2.5


def test_rail_net_names_default_and_stay_out_of_the_hash_until_set() -> None:
    deck = demo_deck("lumen130")
    assert deck.supplies.rail_nets("core") == ("VDD", "VSS")
    assert deck.supplies.rail_nets("io") == ("VDDIO", "VSSIO")
    # at their defaults the names are not in the canonical dump, so older decks keep their hash
    assert "core_power_net" not in deck.model_dump(mode="json")["supplies"]
    data = deck.model_dump(mode="json")
    data["supplies"]["core_power_net"] = "VPWR_CORE"
    renamed = Deck.model_validate(data)
    assert renamed.supplies.rail_nets("core") == ("VPWR_CORE", "VSS")
    assert renamed.content_hash != deck.content_hash
    assert Deck.model_validate(renamed.model_dump(mode="json")) == renamed


@pytest.mark.parametrize(("changes", "field", "message"), [
    ({"core_power_net": "VSS"}, "supplies.core_power_net", "cannot also be a ground net"),
    ({"io_power_net": "VDD"}, "supplies.io_power_net", "differs from core_V"),
])
def test_rail_net_rules(changes: dict[str, str], field: str, message: str) -> None:
    from celllab.deck import parse_deck

    data = demo_deck("lumen130").model_dump(mode="json")
    data["supplies"].update(changes)
    with pytest.raises(DeckError) as info:
        parse_deck(data)
    assert [p.field for p in info.value.problems] == [field]
    assert message in info.value.problems[0].message


def test_rail_net_names_must_be_plain_identifiers() -> None:
    data = demo_deck("lumen130").model_dump(mode="json")
    data["supplies"]["io_ground_net"] = "VSS IO"
    with pytest.raises(ValidationError, match="io_ground_net"):
        Deck.model_validate(data)


# --- deck -> JSON -> deck ------------------------------------------------------------------

@pytest.mark.parametrize("name", DEMO)
def test_json_round_trip(name: str) -> None:
    deck = demo_deck(name)
    again = Deck.model_validate_json(deck.model_dump_json())
    assert again == deck
    assert again.content_hash == deck.content_hash


def _split(path: str) -> list[str]:
    return [p for p in re.split(r"[.\[\]]", path) if p]


def _value(data: Any, path: str) -> Any:
    for part in _split(path):
        data = data[int(part)] if isinstance(data, list) else data[part]
    return data


def _leaf_field(path: str):  # type: ignore[no-untyped-def]
    """The pydantic FieldInfo of the parameter a dotted path names."""
    model: Any = Deck
    parts = _split(path)
    i = 0
    while True:
        info = model.model_fields[parts[i]]
        ann = info.annotation
        sub_models = [a for a in typing.get_args(ann) if isinstance(a, type) and issubclass(a, BaseModel)]
        if typing.get_origin(ann) in (typing.Union, types.UnionType) and sub_models:
            ann = sub_models[0]         # an optional sub-table: Model | None
        origin = typing.get_origin(ann)
        if origin in (dict, list):
            model = typing.get_args(ann)[-1]
            i += 2                      # skip the key or index
        elif isinstance(ann, type) and issubclass(ann, BaseModel):
            model = ann
            i += 1
        else:
            assert i == len(parts) - 1, path
            return info


def _bounds(path: str) -> tuple[float, float]:
    lo, hi = -float("inf"), float("inf")
    for m in _leaf_field(path).metadata:
        if isinstance(m, (annotated_types.Ge, annotated_types.Gt)):
            lo = float(getattr(m, "ge", getattr(m, "gt", lo)))
        if isinstance(m, annotated_types.Le):
            hi = float(m.le)
    return lo, hi


@st.composite
def numeric_change(draw: st.DrawFn) -> tuple[str, str, float]:
    """A demo deck, one of its numeric paths, and a new value within +-10 % and the field's range."""
    name = draw(st.sampled_from(DEMO))
    deck = demo_deck(name)
    path = draw(st.sampled_from(numeric_paths(deck)))
    old = float(_value(deck.full_dump(), path))
    lo, hi = _bounds(path)
    a, b = sorted((old * 0.9, old * 1.1))
    a, b = max(a, lo), min(b, hi)
    if (lo, hi) != (-float("inf"), float("inf")) and any(isinstance(m, annotated_types.Gt)
                                                         for m in _leaf_field(path).metadata):
        a = max(a, lo * (1 + 1e-9))
    new = draw(st.floats(min_value=a, max_value=b, allow_nan=False, allow_infinity=False))
    return name, path, new


@settings(max_examples=150, deadline=None)
@given(numeric_change())
def test_numeric_change_round_trips_through_json(change: tuple[str, str, float]) -> None:
    name, path, new = change
    deck = demo_deck(name)
    try:
        changed = deck.with_changes({path: new})
    except DeckError as exc:
        # a single value inside its own range may still break a cross-field rule (metal layers
        # overlapping, a corner pushed out of range); the error must then name that field
        assert exc.problems and all(p.field for p in exc.problems), str(exc)
        assume(False)
        return
    dumped = changed.full_dump()
    assert _value(dumped, path) == new
    # nothing else moved
    before = deck.full_dump()
    for other in numeric_paths(deck):
        if other != path:
            assert _value(dumped, other) == _value(before, other), other
    # deck -> JSON -> deck
    again = Deck.model_validate_json(changed.model_dump_json())
    assert again == changed
    assert again.content_hash == changed.content_hash
    # the provenance hash follows the value
    old = _value(before, path)
    assert (changed.content_hash == deck.content_hash) == (float(old) == new)


def test_numeric_paths_cover_nested_tables_and_lists() -> None:
    paths = numeric_paths(demo_deck("quill28hk"))
    assert "oxides.core.eot_nm" in paths
    assert "oxides.core.leakage.j_ref_A_per_cm2" in paths
    assert "metals[8].height_nm" in paths
    assert "oxides.core.t_ox_nm" not in paths          # not given in an EOT deck (None)
    assert not any(p.startswith("corners") for p in paths)
    assert "process.invented" not in paths and "oxides.core.centroid_model" not in paths  # booleans


def test_fields_at_their_defaults_stay_out_of_the_hash_but_not_out_of_reach() -> None:
    deck = demo_deck("lumen130")
    data = deck.full_dump()
    # a deck written before the row structure, width bias, named rails and coefficients existed
    for key in ("nwell_height_um", "nwell_to_nwell_space_um", "deep_nwell_space_um"):
        del data["layout"][key]
    for metal in data["metals"]:
        del metal["width_bias_nm"]
    del data["supplies"]["named"]
    del data["resistance_tempco"]
    for corner in data["corners"].values():
        corner["set"] = {k: v for k, v in corner["set"].items() if "width_bias" not in k}
    older = Deck.model_validate(data)
    canonical = older.model_dump(mode="json")
    assert "resistance_tempco" not in canonical and "named" not in canonical["supplies"]
    assert "nwell_height_um" not in canonical["layout"] and "width_bias_nm" not in canonical["metals"][0]
    # every default is still a path corners and what-ifs may name
    assert {"metals[0].width_bias_nm", "resistance_tempco.via_ppm_per_K"} <= set(numeric_paths(older))
    assert older.with_changes({"metals[1].width_bias_nm": 5.0}).metals[1].width_bias_nm == 5.0
    # the canonical dump reads back to the same deck (and hash)
    again = Deck.model_validate(canonical)
    assert again == older and again.content_hash == older.content_hash
    assert again.layout.nwell_half_um == again.layout.row_height_um / 2
