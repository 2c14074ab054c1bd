"""Design figures against closed forms, numerical integrals and a long time run.

- Harmonic force steady state X k/F₀ = 1/√((1−r²)²+(2ζr)²) — S. S. Rao, *Mechanical
  Vibrations*, 6th ed., 2017, ch. 3 [recalled from memory]; a sinusoid's RMS A/√2,
  crest factor √2, VDV = A|W|(3T/8)^¼ (REFERENCES.md, verified form); the share of a
  period a sinusoid spends above a level: arcsine of the level (common practice).
- ISO 2631-1:1997 Annex A weighting, rebuilt here from its stages.
- ISO 8608 (2016) road: G_d(n) = G_d(n₀)(n/n₀)⁻², n₀ = 0.1 cycle/m, class C
  G_d(n₀) = 256·10⁻⁶ m³ (geometric mean of the class) [recalled from memory]; at speed V,
  G_z(f) = G_d(f/V)/V. Spectral RMS = √(∫|H|²G df), the integral done here by
  ``scipy.integrate.quad`` of the single body's closed-form response.
- Static sag of a chain of bodies on springs: each spring carries the weight above it
  (statics, common practice).
- The spectral figures of a linear shuttle corner against a 600 s time run on its
  synthesised road (the road's PSD is the ISO 8608 one, so both must agree).
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import quad

import lumped
from lumped import Body, Damper, Force, HarmonicInput, RoadInput, Spring, Support, System
from lumped.iso2631 import WeightingError
from lumped.metrics import FigureError, figure_value, road_figures, run_figures, static_figures
from lumped.simulate import simulate

DEMOS = Path(__file__).resolve().parents[1] / "demo_systems"
G = 9.81
Q1 = 1 / math.sqrt(2)


def wk(f: float) -> complex:
    """ISO 2631-1:1997 Annex A, Wk (parameters per REFERENCES.md), built here."""
    s = 2j * math.pi * f
    w1, w2, w3, w4, w5, w6 = (2 * math.pi * x for x in (0.4, 100.0, 12.5, 12.5, 2.37, 3.35))
    high = s * s / (s * s + w1 * s / Q1 + w1 * w1)
    low = w2 * w2 / (s * s + w2 * s / Q1 + w2 * w2)
    transition = (1 + s / w3) / (1 + s / (0.63 * w4) + (s / w4) ** 2)
    step = (s * s + w5 * s / 0.91 + w5 * w5) / (s * s + w6 * s / 0.91 + w6 * w6)
    return high * low * transition * step


# --------------------------------------------------------------------------- from a run


def harmonic_body(force_amplitude: float, frequency: float, gap: float | None):
    m, k, zeta = 50.0, 5e4, 0.2
    c = 2 * zeta * math.sqrt(k * m)
    items = [
        Body("mass", m), Support("floor"),
        Spring("mount", ("floor", "mass"), k, gap=gap, gap_stiffness=0.0 if gap is not None else None),
        Damper("loss", ("floor", "mass"), coefficient=c),
        HarmonicInput("shaker", force_amplitude, frequency), Force("shake", "mass", "shaker"),
    ]  # fmt: skip
    r = 2 * math.pi * frequency / math.sqrt(k / m)
    # Rao, 6th ed., ch. 3 [recalled from memory]
    amplitude = force_amplitude / k / math.sqrt((1 - r * r) ** 2 + (2 * zeta * r) ** 2)
    return System.from_items("harmonic body", items), m, k, amplitude


def test_run_figures_of_a_harmonic_steady_state():
    frequency, force = 3.0, 600.0
    _, m, k, X = harmonic_body(force, frequency, None)
    gap = 0.5 * X
    system, *_ = harmonic_body(force, frequency, gap)
    result = simulate(system, "rk4", dt=2.5e-4, duration=30.0, output_rate=1000.0)
    start = 10.0  # the free transient decays as e^{−ζωt}: e^{−63} by then
    rows = run_figures(system, result, start=start, travel=["mount"], loads=["mount"])
    T = result.time[-1] - start
    A = (2 * math.pi * frequency) ** 2 * X  # acceleration amplitude
    W = abs(wk(frequency))
    assert figure_value(rows, "acceleration_rms", "mass") == pytest.approx(A / math.sqrt(2), rel=1e-3)
    assert figure_value(rows, "acceleration_peak", "mass") == pytest.approx(A, rel=1e-3)
    assert figure_value(rows, "weighted_acceleration_rms", "mass") == pytest.approx(W * A / math.sqrt(2), rel=5e-4)
    assert figure_value(rows, "vibration_dose_value", "mass") == pytest.approx(A * W * (3 * T / 8) ** 0.25, rel=5e-4)
    assert figure_value(rows, "crest_factor", "mass") == pytest.approx(math.sqrt(2), rel=1e-2)
    assert figure_value(rows, "travel_peak", "mount") == pytest.approx(X, rel=1e-3)
    assert figure_value(rows, "travel_rms", "mount") == pytest.approx(X / math.sqrt(2), rel=1e-3)
    # |X sin θ| > X/2 for 2/3 of the time: 1 − (2/π) arcsin(1/2) (common practice)
    assert figure_value(rows, "end_stop_share", "mount") == pytest.approx(1 - 2 / math.pi * math.asin(0.5), rel=1e-2)
    assert figure_value(rows, "end_stop_time", "mount") == pytest.approx(T * 2 / 3, rel=1e-2)
    # The mount carries m g in compression; its dynamic force is k x.
    assert figure_value(rows, "dynamic_load_rms", "mount") == pytest.approx(k * X / math.sqrt(2), rel=1e-3)
    assert figure_value(rows, "dynamic_load_ratio", "mount") == pytest.approx(k * X / math.sqrt(2) / (m * G), rel=1e-3)
    # The two-way mount's force is reversed (no longer compressive) while k x ≥ m g:
    # ½ − arcsin(m g/(k X))/π of the time; a two-way spring does not "lift off".
    rho = m * G / (k * X)
    assert rho < 1
    assert figure_value(rows, "force_reversal_share", "mount") == pytest.approx(0.5 - math.asin(rho) / math.pi, rel=1e-2)
    assert not [row for row in rows if row.key.startswith("lift_off")]
    assert figure_value(rows, "static_sag", "mass") == pytest.approx(-m * G / k, rel=1e-12)
    for row in rows:
        assert row.rule and row.unit and row.source in ("static", "run")


def test_static_sag_of_the_shuttle_corner():
    system = lumped.load(DEMOS / "shuttle_corner_with_seat.toml")
    m_w, m_b, m_s = (system.bodies[b].mass for b in ("wheel", "body", "seat"))
    k_t, k_c, k_s = (system.springs[s].stiffness for s in ("tyre", "corner_spring", "seat_spring"))
    rows = static_figures(system)
    wheel = -(m_w + m_b + m_s) * G / k_t
    body = wheel - (m_b + m_s) * G / k_c
    seat = body - m_s * G / k_s
    for item, expected in (("wheel", wheel), ("body", body), ("seat", seat)):
        assert figure_value(rows, "static_sag", item) == pytest.approx(expected, rel=1e-12)


# --------------------------------------------------------------------------- spectral, single body


M1, K1, C1, SPEED = 300.0, 2e4, 1500.0, 15.0
CLASS_C = 256e-6  # m³, ISO 8608 class C, G_d(n₀) [recalled from memory]


def road_psd(f: float, speed: float = SPEED) -> float:
    """G_z(f) = G_d(f/V)/V, G_d(n) = G_d(n₀)(n/0.1)⁻² — ISO 8608 [recalled from memory]."""
    n = f / speed
    return CLASS_C * (n / 0.1) ** -2 / speed


def integral(function, lo, hi, points):
    """∫ function df over [lo, hi] by quad, split at ``points`` for accuracy."""
    edges = [lo] + sorted(p for p in points if lo < p < hi) + [hi]
    return sum(quad(function, a, b, limit=400, epsabs=0, epsrel=1e-10)[0] for a, b in zip(edges, edges[1:], strict=False))


def single_body_on_road(with_road: bool = True) -> System:
    items = [
        Body("body", M1), Support("road", motion="track" if with_road else None),
        Spring("spring", ("road", "body"), K1), Damper("damper", ("road", "body"), coefficient=C1),
    ]  # fmt: skip
    if with_road:
        items.append(RoadInput("track", "C", SPEED, seed=4))
    return System.from_items("body on a road", items)


def test_spectral_rms_of_a_single_body_matches_the_integral():
    rows = road_figures(single_body_on_road(), travel=["spring"], loads=["spring"])
    band = (0.01 * SPEED, 10.0 * SPEED)  # the synthesised band, lumped.excitation.ROAD_BAND
    fn = math.sqrt(K1 / M1) / (2 * math.pi)

    def h(f):  # X/U of the body — Rao, 6th ed., ch. 3 [recalled from memory]
        w = 2 * math.pi * f
        return (K1 + 1j * C1 * w) / (K1 - M1 * w * w + 1j * C1 * w)

    def accel2(f):
        return abs((2 * math.pi * f) ** 2 * h(f)) ** 2 * road_psd(f)

    acc = math.sqrt(integral(accel2, *band, [fn, 2 * fn]))
    weighted = math.sqrt(integral(lambda f: accel2(f) * abs(wk(f)) ** 2, *band, [fn, 2 * fn, 5.0, 12.5]))
    travel = math.sqrt(integral(lambda f: abs(h(f) - 1) ** 2 * road_psd(f), *band, [fn]))
    assert figure_value(rows, "acceleration_rms", "body") == pytest.approx(acc, rel=5e-4)
    assert figure_value(rows, "weighted_acceleration_rms", "body") == pytest.approx(weighted, rel=5e-4)
    assert figure_value(rows, "travel_rms", "spring") == pytest.approx(travel, rel=5e-4)
    # the spring's dynamic force is k δ; its static load m g
    assert figure_value(rows, "dynamic_load_rms", "spring") == pytest.approx(K1 * travel, rel=5e-4)
    assert figure_value(rows, "dynamic_load_ratio", "spring") == pytest.approx(K1 * travel / (M1 * G), rel=5e-4)
    # Same figures from a road class and speed given for a support that follows nothing.
    again = road_figures(single_body_on_road(False), road_class="C", speed=SPEED, supports=["road"])
    assert figure_value(again, "acceleration_rms", "body") == pytest.approx(acc, rel=5e-4)


def test_spectral_rms_with_a_delayed_second_support():
    # One body on two supports meeting the same track, the second τ later: the body sees
    # (k₁ + iωc₁ + (k₂ + iωc₂) e^{−iωτ}) U / (k₁ + k₂ − mω² + iω(c₁ + c₂)).
    m, k1, k2, c1, c2, tau = 400.0, 2e4, 3e4, 900.0, 1200.0, 0.18
    system = System.from_items("two supports", [
        Body("body", m), Support("front", motion="track"), Support("rear", motion="track", delay=tau),
        Spring("kf", ("front", "body"), k1), Damper("cf", ("front", "body"), coefficient=c1),
        Spring("kr", ("rear", "body"), k2), Damper("cr", ("rear", "body"), coefficient=c2),
        RoadInput("track", "C", SPEED, seed=1),
    ])  # fmt: skip
    rows = road_figures(system)

    def accel2(f):
        w = 2 * math.pi * f
        num = k1 + 1j * w * c1 + (k2 + 1j * w * c2) * np.exp(-1j * w * tau)
        x = num / (k1 + k2 - m * w * w + 1j * w * (c1 + c2))
        return abs(w * w * x) ** 2 * road_psd(f)

    fn = math.sqrt((k1 + k2) / m) / (2 * math.pi)
    notches = [j / tau for j in range(1, 40)]
    expected = math.sqrt(integral(accel2, 0.01 * SPEED, 10 * SPEED, [fn] + notches))
    assert figure_value(rows, "acceleration_rms", "body") == pytest.approx(expected, rel=5e-4)


# --------------------------------------------------------------------------- spectral vs time run


def linear_shuttle() -> System:
    """The shuttle demo with its nonlinear elements replaced by their linearisation at
    static equilibrium (both-way tyre, no end stop, the mean of the damper's two
    coefficients), so that the run and the spectral figures model the same system."""
    demo = lumped.load(DEMOS / "shuttle_corner_with_seat.toml")
    tyre = dataclasses.replace(demo.springs["tyre"], acts="both")
    corner = dataclasses.replace(demo.springs["corner_spring"], gap=None, gap_stiffness=None)
    d = demo.dampers["corner_damper"]
    damper = Damper(d.id, d.between, coefficient=0.5 * (d.rebound + d.compression))
    items = [*demo.bodies.values(), *demo.supports.values(), tyre, corner, demo.springs["seat_spring"],
             damper, demo.dampers["seat_damper"], *demo.inputs.values()]  # fmt: skip
    return System.from_items("linear shuttle corner", items)


def test_spectral_and_time_figures_agree_on_a_600_s_road():
    system = linear_shuttle()
    result = simulate(system, "rk4", dt=1e-3, duration=600.0, output_rate=500.0)
    assert result.status == "completed"
    run = run_figures(system, result, start=10.0, travel=["corner_spring", "seat_spring"], loads=["tyre"])
    road = road_figures(system, travel=["corner_spring", "seat_spring"], loads=["tyre"])
    compared = [("acceleration_rms", b) for b in ("wheel", "body", "seat")]
    compared += [("weighted_acceleration_rms", b) for b in ("wheel", "body", "seat")]
    compared += [("travel_rms", "corner_spring"), ("travel_rms", "seat_spring")]
    compared += [("dynamic_load_rms", "tyre"), ("dynamic_load_ratio", "tyre")]
    for key, item in compared:
        spectral, timed = figure_value(road, key, item), figure_value(run, key, item)
        assert timed == pytest.approx(spectral, rel=0.05), (key, item, spectral, timed)


# --------------------------------------------------------------------------- errors


@pytest.fixture(scope="module")
def short_run():
    system, *_ = harmonic_body(100.0, 3.0, None)
    return system, simulate(system, "rk4", dt=5e-4, duration=2.0, output_rate=500.0)


def test_run_figure_errors(short_run):
    system, result = short_run
    with pytest.raises(FigureError, match="body 'ghost' does not exist"):
        run_figures(system, result, bodies=["ghost"])
    with pytest.raises(FigureError, match="element 'spring9' does not exist"):
        run_figures(system, result, travel=["spring9"])
    with pytest.raises(FigureError, match="start 5 s is at or after the end of the run"):
        run_figures(system, result, start=5.0)
    with pytest.raises(FigureError, match=r"no acceleration channel \(mass.acceleration\)"):
        run_figures(system, dataclasses.replace(result, acceleration=None))
    with pytest.raises(FigureError, match="diverged"):
        run_figures(system, dataclasses.replace(result, status="diverged", message="grew"))
    for error in (FigureError, WeightingError):
        assert issubclass(error, lumped.LumpedError)


def test_samples_too_coarse_for_the_weighting_leave_only_the_weighted_figures_out(short_run):
    # The Wk weighting reaches 80 Hz, so it needs samples at 160 Hz or more (ISO
    # 2631-1:1997, Annex A band limits [recalled from memory]; the sampling theorem).
    # From 100 Hz samples the weighted figures are left out, with a note saying why;
    # the others equal those of the same run sampled finely enough, where samples meet.
    system, fine = short_run
    slow = simulate(system, "rk4", dt=5e-4, duration=2.0, output_rate=100.0)
    rows = run_figures(system, slow)
    assert rows.notes and "100 Hz" in rows.notes[0] and "160 Hz" in rows.notes[0]
    weighted = {"weighted_acceleration_rms", "crest_factor", "vibration_dose_value"}
    full = run_figures(system, fine)
    assert full.notes == [] and weighted <= {r.key for r in full}
    assert [(r.key, r.item) for r in rows] == [(r.key, r.item) for r in full if r.key not in weighted]
    static = [r for r in full if r.source == "static"]
    assert static and static == [r for r in rows if r.source == "static"]


def test_road_figure_errors():
    fixed = single_body_on_road(False)
    with pytest.raises(FigureError, match="no road input; give a road class, a speed and the supports"):
        road_figures(fixed)
    with pytest.raises(FigureError, match="'lane' is not a road input"):
        road_figures(single_body_on_road(), "lane")
    with pytest.raises(FigureError, match="ISO 8608 class A to H, got 'Z'"):
        road_figures(single_body_on_road(), road_class="Z")
    with pytest.raises(FigureError, match="speed must be positive"):
        road_figures(single_body_on_road(), speed=-3.0)
    with pytest.raises(FigureError, match="support 'kerb' does not exist"):
        road_figures(fixed, road_class="B", speed=10.0, supports=["kerb"])
