"""Pareto fronts over 2 or 3 metrics (non-dominated rows; direction of each from ``better``).

A row p dominates q when p is at least as good in every chosen metric and strictly better in
one. Equal rows do not dominate each other, so duplicates on the front are all kept. Rows with
an empty (or NaN) value in a chosen metric cannot be compared and are left out.

2-D: one lexicographic sort and a running minimum, O(n log n).
3-D (and more): rows in lexicographic order can only be dominated by earlier rows, which are
checked in vectorized blocks against the front found so far: O(n log n + n h) for a front of h
rows (h is small for catalog data; an all-front worst case is quadratic).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np
import sqlite_utils

from celllab.catalog import query as q
from celllab.catalog.filters import FIELDS, unknown_name_error
from celllab.columns import RANKED
from celllab.errors import FilterError, Problem

#: Elements per block comparison (bounds the temporary arrays of the 3-D sweep).
_BLOCK_ELEMENTS = 2_000_000


def _mask_2d(v: np.ndarray) -> np.ndarray:
    n = v.shape[0]
    order = np.lexsort((v[:, 1], v[:, 0]))
    a, b = v[order, 0], v[order, 1]
    new_group = np.ones(n, dtype=bool)
    new_group[1:] = a[1:] != a[:-1]
    group = np.cumsum(new_group) - 1
    starts = np.flatnonzero(new_group)
    group_min = b[starts]  # b ascends inside a group of equal a
    running_min = np.minimum.accumulate(b)
    before = np.full(starts.size, np.inf)
    before[1:] = running_min[starts[1:] - 1]  # best b among rows with strictly smaller a
    dominated = (before[group] <= b) | (group_min[group] < b)
    mask = np.empty(n, dtype=bool)
    mask[order] = ~dominated
    return mask


def _dominated_by(cands: np.ndarray, others: np.ndarray) -> np.ndarray:
    """For each candidate row, whether any row of ``others`` dominates it."""
    if others.shape[0] == 0:
        return np.zeros(cands.shape[0], dtype=bool)
    out = np.zeros(cands.shape[0], dtype=bool)
    step = max(1, _BLOCK_ELEMENTS // max(cands.shape[0], 1))
    for s in range(0, others.shape[0], step):
        o = others[s : s + step]
        le = np.ones((cands.shape[0], o.shape[0]), dtype=bool)
        lt = np.zeros_like(le)
        for k in range(cands.shape[1]):
            ck, ok = cands[:, k][:, None], o[:, k][None, :]
            le &= ok <= ck
            lt |= ok < ck
        out |= (le & lt).any(axis=1)
    return out


def _mask_nd(v: np.ndarray) -> np.ndarray:
    n, _ = v.shape
    order = np.lexsort(v.T[::-1])
    s = v[order]
    keep = np.zeros(n, dtype=bool)
    front = s[:0]
    i = 0
    while i < n:
        size = int(max(16, min(1024, _BLOCK_ELEMENTS // max(front.shape[0], 1))))
        block = s[i : i + size]
        alive = np.flatnonzero(~_dominated_by(block, front))
        # a row beaten by a dropped block row is beaten by the front too (transitivity),
        # so the survivors only need checking among themselves
        survivors = block[alive]
        alive = alive[~_dominated_by(survivors, survivors)]
        keep[i + alive] = True
        front = np.concatenate([front, block[alive]])
        i += size
    mask = np.empty(n, dtype=bool)
    mask[order] = keep
    return mask


def pareto_mask(values: np.ndarray) -> np.ndarray:
    """Boolean mask of the non-dominated rows of ``values`` (n, k), every column minimised."""
    v = np.asarray(values, dtype=float)
    if v.ndim != 2 or v.shape[1] < 2:
        raise ValueError("values must be (n, k) with k >= 2")
    if v.shape[0] == 0:
        return np.zeros(0, dtype=bool)
    if np.isnan(v).any():
        raise ValueError("NaN values cannot be compared; drop those rows first")
    # equal rows share their verdict (they never dominate each other): decide each distinct
    # row once; catalogs repeat metric vectors (families, copies), which the sweep pays for
    if v.shape[1] == 2:
        return _mask_2d(v)
    order = np.lexsort(v.T[::-1])
    s = v[order]
    first = np.ones(s.shape[0], dtype=bool)
    first[1:] = (s[1:] != s[:-1]).any(axis=1)
    if first.all():
        return _mask_nd(v)
    group = np.empty(s.shape[0], dtype=np.intp)
    group[order] = np.cumsum(first) - 1
    return _mask_nd(s[first])[group]


def check_pareto_metrics(metrics: Sequence[str]) -> list[str]:
    """The chosen metrics, checked: 2 or 3 distinct numeric columns."""
    metrics = [m.strip() for m in metrics if m.strip()]
    if not 2 <= len(metrics) <= 3 or len(set(metrics)) != len(metrics):
        raise FilterError([Problem("pareto", "metrics", "give 2 or 3 different metrics", metrics)])
    for m in metrics:
        if FIELDS.get(m) != "number" or m not in RANKED:
            raise unknown_name_error(m, 0, m, ("number",), "metric")
    return metrics


def pareto_front(rows: Sequence[dict[str, Any]], metrics: Sequence[str]) -> list[dict[str, Any]]:
    """The non-dominated rows for ``metrics``, best first by the first metric."""
    metrics = check_pareto_metrics(metrics)
    usable = [
        r
        for r in rows
        if all(r.get(m) is not None and not math.isnan(float(r[m])) for m in metrics)
    ]
    if not usable:
        return []
    sign = np.array([RANKED[m].minimize_sign for m in metrics])
    values = np.array([[float(r[m]) for m in metrics] for r in usable]) * sign
    mask = pareto_mask(values)
    idx = np.flatnonzero(mask)
    idx = idx[np.lexsort(values[idx].T[::-1])]
    return [usable[i] for i in idx]


def catalog_pareto(
    db: sqlite_utils.Database,
    metrics: Sequence[str],
    deck: str | None = None,
    corner: str | None = "worst",
    where: str = "",
) -> list[dict[str, Any]]:
    """Pareto front of the filtered catalog rows: only the chosen metrics are read for all rows,
    full rows only for the front. Best first by the first metric (then the others, then name)."""
    metrics = check_pareto_metrics(metrics)
    q.check_deck(db, deck)
    q.check_corner(db, corner, deck)
    sql, params = q.metric_values_sql(metrics, corner, deck, where)
    with q.filter_limits(where):
        raw = [r for r in db.execute(sql, params).fetchall() if None not in r[2:]]
    if not raw:
        return []
    sign = np.array([RANKED[m].minimize_sign for m in metrics])
    values = np.array([r[2:] for r in raw], dtype=float) * sign
    keep = ~np.isnan(values).any(axis=1)
    idx = np.flatnonzero(keep)
    front = idx[pareto_mask(values[idx])]
    keys = [(int(raw[i][0]), str(raw[i][1])) for i in front]
    rows: list[dict[str, Any]] = []
    for start in range(0, len(keys), 400):
        rows += q.fetch_rows(db, *q.keyed_rows_sql(keys[start : start + 400], corner, deck))
    return sorted(
        rows,
        key=lambda r: (
            tuple(float(r[m]) * s for m, s in zip(metrics, sign)),
            r["name"],
            r["deck"],
            r["corner"],
        ),
    )
