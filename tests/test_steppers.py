"""The stepper catalogue against outside references.

- Stability functions R(z), z = hλ, of the Runge–Kutta tableaux against their closed
  forms — E. Hairer & G. Wanner, *Solving Ordinary Differential Equations II*, 2nd ed.,
  1996, §IV.2 [recalled from memory]; J. C. Butcher, *Numerical Methods for Ordinary
  Differential Equations*, 3rd ed., 2016 [recalled from memory].
- Order conditions of the tableaux (rooted trees up to order 4) — E. Hairer,
  S. P. Nørsett & G. Wanner, *Solving ODEs I*, 2nd ed., 1993, §II.2, Table 2.2
  [recalled from memory].
- Step limits (axis intervals, damped limits) found here by root finding on the
  closed forms, to 1e-9 relative.
- Second-order-form schemes: T. J. R. Hughes, *The Finite Element Method*, 1987, ch. 9
  [recalled from memory]; N. M. Newmark, *J. Eng. Mech. Div. ASCE* 85 (1959) 67–94;
  period errors from A. K. Chopra, *Dynamics of Structures*, 4th ed., 2012, ch. 5
  [recalled from memory].
- Linear-system equivalences with ``scipy.signal.cont2discrete`` ('euler' = I + hA,
  'backward_diff' = (I − hA)⁻¹, 'bilinear' = trapezoid, 'zoh' = e^{hA}).
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
import scipy.linalg as la
import scipy.signal as signal
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from lumped.stability import critical_omega_h, max_stable_step
from lumped.steppers import STEPPERS, ButcherTableau, SecondOrderStepper, get_stepper

RTOL_LIMIT = 1e-9
ZETAS = [0.0, 0.01, 0.05, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0]
RK_IDS = [k for k, s in STEPPERS.items() if hasattr(s, "tableau")]


# ---------------------------------------------------------------- closed forms (textbook)


def _truncated_exp(order):
    return lambda z: sum(z**k / math.factorial(k) for k in range(order + 1))


#: R(z) per Runge–Kutta stepper — Hairer & Wanner II §IV.2 [recalled from memory]:
#: explicit s-stage methods of order s ≤ 4 have the truncated exponential; the implicit
#: trapezoid (1 + z/2)/(1 − z/2); backward Euler 1/(1 − z).
CLOSED_FORM_R = {
    "euler": lambda z: 1 + z,
    "heun": lambda z: 1 + z + z**2 / 2,
    "rk3": _truncated_exp(3),
    "rk4": _truncated_exp(4),
    "rk38": _truncated_exp(4),
    "trapezoid": lambda z: (1 + z / 2) / (1 - z / 2),
    "backward-euler": lambda z: 1 / (1 - z),
}


def _mu(zeta):
    """Unit direction of the upper eigenvalue of x'' + 2ζx' + x = 0 (ζ ≤ 1)."""
    return complex(-zeta, math.sqrt(max(1 - zeta * zeta, 0.0)))


def _first_crossing(f, lo=1e-6, hi=20.0, points=4001, vectorised=False):
    """First Ω in (lo, hi] where f rises above rounding (1e-12), refined by brentq on
    the bracketing grid interval; ``inf`` if none."""
    grid = np.linspace(lo, hi, points)
    values = f(grid) if vectorised else np.array([f(w) for w in grid])
    bad = np.flatnonzero(values > 1e-12)
    if len(bad) == 0:
        return math.inf
    k = bad[0]
    if k == 0:
        return 0.0
    return brentq(f, grid[k - 1], grid[k], xtol=1e-15, rtol=4 * np.finfo(float).eps, maxiter=500)


def _rk_limit(stepper_id, zeta):
    """Largest stable Ω along the ray Ω·μ(ζ): first root of |R(Ωμ)|² − 1 (closed form R)."""
    R = CLOSED_FORM_R[stepper_id]
    mu = _mu(zeta)
    return _first_crossing(lambda w: np.abs(R(w * mu)) ** 2 - 1.0, points=20001, vectorised=True)


