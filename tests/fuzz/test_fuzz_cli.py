"""Fuzzing the command line in process: generated argument lists for every verb but the
interactive ones, with hostile values for every option. Each run ends with exit status 0, 1
(merge conflicts) or 2 (one located line per problem on stderr), never a traceback; nothing it
prints carries a raw terminal escape. A few cases run as real processes with argument bytes
that are not UTF-8."""

from __future__ import annotations

import contextlib
import importlib.util
import io
import os
import subprocess
import sys
from collections import Counter
from pathlib import Path
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.catalog import open_catalog
from celllab.cli.main import main

from .conftest import fuzz_settings
from .strategies import EDGE_TEXTS, pick

REPO = Path(__file__).resolve().parents[2]
DECK = REPO / "process_decks" / "lumen130.toml"


def _synthetic_runs():  # type: ignore[no-untyped-def]
    path = REPO / "tests" / "catalog" / "conftest.py"
    spec = importlib.util.spec_from_file_location("synthetic_runs_cli", path)
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def places(tmp_path_factory: pytest.TempPathFactory) -> dict[str, str]:
    folder = tmp_path_factory.mktemp("cli")
    catalog = folder / "cat.sqlite"
    with open_catalog(catalog) as cat:
        cat.store_run(_synthetic_runs().make_run(n_cells=6, n_freq=8))
    (folder / "cells.toml").write_text('[[cell]]\nname = "c1"\ntopology = "mom"\nwidth_sites = 16\n')
    (folder / "junk.sqlite").write_text("not a catalog")
    (folder / "file").write_text("x")
    (folder / "block.toml").write_text(
        '[block]\nname = "b1"\ndeck = "invented_n7x"\nswitching_power_W = 0.1\nclock_GHz = 0.5\n'
        "activity = 0.1\ncurrent_step_A = 0.05\nripple_fraction = 0.05\npackage_inductance_nH = 0.5\n"
        'package_resistance_mohm = 10\n\n[[region]]\nname = "r1"\nclock_MHz = 100\n\n'
        '[[region.row_gaps]]\nname = "g"\nheight_rows = 1\nwidth_sites = [12, 40]\ncount = [30, 10]\n'
        "\n[network]\nir_drop_limit_mV = 10\npackage_resistance_mohm = 10\npackage_inductance_nH = 0.5\n"
        "[network.regions.r1]\ngrid_resistance_mohm = 1\ngrid_inductance_pH = 10\n"
        "intrinsic_capacitance_nF = 1\n")
    return {"block": str(folder / "block.toml"), "catalog": str(catalog), "cells": str(folder / "cells.toml"), "junk": str(folder / "junk.sqlite"),
            "out": str(folder / "out"), "file": str(folder / "file"), "folder": str(folder)}


PATH_KINDS = ["catalog", "cells", "junk", "out", "file", "folder", "deck", "missing", "dev", "proc",
              "through", "slash"]
NUMBERS = ["0", "1", "5", "-1", "99999999999999999999", "1e400", "nan", "inf", "2.5", "abc", ""]
WHERES = ["", "esd_safe", "cap_fF > 1 and not esd_safe", "(" * 60 + "esd_safe" + ")" * 60, "not " * 80 + "x",
          "name ~ \"*\"", "cap_fF >", "topology in (mom, cross_coupled)", "\x1b[31m"]
OPTIONS: dict[str, list[str]] = {
    "--catalog": ["path"], "--deck": ["path", "name"], "--cells": ["path", "name"], "--where": ["where"],
    "--corner": ["corner"], "--by": ["column"], "--limit": ["number"], "--offset": ["number"],
    "--columns": ["column"], "--metrics": ["column"], "--out": ["path"], "--segments": ["number"],
    "--reference-ohm": ["number"], "--corners": ["corner"], "--grid-nm": ["number"],
}
FLAGS = ["--json", "--asc", "--desc", "--force", "--no-plots", "--no-curves", "--no-comments",
         "--make-current", "--quiet", "--no-explain", "--bogus"]
VERBS = ["check", "build", "rank", "pareto", "compare", "decks", "show", "merge", "export", "plan", "nope"]
#: The options each verb takes (drawn most of the time; any option otherwise).
VERB_OPTIONS: dict[str, list[str]] = {
    "check": ["--deck", "--cells"], "build": ["--deck", "--cells", "--catalog", "--corners"],
    "rank": ["--where", "--corner", "--by", "--limit", "--offset", "--columns", "--deck"],
    "pareto": ["--where", "--corner", "--metrics", "--deck", "--columns"],
    "compare": ["--corner", "--deck"], "decks": [], "show": ["--deck"], "merge": [],
    "export": ["--where", "--corner", "--by", "--limit", "--out", "--segments", "--reference-ohm",
               "--deck", "--cells", "--grid-nm"],
    "plan": ["--out", "--catalog"], "nope": [],
}
WORDS = {
    "corner": ["worst", "best", "all", "typ_25C", "slow_125C", "nope", "", "\u202e"],
    "column": ["cap_fF", "cap_density_fF_per_um2,esr_ohm", "esr_ohm,leakage_nA,cap_fF", "name", "nope",
               "cap_fF,cap_fF", ""],
    "name": ["invented_n7x", "ninv_core_0000", "lumen130", "nope", *EDGE_TEXTS[:6]],
}


