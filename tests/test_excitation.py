"""Input signals (lumped.excitation) against their definitions and ISO 8608.

- Random road: ISO 8608 (2016) displacement PSD G_d(n) = G_d(n₀)(n/n₀)^−2,
  n₀ = 0.1 cycle/m, class geometric means A 16, B 64, C 256, D 1024 × 10⁻⁶ m³ (×4 per
  class) [recalled from memory]; at speed V, G_z(f) = G_d(f/V)/V; variance over
  [n₁, n₂] is ∫ G_d dn = G_d(n₀) n₀² (1/n₁ − 1/n₂); velocity PSD (2πf)² G_z(f) =
  4π² G_d(n₀) n₀² V, white. PSD estimated by Welch's method (scipy.signal.welch) —
  P. D. Welch, *IEEE Trans. Audio Electroacoust.* 15 (1967) 70–73; checked in the
  mid band to 10 % (Welch leaks on the steep low end: common practice).
- Rates: each signal's analytic derivative against a central difference of its value
  on a fine grid (error O(δ²), common practice).
- Shapes: the (1 − cos) bump, sine, linear and logarithmic sweeps (phase the integral
  of the instantaneous frequency, common practice) and piecewise-linear tables,
  written out here from their definitions.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.signal import welch

import lumped
from lumped import excitation
from lumped.excitation import ROAD_BAND, RoadSignal, signal_for
from lumped.simulate import simulate

#: ISO 8608 class values G_d(n₀), m³ — geometric means of the classes [recalled from memory].
ISO_CLASS_PSD = {"A": 16e-6, "B": 64e-6, "C": 256e-6, "D": 1024e-6, "E": 4096e-6}
N0 = 0.1  # ISO 8608 reference spatial frequency, cycles/m


def signal_of(item):
    """The engine's signal for one input item, through a throwaway system."""
    system = lumped.System(
        name="signal",
        bodies={"b": lumped.Body("b", 1.0)},
        supports={"g": lumped.Support("g")},
        springs={"k": lumped.Spring("k", ("g", "b"), 1.0)},
        inputs={item.id: item},
    )
    return signal_for(system, item.id)


def central_difference(f, t, delta):
    return (f(t + delta) - f(t - delta)) / (2 * delta)


def assert_rates_are_derivatives(signal, t, rate_tolerance, rate2_tolerance, delta=1e-7):
    """A signal's rate and second rate against central differences (step ``delta``,
    s) of its value and rate, within absolute tolerances."""
    np.testing.assert_allclose(signal.rate(t), central_difference(signal.value, t, delta), rtol=0, atol=rate_tolerance)
    np.testing.assert_allclose(signal.rate2(t), central_difference(signal.rate, t, delta), rtol=0, atol=rate2_tolerance)


# --------------------------------------------------------------------------- ISO 8608 road


@pytest.fixture(scope="module")
def road_record():
    """600 s of a class C road at 20 m/s, sampled at 400 Hz after the fade-in."""
    speed, rate = 20.0, 400.0
    road = RoadSignal("C", speed, 7)
    t = 1.0 + np.arange(0.0, 600.0, 1.0 / rate)
    return road, speed, rate, t, road.value(t)


@pytest.mark.parametrize("band", [(1, 2), (2, 4), (4, 8), (8, 16), (16, 32), (32, 64)])
def test_road_displacement_psd_matches_iso8608(road_record, band):
    road, speed, rate, t, z = road_record
    f, psd = welch(z, fs=rate, nperseg=2**14)
    inside = (f >= band[0]) & (f < band[1])
    # G_z(f) = G_d(n₀)(n/n₀)^−2 / V with n = f/V (ISO 8608 [recalled from memory]).
    theory = ISO_CLASS_PSD["C"] * (f[inside] / speed / N0) ** -2 / speed
    assert np.mean(psd[inside] / theory) == pytest.approx(1.0, abs=0.10)


def test_road_velocity_psd_is_white_at_the_iso_level(road_record):
    road, speed, rate, t, _ = road_record
    f, psd = welch(road.rate(t), fs=rate, nperseg=2**14)
    level = 4 * math.pi**2 * ISO_CLASS_PSD["C"] * N0**2 * speed  # (2πf)² G_z(f)
    for lo, hi in [(1, 4), (4, 16), (16, 64)]:
        inside = (f >= lo) & (f < hi)
        assert np.mean(psd[inside]) / level == pytest.approx(1.0, abs=0.10)


