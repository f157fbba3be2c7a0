"""``celllab export``: the verb over a real (temporary) catalog."""

from __future__ import annotations

import csv
import io
import json
import math

import jsonschema
import numpy as np
import pytest

from celllab.catalog import open_catalog
from celllab.cli.main import main
from celllab.export import CAUTION
from celllab.physics.netlist import Element, Netlist, solve_impedance
from celllab.records import (
    METRIC_NAMES,
    CellResult,
    CharacterizationRun,
    CornerResult,
    CVCurve,
    FrequencyResponse,
)

DECK = "invented_cli_deck"
CORNERS = {"typ_25C": (25.0, 1.2, 1.0), "slow_125C": (125.0, 1.08, 1.3)}
FREQ_HZ = np.logspace(6, 10, 21)


def _cell(name: str, topology: str, esd_safe: bool, cap_F: float, esr_ohm: float) -> CellResult:
    """An invented cell: series L-R-C circuit, Z(f) from solve_impedance, plausible metrics."""
    netlist = Netlist(
        name,
        (
            Element("L", "esl", "vdd", "a", 4e-12),
            Element("R", "esr", "a", "b", esr_ohm),
            Element("C", "cap", "b", "vss", cap_F),
        ),
    )
    corners = []
    for corner, (temperature, supply, r_factor) in CORNERS.items():
        z = solve_impedance(netlist.scaled({"esr": r_factor}), FREQ_HZ)[0]
        metrics = {m: 1.0 + 0.5 * k for k, m in enumerate(METRIC_NAMES)}
        metrics.update(
            cap_fF=cap_F * 1e15,
            esr_ohm=esr_ohm * r_factor,
            leakage_nA_per_nF=2.0 if esd_safe else 40.0 * r_factor,
            srf_is_bound=0.0,
            bandwidth_is_bound=0.0,
        )
        cv = CVCurve(np.linspace(-1, 1, 5), np.full(5, cap_F), supply, cap_F)
        corners.append(
            CornerResult(
                corner, temperature, supply, metrics, FrequencyResponse(FREQ_HZ.copy(), z), cv, []
            )
        )
    return CellResult(
        name=name,
        cell_hash=f"hash-{name}",
        family="fam",
        topology=topology,
        oxide="core",
        geometry={"fingers": 2},
        area_um2=5.76,
        width_sites=2,
        height_rows=1,
        gate_area_um2=4.0,
        esd_safe=esd_safe,
        corners=corners,
        netlist=netlist,
    )


@pytest.fixture
def catalog_path(tmp_path):
    cells = [
        _cell("DC_XCP_2", "cross_coupled", True, 60e-15, 30.0),
        _cell("DC_NMOS_4", "nmos_inversion", False, 150e-15, 12.0),
        _cell("DC_MOM_3", "mom", True, 40e-15, 3.0),
    ]
    run = CharacterizationRun(
        DECK, "deckhash" * 4, {"name": DECK}, "models-test", list(CORNERS), cells
    )
    path = tmp_path / "cat.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(run)
    return path


def export(catalog_path, *args: str) -> int:
    return main(["export", *args, "--catalog", str(catalog_path)])


def read_csv(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(line for line in io.StringIO(text) if not line.startswith("#")))


def test_csv_to_stdout_matches_the_catalog(catalog_path, capsys):
    # Source: stdlib csv reader; exact float equality with the catalog's rows ("exact" text).
    assert export(catalog_path, "csv", "--precision", "exact") == 0
    rows = read_csv(capsys.readouterr().out)
    with open_catalog(catalog_path) as cat:
        expected = {r["name"]: r for r in cat.query(corner="worst")}
    assert {r["name"] for r in rows} == set(expected)
    for row in rows:
        for metric in METRIC_NAMES:
            value = expected[row["name"]][metric]
            if value is None or (isinstance(value, float) and math.isnan(value)):
                assert row[metric] in ("", "nan")
            else:
                assert float(row[metric]) == value


