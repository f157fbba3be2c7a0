"""Progress output of long CLI jobs: bars on a terminal only."""

from __future__ import annotations

import io

import pytest

from celllab.cli import progress


def test_bars_only_on_a_terminal(monkeypatch: pytest.MonkeyPatch) -> None:
    log = io.StringIO()
    monkeypatch.setattr(progress.sys, "stderr", log)
    show = progress.progress_callback("characterizing", "characterized")
    show("deck_a: mom", 3, 10)
    show("deck_a: mom", 10, 10)
    with progress.steps("files", 5) as advance:
        advance(1)
    with progress.working("planning"):
        pass
    assert log.getvalue() == "deck_a: 10 cells characterized\n"  # a log line, no bar


def test_a_terminal_gets_a_rich_bar(monkeypatch: pytest.MonkeyPatch) -> None:
    class Tty(io.StringIO):
        def isatty(self) -> bool:
            return True

    term = Tty()
    monkeypatch.setattr(progress.sys, "stderr", term)
    monkeypatch.setattr(progress, "on_terminal", lambda: True)
    from rich import console as rich_console

    monkeypatch.setattr(rich_console.Console, "__init__",
                        _console_into(rich_console.Console.__init__, term))
    show = progress.progress_callback("characterizing")
    show("deck_a: mom", 5, 10)
    show("deck_a: mom", 10, 10)
    assert "characterizing deck_a" in term.getvalue() and "10/10" in term.getvalue()


def _console_into(init, stream):  # type: ignore[no-untyped-def]
    def patched(self, *args, **kwargs):  # type: ignore[no-untyped-def]
        kwargs.pop("stderr", None)
        kwargs.update(file=stream, force_terminal=True, width=100)
        init(self, *args, **kwargs)
    return patched