def test_road_variance_over_the_band():
    speed = 15.0
    road = RoadSignal("B", speed, 3)
    n1, n2 = ROAD_BAND
    expected = ISO_CLASS_PSD["B"] * N0**2 * (1 / n1 - 1 / n2)  # ∫_{n1}^{n2} G_d(n) dn
    # A long record: 10 km of road, every 5 cm, after the fade-in.
    x = 10.0 + np.arange(0.0, 10_000.0, 0.05)
    assert np.var(road.value(x / speed)) == pytest.approx(expected, rel=0.05)
    # The engine's own temporal PSD is the same ISO form inside the band, 0 outside.
    f = np.array([0.5, 3.0, 40.0])
    np.testing.assert_allclose(
        road.temporal_psd(f), ISO_CLASS_PSD["B"] * (f / speed / N0) ** -2 / speed, rtol=1e-12
    )
    assert road.temporal_psd(np.array([0.01 * n1 * speed, 2 * n2 * speed])).tolist() == [0.0, 0.0]


def test_road_classes_step_by_a_factor_four_in_psd():
    # Same seed, same phases: class D's profile is twice class C's (PSD × 4).
    t = np.linspace(0.0, 30.0, 3001)
    np.testing.assert_allclose(
        RoadSignal("D", 10.0, 5).value(t), 2 * RoadSignal("C", 10.0, 5).value(t), rtol=1e-12, atol=0
    )


def test_road_is_a_profile_in_distance():
    # The same road at twice the speed is passed in half the time.
    t = np.linspace(0.0, 20.0, 2001)
    np.testing.assert_array_equal(
        RoadSignal("C", 24.0, 1).value(t), RoadSignal("C", 12.0, 1).value(2 * t)
    )


def test_road_is_reproducible_from_its_seed(monkeypatch):
    t = np.linspace(0.0, 60.0, 6001)
    first = RoadSignal("C", 20.0, 11).value(t)
    # Regenerate from scratch (no cached profile) and get the very same signal.
    monkeypatch.setattr(excitation, "_PROFILE_CACHE", {})
    again = RoadSignal("C", 20.0, 11).value(t)
    np.testing.assert_array_equal(first, again)
    other = RoadSignal("C", 20.0, 12).value(t)
    assert np.corrcoef(first, other)[0, 1] < 0.3
    assert np.max(np.abs(first - other)) > 0.1 * np.max(np.abs(first))


def test_road_starts_at_rest():
    road = RoadSignal("D", 20.0, 2)
    assert road.value(0.0) == 0.0 and road.rate(0.0) == 0.0
    assert road.jumps() == []


def test_road_rates_are_the_derivatives_of_its_value():
    speed = 20.0
    road = RoadSignal("C", speed, 4)
    t = np.linspace(0.02, 3.0, 20_001)  # through the fade-in and past it
    delta = 1e-6
    # Between grid points the profile is a cubic (Hermite) whose second derivative
    # jumps at the points: difference only where ±δ stays inside one interval.
    cell = (t * speed / excitation.ROAD_SPACING) % 1.0
    margin = 2 * delta * speed / excitation.ROAD_SPACING
    t = t[(cell > margin) & (cell < 1 - margin)]
    rate = road.rate(t)
    scale = np.sqrt(np.mean(rate**2))
    assert np.max(np.abs(rate - central_difference(road.value, t, delta))) < 2e-6 * scale
    rate2 = road.rate2(t)
    scale2 = np.sqrt(np.mean(rate2**2))
    assert np.max(np.abs(rate2 - central_difference(road.rate, t, delta))) < 1e-6 * scale2


# --------------------------------------------------------------------------- bump, harmonic, sweep, table