def test_csv_every_corner_filtered(catalog_path, tmp_path):
    out = tmp_path / "picked.csv"
    assert (
        export(catalog_path, "csv", "--corner", "all", "--where", "esd_safe", "--out", str(out))
        == 0
    )
    text = out.read_text(encoding="utf-8")
    assert CAUTION in text
    rows = read_csv(text)
    assert len(rows) == 2 * len(CORNERS)
    assert {r["name"] for r in rows} == {"DC_XCP_2", "DC_MOM_3"}
    assert {r["corner"] for r in rows} == set(CORNERS)


def test_cells_option_and_suggestions(catalog_path, tmp_path, capsys):
    out = tmp_path / "one.csv"
    assert (
        export(catalog_path, "csv", "--cells", "DC_MOM_3", "--no-comments", "--out", str(out)) == 0
    )
    assert [r["name"] for r in read_csv(out.read_text())] == ["DC_MOM_3"]
    bad = tmp_path / "bad.csv"
    assert export(catalog_path, "csv", "--cells", "DC_MOM3", "--out", str(bad)) == 2
    err = capsys.readouterr().err
    assert "DC_MOM3" in err and "did you mean 'DC_MOM_3'" in err
    assert "Traceback" not in err
    assert not bad.exists()


def test_json_validates_against_the_schema_export(catalog_path, tmp_path):
    # Source: jsonschema Draft 2020-12 validator on the exported schema.
    schema_file, data_file = tmp_path / "s.json", tmp_path / "d.json"
    assert main(["export", "schema", "--out", str(schema_file)]) == 0
    assert export(catalog_path, "json", "--out", str(data_file)) == 0
    schema = json.loads(schema_file.read_text())
    document = json.loads(data_file.read_text())
    jsonschema.Draft202012Validator(schema).validate(document)
    assert document["deck"] == DECK
    assert {c["name"] for c in document["cells"]} == {"DC_XCP_2", "DC_NMOS_4", "DC_MOM_3"}


def test_touchstone_folder_read_by_skrf(catalog_path, tmp_path):
    # Source: scikit-rf Touchstone reader; rel 1e-8 against the catalog's stored Z(f).
    skrf = pytest.importorskip("skrf")
    folder = tmp_path / "ts"
    assert export(catalog_path, "touchstone", "--out", f"{folder}/") == 0
    files = sorted(p.name for p in folder.iterdir())
    assert len(files) == 3 * len(CORNERS)
    with open_catalog(catalog_path) as cat:
        cell = cat.cell("DC_NMOS_4")
    network = skrf.Network(str(folder / "DC_NMOS_4_slow_125C.s1p"))
    stored = cell.corner("slow_125C").response.z_ohm
    assert np.all(np.abs(network.z[:, 0, 0] - stored) <= 1e-8 * np.abs(stored))


def test_touchstone_needs_a_folder_for_several_files(catalog_path, tmp_path, capsys):
    target = tmp_path / "one.s1p"
    assert export(catalog_path, "touchstone", "--out", str(target)) == 2
    assert "output folder" in capsys.readouterr().err
    assert not target.exists()
    assert (
        export(
            catalog_path,
            "touchstone",
            "--cells",
            "DC_MOM_3",
            "--corner",
            "typ_25C",
            "--out",
            str(target),
            "--reference-ohm",
            "50",
        )
        == 0
    )
    assert "# Hz Z RI R 50" in target.read_text()


def test_spice_library_and_folder(catalog_path, tmp_path):
    library = tmp_path / "decaps.lib"
    assert export(catalog_path, "spice", "--deck", DECK, "--out", str(library)) == 0
    text = library.read_text()
    assert sorted(line.split()[1] for line in text.splitlines() if line.startswith(".subckt")) == [
        "DC_MOM_3",
        "DC_NMOS_4",
        "DC_XCP_2",
    ]
    assert "estimate" in text
    folder = tmp_path / "sp"
    folder.mkdir()
    assert export(catalog_path, "spice", "--cells", "DC_XCP_2", "--out", str(folder)) == 0
    assert [p.name for p in folder.iterdir()] == ["DC_XCP_2.sp"]


