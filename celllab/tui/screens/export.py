"""Export dialog: pick a format and a path; ``perform_export`` writes it with celllab.export."""

from __future__ import annotations

import inspect
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Label, RadioSet

from celllab.errors import CelllabError, Problem
from celllab.tui.widgets.check_list import ChoiceButton


@dataclass(frozen=True)
class ExportFormat:
    key: str
    label: str
    extension: str
    needs_cell: bool
    writer: str
    needs_catalog: bool = False        # reads the catalog (rows, or the deck of a library view)


FORMATS: tuple[ExportFormat, ...] = (
    ExportFormat("csv", "CSV: every row of the table (current filter and corner)", "csv", False,
                 "write_csv", needs_catalog=True),
    ExportFormat("json", "JSON: the open cell, every corner, with curves", "json", True, "write_json"),
    ExportFormat("spice", "SPICE: equivalent-circuit subcircuit of the open cell", "sp", True,
                 "write_spice"),
    ExportFormat("touchstone", "Touchstone: Z(f) of the open cell as a 1-port", "s1p", True,
                 "write_touchstone"),
    ExportFormat("datasheet", "Datasheet: HTML page of the open cell", "html", True,
                 "write_datasheet"),
    ExportFormat("datasheet-pdf", "Datasheet (PDF): the open cell, every corner's plots", "pdf",
                 True, "write_datasheet_pdf"),
    ExportFormat("liberty", "Liberty: .lib view at the current corner (open cell or table rows)",
                 "lib", False, "write_liberty", needs_catalog=True),
    ExportFormat("lef", "LEF: technology and cell abstracts (open cell or table rows)", "lef",
                 False, "write_lef", needs_catalog=True),
)
FORMAT_BY_KEY = {f.key: f for f in FORMATS}


@dataclass(frozen=True)
class ExportContext:
    """What the current screen can export."""

    cell: Any = None                   # CellResult of the open cell, if any
    deck: str | None = None
    corner: str | None = None          # a corner name, or "worst"/"best"
    query: dict[str, Any] = field(default_factory=dict)  # Catalog.query keywords of the table
    columns: tuple[str, ...] = ()

    @property
    def stem(self) -> str:
        if self.cell is not None:
            return str(self.cell.name)
        return f"{self.deck or 'catalog'}_{self.corner or 'rows'}"


@dataclass(frozen=True)
class ExportRequest:
    format: str
    path: str
    #: a folder the export may create (the app's default exports folder)
    may_create: str | None = None
    #: replace an existing file (asked for by submitting the same path twice)
    replace: bool = False


def available_formats(context: ExportContext) -> list[ExportFormat]:
    """Formats that make sense here (a cell is needed for all but CSV and the library views);
    with a cell open its own formats come first."""
    if context.cell is None:
        return [f for f in FORMATS if not f.needs_cell]
    return [f for f in FORMATS if f.needs_cell] + [f for f in FORMATS if not f.needs_cell]


def _call(writer: Any, path: Path, *args: Any, **options: Any) -> Any:
    """Call a ``write_*`` with only the keyword options it accepts."""
    accepted = inspect.signature(writer).parameters
    return writer(path, *args, **{k: v for k, v in options.items() if k in accepted})


def _view_cells(context: ExportContext, catalog: Any, path: Path) -> tuple[list[Any], str]:
    """Cells of a library view and their deck: the open cell, else every row of the table."""
    if context.cell is not None:
        if not context.deck:
            raise CelllabError([Problem(str(path), "", "the open cell has no deck to take the "
                                        "layout and supplies from", has_value=False)])
        return [context.cell], context.deck
    rows = catalog.query(**{**context.query, "limit": None, "offset": 0})
    decks = sorted({r["deck"] for r in rows})
    if not rows:
        raise CelllabError([Problem(str(path), "", "no cell in the table", has_value=False)])
    if len(decks) > 1:
        raise CelllabError([Problem(str(path), "", "the table holds cells of several decks ("
                                    + ", ".join(decks) + "); pick one deck first", has_value=False)])
    names = list(dict.fromkeys(r["name"] for r in rows))
    return [catalog.cell(name, decks[0]) for name in names], decks[0]


def _export_view(fmt: ExportFormat, path: Path, context: ExportContext, catalog: Any,
                 force: bool = False) -> None:
    """Liberty (at the current corner; the first characterized one when ranking worst/best) or
    LEF."""
    from celllab.export import stored_deck, write_lef, write_liberty

    cells, deck_name = _view_cells(context, catalog, path)
    deck = stored_deck(catalog, deck_name)
    if fmt.key == "liberty":
        # the catalog keeps the run's corner order (the stored deck's keys are sorted)
        corners = [c for c in catalog.corners(deck_name) if c in deck.corners] or list(deck.corners)
        corner = context.corner if context.corner in deck.corners else corners[0]
        write_liberty(path, cells, deck, corner, force=force)
    else:
        write_lef(path, cells, deck, force=force)


