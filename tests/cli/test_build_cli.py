"""The check / build / demo verbs end to end (CLI mirrors the library)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from celllab.cli.main import build_parser, main

DECK = "process_decks/lumen130.toml"
CELLS = "process_decks/cells/lumen130_cells.toml"


def test_check_reports_counts(capsys) -> None:
    assert main(["check", "--deck", DECK, "--cells", CELLS]) == 0
    out = capsys.readouterr().out
    assert "lumen130: deck OK, 4 corners;" in out and "cell variants OK" in out


def test_build_twice_is_a_no_op_and_rebuild_after_deck_change_supersedes(tmp_path, capsys) -> None:
    cat = tmp_path / "c.sqlite"
    assert main(["build", "--deck", DECK, "--cells", CELLS, "--catalog", str(cat), "--json", "--corners", "typ_25C", "--no-esd"]) == 0
    first = json.loads(capsys.readouterr().out)[0]
    assert first["inserted"] == first["cells"] > 40
    assert main(["build", "--deck", DECK, "--cells", CELLS, "--catalog", str(cat), "--json", "--corners", "typ_25C", "--no-esd"]) == 0
    second = json.loads(capsys.readouterr().out)[0]
    assert second["inserted"] == 0 and second["unchanged"] == first["cells"]
    changed = tmp_path / "lumen130.toml"
    changed.write_text(Path(DECK).read_text().replace("t_ox_nm = 2.2", "t_ox_nm = 2.1"))
    assert main(["build", "--deck", str(changed), "--cells", CELLS, "--catalog", str(cat), "--json",
                 "--corners", "typ_25C", "--no-esd"]) == 0
    third = json.loads(capsys.readouterr().out)[0]
    assert third["inserted"] == first["cells"] and third["superseded"] >= 1
    assert main(["decks", "--catalog", str(cat)]) == 0
    assert capsys.readouterr().out.count("lumen130") >= 2  # history kept


def test_build_rejects_unknown_corner(tmp_path, capsys) -> None:
    assert main(["build", "--deck", DECK, "--cells", CELLS, "--catalog", str(tmp_path / "c.sqlite"),
                 "--corners", "nope"]) == 2
    err = capsys.readouterr().err
    assert "unknown corner" in err and "typ_25C" in err and "Traceback" not in err
    assert not (tmp_path / "c.sqlite").exists()  # nothing written


def test_demo_without_ui_prints_the_densest_cells(tmp_path, capsys) -> None:
    assert main(["demo", "--no-ui", "--catalog", str(tmp_path / "demo.sqlite"), "--limit", "3", "--quiet", "--no-esd"]) == 0
    out = capsys.readouterr().out
    assert "cap_density_fF_per_um2" in out and "not sign-off" in out
    assert len([line for line in out.splitlines() if "-w" in line]) == 3


@pytest.mark.parametrize("verb", sorted(build_parser()._subparsers._group_actions[0].choices))  # type: ignore[union-attr]
def test_every_verb_has_help(verb: str, capsys) -> None:
    with pytest.raises(SystemExit) as exit_info:
        main([verb, "--help"])
    assert exit_info.value.code == 0
    assert len(capsys.readouterr().out) > 200


def test_unchanged_input_is_not_characterized_again_and_reads_plainly(tmp_path, capsys, monkeypatch) -> None:
    import celllab.engine

    cat = tmp_path / "c.sqlite"
    args = ["build", "--deck", DECK, "--cells", CELLS, "--catalog", str(cat), "--corners", "typ_25C"]
    assert main([*args, "--json"]) == 0
    first = json.loads(capsys.readouterr().out)[0]
    seen: list[int] = []
    real = celllab.engine.characterize

    def counting(deck, cells, *a, **k):  # type: ignore[no-untyped-def]
        seen.append(len(cells))
        return real(deck, cells, *a, **k)

    monkeypatch.setattr(celllab.engine, "characterize", counting)
    assert main([*args, "--quiet"]) == 0
    out = capsys.readouterr().out
    assert seen == [0]  # nothing computed again
    assert f"0 new, {first['cells']} already stored" in out and "superseded" not in out
    assert "nothing to store" in out


def test_progress_goes_to_a_log_as_lines_not_bars(tmp_path, capsys) -> None:
    cat = tmp_path / "c.sqlite"
    assert main(["build", "--deck", DECK, "--cells", CELLS, "--catalog", str(cat),
                 "--corners", "typ_25C"]) == 0
    err = capsys.readouterr().err
    assert "lumen130:" in err and "cells characterized" in err
    assert "\r" not in err and "━" not in err  # stderr is not a terminal here: no bar


def test_a_build_with_esd_completes_results_an_earlier_no_esd_build_stored(tmp_path, capsys) -> None:
    """--no-esd then a build with the events: the same keys get their ESD figures (not skipped as
    already stored), the incomplete rows are replaced, not kept beside them; again: a no-op."""
    from celllab.catalog import open_catalog

    cells = tmp_path / "cells.toml"
    cells.write_text('[[family]]\nname = "t_n"\ntopology = "nmos_inversion"\nwidth_sites = [4, 8]\n',
                     encoding="utf-8")
    cat = tmp_path / "c.sqlite"
    args = ["build", "--deck", DECK, "--cells", str(cells), "--catalog", str(cat), "--json",
            "--corners", "typ_25C"]

    def hbm_margins() -> list[float | None]:
        with open_catalog(cat) as c:
            rows = c.query(corner="typ_25C", order_by="name")
        return [r["hbm_margin_V"] for r in rows]

    assert main([*args, "--no-esd"]) == 0
    assert json.loads(capsys.readouterr().out)[0]["inserted"] == 2
    assert hbm_margins() == [None, None]
    assert main(args) == 0
    done = json.loads(capsys.readouterr().out)[0]
    assert done["inserted"] == 2 and done["unchanged"] == 0 and done["completed"] == 2
    margins = hbm_margins()
    assert len(margins) == 2 and all(m is not None for m in margins)
    with open_catalog(cat) as c:  # replaced, not kept beside: two results in all, history included
        assert len(c.query(corner="typ_25C", current_only=False)) == 2
    for extra in ([], ["--no-esd"]):  # both now find everything stored
        assert main([*args, *extra]) == 0
        again = json.loads(capsys.readouterr().out)[0]
        assert again["inserted"] == 0 and again["unchanged"] == 2
    assert hbm_margins() == margins


def test_the_stored_deck_keeps_its_corner_order(tmp_path, capsys) -> None:
    """The catalog stores a deck as sorted JSON; read back, its corners come in the deck file's
    order (typical first), the order a re-characterization from the stored deck uses."""
    import tomllib

    from celllab.catalog import open_catalog

    cells = tmp_path / "cells.toml"
    cells.write_text('[[family]]\nname = "t_n"\ntopology = "nmos_inversion"\nwidth_sites = [4]\n',
                     encoding="utf-8")
    cat = tmp_path / "c.sqlite"
    assert main(["build", "--deck", DECK, "--cells", str(cells), "--catalog", str(cat), "--quiet",
                 "--no-esd"]) == 0
    in_file = list(tomllib.loads(Path(DECK).read_text(encoding="utf-8"))["corners"])
    assert in_file[0] == "typ_25C" and in_file != sorted(in_file)  # the check can tell
    with open_catalog(cat) as c:
        assert list(c.deck_params("lumen130")["corners"]) == in_file


def test_build_in_parts_is_one_run_equal_to_a_build_in_one_part(tmp_path, capsys, monkeypatch) -> None:
    """A build computes and stores a part of the cells at a time (memory of one part); split in
    parts of 7 cells it stores the same results, under one run record, as in one part."""
    import sqlite3

    import celllab.engine

    common = ["--deck", DECK, "--cells", CELLS, "--json", "--corners", "typ_25C,slow_125C", "--no-esd"]
    assert main(["build", *common, "--catalog", str(tmp_path / "one.sqlite")]) == 0
    one = json.loads(capsys.readouterr().out)[0]
    monkeypatch.setattr(celllab.engine, "part_size", lambda esd: 7)
    assert main(["build", *common, "--catalog", str(tmp_path / "parts.sqlite")]) == 0
    parts = json.loads(capsys.readouterr().out)[0]
    assert parts["inserted"] == one["inserted"] == one["cells"] > 14

    def stored(name: str) -> tuple[list[tuple[object, ...]], int]:
        db = sqlite3.connect(tmp_path / name)
        rows = sorted(db.execute("SELECT c.name, m.corner, m.cap_fF, m.esr_ohm, m.bandwidth_GHz FROM cells c "
                                 "JOIN corner_metrics m USING (cell_id)").fetchall())
        runs = db.execute("SELECT COUNT(*) FROM runs").fetchone()[0]
        db.close()
        return rows, runs

    (got, runs), (want, _) = stored("parts.sqlite"), stored("one.sqlite")
    assert runs == 1 and len(got) == len(want) == 2 * one["cells"]
    assert [r[:2] for r in got] == [r[:2] for r in want]
    # equal values; a band search's result (bandwidth) to the search tolerance
    np.testing.assert_allclose(np.array([r[2:] for r in got], dtype=float),
                               np.array([r[2:] for r in want], dtype=float), rtol=1e-9)
