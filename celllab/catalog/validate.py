"""What every stored result must be: the checks a run passes before any row is written.

A fresh run (``store.store_run``) and every result imported from another catalog
(``merge.merge_from``) go through ``cell_problems``: names follow the cell and deck name rules,
closed sets (topology, oxide) hold, per-cell columns and curves are finite, and each metric is a
finite number within its plausible range - or empty, with a flag of that corner naming the
metric and saying why. Nothing is written when any check fails.

Plausible ranges (``METRIC_RANGES``) are wide on purpose: they refuse what no decap can be
(negative capacitance or resistance, a capacitance density above what the thinnest, most
permittive dielectric the deck schema admits could give), not what is merely unusual. The
bounds follow from the deck limits: eps_r <= 100 over t_ox >= 0.3 nm gives
C_ox = epsilon_0 eps_r / t_ox = 2.95 F/m^2 = 2951 fF/um^2 per gate layer (docs/references.md
[10]), so 1e4 fF/um^2 leaves room for stacked metal plates; the largest supply (12 V x 1.5)
over the thinnest oxide is 600 MV/cm, the strongest pulse field (60 MV/cm) over the thickest
oxide (30 nm) 180 V.
"""

from __future__ import annotations

import itertools
import math
import operator
import re
from collections.abc import Collection, Iterable, Sequence
from typing import Any

import numpy as np

from celllab.records import METRIC_NAMES, CellResult, CornerResult, flag_names_metric

#: The name rules of cell files (``cells.schema.CellSpec``) and decks (``deck.schema``).
CELL_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_\-.]{0,79}")
FAMILY_NAME = re.compile(r"([A-Za-z][A-Za-z0-9_\-.]{0,79})?")
DECK_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_\-]{0,39}")
#: Supply rail names (``cells.schema.CellSpec.rail`` once resolved: core, io or a named rail).
RAIL_NAME = re.compile(r"[a-z][a-z0-9_]{0,23}")
OXIDES = ("core", "io")
#: The corner-name rule of decks (``deck.schema.CORNER_NAME``, not imported: reading a catalog
#: loads neither pydantic nor the topologies).
CORNER_NAME = re.compile(r"[A-Za-z0-9_-]{1,40}")
#: Longest flag or note kept with a result (characters).
MAX_TEXT = 2000

#: metric -> (lowest, highest, whether the lowest itself is allowed). Metrics not listed here
#: need only be finite (or empty with a flag).
METRIC_RANGES: dict[str, tuple[float, float, bool]] = {
    "cap_fF": (0.0, 1e15, False),
    "cap_density_fF_per_um2": (0.0, 1e4, False),
    "cap_ox_fF": (0.0, 1e15, True),
    "esr_ohm": (0.0, 1e15, True),
    "esr_1GHz_ohm": (0.0, 1e15, True),
    "bandwidth_GHz": (0.0, math.inf, False),
    "esl_pH": (0.0, 1e12, True),
    "srf_GHz": (0.0, math.inf, False),
    "tau_ps": (0.0, 1e18, True),
    "leakage_nA": (0.0, math.inf, True),
    "leakage_nA_per_nF": (0.0, math.inf, True),
    "oxide_field_MV_per_cm": (0.0, 1e3, True),
    "gate_leakage_nA": (0.0, math.inf, True),
    "junction_leakage_nA": (0.0, math.inf, True),
    "tddb_fit_per_mm2": (0.0, math.inf, True),
    "pulse_vbd_V": (0.0, 1e4, True),
}
#: Corner conditions: (lowest, highest), degC and V.
TEMPERATURE_RANGE_C = (-273.15, 1000.0)
SUPPLY_RANGE_V = (0.0, 100.0)


def shown(value: Any, limit: int = 60) -> str:
    """``repr`` of a value cut to ``limit`` characters (control characters escaped)."""
    text = repr(value)
    return text if len(text) <= limit else f"{text[: limit - 3]}... ({len(text)} characters)"


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float, np.floating, np.integer)) and not isinstance(
        value, (bool, np.bool_)
    )