def test_bump_shape_and_rates():
    height, length, speed, start = 0.075, 0.9, 5.0, 0.2
    bump = signal_of(lumped.BumpInput("bump", height, length, speed, start))
    end = start + length / speed
    t = np.linspace(0.0, 0.6, 6001)
    # (H/2)(1 − cos(2πV(t − t₀)/L)) under the wheel, zero before and after.
    on = (t >= start) & (t <= end)
    expected = np.where(
        on, 0.5 * height * (1 - np.cos(2 * math.pi * speed * (t - start) / length)), 0.0
    )
    np.testing.assert_allclose(bump.value(t), expected, rtol=0, atol=1e-15)
    assert bump.value(start + 0.5 * length / speed) == pytest.approx(height, rel=1e-15)
    assert bump.jumps() == []
    delta = 1e-7
    away = np.abs(t - start) > 2 * delta
    away &= np.abs(t - end) > 2 * delta
    w = 2 * math.pi * speed / length
    assert_rates_are_derivatives(bump, t[away], 1e-6 * height * w, 1e-6 * height * w * w, delta)


@pytest.mark.parametrize("phase", [0.0, 0.7])
def test_harmonic_shape_rates_and_start_jump(phase):
    amplitude, frequency = 0.003, 4.5
    harmonic = signal_of(lumped.HarmonicInput("sine", amplitude, frequency, phase))
    t = np.linspace(0.0, 1.0, 4001)
    np.testing.assert_allclose(
        harmonic.value(t),
        amplitude * np.sin(2 * math.pi * frequency * t + phase),
        rtol=0,
        atol=1e-17,
    )
    assert harmonic.value(-0.1) == 0.0  # zero before its time zero
    w = 2 * math.pi * frequency
    assert_rates_are_derivatives(harmonic, t[1:-1], 1e-7 * amplitude * w, 1e-7 * amplitude * w * w)
    # A sine that does not start at zero starts with a jump of A sin φ at t = 0.
    if phase:
        ((time, size),) = harmonic.jumps()
        assert time == 0.0 and size == pytest.approx(amplitude * math.sin(phase), rel=1e-15)
    else:
        assert harmonic.jumps() == []


@pytest.mark.parametrize("spacing", ["linear", "logarithmic"])
def test_sweep_shape_and_rates(spacing):
    amplitude, f0, f1, duration = 2.0, 1.0, 20.0, 4.0
    sweep = signal_of(lumped.SweepInput("sweep", amplitude, f0, f1, duration, spacing))
    t = np.linspace(0.0, duration, 40_001)[:-1]  # [0, T): at T the sweep may jump to 0
    # Phase = 2π ∫ f(t) dt with f(t) = f0 + (f1 − f0)t/T (linear) or f0 (f1/f0)^{t/T}
    # (logarithmic): common practice.
    if spacing == "linear":
        frequency = f0 + (f1 - f0) * t / duration
        phase = 2 * math.pi * (f0 * t + 0.5 * (f1 - f0) * t**2 / duration)
    else:
        frequency = f0 * (f1 / f0) ** (t / duration)
        phase = 2 * math.pi * f0 * duration / math.log(f1 / f0) * ((f1 / f0) ** (t / duration) - 1)
    np.testing.assert_allclose(
        sweep.value(t), amplitude * np.sin(phase), rtol=0, atol=1e-12 * amplitude
    )
    # rate = A cos(phase) · 2πf(t).
    np.testing.assert_allclose(
        sweep.rate(t),
        amplitude * np.cos(phase) * 2 * math.pi * frequency,
        rtol=0,
        atol=1e-10 * amplitude * f1,
    )
    w1 = 2 * math.pi * f1
    assert_rates_are_derivatives(sweep, t[1:-1], 1e-6 * amplitude * w1, 1e-6 * amplitude * w1**2)
    # Zero after the sweep; if it ends off zero, that is a jump back to zero at T.
    assert sweep.value(duration + 0.01) == 0.0
    if spacing == "linear":
        end = amplitude * math.sin(2 * math.pi * (f0 * duration + 0.5 * (f1 - f0) * duration))
    else:
        end = amplitude * math.sin(2 * math.pi * f0 * duration / math.log(f1 / f0) * (f1 / f0 - 1))
    if abs(end) > 1e-9:
        ((time, size),) = sweep.jumps()
        assert time == duration and size == pytest.approx(-end, rel=1e-9)
    else:  # the linear sweep here ends after a whole number of cycles (42)
        assert sweep.jumps() == []


