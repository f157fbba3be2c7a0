"""Another catalog file, read without changing it and checked row by row before a merge.

``open_source`` reads the file through a read-only SQLite connection (URI ``mode=ro``: a source
in WAL mode is never checkpointed, so its bytes stay as they are; SQLite may add its ``-shm``
side file) into an in-memory copy, migrated there if older. ``read_source`` turns every row
back into the records a fresh run produces and checks them as a fresh run is checked
(``validate.cell_problems``), and more, since a file's keys are only claims:

* a deck's parameters must form a valid deck, and its hash must be the hash of those
  parameters (``deck.load.content_hash``);
* a cell's definition (name, family, topology, oxide, geometry fields) must be a valid cell,
  its hash the hash of that definition (``cells.expand.cell_hash``), its footprint and gate
  area those the deck's layout rules give it, its density its capacitance over that area and
  its leakage per nF its leakage over its capacitance;
* each stored ``result_digest`` must be the digest of the rows stored with it;
* texts, numbers and blobs must have their column's type; JSON columns their shape;
  timestamps must be ISO 8601 UTC and not in the future.

Any problem refuses the whole source (``CatalogError`` naming the source file, one line per
problem, the first ``MAX_PROBLEMS`` of them); nothing is written.
"""

from __future__ import annotations

import hashlib
import json
import math
import re
import sqlite3
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import sqlite_utils
from pydantic import ValidationError

from celllab.catalog.schema import (
    check_file_header,
    check_tables,
    connect_read_only,
    inspect,
    migrate,
    sync_metric_columns,
)
from celllab.catalog.store import PreparedCell, decode_c128, decode_f64, prepare_cell
from celllab.catalog.validate import DECK_NAME, cell_problems, shown
from celllab.cells.expand import cell_hash
from celllab.cells.geometry import GeometryProblem, resolve_geometry
from celllab.cells.schema import GEOMETRY_FIELDS, CellSpec
from celllab.deck.schema import CORNER_NAME, Deck
from celllab.errors import CatalogError, Problem
from celllab.records import (
    METRIC_NAMES,
    CellResult,
    CornerResult,
    CVCurve,
    FrequencyResponse,
    netlist_from_dict,
)

#: Problems listed before the rest are summed up in one line.
MAX_PROBLEMS = 50
#: Longest JSON text read from one column (bytes); real ones are a few kB.
MAX_JSON_CHARS = 1_000_000
#: Timestamps up to this far ahead of this machine's clock are accepted (clock skew).
CLOCK_SKEW = timedelta(days=1)
#: Relative tolerance of the recomputed areas and ratios (floats stored exactly; rounding only).
REL_TOL = 1e-9

_TIMESTAMP = re.compile(r"\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d{1,6})?Z")
_HEX = re.compile(r"[0-9a-f]{16,64}")
_MODEL_VERSION = re.compile(r"[A-Za-z0-9_.+\-]{1,40}")


def _fail(path: Path, message: str) -> CatalogError:
    return CatalogError([Problem(str(path), "", message)])


def open_source(path: Path) -> sqlite_utils.Database:
    """An in-memory copy of the catalog at ``path``, read without writing to the file."""
    if not path.is_file():
        raise _fail(path, "no catalog file here" if not path.exists() else "not a regular file")
    check_file_header(path)
    try:
        conn = connect_read_only(path)
    except sqlite3.Error as exc:
        raise _fail(path, f"cannot open the catalog read-only: {exc}") from None
    src = sqlite_utils.Database(conn, execute_plugins=False)
    mem = sqlite3.connect(":memory:", check_same_thread=False)
    try:
        inspect(src, path)
        conn.backup(mem)
    except sqlite3.Error as exc:
        mem.close()
        raise _fail(path, f"unreadable catalog: {exc}") from None
    finally:
        src.close()
    copy = sqlite_utils.Database(mem, execute_plugins=False)
    try:
        if inspect(copy, path) == 0:
            raise _fail(path, "empty file, not a celllab catalog")
        migrate(copy)
        check_tables(copy, path)
        sync_metric_columns(copy)
    except sqlite3.Error as exc:
        copy.close()
        raise _fail(path, f"cannot read the catalog: {exc}") from None
    except BaseException:
        copy.close()
        raise
    return copy


# --------------------------------------------------------------------------- what is read


@dataclass
class SourceDeck:
    row: dict[str, Any]
    deck: Deck


