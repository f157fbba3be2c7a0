"""plan_block end to end: accounting per region and gap class, corner policies, budgets and
the constraints that bind, open slots, and the two demo blocks."""

from __future__ import annotations

from pathlib import Path

import pytest

from celllab.catalog import Catalog
from celllab.planner import BlockPlan, load_block, plan_block
from celllab.planner.block import parse_block

from . import ROW_UM, SITE_UM, IdealCell, block_data, block_text, synthetic_catalog, toml_text

REPO = Path(__file__).resolve().parents[2]
BLOCKS = REPO / "process_decks" / "blocks"
SITE_UM2 = SITE_UM * ROW_UM

CELLS = [
    # dense but leaky thin-oxide cell, 4 sites
    IdealCell("thin4", 400.0, leakage_nA=2.0, width_sites=4, esd_safe=False, gate_area_um2=3.0),
    # sparse, no leakage, ESD-safe, 4 sites
    IdealCell("mom4", 100.0, width_sites=4),
    # 2-site thin cell, ESD-safe
    IdealCell("pair2", 150.0, leakage_nA=0.5, width_sites=2, gate_area_um2=1.0),
]


@pytest.fixture(scope="module")
def catalog(tmp_path_factory: pytest.TempPathFactory) -> Catalog:
    return synthetic_catalog(tmp_path_factory.mktemp("plan") / "cat.sqlite", CELLS)


def plan(tmp_path: Path, catalog: Catalog, **changes: object) -> BlockPlan:
    path = tmp_path / "b.toml"
    path.write_text(block_text(**changes))
    return plan_block(load_block(path), catalog)


TWO_REGIONS = [
    {"name": "core", "frequency_MHz": 100.0,
     "row_gaps": [{"name": "fill", "width_sites": [4, 6, 9], "count": [100, 40, 10]}]},
    {"name": "ring", "frequency_MHz": 100.0, "esd_safe_only": True, "quiet": True,
     "open_slots": [{"name": "corner", "role": "corner", "width_um": 5.0, "height_um": 8.0,
                     "count": 4}],
     "row_gaps": [{"name": "ring_fill", "width_sites": [4, 2], "count": [20, 5]}]},
]


def check_accounting(p: BlockPlan) -> None:
    """Per region: class counts add up to the region's cells; class areas add up."""
    for r in p.regions:
        by_cell: dict[str, int] = {}
        for c in r.classes:
            for name, n in c.cells.items():
                by_cell[name] = by_cell.get(name, 0) + n
            parts = c.filled + c.lost_geometry + c.lost_restricted + c.lost_kinds + c.left_open
            assert parts == pytest.approx(c.capacity, rel=1e-9)
        assert by_cell == r.counts()
        assert sum(c.cap for c in r.classes) == pytest.approx(r.cap, rel=1e-12)
        assert sum(c.useful_cap for c in r.classes) == pytest.approx(r.useful_cap, rel=1e-12)
    roles = p.role_totals()
    assert sum(t["cap"] for t in roles.values()) == pytest.approx(p.fill_capacitance, rel=1e-12)


def test_unlimited_fill_fills_every_gap(tmp_path: Path, catalog: Catalog) -> None:
    # Source: worked by hand. No leakage or kind limit that binds: 100 four-site gaps take one
    # thin4 each (400 fF), 40 six-site gaps thin4 + pair2 (550 fF), 10 nine-site gaps two
    # thin4 (800 fF, 1 site lost; thin4 + 2 pair2 gives only 700 fF); at the slow corner
    # (cap x 0.9): 160 x 360 + 40 x 135 fF
    p = plan(tmp_path, catalog, region=TWO_REGIONS[:1], budgets__leakage_uA=None)
    core = p.region("core")
    assert core.counts() == {"thin4": 160, "pair2": 40}
    assert core.cap == pytest.approx(160 * 360e-15 + 40 * 135e-15, rel=1e-12)
    assert core.useful_cap == pytest.approx(160 * 360e-15 + 40 * 135e-15, rel=1e-9)
    fill = core.classes[0]
    assert fill.lost_geometry == pytest.approx(10 * 1 * SITE_UM2 * 1e-12, rel=1e-9)
    assert fill.left_open == pytest.approx(0.0, abs=1e-18)
    check_accounting(p)


def test_chosen_cells_carry_the_catalogs_bandwidth_bound(tmp_path: Path, catalog: Catalog) -> None:
    # a bandwidth the catalog holds only as a lower bound keeps its flag in the plan's report
    p = plan(tmp_path, catalog, region=TWO_REGIONS[:1], budgets__leakage_uA=None)
    assert p.cells and all(c.bandwidth_is_bound for c in p.cells)     # no ESR: no cutoff found
    assert all(c["bandwidth_is_bound"] is True for c in p.to_dict()["cells"])


