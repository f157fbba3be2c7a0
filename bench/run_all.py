"""Run every benchmark in bench/ (each prints its own table).

    python bench/run_all.py          # small sizes (a few minutes on 2 cores)
    python bench/run_all.py --full   # library scale: bench_scale at 10k variants / 1.2 M rows

bench_scale.py prints the library-scale figures (engine, ngspice, store, queries, CLI start-up,
Pareto) as value / reference / ratio / goal; bench_tui.py the UI figures, bench_planner.py the
fill optimizer, bench_network.py the supply network.
"""

import runpy
import sys
from pathlib import Path

here = Path(__file__).resolve().parent
full = "--full" in sys.argv[1:]
small = {"bench_tui.py": ["--cells", "20000", "--repeats", "1"]}
for script in sorted(here.glob("bench_*.py")):
    print(f"== {script.name}", flush=True)
    args = ["--full"] if full and script.name == "bench_scale.py" else []
    if not full:
        args += small.get(script.name, [])
    sys.argv = [str(script), *args]
    try:
        runpy.run_path(str(script), run_name="__main__")
    except SystemExit as exc:
        if exc.code not in (None, 0):
            raise
