"""Modal analysis against closed forms, scipy and python-control.

- Two equal masses between three equal springs: ω = √(k/m), √(3k/m) — S. S. Rao,
  *Mechanical Vibrations*, 6th ed., 2017, ch. 5 [recalled from memory].
- Quarter vehicle: ω⁴ − ω²(k_s/m_s + (k_s + k_t)/m_u) + k_s k_t/(m_s m_u) = 0 —
  T. D. Gillespie, *Fundamentals of Vehicle Dynamics*, SAE 1992, ch. 5 [recalled from
  memory].
- Uniform chain of n masses m and springs k — G. Strang, *Computational Science and
  Engineering*, 2007, §1.5 [recalled from memory]; W.-C. Yueh, *Applied Mathematics
  E-Notes* 5 (2005) 66–74 [recalled from memory]: fixed–fixed
  ω_j = 2√(k/m) sin(jπ/(2(n+1))), fixed–free ω_j = 2√(k/m) sin((2j−1)π/(2(2n+1))).
- Rayleigh damping C = aM + bK: ζ_j = a/(2ω_j) + bω_j/2 — A. K. Chopra, *Dynamics of
  Structures*, 4th ed., 2012 [recalled from memory]. Non-proportional damping: the
  eigenvalues of the first-order state matrix, ζ = −Re λ/|λ| (python-control ``poles``
  and ``damp``).
- Effective modal masses for support excitation: Γ_j = φ_jᵀ M r with r the quasi-static
  influence vector; Σ_j Γ_j² = rᵀ M r, the total mass when every body follows the one
  support rigidly — Chopra, ch. 13 [recalled from memory].
- Gershgorin's theorem bounds the largest eigenvalue of M^{-1/2} K M^{-1/2} by its
  largest absolute row sum (common practice).

Every check value is computed here from those forms, or from matrices built here by
hand from the element values, never from the library's matrices.
"""

from __future__ import annotations

import json
import math
import shutil
import subprocess
import sys
from pathlib import Path

import control
import numpy as np
import pytest
import scipy.linalg as la

import lumped
from lumped import Body, Damper, Spring, Support, System, assemble, uniform_chain
from lumped.modal import damped_eigenvalues, modal_analysis, stiffest_mode, undamped_modes

DEMOS = Path(__file__).resolve().parents[1] / "demo_systems"
TWO_PI = 2 * math.pi


def _lumped_command() -> list[str]:
    exe = Path(sys.executable).with_name("lumped")
    return [str(exe)] if exe.exists() else [shutil.which("lumped") or "lumped"]


# ---------------------------------------------------------------- hand-built matrices


def _matrices_by_hand(bodies, elements):
    """M, C, K from masses and (a, b, stiffness, damping) elements between named nodes;
    nodes not in ``bodies`` are fixed supports."""
    ids = list(bodies)
    index = {b: i for i, b in enumerate(ids)}
    n = len(ids)
    M = np.diag([bodies[b] for b in ids]).astype(float)
    K = np.zeros((n, n))
    C = np.zeros((n, n))
    for a, b, k, c in elements:
        for X, value in ((K, k), (C, c)):
            for p in (a, b):
                if p in index:
                    X[index[p], index[p]] += value
            if a in index and b in index:
                X[index[a], index[b]] -= value
                X[index[b], index[a]] -= value
    return ids, M, C, K


def _state_matrix(M, C, K):
    n = len(M)
    Minv = np.linalg.inv(M)
    return np.block([[np.zeros((n, n)), np.eye(n)], [-Minv @ K, -Minv @ C]])


def _control_poles(M, C, K):
    """Poles (Im ≥ 0 representatives and real poles) from python-control."""
    n = len(M)
    sys_ = control.ss(
        _state_matrix(M, C, K), np.zeros((2 * n, 1)), np.eye(2 * n), np.zeros((2 * n, 1))
    )
    poles = np.asarray(sys_.poles())
    return poles[poles.imag >= -1e-9 * np.abs(poles)]


