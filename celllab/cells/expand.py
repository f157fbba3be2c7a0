"""Cell files: families of sweeps -> named, hashed, validated variants.

File layout (TOML)::

    [[family]]
    name = "lx_ndcap"             # variants are named lx_ndcap-w4-h1-f2 ...
    topology = "nmos_inversion"
    oxide = "core"
    rail = "core"                  # optional: the rail it decouples (default: named like the oxide)
    placement = "core_row"         # or "open_region"; may be swept like a geometry field
    width_sites = [2, 4, 8]        # a list sweeps
    fingers = { start = 1, stop = 4 }                   # an integer range (inclusive)
    gate_length_um = { start = 0.2, stop = 1.0, count = 3, spacing = "log" }

    [[cell]]                       # single cells, no sweep
    name = "lx_big"
    topology = "mom"
    width_sites = 40

Every family field takes a scalar, a list, or a range table; variants are the cartesian product
in the order of ``GEOMETRY_FIELDS``. ``skip_unfit = true`` on a family drops the combinations
that do not fit the outline instead of reporting them as errors.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from pydantic import ValidationError

from celllab.cells.geometry import Geometry, GeometryProblem, resolve_geometry
from celllab.cells.schema import GEOMETRY_FIELDS, NAME_TAGS, CellSpec
from celllab.deck.load import find_line, read_toml, validation_problems
from celllab.errors import CellError, Problem, allowed_hint
from celllab.topologies import REGISTRY

#: Documented limits (process_decks/README.md, "Limits"), checked with exact integers before
#: anything is expanded.
MAX_VARIANTS_PER_FAMILY = 20000
MAX_VARIANTS_PER_FILE = 100000
MAX_RANGE_VALUES = 10000
#: Largest magnitude of a range's start, stop or step (every swept field is far smaller).
MAX_RANGE_MAGNITUDE = 1e12
_FAMILY_ONLY = {"name", "topology", "oxide", "rail", "description", "skip_unfit"}
#: Family fields that take one value (not swept).
_FIXED = ("name", "topology", "oxide", "rail")
_RANGE_KEYS = {"start", "stop", "step", "count", "spacing"}


def cell_hash(spec: CellSpec) -> str:
    """First 16 hex digits of SHA-256 over topology, oxide, rail and geometry with the placement
    (not the name)."""
    body = {"topology": spec.topology, "oxide": spec.oxide, "rail": spec.rail, **spec.geometry}
    text = json.dumps(body, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _fmt(value: Any) -> str:
    if isinstance(value, bool):
        return "1" if value else "0"
    if isinstance(value, float):
        return f"{value:.4g}".replace(".", "p").replace("-", "m")
    return str(value)


#: Short forms of swept values in variant names.
_VALUE_TAGS: dict[str, dict[Any, str]] = {"placement": {"core_row": "row", "open_region": "open"}}


def variant_name(family: str, values: dict[str, Any], swept: list[str]) -> str:
    parts = [family, f"w{_fmt(values['width_sites'])}", f"h{_fmt(values.get('height_rows', 1))}"]
    for f in swept:
        if f in ("width_sites", "height_rows"):
            continue
        value = values[f]
        short = _VALUE_TAGS.get(f, {}).get(value) if isinstance(value, str) else None
        parts.append(f"{NAME_TAGS[f]}{short or _fmt(value)}")
    return "-".join(parts)


def renamed_variant(name: str, before: dict[str, Any], after: dict[str, Any]) -> str:
    """``name`` with the tags of changed geometry fields rewritten (``x-w8-h1-f2`` with
    ``fingers`` 2 -> 4 gives ``x-w8-h1-f4``); a changed field without its tag in the name gets
    one appended. Fields without a tag (or with an empty one) leave the name as it is."""
    parts = name.split("-")
    for key, value in after.items():
        tag = NAME_TAGS.get(key)
        if not tag or before.get(key) == value or value is None:
            continue
        old = f"{tag}{_fmt(before[key])}" if before.get(key) is not None else None
        new = f"{tag}{_fmt(value)}"
        if old is not None and old in parts[1:]:
            parts[parts.index(old, 1)] = new
        else:
            parts.append(new)
    return "-".join(parts)


def _expand_value(value: Any, where: str, file: str, text: str | None, path: list[Any]) -> list[Any]:
    if isinstance(value, list):
        if not value:
            raise CellError([Problem(file, where, "an empty list sweeps nothing", value, find_line(text, path))])
        return value
    if isinstance(value, dict):
        unknown = set(value) - _RANGE_KEYS
        if unknown or "start" not in value or "stop" not in value:
            raise CellError([Problem(file, where, "a range needs start and stop, and optionally step, "
                                     "count, spacing ('linear' or 'log')", value, find_line(text, path))])
        start, stop = value["start"], value["stop"]
        if not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in (start, stop)):
            raise CellError([Problem(file, where, "range start and stop must be numbers", value, find_line(text, path))])
        if not all(math.isfinite(v) and abs(v) <= MAX_RANGE_MAGNITUDE for v in (start, stop)):
            raise CellError([Problem(file, where, "range start and stop must be finite numbers within "
                                     f"+-{MAX_RANGE_MAGNITUDE:g}", value, find_line(text, path))])
        spacing = value.get("spacing", "linear")
        if spacing not in ("linear", "log"):
            raise CellError([Problem(file, where + ".spacing", "allowed: linear, log", spacing, find_line(text, path))])
        if stop < start:
            raise CellError([Problem(file, where, "range stop is below start", value, find_line(text, path))])
        if "count" in value:
            count = value["count"]
            if not isinstance(count, int) or isinstance(count, bool) or not 1 <= count <= MAX_RANGE_VALUES:
                raise CellError([Problem(file, where + ".count", f"must be an integer from 1 to {MAX_RANGE_VALUES}",
                                         count, find_line(text, path))])
            if spacing == "log":
                if start <= 0:
                    raise CellError([Problem(file, where, "a log range needs start > 0", value, find_line(text, path))])
                vals = np.geomspace(start, stop, count)
            else:
                vals = np.linspace(start, stop, count)
        else:
            step = value.get("step", 1)
            if not isinstance(step, (int, float)) or isinstance(step, bool) or not step > 0 \
                    or not step <= MAX_RANGE_MAGNITUDE:
                raise CellError([Problem(file, where + ".step", "must be a number > 0 (and finite)", step,
                                         find_line(text, path))])
            span = (stop - start) / step  # finite operands; the quotient may still overflow
            if not math.isfinite(span) or span + 1 > MAX_RANGE_VALUES:
                raise CellError([Problem(file, where, f"range has more than {MAX_RANGE_VALUES} values", value,
                                         find_line(text, path))])
            n = int(np.floor(span + 1e-9)) + 1
            vals = start + step * np.arange(n)
        if all(isinstance(v, int) for v in (start, stop, value.get("step", 1))) and "count" not in value:
            return [int(v) for v in vals]
        return [round(float(v), 12) for v in vals]
    return [value]


def expand_family(entry: dict[str, Any], index: int, file: str, text: str | None,
                  kind: str = "family", budget: int = MAX_VARIANTS_PER_FILE) -> list[dict[str, Any]]:
    """Raw variant dictionaries (not yet validated) from one family table.

    ``budget`` is how many more variants the file may hold; the family's size is counted
    (exact integers) and checked against it and ``MAX_VARIANTS_PER_FAMILY`` before expanding.
    """
    where = f"{kind}[{index}]"
    if not isinstance(entry, dict):
        raise CellError([Problem(file, where, "must be a table", entry)])
    allowed = set(GEOMETRY_FIELDS) | _FAMILY_ONLY | ({"family"} if kind == "cell" else set())
    problems = []
    for key in entry:
        if key not in allowed:
            problems.append(Problem(file, f"{where}.{key}", "unknown field" + allowed_hint(key, sorted(allowed)),
                                    entry[key], find_line(text, [kind, index, key]), has_value=False))
    if "name" not in entry:
        problems.append(Problem(file, f"{where}.name", "required field is missing", None,
                                find_line(text, [kind, index]), has_value=False))
    if "topology" not in entry:
        problems.append(Problem(file, f"{where}.topology", "required field is missing; allowed: "
                                + ", ".join(REGISTRY.names()), None, find_line(text, [kind, index]), has_value=False))
    if problems:
        raise CellError(problems)
    fixed = {k: entry[k] for k in _FIXED if k in entry}
    skip_unfit = entry.get("skip_unfit", False)
    if not isinstance(skip_unfit, bool):
        raise CellError([Problem(file, f"{where}.skip_unfit", "must be true or false", skip_unfit,
                                 find_line(text, [kind, index, "skip_unfit"]))])
    for k in _FIXED:
        if isinstance(entry.get(k), (list, dict)):
            raise CellError([Problem(file, f"{where}.{k}", "cannot be swept; give one value", entry[k],
                                     find_line(text, [kind, index, k]))])
    if kind == "cell":
        if budget < 1:
            raise CellError([Problem(file, where, f"brings the file past {MAX_VARIANTS_PER_FILE} variants; at "
                                     f"most {MAX_VARIANTS_PER_FILE} per cell file", None,
                                     find_line(text, [kind, index]), has_value=False)])
        if "skip_unfit" in entry:
            raise CellError([Problem(file, f"{where}.skip_unfit", "applies to [[family]] sweeps only",
                                     entry["skip_unfit"], find_line(text, [kind, index, "skip_unfit"]))])
        return [{k: v for k, v in entry.items() if k != "description"}]
    axes: list[tuple[str, list[Any]]] = []
    for f in GEOMETRY_FIELDS:
        if f in entry:
            axes.append((f, _expand_value(entry[f], f"{where}.{f}", file, text, [kind, index, f])))
    total = math.prod(len(v) for _, v in axes)  # Python integers: no overflow
    if total > MAX_VARIANTS_PER_FAMILY:
        raise CellError([Problem(file, where, f"sweeps {total} variants; at most {MAX_VARIANTS_PER_FAMILY} "
                                 "per family", None, find_line(text, [kind, index]), has_value=False)])
    if total > budget:
        raise CellError([Problem(file, where, f"brings the file past {MAX_VARIANTS_PER_FILE} variants; at most "
                                 f"{MAX_VARIANTS_PER_FILE} per cell file", None, find_line(text, [kind, index]),
                                 has_value=False)])
    swept = [f for f, vals in axes if len(vals) > 1]
    out = []
    for combo in itertools.product(*[vals for _, vals in axes]):
        values = dict(zip([f for f, _ in axes], combo))
        values.setdefault("width_sites", entry.get("width_sites"))
        raw = {**fixed, **values, "family": fixed["name"]}
        if skip_unfit:
            raw["_skip_unfit"] = True
        raw["name"] = variant_name(str(fixed["name"]), {**values, "height_rows": values.get("height_rows", 1)}, swept) \
            if values.get("width_sites") is not None else fixed["name"]
        out.append(raw)
    return out


@dataclass
class VariantRegistry:
    """Names and content hashes of the variants accepted so far, with where each came from.

    One registry shared by several ``load_cells`` calls (every cell file checked against one
    deck) makes a variant defined twice - the same name, or the same geometry under another
    name - a located problem of the file that repeats it, exactly as ``build`` would refuse it.
    """

    names: dict[str, str] = field(default_factory=dict)
    hashes: dict[str, str] = field(default_factory=dict)


def _origin(file: str, line: int | None, where: str, name: str) -> str:
    return f"{file}{f':{line}' if line else ''} {where} (variant {name})"


def validate_cells(raw_variants: list[tuple[str, dict[str, Any]]], deck: Any, file: str,
                   text: str | None, seen: VariantRegistry | None = None) -> list[CellSpec]:
    """Validate raw variants against the schema and (when given) the deck's geometry rules.

    A name or a geometry (content hash) already in ``seen`` - from this file or an earlier one -
    is a problem located at the repeat.
    """
    specs: list[CellSpec] = []
    problems: list[Problem] = []
    seen = VariantRegistry() if seen is None else seen
    for where, raw in raw_variants:
        skip_unfit = bool(raw.pop("_skip_unfit", False))
        loc_prefix = tuple(where.replace("]", "").split("["))
        entry_line = find_line(text, [loc_prefix[0], int(loc_prefix[1])])
        try:
            spec = CellSpec.model_validate(raw)
        except ValidationError as exc:
            found = validation_problems(exc, file, None, CellSpec)
            for p in found:
                fieldname = p.field if p.field else ""
                line = find_line(text, [loc_prefix[0], int(loc_prefix[1]), fieldname.split(".")[0]]) \
                    if fieldname else entry_line
                label = f"{where}.{fieldname}" if fieldname else where
                if raw.get("name") and raw.get("family"):
                    label += f" (variant {raw['name']})"
                problems.append(Problem(file, label, p.message, p.value, line, p.has_value))
            continue
        if spec.name in seen.names:
            line = find_line(text, [loc_prefix[0], int(loc_prefix[1]), "name"]) or entry_line
            problems.append(Problem(file, f"{where}.name", f"duplicate variant name (also from "
                                    f"{seen.names[spec.name]})", spec.name, line))
            continue
        if deck is not None:
            try:
                resolve_geometry(spec, deck)
            except GeometryProblem as gp:
                if skip_unfit:
                    continue
                idx = int(where.split("[")[1].rstrip("]"))
                problems.append(Problem(file, f"{where}.{gp.field} (variant {spec.name})", gp.message, gp.value,
                                        find_line(text, [where.split("[")[0], idx, gp.field])))
                continue
        digest = spec.content_hash
        if digest in seen.hashes:
            problems.append(Problem(file, where, f"variant {spec.name} has the same geometry as "
                                    f"{seen.hashes[digest]}; each variant must differ in topology, "
                                    "oxide or geometry", None, entry_line, has_value=False))
            continue
        origin = _origin(file, entry_line, where, spec.name)
        seen.names[spec.name] = origin
        seen.hashes[digest] = origin
        specs.append(spec)
    if problems:
        raise CellError(problems)
    return specs


def parse_cells(data: dict[str, Any], deck: Any = None, file: str = "<cells>", text: str | None = None,
                seen: VariantRegistry | None = None) -> list[CellSpec]:
    """Expand and validate the families and single cells of one parsed cell file.

    ``seen`` carries the variants of cell files checked before this one (see ``VariantRegistry``).
    """
    problems: list[Problem] = []
    unknown = set(data) - {"family", "cell", "description", "invented", "process"}
    for key in sorted(unknown):
        problems.append(Problem(file, key, "unknown top-level key; allowed: family, cell, description, invented, "
                                "process", data[key], find_line(text, [key]), has_value=False))
    raw: list[tuple[str, dict[str, Any]]] = []
    for kind in ("family", "cell"):
        entries = data.get(kind, [])
        if not isinstance(entries, list):
            problems.append(Problem(file, kind, f"use [[{kind}]] tables", entries, find_line(text, [kind]),
                                    has_value=False))
            continue
        for i, entry in enumerate(entries):
            try:
                raw.extend((f"{kind}[{i}]", r) for r in expand_family(
                    entry, i, file, text, kind, budget=MAX_VARIANTS_PER_FILE - len(raw)))
            except CellError as exc:
                problems.extend(exc.problems)
    if not raw and not problems:
        problems.append(Problem(file, "", "no [[family]] or [[cell]] tables: nothing to characterize",
                                has_value=False))
    if problems:
        raise CellError(problems)
    return validate_cells(raw, deck, file, text, seen)


def load_cells(path: str | Path, deck: Any = None, *, seen: VariantRegistry | None = None) -> list[CellSpec]:
    """Load a cell file, expand its families and validate every variant (against ``deck``);
    ``seen`` shares the variants of other cell files (see ``VariantRegistry``)."""
    data, text = read_toml(path, CellError)
    return parse_cells(data, deck, str(path), text, seen)


def apply_cell_changes(spec: CellSpec, changes: dict[str, Any], deck: Any = None, *, name: str | None = None,
                       source: str = "<what-if>") -> CellSpec:
    """Validated copy of ``spec`` with geometry fields changed."""
    problems = []
    for key in changes:
        if key not in GEOMETRY_FIELDS and key not in ("topology", "oxide", "rail"):
            problems.append(Problem(source, key, "not an editable cell field" + allowed_hint(key, GEOMETRY_FIELDS),
                                    changes[key]))
    if problems:
        raise CellError(problems)
    raw = spec.model_dump()
    raw.update(changes)
    if name is not None:
        raw["name"] = name
    return validate_cells([("cell[0]", raw)], deck, source, None)[0]


def resolve(spec: CellSpec, deck: Any) -> Geometry:
    """Geometry of a validated cell under a deck (CellError if it does not fit)."""
    try:
        return resolve_geometry(spec, deck)
    except GeometryProblem as gp:
        raise CellError([Problem(spec.name, gp.field, gp.message, gp.value)]) from None


def spec_from_record(cell: Any) -> CellSpec:
    """Rebuild the CellSpec behind a characterized cell record (``records.CellResult``).

    The record keeps its definition in ``geometry``: a ``spec`` table when present, else the
    geometry fields next to the ``resolved_*`` values. Raises pydantic's ``ValidationError``
    when the stored fields do not define a valid cell.
    """
    geometry = dict(cell.geometry or {})
    spec_fields = geometry.get("spec") if isinstance(geometry.get("spec"), dict) else None
    if spec_fields:
        data = dict(spec_fields)
    else:
        data = {f: geometry[f] for f in GEOMETRY_FIELDS if f in geometry}
        data.setdefault("width_sites", cell.width_sites)
        data.setdefault("height_rows", cell.height_rows)
    data.update(name=cell.name, family=cell.family, topology=cell.topology, oxide=cell.oxide,
                rail=getattr(cell, "rail", "") or cell.oxide)
    allowed = set(CellSpec.model_fields)
    return CellSpec.model_validate({k: v for k, v in data.items() if k in allowed})


def applicable_geometry(cell: Any) -> tuple[dict[str, Any], dict[str, Any]]:
    """(the geometry fields that apply to the cell's topology, the derived values that apply):
    a field another topology uses, or a derived count of zero, is left out."""
    from celllab.topologies import REGISTRY

    applies = set(REGISTRY[cell.topology].fields) if cell.topology in REGISTRY.names() else None
    given = {k: v for k, v in cell.geometry.items()
             if not k.startswith("resolved_") and (applies is None or k in applies)
             and v is not None}
    derived = {k.removeprefix("resolved_"): v for k, v in cell.geometry.items()
               if k.startswith("resolved_") and v not in (None, 0, 0.0, [], "")}
    return given, derived
