"""A table of the largest stable hω against the damping ratio, found by brute force.

Each method is written here from its textbook definition — explicit Euler, Heun, Kutta's
third-order method and classical RK4 on the first-order form (Hairer, Nørsett & Wanner,
*Solving ODEs I*, 2nd ed., 1993, §II.1 [recalled from memory]); semi-implicit Euler
(velocity first, damping on the old velocity) and central difference with the velocity
centred (Chopra, *Dynamics of Structures*, 4th ed., 2012, ch. 5 [recalled from memory])
— and steps the modal oscillator x'' + 2ζx' + x = 0 with h = Ω. The one-step map is built
by stepping the unit vectors; its spectral radius decides (REFERENCES, Steppers: near the
limit the growth per step is tiny, so watch the radius, and make simulated-growth
checks long). The limit is bisected on Ω from a fine scan and compared with
``critical_omega_h``. Long runs at 0.95 and 1.05 times each limit then confirm that the
state decays (or stays bounded) below it and grows above it.
"""

from __future__ import annotations

import numpy as np
import pytest

from lumped.stability import critical_omega_h
from lumped.steppers import STEPPERS

ZETAS = [0.0, 0.01, 0.05, 0.1, 0.3, 0.7, 1.0]
METHODS = ["euler", "heun", "rk3", "rk4", "symplectic-euler", "central-difference"]
#: brute-force agreement: the limits come out far tighter, but a brute-force table
#: only promises this much
RTOL = 1e-3
#: a spectral radius above 1 by more than this is growth, not rounding; the maps at
#: ζ = 1 are defective (a double root), which costs about √ε in the computed radius
GROWTH = {"simple": 1e-12, "double root": 1e-7}
#: Heun's growth per step on an undamped mode, Ω⁴/8, is below rounding for Ω under
#: about 2e-3: a brute-force limit under this means "unstable at every step it resolves"
RESOLUTION = 0.01


# ---------------------------------------------------------------- the methods, from the books
# Each takes states x, v (arrays over the Ω grid) and returns the next state.


def _f(x, v, zeta):
    return v, -x - 2.0 * zeta * v


def _euler(x, v, h, zeta):
    dx, dv = _f(x, v, zeta)
    return x + h * dx, v + h * dv


def _heun(x, v, h, zeta):
    k1x, k1v = _f(x, v, zeta)
    k2x, k2v = _f(x + h * k1x, v + h * k1v, zeta)
    return x + h / 2 * (k1x + k2x), v + h / 2 * (k1v + k2v)


def _rk3(x, v, h, zeta):
    # Kutta: k1 = f(y), k2 = f(y + h k1/2), k3 = f(y − h k1 + 2h k2); y + h(k1 + 4k2 + k3)/6
    k1x, k1v = _f(x, v, zeta)
    k2x, k2v = _f(x + h / 2 * k1x, v + h / 2 * k1v, zeta)
    k3x, k3v = _f(x - h * k1x + 2 * h * k2x, v - h * k1v + 2 * h * k2v, zeta)
    return x + h / 6 * (k1x + 4 * k2x + k3x), v + h / 6 * (k1v + 4 * k2v + k3v)


def _rk4(x, v, h, zeta):
    k1x, k1v = _f(x, v, zeta)
    k2x, k2v = _f(x + h / 2 * k1x, v + h / 2 * k1v, zeta)
    k3x, k3v = _f(x + h / 2 * k2x, v + h / 2 * k2v, zeta)
    k4x, k4v = _f(x + h * k3x, v + h * k3v, zeta)
    return (
        x + h / 6 * (k1x + 2 * k2x + 2 * k3x + k4x),
        v + h / 6 * (k1v + 2 * k2v + 2 * k3v + k4v),
    )


def _symplectic_euler(x, v, h, zeta):
    # velocity first with the force at the old state, then position with the new velocity
    v1 = v + h * (-x - 2.0 * zeta * v)
    return x + h * v1, v1


def _central_difference(x, x_old, h, zeta):
    # (x₊ − 2x + x₋)/h² + 2ζ(x₊ − x₋)/(2h) + x = 0; the state is (x_n, x_{n−1})
    x_new = ((2.0 - h * h) * x - (1.0 - zeta * h) * x_old) / (1.0 + zeta * h)
    return x_new, x


STEP = {
    "euler": _euler,
    "heun": _heun,
    "rk3": _rk3,
    "rk4": _rk4,
    "symplectic-euler": _symplectic_euler,
    "central-difference": _central_difference,
}