def _ratios(values):
    values = np.asarray(values, dtype=complex)
    return -values.real / np.abs(values)


# The linearisation of an asymmetric damper at zero velocity is the mean of its rebound
# and compression coefficients (common practice; lumped.model.Damper.linear_coefficient),
# and a one-sided tyre or an end stop is linear about static equilibrium.
QUARTER_CAR = dict(
    bodies={"wheel": 42.0, "body": 380.0},
    elements=[("road", "wheel", 230e3, 0.0), ("wheel", "body", 24e3, 0.5 * (2.4e3 + 1.3e3))],
)
SHUTTLE = dict(
    bodies={"wheel": 34.0, "body": 310.0, "seat": 85.0},
    elements=[
        ("road", "wheel", 180e3, 0.0),
        ("wheel", "body", 21e3, 0.5 * (2.1e3 + 1.2e3)),
        ("body", "seat", 7e3, 450.0),
    ],
)


# ---------------------------------------------------------------- 2- and 3-body systems


def test_two_equal_masses_three_springs():
    m, k = 3.0, 1200.0
    system = System(
        name="two masses",
        bodies={"a": Body("a", m), "b": Body("b", m)},
        supports={"left": Support("left"), "right": Support("right")},
        springs={
            "k1": Spring("k1", ("left", "a"), k),
            "k2": Spring("k2", ("a", "b"), k),
            "k3": Spring("k3", ("b", "right"), k),
        },
    )
    result = modal_analysis(assemble(system))
    np.testing.assert_allclose(result.omega, [math.sqrt(k / m), math.sqrt(3 * k / m)], rtol=1e-12)
    # in-phase and anti-phase shapes, mass-normalised: (1, ±1)/√(2m)
    phi = result.shapes
    np.testing.assert_allclose(np.abs(phi), 1 / math.sqrt(2 * m), rtol=1e-10)
    assert phi[0, 0] * phi[1, 0] > 0 and phi[0, 1] * phi[1, 1] < 0
    assert [mode.damping_ratio for mode in result.modes] == [0.0, 0.0]


def test_quarter_car_demo_matches_quartic_and_eigh():
    system = lumped.load(DEMOS / "quarter_car.toml")
    result = modal_analysis(assemble(system))
    ms, mu, ks, kt = 380.0, 42.0, 24e3, 230e3
    # ω⁴ − ω²(k_s/m_s + (k_s + k_t)/m_u) + k_s k_t/(m_s m_u) = 0, a quadratic in ω²
    w2 = np.sort(np.roots([1.0, -(ks / ms + (ks + kt) / mu), ks * kt / (ms * mu)]).real)
    np.testing.assert_allclose(result.omega, np.sqrt(w2), rtol=1e-12)
    ids, M, C, K = _matrices_by_hand(**QUARTER_CAR)
    w2_eigh, shapes = la.eigh(K, M)
    np.testing.assert_allclose(result.omega, np.sqrt(w2_eigh), rtol=1e-12)
    # shapes up to sign, in the library's body order
    order = [ids.index(b) for b in result.body_ids]
    for j in range(2):
        a, b = result.shapes[:, j], shapes[order, j]
        np.testing.assert_allclose(a * np.sign(a @ b), b, atol=1e-12)
    # Gillespie's approximations are near the exact values (not an oracle: 5 %)
    body = math.sqrt(ks * kt / (ks + kt) / ms)
    hop = math.sqrt((ks + kt) / mu)
    assert result.omega[0] == pytest.approx(body, rel=0.05)
    assert result.omega[1] == pytest.approx(hop, rel=0.05)


