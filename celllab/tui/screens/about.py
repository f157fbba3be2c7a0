"""About and help: what the numbers are, what they are not, and where to go next."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, Markdown

from celllab import CAUTION, MODEL_VERSION, __version__

ABOUT_TEXT = f"""\
## celllab {__version__}

Characterizes on-chip **decoupling cells** (MOS decaps, tied and cross-coupled CMOS pairs,
MOM, stacks; in core rows or open regions, on the rail they decouple) from a process deck:
capacitance and density, ESR, bandwidth, ESL and self-resonance, gate leakage, oxide field,
the TDDB failure rate per mm² of gate oxide over a mission profile, HBM and CDM events in
time (peak oxide voltage, time above breakdown, margin) and what a broken oxide costs the
supply, at every corner of the deck.
Models: `{MODEL_VERSION}`.

> **Caution.** {CAUTION}

The demo decks and cells shipped with celllab are **invented** and describe no real
process or library.

### Finding your way
* **1** catalog · **2** ranking · **3** decks; **enter** opens a cell, **w** tries a what-if.
* **/** filters with the catalog's filter language, for example
  `esd_safe and leakage_nA_per_nF <= 50`; names are the column names, units are in them.
* **space** marks 2 to 5 rows, **v** compares them: metrics side by side, curves overlaid.
* In a cell: **[ ]** step through metrics, C-V, |Z|, ESR, C_eff, circuit and flags;
  **t** sets a target |Z| line; **s** sweeps one parameter over a range; **f** asks whether
  a fill of the cell survives a mission and a zap (also on a highlighted catalog row).
* Ranking: **.** and **,** step along the Pareto front (or click a point), **o** opens it.
* **worst** / **best** corner: per metric, the worst (best) value over the deck's corners.
  **≥** before a number: a lower bound (beyond the analysed frequency sweep).
* Nothing is written to the catalog until a what-if is saved as a new variant (**ctrl+s**,
  **ctrl+z** takes it back); **ctrl+w** in a what-if sweeps from its changes.
* **x** exports (CSV, JSON, SPICE, Touchstone, HTML or PDF datasheet, Liberty, LEF);
  **?** lists every key; **ctrl+q** quits from anywhere.
"""


class AboutPanel(ModalScreen[str | None]):
    """Help text with the cautions; buttons lead to the key list and the export dialog."""

    BINDINGS = [
        Binding("escape,a", "dismiss(None)", "Close", show=False),
        Binding("x", "dismiss('export')", "Export", show=False),
        Binding("question_mark", "dismiss('keys')", "Keys", show=False),
    ]

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="about-box", classes="dialog") as box:
            box.border_title = "About celllab"
            yield Markdown(ABOUT_TEXT, id="about-text")
            with Horizontal(classes="dialog-buttons"):
                yield Button("Export… (x)", id="about-export")
                yield Button("Keys (?)", id="about-keys")
                yield Button("Close (esc)", id="about-close", variant="primary")

    def on_button_pressed(self, event: Button.Pressed) -> None:
        choice = {"about-export": "export", "about-keys": "keys"}.get(event.button.id or "")
        self.dismiss(choice)
