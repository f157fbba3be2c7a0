"""What every task screen shares: typed access to the app's services and the task bar."""

from __future__ import annotations

from typing import TYPE_CHECKING

from textual.screen import Screen

from celllab.tui.widgets.task_bar import TaskBar

if TYPE_CHECKING:
    from celllab.tui.app import CelllabApp


class TaskScreen(Screen[None]):
    """A full screen for one task; ``TASK`` names the task bar entry it lights up."""

    TASK = "catalog"
    TASK_TITLE = "Catalog"

    @property
    def lab(self) -> "CelllabApp":
        """The app, typed (services: catalog, decks, current deck and corner)."""
        return self.app  # type: ignore[return-value]

    def on_screen_resume(self) -> None:
        for bar in self.query(TaskBar):
            bar.active = self.TASK
