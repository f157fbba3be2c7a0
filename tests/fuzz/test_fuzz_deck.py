"""Fuzzing process decks: edited good decks, as parsed data and as TOML text.

Each generated deck is either accepted - and then every parameter is a finite number inside its
documented range and every corner builds - or refused with problems that name the file and the
field or line. Anything else (a traceback, a hang) fails the test.
"""

from __future__ import annotations

import math
import tomllib
from collections import Counter
from pathlib import Path
from typing import Any

from hypothesis import given
from hypothesis import strategies as st

from celllab.deck import Deck, load_deck, numeric_paths, parse_deck
from celllab.errors import DeckError

from .conftest import fuzz_settings
from .strategies import assert_located, edit, paths, pick, scalars, values

BASE_PATH = Path(__file__).resolve().parents[2] / "process_decks" / "lumen130.toml"
BASE_TEXT = BASE_PATH.read_text(encoding="utf-8")
BASE = tomllib.loads(BASE_TEXT)
PATHS = paths(BASE)
NUMERIC = numeric_paths(load_deck(BASE_PATH))
FILE = "fuzz_deck.toml"


def _check_accepted(deck: Deck) -> None:
    data = deck.full_dump()
    for path in numeric_paths(deck):
        node: Any = data
        for part in path.replace("[", ".").replace("]", "").split("."):
            node = node[int(part)] if isinstance(node, list) else node[part]
        assert math.isfinite(node), (path, node)
    for corner in deck.corners:
        assert isinstance(deck.at_corner(corner), Deck)


corner_names = st.one_of(st.sampled_from(["worst", "best", "all", "WORST", "hot", "typ_25C", "a" * 41,
                                          "x y", "\u00e9t\u00e9", "ok-1"]), st.text(max_size=8))
corner_tables = st.fixed_dictionaries(
    {"temperature_C": scalars()},
    optional={"supply_scale": scalars(),
              "set": st.dictionaries(st.one_of(st.sampled_from(NUMERIC), st.sampled_from(
                  ["corners.typ_25C.temperature_C", "corners", "metals[7].height_nm", "process.name"]),
                  st.text(max_size=10)), scalars(), max_size=3),
              "scale": st.dictionaries(st.sampled_from(NUMERIC), scalars(), max_size=2)},
)


@st.composite
def edited_decks(draw: st.DrawFn) -> dict[str, Any]:
    data = BASE
    for _ in range(draw(st.integers(1, 3))):
        kind = pick(draw, ["set", "set", "delete", "extra", "corner", "metals"])
        metals = data.get("metals")
        if kind == "corner" and isinstance(data.get("corners"), dict):
            data = {**data, "corners": {**data["corners"], draw(corner_names): draw(corner_tables)}}
        elif kind == "metals" and isinstance(metals, list) and metals and isinstance(metals[-1], dict):
            extra = draw(st.integers(0, 40))
            data = {**data, "metals": data["metals"] + [dict(data["metals"][-1], name=f"X{i}",
                                                             height_nm=9000 + 500 * i)
                                                        for i in range(extra)]}
        elif kind in ("set", "delete", "extra"):
            options = paths(data) if data is not BASE else PATHS
            if not options:
                break
            path = pick(draw, options)
            data = edit(data, kind, path, draw(values()))
    return data


@fuzz_settings("deck_data")
@given(data=edited_decks())
def test_parsed_decks_are_accepted_or_located(data: dict[str, Any], outcomes: Counter[str]) -> None:
    outcomes["deck_data.cases"] += 1
    try:
        deck = parse_deck(data, FILE, None)
    except DeckError as exc:
        assert_located(exc, FILE)
        outcomes["deck_data.rejected"] += 1
        return
    _check_accepted(deck)
    outcomes["deck_data.accepted"] += 1


SHORT_TEXT = st.text(max_size=8)
STRAY_BYTES = st.binary(min_size=1, max_size=3)
NUMBER_LITERALS = ["nan", "inf", "-inf", "1e999", "-0.0", "0x10", "1_000", "5e-324", "+1", "1e-300",
                   "9223372036854775808", '"1.2"', "true", "[]", "{}"]


@st.composite
def edited_texts(draw: st.DrawFn) -> bytes:
    text = BASE_TEXT
    for _ in range(draw(st.integers(1, 3))):
        kind = pick(draw, ["number", "insert", "delete", "line", "table", "bom", "bytes"])
        at = draw(st.integers(0, len(text)))
        if kind == "number":
            # replace the value of one "key = value" line by an edge literal
            lines = text.splitlines()
            candidates = [i for i, line in enumerate(lines) if " = " in line and not line.startswith("#")]
            i = pick(draw, candidates)
            key = lines[i].split(" = ", 1)[0]
            lines[i] = f"{key} = {pick(draw, NUMBER_LITERALS)}"
            text = "\n".join(lines) + "\n"
        elif kind == "insert":
            text = text[:at] + draw(SHORT_TEXT) + text[at:]
        elif kind == "delete":
            text = text[:at] + text[at + draw(st.integers(1, 40)):]
        elif kind == "line":
            lines = text.splitlines()
            i = draw(st.integers(0, len(lines) - 1))
            lines.insert(i, lines[draw(st.integers(0, len(lines) - 1))])
            text = "\n".join(lines) + "\n"
        elif kind == "table":
            text += pick(draw, ["\n[corners.worst]\ntemperature_C = 1\n",
                                          '\n[corners.c2]\ntemperature_C = 1\nset = { "corners.typ_25C.temperature_C" = 3 }\n',
                                          "\n[[metals]]\nname = \"M1\"\n", "\n[process]\n", "\n[[corners]]\n",
                                          "\n" + "[" * 500 + "\n", "\nx = " + "[" * 2000 + "]" * 2000 + "\n"])
        elif kind == "bom":
            text = "\ufeff" + text
    raw = text.encode("utf-8", "surrogatepass")
    if draw(st.booleans()) and draw(st.booleans()):  # a quarter: stray bytes that are not UTF-8
        at = draw(st.integers(0, len(raw)))
        raw = raw[:at] + draw(STRAY_BYTES) + raw[at:]
    return raw


@fuzz_settings("deck_text")
@given(raw=edited_texts())
def test_deck_files_are_accepted_or_located(tmp_path_factory: Any, raw: bytes,
                                            outcomes: Counter[str]) -> None:
    outcomes["deck_text.cases"] += 1
    path = tmp_path_factory.mktemp("deck") / "fuzz.toml"
    path.write_bytes(raw)
    try:
        deck = load_deck(path)
    except DeckError as exc:
        assert_located(exc, str(path))
        outcomes["deck_text.rejected"] += 1
        return
    _check_accepted(deck)
    outcomes["deck_text.accepted"] += 1
