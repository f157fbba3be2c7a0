"""HTML datasheets: cautions, inline SVG plots, well-formed markup."""

from __future__ import annotations

import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import pytest

from celllab.display import format_value
from celllab.export import CAUTION
from celllab.export.datasheet import (
    render_datasheet_html,
    render_library_html,
    write_datasheet,
    write_library_datasheet,
)
from celllab.records import METRICS, corner_metrics

#: HTML5 void elements (WHATWG HTML, "Void elements"): never closed.
VOID = {
    "area",
    "base",
    "br",
    "col",
    "embed",
    "hr",
    "img",
    "input",
    "link",
    "meta",
    "source",
    "track",
    "wbr",
}


class StrictChecker(HTMLParser):
    """html.parser plus the checks it leaves out: every element closed in order, unique ids."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.problems: list[str] = []
        self.ids: list[str] = []
        self.tags: list[str] = []
        self.text: list[str] = []
        self.doctype = ""

    def handle_decl(self, decl):
        self.doctype = decl

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.ids += [v for k, v in attrs if k == "id"]
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.tags.append(tag)
        self.ids += [v for k, v in attrs if k == "id"]

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.problems.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
            return
        self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)

    def check(self, page: str) -> StrictChecker:
        self.feed(page)
        self.close()
        if self.stack:
            self.problems.append(f"unclosed: {self.stack}")
        duplicates = {i for i in self.ids if self.ids.count(i) > 1}
        if duplicates:
            self.problems.append(f"duplicate ids: {sorted(duplicates)[:5]}")
        return self

    @property
    def plain_text(self) -> str:
        return " ".join(" ".join(self.text).split())


def svg_blocks(page: str) -> list[str]:
    blocks, start = [], 0
    while (begin := page.find("<svg", start)) >= 0:
        end = page.index("</svg>", begin) + len("</svg>")
        blocks.append(page[begin:end])
        start = end
    return blocks


def test_cell_datasheet_parses_and_carries_the_caution(library, deck_name):
    # Source: Python html.parser (plus element balance), WHATWG void-element list.
    cell = library[0]
    page = render_datasheet_html(cell, deck_name)
    checker = StrictChecker().check(page)
    assert checker.problems == []
    assert checker.doctype.lower() == "doctype html"
    text = checker.plain_text
    assert " ".join(CAUTION.split()) in text
    assert text.count(" ".join(CAUTION.split())) >= 2  # top and bottom
    assert cell.name in text and deck_name in text


def test_plots_are_inline_svg_and_well_formed_xml(library, deck_name):
    # Source: xml.etree (an independent XML parser) accepts every embedded SVG.
    cell = library[0]
    page = render_datasheet_html(cell, deck_name)
    blocks = svg_blocks(page)
    expected = 3 if any(c.cv is not None for c in cell.corners) else 2
    assert len(blocks) == expected
    for block in blocks:
        root = ET.fromstring(block)
        assert root.tag.endswith("svg")
    assert "<img" not in page and "<script" not in page
    # each corner appears in the plot legends
    for result in cell.corners:
        assert result.corner in blocks[0]


def test_metrics_table_lists_every_metric_that_applies_with_its_unit(library, deck_name):
    import math

    cell = library[0]
    text = StrictChecker().check(render_datasheet_html(cell, deck_name, plots=False)).plain_text
    for info in METRICS:
        applies = any(not math.isnan(c.metrics.get(info.name, math.nan)) for c in cell.corners)
        assert (f"{info.name} {info.unit}" in text) == applies, info.name


def test_netlist_is_collapsed_and_an_index_links_instead_of_embedding(library, deck_name):
    from celllab.export.datasheet import render_library_html

    page = render_datasheet_html(library[0], deck_name, plots=False)
    assert "<details><summary>SPICE subcircuit" in page
    full = render_library_html(library, deck_name, plots=True)
    index = render_library_html(library, deck_name, plots=True, link=lambda c: f"{c.name}.html")
    assert len(index) < len(full) / 3  # no per-cell plots in the index
    for cell in library:
        assert f'href="{cell.name}.html"' in index


def test_esd_warning_only_for_cells_with_a_gate_on_a_rail(library, deck_name):
    for cell in library:
        page = render_datasheet_html(cell, deck_name, plots=False)
        assert ("tied directly to a rail" in page) == (not cell.esd_safe)


def test_markup_in_names_is_escaped(make_cell, deck_name):
    cell = make_cell(name="evil<script>alert(1)</script>", notes=["a < b & c"])
    page = render_datasheet_html(cell, deck_name, plots=False)
    checker = StrictChecker().check(page)
    assert checker.problems == []
    assert "script" not in checker.tags
    assert "a < b & c" in checker.plain_text


def test_library_page(library, deck_name):
    page = render_library_html(library, deck_name)
    checker = StrictChecker().check(page)
    assert checker.problems == []
    sections = [i for i in checker.ids if i.startswith("cell-")]
    assert len(sections) == len(library)
    for cell in library:
        assert f'href="#{sections[library.index(cell)]}"' in page
    assert " ".join(CAUTION.split()) in checker.plain_text
    assert len(svg_blocks(page)) >= 1 + 2 * len(library)


def test_library_summary_uses_the_chosen_corner(library, deck_name):
    corner = library[0].corners[-1].corner
    page = render_library_html(library, deck_name, corner=corner, plots=False)
    assert f"corner {corner}" in page
    assert StrictChecker().check(page).problems == []


def test_library_summary_defaults_to_the_worst_values(library, deck_name):
    page = render_library_html(library, deck_name, plots=False)
    assert "worst over corners, per metric" in page
    worst = corner_metrics(library[0], "worst")["cap_fF"]
    assert f"<td>{format_value(worst, empty='n/a')}</td>" in page


def test_library_summary_without_a_corner_lists_every_corner(library, deck_name):
    page = render_library_html(library, deck_name, corner=None, plots=False)
    assert "every corner" in page and StrictChecker().check(page).problems == []
    for corner in library[0].corners:
        assert f"<td>{corner.corner}</td>" in page


def test_output_is_reproducible(library, deck_name):
    first = render_datasheet_html(library[0], deck_name)
    assert first == render_datasheet_html(library[0], deck_name)


@pytest.mark.parametrize("plots", [True, False])
def test_writers(tmp_path, library, deck_name, plots):
    one = write_datasheet(tmp_path / "one.html", library[0], deck_name, plots=plots)
    lib = write_library_datasheet(tmp_path / "lib.html", library, deck_name, plots=plots)
    for path in (one, lib):
        assert StrictChecker().check(path.read_text(encoding="utf-8")).problems == []


def test_pdf_datasheet_has_a_text_page_and_a_page_per_plot(library, deck_name):
    import re

    from celllab.export.datasheet import render_datasheet_pdf

    cell = library[0]
    pdf = render_datasheet_pdf(cell, deck_name)
    # Source: PDF 1.4 reference, 3.4 and 3.6.2: a file starts with %PDF-, each page is an
    # object of /Type /Page
    assert pdf.startswith(b"%PDF-")
    pages = len(re.findall(rb"/Type\s*/Page\b", pdf))
    assert pages == 3 + (1 if any(c.cv is not None for c in cell.corners) else 0)