def metric_problem(metric: str, value: Any, flags: Sequence[str]) -> str | None:
    """Why ``value`` cannot be stored as ``metric`` at a corner with ``flags`` (None: it can)."""
    if value is None or (_is_number(value) and math.isnan(float(value))):
        if flag_names_metric(metric, flags):
            return None
        return "empty, and no flag of the corner names it to say why"
    if not _is_number(value):
        return f"not a number ({type(value).__name__})"
    x = float(value)
    if not math.isfinite(x):
        return "not a finite number"
    lo, hi, lo_ok = METRIC_RANGES.get(metric, (-math.inf, math.inf, True))
    if x < lo or (x == lo and not lo_ok) or x > hi:
        low = f">= {lo:g}" if lo_ok else f"> {lo:g}"
        return f"outside its plausible range ({low}" + (f" and <= {hi:g})" if math.isfinite(hi) else ")")
    return None


def _finite_array(values: Any, what: str) -> str | None:
    try:
        array = np.asarray(values)
    except (TypeError, ValueError):
        return f"{what} is not an array of numbers"
    if array.dtype.kind not in "fciu" or array.ndim != 1:
        return f"{what} is not a 1-D array of numbers"
    if not np.all(np.isfinite(array)):
        return f"{what} holds values that are not finite numbers"
    return None


def _text_list_problem(values: Any, what: str) -> str | None:
    if not isinstance(values, (list, tuple)) or not all(isinstance(v, str) for v in values):
        return f"{what} must be a list of text"
    if too_long := [v for v in values if len(v) > MAX_TEXT]:
        return f"{what}: an entry of {len(too_long[0])} characters; at most {MAX_TEXT}"
    return None


def corner_problems(where: str, c: CornerResult) -> list[str]:
    """Problems of one corner's values (``where`` prefixes each message)."""
    out = []
    if not isinstance(c.corner, str) or not CORNER_NAME.fullmatch(c.corner):
        out.append(f"{where}.corner = {shown(c.corner)} -> corner names use letters, digits, _ and - "
                   "(1 to 40 of them)")
    flags = c.flags if isinstance(c.flags, (list, tuple)) else []
    if why := _text_list_problem(c.flags, "flags"):
        out.append(f"{where}.flags -> {why}")
    for name, value, (lo, hi) in (("temperature_C", c.temperature_C, TEMPERATURE_RANGE_C),
                                  ("supply_V", c.supply_V, SUPPLY_RANGE_V)):
        if not _is_number(value) or not lo < float(value) <= hi:
            out.append(f"{where}.{name} = {shown(value)} -> must be a number > {lo:g} and <= {hi:g}")
    for m in METRIC_NAMES:
        if m in c.metrics and (why := metric_problem(m, c.metrics[m], flags)):
            out.append(f"{where}.metrics.{m} = {shown(c.metrics[m])} -> {why}")
    if why := _finite_array(c.response.freq_Hz, "response.freq_Hz"):
        out.append(f"{where} -> {why}")
    elif np.size(c.response.freq_Hz) and not np.all(np.asarray(c.response.freq_Hz) > 0):
        out.append(f"{where} -> response.freq_Hz must be > 0")
    if why := _finite_array(c.response.z_ohm, "response.z_ohm"):
        out.append(f"{where} -> {why}")
    if c.cv is not None:
        for what, values in (("cv.bias_V", c.cv.bias_V), ("cv.cap_F", c.cv.cap_F),
                             ("cv operating point", [c.cv.operating_bias_V, c.cv.operating_cap_F])):
            if why := _finite_array(values, what):
                out.append(f"{where} -> {why}")
    return out


