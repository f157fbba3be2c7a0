"""SPICE export: one ``.subckt <cell> vdd vss`` per cell from its equivalent circuit.

The circuit is the cell's ``celllab.physics.netlist.Netlist``. ``R``, ``C`` and ``L`` become
SPICE elements of the same letter; every ``RCLINE`` (uniform distributed RC line) is
replaced by an N-segment R-C ladder (``physics.netlist.ladder_expansion``), so the
subcircuit uses only elements every SPICE dialect reads. A zero R or L (a short) becomes a
0 V voltage source; a zero C (an open) is left out.

Syntax (L. W. Nagel, SPICE2, UCB/ERL M520, 1975; ngspice User's Manual): ``*`` comment
lines, ``.subckt NAME n1 n2`` ... ``.ends NAME``; names are case-insensitive; node ``0`` (and
``gnd`` in ngspice) is the global ground, so no internal node may be called that. Numbers are
written as plain exponent floats (``1.5e-15``), never with a scale suffix: SPICE reads ``M``
as milli and ``F`` as femto, and ignores letters after a number.
"""

from __future__ import annotations

import math
import os
import re
import textwrap
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from celllab import MODEL_VERSION, __version__
from celllab.columns import unit_of
from celllab.display import corner_conditions, format_metric
from celllab.export import CAUTION, atomic_write_text
from celllab.physics.netlist import Element, Netlist, ladder_expansion, solve_impedance
from celllab.records import CellResult, CornerResult
from celllab.units import to_si

__all__ = [
    "DEFAULT_N_SEGMENTS",
    "DEFAULT_ACCURACY",
    "MAX_SEGMENTS",
    "auto_segments",
    "ladder_deviation",
    "cell_netlist",
    "element_values",
    "metric_model_netlist",
    "render_spice_library",
    "render_spice_subckt",
    "spice_name",
    "spice_number",
    "stored_circuits",
    "write_spice",
]

#: Ladder segments when a cell has no frequency sweep to size them from.
DEFAULT_N_SEGMENTS = 16
#: Relative deviation |Z_ladder / Z_line - 1| of a midpoint ladder per unit of
#: x = omega R C / N^2 (N segments): at most 0.17 x for x <= 0.2, measured with the nodal
#: solver on open and both-ends-contacted lines against the exact line impedance
#: (tests/export/test_spice_accuracy.py repeats the check; ngspice runs of exported ladders there).
LADDER_ERROR_PER_X = 0.17
#: Largest omega R C / N^2 allowed at the top swept frequency by default (about 0.5 %).
LADDER_X_MAX = 0.03
#: Deviation of the ladder from the exact line asked by default (relative, at f_max).
DEFAULT_ACCURACY = LADDER_X_MAX * LADDER_ERROR_PER_X
#: Most segments per line written unless the caller allows more (each is two SPICE lines);
#: a circuit needing more is exported coarser and its header says by how much.
MAX_SEGMENTS = 20_000
_MIN_SEGMENTS = 4
#: A circuit "is" a corner's circuit when its Z(f) matches that corner's stored one this well.
MATCH_TOLERANCE = 1e-6

#: Names SPICE or ngspice treat as the global ground.
_GROUND_NAMES = {"0", "gnd"}
_HEADLINE_METRICS = ("cap_fF", "esr_ohm", "esl_pH", "srf_GHz", "leakage_nA")


def spice_number(value: float) -> str:
    """A finite float as SPICE-safe text: shortest round-trip mantissa, plain exponent.

    >>> spice_number(1.234e-15), spice_number(1e6), spice_number(0.5)
    ('1.234e-15', '1e6', '5e-1')
    """
    number = float(value)
    if not math.isfinite(number):
        raise ValueError(f"cannot write {value!r} as a SPICE number")
    text = np.format_float_scientific(number, unique=True, trim="-", exp_digits=1)
    mantissa, exponent = text.split("e")
    return f"{mantissa}e{int(exponent)}"


def spice_name(text: str, prefix: str = "") -> str:
    """``text`` reduced to ``[A-Za-z0-9_]``, starting with a letter (``prefix`` if given)."""
    cleaned = re.sub(r"[^A-Za-z0-9_]", "_", text) or "x"
    if prefix:
        return prefix + cleaned
    if not cleaned[0].isalpha():
        cleaned = "c_" + cleaned
    return cleaned