# ---------------------------------------------------------------- stability functions


@pytest.mark.parametrize("stepper_id", sorted(CLOSED_FORM_R))
def test_stability_function_matches_closed_form(stepper_id):
    rng = np.random.default_rng(20240611)
    z = rng.uniform(-3.5, 1.5, 400) + 1j * rng.uniform(-3.5, 3.5, 400)
    z = z[np.abs(z - 2) > 0.1]  # away from the trapezoid's pole at z = 2
    tableau = STEPPERS[stepper_id].tableau
    expected = CLOSED_FORM_R[stepper_id](z)
    np.testing.assert_allclose(tableau.stability_function(z), expected, rtol=1e-12, atol=1e-13)


def test_every_runge_kutta_stepper_has_a_closed_form_checked():
    # a stepper added to the catalogue without a reference here would go unchecked
    assert set(RK_IDS) == set(CLOSED_FORM_R)


@pytest.mark.parametrize("stepper_id", sorted(CLOSED_FORM_R))
def test_roots_are_R_at_both_eigenvalues(stepper_id):
    stepper = STEPPERS[stepper_id]
    R = CLOSED_FORM_R[stepper_id]
    rng = np.random.default_rng(7)
    for omega_h, zeta in zip(rng.uniform(0.01, 3.0, 30), rng.uniform(0.0, 1.0, 30), strict=True):
        mu = _mu(zeta)
        expected = sorted([R(omega_h * mu), R(omega_h * mu.conjugate())], key=lambda c: c.imag)
        got = sorted(stepper.roots(omega_h, zeta), key=lambda c: c.imag)
        np.testing.assert_allclose(got, expected, rtol=1e-12, atol=1e-14)
        assert stepper.spectral_radius(omega_h, zeta) == pytest.approx(
            abs(R(omega_h * mu)), rel=1e-12
        )


# ---------------------------------------------------------------- tableau self-check


def test_bad_weights_raise():
    with pytest.raises(ValueError, match="weights"):
        ButcherTableau([[0, 0], [1, 0]], [Fraction(1, 2), Fraction(1, 3)], [0, 1])


def test_row_sum_not_node_raises():
    with pytest.raises(ValueError, match="row 1"):
        ButcherTableau([[0, 0], [Fraction(1, 2), 0]], [Fraction(1, 2), Fraction(1, 2)], [0, 1])


def test_mis_shaped_tableau_raises():
    with pytest.raises(ValueError, match="s×s"):
        ButcherTableau([[0, 0], [1, 0]], [1], [0, 1])


def test_good_tableau_is_kept_exactly():
    tableau = ButcherTableau([["0", "0"], ["2/3", "0"]], ["1/4", "3/4"], ["0", "2/3"])
    assert tableau.a[1][0] == Fraction(2, 3)
    assert tableau.b == (Fraction(1, 4), Fraction(3, 4))
    assert tableau.explicit and tableau.stages == 2
    # Ralston's method: a 2-stage order-2 method, so R = 1 + z + z²/2 (Hairer & Wanner II
    # §IV.2 [recalled from memory])
    z = np.array([0.3 - 1.2j, -2.0 + 0.5j, 1j])
    np.testing.assert_allclose(tableau.stability_function(z), 1 + z + z**2 / 2, rtol=1e-14)


def _order_conditions(tableau):
    """Residuals of the order conditions up to order 4 (Hairer, Nørsett & Wanner I,
    §II.2, Table 2.2 [recalled from memory]), exact in fractions, by order."""
    a = [list(r) for r in tableau.a]
    b = list(tableau.b)
    c = list(tableau.c)
    s = len(b)

    def dot(u, v):
        return sum(x * y for x, y in zip(u, v, strict=True))

    def A(v):
        return [dot(a[i], v) for i in range(s)]

    def power(v, k):
        return [x**k for x in v]

    def times(u, v):
        return [x * y for x, y in zip(u, v, strict=True)]

    F = Fraction
    return {
        1: [sum(b) - 1],
        2: [dot(b, c) - F(1, 2)],
        3: [dot(b, power(c, 2)) - F(1, 3), dot(b, A(c)) - F(1, 6)],
        4: [
            dot(b, power(c, 3)) - F(1, 4),
            dot(b, times(c, A(c))) - F(1, 8),
            dot(b, A(power(c, 2))) - F(1, 12),
            dot(b, A(A(c))) - F(1, 24),
        ],
    }


