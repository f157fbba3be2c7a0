"""The RF current the block drives through the package loop, and what a 1 ohm probe in the
ground return reads (SI: Hz, A, V; levels in dB).

The block's current spectrum is the sum of every region's clock harmonics
(`waveforms.block_current_spectrum`: exact Fourier coefficients of the piecewise-linear
current, all clocks edge-aligned at t = 0). Each region's harmonic reaches the package loop
through the network's current transfer I_pkg / I_region (`BlockNetwork.package_transfer`), and
the regions' contributions add as phasors.

Measurement arrangement: IEC 61967-4 (conducted emission, 1 ohm method) measures the RF
current returning through the IC's ground pins as the voltage across a 1 ohm resistor between
them and the board ground. The probe sits in series with the package loop, so by default it is
part of the network when the current is computed (``probe_in_loop``); the reading in dBuV is
20 log10(|I_rms| x 1 ohm / 1 uV) with I_rms = |I_peak| / sqrt(2) per harmonic (a receiver
reads the rms of each line).

Bands: the CISPR 16-1-1 frequency bands B (0.15-30 MHz), C (30-300 MHz) and D
(0.3-1 GHz) (band edges from memory). The change in a band is the difference of the highest
harmonic level in it, each taken at its own worst corner.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.constants import micro

from celllab.planner.corners import NETWORK_FIGURES
from celllab.planner.network import BlockNetwork
from celllab.planner.waveforms import block_current_spectrum

__all__ = [
    "BANDS",
    "PROBE_OHM",
    "BandLevels",
    "EmissionBand",
    "EmissionSpectrum",
    "compare_emission",
    "emission_spectrum",
]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]

#: The IEC 61967-4 probe resistance, ohm.
PROBE_OHM = 1.0


@dataclass(frozen=True)
class EmissionBand:
    """A named frequency band, Hz."""

    name: str
    f_lo: float
    f_hi: float


#: CISPR 16-1-1 bands B, C, D (edges from memory).
BANDS: tuple[EmissionBand, ...] = (
    EmissionBand("B 0.15-30 MHz", 150e3, 30e6),
    EmissionBand("C 30-300 MHz", 30e6, 300e6),
    EmissionBand("D 0.3-1 GHz", 300e6, 1e9),
)


@dataclass(frozen=True)
class EmissionSpectrum:
    """Package-loop current of one network at the block's clock harmonics (SI).

    label : str                     e.g. "plan", "no on-die decap"
    freq : (n_h,) Hz
    block_current : (n_h,) complex A   sum of the regions' harmonic phasors (peak)
    package_current : (n_corner, n_h) complex A   peak phasor through the package loop
    probe : ohm                     the 1 ohm probe (in the loop when ``probe_in_loop``)
    corners : tuple of str
    """

    label: str
    freq: FloatArray
    block_current: ComplexArray
    package_current: ComplexArray
    probe: float
    probe_in_loop: bool
    corners: tuple[str, ...]

    def level_dBuV(self) -> FloatArray:
        """Probe voltage per harmonic, dBuV (rms), (n_corner, n_h)."""
        v_rms = np.abs(self.package_current) * self.probe / np.sqrt(2.0)
        return np.asarray(20.0 * np.log10(np.maximum(v_rms, 1e-30) / micro), dtype=float)

    def worst(self) -> tuple[FloatArray, NDArray[np.int_]]:
        """(level dBuV, corner index) per harmonic at its own worst (loudest) corner."""
        level = self.level_dBuV()
        k = NETWORK_FIGURES.worst_index(level, axis=0)
        return level[k, np.arange(level.shape[1])], k


def emission_spectrum(network: BlockNetwork, f_max: float = 1e9, label: str = "plan",
                      probe: float = PROBE_OHM, probe_in_loop: bool = True) -> EmissionSpectrum:
    """Package-loop current at every clock harmonic up to ``f_max`` Hz.

    Parameters
    ----------
    network : BlockNetwork   regions with periodic activities (others contribute nothing)
    f_max : float            Hz
    label : str
    probe : float            probe resistance, ohm
    probe_in_loop : bool     put the probe in series with the package loop (the measurement
                             arrangement) while solving; False reads I x probe from the loop
                             without it

    Notes
    -----
    I_pkg(f_n) = sum_r H_r(f_n) I_r(f_n), H_r = I_pkg / I_region from the network at each
    corner; I_r the region's peak phasor (exact Fourier coefficients of its waveform).
    """
    freq, currents = block_current_spectrum(network.activities, f_max)
    if freq.size == 0:
        raise ValueError("no region has a periodic current (clock_frequency) below f_max")
    h = network.package_transfer(freq, probe=probe if probe_in_loop else 0.0)
    package = np.einsum("chr,hr->ch", h, currents)
    return EmissionSpectrum(label, freq, currents.sum(axis=1), package, probe, probe_in_loop,
                            network.corners)


@dataclass(frozen=True)
class BandLevels:
    """Highest harmonic level in a band for each compared network (dBuV, worst corner), and
    the change against the reference in dB (negative: quieter than the reference)."""

    band: EmissionBand
    level_dBuV: dict[str, float]
    corner: dict[str, str]
    change_dB: dict[str, float]


def compare_emission(spectra: Mapping[str, EmissionSpectrum], reference: str,
                     bands: Sequence[EmissionBand] = BANDS) -> list[BandLevels]:
    """Per band: each network's highest level and its change against ``reference``.

    All spectra must share the harmonic frequencies (the same activities). A band holds the
    harmonics above its lower edge up to and including its upper edge (a harmonic on a shared
    edge counts once, in the lower band). A band without harmonics is left out.
    """
    if reference not in spectra:
        raise ValueError(f"reference {reference!r} not among {list(spectra)}")
    base = spectra[reference].freq
    for name, s in spectra.items():
        if s.freq.shape != base.shape or not np.allclose(s.freq, base, rtol=1e-12):
            raise ValueError(f"spectrum {name!r} has other harmonics than {reference!r}")
    out = []
    for band in bands:
        inside = (base > band.f_lo) & (base <= band.f_hi)  # each harmonic in one band
        if not inside.any():
            continue
        levels, corners = {}, {}
        for name, s in spectra.items():
            level, k = s.worst()
            j = int(np.argmax(np.where(inside, level, -np.inf)))
            levels[name], corners[name] = float(level[j]), s.corners[int(k[j])]
        change = {name: levels[name] - levels[reference] for name in spectra}
        out.append(BandLevels(band, levels, corners, change))
    return out
