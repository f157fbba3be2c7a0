"""Run every benchmark in bench/ (each prints its own table)."""

import runpy
import sys
from pathlib import Path

here = Path(__file__).resolve().parent
for script in sorted(here.glob("bench_*.py")):
    print(f"== {script.name}", flush=True)
    sys.argv = [str(script)]
    runpy.run_path(str(script), run_name="__main__")
