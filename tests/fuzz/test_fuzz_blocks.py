"""Fuzzing block files at their loader (``celllab.planner.parse_block`` / ``load_block``):
edited demo blocks are accepted or refused with problems naming the file and the field."""

from __future__ import annotations

import math
import tomllib
from collections import Counter
from pathlib import Path
from typing import Any

from hypothesis import given
from hypothesis import strategies as st

from celllab.errors import PlanError
from celllab.planner import load_block, parse_block
from celllab.planner.supply import supply_network

from .conftest import fuzz_settings
from .strategies import assert_located, edit, paths, pick, values

BLOCKS = Path(__file__).resolve().parents[2] / "process_decks" / "blocks"
BASES = [tomllib.loads(p.read_text(encoding="utf-8")) for p in sorted(BLOCKS.glob("*.toml"))]
FILE = "fuzz_block.toml"


@st.composite
def edited_blocks(draw: st.DrawFn) -> dict[str, Any]:
    data = draw(st.sampled_from(BASES))
    for _ in range(draw(st.integers(0, 3))):
        if not (options := paths(data)):
            break
        path = pick(draw, options)
        data = edit(data, draw(st.sampled_from(["set", "set", "delete", "extra"])), path, draw(values()))
    if draw(st.integers(0, 9)) == 0:
        depth = draw(st.sampled_from([10, 60, 400]))
        candidates = data.get("candidates") if isinstance(data.get("candidates"), dict) else {}
        data = {**data, "candidates": {**candidates, "where": "(" * depth + "esd_safe" + ")" * depth}}
    return data


def _numbers(node: Any) -> list[float]:
    if isinstance(node, dict):
        return [x for v in node.values() for x in _numbers(v)]
    if isinstance(node, (list, tuple)):
        return [x for v in node for x in _numbers(v)]
    return [float(node)] if isinstance(node, (int, float)) and not isinstance(node, bool) else []


def _finite_numbers(model: Any) -> bool:
    return all(math.isfinite(v) for v in _numbers(model.model_dump()))


@fuzz_settings("block_data")
@given(data=edited_blocks())
def test_block_files_are_accepted_or_located(data: dict[str, Any], outcomes: Counter[str]) -> None:
    outcomes["block_data.cases"] += 1
    try:
        block = parse_block(data, FILE)
    except PlanError as exc:
        assert_located(exc, FILE)
        outcomes["block_data.rejected"] += 1
        return
    assert _finite_numbers(block)
    outcomes["block_data.accepted"] += 1


NETWORK_BASES = [data for data in BASES if "network" in data]


@st.composite
def edited_networks(draw: st.DrawFn) -> dict[str, Any]:
    """A demo block with a [network] table, edited only inside that table (the rest of the
    block stays valid, so a refusal is the network's)."""
    data = draw(st.sampled_from(NETWORK_BASES))
    for _ in range(draw(st.integers(1, 3))):
        if not (options := [("network", *p) for p in paths(data["network"])]):
            break
        path = pick(draw, options)
        data = edit(data, draw(st.sampled_from(["set", "set", "delete", "extra"])), path, draw(values()))
    return data


@fuzz_settings("network_data")
@given(data=edited_networks())
def test_network_tables_are_accepted_or_located(data: dict[str, Any], outcomes: Counter[str]) -> None:
    outcomes["network_data.cases"] += 1
    try:
        block = parse_block(data, FILE)
    except PlanError as exc:
        assert_located(exc, FILE)
        outcomes["network_data.rejected"] += 1
        return
    assert _finite_numbers(block)
    if block.network is not None:
        supply_network(block, supply=1.2)  # an accepted table builds its network
    outcomes["network_data.accepted"] += 1


def test_block_file_text_problems_are_located(tmp_path: Path) -> None:
    cases = {
        "bom.toml": b"\xef\xbb\xbf" + (BLOCKS / "lumen130_dsp.toml").read_bytes(),
        "latin1.toml": b"[block]\nname = \"caf\xe9\"\n",
        "syntax.toml": b"[block\nname = 1\n",
        "nested.toml": b"x = " + b"[" * 5000 + b"]" * 5000 + b"\n",
    }
    for name, raw in cases.items():
        path = tmp_path / name
        path.write_bytes(raw)
        try:
            load_block(path)
        except PlanError as exc:
            assert_located(exc, str(path))
            assert name != "bom.toml", str(exc)