def test_three_body_shuttle_undamped_modes_match_eigh():
    system = lumped.load(DEMOS / "shuttle_corner_with_seat.toml")
    result = modal_analysis(assemble(system))
    ids, M, C, K = _matrices_by_hand(**SHUTTLE)
    w2, shapes = la.eigh(K, M)
    np.testing.assert_allclose(result.omega, np.sqrt(w2), rtol=1e-12)
    order = [ids.index(b) for b in result.body_ids]
    phi = result.shapes
    # mass-normalised: φᵀ M φ = I with M built here
    Mo = M[np.ix_(order, order)]
    np.testing.assert_allclose(phi.T @ Mo @ phi, np.eye(3), atol=1e-12)
    for j in range(3):
        a, b = phi[:, j], shapes[order, j]
        np.testing.assert_allclose(a * np.sign(a @ b), b, atol=1e-12)


@pytest.mark.parametrize("n", [3, 7, 60])
@pytest.mark.parametrize("fixed_top", [False, True])
def test_uniform_chain_closed_forms(n, fixed_top):
    m, k = 1.7, 9.0e4
    result = modal_analysis(assemble(uniform_chain(n, m, k, fixed_top=fixed_top)))
    j = np.arange(1, n + 1)
    if fixed_top:
        expected = 2 * math.sqrt(k / m) * np.sin(j * math.pi / (2 * (n + 1)))
    else:
        expected = 2 * math.sqrt(k / m) * np.sin((2 * j - 1) * math.pi / (2 * (2 * n + 1)))
    np.testing.assert_allclose(result.omega, expected, rtol=1e-10)
    np.testing.assert_allclose(
        [mode.natural_frequency_hz for mode in result.modes], expected / TWO_PI, rtol=1e-10
    )
    np.testing.assert_allclose(result.shapes.T @ (m * result.shapes), np.eye(n), atol=1e-10)


def test_mass_normalised_shapes_with_unequal_masses():
    masses = {"a": 2.0, "b": 7.5, "c": 0.8, "d": 3.3}
    elements = [
        ("g", "a", 5e4, 0.0),
        ("a", "b", 2e4, 0.0),
        ("b", "c", 8e3, 0.0),
        ("c", "d", 1.1e4, 0.0),
        ("a", "d", 3e3, 0.0),
    ]
    system = System(
        name="unequal",
        bodies={b: Body(b, mass) for b, mass in masses.items()},
        supports={"g": Support("g")},
        springs={f"k{i}": Spring(f"k{i}", (a, b), k) for i, (a, b, k, _) in enumerate(elements)},
    )
    result = modal_analysis(assemble(system))
    ids, M, _, K = _matrices_by_hand(masses, elements)
    order = [ids.index(b) for b in result.body_ids]
    Mo, Ko = M[np.ix_(order, order)], K[np.ix_(order, order)]
    phi = result.shapes
    np.testing.assert_allclose(phi.T @ Mo @ phi, np.eye(4), atol=1e-12)
    np.testing.assert_allclose(phi.T @ Ko @ phi, np.diag(result.omega**2), rtol=1e-10, atol=1e-6)
    # modal mass with each shape scaled to unit largest displacement
    unit = phi / np.max(np.abs(phi), axis=0)
    np.testing.assert_allclose(
        result.modal_mass, np.einsum("ij,ij->j", unit, Mo @ unit), rtol=1e-12
    )
    # Mode.shape carries the same mass-normalised shape, largest entry positive
    for mode, column in zip(result.modes, phi.T, strict=True):
        shape = np.array([mode.shape[b] for b in result.body_ids])
        np.testing.assert_allclose(np.abs(shape), np.abs(column), atol=1e-12)
        assert shape[np.argmax(np.abs(shape))] > 0


def test_undamped_modes_of_a_large_chain_lowest_few():
    # above the dense limit the lowest modes come from shift-invert Lanczos
    n, m, k = 3000, 0.5, 4e7
    omega, shapes = undamped_modes(assemble(uniform_chain(n, m, k)), count=5)
    j = np.arange(1, 6)
    expected = 2 * math.sqrt(k / m) * np.sin((2 * j - 1) * math.pi / (2 * (2 * n + 1)))
    np.testing.assert_allclose(omega, expected, rtol=1e-8)
    np.testing.assert_allclose(shapes.T @ (m * shapes), np.eye(5), atol=1e-8)