@dataclass
class SourceCell:
    """One checked result: its catalog row facts and the rows a fresh store would write."""

    cell_id: int
    deck_hash: str
    model_version: str
    run_id: int
    stored_utc: str
    current: bool
    prepared: PreparedCell


@dataclass
class SourceContent:
    decks: dict[str, SourceDeck] = field(default_factory=dict)
    runs: dict[int, dict[str, Any]] = field(default_factory=dict)
    cells: list[SourceCell] = field(default_factory=list)


class _Problems:
    def __init__(self, path: Path) -> None:
        self.path = path
        self.items: list[Problem] = []

    def add(self, where: str, message: str) -> None:
        self.items.append(Problem(str(self.path), where, message, has_value=False))

    def raise_if_any(self) -> None:
        if not self.items:
            return
        shown_items = self.items[:MAX_PROBLEMS]
        if len(self.items) > MAX_PROBLEMS:
            shown_items.append(Problem(str(self.path), "", f"... and {len(self.items) - MAX_PROBLEMS} "
                                       "more problems", has_value=False))
        raise CatalogError(shown_items)


def _text(value: Any, limit: int = 200) -> bool:
    return isinstance(value, str) and len(value) <= limit


def _timestamp_problem(value: Any, now: datetime) -> str | None:
    if not isinstance(value, str) or not _TIMESTAMP.fullmatch(value):
        return f"{shown(value)} is not a UTC timestamp like 2024-05-01T12:00:00.000000Z"
    try:
        when = datetime.strptime(value.rstrip("Z").split(".")[0], "%Y-%m-%dT%H:%M:%S").replace(tzinfo=UTC)
    except ValueError:
        return f"{shown(value)} is not a valid date and time"
    if when > now + CLOCK_SKEW:
        return f"{value} lies in the future"
    return None


def _json(value: Any, kind: type) -> Any:
    """Parsed JSON of ``kind`` (dict or list) or raise ValueError saying why."""
    if not isinstance(value, str):
        raise ValueError(f"not JSON text ({type(value).__name__})")
    if len(value) > MAX_JSON_CHARS:
        raise ValueError(f"JSON text of {len(value)} characters; at most {MAX_JSON_CHARS}")
    try:
        data = json.loads(value)
    except (json.JSONDecodeError, RecursionError):
        raise ValueError("not valid JSON") from None
    if not isinstance(data, kind):
        raise ValueError(f"JSON {type(data).__name__}, expected a {kind.__name__}")
    return data


