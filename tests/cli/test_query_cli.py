"""Catalog verbs of the command line: rank, pareto, compare, decks, show, merge."""

from __future__ import annotations

import importlib.util
import json
from dataclasses import replace
from pathlib import Path
from typing import Any

import pytest

from celllab.catalog import open_catalog
from celllab.cli.main import main
from celllab.records import METRIC_BY_NAME, METRIC_NAMES

_spec = importlib.util.spec_from_file_location(
    "catalog_synthetic", Path(__file__).resolve().parents[1] / "catalog" / "conftest.py"
)
assert _spec and _spec.loader
synthetic: Any = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(synthetic)

VERBS = ("rank", "pareto", "compare", "decks", "show", "merge")


@pytest.fixture
def cat_path(tmp_path: Path) -> Path:
    path = tmp_path / "cli.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(synthetic.make_run(n_cells=24, seed=2))
    return path


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.parametrize("verb", VERBS)
def test_every_verb_has_help(verb: str, capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as exit_info:
        main([verb, "--help"])
    assert exit_info.value.code == 0
    out = capsys.readouterr().out
    assert "--catalog" in out and len(out.splitlines()) > 5


def test_rank_help_describes_the_filter_language(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit):
        main(["rank", "--help"])
    out = capsys.readouterr().out
    assert "Filter language" in out and "worst" in out
    for m in METRIC_NAMES:
        assert m in out and f"[{METRIC_BY_NAME[m].unit}]" in out


def test_rank_json_matches_library(cat_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    where = "leakage_nA_per_nF <= 60 or esd_safe"
    code, out, _ = _run(
        capsys,
        "rank",
        "--catalog",
        str(cat_path),
        "--where",
        where,
        "--by",
        "esr_ohm",
        "--limit",
        "0",
        "--json",
    )
    assert code == 0
    with open_catalog(cat_path) as cat:
        expected = cat.query(where=where, order_by="esr_ohm")
    got = json.loads(out)
    assert [r["name"] for r in got] == [r["name"] for r in expected]
    assert [r["esr_ohm"] for r in got] == [r["esr_ohm"] for r in expected]
    assert all(r["pulse_vbd_V"] is None for r in got if r["topology"] == "mom")  # NaN -> null


def test_rank_table(cat_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = _run(
        capsys,
        "rank",
        "--catalog",
        str(cat_path),
        "--corner",
        "slow_125C",
        "--by",
        "bandwidth_GHz",
        "--asc",
        "--limit",
        "4",
        "--columns",
        "name,topology,bandwidth_GHz,esd_safe",
    )
    assert code == 0
    lines = out.splitlines()
    assert lines[0].split() == ["name", "topology", "bandwidth_GHz", "esd_safe"]
    values = [float(line.split()[2]) for line in lines[2:6]]
    assert values == sorted(values)
    assert "rows 1-4 of 24" in out


def test_rank_bad_filter_exits_2_with_caret(
    cat_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, err = _run(capsys, "rank", "--catalog", str(cat_path), "--where", "esr_ohm < 5 ohm")
    assert code == 2 and out == ""
    assert "esr_ohm < 5 ohm" in err and "^" in err and "Traceback" not in err


def test_missing_catalog_exits_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    missing = tmp_path / "none.sqlite"
    code, _, err = _run(capsys, "decks", "--catalog", str(missing))
    assert code == 2 and str(missing) in err
    assert not missing.exists()


def test_pareto(cat_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    metrics = "cap_density_fF_per_um2,leakage_nA_per_nF"
    code, out, _ = _run(
        capsys, "pareto", "--catalog", str(cat_path), "--metrics", metrics, "--json"
    )
    assert code == 0
    with open_catalog(cat_path) as cat:
        expected = cat.pareto(metrics.split(","))
    assert [r["name"] for r in json.loads(out)] == [r["name"] for r in expected]
    code, out, _ = _run(capsys, "pareto", "--catalog", str(cat_path), "--metrics", metrics)
    assert "non-dominated" in out and expected[0]["name"] in out
    code, _, err = _run(capsys, "pareto", "--catalog", str(cat_path), "--metrics", "cap_fF")
    assert code == 2 and "2 or 3" in err


def test_compare_and_show(cat_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    with open_catalog(cat_path) as cat:
        a, b = [r["name"] for r in cat.query(limit=2)]
        cell = cat.cell(a)
    code, out, _ = _run(capsys, "compare", "--catalog", str(cat_path), a, b)
    assert code == 0 and a in out.splitlines()[0] and b in out.splitlines()[0]
    assert any(line.startswith("cap_fF") and "fF" in line for line in out.splitlines())

    code, out, _ = _run(capsys, "show", "--catalog", str(cat_path), a)
    assert code == 0
    for m in METRIC_NAMES:
        assert m in out
    for c in cell.corners:
        assert c.corner in out
    code, out, _ = _run(capsys, "show", "--catalog", str(cat_path), a, "--json")
    data = json.loads(out)
    assert data["name"] == a
    assert data["corners"][0]["metrics"]["cap_fF"] == cell.corners[0].metrics["cap_fF"]
    code, _, err = _run(capsys, "show", "--catalog", str(cat_path), "no_such_cell")
    assert code == 2 and "no_such_cell" in err


def test_decks(cat_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = _run(capsys, "decks", "--catalog", str(cat_path), "--json")
    rows = json.loads(out)
    assert code == 0 and [(r["name"], r["current"], r["n_cells"]) for r in rows] == [
        ("invented_n7x", True, 24)
    ]
    assert rows[0]["corners"] == ["typ_25C", "slow_125C", "fast_m40C"]
    code, out, _ = _run(capsys, "decks", "--catalog", str(cat_path))
    assert "invented_n7x" in out and "n_cells" in out


def test_merge(cat_path: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    other = tmp_path / "other.sqlite"
    base = synthetic.make_run(n_cells=24, seed=2)
    with open_catalog(other) as cat:
        cat.store_run(synthetic.make_run(deck_name="invented_m9z", n_cells=5, seed=3))
        cat.store_run(base)
    code, out, _ = _run(capsys, "merge", str(other), "--catalog", str(cat_path))
    assert code == 0 and "5 results added" in out and "24 identical" in out

    conflicting = tmp_path / "conflicting.sqlite"
    with open_catalog(conflicting) as cat:
        cat.store_run(replace(base, cells=[synthetic.scaled_copy(base.cells[0], 3.0)]))
    code, out, _ = _run(capsys, "merge", str(conflicting), "--catalog", str(cat_path), "--json")
    report = json.loads(out)
    assert code == 1 and report["added"] == 0 and len(report["conflicts"]) == 1


def test_merge_says_when_a_teammates_deck_is_not_made_current(
        cat_path: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    other = tmp_path / "teammate.sqlite"
    newer = synthetic.make_run(deck_version=2, n_cells=3, seed=4)
    with open_catalog(other) as cat:
        cat.store_run(newer)  # stored after ours: the teammate's deck is the more recent
    code, out, _ = _run(capsys, "merge", str(other), "--catalog", str(cat_path))
    assert code == 0 and "not current: deck invented_n7x" in out and "--make-current" in out
    with open_catalog(cat_path) as cat:
        assert [d.deck_hash for d in cat.decks() if d.current] != [newer.deck_hash]
    code, out, _ = _run(capsys, "merge", str(other), "--catalog", str(cat_path),
                        "--make-current", "--json")
    report = json.loads(out)
    assert code == 0 and len(report["decks_made_current"]) == 1
    with open_catalog(cat_path) as cat:
        assert [d.deck_hash for d in cat.decks() if d.current] == [newer.deck_hash]


def test_compare_puts_long_flags_below_the_table_wrapped() -> None:
    from celllab.cli.query import render_compare

    flag = ("weak_channel: overdrive below 0.2 V, channel resistance formulas outside their "
            "strong-inversion range; ESR, tau and bandwidth are the least certain numbers")
    rows = [{"name": n, "deck": "d", "cap_fF": 1.0, "srf_GHz": 1000.0, "srf_is_bound": 1.0,
             "flags": [flag, "srf_beyond_band: no self-resonance below 1 THz"]} for n in ("a", "b")]
    text = render_compare(rows, width=80)
    table, _, below = text.partition("\nflags of a:")
    assert flag[:30] not in table  # no flags row in the table
    assert all(len(line) <= 80 for line in below.splitlines())
    assert "≥1000" in table  # the bound is marked as one


def test_show_prints_what_applies_without_float_noise(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from celllab.cells import load_cells
    from celllab.deck import load_deck
    from celllab.engine import characterize

    decks = Path(__file__).resolve().parents[2] / "process_decks"
    deck = load_deck(decks / "lumen130.toml")
    cells = [c for c in load_cells(decks / "cells" / "lumen130_cells.toml", deck)
             if c.topology == "mom"][:1]
    path = tmp_path / "c.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(characterize(deck, cells))
    code, out, _ = _run(capsys, "show", "--catalog", str(path), cells[0].name)
    assert code == 0
    assert "None" not in out  # no field that does not apply to a MOM cell
    assert "gate_length_um" not in out and "accumulation_well" not in out
    assert "9999" not in out and "0000000" not in out  # no float noise


def test_rank_tables_mark_a_bound_as_one() -> None:
    from celllab.cli.query import render_table

    rows = [{"name": "a", "bandwidth_GHz": 1000.0, "cap_fF": 2.0, "bandwidth_is_bound": 1.0},
            {"name": "b", "bandwidth_GHz": 12.5, "cap_fF": 3.0, "bandwidth_is_bound": 0.0}]
    text = render_table(rows, ["name", "cap_fF", "bandwidth_GHz"])
    assert "≥1000" in text and "≥12.5" not in text and "12.5" in text
    assert "≥: a lower bound" in text