def cell_problems(where: str, cell: CellResult, corners: Iterable[int] | None = None) -> list[str]:
    """Problems of one cell result's identity, per-cell columns and corners (not its keys).

    ``corners``: indices of the corners to check (None: all); ``unchecked_corners`` tells which
    a run's cells need.
    """
    out = []
    rules = (("name", cell.name, CELL_NAME, "letters, digits, _, - and ., starting with a letter, "
              "at most 80"), ("family", cell.family, FAMILY_NAME, "empty, or a name like a cell name"))
    for attr, value, rule, allowed in rules:
        if not isinstance(value, str) or not rule.fullmatch(value):
            out.append(f"{where}.{attr} = {shown(value)} -> not a valid {attr}; allowed: {allowed}")
    from celllab.topologies import REGISTRY  # here: only storing and merging need the registry
    from celllab.topologies.geometry import PLACEMENTS

    if cell.topology not in REGISTRY.names():
        out.append(f"{where}.topology = {shown(cell.topology)} -> allowed: {', '.join(REGISTRY.names())}")
    if cell.placement not in PLACEMENTS:
        out.append(f"{where}.placement = {shown(cell.placement)} -> allowed: {', '.join(PLACEMENTS)}")
    if not isinstance(cell.rail, str) or not RAIL_NAME.fullmatch(cell.rail):
        out.append(f"{where}.rail = {shown(cell.rail)} -> rail names use lower-case letters, digits and _, "
                   "starting with a letter, at most 24 (core, io or a rail the deck names)")
    if cell.oxide not in OXIDES:
        out.append(f"{where}.oxide = {shown(cell.oxide)} -> allowed: {', '.join(OXIDES)}")
    if not _is_number(cell.area_um2) or not 0 < float(cell.area_um2) < math.inf:
        out.append(f"{where}.area_um2 = {shown(cell.area_um2)} -> must be a finite number > 0")
    if not _is_number(cell.gate_area_um2) or not 0 <= float(cell.gate_area_um2) < math.inf:
        out.append(f"{where}.gate_area_um2 = {shown(cell.gate_area_um2)} -> must be a finite number >= 0")
    for attr in ("width_sites", "height_rows"):
        value = getattr(cell, attr)
        if not isinstance(value, (int, np.integer)) or isinstance(value, bool) or value < 1:
            out.append(f"{where}.{attr} = {shown(value)} -> must be a whole number >= 1")
    if not isinstance(cell.esd_safe, (bool, np.bool_)):
        out.append(f"{where}.esd_safe = {shown(cell.esd_safe)} -> must be true or false")
    if why := _text_list_problem(cell.notes, "notes"):
        out.append(f"{where}.notes -> {why}")
    all_corners = list(cell.corners)
    for j in range(len(all_corners)) if corners is None else corners:
        c = all_corners[j]
        out += corner_problems(f"{where}.corners[{j}] ({shown(c.corner, 40)})", c)
    return out


def run_corner_problems(where: str, c: CornerResult, run_corners: Collection[str]) -> list[str]:
    """How a corner of a fresh run fits it: one of the run's corners (when it names any), every
    metric present and none unknown, response and C-V arrays of matching 1-D shapes."""
    out = []
    if run_corners and c.corner not in run_corners:
        out.append(
            f"{where}.corner = {c.corner!r} -> not one of the run's corners "
            f"({', '.join(sorted(run_corners))})"
        )
    keys = set(c.metrics)
    if missing := [m for m in METRIC_NAMES if m not in keys]:
        out.append(f"{where}.metrics -> missing {', '.join(missing)}")
    if extra := sorted(keys - set(METRIC_NAMES)):
        out.append(
            f"{where}.metrics -> unknown {', '.join(extra)}; allowed: {', '.join(METRIC_NAMES)}"
        )
    f, z = np.asarray(c.response.freq_Hz), np.asarray(c.response.z_ohm)
    if f.ndim != 1 or f.shape != z.shape:
        out.append(
            f"{where}.response -> freq_Hz {f.shape} and z_ohm {z.shape} must be equal 1-D arrays"
        )
    if c.cv is not None:
        b, cap = np.asarray(c.cv.bias_V), np.asarray(c.cv.cap_F)
        if b.ndim != 1 or b.shape != cap.shape:
            out.append(
                f"{where}.cv -> bias_V {b.shape} and cap_F {cap.shape} must be equal 1-D arrays"
            )
    return out


