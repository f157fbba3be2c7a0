"""The ``afford`` verb: the affordable thin-oxide area over a mission, the broken-oxide cost and
the HBM/CDM answer, from the command line; bad input is a located message with exit status 2."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from celllab.cells import load_cells
from celllab.cli.main import main
from celllab.deck import load_deck
from celllab.fill_risk import fill_oxide_risk

REPO = Path(__file__).resolve().parents[2]
DECK = str(REPO / "process_decks" / "lumen130.toml")
CELLS = str(REPO / "process_decks" / "cells" / "lumen130_cells.toml")
CELL = "lm_ncap-w16-h1-f2"
BASE = ["afford", "--deck", DECK, "--cells", CELLS, "--cell", CELL, "--corners", "typ_25C"]


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out = capsys.readouterr()
    return code, out.out, out.err


def test_affordable_area_meets_the_target_exactly(capsys: pytest.CaptureFixture[str]) -> None:
    # The printed affordable area, filled, gives exactly the failure target: A = -ln(1 - F*) / H
    # inverts F = 1 - exp(-A H) (weakest link, docs/references.md [86]); rel 1e-6
    code, out, err = _run(capsys, *BASE, "--years", "10", "--temp-C", "125", "--target-ppm", "10",
                          "--no-esd", "--json")
    assert code == 0, err
    answer = json.loads(out)
    area = answer["affordable_footprint_mm2"][0]
    assert answer["mission"]["temperature_K"] == pytest.approx(398.15, rel=1e-12)
    deck = load_deck(DECK)
    cell = [c for c in load_cells(CELLS, deck) if c.name == CELL]
    check = fill_oxide_risk(deck, cell, area, corners=["typ_25C"], life_years=10, temperature_C=125,
                            target_ppm=10)
    assert check.failure_ppm[0] == pytest.approx(10.0, rel=1e-6)
    assert "not sign-off" in answer["caution"]


def test_the_fill_question_in_words(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = _run(capsys, *BASE, "--area-mm2", "0.3", "--years", "10", "--temp-C", "125",
                          "--hbm-V", "2000")
    assert code == 0, err
    assert "0.3 mm^2 of decap" in out and "10 years at 125 degC" in out
    assert "one broken oxide draws" in out
    assert "HBM +2000 V" in out and "CDM +250 V" in out and "margin" in out
    assert "not sign-off" in out


@pytest.mark.parametrize(("extra", "field", "says"), [
    (["--years", "-1"], "--years", "> 0"),
    (["--temp-C", "300"], "--temp-C", "<= 200"),
    (["--area-mm2", "0"], "--area-mm2", "> 0"),
    (["--target-ppm", "nan"], "--target-ppm", "ppm"),
    (["--hbm-V", "-2000"], "--hbm-V", "> 0"),
])
def test_bad_numbers_are_refused(capsys: pytest.CaptureFixture[str], extra: list[str], field: str,
                                 says: str) -> None:
    code, _, err = _run(capsys, *BASE, "--no-esd", *extra)
    assert code == 2 and field in err and says in err and "Traceback" not in err


def test_unknown_cell_and_corner_are_located(capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = _run(capsys, "afford", "--deck", DECK, "--cells", CELLS, "--cell", "nope", "--no-esd")
    assert code == 2 and "--cell" in err and "nope" in err and "lm_ncap" in err
    code, _, err = _run(capsys, "afford", "--deck", DECK, "--cells", CELLS, "--cell", CELL,
                        "--corners", "hot", "--no-esd")
    assert code == 2 and "unknown corner" in err and "typ_25C" in err


def test_help_names_the_question(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit):
        main(["afford", "--help"])
    out = capsys.readouterr().out
    assert "afford" in out and "--area-mm2" in out and "not sign-off" in out
