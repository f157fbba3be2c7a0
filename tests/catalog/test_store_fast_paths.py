"""Equivalence checks: the catalog's batch paths for storing a run against per-item references.

* ``validate.unchecked_corners`` checks all corners of a run at once; ``validate_run`` then runs
  the per-value checks only on the corners it could not clear. The reference checks every corner
  one by one (``unchecked_corners`` replaced by "all of them"). Both must refuse the same runs
  with the same messages, on generated runs full of bad values.
* ``store.prepare_cells`` converts the numbers of all corners at once, writes the JSON of
  flags, notes and circuits directly, and ``result_digest`` hashes one joined string. The
  reference is the per-value encoding through ``json.dumps`` / ``records.netlist_to_dict`` and
  the part-by-part digest as first written, kept below: the rows and the digests must be the
  same bit for bit (stored catalogs keep their digests).
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Iterable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import replace
from pathlib import Path
from types import MappingProxyType, SimpleNamespace
from typing import Any
from unittest import mock

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from celllab.catalog import open_catalog, store, validate
from celllab.catalog.store import (
    _DIGEST_TEXT_KEYS,
    _F64,
    _NUMBER_CELL_COLUMNS,
    _TEXT_CELL_COLUMNS,
    PreparedCell,
    _circuit_json,
    _column_value,
    _json_default,
    encode_c128,
    encode_f64,
    prepare_cell,
    prepare_cells,
    result_digest,
    stored_result_digest,
    validate_run,
)
from celllab.display import nan_to_none
from celllab.errors import CatalogError
from celllab.records import (
    CELL_COLUMNS,
    METRIC_NAMES,
    CellResult,
    CharacterizationRun,
    CVCurve,
    netlist_to_dict,
)

from .conftest import make_run

# --------------------------------------------------------------------------- validation


@contextmanager
def _every_corner_checked() -> Iterator[None]:
    def every(cells: Any, run_corners: Any) -> list[list[int]]:
        return [list(range(len(c.corners))) for c in cells]

    with mock.patch.object(validate, "unchecked_corners", every):
        yield


def _outcome(run: CharacterizationRun) -> str | tuple[str, str] | None:
    try:
        validate_run(run)
    except CatalogError as exc:
        return str(exc)
    except Exception as exc:  # the same crash on both paths counts as the same outcome
        return ("raised", type(exc).__name__)
    return None


def _both(run: CharacterizationRun) -> tuple[Any, Any]:
    fast = _outcome(run)
    with _every_corner_checked():
        reference = _outcome(run)
    return fast, reference


_NUMBERS = st.sampled_from([
    math.nan, None, math.inf, -math.inf, 0.0, -0.0, -1.0, 1e-30, 1.0, 25.0, 1e5, 1e16, 1e20,
    np.float64(2.5), np.float64(math.nan), np.float32(1.5), 3, -2, True, np.bool_(False), "12.5",
    b"\x00", [1.0], complex(1, 0),
])
_FLAG_LISTS = st.sampled_from([
    [], ["empty: cap_fF, esr_ohm"], ["leakage_nA_per_nF beyond range"], ["leakage_nA empty"],
    ["xcap_fF", "cap_fFx"], ["(cap_fF)", "tau_ps."], ["é" + "cap_fF"], [3], "cap_fF", ("cap_fF",),
    ["cap_fF " + "x" * 2100], ["srf_GHz\nbandwidth_GHz"],
    ["esd_not_run: " + ", ".join(METRIC_NAMES)],
])
_ARRAYS = st.sampled_from([
    np.array([1e6, 1e7, 1e8]), np.array([0.0, 1e7, 1e8]), np.array([-1.0, 1.0, 2.0]),
    np.array([1e6, math.nan, 1e8]), np.array([1e6, math.inf, 1e8]), np.array([1, 2, 3]),
    np.array([1, 2, 3], dtype=np.uint8), np.array([1 + 1j, 2, 3]), np.array([1e6, 1e7]),
    np.array([[1e6, 1e7, 1e8]]), np.array([True, False, True]), np.array(["a", "b", "c"]),
    np.empty(0), [1e6, 1e7, 1e8], np.array([1e6, 1e7, 1e8], dtype=np.float32),
    np.array([1e6, 1e7, complex(math.inf, 0)]),
])


@st.composite
def _changes(draw: st.DrawFn) -> list[tuple[int, int, str, Any]]:
    """Changes to the corners of a 3-cell x 3-corner run: (cell, corner, what, value)."""
    what = st.sampled_from(["metric", "flags", "corner", "temperature_C", "supply_V", "freq_Hz",
                            "z_ohm", "bias_V", "cap_F", "operating", "cv", "drop_metric",
                            "extra_metric", "metrics_mapping", "empty_with_flag"])
    out = []
    for _ in range(draw(st.integers(0, 6))):
        kind = draw(what)
        if kind == "metric":
            value: Any = (draw(st.sampled_from(METRIC_NAMES)), draw(_NUMBERS))
        elif kind == "flags":
            value = draw(_FLAG_LISTS)
        elif kind == "corner":
            value = draw(st.sampled_from(["slow_125C", "not_a_run_corner", "bad name", 7, ""]))
        elif kind in ("freq_Hz", "z_ohm", "bias_V", "cap_F"):
            value = draw(_ARRAYS)
        elif kind in ("drop_metric", "extra_metric"):
            value = draw(st.sampled_from(METRIC_NAMES))
        elif kind == "empty_with_flag":  # a flag that names the metric, or only nearly
            m = draw(st.sampled_from(METRIC_NAMES))
            flag = draw(st.sampled_from([f"{m} empty", f"x{m}", f"{m}_", f"{m}x", m[:-1], f"é{m}",
                                         f"({m})", f"a.{m}-b", f"{m}\n", f"{m} " + "x" * 2100]))
            value = (m, draw(st.sampled_from([math.nan, None, np.float64(math.nan)])),
                     draw(st.sampled_from([[flag], ["other", flag], [flag, 3]])))
        else:
            value = draw(_NUMBERS)
        out.append((draw(st.integers(0, 2)), draw(st.integers(0, 2)), kind, value))
    return out


def _changed(run: CharacterizationRun, changes: list[tuple[int, int, str, Any]]) -> CharacterizationRun:
    cells = [replace(c, corners=list(c.corners)) for c in run.cells]
    for i, j, kind, value in changes:
        c = cells[i].corners[j]
        metrics = dict(c.metrics)
        if kind == "metric":
            metrics[value[0]] = value[1]
            c = replace(c, metrics=metrics)
        elif kind == "empty_with_flag":
            c = replace(c, metrics={**metrics, value[0]: value[1]}, flags=value[2])
        elif kind == "drop_metric":
            metrics.pop(value, None)
            c = replace(c, metrics=metrics)
        elif kind == "extra_metric":
            c = replace(c, metrics={**metrics, value + "_x": 1.0})
        elif kind == "metrics_mapping":  # a mapping that is not a plain dict
            c = replace(c, metrics=MappingProxyType(metrics))
        elif kind in ("flags", "corner", "temperature_C", "supply_V"):
            c = replace(c, **{kind: value})
        elif kind in ("freq_Hz", "z_ohm"):
            c = replace(c, response=replace(c.response, **{kind: value}))
        elif kind == "cv":
            c = replace(c, cv=None)
        elif c.cv is not None and kind in ("bias_V", "cap_F"):
            c = replace(c, cv=replace(c.cv, **{kind: value}))
        elif c.cv is not None:
            c = replace(c, cv=CVCurve(c.cv.bias_V, c.cv.cap_F, value, c.cv.operating_cap_F))
        cells[i].corners[j] = c
    return replace(run, cells=cells)


_BASE = make_run(n_cells=3)


@settings(max_examples=400, deadline=None, derandomize=True, database=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(_changes(), st.sampled_from([1, 2, 1024]))
def test_batch_validation_gives_the_per_corner_messages(changes: list[Any], batch: int) -> None:
    run = _changed(_BASE, changes)
    with mock.patch.object(validate, "BATCH_CELLS", batch):
        fast, reference = _both(run)
    assert fast == reference


def test_batch_validation_on_clean_and_spoilt_runs() -> None:
    run = make_run(n_cells=40)  # mom cells carry empty metrics with flags naming them
    assert _both(run) == (None, None)
    assert validate.unchecked_corners(run.cells, set(run.corners)) == [[] for _ in run.cells]
    spoilt = _changed(run, [(0, 0, "metric", ("cap_fF", -1.0)), (2, 1, "metric", ("tau_ps", None)),
                            (1, 2, "z_ohm", np.array([1.0, math.inf] * 6))])
    fast, reference = _both(spoilt)
    assert fast == reference and "cap_fF" in fast and "tau_ps" in fast and "z_ohm" in fast
    assert validate.unchecked_corners(spoilt.cells, set(run.corners))[:3] == [[0], [2], [1]]


# --------------------------------------------------------------------------- rows and digests
# The reference: rows encoded value by value and the digest fed part by part, as first written.


def _feed(h: Any, data: bytes) -> None:
    h.update(len(data).to_bytes(8, "little"))
    h.update(data)


def _f64(values: Iterable[Any]) -> bytes:
    return np.array([math.nan if v is None else v for v in values], dtype=_F64).tobytes()


def reference_digest(cell_row: Mapping[str, Any], corner_rows: Iterable[Mapping[str, Any]],
                     response_rows: Iterable[Mapping[str, Any]],
                     cv_rows: Iterable[Mapping[str, Any]]) -> str:
    h = hashlib.sha256()
    _feed(h, json.dumps([cell_row[k] for k in _DIGEST_TEXT_KEYS]).encode())
    _feed(h, _f64(_column_value(k, cell_row.get(k)) for k in _NUMBER_CELL_COLUMNS))
    text_cells = [cell_row.get(k) for k in _TEXT_CELL_COLUMNS]
    if any(v is not None for v in text_cells):
        _feed(h, json.dumps(text_cells).encode())
    parts: dict[str, list[bytes]] = {}
    for row in corner_rows:
        parts[row["corner"]] = [
            json.dumps([row["corner"], row["flags_json"]]).encode(),
            _f64([row["temperature_C"], row["supply_V"], *(row.get(m) for m in METRIC_NAMES)]),
        ]
    for row in response_rows:
        parts[row["corner"]] += [b"response", bytes(row["freq_Hz"]), bytes(row["z_ohm"])]
    for row in cv_rows:
        parts[row["corner"]] += [b"cv", bytes(row["bias_V"]), bytes(row["cap_F"]),
                                 _f64([nan_to_none(row["operating_bias_V"]),
                                       nan_to_none(row["operating_cap_F"])])]
    for corner in sorted(parts):
        for part in parts[corner]:
            _feed(h, part)
    return h.hexdigest()


def canonical_json(value: Any) -> str:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), default=_json_default,
                      allow_nan=True)


def reference_circuit_json(netlist: Any, corner: str) -> str | None:
    if isinstance(netlist, Mapping):
        netlist = netlist.get(corner)
    return None if netlist is None else canonical_json(netlist_to_dict(netlist))


def reference_prepare(cell: CellResult) -> PreparedCell:
    cell_row: dict[str, Any] = {
        "name": cell.name, "cell_hash": cell.cell_hash, "family": cell.family,
        "topology": cell.topology, "oxide": cell.oxide,
        "geometry_json": canonical_json(cell.geometry),
        "notes_json": canonical_json(list(cell.notes)),
        **{k: _column_value(k, getattr(cell, k)) for k in CELL_COLUMNS},
    }
    corner_rows, response_rows, cv_rows = [], [], []
    for c in cell.corners:
        corner_rows.append({
            "corner": c.corner, "temperature_C": nan_to_none(c.temperature_C),
            "supply_V": nan_to_none(c.supply_V),
            **{m: nan_to_none(c.metrics[m]) for m in METRIC_NAMES},
            "flags_json": canonical_json(list(c.flags)),
        })
        response_rows.append({
            "corner": c.corner, "n_freq": int(np.size(c.response.freq_Hz)),
            "freq_Hz": encode_f64(c.response.freq_Hz), "z_ohm": encode_c128(c.response.z_ohm),
            "circuit_json": reference_circuit_json(cell.netlist, c.corner),
        })
        if c.cv is not None:
            cv_rows.append({
                "corner": c.corner, "n_bias": int(np.size(c.cv.bias_V)),
                "bias_V": encode_f64(c.cv.bias_V), "cap_F": encode_f64(c.cv.cap_F),
                "operating_bias_V": float(c.cv.operating_bias_V),
                "operating_cap_F": float(c.cv.operating_cap_F),
            })
    digest = reference_digest(cell_row, corner_rows, response_rows, cv_rows)
    return PreparedCell(cell.name, cell.cell_hash, cell_row, corner_rows, response_rows, cv_rows, digest)


def _same(fast: PreparedCell, reference: PreparedCell) -> None:
    assert fast.digest == reference.digest
    for a, b in [(fast.cell_row, reference.cell_row),
                 *zip(fast.corner_rows, reference.corner_rows, strict=True),
                 *zip(fast.response_rows, reference.response_rows, strict=True),
                 *zip(fast.cv_rows, reference.cv_rows, strict=True)]:
        assert list(a) == list(b)  # the same columns in the same order
        for k in a:  # the same values bit for bit (NaN never stored: it is None)
            assert type(a[k]) is type(b[k]) and (a[k] == b[k] or (a[k] != a[k] and b[k] != b[k])), k
            if isinstance(a[k], float):
                assert math.copysign(1, a[k]) == math.copysign(1, b[k]), k
    assert (fast.name, fast.cell_hash) == (reference.name, reference.cell_hash)


_TEXTS = st.lists(st.sampled_from(["plain", "é ü", "quote \" and \\", "tab\tnew\nline", "\x00\x1b[31m",
                                   "😀", "", "cap_fF empty"]), max_size=3)
_ODD_VALUES = st.sampled_from([
    math.nan, -math.nan, None, 0.0, -0.0, math.inf, -math.inf, 5e-324, 1.7976931348623157e308,
    np.float64(1.25), np.float64(math.nan), np.float32(0.1), 7, True, 0.1 + 0.2,
])


@settings(max_examples=200, deadline=None, derandomize=True, database=None)
@given(st.lists(st.tuples(st.integers(0, 2), st.integers(0, 2), st.sampled_from(
    ["temperature_C", "supply_V", "operating_bias_V", "operating_cap_F", "corner", *METRIC_NAMES]),
    _ODD_VALUES), max_size=8),
    st.lists(st.tuples(st.integers(0, 2), st.integers(0, 2), _TEXTS), max_size=3), _TEXTS)
def test_prepared_rows_and_digests_match_the_reference(changes: list[Any], flags: list[Any],
                                                      notes: list[str]) -> None:
    cells = [replace(c, corners=list(c.corners)) for c in _BASE.cells]
    cells[0] = replace(cells[0], notes=notes)
    for i, j, name, value in changes:
        c = cells[i].corners[j]
        if name in METRIC_NAMES:
            c = replace(c, metrics={**c.metrics, name: value})
        elif name == "corner":  # a repeated corner name
            c = replace(c, corner=cells[i].corners[(j + 1) % 3].corner)
        elif name.startswith("operating"):
            if c.cv is not None and value is not None:
                c = replace(c, cv=replace(c.cv, **{name: value}))
        else:
            c = replace(c, **{name: value})
        cells[i].corners[j] = c
    for i, j, texts in flags:
        cells[i].corners[j] = replace(cells[i].corners[j], flags=texts)
    for fast, cell in zip(prepare_cells(cells), cells, strict=True):
        reference = reference_prepare(cell)
        _same(fast, reference)
        assert result_digest(fast.cell_row, fast.corner_rows, fast.response_rows,
                             fast.cv_rows) == reference.digest
        _same(prepare_cell(cell), reference)


def _element(kind: str, name: str, value: Any, **extra: Any) -> SimpleNamespace:
    return SimpleNamespace(kind=kind, name=name, node_a="a", node_b="b", value=value,
                           **{"c_total": None, "contacted_ends": 1, "node_far": None, **extra})


@pytest.mark.parametrize("netlist", [
    SimpleNamespace(name="n", ports=("vdd", "vss"), elements=(
        _element("R", "r1", 1.5), _element("C", "é", 1e-15), _element("L", "l\"q", 5e-324),
        _element("RCLINE", "ch", 3.0, c_total=2e-14, contacted_ends=2),
        _element("RCLINE", "thru", 0.1, c_total=1e-15, node_far="far\n"),
        _element("R", "odd", math.inf), _element("R", "odder", -math.inf), _element("R", "nan", math.nan),
        _element("C", "zero", -0.0))),
    SimpleNamespace(name="😀", ports=["p", "q"], elements=()),
    # values or names that are not plain str / float: the path through netlist_to_dict
    SimpleNamespace(name="n", ports=("a", "b"), elements=(_element("R", "r", np.float64(2.0)),)),
    SimpleNamespace(name="n", ports=("a", "b"), elements=(_element("R", "r", np.array([2.0, 3.0])),)),
    SimpleNamespace(name="n", ports=("a", "b"), elements=(
        _element("RCLINE", "ch", 3.0, c_total=np.float32(2e-14), contacted_ends=True),)),
])
def test_circuit_text_matches_the_reference(netlist: Any) -> None:
    assert _circuit_json(netlist, "typ") == reference_circuit_json(netlist, "typ")
    assert _circuit_json({"typ": netlist}, "typ") == reference_circuit_json({"typ": netlist}, "typ")
    assert _circuit_json({"typ": netlist}, "slow") is None


@pytest.mark.parametrize("esd", [False, True])
def test_engine_results_prepare_and_store_as_the_reference(esd: bool, tmp_path: Path) -> None:
    from celllab.cells import CellSpec
    from celllab.deck import load_deck
    from celllab.engine import characterize
    from celllab.topologies import REGISTRY

    deck = load_deck(Path(__file__).resolve().parents[2] / "process_decks" / "lumen130.toml")
    specs = [CellSpec(name=f"v{i}", topology=t, width_sites=8 + i, height_rows=1 + i % 2)
             for i, t in enumerate(REGISTRY.names())]
    run = characterize(deck, specs, esd=esd)
    assert _both(run) == (None, None)
    prepared = prepare_cells(run.cells)
    assert all(r["circuit_json"] for p in prepared for r in p.response_rows)
    for fast, cell in zip(prepared, run.cells, strict=True):
        _same(fast, reference_prepare(cell))
        # the engine's float objects are stored as they are, not copied (memory of a library build)
        assert all(fast.corner_rows[j][m] is v for j, c in enumerate(cell.corners)
                   for m, v in c.metrics.items() if v == v)
    catalog = open_catalog(tmp_path / "c.sqlite")
    catalog.store_run(run)
    db = catalog._db
    for p in prepared:
        (cell_id, digest), = db.execute("SELECT cell_id, result_digest FROM cells WHERE name = ?",
                                        [p.name]).fetchall()
        assert digest == p.digest == stored_result_digest(db, cell_id)
    catalog.close()
    assert store.prepare_cells([]) == []