@pytest.mark.parametrize("stepper_id", RK_IDS)
def test_tableau_has_its_declared_order(stepper_id):
    stepper = STEPPERS[stepper_id]
    residuals = _order_conditions(stepper.tableau)
    for p in range(1, stepper.order + 1):
        assert all(r == 0 for r in residuals[p]), f"{stepper_id} fails an order-{p} condition"
    if stepper.order < 4:
        assert any(r != 0 for r in residuals[stepper.order + 1]), f"{stepper_id} is of higher order"


# ---------------------------------------------------------------- axis limits


def test_rk4_real_axis_limit_is_root_of_cubic():
    # R(z) = 1 at z = −x where x³ + 4x² + 12x + 24 = 0 has its real root (R − 1 = z(1 +
    # z/2 + z²/6 + z³/24)); Hairer & Wanner II §IV.2 [recalled from memory]
    roots = np.roots([1, 4, 12, 24])
    x = -float(roots[np.argmin(np.abs(roots.imag))].real)
    assert x == pytest.approx(2.7853, abs=1e-4)
    assert critical_omega_h(STEPPERS["rk4"], 1.0)[0] == pytest.approx(x, rel=RTOL_LIMIT)
    assert _rk_limit("rk4", 1.0) == pytest.approx(x, rel=RTOL_LIMIT)


def test_rk4_imaginary_axis_limit_is_two_root_two():
    # |R(iy)|² = 1 − y⁶/72 + y⁸/576 for RK4: the limit is y² = 8 (Hairer & Wanner II
    # §IV.2 [recalled from memory])
    assert critical_omega_h(STEPPERS["rk4"], 0.0)[0] == pytest.approx(
        2 * math.sqrt(2), rel=RTOL_LIMIT
    )
    assert _rk_limit("rk4", 0.0) == pytest.approx(2 * math.sqrt(2), rel=RTOL_LIMIT)


def test_rk3_axis_limits():
    # Real axis: R(−x) = −1, i.e. x³ − 3x² + 6x − 12 = 0 (from 2 + z + z²/2 + z³/6 = 0);
    # imaginary axis: |R(iy)|² = 1 − y⁴/12 + y⁶/36 gives y = √3 (Hairer & Wanner II
    # §IV.2 [recalled from memory])
    roots = np.roots([1, -3, 6, -12])
    x = float(roots[np.argmin(np.abs(roots.imag))].real)
    assert x == pytest.approx(2.5127, abs=1e-4)
    rk3 = STEPPERS["rk3"]
    assert critical_omega_h(rk3, 1.0)[0] == pytest.approx(x, rel=RTOL_LIMIT)
    assert critical_omega_h(rk3, 0.0)[0] == pytest.approx(math.sqrt(3), rel=RTOL_LIMIT)


@pytest.mark.parametrize("stepper_id", ["euler", "heun"])
def test_euler_and_heun_real_axis_limit_is_two(stepper_id):
    # both real intervals are [−2, 0] (Hairer & Wanner II §IV.2 [recalled from memory])
    assert critical_omega_h(STEPPERS[stepper_id], 1.0)[0] == pytest.approx(2.0, rel=RTOL_LIMIT)