def _params_hash(params: dict[str, Any]) -> str:
    """``deck.load.content_hash`` of a deck, from its stored parameters."""
    text = json.dumps(params, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _read_decks(src: sqlite_utils.Database, out: SourceContent, bad: _Problems, now: datetime) -> None:
    for d in src.query("SELECT * FROM decks ORDER BY created_utc, deck_hash"):
        h = d.get("deck_hash")
        where = f"decks[{shown(h, 24)}]"
        if not isinstance(h, str) or not _HEX.fullmatch(h):
            bad.add(where, "deck_hash is not a lower-case hexadecimal hash")
            continue
        if not _text(d.get("name"), 40) or not DECK_NAME.fullmatch(d["name"]):
            bad.add(where, f"name = {shown(d.get('name'))} -> deck names use letters, digits, _ and -, "
                    "starting with a letter, at most 40")
            continue
        for col in ("created_utc", "current_since_utc"):
            if why := _timestamp_problem(d.get(col), now):
                bad.add(f"{where}.{col}", why)
        if d.get("current") not in (0, 1):
            bad.add(f"{where}.current", f"{shown(d.get('current'))} is not 0 or 1")
        try:
            params = _json(d.get("params_json"), dict)
        except ValueError as exc:
            bad.add(f"{where}.params_json", str(exc))
            continue
        try:
            deck = Deck.model_validate(params)
        except ValidationError as exc:
            first = exc.errors(include_url=False)[0]
            loc = ".".join(str(p) for p in first["loc"])
            bad.add(f"{where}.params_json", f"not a valid deck ({exc.error_count()} problems; first: "
                    f"{loc or 'deck'}: {first['msg']})")
            continue
        if deck.name != d["name"]:
            bad.add(f"{where}.name", f"{d['name']!r} but the parameters name the process {deck.name!r}")
        if _params_hash(params) != h:
            bad.add(where, "deck_hash is not the hash of the stored parameters (altered or forged)")
            continue
        out.decks[h] = SourceDeck(d, deck)


def _read_runs(src: sqlite_utils.Database, out: SourceContent, bad: _Problems, now: datetime) -> None:
    for r in src.query("SELECT * FROM runs ORDER BY run_id"):
        run_id = r.get("run_id")
        where = f"runs[{shown(run_id, 24)}]"
        if not _text(r.get("run_uid"), 64) or not _HEX.fullmatch(r["run_uid"]):
            bad.add(f"{where}.run_uid", f"{shown(r.get('run_uid'))} is not a hexadecimal id")
        if not _text(r.get("model_version"), 40) or not _MODEL_VERSION.fullmatch(r["model_version"]):
            bad.add(f"{where}.model_version", f"{shown(r.get('model_version'))} is not a model version")
        if not isinstance(run_id, int) or isinstance(run_id, bool):
            bad.add(where, "run_id is not a whole number")
            continue
        if not _text(r.get("deck_hash"), 64):
            bad.add(f"{where}.deck_hash", "not a deck hash")
        if why := _timestamp_problem(r.get("created_utc"), now):
            bad.add(f"{where}.created_utc", why)
        try:
            corners = _json(r.get("corners_json"), list)
            if not corners or not all(isinstance(c, str) and CORNER_NAME.fullmatch(c) for c in corners):
                raise ValueError("must list corner names (letters, digits, _ and -)")
            files = _json(r.get("source_files_json"), list)
            if not all(_text(f, 4096) for f in files):
                raise ValueError("source_files_json must list file names")
        except ValueError as exc:
            bad.add(where, str(exc))
            continue
        out.runs[int(run_id)] = {**r, "corners": corners}


def _real(value: Any, what: str) -> float:
    if value is None:
        return math.nan
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ValueError(f"{what} = {shown(value)} is not a number")
    return float(value)


def _blob(value: Any, n: int, itemsize: int, what: str) -> bytes:
    if not isinstance(value, bytes):
        raise ValueError(f"{what} is not binary data ({type(value).__name__})")
    if not isinstance(n, int) or isinstance(n, bool) or n < 0 or len(value) != n * itemsize:
        raise ValueError(f"{what} holds {len(value)} bytes, not {shown(n)} values of {itemsize} bytes")
    return value


def _text_list(value: Any, what: str) -> list[str]:
    try:
        data = _json(value, list)
    except ValueError as exc:
        raise ValueError(f"{what}: {exc}") from None
    if not all(isinstance(v, str) for v in data):
        raise ValueError(f"{what} must list texts")
    return data


def _cell_result(src: sqlite_utils.Database, c: dict[str, Any]) -> CellResult:
    """The stored result of one source cell row, every value type-checked (ValueError if not)."""
    cell_id = c["cell_id"]
    for col in ("name", "family", "topology", "oxide"):
        if not _text(c.get(col), 80):
            raise ValueError(f"{col} = {shown(c.get(col))} is not a short text")
    try:
        geometry = _json(c.get("geometry_json"), dict)
    except ValueError as exc:
        raise ValueError(f"geometry_json: {exc}") from None
    notes = _text_list(c.get("notes_json"), "notes_json")
    responses = {r["corner"]: r for r in src.query("SELECT * FROM responses WHERE cell_id = ?", [cell_id])}
    cvs = {r["corner"]: r for r in src.query("SELECT * FROM cv_curves WHERE cell_id = ?", [cell_id])}
    corners = []
    circuits = {}
    for m in src.query("SELECT * FROM corner_metrics WHERE cell_id = ? ORDER BY rowid", [cell_id]):
        corner = m["corner"]
        if not _text(corner, 40):
            raise ValueError(f"corner = {shown(corner)} is not a corner name")
        resp = responses.get(corner)
        if resp is None:
            raise ValueError(f"corner {corner}: no stored response")
        n = resp["n_freq"]
        response = FrequencyResponse(decode_f64(_blob(resp["freq_Hz"], n, 8, "freq_Hz")),
                                     decode_c128(_blob(resp["z_ohm"], n, 16, "z_ohm")))
        if resp.get("circuit_json") is not None:
            try:
                data = _json(resp["circuit_json"], dict)
            except ValueError as exc:
                raise ValueError(f"corner {corner}: circuit_json: {exc}") from None
            try:
                circuits[corner] = netlist_from_dict(data)
            except (KeyError, TypeError, ValueError, IndexError) as exc:
                raise ValueError(f"corner {corner}: circuit_json is not a circuit ({shown(exc)})") from None
            values = [e.get(k) for e in data.get("elements", []) for k in ("value", "c_total")
                      if isinstance(e, dict) and k in e]
            if not all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
                       for v in values):
                raise ValueError(f"corner {corner}: circuit_json holds values that are not finite numbers")
        cv = None
        if (cv_row := cvs.get(corner)) is not None:
            k = cv_row["n_bias"]
            cv = CVCurve(decode_f64(_blob(cv_row["bias_V"], k, 8, "bias_V")),
                         decode_f64(_blob(cv_row["cap_F"], k, 8, "cap_F")),
                         _real(cv_row["operating_bias_V"], "operating_bias_V"),
                         _real(cv_row["operating_cap_F"], "operating_cap_F"))
        corners.append(CornerResult(
            corner=corner, temperature_C=_real(m["temperature_C"], f"corner {corner}: temperature_C"),
            supply_V=_real(m["supply_V"], f"corner {corner}: supply_V"),
            metrics={k: _real(m.get(k), f"corner {corner}: {k}") for k in METRIC_NAMES},
            response=response, cv=cv, flags=_text_list(m.get("flags_json"), f"corner {corner}: flags_json")))
    if extra := set(responses) - {c.corner for c in corners}:
        raise ValueError(f"responses of corners without metrics: {', '.join(map(shown, sorted(extra)))}")
    for col in ("width_sites", "height_rows", "esd_safe"):
        if not isinstance(c.get(col), int) or isinstance(c.get(col), bool):
            raise ValueError(f"{col} = {shown(c.get(col))} is not a whole number")
    if c["esd_safe"] not in (0, 1):
        raise ValueError(f"esd_safe = {c['esd_safe']} is not 0 or 1")
    for col in ("placement", "rail"):  # absent or empty in catalogs stored before these columns
        if c.get(col) is not None and not _text(c[col], 40):
            raise ValueError(f"{col} = {shown(c.get(col))} is not a short text")
    return CellResult(
        name=c["name"], cell_hash=c["cell_hash"], family=c["family"], topology=c["topology"],
        oxide=c["oxide"], geometry=geometry, area_um2=_real(c["area_um2"], "area_um2"),
        width_sites=c["width_sites"], height_rows=c["height_rows"],
        gate_area_um2=_real(c["gate_area_um2"], "gate_area_um2"), esd_safe=bool(c["esd_safe"]), corners=corners,
        netlist={k.corner: circuits[k.corner] for k in corners if k.corner in circuits} or None,
        notes=notes, placement=c.get("placement") or "core_row", rail=c.get("rail") or c["oxide"])


