"""Choices that read without colour: ✓ in a chosen box of a list, ● / ○ on radio buttons."""

from __future__ import annotations

from typing import Any

from rich.segment import Segment
from textual.strip import Strip
from textual.widgets import RadioButton, SelectionList
from textual.widgets.option_list import OptionDoesNotExist

#: Glyphs inside the box: chosen / not chosen.
CHECKED, UNCHECKED = "✓", " "


class CheckList(SelectionList[Any]):
    """``SelectionList`` with a tick in chosen boxes (colour alone is lost on some terminals)."""

    def render_line(self, y: int) -> Strip:
        strip = super().render_line(y)
        segments = list(strip)
        if len(segments) < 3:
            return strip
        try:
            selection = self.get_option_at_index(self.scroll_offset.y + y)
        except OptionDoesNotExist:  # past the last option: the plain line
            return strip
        box = segments[1]
        glyph = CHECKED if selection.value in self._selected else UNCHECKED
        segments[1] = Segment(glyph, box.style, box.control)
        return Strip(segments, strip.cell_length)


class ChoiceButton(RadioButton):
    """A radio button whose dot is filled only when chosen (● / ○), so it reads without colour."""

    @property  # type: ignore[override]
    def BUTTON_INNER(self) -> str:  # noqa: N802  (Textual's attribute name)
        return "●" if self.value else "○"
