"""The celllab terminal UI: one app, services injected, one screen per task.

``CelllabApp(catalog=..., deck=...)`` is the one factory used by ``celllab ui`` and by the
tests. Catalog access happens in worker threads only, serialised by ``catalog_lock`` (the
catalog's SQLite connection may be used from any thread, one at a time).
"""

from __future__ import annotations

import contextlib
import os
import sys
import threading
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from textual import work
from textual.app import App
from textual.binding import Binding

from celllab import __version__
from celllab.errors import CelllabError, Problem
from celllab.tui.messages import ExportFinished
from celllab.tui.screens.about import AboutPanel
from celllab.tui.screens.catalog import CatalogScreen
from celllab.tui.screens.deck import DeckScreen
from celllab.tui.screens.export import (
    FORMAT_BY_KEY,
    ExportContext,
    ExportDialog,
    ExportRequest,
    perform_export,
)
from celllab.tui.screens.keys import KeysOverlay
from celllab.tui.screens.plan import PlanScreen, find_block_files
from celllab.tui.screens.ranking import RankingScreen

__all__ = ["CelllabApp", "DeckFailure", "load_decks_for_ui", "run_app"]


@dataclass(frozen=True)
class DeckFailure:
    """A deck file that did not load: where it is and what is wrong with it."""

    path: str
    problems: list[Problem] = field(default_factory=list)

    @classmethod
    def from_error(cls, path: str | Path, error: CelllabError) -> "DeckFailure":
        return cls(str(path), list(error.problems))


def default_export_folder(catalog: Any) -> Path:
    """``exports`` beside the catalog file (the working folder's when there is no file)."""
    path = getattr(catalog, "path", None)
    base = Path(path).resolve().parent if path else Path.cwd()
    return base / "exports"


