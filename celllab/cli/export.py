"""The ``export`` verb: catalog results written for other planning tools.

    celllab export csv --where "esd_safe and leakage_nA_per_nF <= 5" --out picks.csv
    celllab export spice --deck lumen130 --cells DC_XCP_4 DC_MOM_2 --out decaps.lib
    celllab export touchstone --corner typ_25C --out sparams/
    celllab export datasheet --out datasheets/
    celllab export liberty --deck lumen130 --where "esd_safe" --out views/
    celllab export lef --deck lumen130 --out views/lumen130_decaps.lef

Each format is a few lines over ``celllab.export``. Without ``--out`` a single-file export
goes to stdout; an ``--out`` that is an existing folder (or ends with a path separator)
receives one file per cell where the format has one (spice, touchstone, datasheet), one
library per corner for liberty (``<deck>_<corner>.lib``), else a file with a default name.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from celllab import DEFAULT_CATALOG
from celllab.cli.args import MAX_ROWS, positive_number, whole_number
from celllab.cli.text import printable
from celllab.columns import AGGREGATE_CORNERS
from celllab.errors import CatalogError, CelllabError, Problem, did_you_mean

FORMATS = ("csv", "json", "schema", "spice", "touchstone", "datasheet", "liberty", "lef")
#: File written into an --out folder for the single-file formats.
DEFAULT_FILES = {
    "csv": "cells.csv",
    "json": "cells.json",
    "schema": "celllab-cells.schema.json",
    "spice": "cells.lib",
    "datasheet": "index.html",
}
#: Most R-C ladder sections per distributed line a SPICE export writes.
MAX_SEGMENTS = 20_000  # as celllab.export.spice.MAX_SEGMENTS (not imported: start-up time)
#: --corner words besides corner names: the per-metric extremes, and "all" (no corner singled out).
CORNER_WORDS = (*AGGREGATE_CORNERS, "all")


def _problem(field: str, message: str, value: Any = None, has_value: bool = True) -> CelllabError:
    return CelllabError([Problem("export", field, message, value, has_value=has_value)])


def _is_folder(out: str | None) -> bool:
    if not out:
        return False
    return out.endswith(("/", os.sep)) or Path(out).is_dir()


def _emit(args: argparse.Namespace, text: str, default_name: str) -> None:
    """Write one text to --out (file or folder) or stdout."""
    from celllab.export.files import make_folder, write_text_atomic

    if not args.out or args.out == "-":
        sys.stdout.write(text)
        return
    if _is_folder(args.out):
        target = make_folder(args.out) / default_name
    else:
        target = Path(args.out)
        make_folder(target.parent if str(target.parent) else ".")
    write_text_atomic(target, text, force=args.force)
    print(f"wrote {printable(target)}", file=sys.stderr)


def _emit_many(args: argparse.Namespace, files: dict[str, str]) -> None:
    """Write several files into the --out folder (created if missing); every target is checked
    before the first is written."""
    from celllab.export.files import write_files_atomic

    written = write_files_atomic(args.out, files, force=args.force)
    print(f"wrote {len(written)} files to {printable(args.out)}", file=sys.stderr)


def _add_file(files: dict[str, str], owners: dict[str, str], name: str, text: str, owner: str) -> None:
    """Add one output file; two different cells (or corners) may not share a file name."""
    if name in files:
        raise _problem(
            "--out",
            f"{owner} and {owners[name]} would both be written to {name}; export them "
            "separately (--cells) or into separate folders",
            None,
            has_value=False,
        )
    files[name] = text
    owners[name] = owner


# --------------------------------------------------------------------------- catalog access


def _query_corner(corner: str) -> str | None:
    """--corner as the library reads it: a name, "worst"/"best", or None for every corner."""
    return None if corner == "all" else corner


def _select_rows(cat: Any, args: argparse.Namespace) -> list[dict[str, Any]]:
    """Catalog rows for --deck/--corner/--where, narrowed to --cells, then --limit."""
    rows = cat.query(
        deck=args.deck,
        corner=_query_corner(args.corner),
        where=args.where,
        order_by=args.by,
        limit=None,
    )
    if args.cells:
        known = {r["name"] for r in cat.query(deck=args.deck, corner=_query_corner(args.corner))}
        missing = [n for n in args.cells if n not in known]
        if missing:
            raise CatalogError(
                [
                    Problem(
                        str(cat.path),
                        "--cells",
                        "no such cell in the catalog" + did_you_mean(name, sorted(known), n=3),
                        name,
                    )
                    for name in missing
                ]
            )
        wanted = set(args.cells)
        rows = [r for r in rows if r["name"] in wanted]
    if args.limit:
        names: list[str] = []
        for r in rows:
            if r["name"] not in names:
                names.append(r["name"])
        keep = set(names[: args.limit])
        rows = [r for r in rows if r["name"] in keep]
    return rows


def _single_deck(rows: Sequence[dict[str, Any]]) -> str | None:
    decks = sorted({r["deck"] for r in rows})
    if len(decks) > 1:
        raise _problem(
            "--deck",
            "the selected cells come from several decks "
            f"({', '.join(decks)}); choose one with --deck",
            None,
            has_value=False,
        )
    return decks[0] if decks else None


def _load_cells(cat: Any, rows: Sequence[dict[str, Any]]) -> tuple[list[Any], str | None]:
    deck = _single_deck(rows)
    names: list[str] = []
    for r in rows:
        if r["name"] not in names:
            names.append(r["name"])
    return [cat.cell(n, deck) for n in names], deck


def _render_corner(args: argparse.Namespace) -> str | None:
    """The corner of a one-corner view (SPICE, Touchstone): a named corner, else None (see
    ``celllab.columns``: each cell's first corner, or every corner where files are per corner)."""
    return None if args.corner in CORNER_WORDS else args.corner


def _need_cells(cells: Sequence[Any]) -> None:
    if not cells:
        raise _problem("--where", "no cell matches the selection", None, has_value=False)


# --------------------------------------------------------------------------- formats


def _export_csv(args: argparse.Namespace, cat: Any) -> None:
    from celllab.export.csv import render_csv

    rows = _select_rows(cat, args)
    _emit(args, render_csv(rows, comments=not args.no_comments, precision=_precision(args)),
          DEFAULT_FILES["csv"])


def _precision(args: argparse.Namespace) -> int | None:
    """--precision: significant digits, or None for "exact" (shortest round-trip text)."""
    from celllab.export.csv import MAX_PRECISION

    text = str(args.precision).strip().lower()
    if text == "exact":
        return None
    if not text.isdigit() or not 1 <= int(text) <= MAX_PRECISION:
        raise _problem("--precision", f"allowed: 1 to {MAX_PRECISION} significant digits, or "
                       "'exact'", args.precision)
    return int(text)


def _export_json(args: argparse.Namespace, cat: Any) -> None:
    from celllab.export.json import render_json

    cells, deck = _load_cells(cat, _select_rows(cat, args))
    _emit(args, render_json(cells, deck, include_curves=not args.no_curves), DEFAULT_FILES["json"])


def _export_spice(args: argparse.Namespace, cat: Any) -> None:
    from scipy import constants

    from celllab.export.files import file_stem
    from celllab.export.spice import _Names, render_spice_library, render_spice_subckt, spice_name

    cells, deck = _load_cells(cat, _select_rows(cat, args))
    _need_cells(cells)
    corner = _render_corner(args)
    percent = getattr(args, "ladder_accuracy_percent", None)
    accuracy = None if percent is None else percent * constants.centi  # per cent
    without = [c.name for c in cells if c.netlist is None]
    if without:
        print(
            f"note: no stored equivalent circuit for {len(without)} cell(s); their subcircuits "
            "are series ESR-ESL-C models from the corner metrics (see each header)",
            file=sys.stderr,
        )
    if _is_folder(args.out):
        files: dict[str, str] = {}
        owners: dict[str, str] = {}
        names = _Names()  # subcircuit names unique across the files, as in one library
        for c in cells:
            unique = names.get(c.name, spice_name(c.name))
            text = render_spice_subckt(
                c, corner, args.segments, deck, subckt_name=unique, accuracy=accuracy
            )
            _add_file(files, owners, f"{file_stem(c.name)}.sp", text, f"cell {c.name}")
        _emit_many(args, files)
    else:
        _emit(
            args,
            render_spice_library(cells, deck, corner, args.segments, accuracy=accuracy),
            DEFAULT_FILES["spice"],
        )


def _export_touchstone(args: argparse.Namespace, cat: Any) -> None:
    from celllab.export.touchstone import render_touchstone, touchstone_filename

    cells, deck = _load_cells(cat, _select_rows(cat, args))
    _need_cells(cells)
    corner = _render_corner(args)
    files: dict[str, str] = {}
    owners: dict[str, str] = {}
    for cell in cells:
        corners = [corner] if corner else [c.corner for c in cell.corners]
        for name in corners:
            text = render_touchstone(cell, name, deck, reference_ohm=args.reference_ohm)
            _add_file(files, owners, touchstone_filename(cell.name, name), text,
                      f"cell {cell.name} at corner {name}")
    if _is_folder(args.out):
        _emit_many(args, files)
    elif len(files) == 1:
        _emit(args, next(iter(files.values())), next(iter(files)))
    else:
        raise _problem(
            "--out",
            f"{len(files)} Touchstone files (one per cell and corner) need "
            "an output folder; give --out DIR/ or narrow with --cells and --corner",
            args.out,
            has_value=args.out is not None,
        )


def _export_datasheet(args: argparse.Namespace, cat: Any) -> None:
    from celllab.cli.progress import steps
    from celllab.export.datasheet import render_datasheet_html, render_library_html
    from celllab.export.files import file_stem

    cells, deck = _load_cells(cat, _select_rows(cat, args))
    _need_cells(cells)
    if args.pdf:
        _export_datasheet_pdf(args, cells, deck)
        return
    summary = _query_corner(args.corner)  # the summary table reads worst/best like a query
    plots = not args.no_plots
    if _is_folder(args.out):
        files: dict[str, str] = {}
        owners: dict[str, str] = {}
        with steps("datasheets", len(cells)) as advance:
            for c in cells:
                _add_file(files, owners, f"{file_stem(c.name)}.html",
                          render_datasheet_html(c, deck, plots=plots), f"cell {c.name}")
                advance(1)
        # the index links to the cell pages instead of repeating them (a page, not megabytes)
        _add_file(files, owners, DEFAULT_FILES["datasheet"],
                  render_library_html(cells, deck, summary, plots=plots,
                                      link=lambda c: f"{file_stem(c.name)}.html"),
                  "the library index")
        _emit_many(args, files)
    elif len(cells) == 1:
        _emit(
            args,
            render_datasheet_html(cells[0], deck, plots=plots),
            f"{file_stem(cells[0].name)}.html",
        )
    else:
        _emit(
            args, render_library_html(cells, deck, summary, plots=plots), DEFAULT_FILES["datasheet"]
        )


def _export_datasheet_pdf(args: argparse.Namespace, cells: Sequence[Any], deck: str | None) -> None:
    """One PDF per cell: into the --out folder, or one cell's PDF to --out (never stdout).
    Every target is checked (links, existing files without --force) before the first is drawn."""
    from celllab.cli.progress import steps
    from celllab.export.datasheet import write_datasheet_pdf
    from celllab.export.files import check_files, check_target, file_stem, make_folder

    if _is_folder(args.out):
        names = [f"{file_stem(cell.name)}.pdf" for cell in cells]
        check_files(args.out, names, force=args.force)
        folder = make_folder(args.out)
        with steps("PDF datasheets", len(cells)) as advance:
            for name, cell in zip(names, cells):
                write_datasheet_pdf(folder / name, cell, deck)
                advance(1)
        print(f"wrote {len(cells)} files to {printable(folder)}", file=sys.stderr)
        return
    if not args.out or args.out == "-":
        raise _problem("--out", "a PDF is written to a file: give --out FILE.pdf (one cell) or "
                       "--out DIR/", args.out, has_value=args.out is not None)
    if len(cells) > 1:
        raise _problem("--out", f"{len(cells)} cells make {len(cells)} PDFs: give an output "
                       "folder (--out DIR/) or narrow with --cells", args.out)
    write_datasheet_pdf(check_target(args.out, force=args.force), cells[0], deck)
    print(f"wrote {printable(args.out)}", file=sys.stderr)


def _export_liberty(args: argparse.Namespace, cat: Any) -> None:
    from celllab.export.catalog_deck import stored_deck
    from celllab.export.liberty import liberty_filename, render_liberty

    cells, deck_name = _load_cells(cat, _select_rows(cat, args))
    _need_cells(cells)
    deck = stored_deck(cat, str(deck_name))
    # every corner in the run's order (the catalog keeps it; the stored deck's keys are sorted)
    corners = [args.corner] if args.corner not in CORNER_WORDS else cat.corners(deck_name)
    files: dict[str, str] = {}
    owners: dict[str, str] = {}
    for c in corners:
        _add_file(files, owners, liberty_filename(deck.name, c), render_liberty(cells, deck, c), f"corner {c}")
    if _is_folder(args.out):
        _emit_many(args, files)
    elif len(files) == 1:
        _emit(args, next(iter(files.values())), next(iter(files)))
    else:
        raise _problem(
            "--out",
            f"{len(files)} Liberty libraries (one per corner: {', '.join(corners)}) need an "
            "output folder; give --out DIR/ or name one corner with --corner",
            args.out,
            has_value=args.out is not None,
        )


def _export_lef(args: argparse.Namespace, cat: Any) -> None:
    from celllab.export.catalog_deck import stored_deck
    from celllab.export.files import file_stem
    from celllab.export.lef import render_lef

    cells, deck_name = _load_cells(cat, _select_rows(cat, args))
    _need_cells(cells)
    deck = stored_deck(cat, str(deck_name))
    grid_um = args.grid_nm / 1000 if args.grid_nm is not None else None
    _emit(
        args, render_lef(cells, deck, manufacturing_grid_um=grid_um), f"{file_stem(deck.name)}.lef"
    )


EXPORTERS: dict[str, Callable[[argparse.Namespace, Any], None]] = {
    "csv": _export_csv,
    "json": _export_json,
    "spice": _export_spice,
    "touchstone": _export_touchstone,
    "datasheet": _export_datasheet,
    "liberty": _export_liberty,
    "lef": _export_lef,
}


def cmd_export(args: argparse.Namespace) -> int:
    if args.format == "schema":
        import json

        from celllab.export.schema import export_json_schema

        _emit(args, json.dumps(export_json_schema(), indent=2) + "\n", DEFAULT_FILES["schema"])
        return 0
    accuracy = getattr(args, "ladder_accuracy_percent", None)
    if accuracy is not None and not 0 < accuracy < 100:
        raise _problem("--ladder-accuracy-percent", "must be > 0 and < 100 (percent)", accuracy)
    from celllab.catalog import open_catalog

    if not Path(args.catalog).exists():
        raise CatalogError.single(
            args.catalog,
            "",
            "no catalog file here; build one first (celllab build) or pass --catalog PATH",
        )
    with open_catalog(args.catalog, create=False) as cat:
        if args.corner not in CORNER_WORDS:
            known = cat.corners(args.deck)
            if args.corner not in known:
                raise _problem(
                    "--corner",
                    "not a corner of the catalog; allowed: "
                    + ", ".join([*known, *CORNER_WORDS]),
                    args.corner,
                )
        try:
            EXPORTERS[args.format](args, cat)
        except (ValueError, KeyError) as exc:  # a record this format cannot hold
            message = exc.args[0] if exc.args else repr(exc)
            raise _problem(args.format, str(message), None, has_value=False) from None
        except OSError as exc:  # standard output refused (a full disk, a closed pipe, ...)
            if not args.out or args.out == "-":
                raise CelllabError([Problem("standard output", "", f"cannot write: {exc.strerror or exc}",
                                            has_value=False)]) from None
            where = exc.filename or args.out
            raise _problem(
                "--out", f"cannot write {printable(where)}: {exc.strerror or exc}", args.out
            ) from None
    return 0


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = sub.add_parser(
        "export",
        help="write catalog results as CSV, JSON, SPICE, Touchstone, HTML datasheets or "
        "Liberty/LEF library views",
        description="Export catalog results for other planning tools: csv (one row per cell "
        "and corner), json (full records; validate with the 'schema' export), spice "
        "(.subckt NAME vdd vss per cell), touchstone (one-port Z, v1.1, per cell and corner), "
        "datasheet (HTML with plots), liberty (one .lib library per corner: area, leakage power, "
        "power/ground pins, decap marker, capacitance and ESR), lef (technology section from the "
        "deck and one macro per cell). Every export carries the caution that the numbers are "
        "estimates, not sign-off.",
    )
    p.add_argument(
        "format", choices=FORMATS, metavar="FORMAT", help=f"one of: {', '.join(FORMATS)}"
    )
    p.add_argument(
        "--catalog",
        default=str(DEFAULT_CATALOG),
        metavar="PATH",
        help="catalog file (default: %(default)s)",
    )
    p.add_argument("--deck", metavar="NAME", help="only this deck (name or deck hash)")
    p.add_argument(
        "--corner",
        default="worst",
        metavar="CORNER",
        help="a corner name, or 'worst' / 'best' (each metric at its least / most "
        "favourable corner) or 'all'; filters and csv rows use it, touchstone and liberty "
        "write every corner unless one is named (default: %(default)s)",
    )
    p.add_argument(
        "--where",
        default="",
        metavar="EXPR",
        help='filter, e.g. "leakage_nA_per_nF <= 5 and esd_safe" '
        "(the language of 'celllab rank --help')",
    )
    p.add_argument("--cells", nargs="+", metavar="NAME", help="only these cells")
    p.add_argument(
        "--by",
        default="cap_density_fF_per_um2",
        metavar="COLUMN",
        help="order of the cells (default: %(default)s, best first)",
    )
    p.add_argument(
        "--limit",
        type=whole_number(0, MAX_ROWS),
        default=0,
        metavar="N",
        help="only the first N cells in that order (default: all)",
    )
    p.add_argument(
        "--out",
        metavar="PATH",
        help="output file, or folder (existing or ending "
        "in '/') for one file per cell (liberty: per corner); default: stdout",
    )
    p.add_argument(
        "--no-comments",
        action="store_true",
        help="csv: no leading '#' lines (caution, units legend)",
    )
    p.add_argument(
        "--precision",
        default="6",
        metavar="N",
        help="csv: significant digits of numbers, 1-17, or 'exact' for the shortest text that "
        "reads back as the stored value (default: %(default)s)",
    )
    p.add_argument(
        "--no-curves", action="store_true", help="json: metrics only, without Z(f) and C-V arrays"
    )
    p.add_argument(
        "--segments",
        type=whole_number(1, MAX_SEGMENTS),
        metavar="N",
        help="spice: R-C ladder segments per distributed line, 1 to "
        f"{MAX_SEGMENTS} (default: from the highest swept frequency and "
        "--ladder-accuracy-percent)",
    )
    p.add_argument(
        "--ladder-accuracy-percent",
        type=float,
        metavar="P",
        help="spice: largest deviation of each R-C ladder from its distributed line at the "
        "highest swept frequency, percent (default: about 0.5); a file needing more than "
        f"{MAX_SEGMENTS} segments says in its header that it is coarser",
    )
    p.add_argument(
        "--reference-ohm",
        type=positive_number(1e6),
        default=1.0,
        metavar="R",
        help="touchstone: reference resistance of the option line; data are Z/R "
        "(default: %(default)s)",
    )
    p.add_argument("--no-plots", action="store_true", help="datasheet: tables only")
    p.add_argument("--pdf", action="store_true",
                   help="datasheet: one PDF per cell instead of HTML (--out FILE.pdf or DIR/)")
    p.add_argument(
        "--force",
        action="store_true",
        help="replace existing output files (never links, pipes or read-only files)",
    )
    p.add_argument(
        "--grid-nm",
        type=positive_number(1e6),
        metavar="NM",
        help="lef: manufacturing grid, nm, > 0 (default: the coarsest grid every deck length lies on)",
    )
    p.set_defaults(func=cmd_export)
