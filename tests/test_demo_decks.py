"""The invented demo decks and their cell families: marked, loadable, complete and plausible."""

from __future__ import annotations

import itertools
import re
import tomllib
import typing
from collections import Counter
from pathlib import Path

import pytest
from pydantic import BaseModel

from celllab.cells import CellSpec, load_cells, resolve_geometry
from celllab.cli.main import main
from celllab.deck import Deck, load_deck, schema
from celllab.topologies import REGISTRY


def _load(paths: tuple[Path, Path]) -> tuple[Deck, list[CellSpec]]:
    deck = load_deck(paths[0])
    return deck, load_cells(paths[1], deck)


def test_demo_files_are_marked_invented(demo_deck_name: str, demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    deck_file, cell_file = demo_deck_paths[demo_deck_name]
    for path in (deck_file, cell_file):
        assert path.read_text(encoding="utf-8").startswith("# INVENTED DEMO DATA"), path
    cells = tomllib.loads(cell_file.read_text(encoding="utf-8"))
    assert cells["invented"] is True
    assert cells["process"] == demo_deck_name
    assert load_deck(deck_file).process.invented is True


def test_every_deck_in_the_folder_is_a_demo_deck(deck_dir: Path, demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    assert sorted(p.stem for p in deck_dir.glob("*.toml")) == sorted(demo_deck_paths)
    for _, cell_file in demo_deck_paths.values():
        assert cell_file.is_file()


def test_variant_count(demo_deck_name: str, demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    _, cells = _load(demo_deck_paths[demo_deck_name])
    assert 40 <= len(cells) <= 200
    assert len({c.name for c in cells}) == len(cells)
    assert len({c.content_hash for c in cells}) == len(cells)      # no variant characterized twice


@pytest.mark.parametrize("name", ["tarn40lp", "quill28hk"])
def test_families_cover_every_topology(name: str, demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    _, cells = _load(demo_deck_paths[name])
    assert {c.topology for c in cells} == set(REGISTRY)
    acc_wells = {c.accumulation_well for c in cells if c.topology == "accumulation"}
    assert acc_wells == {"n", "p"}
    assert {c.mom_alternate for c in cells if c.topology == "mom"} == {False, True}
    io = Counter(c.topology for c in cells if c.oxide == "io" and c.topology != "mom")
    assert {"nmos_inversion", "accumulation", "cross_coupled"} <= set(io)
    assert any(c.topology == "mos_mom" and c.mos_device == "pmos" for c in cells)
    assert any(c.gate_length_um is not None for c in cells)        # an explicit gate-length sweep


def test_families_cover_both_placements_and_rails(demo_deck_name: str,
                                                 demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    deck, cells = _load(demo_deck_paths[demo_deck_name])
    assert {c.topology for c in cells} == set(REGISTRY)
    assert {c.placement for c in cells} == {"core_row", "open_region"}
    # thick oxide on its own rail and on the core rail (characterized at the core supply)
    assert {c.rail for c in cells if c.oxide == "io"} >= {"io", "core"}
    assert {c.rail for c in cells} <= set(deck.supplies.rail_names())
    assert any(c.topology == "tied_cmos" and c.oxide == "core" and c.placement == "core_row" for c in cells)


def test_tarn40lp_decouples_its_named_rail(demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    deck, cells = _load(demo_deck_paths["tarn40lp"])
    assert deck.supplies.rail_names() == ("core", "io", "pll")
    assert deck.supplies.rail_nets("pll") == ("VDDPLL", "VSSPLL") and deck.supply_for("pll") == 1.8
    assert any(c.rail == "pll" for c in cells)


def test_back_end_corners_keep_the_metal_resistivity(demo_deck_name: str,
                                                     demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    # rho = R_sq t is a property of the metal: a corner that thins the metal raises the sheet
    # resistance by the same factor (docs/references.md [143] [CP]); the temperature coefficient
    # then scales it (docs/references.md [140] [DF]). rel 1e-3 (factors rounded to 4 digits)
    deck = load_deck(demo_deck_paths[demo_deck_name][0])
    alpha = deck.resistance_tempco.metal_sheet_ppm_per_K * 1e-6
    moved = 0
    for name, corner in deck.corners.items():
        at = deck.at_corner(name)
        tcr = 1 + alpha * (corner.temperature_C - deck.resistance_reference_C)
        for base, m in zip(deck.metals, at.metals):
            rho_base = base.sheet_ohm_per_sq * base.thickness_nm
            assert m.sheet_ohm_per_sq / tcr * m.thickness_nm == pytest.approx(rho_base, rel=1e-3), (name, m.name)
            moved += m.thickness_nm != base.thickness_nm
    assert moved >= 2 * len(deck.metals)            # slow and fast corners move every layer


def test_every_cell_fits_at_every_corner(demo_deck_name: str, demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    deck, cells = _load(demo_deck_paths[demo_deck_name])
    for corner in deck.corners:
        at = deck.at_corner(corner)
        for spec in cells:
            geo = resolve_geometry(spec, at)
            assert geo.area_um2 > 0
            if spec.topology != "mom":
                assert 0 < geo.gate_area_um2 < geo.area_um2, spec.name


def test_leaky_corner_exists(demo_deck_name: str, demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    deck = load_deck(demo_deck_paths[demo_deck_name][0])
    leaky = deck.corners["leaky_125C"]
    assert leaky.supply_scale > 1 and leaky.temperature_C >= 100


# --- physical plausibility of the invented numbers ---------------------------------------------

def test_metal_layers_do_not_overlap(demo_deck_name: str, demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    # each layer's bottom sits above the top of the one below (geometry, no source needed)
    metals = load_deck(demo_deck_paths[demo_deck_name][0]).metals
    for lower, upper in itertools.pairwise(metals):
        assert upper.height_nm > lower.height_nm + lower.thickness_nm, (lower.name, upper.name)
        assert upper.min_width_nm >= lower.min_width_nm


def test_metal_sheet_resistance_is_not_below_bulk_copper(demo_deck_name: str,
                                                          demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    # rho = R_sq x t. Bulk copper 1.68e-8 ohm m (CRC Handbook, from memory) is the floor; narrow
    # damascene lines and aluminium run higher (common practice, no source): allow up to 1e-7.
    for m in load_deck(demo_deck_paths[demo_deck_name][0]).metals:
        rho = m.sheet_ohm_per_sq * m.thickness_nm * 1e-9
        assert 1.6e-8 <= rho <= 1e-7, m.name


def test_oxide_field_at_high_supply_is_below_breakdown(demo_deck_name: str,
                                                       demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    # E = V / t (parallel plate) at +10 % supply must stay well below the DC breakdown field
    # (common practice, no source: operate at a fraction of E_BD)
    deck = load_deck(demo_deck_paths[demo_deck_name][0])
    for flavour, ox in deck.oxides.items():
        e_MV_per_cm = 1.1 * deck.supply_for(flavour) / (ox.physical_thickness_m * 100) / 1e6
        assert e_MV_per_cm < 0.7 * ox.breakdown_field_dc_MV_per_cm, flavour
    assert deck.oxides["io"].eot_m > deck.oxides["core"].eot_m


def test_tarn40lp_matches_its_description(demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    deck = load_deck(demo_deck_paths["tarn40lp"][0])
    core = deck.oxides["core"]
    assert core.gate == "n_poly" and core.gate_doping_cm3 == 1e20
    assert 1.9 <= core.t_ox_nm <= 2.0 and 4.2 <= core.eps_r <= 4.5
    assert deck.supplies.core_V == 1.1 and deck.supplies.io_V == 2.5
    assert 7 <= len(deck.metals) <= 8
    assert all(2.9 <= m.ild_eps_r <= 3.0 for m in deck.metals)
    assert core.reliability.acceleration == "power_law" and 40 <= core.reliability.acceleration_exponent <= 45
    assert deck.oxides["io"].reliability.weibull_beta == 2.5


def test_quill28hk_matches_its_description(demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    deck = load_deck(demo_deck_paths["quill28hk"][0])
    core, io = deck.oxides["core"], deck.oxides["io"]
    assert core.eot_nm == 1.2 and core.t_ox_nm is None and core.gate == "metal" and core.centroid_model
    assert 4.2 <= core.nmos_gate_workfunction_eV <= 4.3
    assert 4.9 <= core.pmos_gate_workfunction_eV <= 5.0
    assert core.leakage.model == "reference" and core.leakage.j_ref_t_ox_nm == core.eot_nm
    assert io.leakage.model == "direct_tunnel" and io.gate == "metal"
    assert deck.supplies.core_V == 0.9 and deck.supplies.io_V == 1.8
    assert 8 <= len(deck.metals) <= 9


# --- the README's field tables ----------------------------------------------------------------

def test_readme_documents_every_deck_field(deck_dir: Path, demo_deck_paths: dict[str, tuple[Path, Path]]) -> None:
    readme = (deck_dir / "README.md").read_text(encoding="utf-8")
    models = [schema.Deck, schema.ProcessInfo, schema.OxideFlavour, schema.DeviceParams, schema.LeakageParams,
              schema.Tunnelling, schema.ReliabilityParams, schema.Wells, schema.Junctions, schema.JunctionLeakage,
              schema.Resistances, schema.MetalLayer, schema.Layout, schema.Supplies, schema.NamedSupply,
              schema.ResistanceTempco, schema.AnalysisBand, schema.Corner, schema.RailDomain,
              schema.EsdTargets, schema.Mission, CellSpec]
    def documented(model: type[BaseModel], name: str) -> bool:
        ann = model.model_fields[name].annotation
        if any(isinstance(a, type) and issubclass(a, BaseModel) for a in (ann, *typing.get_args(ann))):
            # a sub-table has a heading: [wells], [[metals]], [oxides.<flavour>.nmos], ...
            return re.search(rf"^### .*\[(\[)?([^\]]*\.)?{name}[.\]]", readme, flags=re.MULTILINE) is not None
        return f"| `{name}` |" in readme

    missing = [f"{m.__name__}.{f}" for m in models for f in m.model_fields if not documented(m, f)]
    assert missing == []
    for name in demo_deck_paths:
        assert f"`{name}.toml`" in readme
    assert "INVENTED DEMO DATA" in readme


def test_cli_check_accepts_every_demo_deck(demo_deck_name: str, demo_deck_paths: dict[str, tuple[Path, Path]],
                                           capsys: pytest.CaptureFixture[str]) -> None:
    deck_file, cell_file = demo_deck_paths[demo_deck_name]
    assert main(["check", "--deck", str(deck_file), "--cells", str(cell_file)]) == 0
    captured = capsys.readouterr()
    n = len(load_cells(cell_file, load_deck(deck_file)))
    assert f"{demo_deck_name}: deck OK" in captured.out and f"{n} cell variants OK" in captured.out
    assert captured.err == ""
