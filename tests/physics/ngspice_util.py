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


# --- transient analyses ----------------------------------------------------------------------


def _v(node: str, ground: str) -> str:
    return "0" if node == ground else f"v({_spice_node(node, ground)})"


def _pick(value: object, variant: int) -> float:
    arr = np.asarray(value, dtype=float).reshape(-1)
    return float(arr[0] if arr.size == 1 else arr[variant])


def render_transient(expanded: object, variant: int, ground: str) -> list[str]:
    """Element lines of an expanded transient circuit (`celllab.physics.transient.Expanded`).

    Linear elements as R, C, L; every square-law channel and rail clamp as ngspice B-sources
    written from the laws stated in their docstrings (a clamp's activation state on its own
    node ``s_<name>`` with C = t_response, 1 ohm to ground and a current a(v) into it).
    """
    from celllab.physics import transient as tr

    lines = []
    for el in expanded.variant(variant):  # type: ignore[attr-defined]
        a, b = _spice_node(el.node_a, ground), _spice_node(el.node_b, ground)
        lines.append(f"{el.kind}{re.sub(r'[^A-Za-z0-9_]', '_', el.name)} {a} {b} {el.value:.12e}")
    w = tr.SMOOTHING_V

    def sp(x: str) -> str:
        return f"{w:.6e}*(max(({x})/{w:.6e},0)+ln(1+exp(-abs(({x})/{w:.6e}))))"

    for el in expanded.nonlinear:  # type: ignore[attr-defined]
        name = re.sub(r"[^A-Za-z0-9_]", "_", el.name)
        if isinstance(el, tr.SquareLawChannel):
            s = 1.0 if el.polarity == "n" else -1.0
            k, vt = _pick(el.beta, variant), _pick(el.v_threshold, variant)
            g, va, vb = _v(el.gate, ground), _v(el.node_a, ground), _v(el.node_b, ground)
            ua = f"max({s:g}*({g}-{va})-({vt:.12e}),0)"
            ub = f"max({s:g}*({g}-{vb})-({vt:.12e}),0)"
            lines.append(f"B{name} {_spice_node(el.node_a, ground)} {_spice_node(el.node_b, ground)}"
                         f" I = {s * 0.5 * k:.12e}*({ub}*{ub}-{ua}*{ua})")
        elif isinstance(el, tr.RailClamp):
            p, n = _spice_node(el.node_pos, ground), _spice_node(el.node_neg, ground)
            v = f"({_v(el.node_pos, ground)}-{_v(el.node_neg, ground)})"
            von, ron = _pick(el.v_on, variant), _pick(el.r_on, variant)
            vd = _pick(el.v_diode, variant)
            rd = _pick(el.r_on if el.r_diode is None else el.r_diode, variant)
            tau = _pick(el.t_response, variant)
            lines.append(f"Rs_{name} s_{name} 0 1")
            if tau > 0:
                lines.append(f"Cs_{name} s_{name} 0 {tau:.12e}")
            lines.append(f"Bs_{name} 0 s_{name} I = 0.5*(1+tanh(({v}-{von:.12e})/{w:.6e}))")
            lines.append(f"B{name} {p} {n} I = v(s_{name})*{1 / ron:.12e}*{sp(f'{v}-{von:.12e}')}"
                         f" - {1 / rd:.12e}*{sp(f'-{v}-{vd:.12e}')}")
        else:
            raise ValueError(f"{el.name}: no ngspice rendering for {type(el).__name__}")
    return lines


def transient(
    element_lines: list[str],
    expressions: list[str],
    workdir: Path,
    t_stop: float,
    t_max_step: float,
    initial: dict[str, float] | None = None,
    options: str = "",
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """``.tran`` with ``uic`` and ``.ic`` node voltages; returns (t, values (n_t, n_expr)).

    Every node gets 1e12 ohm to ground (``rshunt``), as the celllab solver's gmin does.
    """
    ic = " ".join(f"v({n})={v:.12e}" for n, v in (initial or {}).items())
    deck = "\n".join(
        [
            "transient",
            f".options rshunt=1e12 {options}",
            *element_lines,
            *([f".ic {ic}"] if ic else []),
            ".control",
            f"tran {t_max_step:.6e} {t_stop:.6e} 0 {t_max_step:.6e} uic",
            f"wrdata tran.txt {' '.join(expressions)}",
            "quit",
            ".endc",
            ".end",
            "",
        ]
    )
    run_deck(deck, workdir, "tran")
    data = np.atleast_2d(np.loadtxt(workdir / "tran.txt"))
    return data[:, 0], data[:, 1::2]


def dc_operating_point(element_lines: list[str], expressions: list[str], workdir: Path,
                       nodeset: dict[str, float] | None = None) -> list[float]:
    """``op`` with optional ``.nodeset``; returns the values of ``expressions`` (``let`` names)."""
    ns = " ".join(f"v({n})={v:.12e}" for n, v in (nodeset or {}).items())
    lets = [f"let probe{k} = {e}" for k, e in enumerate(expressions)]
    prints = " ".join(f"probe{k}" for k in range(len(expressions)))
    deck = "\n".join(["operating point", ".options rshunt=1e12", *element_lines,
                      *([f".nodeset {ns}"] if ns else []), ".control", "op", *lets,
                      f"print {prints}", "quit", ".endc", ".end", ""])
    out = run_deck(deck, workdir, "op")
    values = []
    for k in range(len(expressions)):
        match = re.search(rf"^probe{k}\s*=\s*(\S+)", out, re.MULTILINE)
        if match is None:
            raise RuntimeError(f"probe{k} not found in ngspice output:\n{out}")
        values.append(float(match.group(1)))
    return values
