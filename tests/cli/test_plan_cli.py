"""The ``plan`` verb end to end: a catalog built by ``celllab build`` from the demo decks, the
demo block files, the text report, --json and --out."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from celllab.cli.main import main
from celllab.export import CAUTION

REPO = Path(__file__).resolve().parents[2]
DECKS = REPO / "process_decks"
BLOCKS = {"lumen130_dsp": "lumen130", "quill28hk_soc": "quill28hk"}


@pytest.fixture(scope="module")
def catalog(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("plan_cli") / "demo.sqlite"
    for deck in BLOCKS.values():  # one build per deck: a cell file belongs to its deck
        assert main(["build", "--catalog", str(path), "--quiet", "--no-esd",
                     "--deck", str(DECKS / f"{deck}.toml"),
                     "--cells", str(DECKS / "cells" / f"{deck}_cells.toml")]) == 0
    return path


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_plan_has_help(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as info:
        main(["plan", "--help"])
    assert info.value.code == 0
    out = capsys.readouterr().out
    for word in ("BLOCKFILE", "--catalog", "--json", "--out", "--no-explain", "[[region]]",
                 "[network]", "not sign-off"):
        assert word in out


@pytest.mark.parametrize("block", list(BLOCKS))
def test_report_and_json(block: str, catalog: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = DECKS / "blocks" / f"{block}.toml"
    code, out, err = _run(capsys, "plan", str(path), "--catalog", str(catalog))
    assert code == 0, err
    lines = out.splitlines()
    assert lines[0].startswith("Block ") and BLOCKS[block] in lines[0]
    for label in ("Region ", "gap classes", "fill list", "fill by gap role",
                  "budgets and binding constraints", "the fill at every stored corner",
                  "leakage", "distinct kinds"):
        assert label in out
    assert lines[-1] == CAUTION
    assert err == ""  # no spinner when stderr is not a terminal

    code, out, err = _run(capsys, "plan", str(path), "--catalog", str(catalog), "--json",
                          "--no-explain")
    assert code == 0, err
    data = json.loads(out)
    assert data["deck"] == BLOCKS[block] and data["caution"] == CAUTION
    names = {c["name"] for r in data["regions"] for c in r["cells"]}
    assert 1 <= len(names) <= 4
    leak = next(b for b in data["budgets"] if b["name"] == "leakage")
    assert leak["used"] <= leak["limit"] * (1 + 1e-9)
    roles = data["roles"]
    assert sum(v["cap_nF"] for v in roles.values()) == pytest.approx(data["totals"]["cap_nF"],
                                                                      rel=1e-9)
    assert data["totals"]["leakage_uW"] == pytest.approx(
        data["totals"]["leakage_uA"] * data["supply_V"], rel=1e-12)
    pdn = data["pdn"]
    # Source: series resonance f0 = 1/(2 pi sqrt(L C)) from the printed L and C; rel 1e-9
    l_H, c_F = pdn["package_inductance_nH"] * 1e-9, pdn["die_cap_nF"] * 1e-9
    assert pdn["f0_MHz"] * 1e6 == pytest.approx(1 / (2 * np.pi * np.sqrt(l_H * c_F)), rel=1e-9)


def test_out_writes_every_file(catalog: Path, tmp_path: Path,
                               capsys: pytest.CaptureFixture[str]) -> None:
    path = DECKS / "blocks" / "lumen130_dsp.toml"
    out_dir = tmp_path / "plans"
    code, out, err = _run(capsys, "plan", str(path), "--catalog", str(catalog), "--json",
                          "--out", str(out_dir), "--no-explain")
    assert code == 0, err
    data = json.loads(out)
    # the block has a [network]: Z(f) per region, the 2-port region Z-matrix per corner and
    # the droop waveforms instead of the lumped one-port files
    corners = [c["corner"] for c in data["corners"]]
    assert len(corners) == 4
    expected = [out_dir / f"dsp_core_{s}" for s in (
        "fill.csv", "fill.json", "plan.html", "z_mac_array.csv", "z_pad_ring.csv",
        "droop.csv", *(f"{c}.s2p" for c in corners))]
    assert sorted(data["files"]) == sorted(str(p) for p in expected)
    assert all(p.is_file() for p in expected) and "wrote" in err


def test_bad_block_exits_2_without_traceback(catalog: Path, tmp_path: Path,
                                             capsys: pytest.CaptureFixture[str]) -> None:
    text = (DECKS / "blocks" / "lumen130_dsp.toml").read_text()
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace('deck = "lumen130"', 'deck = "lumen13"')
                   .replace("activity = 0.15", "activity = 0"))
    code, out, err = _run(capsys, "plan", str(bad), "--catalog", str(catalog))
    assert code == 2 and out == "" and "Traceback" not in err
    assert f"{bad}:" in err and "block.activity = 0" in err
    bad.write_text(text.replace('deck = "lumen130"', 'deck = "lumen13"'))
    code, out, err = _run(capsys, "plan", str(bad), "--catalog", str(catalog))
    assert code == 2 and "block.deck = 'lumen13'" in err and "Did you mean 'lumen130'" in err