# ---------------------------------------------------------------- damped eigenvalues


def test_non_proportional_shuttle_against_python_control():
    matrices = assemble(lumped.load(DEMOS / "shuttle_corner_with_seat.toml"))
    result = modal_analysis(matrices)
    assert not result.classical_damping
    _, M, C, K = _matrices_by_hand(**SHUTTLE)
    poles = _control_poles(M, C, K)
    poles = poles[np.argsort(np.abs(poles))]
    lam = np.array([mode.eigenvalue for mode in result.modes])
    np.testing.assert_allclose(lam, poles, rtol=1e-10)
    np.testing.assert_allclose(damped_eigenvalues(matrices), poles, rtol=1e-10)
    wn, zeta, _ = control.damp(
        control.ss(_state_matrix(M, C, K), np.zeros((6, 1)), np.eye(6), np.zeros((6, 1))),
        doprint=False,
    )
    keep = np.argsort(wn)[::2]  # one of each conjugate pair
    np.testing.assert_allclose(
        [m.natural_frequency_hz for m in result.modes], wn[keep] / TWO_PI, rtol=1e-10
    )
    np.testing.assert_allclose([m.damping_ratio for m in result.modes], zeta[keep], rtol=1e-9)
    np.testing.assert_allclose(
        [m.damped_frequency_hz for m in result.modes], poles.imag / TWO_PI, rtol=1e-10
    )
    for mode in result.modes:
        assert not mode.overdamped and not mode.rigid


def _rayleigh_chain(n, m, k, a, b):
    """A fixed–free chain with C = aM + bK: a damper b·k beside every spring and a
    damper a·m from the ground to every body."""
    ids = [f"m{i}" for i in range(1, n + 1)]
    nodes = ["ground", *ids]
    springs = {f"k{j}": Spring(f"k{j}", (nodes[j - 1], nodes[j]), k) for j in range(1, n + 1)}
    dampers = {
        f"c{j}": Damper(f"c{j}", (nodes[j - 1], nodes[j]), coefficient=b * k)
        for j in range(1, n + 1)
    }
    dampers |= {
        f"g{j}": Damper(f"g{j}", ("ground", ids[j - 1]), coefficient=a * m) for j in range(1, n + 1)
    }
    return System(
        name="rayleigh chain",
        bodies={i: Body(i, m) for i in ids},
        supports={"ground": Support("ground")},
        springs=springs,
        dampers=dampers,
    )


def _chain_by_hand(n, m, k, a, b):
    """M, C, K of the Rayleigh chain, tridiagonal, built here."""
    K = k * (2 * np.eye(n) - np.eye(n, k=1) - np.eye(n, k=-1))
    K[-1, -1] = k
    M = m * np.eye(n)
    return M, a * M + b * K, K


def test_rayleigh_damped_chain_damping_ratios():
    n, m, k, a, b = 6, 2.0, 8.0e3, 1.5, 2.0e-4
    result = modal_analysis(assemble(_rayleigh_chain(n, m, k, a, b)))
    assert result.classical_damping
    j = np.arange(1, n + 1)
    omega = 2 * math.sqrt(k / m) * np.sin((2 * j - 1) * math.pi / (2 * (2 * n + 1)))
    zeta = a / (2 * omega) + b * omega / 2
    assert np.all(zeta < 1)
    np.testing.assert_allclose([mode.damping_ratio for mode in result.modes], zeta, rtol=1e-10)
    np.testing.assert_allclose(
        [mode.natural_frequency_hz for mode in result.modes], omega / TWO_PI, rtol=1e-10
    )
    np.testing.assert_allclose(
        [mode.damped_frequency_hz for mode in result.modes],
        omega * np.sqrt(1 - zeta**2) / TWO_PI,
        rtol=1e-10,
    )
    poles = _control_poles(*_chain_by_hand(n, m, k, a, b))
    np.testing.assert_allclose(
        np.sort_complex(np.array([mode.eigenvalue for mode in result.modes])),
        np.sort_complex(poles),
        rtol=1e-9,
    )