def test_sweep_is_right_continuous_at_its_end():
    """Signals are right-continuous (lumped.excitation's convention, as the step and the
    table are): after the jump at T the sweep is 0, so value(T) = 0. In a run, the
    support sample at T shows the position after the jump, and the energy balance
    closes through it (REFERENCES.md "Energy")."""
    amplitude, f0, f1, duration = 0.01, 1.0, 5.0, 0.9  # ends at A sin(2π·2.7) ≈ −0.95 A
    sweep = signal_of(lumped.SweepInput("sweep", amplitude, f0, f1, duration))
    ((time, size),) = sweep.jumps()
    assert time == duration and abs(size) > 0.5 * amplitude
    assert sweep.value(duration) == 0.0
    mass, stiffness, c = 2.0, 800.0, 16.0
    system = lumped.System(
        name="swept",
        bodies={"b": lumped.Body("b", mass)},
        supports={"g": lumped.Support("g", motion="sweep")},
        springs={"k": lumped.Spring("k", ("g", "b"), stiffness)},
        dampers={"c": lumped.Damper("c", ("g", "b"), coefficient=c)},
        inputs={"sweep": lumped.SweepInput("sweep", amplitude, f0, f1, duration)},
    )
    result = simulate(system, "rk4", 1e-3, 1.2)
    at_end = int(np.argmin(np.abs(result.time - duration)))
    assert result.support_displacement[at_end, 0] == 0.0
    # The jump's energy is ½k·size² at most; the balance closes far better than that.
    assert np.max(np.abs(result.balance_error)) < 0.05 * 0.5 * stiffness * size**2


def test_table_shape_rates_and_start_jump():
    times = (0.0, 0.5, 1.0, 2.0)
    values = (0.01, 0.03, -0.02, -0.02)
    table = signal_of(lumped.TableInput("table", "rows.csv", times, values, unit="mm", scale=1e-3))
    t = np.linspace(0.0, 3.0, 3001)
    si = np.array(values) * 1e-3  # the file's millimetres in metres
    # Piecewise linear through the rows, held at the last value after them.
    np.testing.assert_allclose(table.value(t), np.interp(t, times, si), rtol=0, atol=1e-18)
    slopes = np.diff(si) / np.diff(times)
    for lo, hi, slope in zip(times[:-1], times[1:], slopes, strict=True):
        inside = (t > lo) & (t < hi)
        np.testing.assert_allclose(table.rate(t[inside]), slope, rtol=1e-12)
    assert np.all(table.rate(t[t > 2.0]) == 0.0)
    assert np.all(table.rate2(t) == 0.0)
    # Zero before t = 0, so a table that starts off zero jumps there.
    assert table.value(-0.1) == 0.0
    assert table.jumps() == [(0.0, pytest.approx(si[0]))]


def test_step_shape_and_jump():
    step = signal_of(lumped.StepInput("kerb", 0.05, 0.3))
    t = np.array([0.0, 0.2999, 0.3, 0.5])
    np.testing.assert_array_equal(step.value(t), [0.0, 0.0, 0.05, 0.05])  # right-continuous
    np.testing.assert_array_equal(step.rate(t), 0.0)
    assert step.jumps() == [(0.3, 0.05)]


# --------------------------------------------------------------------------- in a run


def test_support_delay_shifts_the_motion():
    """Two identical bodies on identical supports following the same bump, one τ late:
    the late one's support and body motion are the early one's, τ later."""
    delay, dt = 0.05, 1e-4
    bodies = {b: lumped.Body(b, 40.0) for b in ("front", "rear")}
    supports = {"road_f": lumped.Support("road_f", motion="bump"),
                "road_r": lumped.Support("road_r", motion="bump", delay=delay)}  # fmt: skip
    springs = {
        "kf": lumped.Spring("kf", ("road_f", "front"), 2e4),
        "kr": lumped.Spring("kr", ("road_r", "rear"), 2e4),
    }
    dampers = {"cf": lumped.Damper("cf", ("road_f", "front"), coefficient=300.0),
               "cr": lumped.Damper("cr", ("road_r", "rear"), coefficient=300.0)}  # fmt: skip
    system = lumped.System(
        name="two wheels", bodies=bodies, supports=supports, springs=springs, dampers=dampers,
        inputs={"bump": lumped.BumpInput("bump", 0.04, 0.6, 6.0, 0.02)},
    )  # fmt: skip
    result = simulate(system, "rk4", dt, 0.6)
    shift = round(delay / dt)
    front, rear = result.body_ids.index("front"), result.body_ids.index("rear")
    sf, sr = result.support_ids.index("road_f"), result.support_ids.index("road_r")
    np.testing.assert_allclose(
        result.support_displacement[shift:, sr],
        result.support_displacement[:-shift, sf],
        rtol=0,
        atol=1e-15,
    )
    np.testing.assert_allclose(
        result.displacement[shift:, rear], result.displacement[:-shift, front], rtol=0, atol=1e-12
    )
    assert np.all(result.displacement[: shift + round(0.02 / dt), rear] == 0.0)
    # And the delay is the wheelbase over the speed, nothing else: the front's motion is
    # the bump's own definition.
    t = result.time
    start, end = 0.02, 0.02 + 0.6 / 6.0
    on = (t >= start) & (t <= end)
    bump = np.where(on, 0.02 * (1 - np.cos(2 * math.pi * 6.0 * (t - start) / 0.6)), 0.0)
    np.testing.assert_allclose(result.support_displacement[:, sf], bump, rtol=0, atol=1e-15)


