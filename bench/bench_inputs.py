"""How checking a deck grows with its corner count, and a cell file with its variants.

Prints time per corner (and per variant) at several sizes; a flat column means linear cost.
Ratios are against the smallest size in the same run, so the machine's speed cancels out.
Run: .venv/bin/python bench/bench_inputs.py
"""

from __future__ import annotations

import time
from pathlib import Path

from celllab.cells import parse_cells
from celllab.deck import load_deck

ROOT = Path(__file__).resolve().parents[1]
BASE = (ROOT / "process_decks" / "lumen130.toml").read_text(encoding="utf-8")


def _deck_with(corners: int, folder: Path) -> Path:
    extra = "".join(f"\n[corners.c{i:04d}]\ntemperature_C = {i % 150}\nsupply_scale = 1.05\n"
                    f'scale = {{ "oxides.core.t_ox_nm" = 1.01 }}\n' for i in range(corners - 4))
    path = folder / f"deck_{corners}.toml"
    path.write_text(BASE + extra, encoding="utf-8")
    return path


def _best_of(n: int, call) -> float:  # type: ignore[no-untyped-def]
    times = []
    for _ in range(n):
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        print("deck check (load + every corner validated)")
        print(f"{'corners':>8} {'seconds':>9} {'ms/corner':>10} {'ratio':>6}")
        first = None
        for n in (5, 25, 50, 100):
            path = _deck_with(n, folder)
            t = _best_of(3, lambda p=path: load_deck(p))
            per = t / n
            first = first or per
            print(f"{n:>8} {t:>9.3f} {1000 * per:>10.2f} {per / first:>6.2f}")
        deck = load_deck(ROOT / "process_decks" / "lumen130.toml")
        print("\ncell file check (expand + validate + geometry)")
        print(f"{'variants':>8} {'seconds':>9} {'us/variant':>10} {'ratio':>6}")
        first = None
        for rows in (1, 10, 64):  # 100 widths x rows heights
            n = 100 * rows
            data = {"family": [{"name": "f", "topology": "mom", "width_sites": {"start": 8, "stop": 107},
                                "height_rows": {"start": 1, "stop": rows}}]}
            t = _best_of(2, lambda d=data: parse_cells(d, deck, "bench.toml"))
            per = t / n
            first = first or per
            print(f"{n:>8} {t:>9.3f} {1e6 * per:>10.1f} {per / first:>6.2f}")


if __name__ == "__main__":
    main()
