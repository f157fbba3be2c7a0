"""Block-plan exports: the fill list read back by Python's csv and json modules, the HTML
report parsed by html.parser, the impedance by scikit-rf, and atomic writes."""

from __future__ import annotations

import csv
import io
import json
from html.parser import HTMLParser
from pathlib import Path

import pytest

from celllab.export import CAUTION
from celllab.export.plan import (
    FILL_COLUMNS,
    render_fill_csv,
    render_fill_json,
    render_plan_html,
    write_plan_files,
)
from celllab.planner import BlockPlan, load_block, plan_block
from tests.planner import IdealCell, block_text, synthetic_catalog

REGIONS = [
    {"name": "core", "frequency_MHz": 100.0,
     "row_gaps": [{"name": "fill", "width_sites": [4, 6], "count": [30, 10]}]},
    {"name": "ring", "frequency_MHz": 100.0, "esd_safe_only": True, "quiet": True,
     "open_slots": [{"name": "corner", "role": "corner", "width_um": 5.0, "height_um": 8.0,
                     "count": 2},
                    {"name": "spacer", "role": "spacer", "width_um": 2.0, "height_um": 8.0,
                     "count": 6}]},
]


@pytest.fixture(scope="module")
def plan(tmp_path_factory: pytest.TempPathFactory) -> BlockPlan:
    folder = tmp_path_factory.mktemp("plan_export")
    catalog = synthetic_catalog(folder / "c.sqlite", [
        IdealCell("thin4", 400.0, leakage_nA=2.0, width_sites=4, esd_safe=False,
                  gate_area_um2=3.0),
        IdealCell("pair2", 150.0, esr_ohm=100.0, leakage_nA=0.5, width_sites=2,
                  gate_area_um2=1.0)])
    path = folder / "b.toml"
    path.write_text(block_text(region=REGIONS, budgets__leakage_uA=None))
    return plan_block(load_block(path), catalog)


def test_fill_csv_reads_back_with_the_plan_counts(plan: BlockPlan) -> None:
    # Source: Python's csv module (comment lines skipped); counts equal the plan's, exact
    text = render_fill_csv(plan)
    assert text.splitlines()[2].startswith("# CAUTION") and CAUTION in text
    rows = list(csv.DictReader(io.StringIO("".join(
        line for line in text.splitlines(keepends=True) if not line.startswith("#")))))
    assert tuple(rows[0]) == FILL_COLUMNS
    for region in plan.regions:
        for cls in region.classes:
            got = {r["cell"]: int(r["count"]) for r in rows
                   if r["region"] == region.name and r["gap_class"] == cls.name}
            assert got == cls.cells
    total = sum(float(r["total_cap_nF"]) for r in rows)
    assert total == pytest.approx(plan.fill_capacitance * 1e9, rel=1e-12)


def test_fill_json_reads_back(plan: BlockPlan) -> None:
    # Source: Python's json module (strict: no NaN); the plan's own figures, rel 1e-12
    doc = json.loads(render_fill_json(plan))
    assert doc["caution"] == CAUTION and doc["format"] == "celllab-fill-1"
    assert doc["plan"]["totals"]["cap_nF"] == pytest.approx(plan.fill_capacitance * 1e9,
                                                            rel=1e-12)
    regions = {r["name"]: r for r in doc["plan"]["regions"]}
    assert {c["name"]: c["count"] for c in regions["core"]["cells"]} == \
        plan.region("core").counts()
    assert sum(r["count"] for r in doc["fill"]) == sum(sum(r.counts().values())
                                                       for r in plan.regions)


class _Collect(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.text: list[str] = []
        self.tags: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def test_html_report_parses_and_names_everything(plan: BlockPlan) -> None:
    # Source: Python's html.parser; the report names every region, class, cell and the caution
    page = render_plan_html(plan)
    parser = _Collect()
    parser.feed(page)
    text = " ".join(parser.text)
    assert "script" not in parser.tags and parser.tags.count("table") >= 6
    for region in plan.regions:
        assert f"Region {region.name}" in text
        for cls in region.classes:
            assert cls.name in text
    assert "Caution:" in text and CAUTION in text


def test_write_plan_files(plan: BlockPlan, tmp_path: Path) -> None:
    skrf = pytest.importorskip("skrf")
    written = write_plan_files(plan, tmp_path / "out")
    names = sorted(p.name for p in written)
    assert names == ["t_block_fill.csv", "t_block_fill.json", "t_block_plan.html",
                     "t_block_z.csv", "t_block_z.s1p"]
    # Source: scikit-rf's Touchstone v1.1 reader; the plan's swept Z, rel 1e-9
    net = skrf.Network(str(tmp_path / "out" / "t_block_z.s1p"))
    freq, z = plan.sweep()
    assert net.f == pytest.approx(freq, rel=1e-10)
    assert abs(net.z[-1, 0, 0]) == pytest.approx(abs(z[-1]), rel=1e-9)
    assert not [p for p in (tmp_path / "out").iterdir() if p.name.endswith(".tmp")]
