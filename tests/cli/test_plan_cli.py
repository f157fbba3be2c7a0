"""The ``plan`` verb end to end: a catalog built by ``celllab build`` from the demo decks, the
demo block files, the text report, --json and --out."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from celllab.cli.build import CAUTION
from celllab.cli.main import main

REPO = Path(__file__).resolve().parents[2]
DECKS = REPO / "process_decks"
BLOCKS = {"lumen130_dsp": "lumen130", "quill28hk_soc": "quill28hk"}


@pytest.fixture(scope="module")
def catalog(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("plan_cli") / "demo.sqlite"
    for deck in BLOCKS.values():  # one build per deck: a cell file belongs to its deck
        assert main(["build", "--catalog", str(path), "--quiet",
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
    for word in ("BLOCKFILE", "--catalog", "--json", "--out", "leakage_budget_uA", "max_kinds"):
        assert word in out


def test_plan_listed_in_top_level_help(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit):
        main(["--help"])
    assert "plan" in capsys.readouterr().out


@pytest.mark.parametrize("block", list(BLOCKS))
def test_report_and_json(block: str, catalog: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = DECKS / "blocks" / f"{block}.toml"
    code, out, err = _run(capsys, "plan", str(path), "--catalog", str(catalog))
    assert code == 0, err
    lines = out.splitlines()
    assert lines[0].startswith("Block ") and BLOCKS[block] in lines[0]
    assert any(line.startswith("name ") and "count" in line and "total_cap_nF" in line
               for line in lines)
    for label in ("target impedance [mohm]", "package resonance f0 [MHz]",
                  "first droop, undamped [mV]", "|Z| below target", "fill leakage / budget [uA]",
                  "sites used / empty"):
        assert label in out
    assert "does not bound the worst-case" in out
    assert lines[-1] == CAUTION

    code, out, err = _run(capsys, "plan", str(path), "--catalog", str(catalog), "--json")
    assert code == 0, err
    data = json.loads(out)
    assert data["deck"] == BLOCKS[block] and data["caution"] == CAUTION
    assert 1 <= len(data["cells"]) <= 3
    assert data["sites_used"] == sum(c["sites"] for c in data["cells"]) <= data["empty_sites"]
    assert data["leakage_uA"] <= data["leakage_budget_uA"] * (1 + 1e-9)
    assert data["die_cap_nF"] == pytest.approx(data["fill_cap_nF"] + data["intrinsic_cap_nF"])
    # Source: docs/references.md [101] [DF], f0 = 1/(2 pi sqrt(L C)) and Z0 = sqrt(L/C) from the
    # printed L and C; rel 1e-9
    l_H, c_F = data["package_inductance_nH"] * 1e-9, data["die_cap_nF"] * 1e-9
    assert data["f0_MHz"] * 1e6 == pytest.approx(1 / (2 * np.pi * np.sqrt(l_H * c_F)), rel=1e-9)
    assert data["z0_mohm"] * 1e-3 == pytest.approx(np.sqrt(l_H / c_F), rel=1e-9)
    assert data["below_target"] == (data["worst_z_over_target"] <= 1)


def test_out_writes_csv_and_touchstone(catalog: Path, tmp_path: Path,
                                       capsys: pytest.CaptureFixture[str]) -> None:
    skrf = pytest.importorskip("skrf")
    path = DECKS / "blocks" / "lumen130_dsp.toml"
    out_dir = tmp_path / "plans"
    code, out, err = _run(capsys, "plan", str(path), "--catalog", str(catalog), "--json",
                          "--out", str(out_dir))
    assert code == 0, err
    data = json.loads(out)
    csv_path, s1p_path = out_dir / "dsp_core_z.csv", out_dir / "dsp_core_z.s1p"
    assert sorted(data["files"]) == sorted([str(csv_path), str(s1p_path)])
    rows = [line for line in csv_path.read_text().splitlines() if not line.startswith("#")]
    assert rows[0].split(",")[:2] == ["freq_Hz", "z_mag_ohm"]
    table = np.loadtxt(rows[1:], delimiter=",")
    # Source: scikit-rf's Touchstone v1.1 reader; the same Z(f) as the CSV, rel 1e-9
    net = skrf.Network(str(s1p_path))
    np.testing.assert_allclose(net.f, table[:, 0], rtol=1e-10)
    np.testing.assert_allclose(np.abs(net.z[:, 0, 0]), table[:, 1], rtol=1e-9)
    np.testing.assert_allclose(table[:, 5], data["target_impedance_mohm"] * 1e-3, rtol=1e-12)
    # the swept peak lies at or above every stored point
    assert data["peak_z_mohm"] * 1e-3 >= table[:, 1].max() * (1 - 1e-9)


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