def _close(a: float, b: float) -> bool:
    return math.isclose(a, b, rel_tol=REL_TOL, abs_tol=0.0)


def _provenance_problems(cell: CellResult, deck: Deck) -> list[str]:
    """The cell against its definition and its deck: hash, geometry, derived metrics."""
    definition = {"name": cell.name, "family": cell.family, "topology": cell.topology,
                  "oxide": cell.oxide, "rail": cell.rail,
                  **{f: cell.geometry[f] for f in GEOMETRY_FIELDS if f in cell.geometry}}
    try:
        spec = CellSpec.model_validate(definition)
    except ValidationError as exc:
        first = exc.errors(include_url=False)[0]
        loc = ".".join(str(p) for p in first["loc"])
        return [f"geometry_json is not a valid cell definition ({loc or 'cell'}: {first['msg']})"]
    out = []
    if cell_hash(spec) != cell.cell_hash:
        out.append("cell_hash is not the hash of the cell's definition (altered or forged)")
    try:
        geo = resolve_geometry(spec, deck)
    except GeometryProblem as gp:
        return [*out, f"does not fit its deck: {gp.field} {gp.message}"]
    gate_area = geo.gate_area_um2 if geo.gate_area_um2 else geo.mom_plate_area_um2
    for what, stored, expected in (("area_um2", cell.area_um2, geo.area_um2),
                                   ("gate_area_um2", cell.gate_area_um2, gate_area)):
        if not _close(stored, expected):
            out.append(f"{what} = {stored:g} but the deck's layout rules give {expected:g}")
    if (cell.width_sites, cell.height_rows, cell.esd_safe) != (spec.width_sites, spec.height_rows, spec.esd_safe):
        out.append("width_sites, height_rows or esd_safe differ from the cell's definition")
    if cell.placement != spec.placement:
        out.append(f"placement = {cell.placement} but the cell's definition says {spec.placement}")
    for c in cell.corners:
        m = c.metrics
        if math.isfinite(m["cap_fF"]) and math.isfinite(m["cap_density_fF_per_um2"]) \
                and not _close(m["cap_density_fF_per_um2"], m["cap_fF"] / geo.area_um2):
            out.append(f"corner {c.corner}: cap_density_fF_per_um2 = {m['cap_density_fF_per_um2']:g} is "
                       f"not cap_fF / area_um2 = {m['cap_fF'] / geo.area_um2:g}")
        if all(math.isfinite(m[k]) for k in ("leakage_nA", "leakage_nA_per_nF", "cap_fF")) and m["cap_fF"] > 0 \
                and not _close(m["leakage_nA_per_nF"], m["leakage_nA"] / (m["cap_fF"] * 1e-6)):
            out.append(f"corner {c.corner}: leakage_nA_per_nF is not leakage_nA over the capacitance in nF")
    return out