class _Names:
    """Case-insensitively unique SPICE names derived from arbitrary text."""

    def __init__(self, reserved: Iterable[str] = ()) -> None:
        self._taken = {r.lower() for r in reserved}
        self._map: dict[str, str] = {}

    def get(self, original: str, make: str) -> str:
        if original in self._map:
            return self._map[original]
        candidate, k = make, 2
        while candidate.lower() in self._taken:
            candidate, k = f"{make}_{k}", k + 1
        self._taken.add(candidate.lower())
        self._map[original] = candidate
        return candidate


def _scalar(value: Any) -> float:
    array = np.asarray(value, dtype=float).reshape(-1)
    if array.size != 1:
        raise ValueError(f"element value has {array.size} variants -> pass a one-variant netlist")
    return float(array[0])


def metric_model_netlist(cell: CellResult, corner: str | None = None) -> Netlist:
    """A series ESL-ESR-C model (leakage resistance across C) from one corner's metrics.

    For cells stored without their equivalent circuit: L = ``esl_pH``, R = ``esr_ohm``,
    C = ``cap_fF``, R_leak = supply_V / ``leakage_nA``; a missing or non-positive L, R or
    R_leak is left out. Raises ``ValueError`` when the capacitance is unusable.
    """
    result = cell.corner(corner) if corner is not None else cell.corners[0]
    m = result.metrics

    def positive(key: str, unit: str) -> float | None:
        value = m.get(key)
        if value is None or not math.isfinite(value) or value <= 0:
            return None
        return float(to_si(float(value), unit))

    cap = positive("cap_fF", "fF")
    if cap is None:
        raise ValueError(f"cell {cell.name!r}: no circuit stored and no usable cap_fF")
    esl, esr, leak = (
        positive("esl_pH", "pH"),
        positive("esr_ohm", "ohm"),
        positive("leakage_nA", "nA"),
    )
    elements: list[Element] = []
    node = "vdd"
    if esl is not None:
        elements.append(Element("L", "esl", node, "esl_out", esl))
        node = "esl_out"
    if esr is not None:
        elements.append(Element("R", "esr", node, "esr_out", esr))
        node = "esr_out"
    elements.append(Element("C", "cap", node, "vss", cap))
    if leak is not None and result.supply_V > 0:
        elements.append(Element("R", "leak", node, "vss", result.supply_V / leak))
    return Netlist(f"{cell.name}_metric_model", tuple(elements))


def stored_circuits(cell: CellResult) -> dict[str, Netlist]:
    """Corner name -> one-variant equivalent circuit, as stored with the cell.

    A mapping is returned as is; a single ``Netlist`` counts as the first corner's circuit;
    no circuit gives an empty dict.
    """
    stored = cell.netlist
    if stored is None:
        return {}
    circuits = (
        dict(stored)
        if isinstance(stored, Mapping)
        else ({cell.corners[0].corner: stored} if cell.corners else {})
    )
    for corner, netlist in circuits.items():
        if netlist.n_variant != 1:
            raise ValueError(
                f"cell {cell.name!r} corner {corner!r}: netlist holds "
                f"{netlist.n_variant} variants -> expected one"
            )
    return circuits


def cell_netlist(cell: CellResult, corner: str | None = None) -> tuple[Netlist, str]:
    """The cell's one-variant equivalent circuit and a label saying what it describes.

    ``cell.netlist`` is a mapping of corner name -> ``Netlist`` (``corner`` picks one,
    default the first entry), a single ``Netlist`` (one circuit for all corners), or None: then
    the circuit is :func:`metric_model_netlist` of the corner.
    """
    stored = cell.netlist
    if stored is None:
        if not cell.corners:
            raise ValueError(f"cell {cell.name!r} has neither a circuit nor corner results")
        which = corner if corner is not None else cell.corners[0].corner
        label = (
            f"none stored; series ESR-ESL-C model from the metrics of corner {which} "
            "(not the cell's equivalent circuit)"
        )
        return metric_model_netlist(cell, corner), label
    if isinstance(stored, Mapping):
        key = corner if corner is not None else next(iter(stored))
        if key not in stored:
            raise KeyError(f"cell {cell.name!r}: no circuit for corner {key!r}")
        netlist, label = stored[key], key
    else:
        netlist, label = stored, "typical (one circuit stored with the cell)"
    if netlist.n_variant != 1:
        raise ValueError(
            f"cell {cell.name!r}: netlist holds {netlist.n_variant} variants -> expected one"
        )
    return netlist, label