class CelllabApp(App[None]):
    """Catalog browser, cell views, what-if editor, ranking, deck views and block planning."""

    CSS_PATH = "app.tcss"
    TITLE = "celllab"
    SUB_TITLE = "decap cells · engineering estimates"
    MODES = {"catalog": CatalogScreen, "ranking": RankingScreen, "decks": DeckScreen,
             "plan": PlanScreen}
    DEFAULT_MODE = "catalog"
    HORIZONTAL_BREAKPOINTS = [(0, "-narrow"), (120, "-wide")]
    ENABLE_COMMAND_PALETTE = False

    BINDINGS = [
        Binding("question_mark,f1", "show_keys", "Keys"),
        Binding("a", "about", "About"),
        Binding("x", "export", "Export"),
        # priority: quits from dialogs and overlays too, before any widget sees the key
        Binding("ctrl+q", "quit", "Quit", priority=True),
        Binding("1", "switch_mode('catalog')", "Catalog", show=False),
        Binding("2", "switch_mode('ranking')", "Ranking", show=False),
        Binding("3", "switch_mode('decks')", "Decks", show=False),
        Binding("4", "switch_mode('plan')", "Planning", show=False),
    ]

    def __init__(
        self,
        catalog: Any = None,
        deck: Any = None,
        *,
        deck_failures: Sequence[DeckFailure] = (),
        cells: Mapping[str, Sequence[Any]] | Sequence[Any] | None = None,
        page_size: int = 100,
        debounce_s: float = 0.15,
        export_folder: str | Path | None = None,
        z_target_ohm: float | None = None,
        block_paths: Sequence[str | Path] = (),
    ) -> None:
        super().__init__()
        self.catalog = catalog
        decks = [] if deck is None else (list(deck) if isinstance(deck, (list, tuple)) else [deck])
        #: decks given to the app (from deck files), by name
        self.decks: dict[str, Any] = {d.name: d for d in decks}
        self.deck_failures: list[DeckFailure] = list(deck_failures)
        self._specs: dict[tuple[str | None, str], Any] = {}
        if isinstance(cells, Mapping):
            for deck_name, specs in cells.items():
                for spec in specs:
                    self._specs[(deck_name, spec.name)] = spec
        elif cells is not None:
            for spec in cells:
                self._specs[(None, spec.name)] = spec
        self.page_size = page_size
        self.debounce_s = debounce_s
        #: where exports go unless the user types another path: an "exports" folder beside
        #: the catalog file (made on the first export)
        self.export_folder = Path(export_folder) if export_folder else default_export_folder(catalog)
        #: block files given to the app (the planning view also offers ./process_decks/blocks)
        self.block_paths = [Path(p) for p in block_paths]
        self.catalog_lock = threading.Lock()
        #: a second connection for row counts (``counting_catalog``), opened on first use
        self._counter: Any = None
        self._counter_lock = threading.Lock()
        #: shared choices of the catalog screen, read by the ranking screen
        self.current_deck: str | None = next(iter(self.decks), None)
        self.current_corner: str = "worst"
        self._deck_cache: dict[str, Any] = {}
        #: the |Z| a block needs of its decaps, drawn on every |Z|(f) plot (None: not known)
        self.z_target_ohm: float | None = z_target_ohm
        #: the unexpected error that stopped the app (``run_app`` logs it), if any
        self.crash: BaseException | None = None

    # --- services for screens -----------------------------------------------------------
    @contextlib.contextmanager
    def using_catalog(self) -> Iterator[Any]:
        """The catalog, held exclusively (call from worker threads only)."""
        if self.catalog is None:
            raise CelllabError([Problem("<catalog>", "", "no catalog is open; start with "
                                        "--catalog PATH", has_value=False)])
        with self.catalog_lock:
            yield self.catalog

    @contextlib.contextmanager
    def counting_catalog(self) -> Iterator[Any]:
        """A second connection to the catalog, for row counts (call from worker threads only):
        a page query never waits behind a count (a count over a large filtered catalog takes a
        few hundred ms). The main connection when no second one can be opened."""
        if self.catalog is None or not Path(self.catalog.path).is_file():
            with self.using_catalog() as catalog:
                yield catalog
            return
        with self._counter_lock:
            if self._counter is None:
                try:
                    self._counter = self.catalog.reader()
                except CelllabError:
                    self._counter = False
            if self._counter is False:
                with self.using_catalog() as catalog:
                    yield catalog
            else:
                yield self._counter

    def interrupt_count(self) -> None:
        """Stop a row count still running for an older filter (its call raises CatalogError)."""
        if self._counter:
            self._counter.interrupt()

    def close_counter(self) -> None:
        with self._counter_lock:
            if self._counter:
                self._counter.close()
            self._counter = None

    def on_unmount(self) -> None:
        self.close_counter()

    def deck_named(self, name: str | None) -> Any:
        """The Deck of that name, as the catalog stored it (its cells were computed with it);
        a deck file given to the app when the catalog does not have that deck.

        Call from a worker thread (it reads the catalog). Raises DeckError/CatalogError.
        """
        if name is None:
            raise CelllabError([Problem("<deck>", "", "no deck chosen", has_value=False)])
        if name not in self._deck_cache:
            from celllab.deck import parse_deck

            deck = None
            failure: CelllabError | None = None
            if self.catalog is not None:
                try:
                    with self.using_catalog() as catalog:
                        params = catalog.deck_params(name)
                    deck = parse_deck(params, f"catalog deck {name}")
                except CelllabError as exc:
                    failure = exc
            if deck is None:
                deck = self.decks.get(name)
            if deck is None:
                raise failure or CelllabError([Problem("<deck>", "", f"no deck named {name!r}",
                                                       has_value=False)])
            self._deck_cache[name] = deck
        return self._deck_cache[name]

    def spec_for(self, cell: Any, deck_name: str | None) -> Any:
        """The CellSpec behind a catalog cell (a given spec, else rebuilt from its geometry)."""
        for key in ((deck_name, cell.name), (None, cell.name)):
            if key in self._specs:
                return self._specs[key]
        from celllab.tui.screens.whatif import spec_from_result

        return spec_from_result(cell)

    def cell_definition(self, cell: Any, cell_name: str, deck_name: str | None
                        ) -> tuple[Any, Any, Any]:
        """(stored cell, deck, cell spec) of a catalog cell, for a view that computes it again;
        ``cell`` None reads it from the catalog. Worker threads only. Raises CelllabError (one
        located problem) when the catalog cannot give the deck or rebuild the definition."""
        try:
            if cell is None:
                with self.using_catalog() as catalog:
                    cell = catalog.cell(cell_name, deck_name)
            return cell, self.deck_named(deck_name), self.spec_for(cell, deck_name)
        except (KeyError, ValueError) as exc:  # ValueError: pydantic on a stored geometry
            raise CelllabError([Problem("<catalog>", cell_name, "cannot rebuild the cell "
                                        f"definition: {exc}", has_value=False)]) from None

    def block_files(self) -> list[Path]:
        """Block files for the planning view: those given, then the demo folder's."""
        return find_block_files(self.block_paths, [Path.cwd() / "process_decks" / "blocks"])

    def remember_spec(self, deck_name: str, spec: Any) -> None:
        """Keep a saved variant's spec so a later what-if starts from exactly it."""
        self._specs[(deck_name, spec.name)] = spec

    def ask_target(self, then: Any = None) -> None:
        """Ask for the target |Z| (empty clears it); ``then(value)`` runs after a change."""
        import math

        from celllab.tui.screens.value_prompt import NumberPrompt

        def chosen(value: float | None) -> None:
            if value is not None and math.isnan(value):
                return  # cancelled
            self.z_target_ohm = value
            if callable(then):
                then(value)

        self.push_screen(NumberPrompt(
            "Target |Z|", "The impedance the decaps must stay under (a block's target): drawn "
            "as a line on every |Z|(f) plot.", "Ω", self.z_target_ohm), chosen)

    # --- global actions -----------------------------------------------------------------
    def action_show_keys(self) -> None:
        if isinstance(self.screen, KeysOverlay):
            self.screen.dismiss(None)
            return
        title = getattr(self.screen, "TASK_TITLE", type(self.screen).__name__)
        self.push_screen(KeysOverlay.for_screen(title, self.screen.active_bindings,
                                                self.get_key_display))

    def action_about(self) -> None:
        def after(choice: str | None) -> None:
            if choice == "export":
                self.action_export()
            elif choice == "keys":
                self.action_show_keys()

        self.push_screen(AboutPanel(), after)

    def export_context(self) -> ExportContext:
        maker = getattr(self.screen, "export_context", None)
        return maker() if callable(maker) else ExportContext(deck=self.current_deck,
                                                             corner=self.current_corner)

    def action_export(self) -> None:
        context = self.export_context()

        def after(request: ExportRequest | None) -> None:
            if request is not None:
                self._export(request, context)

        self.push_screen(ExportDialog(context, self.export_folder), after)

    @work(thread=True, exclusive=True, group="export")
    def _export(self, request: ExportRequest, context: ExportContext) -> None:
        try:
            if FORMAT_BY_KEY[request.format].needs_catalog:
                with self.using_catalog() as catalog:
                    path = perform_export(request, context, catalog)
            else:
                path = perform_export(request, context, None)
        except CelllabError as exc:
            self.post_message(ExportFinished(request.path, str(exc)))
        except OSError as exc:
            self.post_message(ExportFinished(request.path, f"{request.path}: {exc.strerror or exc}"))
        else:
            self.post_message(ExportFinished(str(path)))

    def on_export_finished(self, message: ExportFinished) -> None:
        if message.error:
            self.notify(message.error, title="Export failed", severity="error", timeout=8)
        else:
            self.notify(f"written: {message.path}", title="Export")

    # --- unexpected errors: one line on the terminal, the traceback in a log (run_app) ----
    def _handle_exception(self, error: Exception) -> None:
        if self.crash is None:
            self.crash = error
        super()._handle_exception(error)

    def _fatal_error(self) -> None:
        # Textual would print a full-screen traceback at exit; run_app writes it to a log file
        # (Pilot tests still see the error: run_test raises it)
        self.bell()
        self._close_messages_no_wait()

    def on_mount(self) -> None:
        if self.deck_failures:
            names = ", ".join(Path(f.path).name for f in self.deck_failures)
            self.notify(f"{names}: see Decks (3) for what is wrong", title="Deck problems",
                        severity="warning", timeout=10)