def _read_cells(src: sqlite_utils.Database, out: SourceContent, bad: _Problems, now: datetime) -> None:
    for c in src.query("SELECT * FROM cells ORDER BY cell_id"):
        where = f"cells[{c['cell_id']}]" + (f" ({c['name']})" if _text(c.get("name"), 80)
                                            and re.fullmatch(r"[A-Za-z][A-Za-z0-9_.\-]*", c["name"]) else "")
        source_deck = out.decks.get(c.get("deck_hash"))  # type: ignore[arg-type]
        run = out.runs.get(c.get("run_id")) if isinstance(c.get("run_id"), int) else None
        if source_deck is None:
            bad.add(where, "its deck_hash names no valid deck of the file")
            continue
        if run is None or run.get("deck_hash") != c.get("deck_hash") \
                or run.get("model_version") != c.get("model_version"):
            bad.add(where, "its run_id names no run of the same deck and model version")
            continue
        if not _text(c.get("cell_hash"), 64) or not _HEX.fullmatch(c["cell_hash"]):
            bad.add(f"{where}.cell_hash", f"{shown(c.get('cell_hash'))} is not a hexadecimal hash")
            continue
        if why := _timestamp_problem(c.get("stored_utc"), now):
            bad.add(f"{where}.stored_utc", why)
        if c.get("current") not in (0, 1):
            bad.add(f"{where}.current", f"{shown(c.get('current'))} is not 0 or 1")
        try:
            cell = _cell_result(src, c)
        except ValueError as exc:
            bad.add(where, str(exc))
            continue
        problems = cell_problems("", cell)
        if extra := [k.corner for k in cell.corners if k.corner not in run["corners"]]:
            problems.append(f"corners {', '.join(extra)} are not corners of its run")
        if len({k.corner for k in cell.corners}) != len(cell.corners) or not cell.corners:
            problems.append("no corners, or a corner repeated")
        if not problems:
            problems = _provenance_problems(cell, source_deck.deck)
        if problems:
            for p in problems:
                bad.add(where, p.lstrip("."))
            continue
        prepared = prepare_cell(cell)
        if prepared.digest != c.get("result_digest"):
            bad.add(f"{where}.result_digest", "is not the digest of the stored results (altered)")
            continue
        out.cells.append(SourceCell(c["cell_id"], c["deck_hash"], c["model_version"], c["run_id"],
                                    c["stored_utc"], bool(c["current"]), prepared))


def read_source(src: sqlite_utils.Database, path: Path, now: datetime | None = None) -> SourceContent:
    """Every deck, run and cell of an opened source catalog, checked; CatalogError naming
    ``path`` when anything fails (see the module docstring)."""
    now = now or datetime.now(UTC)
    out = SourceContent()
    bad = _Problems(path)
    try:
        _read_decks(src, out, bad, now)
        _read_runs(src, out, bad, now)
        _read_cells(src, out, bad, now)
    except sqlite3.Error as exc:
        raise _fail(path, f"unreadable catalog: {exc}") from None
    bad.raise_if_any()
    return out

