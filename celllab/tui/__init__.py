"""Terminal UI (Textual): ``CelllabApp(catalog=..., deck=...)``, started by ``celllab ui``."""

from __future__ import annotations

from typing import Any

__all__ = ["CelllabApp", "DeckFailure"]


def __getattr__(name: str) -> Any:
    # Lazy, so that ``import celllab.tui`` stays cheap until the app is wanted.
    if name in __all__:
        from celllab.tui import app

        return getattr(app, name)
    raise AttributeError(name)