@pytest.mark.parametrize(
    "stepper_id, zeta",
    # ζ = 0 for Euler and Heun (|R| − 1 below rounding near Ω = 0) is covered by
    # test_no_positive_step_is_stable_on_an_undamped_mode
    [
        (s, z)
        for s in ("euler", "heun", "rk3", "rk4", "rk38")
        for z in ZETAS
        if z > 0 or s in ("rk3", "rk4", "rk38")
    ],
)
def test_damped_limit_matches_root_finding(stepper_id, zeta):
    expected = _rk_limit(stepper_id, zeta)
    assert 0 < expected < math.inf
    assert critical_omega_h(STEPPERS[stepper_id], zeta)[0] == pytest.approx(
        expected, rel=RTOL_LIMIT
    )


@pytest.mark.parametrize("stepper_id", ["trapezoid", "backward-euler", "exact"])
def test_a_stable_steppers_have_no_limit(stepper_id):
    # A-stable: |R(z)| ≤ 1 on the whole left half plane (Hairer & Wanner II §IV.3
    # [recalled from memory]); the exact map |e^z| ≤ 1 there too
    assert np.all(np.isinf(critical_omega_h(STEPPERS[stepper_id], ZETAS)))
    if stepper_id != "exact":
        R = CLOSED_FORM_R[stepper_id]
        for zeta in ZETAS:
            w = np.logspace(-3, 4, 200)
            assert np.all(np.abs(R(w * _mu(zeta))) <= 1 + 1e-14)


# ---------------------------------------------------------------- explicit Euler and Heun


@pytest.mark.parametrize("stepper_id", ["euler", "heun"])
def test_no_positive_step_is_stable_on_an_undamped_mode(stepper_id):
    stepper = STEPPERS[stepper_id]
    assert critical_omega_h(stepper, 0.0)[0] == 0.0
    assert max_stable_step(stepper, [2j * math.pi * 7.0])[0] == 0.0
    # ... while a mode with any damping has a positive limit
    assert critical_omega_h(stepper, 1e-3)[0] > 0


@pytest.mark.parametrize("omega_h", [1e-3, 0.01, 0.1, 0.5, 1.0, 2.0, 5.0])
def test_undamped_growth_per_step(omega_h):
    # |R(iΩ)| for R = 1 + z and 1 + z + z²/2: √(1 + Ω²) and √(1 + Ω⁴/4)
    assert STEPPERS["euler"].spectral_radius(omega_h, 0.0) == pytest.approx(
        math.sqrt(1 + omega_h**2), rel=1e-13
    )
    assert STEPPERS["heun"].spectral_radius(omega_h, 0.0) == pytest.approx(
        math.sqrt(1 + omega_h**4 / 4), rel=1e-13
    )


@pytest.mark.parametrize("zeta", [1e-6, 1e-3, 0.01, 0.1, 0.3, 0.5, 0.8, 1.0])
def test_euler_damped_limit_is_two_zeta(zeta):
    # |1 + Ωμ|² = 1 − 2ζΩ + Ω²: the limit is exactly Ω = 2ζ for ζ ≤ 1
    assert critical_omega_h(STEPPERS["euler"], zeta)[0] == pytest.approx(2 * zeta, rel=RTOL_LIMIT)


# ---------------------------------------------------------------- second-order-form schemes


def _own_one_step(update, omega_h, zeta):
    """The 2×2 one-step matrix of ``update(state, Ω, ζ)`` on x'' + 2ζx' + x = 0 (ω = 1,
    h = Ω), built by stepping the unit vectors."""
    return np.column_stack(
        [update(np.array(e, dtype=float), omega_h, zeta) for e in ((1, 0), (0, 1))]
    )


def _symplectic_euler_old_velocity(state, h, zeta):
    # v₁ = v + h(−x − 2ζv); x₁ = x + h v₁ — damping on the old velocity
    x, v = state
    v1 = v + h * (-x - 2 * zeta * v)
    return np.array([x + h * v1, v1])


def _symplectic_euler_new_velocity(state, h, zeta):
    # v₁ = v + h(−x − 2ζv₁); x₁ = x + h v₁ — damping implicit in the new velocity
    x, v = state
    v1 = (v - h * x) / (1 + 2 * zeta * h)
    return np.array([x + h * v1, v1])


