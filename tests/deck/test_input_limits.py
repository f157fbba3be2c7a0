"""Deck files at and beyond their documented limits: located errors, never a hang or a traceback.

Limits (process_decks/README.md, "Limits"): at most ``MAX_CORNERS`` corners, ``MAX_METALS``
metal layers, files of at most ``MAX_FILE_BYTES``, regular files only. Corner names may not be
the words the catalog uses for its aggregates, and a corner changes deck parameters, never other
corners. A UTF-8 byte order mark at the start of a file is accepted: the Unicode standard
allows one in UTF-8 text (docs/references.md [127]).
"""

from __future__ import annotations

import os
import re
import sys
import threading
from pathlib import Path

import pytest

from celllab.deck import Deck, load_deck
from celllab.deck.load import MAX_FILE_BYTES, corner_deck, read_toml
from celllab.deck.schema import MAX_CORNERS, MAX_METALS, RESERVED_CORNER_NAMES
from celllab.errors import DeckError


@pytest.fixture
def deck_text(lumen130_path: Path) -> str:
    return lumen130_path.read_text(encoding="utf-8")


def _write(tmp_path: Path, text: str, name: str = "deck.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _problems(path: Path) -> list[str]:
    with pytest.raises(DeckError) as info:
        load_deck(path)
    for p in info.value.problems:
        assert p.file == str(path)
    return [str(p) for p in info.value.problems]


@pytest.mark.parametrize("word", RESERVED_CORNER_NAMES)
def test_corner_named_like_an_aggregate_is_refused(tmp_path: Path, deck_text: str, word: str) -> None:
    path = _write(tmp_path, deck_text + f"\n[corners.{word}]\ntemperature_C = 150\n")
    (message,) = _problems(path)
    assert f"corners.{word}" in message and "reserved" in message
    assert re.search(rf":{len(deck_text.splitlines()) + 2}:", message)  # the line of the table


def test_reserved_words_cover_the_aggregates() -> None:
    assert {"worst", "best", "all"} <= set(RESERVED_CORNER_NAMES)


def test_corner_setting_another_corner_is_refused(tmp_path: Path, deck_text: str) -> None:
    extra = '\n[corners.hot]\ntemperature_C = 150\nset = { "corners.typ_25C.temperature_C" = 90 }\n'
    (message,) = _problems(_write(tmp_path, deck_text + extra))
    assert "corners.hot.set" in message and "corners.typ_25C.temperature_C" in message
    assert "not a deck parameter" in message or "corners" in message.split("->")[1]


def test_corner_scaling_a_corner_is_refused(tmp_path: Path, deck_text: str) -> None:
    extra = '\n[corners.hot]\ntemperature_C = 150\nscale = { "corners.typ_25C.supply_scale" = 1.1 }\n'
    (message,) = _problems(_write(tmp_path, deck_text + extra))
    assert "corners.hot.scale" in message


def test_byte_order_mark_is_accepted(tmp_path: Path, deck_text: str, lumen130_path: Path) -> None:
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + deck_text.encode("utf-8"))
    assert load_deck(path) == load_deck(lumen130_path)


def test_byte_order_mark_keeps_line_numbers(tmp_path: Path, deck_text: str) -> None:
    path = tmp_path / "bom.toml"
    bad = deck_text.replace("t_ox_nm = 2.2", "t_ox_nm = -2.2")
    path.write_bytes(b"\xef\xbb\xbf" + bad.encode("utf-8"))
    (message,) = _problems(path)
    line = 1 + bad.splitlines().index("t_ox_nm = -2.2")
    assert f":{line}:" in message


def _corners(n: int) -> str:
    return "".join(f"\n[corners.c{i:04d}]\ntemperature_C = {i % 150}\n" for i in range(n))


def test_corner_count_at_the_limit_is_accepted(tmp_path: Path, deck_text: str) -> None:
    path = _write(tmp_path, deck_text + _corners(MAX_CORNERS - 4))  # lumen130 has 4
    assert len(load_deck(path).corners) == MAX_CORNERS


