"""The column registry: one definition of units, better direction and worst/best over corners."""

from __future__ import annotations

import math
import sqlite3

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.columns import (
    AGGREGATE_CORNERS,
    CELL_COLUMNS,
    COLUMNS,
    CORNER_COLUMNS,
    METRICS,
    RANKED,
    TEXT_COLUMNS,
    best_first_descending,
    unit_of,
)
from celllab.records import (
    METRIC_NAMES,
    CellResult,
    CornerResult,
    FrequencyResponse,
    corner_metrics,
)

CORNER_VALUES = st.lists(st.one_of(st.none(), st.just(math.nan),
                                   st.floats(-1e6, 1e6, allow_nan=False)), min_size=1, max_size=6)


def test_every_name_once_with_its_unit_in_the_name() -> None:
    names = [*TEXT_COLUMNS, *METRIC_NAMES, *CELL_COLUMNS, *CORNER_COLUMNS]
    assert len(names) == len(set(names)) == len(COLUMNS)
    # Common practice, no source: the unit is spelled in the column name (cap_fF, leakage_nA).
    tags = {"fF": "fF", "fF/um^2": "fF_per_um2", "ohm": "ohm", "GHz": "GHz", "pH": "pH", "ps": "ps",
            "nA": "nA", "nA/nF": "nA_per_nF", "MV/cm": "MV_per_cm", "FIT/mm^2": "fit_per_mm2", "V": "V",
            "um^2": "um2", "sites": "sites", "rows": "rows", "degC": "C", "ns": "ns", "mA": "mA", "mW": "mW",
            "%": "pct"}
    for column in COLUMNS.values():
        if column.kind == "number":
            assert column.name.endswith(tags[column.unit]), column.name
    assert all(c.better is not None for c in RANKED.values())
    assert all(m.compute is not None for m in METRICS)  # the engine computes every metric from here
    assert all(c.better is None for c in (*TEXT_COLUMNS.values(), *CORNER_COLUMNS.values()))


@pytest.mark.parametrize("column", METRICS, ids=lambda c: c.name)
def test_worst_is_the_least_favourable_corner(column) -> None:
    # Common practice, no source: worst = min of a higher-is-better metric, max otherwise.
    values = [3.0, math.nan, 1.0, 2.0]
    assert column.over_corners(values, "worst") == (1.0 if column.better == "higher" else 3.0)
    assert column.over_corners(values, "best") == (3.0 if column.better == "higher" else 1.0)
    assert math.isnan(column.over_corners([math.nan, None], "worst"))
    assert column.improved(1.0, 2.0) == (column.better == "higher")


@settings(max_examples=60, deadline=None)
@given(values=CORNER_VALUES)
def test_sql_aggregate_and_python_agree(values) -> None:
    # Source: SQLite's MIN()/MAX() aggregates skip NULL (sqlite.org/lang_aggfunc.html); the
    # catalog stores NaN as NULL, so both definitions must give the same extreme; exact
    db = sqlite3.connect(":memory:")
    db.execute("CREATE TABLE t (v REAL)")
    db.executemany("INSERT INTO t VALUES (?)",
                   [(None if v is None or math.isnan(v) else v,) for v in values])
    for column in (METRICS[0], METRICS[3]):  # one higher-, one lower-is-better metric
        for extreme in AGGREGATE_CORNERS:
            (sql,) = db.execute(f"SELECT {column.sql_aggregate(extreme)}(v) FROM t").fetchone()
            python = column.over_corners(values, extreme)
            assert (sql is None and math.isnan(python)) or sql == python


def test_bad_extreme_is_refused() -> None:
    with pytest.raises(ValueError, match="allowed: worst, best"):
        METRICS[0].sql_aggregate("typical")  # type: ignore[arg-type]


def test_directions_and_units() -> None:
    assert best_first_descending("cap_density_fF_per_um2") and not best_first_descending("esr_ohm")
    assert not best_first_descending("name") and not best_first_descending("temperature_C")
    assert unit_of("temperature_C") == "degC" and unit_of("supply_V") == "V" and unit_of("name") == ""
    assert RANKED["esr_ohm"].minimize_sign == 1.0 and RANKED["cap_fF"].minimize_sign == -1.0
    assert RANKED["cap_fF"].arrow == "↑" and RANKED["esl_pH"].arrow == "↓"


def _cell(rows: list[dict[str, float]]) -> CellResult:
    response = FrequencyResponse(np.array([1.0]), np.array([1.0 + 0j]))
    corners = [CornerResult(f"c{i}", 25.0, 1.0, {**{m: math.nan for m in METRIC_NAMES}, **r}, response)
               for i, r in enumerate(rows)]
    return CellResult("x", "h", "", "mom", "core", {}, 1.0, 1, 1, 1.0, True, corners)


def test_corner_metrics_of_a_record() -> None:
    cell = _cell([{"cap_fF": 5.0, "esr_ohm": 1.0}, {"cap_fF": 4.0, "esr_ohm": 2.0}])
    assert corner_metrics(cell, "c1")["cap_fF"] == 4.0
    worst, best = corner_metrics(cell, "worst"), corner_metrics(cell, "best")
    assert (worst["cap_fF"], worst["esr_ohm"]) == (4.0, 2.0)
    assert (best["cap_fF"], best["esr_ohm"]) == (5.0, 1.0)
    assert math.isnan(worst["srf_GHz"])
    with pytest.raises(KeyError):
        corner_metrics(cell, "c9")