def _line_x(netlist: Netlist, freq_max_Hz: float) -> float:
    """Largest omega_max R C over the netlist's RC lines (0 without lines)."""
    products = [
        _scalar(el.value) * _scalar(el.c_total) for el in netlist.elements if el.kind == "RCLINE"
    ]
    return 2 * math.pi * freq_max_Hz * max(products, default=0.0)


def auto_segments(
    netlist: Netlist,
    freq_max_Hz: float | None,
    accuracy: float | None = None,
    max_segments: int = MAX_SEGMENTS,
) -> int:
    """Ladder length N so that every RC line's ladder deviates at most ``accuracy`` at f_max.

    N is the smallest with LADDER_ERROR_PER_X * omega_max R C / N^2 <= accuracy (default
    ``DEFAULT_ACCURACY``, i.e. omega_max R C / N^2 <= LADDER_X_MAX), at least 4 and at most
    ``max_segments`` (then coarser than asked: see ``ladder_deviation``). Without a frequency:
    ``DEFAULT_N_SEGMENTS``; without RC lines: 4 (unused).
    """
    if not any(el.kind == "RCLINE" for el in netlist.elements):
        return _MIN_SEGMENTS
    if not freq_max_Hz or not math.isfinite(freq_max_Hz):
        return DEFAULT_N_SEGMENTS
    if accuracy is not None and not accuracy > 0:
        raise ValueError(f"accuracy = {accuracy} -> must be > 0 (a relative deviation)")
    x_max = LADDER_X_MAX if accuracy is None else accuracy / LADDER_ERROR_PER_X
    x = _line_x(netlist, freq_max_Hz)
    needed = math.ceil(math.sqrt(x / x_max)) if x > 0 else 1
    return int(min(max(_MIN_SEGMENTS, max_segments), max(_MIN_SEGMENTS, needed)))


def ladder_deviation(netlist: Netlist, freq_max_Hz: float | None, n_segments: int) -> float | None:
    """Estimated largest |Z_ladder / Z_line - 1| of the RC lines at f_max with N segments.

    LADDER_ERROR_PER_X * omega_max R C / N^2 (valid for x <= 0.2; a coarser ladder is
    reported as at least that). None without RC lines or frequency.
    """
    if not freq_max_Hz or not math.isfinite(freq_max_Hz):
        return None
    x = _line_x(netlist, freq_max_Hz)
    if x <= 0:
        return None
    return LADDER_ERROR_PER_X * x / n_segments**2


def _comment_lines(text: str) -> list[str]:
    indent = " " * (len(text) - len(text.lstrip(" ")))
    flat = " ".join(str(text).split())
    return ["* " + indent + line for line in textwrap.wrap(flat, width=96)] or ["*"]


def _metric_text(metrics: Mapping[str, Any], name: str) -> str:
    """``name``'s value with its unit; a lower bound reads "≥value" (``display.format_metric``)."""
    text = format_metric(metrics, name, empty="n/a")
    return text if text == "n/a" else f"{text} {unit_of(name)}"


def _max_freq(cell: CellResult) -> float | None:
    tops = [float(np.max(c.response.freq_Hz)) for c in cell.corners if np.size(c.response.freq_Hz)]
    return max(tops) if tops else None


def _deviation(netlist: Netlist, result: CornerResult) -> float | None:
    """max |Z_circuit / Z_stored - 1| over the corner's stored sweep (None if not computable)."""
    freq = np.asarray(result.response.freq_Hz, dtype=float)
    stored = np.asarray(result.response.z_ohm, dtype=complex)
    keep = (freq > 0) & np.isfinite(stored) & (stored != 0)
    if not keep.any():
        return None
    try:
        z = solve_impedance(netlist, freq[keep])[0]
    except (ValueError, np.linalg.LinAlgError):
        return None
    return float(np.max(np.abs(z / stored[keep] - 1.0)))


def _matching_corner(netlist: Netlist, cell: CellResult) -> str | None:
    """Label naming the corner whose stored Z(f) this circuit reproduces (rel 1e-6), if any."""
    for result in cell.corners:
        deviation = _deviation(netlist, result)
        if deviation is not None and deviation <= MATCH_TOLERANCE:
            return f"{result.corner} (reproduces its stored Z(f))"
    return None