def test_overdamped_modes_are_reported_as_real_entries():
    n, m, k, a, b = 4, 2.0, 8.0e3, 60.0, 1.0e-4
    result = modal_analysis(assemble(_rayleigh_chain(n, m, k, a, b)))
    j = np.arange(1, n + 1)
    omega = 2 * math.sqrt(k / m) * np.sin((2 * j - 1) * math.pi / (2 * (2 * n + 1)))
    zeta = a / (2 * omega) + b * omega / 2
    over = zeta > 1
    assert over.sum() == 1  # the lowest mode only
    # an overdamped mode has the two real eigenvalues ω(−ζ ± √(ζ² − 1))
    w, z = omega[over][0], zeta[over][0]
    expected_real = w * np.array([-z + math.sqrt(z * z - 1), -z - math.sqrt(z * z - 1)])
    real = [mode for mode in result.modes if mode.overdamped]
    assert len(real) == 2
    np.testing.assert_allclose(
        sorted(mode.eigenvalue.real for mode in real), np.sort(expected_real), rtol=1e-10
    )
    for mode in real:
        assert mode.eigenvalue.imag == 0.0
        assert mode.damped_frequency_hz == 0.0
        assert mode.damping_ratio == pytest.approx(1.0, abs=1e-12)  # −Re λ/|λ| of a real λ < 0
        assert mode.natural_frequency_hz == pytest.approx(abs(mode.eigenvalue) / TWO_PI, rel=1e-12)
        assert mode.undamped_frequency_hz == pytest.approx(w / TWO_PI, rel=1e-10)
    assert len(result.modes) == n + 1
    poles = _control_poles(*_chain_by_hand(n, m, k, a, b))
    assert np.sum(np.abs(poles.imag) <= 1e-9 * np.abs(poles)) == 2
    np.testing.assert_allclose(
        np.sort_complex(np.array([mode.eigenvalue for mode in result.modes])),
        np.sort_complex(np.where(np.abs(poles.imag) <= 1e-9 * np.abs(poles), poles.real, poles)),
        rtol=1e-9,
    )


FLOATING_PAIR = """
format = "lumped/1"
name = "free pair"
floating = true

[bodies.a]
mass = 2.0

[bodies.b]
mass = 3.0

[springs.k]
between = ["a", "b"]
stiffness = 600.0

[dampers.c]
between = ["a", "b"]
coefficient = {c}
"""

FLOATING_TRIO = """
format = "lumped/1"
name = "free trio"
floating = true

[bodies.a]
mass = 2.0

[bodies.b]
mass = 3.0

[bodies.c]
mass = 1.5

[springs.k1]
between = ["a", "b"]
stiffness = 600.0

[springs.k2]
between = ["b", "c"]
stiffness = 900.0

[dampers.c1]
between = ["a", "b"]
coefficient = {c}
"""


@pytest.mark.parametrize("c", [0.0, 3.0])
def test_floating_pair_has_a_rigid_body_mode(c):
    result = modal_analysis(assemble(lumped.loads(FLOATING_PAIR.format(c=c))))
    rigid = [mode for mode in result.modes if mode.rigid]
    elastic = [mode for mode in result.modes if not mode.rigid]
    assert len(rigid) == 1 and len(elastic) == 1
    assert rigid[0].natural_frequency_hz == 0.0 and rigid[0].damping_ratio is None
    # rigid-body shape: every body moves alike, mass-normalised 1/√(m_a + m_b)
    np.testing.assert_allclose(list(rigid[0].shape.values()), 1 / math.sqrt(5.0), rtol=1e-10)
    # two free masses on one spring: ω² = k(m_a + m_b)/(m_a m_b) (Rao ch. 5 [recalled from
    # memory]); the damper in parallel gives ζ = c/(2√(k μ)) with μ the reduced mass
    omega = math.sqrt(600.0 * 5.0 / 6.0)
    assert elastic[0].natural_frequency_hz == pytest.approx(omega / TWO_PI, rel=1e-12)
    assert elastic[0].damping_ratio == pytest.approx(
        c / (2 * math.sqrt(600.0 * 6.0 / 5.0)), rel=1e-10, abs=1e-15
    )
    np.testing.assert_allclose(result.omega, [0.0, omega], atol=1e-9)
    assert result.effective_mass == {}