def test_leakage_budget_binds_at_the_leakiest_corner(tmp_path: Path, catalog: Catalog) -> None:
    # Source: the corner policy: leakage at the worst (leaky_125C, x2) corner. 100 four-site
    # gaps, budget 100 nA: thin4 leaks 4 nA there, so 25 thin4 and 75 zero-leakage mom4
    p = plan(tmp_path, catalog, region=[{"name": "core", "frequency_MHz": 100.0, "row_gaps": [
        {"name": "fill", "width_sites": [4], "count": [100]}]}], budgets__leakage_uA=0.1,
        candidates__where="width_sites = 4")
    assert p.region("core").counts() == {"thin4": 25, "mom4": 75}
    assert p.leakage == pytest.approx(100e-9, rel=1e-9)
    leak = next(b for b in p.budgets if b.name == "leakage")
    assert leak.binding and leak.shadow_price and leak.shadow_price > 0
    # LP shadow price: one more nA buys (360 - 90) fF / 4 nA of capacitance
    assert leak.shadow_price == pytest.approx((360e-15 - 90e-15) / 4e-9, rel=1e-6)
    by_corner = {t.corner: t.leakage for t in p.corner_totals}
    assert max(by_corner.values()) == pytest.approx(100e-9, rel=1e-9)
    assert by_corner["leaky_125C"] == pytest.approx(100e-9, rel=1e-9)
    check_accounting(p)


def test_esd_safe_only_region_and_open_slots(tmp_path: Path, catalog: Catalog) -> None:
    # Source: worked by hand. With 0.425 um sites and 3.825 um rows a 5 x 8 um corner slot holds
    # floor(5/1.7) x floor(8/3.825) = 2 x 2 = 4 copies of a 4-site cell or floor(5/0.85) x 2 = 10
    # of a 2-site cell; the ESD-safe-only ring may not take thin4 (no ESD-safe flag).
    assert (SITE_UM, ROW_UM) == (0.425, 3.825)
    p = plan(tmp_path, catalog, region=TWO_REGIONS, budgets__leakage_uA=None)
    ring = p.region("ring")
    assert "thin4" not in ring.counts()
    corner = next(c for c in ring.classes if c.name == "corner")
    assert corner.kind == "open" and corner.filled_gaps == 4
    assert sum(corner.cells.values()) in (4 * 4, 4 * 10)
    esd = next(b for b in p.budgets if b.name.startswith("ESD-safe-only"))
    assert esd.binding and esd.gain and esd.gain > 0  # thin4 would add capacitance there
    check_accounting(p)


def test_kind_limit_and_why_area_stays_open(tmp_path: Path, catalog: Catalog) -> None:
    # Source: worked by hand. One kind only: thin4 fills the 4-site gaps; the 2-site ring gaps
    # stay empty for want of a second kind (lost to the kind limit)
    p = plan(tmp_path, catalog, region=TWO_REGIONS[:1] + [{
        "name": "ring", "frequency_MHz": 100.0,
        "row_gaps": [{"name": "ring_fill", "width_sites": [2], "count": [30]}]}],
        budgets__leakage_uA=None, budgets__max_kinds=1)
    assert len({n for r in p.regions for n in r.counts()}) == 1
    ring = p.region("ring").classes[0]
    assert ring.lost_kinds == pytest.approx(ring.capacity, rel=1e-9)
    kinds = next(b for b in p.budgets if b.name == "distinct kinds")
    assert kinds.binding and kinds.gain and kinds.gain > 0
    check_accounting(p)


def test_min_leakage_meets_targets_with_the_least_leakage(tmp_path: Path,
                                                          catalog: Catalog) -> None:
    # Source: worked by hand. Target 5 pF at 100 MHz in 100 four-site gaps: mom4 (no leakage)
    # gives 90 fF at the slow corner, so 56 mom4 (5.04 pF) cost nothing
    p = plan(tmp_path, catalog, region=[{"name": "core", "frequency_MHz": 100.0,
                                         "min_cap_nF": 0.005, "row_gaps": [
        {"name": "fill", "width_sites": [4], "count": [100]}]}], objective__goal="min_leakage",
        candidates__where="width_sites = 4")
    core = p.region("core")
    assert core.counts() == {"mom4": 56} and p.leakage == 0
    assert core.shortfall == 0 and core.useful_cap >= 5e-12
    assert core.classes[0].left_open_because[-1].startswith("goal min_leakage")