def perform_export(request: ExportRequest, context: ExportContext, catalog: Any) -> Path:
    """Write one export with the matching ``celllab.export.write_*`` function."""
    import celllab.export as export

    fmt = FORMAT_BY_KEY[request.format]
    path = Path(request.path).expanduser()
    if request.may_create and path.parent == Path(request.may_create):
        path.parent.mkdir(parents=True, exist_ok=True)
    if not path.parent.exists():
        raise CelllabError([Problem(str(path), "", "folder does not exist", has_value=False)])
    try:
        writer = getattr(export, fmt.writer)
    except (AttributeError, ImportError):
        raise CelllabError([Problem(str(path), "", f"{fmt.key} export is not available in this "
                                    "installation", has_value=False)]) from None
    corner = context.corner if context.corner not in (None, "worst", "best") else None
    if fmt.needs_catalog and catalog is None:
        raise CelllabError([Problem(str(path), "", "no catalog open", has_value=False)])
    if fmt.key in ("liberty", "lef"):
        _export_view(fmt, path, context, catalog, force=request.replace)
    elif fmt.key == "csv":
        query = {**context.query, "limit": None, "offset": 0}
        rows = catalog.query(**query)
        _call(writer, path, rows, force=request.replace)
    elif fmt.key in ("json", "spice"):
        _call(writer, path, [context.cell], deck_name=context.deck, corner=corner,
              force=request.replace)
    else:
        _call(writer, path, context.cell, corner=corner, deck_name=context.deck,
              force=request.replace)
    return path


class ExportDialog(ModalScreen[ExportRequest | None]):
    """Pick a format (radio buttons) and a destination path; enter exports from anywhere in it."""

    BINDINGS = [
        Binding("escape", "dismiss(None)", "Cancel", show=False),
        # priority: the format list would take enter as "press this button" otherwise
        Binding("enter", "submit", "Export", show=False, priority=True),
    ]

    def __init__(self, context: ExportContext, folder: Path | None = None) -> None:
        super().__init__()
        self._export_context = context
        self._formats = available_formats(context)
        self._folder = folder or Path.cwd()
        self._shown_default = self._default_path(self._formats[0])
        self._path_edited = False
        #: an existing path the user was warned about; submitting it again replaces the file
        self._confirmed: str | None = None

    def _default_path(self, fmt: ExportFormat) -> str:
        return str(self._folder / f"{self._export_context.stem}.{fmt.extension}")

    def compose(self) -> ComposeResult:
        with Vertical(id="export-box", classes="dialog") as box:
            box.border_title = "Export"
            box.border_subtitle = "↑↓ space: format · tab: path · enter exports · esc cancels"
            with RadioSet(id="export-format"):
                for index, fmt in enumerate(self._formats):
                    yield ChoiceButton(fmt.label, value=index == 0, id=f"fmt-{fmt.key}")
            if self._export_context.cell is None:
                yield Label("open a cell (enter on a row) to export SPICE, Touchstone, JSON or a "
                            "datasheet", classes="dialog-hint")
            yield Label("path (the extension follows the format until you edit it)")
            yield Input(self._shown_default, id="export-path")
            yield Label(f"default folder: {self._folder}", classes="dialog-hint",
                        id="export-folder", markup=False)
            yield Label("", id="export-error", classes="dialog-error")
            with Horizontal(classes="dialog-buttons"):
                yield Button("Export (enter)", id="export-ok", variant="primary")
                yield Button("Cancel (esc)", id="export-cancel")

    def on_mount(self) -> None:
        self.query_one(RadioSet).focus()

    def _chosen(self) -> ExportFormat:
        radio = self.query_one(RadioSet)
        index = radio.pressed_index if radio.pressed_index >= 0 else 0
        return self._formats[index]

    def on_radio_set_changed(self, event: RadioSet.Changed) -> None:
        event.stop()
        path_input = self.query_one("#export-path", Input)
        if self._path_edited:
            return
        self._shown_default = self._default_path(self._chosen())
        path_input.value = self._shown_default

    def on_input_changed(self, event: Input.Changed) -> None:
        # only a path other than the one the dialog put there is the user's own
        if event.input.id == "export-path":
            self._path_edited = event.value != self._shown_default

    def action_submit(self) -> None:
        focused = self.focused
        if isinstance(focused, Button):
            focused.press()
            return
        self._submit()

    def _submit(self) -> None:
        path = self.query_one("#export-path", Input).value.strip()
        if not path:
            self.query_one("#export-error", Label).update("✗ give a path")
            return
        target = Path(path).expanduser()
        if target.is_file() and self._confirmed != path:  # never replaced without a second enter
            self._confirmed = path
            self.query_one("#export-error", Label).update(
                f"✗ {target.name} exists: enter again replaces it, or change the path")
            return
        self.dismiss(ExportRequest(self._chosen().key, path, may_create=str(self._folder),
                                   replace=target.is_file()))

    def on_button_pressed(self, event: Button.Pressed) -> None:
        if event.button.id == "export-ok":
            self._submit()
        else:
            self.dismiss(None)
