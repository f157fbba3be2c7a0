"""The one place where units people type or read become SI, and back.

Deck, cell and catalog names carry their unit (``t_ox_nm``, ``cap_fF``, ``temperature_C``);
the physics core sees SI only (m, F, H, Hz, A, V, s, K, ohm). Convert once, at the boundary::

    t_ox = to_si(deck.t_ox_nm, "nm")          # m
    cap_fF = from_si(c_lf, "fF")              # for a catalog column

Prefixes and constants come from ``scipy.constants`` (``nano``, ``femto``, ``zero_Celsius``,
``Julian_year``); no power of ten is typed here. ``unit_from_name`` reads the unit off a field
name by its suffix (``mu0_cm2_per_Vs`` -> ``cm^2/(V s)``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TypeVar

import numpy as np
from scipy.constants import (
    Julian_year,
    centi,
    femto,
    giga,
    hour,
    mega,
    micro,
    milli,
    nano,
    pico,
    zero_Celsius,
)

__all__ = ["UNITS", "Unit", "from_si", "pretty_unit", "to_si", "unit_from_name"]

Value = TypeVar("Value", float, np.ndarray)


@dataclass(frozen=True)
class Unit:
    """A unit people read: ``value_SI = value * scale + offset``.

    symbol : str   as printed in headers and help (``fF``, ``cm^2/(V s)``, ``degC``)
    si : str       the SI unit it converts to
    scale, offset  SI per display unit; offset only for degC (kelvin)
    suffixes : tuple   how field names end when they hold this unit (``_fF``, ``_C``)
    """

    symbol: str
    si: str
    scale: float
    offset: float = 0.0
    suffixes: tuple[str, ...] = ()


UNITS: dict[str, Unit] = {
    u.symbol: u
    for u in (
        # lengths and areas
        Unit("m", "m", 1.0, suffixes=("_m",)),
        Unit("um", "m", micro, suffixes=("_um",)),
        Unit("nm", "m", nano, suffixes=("_nm",)),
        Unit("um^2", "m^2", micro**2, suffixes=("_um2",)),
        # capacitance, inductance, resistance
        Unit("F", "F", 1.0, suffixes=("_F",)),
        Unit("fF", "F", femto, suffixes=("_fF",)),
        Unit("nF", "F", nano, suffixes=("_nF",)),
        Unit("fF/um", "F/m", femto / micro, suffixes=("_fF_per_um",)),
        Unit("fF/um^2", "F/m^2", femto / micro**2, suffixes=("_fF_per_um2",)),
        Unit("H", "H", 1.0, suffixes=("_H",)),
        Unit("pH", "H", pico, suffixes=("_pH",)),
        Unit("ohm", "ohm", 1.0, suffixes=("_ohm",)),
        Unit("ohm/sq", "ohm", 1.0, suffixes=("_ohm_per_sq",)),
        # frequency and time
        Unit("Hz", "Hz", 1.0, suffixes=("_Hz",)),
        Unit("MHz", "Hz", mega, suffixes=("_MHz",)),
        Unit("GHz", "Hz", giga, suffixes=("_GHz",)),
        Unit("s", "s", 1.0, suffixes=("_s",)),
        Unit("ms", "s", milli, suffixes=("_ms",)),
        Unit("ps", "s", pico, suffixes=("_ps",)),
        Unit("ns", "s", nano, suffixes=("_ns",)),
        Unit("years", "s", Julian_year, suffixes=("_years",)),
        # voltage, field, current
        Unit("V", "V", 1.0, suffixes=("_V",)),
        Unit("1/V", "1/V", 1.0, suffixes=("_per_V",)),
        Unit("eV", "eV", 1.0, suffixes=("_eV",)),
        Unit("MV/cm", "V/m", mega / centi, suffixes=("_MV_per_cm",)),
        Unit("A", "A", 1.0, suffixes=("_A",)),
        Unit("nA", "A", nano, suffixes=("_nA",)),
        Unit("mA", "A", milli, suffixes=("_mA",)),
        Unit("mW", "W", milli, suffixes=("_mW",)),
        Unit("%", "1", centi, suffixes=("_pct",)),
        Unit("nA/nF", "A/F", 1.0, suffixes=("_nA_per_nF",)),
        Unit("A/cm^2", "A/m^2", (1 / centi) ** 2, suffixes=("_A_per_cm2",)),
        Unit("fA/um^2", "A/m^2", femto / micro**2, suffixes=("_fA_per_um2",)),
        Unit("fA/um", "A/m", femto / micro, suffixes=("_fA_per_um",)),
        # failure rates: FIT = failures per 1e9 device-hours; per mm^2 of gate oxide
        Unit("FIT/mm^2", "1/(s m^2)", 1.0 / (giga * hour * milli**2), suffixes=("_fit_per_mm2",)),
        # materials
        Unit("cm^-3", "m^-3", (1 / centi) ** 3, suffixes=("_cm3",)),
        Unit("cm^2/(V s)", "m^2/(V s)", centi**2, suffixes=("_cm2_per_Vs",)),
        # temperature
        Unit("degC", "K", 1.0, zero_Celsius, suffixes=("_C",)),
        Unit("K", "K", 1.0, suffixes=("_K",)),
        Unit("ppm/K", "1/K", micro, suffixes=("_ppm_per_K",)),
    )
}

#: (suffix, symbol), longest suffix first, for ``unit_from_name``.
_BY_SUFFIX: tuple[tuple[str, str], ...] = tuple(
    sorted(((s, u.symbol) for u in UNITS.values() for s in u.suffixes), key=lambda p: -len(p[0])))


def _unit(symbol: str) -> Unit:
    try:
        return UNITS[symbol]
    except KeyError:
        raise ValueError(f"unit {symbol!r} -> allowed: {', '.join(UNITS)}") from None


def to_si(value: Value, unit: str) -> Value:
    """A value in the display ``unit`` (``"nm"``, ``"fF"``, ``"degC"`` ...) in SI."""
    u = _unit(unit)
    si = value * u.scale if u.scale != 1.0 else value
    return si + u.offset if u.offset else si


def from_si(value: Value, unit: str) -> Value:
    """An SI value in the display ``unit``."""
    u = _unit(unit)
    shown = value - u.offset if u.offset else value
    return shown / u.scale if u.scale != 1.0 else shown


def unit_from_name(name: str) -> str:
    """The display unit a field name ends with (``leakage_nA_per_nF`` -> ``nA/nF``), or ''."""
    for suffix, symbol in _BY_SUFFIX:
        if name.endswith(suffix):
            return symbol
    return ""


#: How the ASCII spellings of unit symbols read on a screen that shows Unicode.
_PRETTY: tuple[tuple[str, str], ...] = (
    ("degC", "°C"), ("ohm", "Ω"), ("um", "µm"), ("^-3", "⁻³"), ("^2", "²"), ("(V s)", "(V·s)"),
)


def pretty_unit(symbol: str) -> str:
    """A unit symbol as people read it on screen (``um^2`` -> ``µm²``, ``degC`` -> ``°C``,
    ``ohm`` -> ``Ω``); file headers and CSV keep the ASCII symbol."""
    for ascii_text, shown in _PRETTY:
        symbol = symbol.replace(ascii_text, shown)
    return symbol