ADDED_METRIC = '''    Column("cap_nF", "nF", "low-frequency capacitance in nF", "higher",
           compute=lambda f: from_si(f.c_lf_F, "nF")),
'''

ADDED_METRIC_CHECK = '''
import json, pathlib, sys
import celllab.columns
assert pathlib.Path(celllab.columns.__file__).is_relative_to(sys.argv[1]), celllab.columns.__file__
from celllab.catalog import open_catalog
from celllab.catalog.filters import describe_language
from celllab.cells import CellSpec
from celllab.deck import load_deck
from celllab.engine import characterize
from celllab.export.csv import render_csv
from celllab.export.schema import export_json_schema
from celllab.tui.screens.catalog import ALL_COLUMNS

deck = load_deck(pathlib.Path(sys.argv[2]) / "process_decks" / "lumen130.toml")
run = characterize(deck, [CellSpec(name="t", topology="nmos_inversion", width_sites=8)], corners=["typ_25C"])
with open_catalog(pathlib.Path(sys.argv[1]) / "c.sqlite") as catalog:
    catalog.store_run(run)
    rows = catalog.query(where="cap_nF > 0", order_by="cap_nF")
print(json.dumps({
    "metric": run.cells[0].corners[0].metrics["cap_nF"], "cap_fF": run.cells[0].corners[0].metrics["cap_fF"],
    "row": rows[0]["cap_nF"], "csv": render_csv(rows).splitlines()[:4],
    "schema": "cap_nF" in json.dumps(export_json_schema()), "help": "cap_nF" in describe_language(),
    "tui": "cap_nF" in ALL_COLUMNS,
}))
'''


def test_a_metric_added_in_columns_alone_reaches_every_consumer(tmp_path) -> None:
    """Adding a metric edits celllab/columns.py only: engine, catalog, filter, CSV, JSON schema, UI."""
    import json
    import shutil
    import subprocess
    import sys
    from pathlib import Path

    import celllab

    package = Path(celllab.__file__).parent
    copy = tmp_path / "celllab"
    shutil.copytree(package, copy, ignore=shutil.ignore_patterns("__pycache__"))
    columns = copy / "columns.py"
    text = columns.read_text(encoding="utf-8")
    anchor = '    Column("pulse_vbd_V"'
    assert text.count(anchor) == 1
    columns.write_text(text.replace(anchor, ADDED_METRIC + anchor), encoding="utf-8")
    out = subprocess.run([sys.executable, "-c", ADDED_METRIC_CHECK, str(tmp_path), str(package.parent)],
                         capture_output=True, text=True, cwd=tmp_path, env={"PYTHONPATH": str(tmp_path), "PATH": ""})
    assert out.returncode == 0, out.stderr
    got = json.loads(out.stdout)
    # Source: SI prefixes, 1 nF = 1e6 fF (BIPM SI Brochure, table 7); rel 1e-12
    assert got["metric"] == pytest.approx(got["cap_fF"] * 1e-6, rel=1e-12)
    assert got["row"] == pytest.approx(got["metric"], rel=1e-12)
    assert any("cap_nF [nF]" in line for line in got["csv"]) and any("cap_nF" in line for line in got["csv"])
    assert got["schema"] and got["help"] and got["tui"]


def test_a_corner_result_is_read_through_its_metrics() -> None:
    import numpy as np

    from celllab.columns import is_lower_bound
    from celllab.records import CornerResult, FrequencyResponse

    metrics = {m: 0.0 for m in METRIC_NAMES} | {"srf_GHz": 1000.0, "srf_is_bound": 1.0}
    c = CornerResult("a", 25.0, 1.2, metrics, FrequencyResponse(np.ones(2), np.ones(2)))
    assert is_lower_bound(c, "srf_GHz") and not is_lower_bound(c, "bandwidth_GHz")
    assert not is_lower_bound({"srf_GHz": 1.0}, "srf_GHz")  # a row without the flag


def test_worst_and_best_are_bounds_only_when_the_chosen_corner_is_one() -> None:
    import numpy as np

    from celllab.records import CellResult, CornerResult, FrequencyResponse, corner_bounds

    def corner(name: str, srf: float, bound: bool) -> CornerResult:
        metrics = {m: 0.0 for m in METRIC_NAMES} | {"srf_GHz": srf, "srf_is_bound": float(bound)}
        return CornerResult(name, 25.0, 1.2, metrics, FrequencyResponse(np.ones(2), np.ones(2)))

    cell = CellResult("c", "h", "f", "mom", "core", {}, 1.0, 1, 1, 1.0, True,
                      [corner("a", 1000.0, True), corner("b", 400.0, False)])
    # srf: higher is better, so worst is corner b's resolved 400 GHz, best corner a's bound
    assert corner_bounds(cell, "worst") == frozenset()
    assert corner_bounds(cell, "best") == {"srf_GHz"}
    assert corner_bounds(cell, "a") == {"srf_GHz"} and corner_bounds(cell, "b") == frozenset()