def _element_lines(netlist: Netlist, n_segments: int) -> list[str]:
    driven, reference = netlist.ports
    nodes = _Names(reserved=("vdd", "vss", *_GROUND_NAMES))
    node_map = {driven: "vdd", reference: "vss"}

    def node(name: str) -> str:
        if name in node_map:
            return node_map[name]
        return nodes.get(name, spice_name(name, prefix="n_"))

    elements = _Names()
    lines: list[str] = []
    for el in netlist.elements:
        if el.kind == "RCLINE":
            ends = (
                f"far end at {el.node_far}"
                if el.node_far
                else ("far end tied to the near end" if el.contacted_ends == 2 else "far end open")
            )
            lines += _comment_lines(
                f"{el.name}: RC line R = {spice_number(_scalar(el.value))} ohm, "
                f"C = {spice_number(_scalar(el.c_total))} F ({ends}) as a "
                f"{n_segments}-segment ladder"
            )
    expanded = ladder_expansion(netlist, n_segments)
    for el in expanded.elements:
        value = _scalar(el.value)
        a, b = node(el.node_a), node(el.node_b)
        if el.kind in ("R", "L") and value == 0.0:
            name = elements.get(el.name, spice_name(el.name, prefix="V"))
            lines.append(f"* {el.name}: zero {el.kind} (a short) as a 0 V source")
            lines.append(f"{name} {a} {b} 0")
            continue
        if el.kind == "C" and value == 0.0:
            lines.append(f"* {el.name}: zero capacitance (open), omitted")
            continue
        name = elements.get(el.name, spice_name(el.name, prefix=el.kind))
        lines.append(f"{name} {a} {b} {spice_number(value)}")
    return lines


def render_spice_subckt(
    cell: CellResult,
    corner: str | None = None,
    n_segments: int | None = None,
    deck_name: str | None = None,
    model_version: str = MODEL_VERSION,
    subckt_name: str | None = None,
    accuracy: float | None = None,
    max_segments: int = MAX_SEGMENTS,
) -> str:
    """Render the cell's equivalent circuit as a ``.subckt <name> vdd vss`` block.

    Parameters
    ----------
    cell : CellResult   its ``netlist`` is a one-variant Netlist, or corner -> Netlist
    corner : str, optional   corner whose metrics (and circuit, when stored per corner) are
        shown; default the first corner
    n_segments : int, optional   ladder segments per RCLINE; default from the highest swept
        frequency f_max and ``accuracy`` (``auto_segments``)
    deck_name, model_version : str   header comments
    subckt_name : str, optional   override the (sanitized) cell name
    accuracy : float, optional   largest relative deviation of each ladder from its exact RC
        line at f_max (default ``DEFAULT_ACCURACY``, about 0.5 %)
    max_segments : int   ladder length limit; when the accuracy needs more, the header says
        the export is coarser than asked and by how much

    Returns
    -------
    str   comment header, ``.subckt``, elements, ``.ends``; ``\\n`` line ends

    Notes
    -----
    Port ``vdd`` is the netlist's driven port, ``vss`` its reference. The header reports how
    far the circuit's Z(f) is from the stored response of the corner (0 % for the corner the
    circuit was built for).
    """
    netlist, circuit_corner = cell_netlist(cell, corner)
    if not isinstance(cell.netlist, Mapping) and cell.netlist is not None:
        circuit_corner = _matching_corner(netlist, cell) or circuit_corner
    result = (
        cell.corner(corner) if corner is not None else (cell.corners[0] if cell.corners else None)
    )
    f_max = _max_freq(cell)
    if n_segments is None:
        n_segments = auto_segments(netlist, f_max, accuracy, max_segments)
    elif n_segments < 1:
        raise ValueError(f"n_segments = {n_segments} -> must be >= 1")
    ladder_note = _ladder_note(netlist, f_max, n_segments, accuracy)
    name = subckt_name or spice_name(cell.name)
    what = "metric model" if cell.netlist is None else "equivalent circuit"
    header = [
        f"celllab {__version__} {what} of cell {cell.name}",
        f"deck: {deck_name or 'unknown'}; model version: {model_version}",
        f"circuit corner: {circuit_corner}",
        (
            f"topology: {cell.topology}; oxide: {cell.oxide}; family: {cell.family}; "
            f"cell hash: {cell.cell_hash}"
        ),
    ]
    if result is not None:
        header.append(
            f"corner {result.corner} ({corner_conditions(result.temperature_C, result.supply_V)}):"
        )
        header += [
            f"  {m} = {_metric_text(result.metrics, m)}"
            for m in _HEADLINE_METRICS
            if m in result.metrics
        ]
        deviation = _deviation(netlist, result)
        if deviation is not None:
            header.append(
                f"this circuit vs the stored Z(f) of corner {result.corner}: max |dZ/Z| = "
                f"{100 * deviation:.3g} % (RC lines exact, before ladder expansion)"
            )
    if ladder_note:
        header.append(ladder_note)
    header += [
        f"CAUTION: estimate. {CAUTION}",
        "ports: vdd (driven), vss (reference); SI values (ohm, F, H)",
    ]
    lines = [line for text in header for line in _comment_lines(text)]
    lines.append(f".subckt {name} vdd vss")
    lines += _element_lines(netlist, n_segments)
    lines.append(f".ends {name}")
    return "\n".join(lines) + "\n"


