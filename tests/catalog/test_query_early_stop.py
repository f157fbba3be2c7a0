"""The ranked query that stops early on a metric index gives the plain query's rows exactly.

Old-versus-new equivalence on a random catalog with many ties and empty values (common
practice, no source: a faster plan must not change a result). The plain query (one ORDER BY
over every row, empty values last, ties by name, deck, corner) is the reference.
"""

from __future__ import annotations

import sqlite3

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from celllab.catalog import open_catalog
from celllab.catalog import query as q
from celllab.catalog.schema import INDEXED_METRICS

from .conftest import make_run

RANKED_BY = [*INDEXED_METRICS, "esl_pH", "area_um2"]
FILTERS = ["", "esd_safe", "leakage_nA_per_nF <= 50 and not esd_safe", "oxide = io",
           "cap_fF > 1e9"]


@pytest.fixture(scope="module")
def tied_catalog(tmp_path_factory):
    path = tmp_path_factory.mktemp("early") / "tied.sqlite"
    catalog = open_catalog(path)
    catalog.store_run(make_run(n_cells=40, seed=3))
    catalog.store_run(make_run(n_cells=30, seed=4, deck_version=2))  # supersedes: history kept
    catalog.store_run(make_run(n_cells=25, seed=5, deck_name="invented_m5"))
    catalog.close()
    con = sqlite3.connect(path)
    with con:  # coarse values (many ties) and empty values in every ranked metric
        for table in ("corner_metrics", "corner_extremes"):
            for k, m in enumerate(INDEXED_METRICS):
                con.execute(f'UPDATE {table} SET "{m}" = round("{m}" / 4.0) * 4.0')
                con.execute(f'UPDATE {table} SET "{m}" = NULL WHERE (cell_id + {k}) % 6 = 0')
    con.close()
    catalog = open_catalog(path)
    yield catalog
    catalog.close()


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    corner=st.sampled_from(["worst", "best", "typ_25C", "slow_125C", None]),
    order_by=st.sampled_from(RANKED_BY),
    descending=st.sampled_from([None, True, False]),
    limit=st.integers(1, 40),
    offset=st.integers(0, 120),
    where=st.sampled_from(FILTERS),
    deck=st.sampled_from([None, "invented_n7x", "invented_m5"]),
    current_only=st.booleans(),
)
def test_early_stop_equals_plain_query(
    tied_catalog, corner, order_by, descending, limit, offset, where, deck, current_only
):
    db = tied_catalog._db
    plain = q.fetch_rows(
        db,
        *q.ranked_query_sql(corner, deck, where, order_by, descending, limit, offset, current_only),
    )
    fast = tied_catalog.query(deck, corner, where, order_by, descending, limit, offset, current_only)
    assert fast == plain


def test_early_stop_reads_the_metric_index(tied_catalog):
    db = tied_catalog._db
    for corner in ("worst", "typ_25C"):
        sql, params = q._early_stop_sql(
            db, corner, None, "", "cap_density_fF_per_um2", None, 20, 0, True
        )
        plan = " ".join(r[3] for r in db.execute("EXPLAIN QUERY PLAN " + sql, params))
        assert "USING INDEX corner_" in plan and "cap_density_fF_per_um2>" in plan, plan
        assert q.metric_index(corner, "cap_density_fF_per_um2") in plan


def test_ranking_indexes_are_added_to_an_existing_catalog(tmp_path):
    path = tmp_path / "old.sqlite"
    open_catalog(path).close()
    con = sqlite3.connect(path)
    con.execute("DROP INDEX corner_metrics_by_corner_cap_fF")
    con.commit()
    con.close()
    with open_catalog(path) as catalog:
        names = {r[0] for r in catalog._db.execute("SELECT name FROM sqlite_master")}
    assert "corner_metrics_by_corner_cap_fF" in names