def _central_difference(state, h, zeta):
    # (x₊ − 2x + x₋)/h² + 2ζ(x₊ − x₋)/(2h) + x = 0; state (x_n, x_{n−1})
    x, x_old = state
    x_new = ((2 - h * h) * x - (1 - zeta * h) * x_old) / (1 + zeta * h)
    return np.array([x_new, x])


def _newmark(beta, gamma):
    def update(state, h, zeta):
        # Newmark (1959): x₁ = x + h v + h²((½ − β)a + βa₁), v₁ = v + h((1 − γ)a + γa₁),
        # with a = −x − 2ζv and a₁ = −x₁ − 2ζv₁, solved for a₁
        x, v = state
        a = -x - 2 * zeta * v
        x_pred = x + h * v + h * h * (0.5 - beta) * a
        v_pred = v + h * (1 - gamma) * a
        a1 = (-x_pred - 2 * zeta * v_pred) / (1 + beta * h * h + 2 * zeta * gamma * h)
        return np.array([x_pred + beta * h * h * a1, v_pred + gamma * h * a1])

    return update


def _jury(G):
    """|tr G| − 1 − det G: positive where a root of λ² − tr λ + det leaves the unit disc
    through ±1 or a complex pair reaches it with det = 1 (Schur–Cohn; common practice)."""
    return abs(np.trace(G)) - 1 - np.linalg.det(G)


def _second_order_limit(update, zeta):
    return _first_crossing(lambda w: _jury(_own_one_step(update, w, zeta)), hi=12.0, points=2401)


def test_symplectic_euler_docstring_pins_old_velocity_damping():
    doc = " ".join(SecondOrderStepper.amplification.__doc__.split())
    assert "v₁ = v + h a(x, v); x₁ = x + h v₁" in doc
    assert "damping force on the old velocity" in doc
    stepper = STEPPERS["symplectic-euler"]
    rng = np.random.default_rng(3)
    for w, z in zip(rng.uniform(0.01, 2.5, 25), rng.uniform(0, 1, 25), strict=True):
        np.testing.assert_allclose(
            stepper.amplification(w, z),
            _own_one_step(_symplectic_euler_old_velocity, w, z),
            atol=1e-14,
        )


@pytest.mark.parametrize("zeta", ZETAS)
def test_symplectic_euler_limit(zeta):
    # damping on the old velocity: 2(√(1 + ζ²) − ζ); on the new one it would be
    # 2(√(1 + ζ²) + ζ) (see REFERENCES: the trap)
    expected = 2 * (math.sqrt(1 + zeta**2) - zeta)
    got = critical_omega_h(STEPPERS["symplectic-euler"], zeta)[0]
    assert got == pytest.approx(expected, rel=RTOL_LIMIT)
    assert got == pytest.approx(
        _second_order_limit(_symplectic_euler_old_velocity, zeta), rel=RTOL_LIMIT
    )
    implicit = _second_order_limit(_symplectic_euler_new_velocity, zeta)
    assert implicit == pytest.approx(2 * (math.sqrt(1 + zeta**2) + zeta), rel=RTOL_LIMIT)
    if zeta > 0:
        assert got < implicit


@pytest.mark.parametrize("zeta", ZETAS + [2.0, 10.0])
def test_central_difference_limit_is_two_at_any_damping(zeta):
    # velocity centred: the characteristic polynomial has the root −1 at Ω = 2 for
    # every ζ (Chopra ch. 5; Hughes ch. 9 [recalled from memory])
    stepper = STEPPERS["central-difference"]
    assert critical_omega_h(stepper, zeta)[0] == pytest.approx(2.0, rel=RTOL_LIMIT)
    w = np.linspace(0.05, 3.0, 40)
    np.testing.assert_allclose(
        stepper.amplification(w, zeta),
        np.array([_own_one_step(_central_difference, x, zeta) for x in w]),
        atol=1e-13,
    )
    if zeta <= 1:
        assert _second_order_limit(_central_difference, zeta) == pytest.approx(2.0, rel=RTOL_LIMIT)


