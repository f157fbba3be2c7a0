"""The one place where user-facing units are converted to SI.

Deck and cell files carry the unit in each field name (``t_ox_nm``, ``doping_cm3``); these
helpers convert once, at the boundary. The physics core sees SI floats only.
"""

from __future__ import annotations

from scipy.constants import centi, femto, giga, micro, nano, pico, zero_Celsius

__all__ = [
    "nm", "um", "cm3_to_m3", "cm2_per_Vs", "fF_per_um", "A_per_cm2", "celsius_to_kelvin",
    "F_to_fF", "Hz_to_GHz", "H_to_pH", "m2_to_um2", "A_to_nA", "zero_Celsius",
]


def nm(value: float) -> float:
    """nanometres -> metres."""
    return value * nano


def um(value: float) -> float:
    """micrometres -> metres."""
    return value * micro


def cm3_to_m3(value: float) -> float:
    """A density in cm^-3 -> m^-3."""
    return value / centi**3


def cm2_per_Vs(value: float) -> float:
    """Mobility in cm^2/(V s) -> m^2/(V s)."""
    return value * centi**2


def fF_per_um(value: float) -> float:
    """Capacitance per length fF/um -> F/m."""
    return value * femto / micro


def A_per_cm2(value: float) -> float:
    """Current density A/cm^2 -> A/m^2."""
    return value / centi**2


def celsius_to_kelvin(value: float) -> float:
    return value + zero_Celsius


def F_to_fF(value):  # type: ignore[no-untyped-def]
    return value / femto


def Hz_to_GHz(value):  # type: ignore[no-untyped-def]
    return value / giga


def H_to_pH(value):  # type: ignore[no-untyped-def]
    return value / pico


def m2_to_um2(value):  # type: ignore[no-untyped-def]
    return value / micro**2


def A_to_nA(value):  # type: ignore[no-untyped-def]
    return value / nano
