"""What each region of a block needs from its fill: the frequency at which the fill must still
decouple and the useful capacitance it must reach (SI: F, C, V, Hz, s, ohm).

Charge-based sizing: a region drawing charge Q per switching event from its local decap sees
the supply sag by dV = Q / C (Q = C V), so keeping the sag below x V_DD needs
C >= Q / (x V_DD) (``physics.pdn.decap_for_charge`` with Q = I dt). Q comes from one of

* charge per cycle, as given;
* a triangular current pulse, Q = I_peak (t_r + t_f) / 2 (``pdn.triangular_pulse_charge``);
* switching power and clock, Q = P / (V_DD f) (P = alpha C V_DD^2 f, so the charge per cycle
  is alpha C V_DD: J. M. Rabaey, A. Chandrakasan, B. Nikolic, *Digital Integrated Circuits*,
  2nd ed., Prentice Hall 2003, ch. 5 dynamic power).

Intrinsic capacitance: of the logic's capacitance C_total = Q / (a V_DD) only the switching
share a C_total draws charge; the rest, (1 - a) C_total, holds charge and decouples
(``pdn.intrinsic_decap``, after H. H. Chen, D. D. Ling, DAC 1997; form recalled), so the fill
needs Q / (x V_DD) - (1 - a) Q / (a V_DD), at least 0.

Impedance target: |Z| <= Z_max at the frequency of interest needs C_eff >= 1 / (2 pi f Z_max)
(``pdn.capacitance_for_impedance``). The target of a region is the largest of the charge
need, the impedance need and an explicit ``min_cap_nF``; the fill meets it with its useful
capacitance (C_eff at the frequency of interest), not its low-frequency capacitance.

Frequency of interest: ``frequency_MHz`` if given, else the pulse's edge bandwidth
ln(9) / (2 pi t_r) (``pdn.rise_time_bandwidth``), else the region clock, else the block clock.
"""

from __future__ import annotations

from dataclasses import dataclass

from scipy.constants import mega, milli, nano, pico

from celllab.physics import pdn
from celllab.planner.block import Region

__all__ = ["RegionNeed", "region_need"]


@dataclass(frozen=True)
class RegionNeed:
    """Sizing of one region (SI).

    frequency : Hz, and ``frequency_source`` saying where it came from
    charge : C per switching event (0 for a region without activity)
    droop : allowed sag, V
    charge_need : Q / droop, F
    intrinsic : (1 - a) Q / (a V_DD), F (0 without ``logic_activity``)
    impedance_need : 1 / (2 pi f Z_max), F (0 without ``max_impedance_mohm``)
    min_cap : explicit minimum, F (0 without ``min_cap_nF``)
    target : useful capacitance the fill must reach, F; ``target_source`` names the largest
    """

    frequency: float
    frequency_source: str
    charge: float
    droop: float
    charge_need: float
    intrinsic: float
    impedance_need: float
    min_cap: float
    target: float
    target_source: str


def _charge(region: Region, supply: float) -> float:
    if region.charge_per_cycle_pC is not None:
        return region.charge_per_cycle_pC * pico
    if region.peak_current_mA is not None and region.rise_time_ps is not None:
        fall = region.fall_time_ps if region.fall_time_ps is not None else region.rise_time_ps
        return float(pdn.triangular_pulse_charge(region.peak_current_mA * milli,
                                                 region.rise_time_ps * pico, fall * pico))
    if region.switching_power_mW is not None and region.clock_MHz is not None:
        return region.switching_power_mW * milli / (supply * region.clock_MHz * mega)
    return 0.0


def _frequency(region: Region, block_clock: float) -> tuple[float, str]:
    if region.frequency_MHz is not None:
        return region.frequency_MHz * mega, "frequency_MHz"
    if region.rise_time_ps is not None:
        return float(pdn.rise_time_bandwidth(region.rise_time_ps * pico)), "edge bandwidth"
    if region.clock_MHz is not None:
        return region.clock_MHz * mega, "region clock"
    return block_clock, "block clock"


def region_need(region: Region, supply: float, block_clock: float,
                block_ripple: float) -> RegionNeed:
    """Frequency of interest and useful-capacitance target of ``region``.

    Parameters
    ----------
    region : Region        the region's block-file table (display units)
    supply : float         block supply V_DD, V, > 0
    block_clock : float    block clock, Hz (the last fallback for the frequency)
    block_ripple : float   the block's ripple fraction (default allowed droop)
    """
    frequency, frequency_source = _frequency(region, block_clock)
    fraction = region.droop_fraction if region.droop_fraction is not None else block_ripple
    droop = fraction * supply
    charge = _charge(region, supply)
    charge_need = float(pdn.decap_for_charge(charge, 1.0, droop))
    intrinsic = 0.0
    if region.logic_activity is not None and charge > 0:
        # C_sw = Q / V_DD; pdn.intrinsic_decap takes P = C_sw V^2 f with f = 1
        intrinsic = float(pdn.intrinsic_decap(charge * supply, supply, 1.0,
                                              region.logic_activity))
    impedance_need = 0.0
    if region.max_impedance_mohm is not None:
        impedance_need = float(pdn.capacitance_for_impedance(region.max_impedance_mohm * milli,
                                                             frequency))
    min_cap = region.min_cap_nF * nano if region.min_cap_nF is not None else 0.0
    options = {"charge sizing": max(charge_need - intrinsic, 0.0),
               "max_impedance_mohm": impedance_need, "min_cap_nF": min_cap}
    source = max(options, key=lambda k: options[k])
    target = options[source]
    return RegionNeed(frequency=frequency, frequency_source=frequency_source, charge=charge,
                      droop=droop, charge_need=charge_need, intrinsic=intrinsic,
                      impedance_need=impedance_need, min_cap=min_cap, target=target,
                      target_source=source if target > 0 else "none")
