"""The catalog: characterization results in one SQLite file (the only code touching SQLite).

    catalog = open_catalog("db/celllab.sqlite")
    catalog.store_run(run)
    rows = catalog.query(corner="worst", where="leakage_nA_per_nF <= 5 and esd_safe",
                         order_by="cap_density_fF_per_um2", limit=20)

``Catalog`` is a thin facade: each method is a few lines over ``store``, ``query``, ``pareto``
and ``merge``. Calls are serialised by a lock, so one Catalog may be shared with worker threads.
Low-level SQLite failures surface as ``CatalogError`` naming the file.
"""

from __future__ import annotations

import contextlib
import sqlite3
import sys
import threading
from collections.abc import Iterable, Iterator
from pathlib import Path
from typing import TYPE_CHECKING, Any, Self


def _import_sqlite_utils() -> None:
    """Import sqlite-utils without pandas: it loads pandas when installed (about a second)
    only to recognise pandas values, which the catalog never hands it."""
    if "sqlite_utils" in sys.modules or "pandas" in sys.modules:
        return
    sys.modules["pandas"] = None  # type: ignore[assignment]  # import pandas -> ImportError
    try:
        import sqlite_utils  # noqa: F401
    finally:
        del sys.modules["pandas"]


_import_sqlite_utils()

from celllab import DEFAULT_CATALOG  # noqa: E402
from celllab.catalog import pareto as _pareto  # noqa: E402
from celllab.catalog import query as _query  # noqa: E402
from celllab.catalog import store as _store  # noqa: E402
from celllab.catalog.query import DeckInfo  # noqa: E402
from celllab.catalog.schema import open_database  # noqa: E402
from celllab.catalog.store import StoreReport  # noqa: E402
from celllab.errors import CatalogError  # noqa: E402
from celllab.records import CellResult, CharacterizationRun  # noqa: E402

if TYPE_CHECKING:
    from celllab.catalog.merge import MergeReport

__all__ = ["Catalog", "DeckInfo", "MergeReport", "StoreReport", "open_catalog"]


def __getattr__(name: str) -> Any:
    """``MergeReport`` on first use: merging checks rows against the deck and cell schemas
    (pydantic), which a catalog opened only to query never loads."""
    if name == "MergeReport":
        from celllab.catalog.merge import MergeReport

        return MergeReport
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


