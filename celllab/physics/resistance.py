"""Temperature dependence of layout resistances (SI: ohm, K, 1/K).

Sheet, contact and via resistances change with temperature through the resistivity of the
conductor. Near a reference temperature the change is linear to first order; the coefficient
(TCR) is a property of the film as processed and comes from the process deck.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from celllab.physics.constants import FloatArray


def linear_tcr_factor(tcr_per_K: ArrayLike, temperature_K: ArrayLike,
                      reference_temperature_K: ArrayLike) -> FloatArray:
    """Resistance at T relative to the resistance at T0, first-order law.

    Parameters
    ----------
    tcr_per_K : array_like                first-order temperature coefficient alpha, 1/K
    temperature_K : array_like            temperature T, K
    reference_temperature_K : array_like  temperature T0 at which the resistance is given, K

    Returns
    -------
    ndarray   R(T) / R(T0) = 1 + alpha (T - T0), unitless, broadcast over the inputs

    Notes
    -----
    The linear resistivity law rho(T) = rho(T0) [1 + alpha (T - T0)] (docs/references.md [140]);
    SPICE resistors apply the same first-order term (``tc1``), which the tests use as the
    reference. Valid while |alpha (T - T0)| stays small (a few tens of percent): metal films
    and silicides follow it over the usual -55..150 degC corner range, and the second-order term
    is left out. A factor <= 0 is outside the law; the deck refuses coefficients that give one
    at any of its corners.
    """
    alpha = np.asarray(tcr_per_K, dtype=float)
    return 1.0 + alpha * (np.asarray(temperature_K, dtype=float) - np.asarray(reference_temperature_K, dtype=float))