def _ladder_note(
    netlist: Netlist, f_max: float | None, n_segments: int, accuracy: float | None
) -> str | None:
    """Header line: the ladders' estimated deviation, and whether it is coarser than asked."""
    deviation = ladder_deviation(netlist, f_max, n_segments)
    if deviation is None:
        return None
    asked = DEFAULT_ACCURACY if accuracy is None else accuracy
    text = (
        f"RC lines as {n_segments}-segment ladders: estimated max |dZ/Z| of a ladder vs its "
        f"line {100 * deviation:.3g} % at {spice_number(f_max or 0.0)} Hz"
    )
    if deviation > asked * (1 + 1e-9):
        text += (
            f"; COARSER than the {100 * asked:.3g} % asked (segment limit reached: allow more "
            f"segments or ask for less accuracy)"
        )
    return text


def render_spice_library(
    cells: Sequence[CellResult],
    deck_name: str | None = None,
    corner: str | None = None,
    n_segments: int | None = None,
    model_version: str = MODEL_VERSION,
    accuracy: float | None = None,
    max_segments: int = MAX_SEGMENTS,
) -> str:
    """All cells' subcircuits in one file for ``.include`` (no title line, no ``.end``).

    Subcircuit names are made unique case-insensitively (``_2``, ``_3`` ... on collision).
    """
    names = _Names()
    blocks = [
        "\n".join(
            [
                *_comment_lines(
                    f"celllab {__version__} decap subcircuit library; deck "
                    f"{deck_name or 'unknown'}; {len(cells)} cells; models {model_version}"
                ),
                *_comment_lines(f"CAUTION: estimate. {CAUTION}"),
            ]
        )
        + "\n"
    ]
    for cell in cells:
        unique = names.get(cell.name, spice_name(cell.name))
        blocks.append(
            render_spice_subckt(
                cell, corner, n_segments, deck_name, model_version, unique, accuracy, max_segments
            )
        )
    return "\n".join(blocks)


def write_spice(
    path: str | os.PathLike[str],
    cells: Sequence[CellResult],
    deck_name: str | None = None,
    corner: str | None = None,
    n_segments: int | None = None,
    accuracy: float | None = None,
    max_segments: int = MAX_SEGMENTS,
    force: bool = False,
) -> Path:
    """Write :func:`render_spice_library` output to ``path`` atomically (``force``: replace a
    file)."""
    return atomic_write_text(
        path,
        render_spice_library(
            cells, deck_name, corner, n_segments, accuracy=accuracy, max_segments=max_segments
        ),
        force,
    )


def element_values(el: Element) -> dict[str, float]:
    """An element's values in SI with unit-bearing keys (``r_ohm``, ``c_F``, ``l_H``)."""
    if el.kind == "R":
        return {"r_ohm": _scalar(el.value)}
    if el.kind == "C":
        return {"c_F": _scalar(el.value)}
    if el.kind == "L":
        return {"l_H": _scalar(el.value)}
    return {
        "r_ohm": _scalar(el.value),
        "c_F": _scalar(el.c_total),
        "contacted_ends": float(el.contacted_ends),
    }
