"""Hypothesis strategies shared by the fuzz tests: hostile values and edits of good inputs."""

from __future__ import annotations

import copy
import math
from typing import Any

from hypothesis import strategies as st

from celllab.errors import CelllabError

#: Numbers at and beyond every edge: signed zeros, subnormals, the float extremes, non-finite.
EDGE_FLOATS = [0.0, -0.0, 5e-324, 1e-300, 1e-12, 0.5, 1.0, 3.0, 1e6, 1e300, 1.7976931348623157e308,
               -1.0, -1e300, math.inf, -math.inf, math.nan]
#: Texts a careless or hostile user types: empty, reserved words, escapes, very long, non-ASCII.
EDGE_TEXTS = ["", " ", "worst", "best", "all", "core", "io", "metal", "n_poly", "M1", "M9",
              "nmos_inversion", "mom", "\x1b[31mred\x1b[0m", "line\nbreak", "tab\tstop", "\u202eevil",
              "a" * 300, "\u00e9t\u00e9", "corners.typ_25C.temperature_C", "oxides.core.t_ox_nm",
              "metals[0].thickness_nm", "metals[99].thickness_nm", "../../etc/passwd", "x" * 41,
              "\u0000nul"]


_SCALARS = st.one_of(
    st.sampled_from(EDGE_FLOATS),
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-(2**70), max_value=2**70),
    st.sampled_from([0, 1, 2, -1, 4096, 4097, 10**9, 2**63]),
    st.booleans(),
    st.sampled_from(EDGE_TEXTS),
    st.text(max_size=12),
)
_VALUES = st.one_of(
    _SCALARS,
    st.lists(_SCALARS, max_size=4),
    st.dictionaries(st.sampled_from(["start", "stop", "step", "count", "spacing", "x"]), _SCALARS,
                    max_size=4),
)


def scalars() -> st.SearchStrategy[Any]:
    """Any TOML-representable scalar, biased to the edges (one shared strategy object)."""
    return _SCALARS


def values() -> st.SearchStrategy[Any]:
    """Scalars, short lists and small tables of them (one shared strategy object)."""
    return _VALUES


def pick(draw: st.DrawFn, options: list[Any]) -> Any:
    """One of ``options`` (cheaper than building a sampled_from strategy per draw)."""
    return options[draw(st.integers(0, len(options) - 1))]


def paths(data: Any, prefix: tuple[Any, ...] = ()) -> list[tuple[Any, ...]]:
    """Every key path of nested dicts and lists (tables and leaves)."""
    out = [prefix] if prefix else []
    if isinstance(data, dict):
        for k, v in data.items():
            out += paths(v, (*prefix, k))
    elif isinstance(data, list):
        for i, v in enumerate(data):
            out += paths(v, (*prefix, i))
    return out


def _parent(data: Any, path: tuple[Any, ...]) -> Any:
    node = data
    for p in path[:-1]:
        node = node[p]
    return node


def edit(data: Any, action: str, path: tuple[Any, ...], value: Any) -> Any:
    """A deep copy of ``data`` with one edit at ``path``: set, delete, or add an unknown key."""
    out = copy.deepcopy(data)
    parent = _parent(out, path)
    key = path[-1]
    if action == "set":
        parent[key] = value
    elif action == "delete":
        if isinstance(parent, list):
            parent.pop(key)
        else:
            parent.pop(key)
    elif action == "extra" and isinstance(parent, dict):
        parent[f"{key}_extra"] = value
    return out


def assert_located(exc: CelllabError, file: str) -> None:
    """Every problem names ``file`` and says where (a field or a line) and what."""
    assert exc.problems, "an error without problems"
    for p in exc.problems:
        assert p.file == file or p.file.startswith(file), (p.file, file, str(p))
        assert p.message, str(p)
        text = str(p)
        assert "Traceback" not in text and len(text) < 20_000
