"""Touchstone v1.1 export of a cell's rail-to-rail impedance as a one-port Z file.

Format (Touchstone File Format Specification v1.1, IBIS Open Forum, 2002): ``!`` comment
lines, then the option line ``# Hz Z RI R <n>``, then one line per frequency
``f Re(z) Im(z)``. Version 1 Z data are *normalized* to the reference resistance: the file
holds z = Z / R, and a reader multiplies by R. With the default ``R 1`` the stored numbers are
the impedance in ohm.

Frequencies must be strictly increasing and every value finite (a v1 reader cannot represent
anything else), otherwise ``ValueError``.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from celllab import MODEL_VERSION, __version__
from celllab.display import corner_conditions
from celllab.export import CAUTION, atomic_write_text
from celllab.export.files import file_stem
from celllab.records import CellResult, CornerResult

__all__ = ["render_touchstone", "touchstone_filename", "write_touchstone"]


def _comment(text: str) -> str:
    return "! " + " ".join(str(text).split())


def _select_corner(cell: CellResult, corner: str | None) -> CornerResult:
    if corner is None:
        if not cell.corners:
            raise ValueError(f"cell {cell.name!r} has no corner results")
        return cell.corners[0]
    return cell.corner(corner)


def render_touchstone(
    cell: CellResult,
    corner: str | None = None,
    deck_name: str | None = None,
    reference_ohm: float = 1.0,
    significant_digits: int = 12,
    model_version: str = MODEL_VERSION,
) -> str:
    """Render one corner's Z(f) of ``cell`` as a Touchstone v1.1 one-port Z file.

    Parameters
    ----------
    cell : CellResult
    corner : str, optional   corner name; default the cell's first corner
    deck_name : str, optional   written in the header comments
    reference_ohm : float   R of the option line, ohm, > 0; the data are Z / R
    significant_digits : int   digits of every number written (1..17)
    model_version : str   written in the header comments

    Returns
    -------
    str   file text, ``\\n`` line ends, ending in a newline

    Notes
    -----
    Normalization of v1 Z data to R: Touchstone File Format Specification v1.1, "Option
    Line" (IBIS Open Forum 2002).
    """
    if not reference_ohm > 0 or not np.isfinite(reference_ohm):
        raise ValueError(f"reference_ohm must be a finite number > 0, got {reference_ohm!r}")
    if not 1 <= significant_digits <= 17:
        raise ValueError(f"significant_digits must be 1..17, got {significant_digits!r}")
    result = _select_corner(cell, corner)
    freq = np.asarray(result.response.freq_Hz, dtype=float).ravel()
    z = np.asarray(result.response.z_ohm, dtype=complex).ravel()
    if freq.shape != z.shape or freq.size == 0:
        raise ValueError(f"cell {cell.name!r}: freq_Hz and z_ohm must be equal, non-empty")
    if not (np.all(np.isfinite(freq)) and np.all(np.isfinite(z))):
        raise ValueError(f"cell {cell.name!r} corner {result.corner!r}: non-finite Z(f)")
    if np.any(freq < 0) or np.any(np.diff(freq) <= 0):
        raise ValueError(f"cell {cell.name!r}: frequencies must be >= 0 and increasing")
    normalized = z / reference_ohm
    r_text = format(reference_ohm, ".12g")
    lines = [
        _comment(f"celllab {__version__}: rail impedance Z(vdd, vss) of cell {cell.name}"),
        _comment(
            f"deck: {deck_name or 'unknown'}; corner: {result.corner} "
            f"({corner_conditions(result.temperature_C, result.supply_V)})"
        ),
        _comment(f"topology: {cell.topology}; oxide: {cell.oxide}; cell hash: {cell.cell_hash}"),
        _comment(f"models: {model_version}"),
        _comment(f"CAUTION: estimate. {CAUTION}"),
        _comment(f"one-port Z, real/imaginary; data are Z / R with R = {r_text} ohm"),
        f"# Hz Z RI R {r_text}",
    ]
    fmt = f"{{:.{significant_digits - 1}e}}"
    for f, value in zip(freq.tolist(), normalized.tolist(), strict=True):
        lines.append(f"{fmt.format(f)} {fmt.format(value.real)} {fmt.format(value.imag)}")
    return "\n".join(lines) + "\n"


def touchstone_filename(cell_name: str, corner: str) -> str:
    """A file name ``<cell>_<corner>.s1p`` safe on common file systems (distinct cells give
    distinct stems, ``export.files.file_stem``)."""
    return f"{file_stem(cell_name)}_{file_stem(corner)}.s1p"


def write_touchstone(
    path: str | os.PathLike[str],
    cell: CellResult,
    corner: str | None = None,
    deck_name: str | None = None,
    reference_ohm: float = 1.0,
    force: bool = False,
) -> Path:
    """Write :func:`render_touchstone` output to ``path`` atomically (``force``: replace a file)."""
    return atomic_write_text(
        path, render_touchstone(cell, corner, deck_name, reference_ohm), force
    )