@pytest.mark.parametrize("zeta", [0.0, 0.01, 0.1, 0.5, 1.0, 3.0])
def test_newmark_average_acceleration_is_unconditionally_stable(zeta):
    stepper = get_stepper("newmark")
    assert (stepper.beta, stepper.gamma) == (0.25, 0.5)
    w = np.logspace(-3, 4, 400)
    assert np.all(stepper.spectral_radius(w, zeta) <= 1 + 1e-12)
    assert np.isinf(critical_omega_h(stepper, zeta)[0])
    if zeta == 0:  # no numerical damping on an undamped mode
        np.testing.assert_allclose(stepper.spectral_radius(w, 0.0), 1.0, atol=1e-12)


def test_newmark_matrix_matches_update_formula():
    rng = np.random.default_rng(11)
    for beta, gamma in ((0.25, 0.5), (1 / 6, 0.5), (0.0, 0.5), (0.3, 0.6), (0.2, 0.7)):
        stepper = get_stepper("newmark", beta=beta, gamma=gamma)
        for w, z in zip(rng.uniform(0.01, 5, 10), rng.uniform(0, 1, 10), strict=True):
            np.testing.assert_allclose(
                stepper.amplification(w, z), _own_one_step(_newmark(beta, gamma), w, z), atol=1e-13
            )


def test_newmark_linear_acceleration_limit_is_two_root_three():
    # β = 1/6, γ = 1/2: Ω_crit = 1/√(γ/2 − β) = 2√3 (Hughes ch. 9 [recalled from memory])
    stepper = get_stepper("newmark", beta=1 / 6, gamma=0.5)
    assert critical_omega_h(stepper, 0.0)[0] == pytest.approx(2 * math.sqrt(3), rel=RTOL_LIMIT)
    assert _second_order_limit(_newmark(1 / 6, 0.5), 0.0) == pytest.approx(
        2 * math.sqrt(3), rel=RTOL_LIMIT
    )


def _hughes_limit(beta, gamma, zeta):
    # Ω_crit = [ζ(γ − ½) + √(γ/2 − β + ζ²(γ − ½)²)] / (γ/2 − β) — Hughes, ch. 9
    # [recalled from memory]
    d = gamma / 2 - beta
    return (zeta * (gamma - 0.5) + math.sqrt(d + zeta**2 * (gamma - 0.5) ** 2)) / d


@pytest.mark.parametrize(
    "beta, gamma",
    [(1 / 6, 0.5), (0.0, 0.5), (0.1, 0.5), (0.25, 0.6), (0.2, 0.6), (0.2, 0.7), (0.3, 0.9)],
)
@pytest.mark.parametrize("zeta", [0.0, 0.05, 0.2, 0.5, 1.0])
def test_newmark_damped_limit_matches_hughes(beta, gamma, zeta):
    stepper = get_stepper("newmark", beta=beta, gamma=gamma)
    expected = _hughes_limit(beta, gamma, zeta)
    assert critical_omega_h(stepper, zeta)[0] == pytest.approx(expected, rel=RTOL_LIMIT)
    assert _second_order_limit(_newmark(beta, gamma), zeta) == pytest.approx(expected, rel=1e-8)


def test_explicit_newmark_is_central_difference():
    # β = 0, γ = ½ is the central difference method (Hughes ch. 9 [recalled from memory]):
    # same characteristic roots
    explicit = get_stepper("newmark", beta=0.0, gamma=0.5)
    central = STEPPERS["central-difference"]
    for zeta in (0.0, 0.1, 0.6):
        w = np.linspace(0.05, 1.99, 30)
        a = np.sort_complex(explicit.roots(w, zeta))
        b = np.sort_complex(central.roots(w, zeta))
        np.testing.assert_allclose(a, b, atol=1e-12)


