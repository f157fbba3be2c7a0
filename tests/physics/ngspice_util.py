"""Test helper: write a deck, run ``ngspice -b`` in a temporary directory, read the results.

ngspice is the outside reference (Debian package ``ngspice``). Tests skip with a reason when the
binary is absent, unless CELLLAB_REQUIRE_NGSPICE is set (CI), where a missing binary fails.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from numpy.typing import NDArray

from celllab.physics.netlist import Netlist

NGSPICE = shutil.which("ngspice")


def require_ngspice() -> str:
    """Path of the ngspice binary, or skip (fail in CI) when it is not installed."""
    if NGSPICE is None:
        if os.environ.get("CELLLAB_REQUIRE_NGSPICE"):
            pytest.fail("ngspice binary not on PATH but CELLLAB_REQUIRE_NGSPICE is set")
        pytest.skip("ngspice binary not on PATH (Debian package ngspice)")
    return NGSPICE


def run_deck(deck: str, workdir: Path, name: str = "deck") -> str:
    """Run a complete deck in batch mode inside ``workdir``; return stdout (raise on failure)."""
    binary = require_ngspice()
    path = workdir / f"{name}.cir"
    path.write_text(deck)
    proc = subprocess.run(
        [binary, "-b", path.name],
        cwd=workdir,
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    failed = re.search(r"^\s*error", proc.stdout + proc.stderr, re.MULTILINE | re.IGNORECASE)
    if proc.returncode != 0 or failed:
        raise RuntimeError(f"ngspice failed ({proc.returncode}):\n{proc.stdout}\n{proc.stderr}")
    return proc.stdout


def _spice_node(node: str, ground: str) -> str:
    return "0" if node == ground else re.sub(r"[^A-Za-z0-9_]", "_", node)


def render_rlc(netlist: Netlist, variant: int = 0) -> list[str]:
    """Element lines of a netlist that holds only R, C and L elements (test-only renderer)."""
    ground = netlist.ports[1]
    lines = []
    for el in netlist.variant(variant).elements:
        if el.kind not in ("R", "C", "L"):
            raise ValueError(f"{el.name}: expand RCLINE elements before rendering")
        a, b = _spice_node(el.node_a, ground), _spice_node(el.node_b, ground)
        lines.append(f"{el.kind}{re.sub(r'[^A-Za-z0-9_]', '_', el.name)} {a} {b} {el.value:.12e}")
    return lines


def ac_impedance(
    element_lines: list[str],
    drive_node: str,
    workdir: Path,
    f_start: float,
    f_stop: float,
    points_per_decade: int = 10,
) -> tuple[NDArray[np.float64], NDArray[np.complex128]]:
    """AC sweep with a 1 A AC current into ``drive_node`` (ground "0"): node voltage = Z."""
    deck = "\n".join(
        [
            "impedance sweep",
            # every node gets 1e15 ohm to ground so the DC operating point of a capacitively
            # floating network exists (changes Z by < 1e-9 relative here)
            ".options rshunt=1e15",
            f"itest 0 {drive_node} dc 0 ac 1",
            *element_lines,
            ".control",
            f"ac dec {points_per_decade} {f_start:.6e} {f_stop:.6e}",
            f"wrdata zout.txt v({drive_node})",
            "quit",
            ".endc",
            ".end",
            "",
        ]
    )
    run_deck(deck, workdir, "ac")
    data = np.loadtxt(workdir / "zout.txt")
    return data[:, 0], data[:, 1] + 1j * data[:, 2]


def op_voltages(element_lines: list[str], nodes: list[str], workdir: Path) -> dict[str, float]:
    """DC operating point; returns the voltages of ``nodes`` (printed with ``print``)."""
    prints = " ".join(f"v({n})" for n in nodes)
    deck = "\n".join(
        [
            "operating point",
            *element_lines,
            ".control",
            "op",
            f"print {prints}",
            "quit",
            ".endc",
            ".end",
            "",
        ]
    )
    out = run_deck(deck, workdir, "op")
    values = {}
    for n in nodes:
        match = re.search(rf"^v\({re.escape(n)}\)\s*=\s*(\S+)", out, re.MULTILINE | re.IGNORECASE)
        if match is None:
            raise RuntimeError(f"v({n}) not found in ngspice output:\n{out}")
        values[n] = float(match.group(1))
    return values