def test_datasheets(catalog_path, tmp_path):
    single = tmp_path / "one.html"
    assert export(catalog_path, "datasheet", "--cells", "DC_XCP_2", "--out", str(single)) == 0
    assert "DC_XCP_2" in single.read_text() and "<svg" in single.read_text()
    folder = tmp_path / "sheets"
    assert export(catalog_path, "datasheet", "--no-plots", "--out", f"{folder}/") == 0
    assert sorted(p.name for p in folder.iterdir()) == [
        "DC_MOM_3.html",
        "DC_NMOS_4.html",
        "DC_XCP_2.html",
        "index.html",
    ]
    assert "<svg" not in (folder / "index.html").read_text()


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["csv", "--corner", "typical"], "allowed: typ_25C, slow_125C"),
        (["csv", "--deck", "no_such_deck"], "no_such_deck"),
        (["csv", "--where", "leakage_nA_per_nF <<< 3"], "leakage"),
        (["spice", "--segments", "0"], "--segments"),
        (["touchstone", "--reference-ohm", "-5"], "--reference-ohm"),
    ],
)
def test_bad_input_exits_2_without_traceback(catalog_path, capsys, args, message):
    assert export(catalog_path, *args) == 2
    err = capsys.readouterr().err
    assert message in err
    assert "Traceback" not in err


def test_missing_catalog(tmp_path, capsys):
    assert main(["export", "csv", "--catalog", str(tmp_path / "none.sqlite")]) == 2
    assert "no catalog file" in capsys.readouterr().err
    assert not (tmp_path / "none.sqlite").exists()


def test_schema_to_stdout(capsys):
    assert main(["export", "schema"]) == 0
    schema = json.loads(capsys.readouterr().out)
    jsonschema.Draft202012Validator.check_schema(schema)


def test_help_mentions_every_format(capsys):
    with pytest.raises(SystemExit):
        main(["export", "--help"])
    out = capsys.readouterr().out
    for name in ("csv", "json", "schema", "spice", "touchstone", "datasheet"):
        assert name in out


def test_csv_precision_option(catalog_path, capsys):
    assert main(["export", "csv", "--catalog", str(catalog_path), "--corner", "all"]) == 0
    default = capsys.readouterr().out
    assert "# numbers: 6 significant digits" in default
    assert main(["export", "csv", "--catalog", str(catalog_path), "--precision", "3"]) == 0
    three = capsys.readouterr().out
    assert "# numbers: 3 significant digits" in three
    rows = [ln.split(",") for ln in three.splitlines() if not ln.startswith("#")][1:]
    assert rows
    assert main(["export", "csv", "--catalog", str(catalog_path), "--precision", "exact"]) == 0
    assert "exact" in capsys.readouterr().out
    assert main(["export", "csv", "--catalog", str(catalog_path), "--precision", "40"]) == 2
    err = capsys.readouterr().err
    assert "--precision" in err and "1 to 17" in err and "Traceback" not in err


def test_datasheet_folder_index_links_and_pdf_needs_a_file(catalog_path, tmp_path, capsys):
    out = tmp_path / "sheets"
    assert main(["export", "datasheet", "--catalog", str(catalog_path), "--out", f"{out}/"]) == 0
    index = (out / "index.html").read_text()
    pages = sorted(p.name for p in out.glob("*.html") if p.name != "index.html")
    assert len(pages) == 3 and all(f'href="{p}"' in index for p in pages)
    assert "<svg" not in index.split("<h2>Summary")[1].split("<figure>")[0]  # no cell sections
    capsys.readouterr()
    assert main(["export", "datasheet", "--catalog", str(catalog_path), "--pdf"]) == 2
    assert "--out" in capsys.readouterr().err
    assert main(["export", "datasheet", "--catalog", str(catalog_path), "--pdf",
                 "--out", f"{tmp_path / 'pdfs'}/"]) == 0
    assert len(list((tmp_path / "pdfs").glob("*.pdf"))) == 3