# --------------------------------------------------------------------------- batch check
#
# A library build stores thousands of cells x corners; checking every metric value one by one
# (``metric_problem``) costs more than writing them. ``unchecked_corners`` checks all corners of
# a run at once with numpy and hands back only the corners it cannot clear; ``corner_problems``
# and ``run_corner_problems`` then say what is wrong with those. It clears a corner only when
# both would find nothing, so the messages are those of the per-value checks; anything it does
# not recognise at a glance (a value that is not a plain float, an array that is not a 1-D
# numeric ndarray, ...) is left to them.

#: Cells checked together (bounds the memory of the joined response arrays).
BATCH_CELLS = 1024
#: A whole word of a flag, as ``flag_names_metric`` delimits it.
_WORD = re.compile(r"[A-Za-z0-9_]+")
assert all(_WORD.fullmatch(m) for m in METRIC_NAMES)  # so a metric is named iff it is a word
_METRIC_SET = frozenset(METRIC_NAMES)
_METRIC_INDEX = {m: k for k, m in enumerate(METRIC_NAMES)}
_metric_values = operator.itemgetter(*METRIC_NAMES)
_RANGES = [METRIC_RANGES.get(m, (-math.inf, math.inf, True)) for m in METRIC_NAMES]
_LO = np.array([r[0] for r in _RANGES])
_HI = np.array([r[1] for r in _RANGES])
_LO_SHUT = ~np.array([r[2] for r in _RANGES])
#: Value types read straight into a float array: exact, and None / NaN both become NaN.
_PLAIN = frozenset({float, np.float64, type(None)})
_PLAIN_FLOATS = (float, np.float64)


def _plain_array(a: Any, kinds: str) -> bool:
    return type(a) is np.ndarray and a.ndim == 1 and a.dtype.kind in kinds


def _bad_arrays(arrays: list[tuple[int, np.ndarray]], positive: bool = False) -> set[int]:
    """Numbers k of the (k, array) pairs holding a value that is not finite (or, ``positive``,
    not > 0): all arrays joined first, one by one only when the joined one fails."""
    if not arrays:
        return set()
    joined = np.concatenate([a for _, a in arrays])
    if np.isfinite(joined).all() and (not positive or (joined > 0).all()):
        return set()
    return {k for k, a in arrays
            if not np.isfinite(a).all() or (positive and not (a > 0).all())}


def unchecked_corners(cells: Sequence[CellResult], run_corners: Collection[str]) -> list[list[int]]:
    """Per cell, the indices of the corners that may have a problem under ``corner_problems`` or
    ``run_corner_problems``; every other corner has none (checked here all at once)."""
    out: list[list[int]] = []
    for start in range(0, len(cells), BATCH_CELLS):
        out += _unchecked_batch(cells[start:start + BATCH_CELLS], run_corners)
    return out