def one_step_map(method, h, zeta):
    """(…, 2, 2) one-step matrices at the steps ``h``: columns are the steps of (1, 0), (0, 1)."""
    h = np.asarray(h, dtype=float)
    one, zero = np.ones_like(h), np.zeros_like(h)
    step = STEP[method]
    c0 = step(one, zero, h, zeta)
    c1 = step(zero, one, h, zeta)
    return np.stack([np.stack(c0, axis=-1), np.stack(c1, axis=-1)], axis=-1)


def radius(method, h, zeta):
    return np.max(np.abs(np.linalg.eigvals(one_step_map(method, h, zeta))), axis=-1)


def brute_force_limit(method, zeta, hi=6.0, points=60001):
    """First Ω where the radius exceeds 1: a scan with spacing 1e-4, then bisection."""
    growth = GROWTH["double root" if zeta == 1.0 else "simple"]
    grid = np.linspace(1e-4, hi, points)
    unstable = radius(method, grid, zeta) > 1 + growth
    if not unstable.any():
        return np.inf
    k = int(np.argmax(unstable))
    if k == 0:
        return 0.0
    lo, hi = grid[k - 1], grid[k]
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if radius(method, mid, zeta) > 1 + growth:
            hi = mid
        else:
            lo = mid
    return 0.5 * (lo + hi)


@pytest.fixture(scope="module")
def table():
    """max stable hω by method and damping ratio, by brute force."""
    return {m: {z: brute_force_limit(m, z) for z in ZETAS} for m in METHODS}


@pytest.mark.parametrize("method", METHODS)
def test_library_matches_brute_force_table(method, table):
    got = critical_omega_h(STEPPERS[method], ZETAS)
    for zeta, value in zip(ZETAS, got, strict=True):
        expected = table[method][zeta]
        if expected < RESOLUTION and zeta == 0.0:
            # unstable at every step the scan resolves: no positive step is stable
            assert value == 0.0, (method, zeta)
        else:
            assert value == pytest.approx(expected, rel=RTOL), (method, zeta)


def test_table_shape_known_features(table):
    # features of the table that the books state outright (REFERENCES, Steppers)
    assert table["euler"][0.0] < RESOLUTION and table["heun"][0.0] < RESOLUTION
    assert table["euler"][0.3] == pytest.approx(0.6, rel=RTOL)  # exactly 2ζ
    assert table["rk4"][0.0] == pytest.approx(2 * np.sqrt(2), rel=RTOL)
    assert table["rk3"][0.0] == pytest.approx(np.sqrt(3), rel=RTOL)
    for zeta in ZETAS:
        assert table["central-difference"][zeta] == pytest.approx(2.0, rel=RTOL)
    # RK4's limit is not monotone in ζ: it rises, then falls below the undamped value
    rk4 = [table["rk4"][z] for z in ZETAS]
    assert max(rk4) > rk4[0] > min(rk4)


def test_undamped_euler_and_heun_grow_at_every_scanned_step():
    grid = np.logspace(-3, 0.5, 50)
    assert np.all(radius("euler", grid, 0.0) > 1)
    assert np.all(radius("heun", grid, 0.0) > 1)


def _log_norm_growth(method, h, zeta, steps):
    """log of (largest state norm over the last quarter of a run / over the first
    quarter), stepping (1, 1) ``steps`` times; the state is renormalised every step
    and the logs of the norms summed, so that fast growth does not overflow."""
    a = np.ones_like(h)
    b = np.ones_like(h)
    log_norm = np.empty((steps,) + h.shape)
    total = np.zeros_like(h)
    for n in range(steps):
        a, b = STEP[method](a, b, h, zeta)
        norm = np.hypot(a, b)
        total = total + np.log(norm)
        a, b = a / norm, b / norm
        log_norm[n] = total
    q = steps // 4
    return log_norm[-q:].max(axis=0) - log_norm[:q].max(axis=0)


@pytest.mark.parametrize("method", METHODS)
def test_long_runs_confirm_the_limit(method, table):
    # the per-step growth near the limit is tiny (REFERENCES, the trap): run long enough
    # to tell, here 40 000 steps at 0.95 and 1.05 times each limit, all ζ at once
    zetas = np.array([z for z in ZETAS if table[method][z] >= RESOLUTION])
    limits = np.array([table[method][z] for z in zetas])
    h = np.concatenate([0.95 * limits, 1.05 * limits])
    growth = _log_norm_growth(method, h, np.concatenate([zetas, zetas]), 40_000)
    below, above = growth[: len(zetas)], growth[len(zetas) :]
    assert np.all(below <= 1e-6), dict(zip(zetas, below, strict=True))
    # at 1.05 × its limit explicit Euler at ζ = 0.01 grows by only 2e-5 per step
    assert np.all(above > 0.05), dict(zip(zetas, above, strict=True))