def test_newmark_average_acceleration_equals_trapezoid_on_a_mode():
    # on linear systems Newmark β = ¼, γ = ½ is the trapezoid rule (REFERENCES, Steppers):
    # its roots are (1 + z/2)/(1 − z/2) at z = Ωμ±
    R = CLOSED_FORM_R["trapezoid"]
    newmark = get_stepper("newmark")
    for zeta in (0.0, 0.05, 0.4, 0.9):
        for w in (0.01, 0.3, 1.0, 3.0, 40.0):
            mu = _mu(zeta)
            expected = np.sort_complex(np.array([R(w * mu), R(w * mu.conjugate())]))
            np.testing.assert_allclose(
                np.sort_complex(newmark.roots(w, zeta)), expected, atol=1e-12
            )


# ---------------------------------------------------------------- period errors


def _principal_angle(stepper, omega_h):
    roots = stepper.roots(omega_h, 0.0)
    return np.max(np.angle(roots), axis=-1)


@pytest.mark.parametrize("stepper_id", ["central-difference", "symplectic-euler"])
def test_period_error_arcsin(stepper_id):
    # ω̄h = 2 arcsin(Ω/2) (Chopra ch. 5; Hughes ch. 9 [recalled from memory])
    w = np.linspace(0.01, 1.99, 100)
    np.testing.assert_allclose(
        _principal_angle(STEPPERS[stepper_id], w), 2 * np.arcsin(w / 2), rtol=1e-10
    )


def test_period_error_average_acceleration_arctan():
    # ω̄h = 2 arctan(Ω/2) (Chopra ch. 5; Hughes ch. 9 [recalled from memory])
    w = np.logspace(-2, 2, 100)
    np.testing.assert_allclose(
        _principal_angle(get_stepper("newmark"), w), 2 * np.arctan(w / 2), rtol=1e-10
    )


# ---------------------------------------------------------------- linear systems


def _random_damped_system(seed, n=3):
    """M, C, K of a small random damped chain-like system, and its first-order A."""
    rng = np.random.default_rng(seed)
    m = rng.uniform(0.5, 3.0, n)
    k = rng.uniform(50.0, 400.0, n + 1)
    c = rng.uniform(0.2, 3.0, n + 1)

    def chain(values):
        X = np.diag(values[:-1] + values[1:])
        X -= np.diag(values[1:-1], 1) + np.diag(values[1:-1], -1)
        return X

    M, K, C = np.diag(m), chain(k), chain(c)
    A = np.block([[np.zeros((n, n)), np.eye(n)], [-np.linalg.solve(M, K), -np.linalg.solve(M, C)]])
    return A


def _rk_matrix(tableau, A, h):
    """One step of the Runge–Kutta method on y' = Ay: stages k_i = A(y + h Σ_j a_ij k_j),
    y₁ = y + h Σ b_i k_i, solved for all stages at once."""
    a, b, _ = tableau.arrays()
    s, n = len(b), A.shape[0]
    lhs = np.eye(s * n) - h * np.kron(a, A)
    rhs = np.kron(np.ones((s, 1)), A)
    stages = np.linalg.solve(lhs, rhs)  # (s n) × n: each stage as a matrix of y
    return np.eye(n) + h * np.kron(b[None, :], np.eye(n)) @ stages


@pytest.mark.parametrize(
    "stepper_id, method",
    [("euler", "euler"), ("backward-euler", "backward_diff"), ("trapezoid", "bilinear")],
)
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_tableau_on_linear_system_matches_cont2discrete(stepper_id, method, seed):
    A = _random_damped_system(seed)
    n = A.shape[0]
    h = 0.013
    Ad = signal.cont2discrete((A, np.zeros((n, 1)), np.eye(n), np.zeros((n, 1))), h, method=method)[
        0
    ]
    np.testing.assert_allclose(
        _rk_matrix(STEPPERS[stepper_id].tableau, A, h), Ad, rtol=1e-11, atol=1e-12
    )
    # and R(z) of the catalogue maps the eigenvalues of A onto those of the step matrix
    lam = np.linalg.eigvals(A)
    np.testing.assert_allclose(
        np.sort_complex(STEPPERS[stepper_id].tableau.stability_function(h * lam)),
        np.sort_complex(np.linalg.eigvals(Ad)),
        rtol=1e-9,
    )


