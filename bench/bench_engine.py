"""Engine throughput: how the cost per variant falls as variants are batched (vectorization).

Reference run in the same process: one variant per call. Reported: seconds per variant at each
batch size, the ratio against the one-at-a-time reference, and peak traced memory.
Run:  .venv/bin/python bench/bench_engine.py   (prints a table; not a test)
"""

from __future__ import annotations

import time
import tracemalloc
from pathlib import Path

from celllab.cells import CellSpec
from celllab.deck import load_deck
from celllab.engine import characterize

ROOT = Path(__file__).resolve().parents[1]


def variants(n: int) -> list[CellSpec]:
    cells = []
    for i in range(n):
        width = 8 + (i % 56)
        cells.append(CellSpec(name=f"b{i}", topology="nmos_inversion", width_sites=width,
                              fingers=1 + i % 3, height_rows=1 + (i // 56) % 2))
    return cells


def timed(deck, cells) -> tuple[float, int]:  # type: ignore[no-untyped-def]
    """(seconds, peak traced bytes); memory is traced in a second run so it does not slow the first."""
    t0 = time.perf_counter()
    characterize(deck, cells)
    elapsed = time.perf_counter() - t0
    tracemalloc.start()
    characterize(deck, cells)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return elapsed, peak


def main() -> None:
    deck = load_deck(ROOT / "process_decks" / "lumen130.toml")
    cells = variants(1000)
    timed(deck, cells[:2])  # warm-up (imports, caches)
    singles = [timed(deck, [c])[0] for c in cells[:10]]
    reference = sum(singles) / len(singles)
    print(f"reference: one variant per call, {len(deck.corners)} corners: {reference * 1e3:.1f} ms/variant")
    print(f"{'batch':>7} {'s total':>9} {'ms/variant':>11} {'speed-up vs reference':>22} {'peak MiB':>9}")
    for n in (10, 100, 1000):
        elapsed, peak = timed(deck, cells[:n])
        per = elapsed / n
        print(f"{n:>7} {elapsed:>9.3f} {per * 1e3:>11.3f} {reference / per:>22.1f} {peak / 2**20:>9.1f}")


if __name__ == "__main__":
    main()