def test_too_many_corners_are_refused(tmp_path: Path, deck_text: str) -> None:
    (message,) = _problems(_write(tmp_path, deck_text + _corners(2000)))
    assert "corners" in message and f"at most {MAX_CORNERS}" in message


def test_checking_corners_validates_one_corner_at_a_time(
    deck_text: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # each corner is checked on a deck holding that corner alone, so checking every corner
    # costs in proportion to the corner count, not its square
    path = _write(tmp_path, deck_text + _corners(40))
    sizes: list[int] = []
    real = Deck.model_validate.__func__  # type: ignore[attr-defined]

    def spy(cls, data, *args, **kwargs):  # type: ignore[no-untyped-def]
        sizes.append(len(data.get("corners", {})) if isinstance(data, dict) else -1)
        return real(cls, data, *args, **kwargs)

    monkeypatch.setattr(Deck, "model_validate", classmethod(spy))
    deck = load_deck(path)
    assert len(deck.corners) == 44
    assert sizes[0] == 44 and sorted(sizes[1:]) == [1] * 44
    assert corner_deck(deck, "c0007").corners == deck.corners


def _metals(n: int) -> str:
    return "".join(
        f'\n[[metals]]\nname = "X{i}"\nthickness_nm = 100\nmin_width_nm = 100\nmin_space_nm = 100\n'
        f"height_nm = {5000 + 200 * i}\nild_eps_r = 3\nsheet_ohm_per_sq = 0.1\nvia_below_ohm = 1\n"
        for i in range(n)
    )


def _insert_metals(deck_text: str, n: int) -> str:
    at = deck_text.index("[layout]")
    return deck_text[:at] + _metals(n) + "\n" + deck_text[at:]


def test_metal_count_at_the_limit_is_accepted(tmp_path: Path, deck_text: str) -> None:
    path = _write(tmp_path, _insert_metals(deck_text, MAX_METALS - 5))  # lumen130 has 5
    assert len(load_deck(path).metals) == MAX_METALS


def test_too_many_metals_are_refused(tmp_path: Path, deck_text: str) -> None:
    (message,) = _problems(_write(tmp_path, _insert_metals(deck_text, 3000)))
    assert "metals" in message and f"at most {MAX_METALS}" in message


def test_oversized_file_is_refused_before_reading(tmp_path: Path, deck_text: str) -> None:
    padding = "# " + "x" * 1000 + "\n"
    text = deck_text + padding * (MAX_FILE_BYTES // len(padding) + 1)
    (message,) = _problems(_write(tmp_path, text))
    assert "larger than" in message and str(MAX_FILE_BYTES) in message.replace(",", "")


@pytest.mark.skipif(not Path("/dev/zero").exists(), reason="needs /dev/zero")
def test_device_file_is_refused() -> None:
    with pytest.raises(DeckError) as info:
        read_toml("/dev/zero", DeckError)
    (problem,) = info.value.problems
    assert problem.file == "/dev/zero" and "not a regular file" in problem.message


@pytest.mark.skipif(sys.platform == "win32", reason="named pipes are POSIX")
def test_named_pipe_is_refused_without_blocking(tmp_path: Path) -> None:
    fifo = tmp_path / "deck.toml"
    os.mkfifo(fifo)
    outcome: list[object] = []

    def read() -> None:
        try:
            read_toml(fifo, DeckError)
        except DeckError as exc:
            outcome.append(exc)

    reader = threading.Thread(target=read, daemon=True)
    reader.start()
    reader.join(timeout=20)
    if reader.is_alive():  # unblock the reader so the test process can end
        with open(fifo, "w"):
            pass
        reader.join(timeout=5)
    assert outcome and "not a regular file" in str(outcome[0])


def test_directory_is_refused(tmp_path: Path) -> None:
    with pytest.raises(DeckError) as info:
        read_toml(tmp_path, DeckError)
    assert "not a regular file" in str(info.value)
