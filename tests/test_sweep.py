"""One-parameter sweeps: the values asked for, and the records the engine gives for each."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from celllab.cells import load_cells
from celllab.deck import load_deck
from celllab.engine import characterize
from celllab.errors import CelllabError
from celllab.sweep import sweep_cell, sweep_values

DECKS = Path(__file__).resolve().parents[1] / "process_decks"


@pytest.fixture(scope="module")
def deck_and_cell():  # type: ignore[no-untyped-def]
    deck = load_deck(DECKS / "lumen130.toml")
    cells = load_cells(DECKS / "cells" / "lumen130_cells.toml", deck)
    return deck, next(c for c in cells if c.topology == "nmos_inversion")


def test_sweep_values_linear_log_and_integer() -> None:
    assert sweep_values(1.0, 2.0, 5) == pytest.approx([1.0, 1.25, 1.5, 1.75, 2.0])
    # Source: a log-spaced range has a constant ratio between neighbours; exact
    assert np.diff(np.log10(sweep_values(1.0, 1000.0, 4, "log"))) == pytest.approx([1, 1, 1])
    assert sweep_values(1, 4, 7, integer=True) == [1, 2, 3, 4]  # rounded, repeats dropped
    for bad in ((1.0, 1.0, 5, "linear"), (1.0, 2.0, 1, "linear"), (-1.0, 2.0, 3, "log")):
        with pytest.raises(ValueError):
            sweep_values(*bad)


def test_deck_sweep_equals_one_engine_run_per_value(deck_and_cell) -> None:  # type: ignore[no-untyped-def]
    deck, spec = deck_and_cell
    values = [1.9, 2.2, 2.5]
    result = sweep_cell(deck, spec, "oxides.core.t_ox_nm", values)
    assert [v for v, _ in result.ok()] == values
    for value, cell in result.ok():
        changed = deck.with_changes({"oxides.core.t_ox_nm": value})
        direct = characterize(changed, [spec.with_changes({}, changed)]).cells[0]
        for a, b in zip(cell.corners, direct.corners):
            assert a.metrics["leakage_nA_per_nF"] == pytest.approx(b.metrics["leakage_nA_per_nF"])
            assert a.metrics["cap_density_fF_per_um2"] == pytest.approx(b.metrics["cap_density_fF_per_um2"])


def test_geometry_sweep_runs_every_variant_and_keeps_rejected_values(deck_and_cell) -> None:  # type: ignore[no-untyped-def]
    deck, spec = deck_and_cell
    result = sweep_cell(deck, spec, "width_sites", [4.0, 8.0, 100000.0])
    assert [c is not None for c in result.cells] == [True, True, False]
    assert result.problems[2]  # beyond the field's limit: a located problem, not a crash
    direct = characterize(deck, [spec.with_changes({"width_sites": 8}, deck)]).cells[0]
    assert result.cells[1].corners[0].metrics["cap_fF"] == pytest.approx(
        direct.corners[0].metrics["cap_fF"])


def test_an_unknown_parameter_is_named(deck_and_cell) -> None:  # type: ignore[no-untyped-def]
    deck, spec = deck_and_cell
    with pytest.raises(CelllabError) as caught:
        sweep_cell(deck, spec, "oxides.core.t_ox_mm", [1.0, 2.0])
    assert "oxides.core.t_ox_mm" in str(caught.value.problems[0])
