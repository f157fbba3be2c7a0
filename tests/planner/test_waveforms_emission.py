"""Region current waveforms, their harmonics, and the emission figures."""

from __future__ import annotations

import numpy as np
import pytest

from celllab.catalog import Catalog
from celllab.planner.emission import BANDS, compare_emission, emission_spectrum
from celllab.planner.network import (
    RegionLoad,
    RegionPath,
    SupplyNetwork,
    build_network,
)
from celllab.planner.waveforms import (
    Activity,
    block_current_spectrum,
    current_waveform,
    harmonic_spectrum,
    pwl_harmonics,
    trapezoid_envelope,
    trapezoid_harmonics,
)

from .network_demo import demo_network


def test_trapezoid_harmonics_match_the_closed_form() -> None:
    # Source: C. R. Paul, Introduction to Electromagnetic Compatibility, 2nd ed. (2006), ch. 3:
    # c_n = 2 A (tau/T) |sinc(n tau/T)| |sinc(n t_r/T)| for equal edges; rel 1e-9
    a = Activity(peak_current=0.2, rise_time=200e-12, clock_frequency=100e6,
                 charge_per_cycle=0.2 * 1.2e-9, stimulus="clock")
    freq, coeff = harmonic_spectrum(a, 5e9)
    n = np.arange(1, freq.size + 1)
    tau = a.flat_top + a.rise_time  # width at half height
    expected = trapezoid_harmonics(0.2, 1e-8, tau, 200e-12, n)
    big = expected > 1e-9 * expected.max()  # away from the sinc zeros
    np.testing.assert_allclose(2 * np.abs(coeff)[big], expected[big], rtol=1e-9)
    assert freq[0] == pytest.approx(100e6, rel=1e-12) and freq[-1] == pytest.approx(5e9, rel=1e-9)
    # the envelope bounds every harmonic (Paul, ch. 3)
    assert np.all(expected <= trapezoid_envelope(freq, 0.2, 1e-8, tau, 200e-12) * (1 + 1e-12))


def test_pwl_harmonics_match_a_sampled_fft() -> None:
    # Source: numpy's FFT of the same waveform sampled finely (rectangle-rule Fourier series
    # of a continuous periodic function); rel 1e-6 on the first ten harmonics
    t = np.array([0.0, 0.3, 0.5, 1.1, 1.6, 2.0]) * 1e-9
    i = np.array([0.0, 0.25, 0.1, 0.18, 0.02, 0.0])
    coeff = pwl_harmonics(t, i, 10)
    m = 1 << 16
    ts = np.arange(m) * (2e-9 / m)
    spectrum = np.fft.rfft(np.interp(ts, t, i)) / m
    np.testing.assert_allclose(coeff, spectrum[1:11], rtol=1e-6, atol=1e-9)
    with pytest.raises(ValueError, match="return to its first value"):
        pwl_harmonics(t, i + np.linspace(0, 1, t.size), 3)


def test_waveforms_in_time_and_their_averages() -> None:
    step = Activity(peak_current=0.1, rise_time=1e-10, step_delay=1e-9, base_current=0.02)
    t = np.array([0.0, 1e-9, 1.05e-9, 2e-9])
    np.testing.assert_allclose(current_waveform(step, t), [0.02, 0.02, 0.07, 0.12], rtol=1e-12)
    assert step.mean_current() == pytest.approx(0.12, rel=1e-12)  # no clock: after the step
    clock = Activity(peak_current=0.1, rise_time=1e-10, fall_time=3e-10, clock_frequency=1e8,
                     charge_per_cycle=1e-10, stimulus="clock")
    # Q f = 1e-10 C x 1e8 Hz = 10 mA (definition of the average current)
    assert clock.mean_current() == pytest.approx(0.01, rel=1e-12)
    assert current_waveform(clock, [1e-8 + 0.5e-10])[0] == pytest.approx(0.05, rel=1e-12)
    samples = Activity(peak_current=0.1, rise_time=1e-10, stimulus="samples",
                       samples=(np.array([0.0, 1e-9, 2e-9]), np.array([0.0, 0.1, 0.0])))
    assert samples.mean_current() == pytest.approx(0.05, rel=1e-12)
    assert current_waveform(samples, [5e-9])[0] == 0.0  # held at the last sample


