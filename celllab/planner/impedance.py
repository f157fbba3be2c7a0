"""The block's power-delivery impedance from the chosen cells' stored Z(f)
(SI: Hz, ohm, F, H, V, A, s).

Network (package seen from the die, ideal supply behind it)::

    Z_block(f) = (R_pkg + j w L_pkg) || Z_die(f),
    Y_die(f)   = sum_i n_i / Z_i(f) + j w C_intrinsic

Each cell's Z_i(f) is its stored response at one corner (``corners.PDN_RESPONSE``). Between stored frequencies the
die is interpolated through its complex capacitance K(f) = Y_die / (j w), linearly in
log f: K is constant for an ideal capacitor and smooth for distributed RC cells, so the
interpolation is exact for the former and close for the latter. The package branch and the
intrinsic decap are analytic at every frequency.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from celllab.physics import pdn
from celllab.records import FrequencyResponse

__all__ = [
    "DEFAULT_FREQ_HZ",
    "DieNetwork",
    "PdnFigures",
    "die_network",
    "pdn_figures",
]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]

#: Sweep used when no cell is chosen (the die is then the intrinsic decap alone), Hz.
DEFAULT_FREQ_HZ: FloatArray = np.logspace(5.0, 12.0, 141)
_FINE_PER_DECADE = 200


def _positive_grid(response: FrequencyResponse) -> tuple[FloatArray, ComplexArray]:
    freq = np.asarray(response.freq_Hz, dtype=float).reshape(-1)
    z = np.asarray(response.z_ohm, dtype=complex).reshape(-1)
    keep = (freq > 0) & np.isfinite(z) & (z != 0)
    return freq[keep], z[keep]


def _interp_complex(x: FloatArray, xp: FloatArray, fp: ComplexArray) -> ComplexArray:
    return np.interp(x, xp, fp.real) + 1j * np.interp(x, xp, fp.imag)


@dataclass(frozen=True)
class DieNetwork:
    """The die side of the PDN: the fill's complex capacitance on a grid, plus C_intrinsic.

    freq : (n_freq,) Hz                    stored frequencies common to every chosen cell
    fill_capacitance : (n_freq,) complex   K_fill(f) = sum n_i / (j w Z_i(f)), F
    intrinsic_capacitance : float          F (ideal capacitor)
    """

    freq: FloatArray
    fill_capacitance: ComplexArray
    intrinsic_capacitance: float

    @property
    def f_min(self) -> float:
        return float(self.freq[0])

    @property
    def f_max(self) -> float:
        return float(self.freq[-1])

    def admittance(self, freq: ArrayLike) -> ComplexArray:
        """Y_die(f), siemens, at frequencies inside [f_min, f_max] (``ValueError`` outside)."""
        f = np.asarray(freq, dtype=float)
        if np.any(f < self.f_min * (1 - 1e-12)) or np.any(f > self.f_max * (1 + 1e-12)):
            raise ValueError(f"frequencies must lie in [{self.f_min:g}, {self.f_max:g}] Hz")
        k = _interp_complex(np.log(f), np.log(self.freq), self.fill_capacitance)
        return np.asarray(1j * 2.0 * np.pi * f * (k + self.intrinsic_capacitance), dtype=complex)

    def impedance(self, freq: ArrayLike) -> ComplexArray:
        """Z_die(f) = 1 / Y_die(f), ohm."""
        return np.asarray(1.0 / self.admittance(freq), dtype=complex)

    def block_impedance(self, freq: ArrayLike, l_pkg: float, r_pkg: float) -> ComplexArray:
        """Z_block(f) = (R_pkg + j w L_pkg) || Z_die(f), ohm (``pdn.block_impedance``)."""
        f = np.asarray(freq, dtype=float)
        k = _interp_complex(np.log(f), np.log(self.freq), self.fill_capacitance)
        y_fill = 1j * 2.0 * np.pi * f * k
        # a fill of no cells has zero admittance: an open branch
        z_fill = np.full(f.shape, np.inf, dtype=complex)
        np.divide(1.0, y_fill, out=z_fill, where=y_fill != 0)
        self.admittance(f)  # range check
        return pdn.block_impedance(f, z_fill, l_pkg, r_pkg, self.intrinsic_capacitance)


def die_network(
    responses: Sequence[FrequencyResponse], counts: ArrayLike, intrinsic_capacitance: float
) -> DieNetwork:
    """Combine cells' stored Z_i(f) with their counts n_i into the die network.

    Parameters
    ----------
    responses : sequence of FrequencyResponse   one per chosen cell (rail-to-rail Z, ohm)
    counts : array_like                         (n_cells,) copies of each, >= 0
    intrinsic_capacitance : float               non-switching logic decap, F, >= 0

    Returns
    -------
    DieNetwork   on the union of the cells' positive stored frequencies inside the range
                 every cell covers (``DEFAULT_FREQ_HZ`` without cells)

    Notes
    -----
    K_fill = sum_i n_i Y_i / (j w): cells in parallel add admittance; each cell's K_i is
    interpolated onto the common grid linearly in log f.
    """
    n = np.asarray(counts, dtype=float).reshape(-1)
    if n.size != len(responses):
        raise ValueError("one count per response")
    grids = [_positive_grid(r) for r, c in zip(responses, n, strict=True) if c > 0]
    if not grids:
        return DieNetwork(DEFAULT_FREQ_HZ.copy(), np.zeros(DEFAULT_FREQ_HZ.size, dtype=complex),
                          float(intrinsic_capacitance))
    lo = max(float(f[0]) for f, _ in grids)
    hi = min(float(f[-1]) for f, _ in grids)
    if not lo < hi:
        raise ValueError("the chosen cells' stored sweeps share no frequency range")
    freq = np.unique(np.concatenate([f[(f >= lo) & (f <= hi)] for f, _ in grids]))
    total = np.zeros(freq.size, dtype=complex)
    for (f, z), count in zip(grids, n[n > 0], strict=True):
        k_cell = 1.0 / (1j * 2.0 * np.pi * f * z)
        total += count * _interp_complex(np.log(freq), np.log(f), k_cell)
    return DieNetwork(freq, total, float(intrinsic_capacitance))


@dataclass(frozen=True)
class PdnFigures:
    """Power-delivery figures of one block (SI).

    target_impedance : ohm         V_DD ripple / Delta I (Smith et al. 1999)
    f0, z0 : Hz, ohm               1/(2 pi sqrt(L C_die)), sqrt(L / C_die) (closed forms)
    peak_impedance_tank, peak_frequency_tank : ohm, Hz
                                   exact peak of the lumped tank (R_pkg + j w L) ||
                                   (R_die + 1/(j w C_die)), R_die = Re Z_die at f0
    peak_impedance, peak_frequency : ohm, Hz   maximum of |Z_block| over the sweep
    die_esr : ohm                  Re Z_die(f0)
    die_c_eff_at_peak : F          -1 / (w Im Z_die) at the swept peak
    droop, droop_time : V, s       Delta I sqrt(L / C_die) at (pi/2) sqrt(L C_die) (undamped)
    worst_ratio, worst_frequency : -, Hz   max |Z_block| / Z_target over the sweep and where
    below_target : bool            |Z_block| <= Z_target at every swept frequency
    """

    target_impedance: float
    f0: float
    z0: float
    peak_impedance_tank: float
    peak_frequency_tank: float
    peak_impedance: float
    peak_frequency: float
    die_esr: float
    die_c_eff_at_peak: float
    droop: float
    droop_time: float
    worst_ratio: float
    worst_frequency: float
    below_target: bool


def _swept_peak(die: DieNetwork, l_pkg: float, r_pkg: float) -> tuple[float, float]:
    """Max |Z_block| and its frequency: fine log grid, then a local refinement."""
    decades = np.log10(die.f_max / die.f_min)
    fine = np.geomspace(die.f_min, die.f_max, max(int(decades * _FINE_PER_DECADE), 2) + 1)
    mag = np.abs(die.block_impedance(fine, l_pkg, r_pkg))
    k = int(np.argmax(mag))
    local = np.geomspace(fine[max(k - 1, 0)], fine[min(k + 1, fine.size - 1)], 401)
    local_mag = np.abs(die.block_impedance(local, l_pkg, r_pkg))
    j = int(np.argmax(local_mag))
    return float(local_mag[j]), float(local[j])


def pdn_figures(
    die: DieNetwork,
    die_capacitance: float,
    l_pkg: float,
    r_pkg: float,
    vdd: float,
    ripple_fraction: float,
    current_step: float,
) -> PdnFigures:
    """Target impedance, resonance, peak |Z|, first droop and the target check of a block.

    Parameters
    ----------
    die : DieNetwork         the die side (fill + intrinsic decap)
    die_capacitance : float  low-frequency die capacitance C_die (fill + intrinsic), F, > 0
    l_pkg, r_pkg : float     package loop inductance (H, > 0) and resistance (ohm, >= 0)
    vdd, ripple_fraction, current_step : float   V, unitless, A

    Notes
    -----
    Closed forms from ``celllab.physics.pdn`` (Smith et al. 1999; Larsson 1998). The swept
    figures use the cells' stored Z(f) and so include their ESR and the loss of capacitance
    above each cell's bandwidth; the closed forms treat the die as one ideal C_die. |Z| below
    the target everywhere does not bound the worst-case noise when Z(f) has peaks.
    """
    if not die_capacitance > 0:
        raise ValueError("die capacitance must be > 0")
    target = float(pdn.target_impedance(vdd, ripple_fraction, current_step))
    f0 = float(pdn.resonance_frequency(l_pkg, die_capacitance))
    z0 = float(pdn.characteristic_impedance(l_pkg, die_capacitance))
    f_eval = float(np.clip(f0, die.f_min, die.f_max))
    die_esr = max(float(np.real(die.impedance(f_eval))), 0.0)
    peak_tank, f_peak_tank = pdn.peak_impedance(l_pkg, die_capacitance, r_pkg, die_esr)
    peak, f_peak = _swept_peak(die, l_pkg, r_pkg)
    z_die_peak = die.impedance(f_peak)
    c_eff = float(-1.0 / (2.0 * np.pi * f_peak * np.imag(z_die_peak)))
    droop, droop_time = pdn.first_droop(current_step, l_pkg, die_capacitance)
    z_sweep = die.block_impedance(die.freq, l_pkg, r_pkg)
    ratio, f_worst = pdn.exceeds_target(die.freq, z_sweep, target)
    worst_ratio = max(float(ratio), peak / target)
    worst_frequency = float(f_worst) if float(ratio) >= peak / target else f_peak
    return PdnFigures(
        target_impedance=target,
        f0=f0,
        z0=z0,
        peak_impedance_tank=float(peak_tank),
        peak_frequency_tank=float(f_peak_tank),
        peak_impedance=peak,
        peak_frequency=f_peak,
        die_esr=die_esr,
        die_c_eff_at_peak=c_eff,
        droop=float(droop),
        droop_time=float(droop_time),
        worst_ratio=worst_ratio,
        worst_frequency=worst_frequency,
        below_target=bool(worst_ratio <= 1.0),
    )