@pytest.mark.parametrize("c", [0.0, 3.0])
def test_regression_rigid_body_mode_listed_once(c):
    # an undamped rigid-body mode is the double eigenvalue 0 of the first-order system:
    # one mode, whether the damping is classical (c = 0) or not (c = 3)
    matrices = assemble(lumped.loads(FLOATING_TRIO.format(c=c)))
    result = modal_analysis(matrices)
    assert result.classical_damping == (c == 0.0)
    assert sum(mode.rigid for mode in result.modes) == 1
    assert len(result.modes) == 3
    _, M, C, K = _matrices_by_hand(
        {"a": 2.0, "b": 3.0, "c": 1.5}, [("a", "b", 600.0, c), ("b", "c", 900.0, 0.0)]
    )
    poles = _control_poles(M, C, K)
    elastic = np.sort(np.abs(poles[np.abs(poles) > 1e-6]))
    np.testing.assert_allclose(
        sorted(mode.natural_frequency_hz for mode in result.modes if not mode.rigid),
        elastic / TWO_PI,
        rtol=1e-9,
    )


def test_damped_rigid_body_mode_keeps_its_decay():
    # a body held by a damper alone: eigenvalues 0 and −c/m, a rigid-body mode and a
    # decaying real one
    system = lumped.loads(
        'format = "lumped/1"\nname = "dashpot"\nfloating = true\n[bodies.a]\nmass = 4.0\n'
        '[supports.g]\n[dampers.c]\nbetween = ["g", "a"]\ncoefficient = 10.0\n'
    )
    result = modal_analysis(assemble(system))
    values = sorted((mode.eigenvalue.real for mode in result.modes), reverse=True)
    np.testing.assert_allclose(values, [0.0, -10.0 / 4.0], atol=1e-12)
    assert [mode.rigid for mode in sorted(result.modes, key=lambda m: -m.eigenvalue.real)] == [
        True,
        False,
    ]


# ---------------------------------------------------------------- effective masses


@pytest.mark.parametrize("n", [1, 5, 40])
def test_effective_masses_sum_to_total_mass(n):
    m = 3.5
    result = modal_analysis(assemble(uniform_chain(n, m, 2e5, damping=30.0)))
    assert list(result.effective_mass) == ["ground"]
    assert result.effective_mass["ground"].sum() == pytest.approx(n * m, rel=1e-10)
    # each Γ_j = φ_jᵀ M 1 with φ from eigh on the matrices built here
    K = 2e5 * (2 * np.eye(n) - np.eye(n, k=1) - np.eye(n, k=-1))
    K[-1, -1] = 2e5
    _, phi = la.eigh(K, m * np.eye(n))
    np.testing.assert_allclose(
        result.effective_mass["ground"], (phi.T @ (m * np.ones(n))) ** 2, rtol=1e-9, atol=1e-9 * m
    )


@pytest.mark.parametrize(
    "demo, spec", [("quarter_car.toml", QUARTER_CAR), ("shuttle_corner_with_seat.toml", SHUTTLE)]
)
def test_demo_effective_masses(demo, spec):
    result = modal_analysis(assemble(lumped.load(DEMOS / demo)))
    ids, M, _, K = _matrices_by_hand(**spec)
    _, phi = la.eigh(K, M)
    total = sum(spec["bodies"].values())
    assert result.effective_mass["road"].sum() == pytest.approx(total, rel=1e-10)
    np.testing.assert_allclose(
        result.effective_mass["road"], (phi.T @ M @ np.ones(len(ids))) ** 2, rtol=1e-9
    )