def _unchecked_batch(cells: Sequence[CellResult], run_corners: Collection[str]) -> list[list[int]]:
    names_ok: dict[str, bool] = {}
    flag_metrics: dict[str, list[int]] = {}  # flag -> the metrics it names ([-1]: too long)
    where: list[tuple[int, int]] = []  # (cell, corner) of each corner number k
    bad: set[int] = set()
    rows: list[tuple[Any, ...]] = []
    conditions: list[tuple[Any, Any]] = []
    named_k: list[int] = []  # (corner number, metric index) of the metrics a flag names
    named_m: list[int] = []
    freqs: list[tuple[int, np.ndarray]] = []
    others: list[tuple[int, np.ndarray]] = []
    operating: list[tuple[Any, Any]] = []
    operating_k: list[int] = []
    clear_row = (1.0,) * len(METRIC_NAMES)
    for i, cell in enumerate(cells):
        for j, c in enumerate(cell.corners):
            k = len(where)
            where.append((i, j))
            name, metrics, flags, response, cv = c.corner, c.metrics, c.flags, c.response, c.cv
            ok = type(name) is str
            if ok:
                ok = names_ok.get(name)  # type: ignore[assignment]
                if ok is None:
                    ok = names_ok[name] = bool(CORNER_NAME.fullmatch(name)) and (
                        not run_corners or name in run_corners)
            ok = ok and type(metrics) is dict and metrics.keys() == _METRIC_SET
            flagged: list[int] = []  # indices of the metrics its flags name
            if ok and isinstance(flags, (list, tuple)):
                for flag in flags:
                    if type(flag) is not str:
                        ok = False
                        break
                    found = flag_metrics.get(flag)
                    if found is None:
                        found = flag_metrics[flag] = (
                            [_METRIC_INDEX[m] for m in _METRIC_SET.intersection(_WORD.findall(flag))]
                            if len(flag) <= MAX_TEXT else [-1])
                    flagged += found
                ok = ok and -1 not in flagged
            else:
                ok = False
            f, z = (response.freq_Hz, response.z_ohm) if ok else (None, None)
            ok = ok and _plain_array(f, "fiu") and _plain_array(z, "fciu") and f.shape == z.shape
            if ok and cv is not None:
                b, cap = cv.bias_V, cv.cap_F
                ok = (_plain_array(b, "fciu") and _plain_array(cap, "fciu") and b.shape == cap.shape
                      and type(cv.operating_bias_V) in _PLAIN_FLOATS
                      and type(cv.operating_cap_F) in _PLAIN_FLOATS)
                if ok:
                    others += [(k, b), (k, cap)]
                    operating.append((cv.operating_bias_V, cv.operating_cap_F))
                    operating_k.append(k)
            if not ok:
                bad.add(k)
                rows.append(clear_row)
                conditions.append((25.0, 1.0))
                continue
            rows.append(_metric_values(metrics))
            conditions.append((c.temperature_C, c.supply_V))
            freqs.append((k, f))
            others.append((k, z))
            named_k += [k] * len(flagged)
            named_m += flagged
    if not where:
        return [[] for _ in cells]
    if not _PLAIN.issuperset(map(type, itertools.chain.from_iterable(rows))):
        for k, row in enumerate(rows):  # values of other types go to metric_problem
            if not _PLAIN.issuperset(map(type, row)):
                bad.add(k)
                rows[k] = clear_row
    for k, pair in enumerate(conditions):
        if type(pair[0]) not in _PLAIN_FLOATS or type(pair[1]) not in _PLAIN_FLOATS:
            bad.add(k)
            conditions[k] = (25.0, 1.0)
    values = np.array(rows, dtype=float)
    named = np.zeros(values.shape, dtype=bool)
    named[named_k, named_m] = True
    empty = np.isnan(values)
    refused = np.where(empty, ~named, ~np.isfinite(values) | (values < _LO)
                       | ((values == _LO) & _LO_SHUT) | (values > _HI))
    cond = np.array(conditions, dtype=float)
    lo_t, hi_t = TEMPERATURE_RANGE_C
    lo_v, hi_v = SUPPLY_RANGE_V
    refused_cond = ~((lo_t < cond[:, 0]) & (cond[:, 0] <= hi_t) & (lo_v < cond[:, 1]) & (cond[:, 1] <= hi_v))
    bad.update(np.flatnonzero(refused.any(axis=1) | refused_cond).tolist())
    if operating:
        finite = np.isfinite(np.array(operating, dtype=float)).all(axis=1)
        bad.update(k for k, ok in zip(operating_k, finite.tolist(), strict=True) if not ok)
    bad |= _bad_arrays(freqs, positive=True) | _bad_arrays(others)
    out: list[list[int]] = [[] for _ in cells]
    for k in sorted(bad):
        i, j = where[k]
        out[i].append(j)
    return out