def test_thin_oxide_budget_and_failure_fraction(tmp_path: Path, catalog: Catalog) -> None:
    # Source: the budget definition: thin4 has 3 um^2 of thin-oxide gate area, so a limit of
    # 30 um^2 allows 10 of them; mom4 (no gate) fills the rest
    p = plan(tmp_path, catalog, region=[{"name": "core", "frequency_MHz": 100.0, "row_gaps": [
        {"name": "fill", "width_sites": [4], "count": [100]}]}], budgets__leakage_uA=None,
        budgets__thin_oxide_area_mm2=30e-6, candidates__where="width_sites = 4",
        budgets__wearout={"failure_ppm": 1.0, "mission": [{"years": 10.0,
                                                           "temperature_C": 105.0}]})
    assert p.region("core").counts() == {"thin4": 10, "mom4": 90}
    oxide = next(b for b in p.budgets if b.name == "thin-oxide gate area")
    assert oxide.binding and oxide.used == pytest.approx(30e-12, rel=1e-12)
    assert p.failure_fraction is not None and 0 <= p.failure_fraction < 1e-6
    assert p.region("core").failure_fraction == pytest.approx(p.failure_fraction, rel=1e-12)


def test_named_corner_takes_every_figure_there(tmp_path: Path, catalog: Catalog) -> None:
    # Source: the policy: a named corner is a what-if at that corner (typ: cap x1, leak x1)
    p = plan(tmp_path, catalog, region=TWO_REGIONS[:1], budgets__leakage_uA=None,
             candidates__corner="typ_25C")
    thin = next(c for c in p.region("core").cells if c.name == "thin4")
    assert thin.cap == pytest.approx(400e-15, rel=1e-12)
    assert thin.leakage == pytest.approx(2e-9, rel=1e-12)
    assert thin.useful_corner == "typ_25C" and thin.z_corner == "typ_25C"


def test_region_cells_carry_their_stored_responses(tmp_path: Path, catalog: Catalog) -> None:
    # Source: the interface a supply-network model attaches to: each region's cells with
    # counts and the stored record (every corner's Z(f))
    p = plan(tmp_path, catalog, region=TWO_REGIONS, budgets__leakage_uA=None)
    for r in p.regions:
        for c in r.cells:
            z = c.record.corner(c.z_corner).response.z_ohm
            assert z.size and c.count == r.counts()[c.name]


def test_explain_off_skips_the_resolves(tmp_path: Path, catalog: Catalog) -> None:
    path = tmp_path / "b.toml"
    path.write_text(block_text(region=TWO_REGIONS, budgets__max_kinds=1))
    p = plan_block(load_block(path), catalog, explain=False)
    assert all(b.gain is None for b in p.budgets)


# ------------------------------------------------------------------------------ demo blocks


@pytest.fixture(scope="module", params=["lumen130_dsp", "quill28hk_soc"])
def demo(request: pytest.FixtureRequest, demo_catalog: Catalog) -> tuple[str, BlockPlan]:
    return request.param, plan_block(load_block(BLOCKS / f"{request.param}.toml"),
                                     demo_catalog)


def test_demo_plan_respects_every_budget(demo: tuple[str, BlockPlan],
                                         demo_catalog: Catalog) -> None:
    # Source: the block file's own budgets; the catalog's records for ESD safety
    name, demo_plan = demo
    block = load_block(BLOCKS / f"{name}.toml")
    b = block.budgets
    assert demo_plan.leakage <= b.leakage_uA * 1e-6 * (1 + 1e-9)
    assert len({c.name for r in demo_plan.regions for c in r.cells}) <= b.max_kinds
    if b.thin_oxide_area_mm2 is not None:
        assert demo_plan.oxide_area <= b.thin_oxide_area_mm2 * 1e-6 * (1 + 1e-9)
    for spec, region in zip(block.region, demo_plan.regions, strict=True):
        if spec.esd_safe_only:
            for c in region.cells:
                assert demo_catalog.cell(c.name, deck=demo_plan.deck).esd_safe
    check_accounting(demo_plan)
    d = demo_plan.to_dict()
    assert d["totals"]["useful_cap_nF"] == pytest.approx(
        sum(r["useful_cap_nF"] for r in d["regions"]), rel=1e-9)
    if name == "lumen130_dsp":
        assert {"corner", "spacer", "filler"} <= set(d["roles"])


def test_parse_block_accepts_data_directly() -> None:
    block = parse_block(__import__("tomllib").loads(toml_text(block_data())))
    assert block.region[0].row_gaps[0].width_sites == [4, 8]