# ---------------------------------------------------------------- lumped modes --json


@pytest.mark.parametrize(
    "demo, spec", [("quarter_car.toml", QUARTER_CAR), ("shuttle_corner_with_seat.toml", SHUTTLE)]
)
def test_modes_json(demo, spec):
    run = subprocess.run(
        [*_lumped_command(), "modes", str(DEMOS / demo), "--json"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert run.returncode == 0, run.stderr
    data = json.loads(run.stdout)
    modes = data["modes"]
    frequencies = [mode["natural_frequency_hz"] for mode in modes]
    assert frequencies == sorted(frequencies)
    for mode in modes:
        assert {
            "natural_frequency_hz",
            "damped_frequency_hz",
            "undamped_frequency_hz",
            "damping_ratio",
            "shape",
        } <= set(mode)
        assert set(mode["shape"]) == set(spec["bodies"])
        assert all(isinstance(v, float) for v in mode["shape"].values())
    _, M, C, K = _matrices_by_hand(**spec)
    poles = _control_poles(M, C, K)
    poles = poles[np.argsort(np.abs(poles))]
    np.testing.assert_allclose(frequencies, np.abs(poles) / TWO_PI, rtol=1e-10)
    np.testing.assert_allclose([mode["damping_ratio"] for mode in modes], _ratios(poles), rtol=1e-9)
    np.testing.assert_allclose(
        [mode["damped_frequency_hz"] for mode in modes], poles.imag / TWO_PI, rtol=1e-10
    )
    w2 = la.eigh(K, M, eigvals_only=True)
    np.testing.assert_allclose(
        sorted(mode["undamped_frequency_hz"] for mode in modes), np.sqrt(w2) / TWO_PI, rtol=1e-10
    )


# ---------------------------------------------------------------- stiffest mode


def _omega_max(n, m, k, fixed_top):
    if fixed_top:
        return 2 * math.sqrt(k / m) * math.sin(n * math.pi / (2 * (n + 1)))
    return 2 * math.sqrt(k / m) * math.sin((2 * n - 1) * math.pi / (2 * (2 * n + 1)))


@pytest.fixture(scope="module")
def chain_100k():
    return assemble(uniform_chain(100_000, 0.5, 4e7, fixed_top=True))


@pytest.mark.parametrize("fixed_top", [False, True])
def test_stiffest_mode_of_a_1000_body_chain(fixed_top):
    n, m, k = 1000, 0.5, 4e7
    top = stiffest_mode(assemble(uniform_chain(n, m, k, fixed_top=fixed_top)))
    exact = _omega_max(n, m, k, fixed_top)
    assert top.bound >= exact
    assert top.bound <= 2 * math.sqrt(k / m) * (1 + 1e-12)  # the chain's Gershgorin bound
    assert 0.99 * exact <= top.estimate <= exact * (1 + 1e-12)
    assert top.damping_ratio == 0.0


def test_stiffest_mode_of_a_100000_body_chain(chain_100k):
    n, m, k = 100_000, 0.5, 4e7
    top = stiffest_mode(chain_100k)
    exact = _omega_max(n, m, k, True)
    assert top.bound >= exact
    assert 0.99 * exact <= top.estimate <= exact * (1 + 1e-12)


def test_stiffest_mode_damping_ratio_of_a_stiffness_damped_chain():
    # C = (c/k) K: every mode has ζ_j = (c/k) ω_j / 2 (Rayleigh with a = 0)
    n, m, k, c = 1000, 0.5, 4e7, 40.0
    top = stiffest_mode(assemble(uniform_chain(n, m, k, damping=c)))
    exact = _omega_max(n, m, k, False)
    assert top.bound >= exact
    assert top.damping_ratio == pytest.approx((c / k) * exact / 2, rel=0.01)
