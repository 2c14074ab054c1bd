"""Frequency response against closed forms, python-control and independent solves.

- Base-excitation transmissibility T(r) = √((1+(2ζr)²)/((1−r²)²+(2ζr)²)), T(√2) = 1
  for every ζ — S. S. Rao, *Mechanical Vibrations*, 6th ed., 2017, ch. 3 [recalled
  from memory].
- Harmonic force steady state X k/F₀ = 1/√((1−r²)²+(2ζr)²), tan φ = 2ζr/(1−r²); peak
  at r = √(1−2ζ²) of height 1/(2ζ√(1−ζ²)) — Rao, ch. 3 [recalled from memory].
- Half-power points r²₁,₂ = 1 − 2ζ² ∓ 2ζ√(1−ζ²): where |H|² = |H|²_peak/2 (derived here
  from the steady-state form above).
- Tuned absorber fixed points and their height √(1+2/μ) at the optimum tuning
  f = 1/(1+μ) — J. P. Den Hartog, *Mechanical Vibrations*, 4th ed., 1956 (Dover 1985),
  ch. 3 [recalled from memory].
- Multi-body response: python-control ``ss`` + ``frequency_response`` of a state-space
  model built here from the element values; a banded solve (``scipy.linalg.solve_banded``)
  of a chain's dynamic stiffness built here.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import control
import numpy as np
import pytest
import scipy.linalg as la

import lumped
from lumped import (
    Body,
    Damper,
    Force,
    HarmonicInput,
    Inerter,
    Spring,
    Support,
    System,
    uniform_chain,
)
from lumped.frequency import (
    FrequencyError,
    frequency_grid,
    frequency_response,
    transfer,
    transmissibility,
)

DEMOS = Path(__file__).resolve().parents[1] / "demo_systems"
MASS, STIFFNESS = 100.0, 1.0e5  # kg, N/m
OMEGA_N = math.sqrt(STIFFNESS / MASS)
F_N = OMEGA_N / (2 * math.pi)


def single_body(zeta: float) -> System:
    """One body on a spring and a damper to a moving support, with a force on it."""
    c = 2 * zeta * math.sqrt(STIFFNESS * MASS)
    return System.from_items("single body", [
        Body("mass", MASS),
        Support("base"),
        Spring("spring", ("base", "mass"), STIFFNESS),
        Damper("damper", ("base", "mass"), coefficient=c),
        HarmonicInput("drive", 1.0, 1.0),
        Force("push", "mass", "drive"),
    ])  # fmt: skip


def closed_transmissibility(r, zeta):
    # Rao, 6th ed., ch. 3 [recalled from memory]
    return np.sqrt((1 + (2 * zeta * r) ** 2) / ((1 - r**2) ** 2 + (2 * zeta * r) ** 2))


def closed_force_response(r, zeta):
    # X k / F0 and phase lag φ — Rao, 6th ed., ch. 3 [recalled from memory]
    amplitude = 1 / np.sqrt((1 - r**2) ** 2 + (2 * zeta * r) ** 2)
    lag = np.arctan2(2 * zeta * r, 1 - r**2)
    return amplitude, lag


# --------------------------------------------------------------------------- single body


@pytest.mark.parametrize("zeta", [0.02, 0.1, 0.3, 0.7, 1.5])
def test_base_transmissibility_matches_closed_form(zeta):
    r = np.concatenate([np.geomspace(0.05, 20, 200), [math.sqrt(2)]])
    result = transmissibility(single_body(zeta), "base", "mass", frequencies=r * F_N)
    expected = closed_transmissibility(result.frequency / F_N, zeta)
    np.testing.assert_allclose(result.magnitude, expected, rtol=1e-10)
    assert result.unit == "m/m"


@pytest.mark.parametrize("zeta", [0.01, 0.05, 0.2, 0.5, 0.9, 2.0])
def test_transmissibility_is_one_at_root_two_for_every_damping(zeta):
    # T(√2) = 1 whatever ζ — Rao, 6th ed., ch. 3 [recalled from memory]
    result = transmissibility(single_body(zeta), "base", "mass", frequencies=[math.sqrt(2) * F_N])
    assert result.magnitude[0] == pytest.approx(1.0, abs=1e-12)
    # and the isolation region r > √2 has T < 1 (same source)
    above = transmissibility(single_body(zeta), "base", "mass", frequencies=[1.5 * F_N, 3 * F_N])
    assert np.all(above.magnitude < 1.0)


@pytest.mark.parametrize("zeta", [0.01, 0.05, 0.15, 0.4])
def test_force_steady_state_amplitude_and_phase(zeta):
    r = np.geomspace(0.1, 10, 120)
    result = transfer(single_body(zeta), "push", "mass", frequencies=r * F_N)
    amplitude, lag = closed_force_response(result.frequency / F_N, zeta)
    np.testing.assert_allclose(result.magnitude * STIFFNESS, amplitude, rtol=1e-10)
    # x = X sin(ωt − φ): the response lags the force by φ ∈ [0, π]
    np.testing.assert_allclose(result.phase_deg, -np.degrees(lag), atol=1e-8)
    assert result.unit == "m/N"


@pytest.mark.parametrize("zeta", [0.01, 0.05, 0.2, 0.35])
def test_force_peak_and_half_power_points(zeta):
    system = single_body(zeta)
    result = transfer(system, "push", "mass")
    assert len(result.peaks) == 1
    peak = result.peaks[0]
    # Peak at r = √(1−2ζ²), height 1/(2ζ√(1−ζ²)) — Rao, 6th ed., ch. 3 [recalled from memory]
    r_peak = math.sqrt(1 - 2 * zeta**2)
    height = 1 / (2 * zeta * math.sqrt(1 - zeta**2))
    assert peak.frequency_hz / F_N == pytest.approx(r_peak, rel=1e-6)
    assert peak.magnitude * STIFFNESS == pytest.approx(height, rel=1e-9)
    # Half-power points: r² = 1 − 2ζ² ∓ 2ζ√(1−ζ²) (derived from the steady-state form)
    r2 = np.array([1 - 2 * zeta**2 - 2 * zeta * math.sqrt(1 - zeta**2),
                   1 - 2 * zeta**2 + 2 * zeta * math.sqrt(1 - zeta**2)])  # fmt: skip
    at = transfer(system, "push", "mass", frequencies=np.sqrt(r2) * F_N, peaks=False)
    np.testing.assert_allclose(at.magnitude * STIFFNESS, height / math.sqrt(2), rtol=1e-9)


def test_half_power_bandwidth_tends_to_twice_the_damping_ratio():
    # Bandwidth (r₂ − r₁) ≈ 2ζ to about 1 % for ζ ≤ 0.05 (REFERENCES.md, verified form);
    # here read off the library's response on a fine grid around the peak.
    zeta = 0.02
    system = single_body(zeta)
    f = np.linspace(0.9 * F_N, 1.1 * F_N, 200001)
    h = transfer(system, "push", "mass", frequencies=f, peaks=False).magnitude
    above = f[h >= h.max() / math.sqrt(2)]
    bandwidth = (above[-1] - above[0]) / F_N
    assert bandwidth == pytest.approx(2 * zeta, rel=0.01)


# --------------------------------------------------------------------------- tuned absorber


def test_den_hartog_fixed_points_of_the_footbridge_demo():
    system = lumped.load(DEMOS / "footbridge_tuned_absorber.toml")
    m_p, m_a = system.bodies["span"].mass, system.bodies["absorber"].mass
    k_p, k_a = system.springs["span_stiffness"].stiffness, system.springs["absorber_spring"].stiffness
    mu = m_a / m_p
    assert mu == pytest.approx(0.05, rel=1e-12)
    w_p = math.sqrt(k_p / m_p)
    f = math.sqrt(k_a / m_a) / w_p
    assert f == pytest.approx(1 / (1 + mu), rel=1e-9)  # the demo is tuned at the optimum
    # Fixed points: where the c = 0 and c = ∞ responses meet, H₀ = −H∞, which gives
    # (2+μ) g⁴ − 2 g² (1 + (1+μ) f²) + 2 f² = 0 with g = ω/ω_p — Den Hartog, 4th ed.,
    # ch. 3 [recalled from memory]; expanded by hand from
    # H₀ = (f²−g²)/((1−g²)(f²−g²) − μf²g²) and H∞ = 1/(1 − (1+μ)g²).
    a, b, c = 2 + mu, -2 * (1 + (1 + mu) * f * f), 2 * f * f
    g2 = np.sort(np.roots([a, b, c]).real)
    g = np.sqrt(g2)
    fixed_hz = g * w_p / (2 * math.pi)
    result = transfer(system, "walkers", "span", frequencies=fixed_hz, peaks=False)
    heights = result.magnitude * k_p
    target = math.sqrt(1 + 2 / mu)  # Den Hartog, 4th ed., ch. 3 [recalled from memory]
    assert abs(heights[0] - heights[1]) / heights.mean() < 0.02
    np.testing.assert_allclose(heights, target, rtol=0.02)
    # The swept response at the optimum peaks slightly above the fixed-point height.
    swept = transfer(system, "walkers", "span")
    assert len(swept.peaks) == 2
    peak_heights = np.array([p.magnitude for p in swept.peaks]) * k_p
    assert np.all(peak_heights >= target * (1 - 1e-9))
    assert np.all(peak_heights <= 1.03 * target)
    assert swept.peaks[0].frequency_hz < fixed_hz[0] * 1.05 and swept.peaks[1].frequency_hz > fixed_hz[1] * 0.95


# --------------------------------------------------------------------------- multi-body


def three_bodies() -> System:
    """Three bodies, an inerter between two of them and one to the support, and
    non-proportional damping."""
    return System.from_items("three bodies", [
        Body("a", 40.0), Body("b", 25.0), Body("c", 10.0),
        Support("ground"),
        Spring("k1", ("ground", "a"), 8e4), Damper("c1", ("ground", "a"), coefficient=300.0),
        Inerter("b0", ("ground", "a"), 5.0),
        Spring("k2", ("a", "b"), 3e4), Damper("c2", ("a", "b"), coefficient=120.0),
        Inerter("b12", ("a", "b"), 8.0),
        Spring("k3", ("b", "c"), 1.2e4), Damper("c3", ("ground", "c"), coefficient=40.0),
        HarmonicInput("drive", 1.0, 1.0), Force("shake", "c", "drive"),
    ])  # fmt: skip


def _three_body_matrices():
    """M, C, K by hand (bodies a, b, c) and the support load per unit support motion
    (k + iωc + (iω)²b of each element to the ground, on its body)."""
    M = np.diag([40.0, 25.0, 10.0]) + 8.0 * np.array([[1, -1, 0], [-1, 1, 0], [0, 0, 0]]) + np.diag([5.0, 0, 0])
    K = np.array([[8e4 + 3e4, -3e4, 0], [-3e4, 3e4 + 1.2e4, -1.2e4], [0, -1.2e4, 1.2e4]])
    C = np.array([[300.0 + 120, -120, 0], [-120, 120, 0], [0, 0, 40.0]])

    def support_load(w):
        s = 1j * w
        return np.stack([8e4 + 300 * s + 5 * s * s, 0 * s, 40 * s], axis=-1)

    return M, C, K, support_load


def test_multi_body_response_matches_python_control():
    M, C, K, support_load = _three_body_matrices()
    n = 3
    Minv = np.linalg.inv(M)
    A = np.block([[np.zeros((n, n)), np.eye(n)], [-Minv @ K, -Minv @ C]])
    B = np.vstack([np.zeros((n, n)), Minv])  # a unit force on each body
    Cout = np.hstack([np.eye(n), np.zeros((n, n))])
    plant = control.ss(A, B, Cout, np.zeros((n, n)))
    f = np.geomspace(0.2, 60, 150)
    w = 2 * np.pi * f
    G = control.frequency_response(plant, w).frdata  # (outputs, inputs, F)
    result = frequency_response(three_bodies(), frequencies=f)
    assert result.solver == "dense batched"
    # Force on body c (python-control input 2)
    for i, body in enumerate("abc"):
        np.testing.assert_allclose(result.response("shake", body), G[i, 2, :], rtol=1e-9, atol=1e-15)
    # Support motion: the support load enters as forces on the bodies.
    load = support_load(w)  # (F, bodies)
    expected = np.einsum("ijf,fj->fi", G, load)
    for i, body in enumerate("abc"):
        np.testing.assert_allclose(result.response("ground", body), expected[:, i], rtol=1e-9)
    # Element forces, tension positive, δ = x_upper − x_lower (+1 m of support motion):
    s = 1j * w
    xa, xb = expected[:, 0], expected[:, 1]
    np.testing.assert_allclose(result.response("ground", "k1", "force"), 8e4 * (xa - 1), rtol=1e-9)
    np.testing.assert_allclose(result.response("ground", "b12", "force"), 8.0 * s * s * (xb - xa), rtol=1e-9)
    np.testing.assert_allclose(result.response("ground", "b0", "deflection"), xa - 1, rtol=1e-9)
    # Acceleration = (iω)² displacement
    np.testing.assert_allclose(result.response("shake", "c", "acceleration"), s * s * G[2, 2, :], rtol=1e-9)


def test_sparse_path_on_a_long_chain_matches_a_banded_solve():
    n, m, k, c = 2100, 0.5, 4e7, 40.0
    chain = uniform_chain(n, m, k, damping=c)
    f = np.array([0.7, 3.3, 41.0, 250.0])
    result = frequency_response(chain, frequencies=f, inputs=["ground"], outputs=[f"m{n}", "k1", "m1"])
    assert result.solver == "sparse banded"
    # Z(ω) = K + iωC − ω²M of a fixed–free chain, built here: tridiagonal.
    for i, wi in enumerate(2 * np.pi * f):
        z = k + 1j * wi * c
        diagonal = np.full(n, 2 * z - wi * wi * m, dtype=complex)
        diagonal[-1] = z - wi * wi * m
        band = np.zeros((3, n), dtype=complex)
        band[0, 1:] = -z
        band[1] = diagonal
        band[2, :-1] = -z
        rhs = np.zeros(n, dtype=complex)
        rhs[0] = z  # the first spring and damper to the moving support
        x = la.solve_banded((1, 1), band, rhs)
        assert result.displacement[i, 0, 0] == pytest.approx(x[-1], rel=1e-7)
        assert result.displacement[i, 1, 0] == pytest.approx(x[0], rel=1e-7)
        assert result.force[i, 0, 0] == pytest.approx(k * (x[0] - 1), rel=1e-7)


def test_sparse_and_dense_solvers_agree_with_an_independent_solve():
    M, C, K, support_load = _three_body_matrices()
    f = np.geomspace(0.5, 40, 30)
    w = 2 * np.pi * f
    for dense in (True, False):
        result = frequency_response(three_bodies(), frequencies=f, dense=dense)
        for i, wi in enumerate(w):
            x = np.linalg.solve(K + 1j * wi * C - wi * wi * M, support_load(wi))
            np.testing.assert_allclose(result.displacement[i, :, result.input_ids.index("ground")], x, rtol=1e-9)


# --------------------------------------------------------------------------- grid and peaks


def two_bodies_light_damping() -> tuple[System, np.ndarray, np.ndarray, np.ndarray]:
    m1, m2, k1, k2, beta = 50.0, 5.0, 2e5, 1e4, 2e-5  # C = βK (Rayleigh, stiffness part)
    system = System.from_items("two bodies", [
        Body("low", m1), Body("high", m2), Support("ground"),
        Spring("k1", ("ground", "low"), k1), Damper("c1", ("ground", "low"), coefficient=beta * k1),
        Spring("k2", ("low", "high"), k2), Damper("c2", ("low", "high"), coefficient=beta * k2),
    ])  # fmt: skip
    M = np.diag([m1, m2])
    K = np.array([[k1 + k2, -k2], [-k2, k2]])
    return system, M, beta * K, K


def test_default_grid_spans_the_modes_and_finds_every_peak():
    system, M, C, K = two_bodies_light_damping()
    w2 = la.eigh(K, M, eigvals_only=True)
    fn = np.sqrt(w2) / (2 * math.pi)
    zeta = 2e-5 * np.sqrt(w2) / 2  # Rayleigh: ζ = βω/2 — Chopra, 4th ed. [recalled from memory]
    grid = frequency_grid(lumped.assemble(system), points_per_decade=5)
    assert grid[0] == pytest.approx(fn[0] / 10, rel=1e-9)
    assert grid[-1] == pytest.approx(fn[-1] * 10, rel=1e-9)
    for f, z in zip(fn, zeta, strict=True):
        assert np.sum(np.abs(grid - f) < 2 * z * f) >= 5  # several points inside the bandwidth
    # Even on a coarse base grid, both peaks are found and refined to the true maxima,
    # found here by brute force on a dense grid of this test's own solves.
    result = transfer(system, "high", "high", points_per_decade=5)
    assert len(result.peaks) == 2
    for peak, f, z in zip(result.peaks, fn, zeta, strict=True):
        fine = np.linspace(f * (1 - 8 * z), f * (1 + 8 * z), 40001)
        mags = []
        for x in fine:
            w = 2 * math.pi * x
            mags.append(abs(np.linalg.solve(K + 1j * w * C - w * w * M, [0.0, 1.0])[1]))
        best = int(np.argmax(mags))
        assert peak.magnitude == pytest.approx(mags[best], rel=1e-6)
        assert peak.frequency_hz == pytest.approx(fine[best], rel=1e-6)


def test_user_range_and_density():
    system = single_body(0.1)
    result = transfer(system, "base", "mass", f_min=1.0, f_max=100.0, points_per_decade=50)
    assert result.frequency[0] == pytest.approx(1.0) and result.frequency[-1] == pytest.approx(100.0)
    assert len(result.frequency) >= 101
    assert np.all(np.diff(result.frequency) > 0)


# --------------------------------------------------------------------------- JSON and errors


def test_to_json_is_per_unit_input_with_peaks():
    result = transfer(single_body(0.05), "push", "mass")
    data = json.loads(json.dumps(result.to_json()))
    for key in ("frequency_hz", "magnitude", "phase_deg"):
        assert len(data[key]) == len(result.frequency)
    assert data["unit"] == "m/N"
    assert data["peaks"] and set(data["peaks"][0]) >= {"frequency_hz", "magnitude"}
    # Static limit of X/F is 1/k (m per N), Rao ch. 3 [recalled from memory]
    low = transfer(single_body(0.05), "push", "mass", frequencies=[1e-4])
    assert low.magnitude[0] == pytest.approx(1 / STIFFNESS, rel=1e-8)
    assert transfer(single_body(0.05), "base", "spring", "force").unit == "N/m"
    assert transfer(single_body(0.05), "base", "mass", "acceleration").unit == "(m/s^2)/m"


@pytest.mark.parametrize(
    "call, words",
    [
        (lambda s: transfer(s, "nowhere", "mass"), ["'nowhere'", "input"]),
        (lambda s: transfer(s, "base", "ghost"), ["'ghost'", "output"]),
        (lambda s: transfer(s, "base", "mass", "force"), ["'mass'", "body", "'force'"]),
        (lambda s: transfer(s, "base", "spring", "torque"), ["'spring'", "'torque'"]),
        (lambda s: transfer(s, "base", "mass", f_min=10.0, f_max=1.0), ["empty", "10 Hz", "1 Hz"]),
        (lambda s: transfer(s, "base", "mass", f_min=-1.0, f_max=1.0), ["positive"]),
        (lambda s: transfer(s, "base", "mass", frequencies=[]), ["empty"]),
        (lambda s: transfer(s, "base", "mass", frequencies=[1.0, -2.0]), ["negative"]),
        (lambda s: transmissibility(s, "push", "mass"), ["'push'", "support"]),
        (lambda s: frequency_response(s, points_per_decade=0), ["points per decade"]),
    ],
)
def test_bad_input_messages(call, words):
    with pytest.raises(FrequencyError) as info:
        call(single_body(0.1))
    message = str(info.value)
    assert isinstance(info.value, lumped.LumpedError) and isinstance(info.value, ValueError)
    assert "\n" not in message
    for word in words:
        assert word in message
