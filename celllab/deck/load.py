"""Reading process decks from TOML and turning every problem into a located message."""

from __future__ import annotations

import copy
import hashlib
import json
import math
import re
import stat
import tomllib
from collections.abc import Iterable
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError

from celllab.deck.schema import Deck
from celllab.errors import CelllabError, DeckError, Problem, allowed_hint, close_names, did_you_mean
from celllab.physics.resistance import linear_tcr_factor
from celllab.units import to_si


def content_hash(model: BaseModel) -> str:
    """First 16 hex digits of SHA-256 over the canonical JSON of a model."""
    text = json.dumps(model.model_dump(mode="json"), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


#: Largest TOML file celllab reads (deck, cell or block file); documented in
#: process_decks/README.md ("Limits"). Real decks and cell files are a few kB.
MAX_FILE_BYTES = 4 * 1024 * 1024


def read_text_file(path: str | Path, error: type[CelllabError], limit: int = MAX_FILE_BYTES,
                   kind: str = "TOML") -> str:
    """UTF-8 text of a regular file of at most ``limit`` bytes (a leading byte order mark is
    dropped); anything else becomes a located ``error`` naming the file (``kind``: what the
    file should hold, for the message)."""
    p = Path(path)
    try:
        info = p.stat()
    except FileNotFoundError:
        raise error.single(str(path), "", "file not found") from None
    except (OSError, ValueError) as exc:
        raise error.single(str(path), "", f"cannot read file: {_os_reason(exc)}") from None
    if not stat.S_ISREG(info.st_mode):
        what = "a folder" if stat.S_ISDIR(info.st_mode) else "a device, pipe or socket"
        raise error.single(str(path), "", f"not a regular file ({what}); give a {kind} file")
    if info.st_size > limit:
        raise error.single(str(path), "", f"file of {info.st_size} bytes is larger than the "
                           f"{limit} bytes celllab reads")
    try:
        with p.open("rb") as fh:
            data = fh.read(limit + 1)
    except OSError as exc:
        raise error.single(str(path), "", f"cannot read file: {_os_reason(exc)}") from None
    if len(data) > limit:  # grew since the stat
        raise error.single(str(path), "", f"file is larger than the {limit} bytes celllab reads")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise error([Problem(str(path), "", f"cannot read file: not utf-8 text (byte "
                                            f"0x{data[exc.start]:02x} at offset {exc.start}); "
                                            "save the file as UTF-8",
                             line=line, has_value=False)]) from None


def _os_reason(exc: BaseException) -> str:
    return getattr(exc, "strerror", None) or str(exc)


def read_toml(path: str | Path, error: type[CelllabError]) -> tuple[dict[str, Any], str]:
    """Read a TOML file; syntax errors become a located ``error``."""
    text = read_text_file(path, error)
    try:
        return tomllib.loads(text), text
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
        line = int(m.group(1)) if m else None
        msg = re.sub(r"\s*\(at line \d+, column \d+\)", "", msg)
        raise error([Problem(str(path), "", f"TOML syntax error: {msg}", line=line, has_value=False)]) from None
    except RecursionError:  # arrays or inline tables nested thousands deep
        raise error([Problem(str(path), "", "TOML nested too deeply to read", has_value=False)]) from None


def _resolve_table(name: str, arrays: dict[tuple[str, ...], int]) -> list[str]:
    """Key path of a table header, with the current element index after every array of
    tables it lies in (``[[region.row_gaps]]`` inside the second ``[[region]]`` ->
    region, 1, row_gaps)."""
    resolved: list[str] = []
    for part in (t.strip().strip('"') for t in name.split(".")):
        resolved.append(part)
        key = tuple(resolved)
        if key in arrays:
            resolved.append(str(arrays[key]))
    return resolved


def find_line(text: str | None, path: Iterable[str | int]) -> int | None:
    """Best-effort line number of a dotted key path in TOML source (None when not found).

    The line of the key itself when the text has it, else the first line of a table or key
    that the path lies in. Arrays of tables are indexed (``["metals", 4, "name"]``), nested ones
    too (``["region", 1, "row_gaps", 0, "count"]``). The text is indexed once (one pass), so
    locating every problem of a large file costs no more than reading it.
    """
    if not text:
        return None
    parts = tuple(str(p) for p in path)
    if not parts:
        return None
    keys, tables = _line_index(text)
    if parts in keys:
        return keys[parts]
    found = [line for line in (tables.get(parts), *(keys.get(parts[:n]) for n in range(1, len(parts))))
             if line is not None]
    return min(found) if found else None


_LineIndex = tuple[dict[tuple[str, ...], int], dict[tuple[str, ...], int]]
_last_index: tuple[str, _LineIndex] | None = None


def _line_index(text: str) -> _LineIndex:
    """(first line of each dotted key, first line of each table header) of TOML text; the
    index of the last text asked about is kept, since problems of one file come in a row."""
    global _last_index
    cached = _last_index
    if cached is not None and cached[0] is text:
        return cached[1]
    keys: dict[tuple[str, ...], int] = {}
    tables: dict[tuple[str, ...], int] = {}
    table: list[str] = []
    arrays: dict[tuple[str, ...], int] = {}  # array-of-tables path -> index of its last element
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.split("#", 1)[0].strip()
        if not line:
            continue
        m = re.match(r"^\[\[\s*([^\]]+?)\s*\]\]$", line)
        if m:
            owner = _resolve_table(m.group(1), {})
            # the array's own path runs through the current elements of enclosing arrays
            base = _resolve_table(".".join(owner[:-1]), arrays) if len(owner) > 1 else []
            key = (*base, owner[-1])
            arrays[key] = arrays.get(key, -1) + 1
            # a new element forgets the elements of arrays nested in the previous one
            for nested in [k for k in arrays if len(k) > len(key) and k[:len(key)] == key]:
                del arrays[nested]
            table = [*key, str(arrays[key])]
            tables.setdefault(tuple(table), lineno)
            continue
        m = re.match(r"^\[\s*([^\]]+?)\s*\]$", line)
        if m:
            table = _resolve_table(m.group(1), arrays)
            tables.setdefault(tuple(table), lineno)
            continue
        m = re.match(r'^("?)([A-Za-z0-9_\-\.]+)\1\s*=', line)
        if m:
            keys.setdefault(tuple(table + [k.strip('"') for k in m.group(2).split(".")]), lineno)
    _last_index = (text, (keys, tables))
    return keys, tables


def _allowed_from_error(err: dict[str, Any]) -> str:
    ctx = err.get("ctx") or {}
    etype = err.get("type", "")
    if etype == "literal_error" and "expected" in ctx:
        return "allowed: " + str(ctx["expected"]).replace("'", "")
    if "ge" in ctx:
        return f"must be >= {ctx['ge']}" + (f" and <= {ctx['le']}" if "le" in ctx else "")
    if "gt" in ctx:
        return f"must be > {ctx['gt']}" + (f" and <= {ctx['le']}" if "le" in ctx else "")
    if "le" in ctx:
        return f"must be <= {ctx['le']}"
    return ""


def _model_in(annotation: Any) -> tuple[Any, bool]:
    """(pydantic model inside an annotation, whether it is the value type of a dict)."""
    origin = getattr(annotation, "__origin__", None)
    args = getattr(annotation, "__args__", ())
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation, False
    if origin is dict and len(args) == 2:
        inner, _ = _model_in(args[1])
        return inner, True
    for arg in args:
        inner, keyed = _model_in(arg)
        if inner is not None:
            return inner, keyed
    return None, False


def _model_fields(model: type[BaseModel], loc: tuple[Any, ...]) -> list[str]:
    """Field names allowed at ``loc`` (for 'did you mean' suggestions)."""
    current: Any = model
    parts = list(loc[:-1])
    i = 0
    while i < len(parts):
        part = parts[i]
        i += 1
        if isinstance(part, int):
            continue
        if not (isinstance(current, type) and issubclass(current, BaseModel)):
            return []
        field = current.model_fields.get(str(part))
        if field is None:
            return []
        nxt, keyed = _model_in(field.annotation)
        if nxt is None:
            return []
        if keyed:
            i += 1  # skip the dict key (oxide flavour, corner name)
        current = nxt
    if isinstance(current, type) and issubclass(current, BaseModel):
        return list(current.model_fields)
    return []


def validation_problems(exc: ValidationError, file: str, text: str | None,
                        model: type[BaseModel], prefix: tuple[Any, ...] = ()) -> list[Problem]:
    """Translate pydantic errors into located problems, one per error."""
    problems: list[Problem] = []
    for err in exc.errors(include_url=False):
        loc = tuple(prefix) + tuple(err["loc"])
        # dict keys that are Literal-validated appear as "[key]" entries; keep the loc readable
        loc = tuple(p for p in loc if p not in ("[key]",))
        dotted = ".".join(str(p) if not isinstance(p, int) else f"[{p}]" for p in loc).replace(".[", "[")
        etype = err["type"]
        msg = err["msg"]
        value = err.get("input")
        has_value = True
        if etype == "missing":
            message = "required field is missing"
            has_value = False
        elif etype == "extra_forbidden":
            allowed = _model_fields(model, loc[len(prefix):]) if not prefix else []
            message = "unknown field" + (allowed_hint(loc[-1], allowed) if allowed else "")
            has_value = False
        else:
            message = msg.removeprefix("Value error, ")
            allowed = _allowed_from_error(err)
            if etype == "literal_error" and isinstance(value, str):
                options = [o.strip().strip("'") for o in str((err.get("ctx") or {}).get("expected", "")).replace(" or ", ",").split(",")]
                guess = close_names(value, options)
                message = f"not an allowed value; {allowed}" + (f". Did you mean {guess[0]!r}?" if guess else "")
            elif isinstance(value, float) and not math.isfinite(value):
                # NaN fails whichever bound pydantic tries first; say what is really wrong
                message = "not a finite number" + (f" ({allowed})" if allowed else "")
            elif allowed and allowed not in message:
                message = f"{message} ({allowed})"
            if isinstance(value, dict):
                has_value = False
        line = find_line(text, [p for p in loc])
        problems.append(Problem(file, dotted, message, value, line, has_value))
    return problems


def parse_deck(data: dict[str, Any], file: str = "<deck>", text: str | None = None) -> Deck:
    """Validate a deck from already-parsed TOML data; DeckError lists every problem."""
    try:
        deck = Deck.model_validate(data)
    except ValidationError as exc:
        raise DeckError(validation_problems(exc, file, text, Deck)) from None
    problems = rule_problems(deck, file, text)
    if not problems:
        problems = _corner_problems(deck, data, file, text)
    if problems:
        raise DeckError(problems)
    return deck


def rule_problems(deck: Deck, file: str, text: str | None) -> list[Problem]:
    """The deck's cross-field rules as located problems, one per broken rule."""
    out = []
    for dotted, value, message in deck.rule_problems():
        parts = [p for p in re.split(r"\.|\[|\]", dotted) if p]
        out.append(Problem(file, dotted, message, value, find_line(text, [int(p) if p.isdigit() else p for p in parts])))
    return out


def load_deck(path: str | Path) -> Deck:
    """Load and validate one process deck file (TOML)."""
    data, text = read_toml(path, DeckError)
    return parse_deck(data, str(path), text)


def load_decks(paths: Iterable[str | Path]) -> list[Deck]:
    """Load several decks; problems from all of them are reported together."""
    decks: list[Deck] = []
    problems: list[Problem] = []
    for p in paths:
        try:
            decks.append(load_deck(p))
        except DeckError as exc:
            problems.extend(exc.problems)
    if problems:
        raise DeckError(problems)
    return decks


# --- dotted paths: what-ifs and corners --------------------------------------------------

def _get_path(data: Any, parts: list[str]) -> Any:
    cur = data
    for part in parts:
        if isinstance(cur, list):
            cur = cur[int(part)]
        else:
            cur = cur[part]
    return cur


def _set_path(data: Any, parts: list[str], value: Any) -> None:
    cur = data
    for part in parts[:-1]:
        cur = cur[int(part)] if isinstance(cur, list) else cur[part]
    last = parts[-1]
    if isinstance(cur, list):
        cur[int(last)] = value
    else:
        cur[last] = value


def _split(path: str) -> list[str]:
    return [p for p in re.split(r"\.|\[|\]", path) if p != ""]


def numeric_paths(deck: Deck) -> list[str]:
    """Every dotted path of a numeric deck parameter (what a corner or what-if may change)."""
    out: list[str] = []

    def walk(node: Any, prefix: str) -> None:
        if isinstance(node, dict):
            for k, v in node.items():
                if prefix == "" and k == "corners":
                    continue
                walk(v, f"{prefix}.{k}" if prefix else k)
        elif isinstance(node, list):
            for i, v in enumerate(node):
                walk(v, f"{prefix}[{i}]")
        elif isinstance(node, (int, float)) and not isinstance(node, bool):
            out.append(prefix)

    walk(deck.full_dump(), "")
    return out


def _check_path(deck_data: dict[str, Any], path: str) -> str | None:
    parts = _split(path)
    if parts and parts[0] == "corners":
        return "not a deck parameter: a corner changes the deck, never other corners"
    try:
        value = _get_path(deck_data, parts)
    except (KeyError, IndexError, ValueError, TypeError):
        return "not a deck parameter"
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return "not a numeric deck parameter"
    return None


def _corner_problems(deck: Deck, raw: dict[str, Any], file: str, text: str | None) -> list[Problem]:
    problems: list[Problem] = []
    data = deck.full_dump()
    for cname, corner in deck.corners.items():
        for kind, table in (("set", corner.set), ("scale", corner.scale)):
            for path in table:
                why = _check_path(data, path)
                if why:
                    msg = why + did_you_mean(path, numeric_paths(deck))
                    problems.append(Problem(file, f"corners.{cname}.{kind}", msg, path,
                                            find_line(text, ["corners", cname, kind])))
        if not problems:
            try:
                corner_deck(deck, cname, file)
            except DeckError as exc:
                line = find_line(text, ["corners", cname])
                problems.extend(Problem(p.file, p.field, p.message, p.value, p.line or line, p.has_value)
                                for p in exc.problems)
    return problems


def apply_changes(deck: Deck, changes: dict[str, Any], source: str = "<what-if>",
                  scale: dict[str, float] | None = None, field_prefix: str = "",
                  check_corners: bool = True) -> Deck:
    """Copy of ``deck`` with dotted paths set (``changes``) and/or multiplied (``scale``).

    The copy is validated like a loaded deck, its corners included (``check_corners``), so a
    what-if cannot leave a corner that fails later. ``field_prefix`` labels problems (e.g. the
    corner whose changes these are).
    """
    data = copy.deepcopy(deck.full_dump())
    problems: list[Problem] = []
    for table, op in ((changes, "set"), (scale or {}, "scale")):
        for path, value in table.items():
            why = _check_path(data, path)
            if why:
                problems.append(Problem(source, field_prefix + path, why + did_you_mean(path, numeric_paths(deck)), value))
                continue
            parts = _split(path)
            try:
                new = float(value) if op == "set" else _get_path(data, parts) * float(value)
            except (TypeError, ValueError):
                problems.append(Problem(source, field_prefix + path, "must be a number", value))
                continue
            _set_path(data, parts, new)
    if problems:
        raise DeckError(problems)
    try:
        new = Deck.model_validate(data)
    except ValidationError as exc:
        found = validation_problems(exc, source, None, Deck)
        raise DeckError([Problem(p.file, field_prefix + p.field, p.message, p.value, p.line, p.has_value)
                         for p in found]) from None
    problems = [Problem(p.file, field_prefix + p.field, p.message, p.value, p.line, p.has_value)
                for p in rule_problems(new, source, None)]
    if not problems and check_corners:
        problems = _corner_problems(new, data, source, None)
    if problems:
        raise DeckError(problems)
    return new


def corner_deck(deck: Deck, corner: str, file: str | None = None) -> Deck:
    """The deck with one corner's changes applied: ``set`` values, then ``scale`` factors, the
    supply scaling (every rail, named ones included) and the resistances taken to the corner's
    temperature by their coefficients (``resistance_tempco``, first-order law of
    ``physics.resistance.linear_tcr_factor``). ``set`` and ``scale`` act on resistances as given
    at the reference temperature. Device temperature laws (mobility, threshold) are applied by
    the engine.

    The changes are applied to and validated on a copy holding that one corner, so building
    it costs the same for a deck of three corners as for one of a hundred and checking every
    corner grows linearly with their count; the result keeps the deck's corners.
    """
    if corner not in deck.corners:
        allowed = ", ".join(deck.corners)
        raise DeckError.single(file or deck.name, "corner", f"unknown corner; allowed: {allowed}", corner)
    c = deck.corners[corner]
    scale = dict(c.scale)
    if c.supply_scale != 1.0:
        rails = ["supplies.core_V", "supplies.io_V", *(f"supplies.named.{n}.voltage_V" for n in deck.supplies.named)]
        for key in rails:
            scale[key] = scale.get(key, 1.0) * c.supply_scale
    alone = deck.model_copy(update={"corners": {corner: c}})
    changed = apply_changes(alone, dict(c.set), file or deck.name, scale,
                            field_prefix=f"corners.{corner} -> ", check_corners=False)
    changed = changed.model_copy(update={"corners": deck.corners})  # the corners are not changed
    return _resistances_at(changed, c.temperature_C)


def _resistances_at(deck: Deck, temperature_C: float) -> Deck:
    """The deck with every resistance that has a temperature coefficient taken to ``temperature_C``.

    The result is derived from a validated deck, so it is not checked against the input ranges
    again (a cold corner may take a sheet resistance below the smallest value a person may type);
    the deck's rules keep every factor positive.
    """
    t, t0 = to_si(temperature_C, "degC"), to_si(deck.resistance_reference_C, "degC")
    factors = {path: float(linear_tcr_factor(alpha, t, t0)) for path, alpha in deck.resistance_tempco.paths(deck).items()}
    if all(f == 1.0 for f in factors.values()):
        return deck

    def scaled(model: Any, prefix: str) -> Any:
        update = {name: getattr(model, name) * factors[f"{prefix}{name}"]
                  for name in type(model).model_fields if f"{prefix}{name}" in factors}
        return model.model_copy(update=update) if update else model

    return deck.model_copy(update={
        "resistances": scaled(deck.resistances, "resistances."),
        "wells": scaled(deck.wells, "wells."),
        "metals": [scaled(m, f"metals[{i}].") for i, m in enumerate(deck.metals)],
    })