class Catalog:
    """An open catalog file. Create with ``open_catalog``."""

    def __init__(self, path: Path, create: bool = True) -> None:
        self.path = path
        self._db = open_database(path, create=create)
        self._lock = threading.RLock()

    @contextlib.contextmanager
    def _access(self) -> Iterator[Any]:
        with self._lock:
            try:
                yield self._db
            except sqlite3.DatabaseError as exc:
                if "readonly database" in str(exc):
                    raise CatalogError.single(str(self.path), "", "read-only for this user (the file or "
                                              "its folder); nothing was written") from None
                if "disk is full" in str(exc):
                    raise CatalogError.single(str(self.path), "", "the disk is full; nothing of this "
                                              "write was stored (free space and run it again)") from None
                raise CatalogError.single(str(self.path), "", f"SQLite error: {exc}") from None

    def close(self) -> None:
        with self._lock:
            self._db.close()

    def reader(self) -> Catalog:
        """A second connection to the same file, for reads beside this one's (in SQLite's
        write-ahead log mode readers do not wait for each other or for a writer)."""
        return Catalog(self.path, create=False)

    def interrupt(self) -> None:
        """Abort the statement this connection is running, if any (safe from another thread);
        the interrupted call raises CatalogError. A statement started later is not affected;
        a closed catalog has nothing to stop."""
        with contextlib.suppress(sqlite3.ProgrammingError):
            self._db.conn.interrupt()

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"Catalog({str(self.path)!r})"

    # writing
    def store_run(self, run: CharacterizationRun) -> StoreReport:
        """Store a run in one transaction (unchanged deck + cell + model version: no-op)."""
        with self._access() as db:
            return _store.store_run(db, run)

    def store_runs(self, parts: Iterable[CharacterizationRun]) -> StoreReport:
        """Store the parts of one run (one build characterized a part at a time) in one
        transaction and one run record, each part written before the next is computed
        (``store.store_runs``)."""
        with self._access() as db:
            return _store.store_runs(db, parts)

    def stored_cells(self, deck_hash: str, model_version: str, *, with_esd: bool = False
                     ) -> set[tuple[str, str]]:
        """(cell_hash, name) of the current results stored for this deck version and model
        version: what a build of the same input need not characterize again.

        ``with_esd``: leave out results stored without the deck's ESD events (a ``--no-esd``
        build), so that a build with the events computes them (``store_run`` then puts the
        complete result in the incomplete one's place).
        """
        sql = ("SELECT cell_hash, name FROM cells c WHERE deck_hash = ? AND model_version = ? "
               "AND current = 1")
        if with_esd:
            sql += f" AND NOT {_store.BUILT_WITHOUT_ESD}"
        with self._access() as db:
            return {(str(h), str(n)) for h, n in db.execute(sql, [deck_hash, model_version]).fetchall()}

    def remove_run(self, run_id: int) -> int:
        """Take back the latest run of a deck (see ``store.remove_run``); cells removed."""
        with self._access() as db:
            return _store.remove_run(db, run_id)

    def merge_from(self, other_path: str | Path, make_current: bool = False) -> MergeReport:
        """Import another catalog file by content hash; conflicts are reported, never overwritten.

        Every row of the other file is checked first (a bad file is refused whole, naming it).
        Imported decks stay not current unless ``make_current`` asks to adopt, per deck name, the
        deck made current most recently in either catalog.
        """
        with self._lock:
            try:
                from celllab.catalog import merge as _merge

                return _merge.merge_from(self._db, self.path, other_path, make_current)
            except sqlite3.DatabaseError as exc:  # the source's own errors name the source
                if "disk is full" in str(exc):
                    raise CatalogError.single(str(self.path), "", "the disk is full; nothing of this "
                                              "write was stored (free space and run it again)") from None
                raise CatalogError.single(str(self.path), "", f"SQLite error: {exc}") from None

    # reading
    def decks(self) -> list[DeckInfo]:
        with self._access() as db:
            return _query.list_decks(db)

    def deck_params(self, deck: str) -> dict[str, Any]:
        with self._access() as db:
            return _query.deck_params(db, deck)

    def corners(self, deck: str | None = None) -> list[str]:
        with self._access() as db:
            _query.check_deck(db, deck)
            return _query.corners(db, deck)

    def query(
        self,
        deck: str | None = None,
        corner: str | None = "worst",
        where: str = "",
        order_by: str = "cap_density_fF_per_um2",
        descending: bool | None = None,
        limit: int | None = None,
        offset: int = 0,
        current_only: bool = True,
    ) -> list[dict[str, Any]]:
        """Filtered, ranked rows (keys ``query.ROW_KEYS``); corner None gives every corner."""
        with self._access() as db:
            return _query.run_query(
                db, deck, corner, where, order_by, descending, limit, offset, current_only
            )

    def count(
        self,
        deck: str | None = None,
        corner: str | None = "worst",
        where: str = "",
        current_only: bool = True,
    ) -> int:
        with self._access() as db:
            return _query.run_count(db, deck, corner, where, current_only)

    def pareto(
        self,
        metrics: list[str],
        deck: str | None = None,
        corner: str | None = "worst",
        where: str = "",
    ) -> list[dict[str, Any]]:
        """Non-dominated rows over 2 or 3 metrics, best first by the first metric."""
        with self._access() as db:
            return _pareto.catalog_pareto(db, metrics, deck, corner, where)

    def compare(
        self, names: list[str], deck: str | None = None, corner: str | None = "worst"
    ) -> list[dict[str, Any]]:
        with self._access() as db:
            return _query.compare(db, names, deck, corner)

    def name_taken(self, name: str, deck: str) -> bool:
        """Whether ``deck`` (a current deck's name or a hash) already holds a cell called ``name``."""
        with self._access() as db:
            return _query.name_taken(db, name, deck)

    def identical_cell(self, cell_hash: str, deck: str) -> str | None:
        """Name of the current cell of ``deck`` with this content hash (same definition), if any."""
        with self._access() as db:
            return _query.identical_cell(db, cell_hash, deck)

    def cell(self, name: str, deck: str | None = None) -> CellResult:
        """The full current record of ``name`` (responses, C-V curves, flags)."""
        with self._access() as db:
            return _store.load_cell(db, _query.find_cell_id(db, name, deck))


def open_catalog(path: str | Path | None = None, create: bool = True) -> Catalog:
    """Open the catalog at ``path`` (default ``db/celllab.sqlite``), creating it if ``create``."""
    return Catalog(Path(path) if path is not None else DEFAULT_CATALOG, create=create)