def load_decks_for_ui(paths: Sequence[str | Path]) -> tuple[list[Any], list[DeckFailure]]:
    """Load deck files; a deck that does not validate becomes a DeckFailure shown in the app."""
    from celllab.deck import load_deck

    decks: list[Any] = []
    failures: list[DeckFailure] = []
    for path in paths:
        try:
            decks.append(load_deck(path))
        except CelllabError as exc:
            failures.append(DeckFailure.from_error(path, exc))
    return decks, failures


def write_crash_log(error: BaseException, folder: str | Path | None = None) -> Path:
    """Write the full traceback of ``error`` to a new log file; returns its path."""
    import tempfile
    import time
    import traceback

    base = Path(folder) if folder is not None else Path(tempfile.gettempdir())
    base.mkdir(parents=True, exist_ok=True)
    path = base / f"celllab-ui-{time.strftime('%Y%m%d-%H%M%S')}-{os.getpid()}.log"
    text = "".join(traceback.format_exception(type(error), error, error.__traceback__))
    path.write_text(f"celllab {__version__} terminal UI stopped on an unexpected error\n\n{text}",
                    encoding="utf-8")
    return path


def run_app(catalog_path: str | Path | None = None, deck_paths: Sequence[str | Path] = (),
            block_paths: Sequence[str | Path] = (), *, log_folder: str | Path | None = None,
            z_target_ohm: float | None = None) -> int:
    """Open the catalog (created when missing), the deck files and the block files offered by
    the planning view, run the UI.

    Returns 0; 1 after an unexpected error, which is summed up in one line on stderr with the
    path of the log file that holds its full traceback (in ``log_folder``, default the
    system's temporary folder).
    """
    from celllab.catalog import open_catalog

    catalog = open_catalog(catalog_path)
    decks, failures = load_decks_for_ui(deck_paths)
    app = CelllabApp(catalog=catalog, deck=decks, deck_failures=failures, z_target_ohm=z_target_ohm,
                     block_paths=block_paths)
    try:
        app.run()
    finally:
        app.close_counter()
        catalog.close()
    if app.crash is not None:
        log = write_crash_log(app.crash, log_folder)
        summary = f"{type(app.crash).__name__}: {app.crash}".splitlines()[0]
        print(f"celllab ui stopped on an unexpected error ({summary}); full traceback in {log}",
              file=sys.stderr)
        return 1
    return int(app.return_code or 0)