def test_force_scale_multiplies_the_input():
    system = lumped.System(
        name="scaled",
        bodies={"b": lumped.Body("b", 2.0)},
        supports={"g": lumped.Support("g")},
        springs={"k": lumped.Spring("k", ("g", "b"), 800.0)},
        inputs={"unit_sine": lumped.HarmonicInput("unit_sine", 1.0, 3.0)},
        forces={"f": lumped.Force("f", "b", "unit_sine", scale=40.0)},
    )
    result = simulate(system, "rk4", 1e-3, 0.5)
    np.testing.assert_allclose(
        result.force_input[:, 0], 40.0 * np.sin(2 * math.pi * 3.0 * result.time), rtol=0, atol=1e-12
    )


def test_road_input_from_a_system_file_drives_the_support():
    text = """
format = "lumped/1"
name = "road wheel"
[bodies.wheel]
mass = "40 kg"
[supports.road]
motion = "rough"
[springs.tyre]
between = ["road", "wheel"]
stiffness = "200 kN/m"
[inputs.rough]
kind = "road"
class = "C"
speed = "72 km/h"
seed = 9
"""
    system = lumped.loads(text)
    result = simulate(system, "rk4", 1e-3, 2.0)
    reference = RoadSignal("C", 20.0, 9)  # 72 km/h = 20 m/s
    np.testing.assert_allclose(
        result.support_displacement[:, 0], reference.value(result.time), rtol=0, atol=1e-15
    )
    np.testing.assert_allclose(
        result.support_velocity[:, 0], reference.rate(result.time), rtol=0, atol=1e-12
    )


def test_signal_spans_are_where_the_signals_act():
    # A bump of length L passed at speed V from t₀ is under the wheel for L/V (its
    # definition, (H/2)(1 − cos(2πV(t − t₀)/L)) — common practice); a sweep acts for
    # its duration; a step from its time on; a harmonic always. Beside each span the
    # signal is zero, value and rates.
    from lumped.excitation import BumpSignal, HarmonicSignal, StepSignal, SweepSignal

    cases = [
        (BumpSignal(0.05, 0.9, 5.0, 0.2), (0.2, 0.2 + 0.9 / 5.0)),
        (SweepSignal(0.01, 1.0, 12.0, 0.4, False), (0.0, 0.4)),
        (StepSignal(0.02, 0.31), (0.31, math.inf)),
        (HarmonicSignal(0.01, 3.0, 0.4), (0.0, math.inf)),
    ]
    for signal, (on, off) in cases:
        assert signal.span() == pytest.approx((on, off), rel=1e-15)
        outside = np.array([on - 1e-3, on - 0.5] + ([off + 1e-3, off + 2.0] if math.isfinite(off) else []))
        outside = outside[outside >= 0] if on > 0 else outside[outside > off]
        for part in signal.motion(outside):
            np.testing.assert_array_equal(part, 0.0)


def test_an_input_brief_for_the_step_is_named_with_the_step_it_needs():
    from lumped.excitation import BRIEF_STEPS, brief_inputs

    system = lumped.load(lumped.demo_path("quarter_car"))  # invented demo: a 0.9 m bump at 5 m/s
    assert brief_inputs(system, 0.2e-3) == []
    (note,) = brief_inputs(system, 0.05)
    assert "'speed_bump'" in note and "0.18 s" in note and f"{0.18 / BRIEF_STEPS:.3g} s" in note