def _path(kind: str, places: dict[str, str]) -> str:
    return {"deck": str(DECK), "missing": places["folder"] + "/missing.sqlite", "dev": "/dev/null",
            "proc": "/proc/celllab/x", "through": places["file"] + "/x.csv",
            "slash": places["out"] + "/"}.get(kind) or places[kind]


@st.composite
def argument_lists(draw: st.DrawFn, places: dict[str, str]) -> list[str]:
    verb = pick(draw, VERBS)
    argv = [verb]
    if verb == "export":
        argv.append(pick(draw, ["csv", "json", "schema", "spice", "touchstone", "datasheet", "liberty",
                                "lef", "xml"]))
    if verb == "plan":
        argv += [pick(draw, [places["block"], places["block"], places["cells"], places["junk"], str(DECK),
                             "/dev/null", places["folder"]]), "--no-explain"]
    elif verb in ("compare", "show", "merge"):
        argv.append(pick(draw, [places["catalog"], places["junk"], "ninv_core_0000", "nope",
                                places["cells"], "\x1b]0;x\x07"]))
    for _ in range(draw(st.integers(0, 4))):
        if draw(st.integers(0, 4)) == 0:
            argv.append(pick(draw, FLAGS if draw(st.integers(0, 9)) else ["--help"]))
            continue
        own = VERB_OPTIONS[verb]
        option = pick(draw, own if own and draw(st.integers(0, 5)) else list(OPTIONS))
        kind = pick(draw, OPTIONS[option])
        if kind == "path":
            value = _path(pick(draw, PATH_KINDS), places)
        elif kind == "number":
            value = pick(draw, NUMBERS)
        elif kind == "where":
            value = pick(draw, WHERES)
        else:
            value = pick(draw, WORDS[kind])
        argv += [option, value]
    if verb in ("rank", "pareto", "compare", "decks", "show", "export", "merge", "plan") \
            and "--catalog" not in argv and draw(st.integers(0, 4)):
        argv += ["--catalog", places["catalog"] if verb != "merge" else places["folder"] + "/merged.sqlite"]
    if verb == "build" and "--deck" not in argv:
        argv += ["--deck", str(DECK)]
    return argv


def _checkout_catalog_state() -> tuple[int, int] | None:
    """(size, mtime in ns) of the checkout's default catalog, None when there is none."""
    path = REPO / "db" / "celllab.sqlite"
    return (path.stat().st_size, path.stat().st_mtime_ns) if path.exists() else None


def _run(argv: list[str], folder: str) -> tuple[int, str, str]:
    """``celllab argv`` in-process, run from ``folder``: a verb given no --catalog uses the
    default db/celllab.sqlite of the working folder, which must not be the checkout's."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.chdir(folder), contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(argv)
        except SystemExit as exc:  # --help, --version
            code = exc.code if isinstance(exc.code, int) else 0
            assert code == 0, (argv, err.getvalue())
    return code, out.getvalue(), err.getvalue()


@fuzz_settings("cli_args")
@given(data=st.data())
def test_command_lines_end_cleanly(places: dict[str, str], data: st.DataObject,
                                   outcomes: Counter[str]) -> None:
    argv = data.draw(argument_lists(places))
    outcomes["cli_args.cases"] += 1
    before = _checkout_catalog_state()
    code, out, err = _run(argv, places["folder"])
    assert _checkout_catalog_state() == before, argv  # the checkout's own catalog is not touched
    assert code in (0, 1, 2), (argv, code, err)
    assert "Traceback" not in err and "Traceback" not in out, (argv, err)
    assert "\x1b" not in err and "\x1b" not in out, (argv, err)
    if code == 2:
        assert err.strip(), argv
        outcomes["cli_args.rejected"] += 1
    else:
        outcomes["cli_args.accepted"] += 1


SMOKE = [
    [b"rank", b"--where", b"name = \xff\xfe"],
    [b"check", b"--deck", b"/dev/zero"],
    [b"check", b"--deck", b"deck-\xe9.toml"],
    [b"rank", b"--limit", b"99999999999999999999"],
    [b"export", b"csv", b"--out", b"/proc/celllab.csv"],
    [b"merge", b"/dev/null"],
]


@pytest.mark.parametrize("argv", SMOKE, ids=[b" ".join(a).decode("utf-8", "replace") for a in SMOKE])
def test_command_line_smoke_in_a_real_process(argv: list[bytes], tmp_path: Path,
                                              tally: dict[str, Any]) -> None:
    env = {**os.environ, "PYTHONIOENCODING": "utf-8"}
    done = subprocess.run([sys.executable, "-m", "celllab.cli.main", *argv], cwd=tmp_path, env=env,
                          capture_output=True, timeout=120)
    err = done.stderr.decode("utf-8", "replace")
    assert done.returncode == 2, err
    assert "Traceback" not in err and err.strip()
    smoke = tally.setdefault("cli_processes", {"cases": 0})
    smoke["cases"] += 1