@pytest.mark.parametrize(("kwargs", "message"), [
    ({"peak_current": -1.0}, "peak_current"),
    ({"stimulus": "clock"}, "needs clock_frequency"),
    ({"stimulus": "samples"}, "needs samples"),
    ({"clock_frequency": 1e9, "charge_per_cycle": 1e-9}, "longer than the clock period"),
    ({"charge_per_cycle": 1e-15}, "less than a triangle pulse"),
])
def test_bad_activities(kwargs: dict[str, object], message: str) -> None:
    base: dict[str, object] = {"peak_current": 0.1, "rise_time": 1e-10}
    with pytest.raises(ValueError, match=message):
        a = Activity(**(base | kwargs))  # type: ignore[arg-type]
        a.flat_top  # noqa: B018 - the charge check runs here without a clock


def test_regions_on_one_clock_add_as_phasors() -> None:
    a = Activity(peak_current=0.1, rise_time=1e-10, clock_frequency=1e8, stimulus="clock")
    b = Activity(peak_current=0.05, rise_time=2e-10, clock_frequency=2e8, stimulus="clock")
    freq, current = block_current_spectrum([a, b], 1e9)
    np.testing.assert_allclose(freq, np.arange(1, 11) * 1e8, rtol=1e-12)
    assert np.all(current[0::2, 1] == 0) and np.all(current[1::2, 1] != 0)  # b: even ones only
    np.testing.assert_allclose(current[:, 0], 2 * harmonic_spectrum(a, 1e9)[1], rtol=1e-12)


def test_probe_reading_in_dbuv() -> None:
    # Source: dBuV = 20 log10(V / 1 uV), rms of a sine = peak / sqrt(2) (definitions):
    # a lone region with no decap behind a resistive package draws its harmonics straight
    # through the loop, so the probe reads I_n / sqrt(2) x 1 ohm; rel 1e-9
    a = Activity(peak_current=0.1, rise_time=1e-10, clock_frequency=1e8, stimulus="clock")
    supply = SupplyNetwork(1.0, 0.01, 0.0, {"r": RegionPath(0.0, 0.0)})
    net = build_network(supply, [RegionLoad("r", [], 0.0, 0.0, a)])
    spectrum = emission_spectrum(net, 1e9)
    level, _ = spectrum.worst()
    _, coeff = harmonic_spectrum(a, 1e9)
    expected = 20 * np.log10(2 * np.abs(coeff) / np.sqrt(2) / 1e-6)
    np.testing.assert_allclose(level, expected, rtol=1e-9)


def test_demo_emission_plan_against_no_decap_and_naive_fill(lumen_catalog: Catalog) -> None:
    net, goals = demo_network(lumen_catalog)
    assert goals.naive_fill is not None
    spectra = {"plan": emission_spectrum(net, 1e9),
               "no on-die decap": emission_spectrum(net.with_fill({}), 1e9),
               "naive fill": emission_spectrum(net.with_fill(goals.naive_fill), 1e9)}
    bands = compare_emission(spectra, "plan")
    assert [b.band.name for b in bands] == [BANDS[1].name, BANDS[2].name]  # 300 MHz clock
    for b in bands:
        # on-die capacitance keeps harmonics on the die (common practice, no source): without
        # it the probe reads more (by how much depends on the demo fill; no threshold claimed)
        assert b.change_dB["no on-die decap"] > 0.5
        assert b.change_dB["plan"] == 0.0
    with pytest.raises(ValueError, match="reference"):
        compare_emission(spectra, "nothing")
    extra = {"plan": spectra["plan"], "other": emission_spectrum(net, 5e8)}
    with pytest.raises(ValueError, match="other harmonics"):
        compare_emission(extra, "plan")


def test_no_clock_no_spectrum() -> None:
    supply = SupplyNetwork(1.0, 0.01, 1e-9, {"r": RegionPath(0.0, 0.0)})
    step = Activity(peak_current=0.1, rise_time=1e-10)
    net = build_network(supply, [RegionLoad("r", [], 1e-9, 0.0, step)])
    with pytest.raises(ValueError, match="periodic"):
        emission_spectrum(net, 1e9)


def test_a_harmonic_on_a_band_edge_counts_once() -> None:
    # 300 MHz sits on the C/D edge: it belongs to C (upper edges inclusive), D starts above
    a = Activity(peak_current=0.1, rise_time=1e-10, clock_frequency=3e8, stimulus="clock")
    supply = SupplyNetwork(1.0, 0.01, 0.0, {"r": RegionPath(0.0, 0.0)})
    net = build_network(supply, [RegionLoad("r", [], 0.0, 0.0, a)])
    spectrum = emission_spectrum(net, 1e9)
    c_band, d_band = compare_emission({"plan": spectrum}, "plan")
    level, _ = spectrum.worst()
    assert c_band.level_dBuV["plan"] == pytest.approx(level[0], rel=1e-12)
    assert d_band.level_dBuV["plan"] == pytest.approx(level[1:].max(), rel=1e-12)
