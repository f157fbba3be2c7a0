"""Reverse leakage of the well junctions a decap cell biases, per variant x corner (SI: A, m, m^2, V).

Which well junction a cell reverse-biases depends on its devices and placement: the n-well
(n-well/p-substrate) on the cell's rail, present under every core-row cell holding transistors and under PMOS
devices in open regions, and the deep n-well tub (DNW/p-substrate) of an isolated p-well
accumulation cell. The kinds, areas and perimeters are the topology's geometry rule
(``topologies.wells``). Source and drain diffusions sit on their own well's rail (tied cells) or
within the leakage drop of it (the cross-coupled pair's internal nodes), so they carry no reverse
bias. No I/O.
"""

from __future__ import annotations

import numpy as np

from celllab.characterization.params import CornerSet
from celllab.physics import leakage
from celllab.units import to_si

_FIELDS = ("area_fA_per_um2", "perimeter_fA_per_um", "xti", "emission_coefficient")


def junction_leakage(corners: CornerSet, kinds: np.ndarray, area: np.ndarray, perimeter: np.ndarray,
                     v_reverse: np.ndarray) -> tuple[np.ndarray, list[list[list[str]]]]:
    """Reverse current of each variant's biased well junction at every corner, A, and flags.

    Parameters
    ----------
    corners : CornerSet
    kinds : (n_variant,) str        junction kind per variant ('' = none), ``topologies.wells``
    area, perimeter : (n_variant, 1)   junction area, m^2, and perimeter, m
    v_reverse : (n_variant, n_corner)  reverse bias, V (the supply the well sits on)

    Returns
    -------
    (I, flags)   I in A (0 where no junction is biased; NaN where the deck gives no densities
                 for the kind, with a flag on those rows)

    Notes
    -----
    ``leakage.junction_reverse_current`` with the deck's ``[junctions.<kind>]`` densities at the
    reference temperature and the BSIM4 temperature law (docs/references.md [74]).
    """
    kinds = np.asarray(kinds, dtype=str)
    n_v, n_c = len(kinds), len(corners.names)
    out = np.zeros((n_v, n_c))
    flags: list[list[list[str]]] = [[[] for _ in range(n_c)] for _ in range(n_v)]
    for kind in sorted(set(kinds) - {""}):  # at most two junction kinds, not variants
        rows = kinds == kind
        params = [getattr(d.junctions, kind) for d in corners.decks]
        if any(p is None for p in params):
            missing = [j for j, p in enumerate(params) if p is None]
            out[np.ix_(rows, missing)] = np.nan
            for i in np.flatnonzero(rows):
                for j in missing:
                    flags[i][j].append(f"junction_leakage_not_modelled: the deck gives no [junctions.{kind}] "
                                       "densities; leakage counts the gate current only")
        known = [j for j, p in enumerate(params) if p is not None]
        if not known:
            continue
        table = {f: np.array([[getattr(params[j], f) for j in known]]) for f in _FIELDS}
        current = leakage.junction_reverse_current(
            to_si(table["area_fA_per_um2"], "fA/um^2"), to_si(table["perimeter_fA_per_um"], "fA/um"),
            area[rows], perimeter[rows], v_reverse[np.ix_(rows, known)], corners.temperature_K[known][None, :],
            corners.reference_temperature_K, table["xti"], table["emission_coefficient"])
        out[np.ix_(rows, known)] = current
    return out, flags