@pytest.mark.parametrize("stepper_id", ["heun", "rk3", "rk4", "rk38"])
def test_explicit_tableau_on_linear_system_is_truncated_exponential(stepper_id):
    A = _random_damped_system(5)
    h = 0.02
    order = {"heun": 2, "rk3": 3, "rk4": 4, "rk38": 4}[stepper_id]
    hA = h * A
    expected = sum(np.linalg.matrix_power(hA, k) / math.factorial(k) for k in range(order + 1))
    np.testing.assert_allclose(
        _rk_matrix(STEPPERS[stepper_id].tableau, A, h), expected, rtol=1e-12, atol=1e-14
    )
    # each is within O(h^{p+1}) of the exact step e^{hA} (scipy.signal 'zoh')
    n = A.shape[0]
    zoh = signal.cont2discrete((A, np.zeros((n, 1)), np.eye(n), np.zeros((n, 1))), h, method="zoh")[
        0
    ]
    np.testing.assert_allclose(zoh, la.expm(hA), rtol=1e-12, atol=1e-14)
    assert np.max(np.abs(expected - zoh)) < 2 * np.max(
        np.abs(np.linalg.matrix_power(hA, order + 1))
    )


def test_exact_stepper_roots_are_exponentials():
    lam = _random_damped_system(9)
    lam = np.linalg.eigvals(lam)
    lam = lam[lam.imag > 0]
    h = 0.05
    stepper = STEPPERS["exact"]
    for value in lam:
        omega, zeta = abs(value), -value.real / abs(value)
        roots = stepper.roots(h * omega, zeta)
        np.testing.assert_allclose(
            np.sort_complex(roots),
            np.sort_complex([np.exp(h * value), np.exp(h * value.conjugate())]),
            rtol=1e-12,
        )


# ---------------------------------------------------------------- excess sign


@settings(max_examples=300, deadline=None)
@given(
    stepper_id=st.sampled_from(sorted(STEPPERS)),
    omega_h=st.floats(1e-3, 50.0),
    zeta=st.floats(0.0, 1.0),
)
def test_excess_is_positive_exactly_where_unstable(stepper_id, omega_h, zeta):
    stepper = STEPPERS[stepper_id]
    if stepper_id in CLOSED_FORM_R:
        rho = abs(CLOSED_FORM_R[stepper_id](omega_h * _mu(zeta)))
    elif stepper_id == "exact":
        rho = math.exp(-zeta * omega_h)
    else:
        update = {
            "symplectic-euler": _symplectic_euler_old_velocity,
            "central-difference": _central_difference,
            "newmark": _newmark(0.25, 0.5),
        }[stepper_id]
        rho = float(np.max(np.abs(np.linalg.eigvals(_own_one_step(update, omega_h, zeta)))))
    if abs(rho - 1) < 1e-6:
        return  # too close to the boundary for this reference to tell
    excess, _ = stepper.excess(omega_h, zeta)
    assert (float(excess) > 0) == (rho > 1)


def test_max_stable_step_scales_with_frequency():
    rk4 = STEPPERS["rk4"]
    omega, zeta = 2 * math.pi * 13.0, 0.2
    lam = complex(-zeta * omega, omega * math.sqrt(1 - zeta**2))
    expected = _rk_limit("rk4", zeta) / omega
    limits = max_stable_step(rk4, [lam, 0.0, -omega])
    assert limits[0] == pytest.approx(expected, rel=RTOL_LIMIT)
    assert np.isinf(limits[1])  # a rigid-body mode sets no limit
    # a real eigenvalue −a enters as ω = a, ζ = 1: the real-axis limit
    assert limits[2] == pytest.approx(_rk_limit("rk4", 1.0) / omega, rel=RTOL_LIMIT)
