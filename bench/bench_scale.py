"""Library-scale figures side by side with a reference measured in the same run.

Each line: figure, measured value, reference (what the same machine does for the same data in
the simplest way), ratio value / reference and the goal. Figures:

* engine: characterize N variants x the deck's corners (lumen130), extrapolated linearly to
  100 000; reference: one numpy element-wise pass (a complex reciprocal) over an array of the
  result's shape (N, corners, frequencies). Peak resident memory of that run (own process).
  Once with the deck's ESD events and broken-oxide analysis (the default) and once without
  (``esd=False``: the small-signal characterization alone, what the 10 s goal is about).
* per cell-corner: engine time per cell x corner without the ESD transients (the small-signal
  characterization, which is what an AC run computes) against one ngspice AC run of that
  cell's exported subcircuit over the same frequencies (ngspice from Debian, /usr/bin/ngspice).
* store: ``Catalog.store_run`` of the characterized run against a plain ``executemany`` of the
  very same rows into an empty catalog.
* ranked query (API) on M metric rows, worst corner / one corner; reference: the bare SQLite
  walk of the metric index (``ORDER BY metric LIMIT 20``) on the same file.
* the same through the CLI (``celllab rank``), and ``celllab --help``; reference: starting the
  interpreter (``python -c pass``).
* Pareto over 2 / 3 metrics (API) against ``pareto_mask`` on the same values in memory.

The query catalog is a synthetic invented run stored through ``store_run`` and then replicated
row for row in SQL up to M metric rows (storing it cell by cell is what the store line measures).

    python bench/bench_scale.py            # small: 1 000 variants, 120 000 metric rows
    python bench/bench_scale.py --full     # 10 000 variants, 1.2 M metric rows
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import sqlite3
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))
HERE = Path(__file__).resolve().parent
if str(HERE) not in sys.path:
    sys.path.insert(0, str(HERE))

PY = sys.executable
CELLLAB = str(Path(PY).with_name("celllab"))
NGSPICE = shutil.which("ngspice")
DECK = ROOT / "process_decks" / "lumen130.toml"


@dataclass
class Figure:
    name: str
    value: float
    unit: str
    reference: float | None = None
    goal: str = ""

    @property
    def ratio(self) -> float | None:
        if self.reference is None or self.reference <= 0:
            return None
        return self.value / self.reference


def _fmt(value: float | None, unit: str) -> str:
    if value is None:
        return "-"
    if unit == "s":
        return f"{value * 1e3:.1f} ms" if value < 1 else f"{value:.2f} s"
    if unit == "MiB":
        return f"{value:.0f} MiB"
    return f"{value:.3g} {unit}"


def print_table(figures: list[Figure]) -> None:
    print(f"{'figure':<58} {'value':>11} {'reference':>11} {'ratio':>9}  goal")
    for f in figures:
        ratio = "-" if f.ratio is None else f"{f.ratio:.3g}x"
        print(f"{f.name:<58} {_fmt(f.value, f.unit):>11} {_fmt(f.reference, f.unit):>11} "
              f"{ratio:>9}  {f.goal}")


def best_of(fn: Callable[[], object], repeats: int = 3) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


# --------------------------------------------------------------------------- engine

def variants(n: int) -> list:  # type: ignore[type-arg]
    """``n`` distinct nmos_inversion variants (width x fingers x height; up to 192 000)."""
    from celllab.cells import CellSpec

    return [CellSpec(name=f"v{i}", topology="nmos_inversion", width_sites=8 + i % 1000,
                     fingers=1 + (i // 1000) % 3, height_rows=1 + (i // 3000) % 64)
            for i in range(n)]


_ENGINE_CHILD = r"""
import json, resource, sys, time
sys.path.insert(0, sys.argv[3])
from bench_scale import variants
from celllab.deck import load_deck
from celllab.engine import characterize
deck = load_deck(sys.argv[1])
n = int(sys.argv[2])
esd = sys.argv[4] == "esd"
cells = variants(n)
characterize(deck, cells[:2], esd=esd)
t0 = time.perf_counter()
run = characterize(deck, cells, esd=esd)
elapsed = time.perf_counter() - t0
n_freq = max(len(c.response.freq_Hz) for c in run.cells[0].corners)
print(json.dumps({"seconds": elapsed, "corners": len(run.corners), "n_freq": n_freq,
                  "maxrss_kib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss}))
"""


def engine_figures(n: int, esd: bool = True) -> tuple[list[Figure], float]:
    """Figures of the engine (with or without the ESD events); also returns seconds per cell x
    corner."""
    import numpy as np

    out = subprocess.run([PY, "-c", _ENGINE_CHILD, str(DECK), str(n), str(HERE), "esd" if esd else "no-esd"],
                         capture_output=True, text=True, check=True)
    info = json.loads(out.stdout.strip().splitlines()[-1])
    seconds, corners, n_freq = info["seconds"], info["corners"], info["n_freq"]
    rng = np.random.default_rng(1)
    z = rng.uniform(1, 2, (n, corners, n_freq)) + 1j * rng.uniform(1, 2, (n, corners, n_freq))
    ref = best_of(lambda: np.reciprocal(z))
    per_cell_corner = seconds / (n * corners)
    how = "" if esd else ", no ESD"
    figures = [
        Figure(f"characterize 100k variants x {corners} corners{how} (from {n:,})",
               seconds * 100_000 / n, "s", None, "<= 10 s"),
        Figure(f"engine{how} vs one numpy pass over ({n:,}, {corners}, {n_freq}) complex",
               seconds, "s", ref, "<= 30x"),
        Figure(f"peak resident memory, {n:,} variants{how} (process)",
               info["maxrss_kib"] / 1024, "MiB", None, "<= 1 GiB at 100k"),
    ]
    return figures, per_cell_corner


def ngspice_figure(per_cell_corner: float) -> list[Figure]:
    if NGSPICE is None:
        return [Figure("per cell-corner vs ngspice AC (ngspice not installed)", per_cell_corner,
                       "s", None, ">= 1000x faster")]
    import numpy as np

    from celllab.cells import load_cells
    from celllab.deck import load_deck
    from celllab.engine import characterize
    from celllab.export.spice import spice_name, stored_circuits, write_spice

    deck = load_deck(DECK)
    specs = load_cells(ROOT / "process_decks" / "cells" / "lumen130_cells.toml", deck)
    run = characterize(deck, specs[:1])
    cell = run.cells[0]
    corner = next(iter(stored_circuits(cell)))
    freq = np.asarray(cell.corners[0].response.freq_Hz)
    with tempfile.TemporaryDirectory() as tmp:
        lib = write_spice(Path(tmp) / "cell.lib", [cell], run.deck_name, corner)
        points = len(freq)
        decades = np.log10(freq.max() / freq.min())
        per_dec = max(1, round((points - 1) / decades))
        deckfile = Path(tmp) / "ac.cir"
        deckfile.write_text(
            f"bench\n.include {lib.name}\nX1 port 0 {spice_name(cell.name)}\nI1 0 port AC 1\n"
            f".control\nac dec {per_dec} {freq.min():.6e} {freq.max():.6e}\n"
            f"wrdata out.txt v(port)\n.endc\n.end\n")

        def spice() -> None:  # ngspice -b exits 1 after a .control block; check the output
            out = Path(tmp) / "out.txt"
            out.unlink(missing_ok=True)
            subprocess.run([NGSPICE, "-b", deckfile.name], cwd=tmp, capture_output=True)
            assert out.stat().st_size > 0

        ref = best_of(spice)
    return [Figure("per cell-corner, no ESD: engine vs ngspice AC of the exported circuit",
                   per_cell_corner, "s", ref, "<= 0.001x (1000x faster)")]


# --------------------------------------------------------------------------- store

def store_figures(n: int) -> list[Figure]:
    from celllab.catalog import open_catalog
    from celllab.deck import load_deck
    from celllab.engine import characterize

    deck = load_deck(DECK)
    run = characterize(deck, variants(n))
    with tempfile.TemporaryDirectory() as tmp:
        path, plain = Path(tmp) / "store.sqlite", Path(tmp) / "plain.sqlite"
        catalog = open_catalog(path)
        t0 = time.perf_counter()
        catalog.store_run(run)
        seconds = time.perf_counter() - t0
        catalog.close()
        open_catalog(plain).close()
        src, dst = sqlite3.connect(path), sqlite3.connect(plain)
        tables = [(t, src.execute(f"SELECT * FROM {t}").fetchall(),
                   [r[1] for r in src.execute(f"PRAGMA table_info({t})")])
                  for t in ("decks", "runs", "cells", "corner_metrics", "corner_extremes",
                            "responses", "cv_curves")]
        t0 = time.perf_counter()
        with dst:
            for table, rows, cols in tables:
                dst.executemany(f"INSERT INTO {table} ({', '.join(map(repr, cols))}) VALUES "
                                f"({', '.join('?' for _ in cols)})", rows)
        ref = time.perf_counter() - t0
        src.close()
        dst.close()
    return [Figure(f"store {n:,} variants x {len(run.corners)} corners (store_run)", seconds, "s",
                   ref, "executemany of the same rows")]


# --------------------------------------------------------------------------- queries

def build_query_catalog(path: Path, metric_rows: int, base_cells: int = 2000) -> int:
    """Store a synthetic run, then replicate its rows in SQL up to ``metric_rows``."""
    from bench_tui import synthetic_run

    from celllab.catalog import open_catalog

    catalog = open_catalog(path)
    catalog.store_run(synthetic_run(base_cells))
    catalog.close()
    con = sqlite3.connect(path)
    copies = max(1, metric_rows // (3 * base_cells))
    cell_cols = [r[1] for r in con.execute("PRAGMA table_info(cells)")]
    metric_cols = [r[1] for r in con.execute("PRAGMA table_info(corner_metrics)")]
    extreme_cols = [r[1] for r in con.execute("PRAGMA table_info(corner_extremes)")]

    def cols(names: list[str], swap: dict[str, str]) -> str:
        return ", ".join(swap.get(c, f'"{c}"') for c in names)

    with con:
        for k in range(1, copies):
            shift = k * base_cells
            swap = {"cell_id": f"cell_id + {shift}", "name": f"name || '_r{k}'",
                    "cell_hash": f"cell_hash || '_r{k}'"}
            con.execute(
                f"INSERT INTO cells ({cols(cell_cols, {})}) SELECT {cols(cell_cols, swap)} "
                f"FROM cells WHERE cell_id <= {base_cells}")
            con.execute(
                f"INSERT INTO corner_metrics ({cols(metric_cols, {})}) SELECT "
                f"{cols(metric_cols, {'cell_id': f'cell_id + {shift}'})} FROM corner_metrics "
                f"WHERE cell_id <= {base_cells}")
            con.execute(
                f"INSERT INTO corner_extremes ({cols(extreme_cols, {})}) SELECT "
                f"{cols(extreme_cols, {'cell_id': f'cell_id + {shift}'})} FROM corner_extremes "
                f"WHERE cell_id <= {base_cells}")
    con.execute("ANALYZE")
    n = con.execute("SELECT COUNT(*) FROM corner_metrics").fetchone()[0]
    con.close()
    return int(n)


def query_figures(metric_rows: int) -> list[Figure]:
    from celllab.catalog import open_catalog

    figures = []
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "query.sqlite"
        t0 = time.perf_counter()
        rows = build_query_catalog(path, metric_rows)
        print(f"  (query catalog: {rows:,} metric rows built in {time.perf_counter() - t0:.1f} s)",
              flush=True)
        catalog = open_catalog(path)
        con = sqlite3.connect(path)
        ref_worst = best_of(lambda: con.execute(
            "SELECT cell_id FROM corner_extremes WHERE kind = 'worst' ORDER BY "
            "cap_density_fF_per_um2 DESC LIMIT 20").fetchall())
        ref_corner = best_of(lambda: con.execute(
            "SELECT cell_id FROM corner_metrics WHERE corner = 'typ_25C' ORDER BY "
            "cap_density_fF_per_um2 DESC LIMIT 20").fetchall())
        m = f"{rows / 1e6:.2f} M"
        for label, corner, ref in (("worst corner", "worst", ref_worst),
                                   ("one corner", "typ_25C", ref_corner)):
            catalog.query(corner=corner, limit=20)
            t = best_of(lambda c=corner: catalog.query(corner=c, limit=20))
            figures.append(Figure(f"ranked query, {m} metric rows, {label} (API)", t, "s", ref,
                                  "<= 50 ms"))
        where = "leakage_nA_per_nF <= 5 and esd_safe"
        t = best_of(lambda: catalog.query(corner="worst", where=where, limit=20))
        figures.append(Figure(f"ranked query + filter, {m} rows, worst (API)", t, "s", ref_worst,
                              "<= 50 ms"))
        startup = best_of(lambda: subprocess.run([PY, "-c", "pass"], check=True))
        for label, args in (("ranked query through the CLI (celllab rank)",
                             ["rank", "--catalog", str(path), "--limit", "20"]),
                            ("CLI start-up: celllab --help", ["--help"])):
            t = best_of(lambda a=args: subprocess.run([CELLLAB, *a], capture_output=True,
                                                      check=True))
            figures.append(Figure(label, t, "s", startup,
                                  "<= 0.3 s" if "help" in label else "start-up well under 0.3 s"))
        import numpy as np

        from celllab.catalog.pareto import pareto_mask
        from celllab.columns import RANKED

        for metrics in (["cap_density_fF_per_um2", "leakage_nA_per_nF"],
                        ["cap_density_fF_per_um2", "leakage_nA_per_nF", "esr_ohm"]):
            t = best_of(lambda ms=metrics: catalog.pareto(ms), repeats=2)
            cols = ", ".join(f'"{x}"' for x in metrics)
            values = np.array(con.execute(
                f"SELECT {cols} FROM corner_extremes WHERE kind = 'worst'").fetchall(),
                dtype=float) * np.array([RANKED[x].minimize_sign for x in metrics])
            values = values[~np.isnan(values).any(axis=1)]
            ref = best_of(lambda v=values: pareto_mask(v), repeats=2)
            figures.append(Figure(f"Pareto, {len(metrics)} metrics, {m} rows (API)", t, "s", ref,
                                  "<= 1 s"))
        con.close()
        catalog.close()
    return figures


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--full", action="store_true",
                        help="10 000 variants and 1.2 M metric rows (default: 1 000 / 120 000)")
    parser.add_argument("--variants", type=int, help="engine and store variants")
    parser.add_argument("--metric-rows", type=int, help="metric rows of the query catalog")
    parser.add_argument("--json", type=Path, help="also write the figures to this JSON file")
    args = parser.parse_args(argv)
    n = args.variants or (10_000 if args.full else 1_000)
    rows = args.metric_rows or (1_200_000 if args.full else 120_000)
    print(f"machine: {os.cpu_count()} cores, {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}",
          flush=True)
    figures, per_cc = engine_figures(n, esd=False)
    with_esd, _ = engine_figures(n)
    figures += with_esd
    figures += ngspice_figure(per_cc)  # like for like: the small-signal characterization vs an AC run
    figures += store_figures(n)
    figures += query_figures(rows)
    print_table(figures)
    if args.json:
        args.json.write_text(json.dumps([{**f.__dict__, "ratio": f.ratio} for f in figures],
                                        indent=1))
    return 0


if __name__ == "__main__":
    sys.exit(main())
