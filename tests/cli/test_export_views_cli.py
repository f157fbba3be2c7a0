"""``celllab export liberty`` / ``celllab export lef`` over a catalog of demo-deck cells.

Files are read back with the outside readers: ``liberty-parser`` (PyPI) and KLayout's Python
module (its LEF/DEF reader).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from celllab.catalog import open_catalog
from celllab.cli.main import main
from celllab.records import CharacterizationRun

liberty_parser = pytest.importorskip("liberty.parser")
kdb = pytest.importorskip("klayout.db")


def plain(value: object) -> object:
    """A parsed name without the parser's quoted-string wrapper."""
    return getattr(value, "value", value)


def export(catalog: Path, *args: str) -> int:
    return main(["export", *args, "--catalog", str(catalog)])


def test_liberty_writes_one_library_per_corner_into_a_folder(
    demo_view_catalog: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert (
        export(
            demo_view_catalog,
            "liberty",
            "--deck",
            "tarn40lp",
            "--where",
            "esd_safe",
            "--out",
            f"{tmp_path}/libs/",
        )
        == 0
    )
    with open_catalog(demo_view_catalog, create=False) as cat:
        corners = cat.corners("tarn40lp")
        safe = {r["name"] for r in cat.query(deck="tarn40lp", where="esd_safe")}
    files = sorted((tmp_path / "libs").iterdir())
    assert [f.name for f in files] == sorted(f"tarn40lp_{c}.lib" for c in corners)
    for path in files:
        lib = liberty_parser.parse_liberty(path.read_text(encoding="utf-8"))
        # Source: liberty-parser (PyPI)
        assert {plain(c.args[0]) for c in lib.get_groups("cell")} == safe
    assert "wrote 4 files" in capsys.readouterr().err


def test_liberty_one_corner_goes_to_stdout(
    demo_view_catalog: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert (
        export(
            demo_view_catalog,
            "liberty",
            "--deck",
            "quill28hk",
            "--corner",
            "leaky_125C",
            "--cells",
            "qk_ncap-w4-h1-f1",
        )
        == 0
    )
    lib = liberty_parser.parse_liberty(capsys.readouterr().out)
    # Source: liberty-parser (PyPI)
    assert lib.get_group("operating_conditions").args == ["leaky_125C"]
    assert [plain(c.args[0]) for c in lib.get_groups("cell")] == ["qk_ncap-w4-h1-f1"]


def test_lef_to_a_folder_loads_in_klayout(demo_view_catalog: Path, tmp_path: Path) -> None:
    assert export(demo_view_catalog, "lef", "--deck", "lumen130", "--out", f"{tmp_path}/") == 0
    layout = kdb.Layout()
    layout.read(str(tmp_path / "lumen130.lef"))
    with open_catalog(demo_view_catalog, create=False) as cat:
        names = {r["name"] for r in cat.query(deck="lumen130")}
    # Source: KLayout LEF reader: one cell per macro
    assert {c.name for c in layout.each_cell()} == names


@pytest.mark.parametrize(
    ("args", "field", "words"),
    [
        (["liberty", "--deck", "lumen130", "--out", "one.lib"], "--out", "need an output folder"),
        (["liberty", "--deck", "lumen130", "--corner", "typical"], "--corner", "allowed: typ_25C"),
        (
            ["lef", "--deck", "lumen130", "--where", "width_sites > 4000"],
            "--where",
            "no cell matches",
        ),
        (["liberty"], "--deck", "several decks"),
        (["lef", "--deck", "lumen130", "--grid-nm", "7"], "layout.site_width_um", "grid steps"),
        (["lef", "--deck", "lumen130", "--grid-nm", "-1"], "--grid-nm", "allowed: a finite number > 0"),
    ],
)
def test_bad_requests_exit_2_with_located_messages(
    args: list[str],
    field: str,
    words: str,
    demo_view_catalog: Path,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    monkeypatch.chdir(tmp_path)
    assert export(demo_view_catalog, *args) == 2
    captured = capsys.readouterr()
    assert f"{field}" in captured.err and words in captured.err and "Traceback" not in captured.err
    assert list(tmp_path.iterdir()) == []


def test_unwritable_output_is_reported_not_raised(
    demo_view_catalog: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    blocker = tmp_path / "a_file"
    blocker.write_text("not a folder\n", encoding="utf-8")
    assert (
        export(demo_view_catalog, "lef", "--deck", "lumen130", "--out", str(blocker / "x.lef")) == 2
    )
    err = capsys.readouterr().err
    assert str(blocker) in err and "not a folder" in err and "Traceback" not in err
    assert blocker.read_text(encoding="utf-8") == "not a folder\n"


def test_catalog_without_a_complete_deck_says_so(
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    demo_view_runs: dict[str, CharacterizationRun],
) -> None:
    run = demo_view_runs["lumen130"]
    partial = CharacterizationRun(
        run.deck_name,
        run.deck_hash,
        {"process": {"name": "lumen130"}},
        run.model_version,
        run.corners,
        run.cells[:1],
    )
    path = tmp_path / "partial.sqlite"
    with open_catalog(path) as cat:
        cat.store_run(partial)
    for fmt in ("liberty", "lef"):
        assert export(path, fmt, "--out", f"{tmp_path}/out/") == 2
        assert "complete, valid deck" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_help_lists_the_library_views(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit):
        main(["export", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "liberty" in text and "lef" in text and "--grid-nm" in text
