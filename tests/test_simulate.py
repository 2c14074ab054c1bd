"""The stepping engine (lumped.simulate) against references outside the project.

- Single body free, forced and step responses: closed forms of S. S. Rao, *Mechanical
  Vibrations*, 6th ed., 2017, ch. 2 (free) and ch. 3 (harmonic, base excitation)
  [recalled from memory]; K. Ogata, *Modern Control Engineering*, 5th ed., 2010,
  §5-3 (second-order step response) [recalled from memory]; python-control's
  ``step_info`` and ``step_response`` computed here.
- Convergence orders: observed order p = slope of log(error) against log(h) on the
  full state (x and v/ω) at an unremarkable time — L. F. Richardson, *Phil. Trans.
  R. Soc. A* 210 (1911) 307–357; declared orders from E. Hairer, S. P. Nørsett &
  G. Wanner, *Solving ODEs I*, 2nd ed., 1993, §II.1–II.2 [recalled from memory] and,
  for the second-order-form schemes, T. J. R. Hughes, *The Finite Element Method*,
  1987, ch. 9 [recalled from memory].
- Multi-body linear runs: the exact solution built here as a matrix exponential of
  the system augmented with the sinusoid generators (scipy.linalg.expm), and
  python-control's ``forced_response`` (matrix exponential, inputs linear between
  samples), from M, C, K written out by hand in the test.
- Energy: E(0) − E(T) + work = ∫ c v² dt (common practice); symplectic Euler's
  modified energy ω²x² + v² − hω²xv (derived in the test, see REFERENCES.md "Energy").
- Contact: a lifting body and an end stop solved by hand in the test.

Every system here is invented for the test.
"""

from __future__ import annotations

import dataclasses
import math
import re

import control
import numpy as np
import pytest
import scipy.linalg as la
import scipy.signal as sig

import lumped
from lumped.convergence import convergence_study
from lumped.simulate import RunError, simulate

G = 9.81  # the system default gravity, m/s²


# --------------------------------------------------------------------------- helpers


def oscillator(mass, stiffness, zeta, x0=0.0, v0=0.0, name="oscillator", body="b", **extra):
    """One body on a spring and a damper to a fixed support ``g``; ``extra`` adds
    inputs, forces or replaces the support (all invented values)."""
    c = 2 * zeta * math.sqrt(stiffness * mass)
    supports = extra.pop("supports", {"g": lumped.Support("g")})
    dampers = {"c": lumped.Damper("c", ("g", body), coefficient=c)} if c > 0 else {}
    return lumped.System(
        name=name,
        bodies={body: lumped.Body(body, mass, initial_displacement=x0, initial_velocity=v0)},
        supports=supports,
        springs={"k": lumped.Spring("k", ("g", body), stiffness)},
        dampers=dampers,
        **extra,
    )


def free_response(t, omega, zeta, x0, v0):
    """x(t), v(t) of x'' + 2ζωx' + ω²x = 0 — Rao, 6th ed., ch. 2, §2.6 [recalled from
    memory]: under-, critically and over-damped forms written separately."""
    t = np.asarray(t, dtype=float)
    if zeta < 1:
        wd = omega * math.sqrt(1 - zeta**2)
        a, b = x0, (v0 + zeta * omega * x0) / wd
        decay = np.exp(-zeta * omega * t)
        x = decay * (a * np.cos(wd * t) + b * np.sin(wd * t))
        v = -zeta * omega * x + decay * wd * (-a * np.sin(wd * t) + b * np.cos(wd * t))
    elif zeta == 1:
        decay = np.exp(-omega * t)
        x = (x0 + (v0 + omega * x0) * t) * decay
        v = (v0 - omega * (v0 + omega * x0) * t) * decay
    else:
        r = math.sqrt(zeta**2 - 1)
        s1, s2 = omega * (-zeta + r), omega * (-zeta - r)
        c1 = (x0 * omega * (zeta + r) + v0) / (2 * omega * r)
        c2 = (-x0 * omega * (zeta - r) - v0) / (2 * omega * r)
        x = c1 * np.exp(s1 * t) + c2 * np.exp(s2 * t)
        v = c1 * s1 * np.exp(s1 * t) + c2 * s2 * np.exp(s2 * t)
    return x, v


def fit_sinusoid(t, y, omega):
    """Least-squares y ≈ Y sin(ωt − φ): returns (Y, φ)."""
    basis = np.column_stack([np.sin(omega * t), np.cos(omega * t), np.ones_like(t)])
    (a, b, _), *_ = np.linalg.lstsq(basis, y, rcond=None)
    return math.hypot(a, b), math.atan2(-b, a)


def observed_order(steps, errors):
    """Slope of the least-squares line through log(error) against log(h)."""
    return float(np.polyfit(np.log(steps), np.log(errors), 1)[0])


# --------------------------------------------------------------------------- 1. free response


@pytest.mark.parametrize("zeta", [0.15, 1.0, 2.5], ids=["under", "critical", "over"])
@pytest.mark.parametrize("stepper", ["rk4", "exact"])
def test_free_response_matches_closed_form(zeta, stepper):
    mass, stiffness, x0, v0 = 3.0, 1200.0, 0.012, -0.35
    omega = math.sqrt(stiffness / mass)
    system = oscillator(mass, stiffness, zeta, x0, v0)
    result = simulate(system, stepper, 1e-4, 1.5)
    assert result.status == "completed"
    x, v = free_response(result.time, omega, zeta, x0, v0)
    scale = math.hypot(x0, v0 / omega)
    # rk4 at hω = 0.002 has a global error ~ (hω)⁴ × ωT/120 ≈ 1e-12 of the amplitude;
    # the exact discretisation is exact up to rounding.
    np.testing.assert_allclose(result.displacement[:, 0], x, rtol=0, atol=1e-9 * scale)
    np.testing.assert_allclose(result.velocity[:, 0], v, rtol=0, atol=1e-9 * scale * omega)
    # Newton's second law on the dynamic part (gravity is balanced at static equilibrium).
    c = 2 * zeta * math.sqrt(stiffness * mass)
    np.testing.assert_allclose(
        result.acceleration[:, 0],
        -(c * v + stiffness * x) / mass,
        rtol=0,
        atol=1e-8 * scale * omega**2,
    )


# --------------------------------------------------------------------------- 2. harmonic steady state


@pytest.mark.parametrize("r", [0.5, 1.0, 1.8])
def test_harmonic_force_steady_state_amplitude_and_phase(r):
    mass, stiffness, zeta, force = 5.0, 2000.0, 0.1, 40.0
    omega_n = math.sqrt(stiffness / mass)
    omega = r * omega_n
    system = oscillator(
        mass, stiffness, zeta,
        inputs={"push": lumped.HarmonicInput("push", force, omega / (2 * math.pi))},
        forces={"f": lumped.Force("f", "b", "push")},
    )  # fmt: skip
    # Transients decay as exp(−ζω_n t): after 12 s, exp(−24) ≈ 4e-11 of their size.
    result = simulate(system, "rk4", 5e-4, 14.0)
    late = result.time > 12.0
    amplitude, phase = fit_sinusoid(result.time[late], result.displacement[late, 0], omega)
    # X k/F0 = 1/√((1−r²)² + (2ζr)²), tan φ = 2ζr/(1−r²) — Rao, 6th ed., ch. 3, §3.4
    # [recalled from memory]; φ in [0, π] (lag), hence atan2.
    expected = force / stiffness / math.sqrt((1 - r**2) ** 2 + (2 * zeta * r) ** 2)
    expected_phase = math.atan2(2 * zeta * r, 1 - r**2)
    assert amplitude == pytest.approx(expected, rel=1e-6)
    assert phase == pytest.approx(expected_phase, abs=1e-6)


@pytest.mark.parametrize("r", [0.6, math.sqrt(2), 3.0])
def test_base_excitation_steady_state_matches_transmissibility(r):
    mass, stiffness, zeta, lift = 4.0, 3600.0, 0.08, 0.002
    omega = r * math.sqrt(stiffness / mass)
    system = oscillator(
        mass, stiffness, zeta,
        supports={"g": lumped.Support("g", motion="shake")},
        inputs={"shake": lumped.HarmonicInput("shake", lift, omega / (2 * math.pi))},
    )  # fmt: skip
    result = simulate(system, "rk4", 2.5e-4, 16.0)  # exp(−ζω_n·14) ≈ 1e-15
    late = result.time > 14.0
    amplitude, phase = fit_sinusoid(result.time[late], result.displacement[late, 0], omega)
    # T(r) = √((1 + (2ζr)²)/((1−r²)² + (2ζr)²)) — Rao, 6th ed., ch. 3, §3.6 [recalled
    # from memory]; T(√2) = 1 for every ζ. The lag is that of (1 + 2iζr)/(1 − r² + 2iζr),
    # derived here from m x'' = −k(x − y) − c(x' − y').
    transmissibility = math.sqrt(
        (1 + (2 * zeta * r) ** 2) / ((1 - r**2) ** 2 + (2 * zeta * r) ** 2)
    )
    lag = -np.angle((1 + 2j * zeta * r) / (1 - r**2 + 2j * zeta * r))
    assert amplitude == pytest.approx(transmissibility * lift, rel=1e-6)
    assert phase == pytest.approx(lag, abs=1e-6)
    # The support's own motion is reported as the input.
    np.testing.assert_allclose(
        result.support_displacement[:, 0], lift * np.sin(omega * result.time), atol=1e-15
    )


# --------------------------------------------------------------------------- 3. step response


def test_step_force_overshoot_and_peak_time():
    mass, stiffness, zeta, force = 2.0, 1800.0, 0.2, 25.0
    omega = math.sqrt(stiffness / mass)
    omega_d = omega * math.sqrt(1 - zeta**2)
    system = oscillator(
        mass, stiffness, zeta,
        inputs={"load": lumped.StepInput("load", force, 0.0)},
        forces={"f": lumped.Force("f", "b", "load")},
    )  # fmt: skip
    dt = 1e-4
    result = simulate(system, "rk4", dt, 1.5)
    x = result.displacement[:, 0]
    final = force / stiffness
    # Ogata, 5th ed., §5-3 [recalled from memory]: M_p = exp(−πζ/√(1−ζ²)), t_p = π/ω_d.
    overshoot = math.exp(-math.pi * zeta / math.sqrt(1 - zeta**2))
    peak = int(np.argmax(x))
    assert (x[peak] - final) / final == pytest.approx(overshoot, abs=1e-6)
    assert abs(result.time[peak] - math.pi / omega_d) <= dt
    # The whole response: x = (F/k)(1 − e^{−ζωt}(cos ω_d t + ζ/√(1−ζ²) sin ω_d t)).
    t = result.time
    closed = final * (
        1
        - np.exp(-zeta * omega * t)
        * (np.cos(omega_d * t) + zeta / math.sqrt(1 - zeta**2) * np.sin(omega_d * t))
    )
    np.testing.assert_allclose(x, closed, rtol=0, atol=1e-9 * final)
    # python-control's step_info on 1/(m s² + c s + k), scaled by F, agrees.
    c = 2 * zeta * math.sqrt(stiffness * mass)
    info = control.step_info(control.tf([force], [mass, c, stiffness]), T=np.arange(0, 1.5, dt))
    assert x[peak] == pytest.approx(info["Peak"], rel=1e-6)
    assert 100 * (x[peak] - final) / final == pytest.approx(info["Overshoot"], abs=1e-3)
    assert result.time[peak] == pytest.approx(info["PeakTime"], abs=dt)


@pytest.mark.parametrize(
    "stepper, t_jump, tolerance, balance",
    [("rk4", 0.1, 1e-8, 1e-10), ("rk4", 0.10005, 1e-8, 1e-10), ("exact", 0.10005, 1e-10, 1e-5),
     ("newmark", 0.1, 1e-5, 1e-5), ("symplectic-euler", 0.10005, 3e-3, 1e-2)],
)  # fmt: skip
def test_support_step_sends_an_impulse_through_the_damper(stepper, t_jump, tolerance, balance):
    """A support that jumps by Y at t_s (on a step boundary, or inside a step): the damper
    gives the body Δv = cY/m at once, and the body then follows Y × the step response
    of (cs + k)/(ms² + cs + k) (base excitation, Rao ch. 3 [recalled from memory])."""
    mass, stiffness, zeta, lift, dt = 1.5, 2400.0, 0.3, 0.01, 1e-4
    system = oscillator(
        mass, stiffness, zeta,
        supports={"g": lumped.Support("g", motion="kerb")},
        inputs={"kerb": lumped.StepInput("kerb", lift, t_jump)},
    )  # fmt: skip
    c = 2 * zeta * math.sqrt(stiffness * mass)
    result = simulate(system, stepper, dt, 0.6)
    assert lumped.simulate.Event(t_jump, "g", "support-jump") in result.events
    before = result.time < t_jump
    assert np.all(result.displacement[before] == 0.0)
    after = result.time >= t_jump
    # python-control's step response of the base-excitation transfer function, on a
    # grid from the jump (evenly spaced, dt/2, which holds every sample time here).
    offsets = result.time[after] - t_jump
    index = np.round(offsets / (dt / 2)).astype(int)
    grid = np.arange(index[-1] + 1) * (dt / 2)
    np.testing.assert_allclose(grid[index], offsets, rtol=0, atol=1e-12)
    response = control.step_response(
        control.tf([c, stiffness], [mass, c, stiffness]), grid
    ).outputs[index]
    np.testing.assert_allclose(
        result.displacement[after, 0], lift * response, rtol=0, atol=tolerance * lift
    )
    if t_jump in result.time:
        # A sample at the jump shows the state just after it: the damper's impulse.
        at_jump = int(np.flatnonzero(result.time == t_jump)[0])
        assert result.velocity[at_jump, 0] == pytest.approx(c * lift / mass, rel=1e-9)
        assert result.displacement[at_jump, 0] == 0.0
        assert result.support_displacement[at_jump, 0] == lift
    # The jump's energy is booked as support work: the balance still closes (to the
    # order of the rule that integrates the power: the trapezoid rule for the affine
    # steppers, the rectangle rule for symplectic Euler).
    assert np.max(np.abs(result.balance_error)) < balance * 0.5 * stiffness * lift**2


@pytest.mark.parametrize("stepper", ["rk4", "exact"])
@pytest.mark.parametrize("t_jump", [0.1007, 0.123])
def test_support_step_at_a_round_time_just_off_the_floating_point_grid(stepper, t_jump):
    """A jump at a time that is a whole number of steps on paper but not in floating
    point (1230 × 1e-4 = 0.12300000000000001 ≠ 0.123) is still a jump at a step
    boundary: the step before it sees the support where it was, the samples after it
    the state after it, with the accuracy of the on-grid case above."""
    mass, stiffness, zeta, lift, dt = 1.5, 2400.0, 0.3, 0.01, 1e-4
    assert math.floor(t_jump / dt + 1e-12) * dt != t_jump  # the case in point
    system = oscillator(
        mass, stiffness, zeta,
        supports={"g": lumped.Support("g", motion="kerb")},
        inputs={"kerb": lumped.StepInput("kerb", lift, t_jump)},
    )  # fmt: skip
    c = 2 * zeta * math.sqrt(stiffness * mass)
    result = simulate(system, stepper, dt, 0.3)
    after = result.time >= t_jump - 1e-12
    offsets = result.time[after] - t_jump
    index = np.round(offsets / dt).astype(int)
    grid = np.arange(index[-1] + 1) * dt
    np.testing.assert_allclose(grid[index], offsets, rtol=0, atol=1e-12)
    response = control.step_response(
        control.tf([c, stiffness], [mass, c, stiffness]), grid
    ).outputs[index]
    assert np.all(result.displacement[~after] == 0.0)
    np.testing.assert_allclose(
        result.displacement[after, 0], lift * response, rtol=0, atol=1e-8 * lift
    )
    # The first sample at the jump shows the damper's impulse and the raised support.
    first = int(np.flatnonzero(after)[0])
    assert result.velocity[first, 0] == pytest.approx(c * lift / mass, rel=1e-9)
    assert result.support_displacement[first, 0] == lift
    balance = 1e-10 if stepper == "rk4" else 1e-5  # rk4 stages vs the trapezoid rule on the power
    assert np.max(np.abs(result.balance_error)) < balance * 0.5 * stiffness * lift**2


def _delayed_step_force():
    """A body under a force step F at t_s = 0.05 s (a whole number of every step used),
    and its closed-form state at T — Ogata, 5th ed., §5-3 [recalled from memory],
    delayed by t_s: x = (F/k)(1 − e^{−ζωτ}(cos ω_d τ + ζ/√(1−ζ²) sin ω_d τ)),
    v = (F/k) e^{−ζωτ} ω/√(1−ζ²) sin ω_d τ, τ = T − t_s."""
    mass, stiffness, zeta, force, t_step, T = 2.0, 1800.0, 0.2, 25.0, 0.05, 0.4
    omega = math.sqrt(stiffness / mass)
    omega_d = omega * math.sqrt(1 - zeta**2)
    system = oscillator(
        mass, stiffness, zeta,
        inputs={"load": lumped.StepInput("load", force, t_step)},
        forces={"f": lumped.Force("f", "b", "load")},
    )  # fmt: skip
    tau = T - t_step
    decay = math.exp(-zeta * omega * tau)
    shape = math.cos(omega_d * tau) + zeta / math.sqrt(1 - zeta**2) * math.sin(omega_d * tau)
    x = force / stiffness * (1 - decay * shape)
    v = force / stiffness * decay * omega / math.sqrt(1 - zeta**2) * math.sin(omega_d * tau)
    return system, T, x, v, omega, force / stiffness


@pytest.mark.parametrize(
    "stepper, order", [("rk4", 4), ("rk3", 3), ("heun", 2), ("newmark", 2), ("trapezoid", 2)]
)
def test_step_force_later_in_the_run_keeps_the_stepper_order(stepper, order):
    """A force step on a step boundary: the step before it must see the force still
    off at its end, the step after it on at its start — then every step integrates a
    smooth problem and the stepper keeps its order (reading the force 'on' at the end
    of the step before would cost one order)."""
    system, T, x, v, omega, scale = _delayed_step_force()
    steps = [2e-3 / 2**i for i in range(4)]
    errors = [
        _state_error(simulate(system, stepper, h, T, check=False), x, v, omega, scale)
        for h in steps
    ]
    assert observed_order(steps, errors) == pytest.approx(order, abs=0.2), errors


def test_step_force_on_the_grid_is_exact_with_the_exact_stepper():
    # The first-order hold represents a force that is constant over every step exactly.
    system, T, x, v, omega, scale = _delayed_step_force()
    result = simulate(system, "exact", 1e-3, T)
    assert _state_error(result, x, v, omega, scale) < 1e-11


# --------------------------------------------------------------------------- 4. convergence orders

# The damped oscillator of the order tests, and the time the error is measured at:
# not a turning point, not a zero crossing, about 2.1 periods in.
ORDER_CASE = dict(mass=1.5, stiffness=150.0, zeta=0.05, x0=0.01, v0=0.2)
ORDER_TIME = 1.3

#: stepper → (declared order, step counts over ORDER_TIME in the asymptotic range).
FREE_ORDERS = {
    "euler": (1, [2000, 4000, 8000, 16000]),
    "heun": (2, [100, 200, 400, 800]),
    "rk3": (3, [50, 100, 200, 400]),
    "rk4": (4, [25, 50, 100, 200]),
    "rk38": (4, [25, 50, 100, 200]),
    "symplectic-euler": (1, [2000, 4000, 8000, 16000]),
    "central-difference": (2, [100, 200, 400, 800]),
    "newmark": (2, [100, 200, 400, 800]),
    "trapezoid": (2, [100, 200, 400, 800]),
    "backward-euler": (1, [2000, 4000, 8000, 16000]),
}


def _state_error(result, x, v, omega, scale):
    return math.hypot(result.displacement[-1, 0] - x, (result.velocity[-1, 0] - v) / omega) / scale


@pytest.mark.parametrize("stepper", list(FREE_ORDERS))
def test_fixed_stepper_converges_at_its_order_on_free_response(stepper):
    order, counts = FREE_ORDERS[stepper]
    case = ORDER_CASE
    omega = math.sqrt(case["stiffness"] / case["mass"])
    system = oscillator(**case)
    x, v = free_response(ORDER_TIME, omega, case["zeta"], case["x0"], case["v0"])
    scale = math.hypot(case["x0"], case["v0"] / omega)
    steps = [ORDER_TIME / n for n in counts]
    errors = [
        _state_error(simulate(system, stepper, h, ORDER_TIME, check=False), x, v, omega, scale)
        for h in steps
    ]
    assert abs(observed_order(steps, errors) - order) < 0.1, errors
    # Halving the step divides the error by about 2^p (common practice).
    ratios = np.array(errors[:-1]) / np.array(errors[1:])
    np.testing.assert_allclose(np.log2(ratios), order, atol=0.1)


def test_heun_quarters_and_euler_halves_the_error():
    # Common practice (second- and first-order methods), see REFERENCES.md "Steppers".
    case = ORDER_CASE
    omega = math.sqrt(case["stiffness"] / case["mass"])
    system = oscillator(**case)
    x, v = free_response(ORDER_TIME, omega, case["zeta"], case["x0"], case["v0"])
    scale = math.hypot(case["x0"], case["v0"] / omega)
    for stepper, n, factor in (("heun", 400, 4.0), ("euler", 8000, 2.0)):
        coarse, fine = (
            _state_error(
                simulate(system, stepper, ORDER_TIME / m, ORDER_TIME, check=False),
                x,
                v,
                omega,
                scale,
            )
            for m in (n, 2 * n)
        )
        assert coarse / fine == pytest.approx(factor, rel=0.05), stepper


def _forced_case():
    """One body shaken by its support and pushed by a force, both sinusoidal, both
    zero at t = 0 (so no jump), from a displaced start."""
    mass, stiffness, zeta = 1.5, 150.0, 0.05
    y, wy = 0.004, 7.0  # support amplitude (m) and angular frequency (rad/s)
    f, wf = 3.0, 13.0  # force amplitude (N) and angular frequency (rad/s)
    system = oscillator(
        mass, stiffness, zeta, x0=0.01, v0=0.2,
        supports={"g": lumped.Support("g", motion="shake")},
        inputs={"shake": lumped.HarmonicInput("shake", y, wy / (2 * math.pi)),
                "push": lumped.HarmonicInput("push", f, wf / (2 * math.pi))},
        forces={"f": lumped.Force("f", "b", "push")},
    )  # fmt: skip
    c = 2 * zeta * math.sqrt(stiffness * mass)
    # Exact solution: state (x, v, sin wy t, cos wy t, sin wf t, cos wf t), linear and
    # autonomous, m x'' = −k(x − y sin) − c(v − y wy cos) + f sin.
    A = np.zeros((6, 6))
    A[0, 1] = 1
    A[1, :] = np.array([-stiffness, -c, stiffness * y, c * y * wy, f, 0.0]) / mass
    A[2, 3], A[3, 2] = wy, -wy
    A[4, 5], A[5, 4] = wf, -wf
    z0 = np.array([0.01, 0.2, 0.0, 1.0, 0.0, 1.0])
    exact = la.expm(A * ORDER_TIME) @ z0
    return system, exact[0], exact[1], math.sqrt(stiffness / mass)


#: Orders with smooth inputs. ``exact`` holds inputs linear over a step (first-order
#: hold), whose interpolation error is O(h²) — common practice.
FORCED_ORDERS = {**FREE_ORDERS, "exact": (2, [50, 100, 200, 400])}


@pytest.mark.parametrize("stepper", list(FORCED_ORDERS))
def test_fixed_stepper_keeps_its_order_with_time_varying_inputs(stepper):
    """Stage inputs taken at the right stage times keep the order; a stage that read
    the input at the step start would drop a Runge–Kutta method to order 1."""
    order, counts = FORCED_ORDERS[stepper]
    system, x, v, omega = _forced_case()
    scale = math.hypot(0.01, 0.2 / omega)
    steps = [ORDER_TIME / n for n in counts]
    errors = [
        _state_error(simulate(system, stepper, h, ORDER_TIME, check=False), x, v, omega, scale)
        for h in steps
    ]
    assert abs(observed_order(steps, errors) - order) < 0.15, errors


@pytest.mark.parametrize(
    "stepper, dt", [("euler", 2e-4), ("heun", 4e-3), ("rk4", 1.6e-2), ("newmark", 4e-3)]
)
def test_convergence_study_reports_the_declared_order(stepper, dt):
    system = oscillator(**ORDER_CASE)  # linear, no inputs: measured against expm
    study = convergence_study(system, stepper, dt, 2.0, levels=4)
    assert study.declared_order == lumped.get_stepper(stepper).order
    assert study.observed_order == pytest.approx(study.declared_order, abs=0.2), study.errors
    assert study.steps == pytest.approx([dt / 2**i for i in range(4)])


def test_convergence_study_richardson_on_a_forced_run():
    system, *_ = _forced_case()
    study = convergence_study(system, "rk3", 2e-2, ORDER_TIME, levels=4)
    assert "Richardson" in study.method
    assert study.observed_order == pytest.approx(3, abs=0.25), study.errors


# --------------------------------------------------------------------------- 5. multi-body


def _three_body_chain():
    """ground-shaker ⟶ (k1, c1, inerter b) ⟶ m1 ⟶ (k2, c2) ⟶ m2 ⟶ (k3, c3) ⟶ m3, a
    harmonic force on m2; invented values. Returns the system and the hand-written
    model: M, C, K and the input matrix on w = [u, u', u'', F]."""
    m = np.array([12.0, 7.0, 4.0])
    k = np.array([9.0e4, 4.0e4, 2.5e4])
    c = np.array([120.0, 60.0, 35.0])
    inertance = 3.0
    y, fy = 0.003, 3.1  # support amplitude (m), frequency (Hz)
    f, ff, phase = 80.0, 11.7, 0.6  # force amplitude (N), frequency (Hz), phase (rad)
    ids = ["m1", "m2", "m3"]
    pairs = [("shaker", "m1"), ("m1", "m2"), ("m2", "m3")]
    system = lumped.System(
        name="three-body chain",
        bodies={b: lumped.Body(b, mass, initial_displacement=d, initial_velocity=v)
                for b, mass, d, v in zip(ids, m, [1e-3, -2e-3, 5e-4], [0.0, 0.05, -0.1], strict=True)},
        supports={"shaker": lumped.Support("shaker", motion="shake")},
        springs={f"k{i + 1}": lumped.Spring(f"k{i + 1}", p, k[i]) for i, p in enumerate(pairs)},
        dampers={f"c{i + 1}": lumped.Damper(f"c{i + 1}", p, coefficient=c[i]) for i, p in enumerate(pairs)},
        inerters={"b": lumped.Inerter("b", ("shaker", "m1"), inertance)},
        inputs={"shake": lumped.HarmonicInput("shake", y, fy),
                "push": lumped.HarmonicInput("push", f, ff, phase)},
        forces={"f": lumped.Force("f", "m2", "push")},
    )  # fmt: skip
    # Newton's second law per body (tension positive, body above the support):
    # (m1 + b) x1'' = −k1(x1 − u) − c1(x1' − u') + b u'' + k2(x2 − x1) + c2(x2' − x1')
    # m2 x2'' = −k2(x2 − x1) − c2(…) + k3(x3 − x2) + c3(…) + F
    # m3 x3'' = −k3(x3 − x2) − c3(x3' − x2')
    M = np.diag(m) + np.diag([inertance, 0, 0])
    K = np.array([[k[0] + k[1], -k[1], 0], [-k[1], k[1] + k[2], -k[2]], [0, -k[2], k[2]]])
    C = np.array([[c[0] + c[1], -c[1], 0], [-c[1], c[1] + c[2], -c[2]], [0, -c[2], c[2]]])
    L = np.zeros((3, 4))  # loads per input [u, u', u'', F]
    L[0, :3] = [k[0], c[0], inertance]
    L[1, 3] = 1.0
    x0 = np.array([1e-3, -2e-3, 5e-4])
    v0 = np.array([0.0, 0.05, -0.1])
    params = dict(
        m=m,
        k=k,
        c=c,
        inertance=inertance,
        y=y,
        wy=2 * math.pi * fy,
        f=f,
        wf=2 * math.pi * ff,
        phase=phase,
    )
    return system, M, C, K, L, x0, v0, params


def _chain_inputs(t, p):
    """w = [u, u', u'', F] of the chain at times t, from the signals' definitions."""
    u = p["y"] * np.sin(p["wy"] * t)
    ud = p["y"] * p["wy"] * np.cos(p["wy"] * t)
    udd = -p["y"] * p["wy"] ** 2 * np.sin(p["wy"] * t)
    F = p["f"] * np.sin(p["wf"] * t + p["phase"])
    return np.vstack([u, ud, udd, F])


def test_three_body_chain_matches_exact_solution_by_expm():
    system, M, C, K, L, x0, v0, p = _three_body_chain()
    Minv = np.linalg.inv(M)
    # Augmented autonomous system: z = (x, v, sin wy t, cos wy t, sin wf t, cos wf t).
    # The loads L w are linear in the four generator states.
    W = np.zeros((4, 4))  # w = W @ generators
    W[0, 0] = p["y"]
    W[1, 1] = p["y"] * p["wy"]
    W[2, 0] = -p["y"] * p["wy"] ** 2
    W[3, 2], W[3, 3] = p["f"] * math.cos(p["phase"]), p["f"] * math.sin(p["phase"])
    A = np.zeros((10, 10))
    A[:3, 3:6] = np.eye(3)
    A[3:6, :3] = -Minv @ K
    A[3:6, 3:6] = -Minv @ C
    A[3:6, 6:] = Minv @ L @ W
    A[6, 7], A[7, 6] = p["wy"], -p["wy"]
    A[8, 9], A[9, 8] = p["wf"], -p["wf"]
    z0 = np.concatenate([x0, v0, [0.0, 1.0, 0.0, 1.0]])
    result = simulate(system, "rk4", 1e-4, 2.0, output_rate=50)
    exact = np.array([la.expm(A * t) @ z0 for t in result.time])
    x_scale = np.max(np.abs(exact[:, :3]))
    v_scale = np.max(np.abs(exact[:, 3:6]))
    np.testing.assert_allclose(result.displacement, exact[:, :3], rtol=0, atol=1e-8 * x_scale)
    np.testing.assert_allclose(result.velocity, exact[:, 3:6], rtol=0, atol=1e-8 * v_scale)
    # Accelerations, element deflections and total forces from the same exact state.
    w = _chain_inputs(result.time, p)
    acc = (Minv @ (L @ w - C @ exact[:, 3:6].T - K @ exact[:, :3].T)).T
    np.testing.assert_allclose(result.acceleration, acc, rtol=0, atol=1e-7 * np.max(np.abs(acc)))
    x, v = exact[:, :3], exact[:, 3:6]
    m = p["m"]
    ids = list(result.element_ids)
    weight_above = [m.sum(), m[1:].sum(), m[2:].sum()]  # what each spring holds up at rest
    rel = [x[:, 0] - w[0], x[:, 1] - x[:, 0], x[:, 2] - x[:, 1]]
    rel_v = [v[:, 0] - w[1], v[:, 1] - v[:, 0], v[:, 2] - v[:, 1]]
    for i in range(3):
        spring = ids.index(f"k{i + 1}")
        damper = ids.index(f"c{i + 1}")
        np.testing.assert_allclose(
            result.deflection[:, spring], rel[i], rtol=0, atol=1e-8 * x_scale
        )
        np.testing.assert_allclose(result.force[:, spring], -G * weight_above[i] + p["k"][i] * rel[i],
                                   rtol=0, atol=1e-7 * p["k"][i] * x_scale)  # fmt: skip
        np.testing.assert_allclose(
            result.force[:, damper], p["c"][i] * rel_v[i], rtol=0, atol=1e-7 * p["c"][i] * v_scale
        )
    inerter = ids.index("b")
    np.testing.assert_allclose(result.force[:, inerter], p["inertance"] * (acc[:, 0] - w[2]),
                               rtol=0, atol=1e-6 * p["inertance"] * np.max(np.abs(acc)))  # fmt: skip
    np.testing.assert_allclose(result.support_displacement[:, 0], w[0], atol=1e-15)
    np.testing.assert_allclose(result.force_input[:, 0], w[3], atol=1e-12)
    # The inerter's share of the energy (½ b (x1' − u')², its work on the shaker) is in
    # the ledger: the balance closes at rk4's accuracy.
    assert np.max(np.abs(result.balance_error)) < 1e-8 * result.dissipated[-1]


def test_three_body_chain_exact_stepper_matches_python_control_forced_response():
    system, M, C, K, L, x0, v0, p = _three_body_chain()
    Minv = np.linalg.inv(M)
    A = np.block([[np.zeros((3, 3)), np.eye(3)], [-Minv @ K, -Minv @ C]])
    B = np.vstack([np.zeros((3, 4)), Minv @ L])
    plant = control.ss(A, B, np.eye(6), np.zeros((6, 4)))
    dt = 1e-3
    result = simulate(system, "exact", dt, 1.5)
    t = result.time
    # Both hold the inputs linear between the same sample times.
    reference = control.forced_response(plant, t, _chain_inputs(t, p), np.concatenate([x0, v0]))
    states = reference.outputs.T
    np.testing.assert_allclose(
        result.displacement, states[:, :3], rtol=0, atol=1e-9 * np.max(np.abs(states[:, :3]))
    )
    np.testing.assert_allclose(
        result.velocity, states[:, 3:], rtol=0, atol=1e-9 * np.max(np.abs(states[:, 3:]))
    )


def _table_ramp():
    """A support ramped by a table (0 → 10 mm between 0.1 s and 0.2 s, then held), and
    the exact state of the body on it at any times: per piece, the autonomous system
    (x, v, u, s) with u' = s, s' = 0 and m x'' = −k(x − u) − c(v − s), solved by expm."""
    mass, stiffness, zeta = 2.0, 800.0, 0.2
    c = 2 * zeta * math.sqrt(stiffness * mass)
    times, values = (0.0, 0.1, 0.2, 0.3), (0.0, 0.0, 0.01, 0.01)
    system = oscillator(
        mass, stiffness, zeta,
        supports={"g": lumped.Support("g", motion="ramp")},
        inputs={"ramp": lumped.TableInput("ramp", "ramp.csv", times, values, amplitude_kind="length")},
    )  # fmt: skip
    A = np.zeros((4, 4))
    A[0, 1] = 1.0
    A[1, :] = np.array([-stiffness, -c, stiffness, c]) / mass
    A[2, 3] = 1.0
    # (start, end, u at start, slope) of each piece of the table's motion.
    pieces = [(0.0, 0.1, 0.0, 0.0), (0.1, 0.2, 0.0, 0.1), (0.2, math.inf, 0.01, 0.0)]

    def exact(sample_times):
        x, v = 0.0, 0.0
        out = np.zeros((len(sample_times), 2))
        for t0, t1, u0, slope in pieces:
            z = np.array([x, v, u0, slope])
            inside = (sample_times >= t0 - 1e-12) & (sample_times <= t1 + 1e-12)
            for i in np.flatnonzero(inside):
                out[i] = (la.expm(A * (sample_times[i] - t0)) @ z)[:2]
            if math.isfinite(t1):
                x, v = (la.expm(A * (t1 - t0)) @ z)[:2]
        return out

    return system, exact, math.sqrt(stiffness / mass)


def test_exact_stepper_is_exact_for_a_table_with_breakpoints_on_the_grid():
    """With breakpoints on the step grid the input is linear over every step, which the
    first-order hold represents exactly."""
    system, exact, _ = _table_ramp()
    result = simulate(system, "exact", 1e-2, 0.5)
    reference = exact(result.time)
    np.testing.assert_allclose(
        result.displacement[:, 0], reference[:, 0], rtol=0, atol=1e-10 * 0.01
    )
    np.testing.assert_allclose(result.velocity[:, 0], reference[:, 1], rtol=0, atol=1e-9 * 0.1)


def test_rk4_keeps_its_order_on_a_table_with_breakpoints_on_the_grid():
    """Each step sees one linear piece of the table (its end stage the slope of its own
    piece, not the next), so rk4 integrates a smooth problem step by step: order 4."""
    system, exact, omega = _table_ramp()
    T = 0.5
    x, v = exact(np.array([T]))[0]
    steps = [1e-2 / 2**i for i in range(4)]
    errors = [
        _state_error(simulate(system, "rk4", h, T, check=False), x, v, omega, 0.01) for h in steps
    ]
    assert observed_order(steps, errors) == pytest.approx(4, abs=0.2), errors


# --------------------------------------------------------------------------- 6. energy


def _energy_case():
    """A damped body shaken by its support and pushed by a force (smooth, zero at t = 0)."""
    return oscillator(
        2.0, 800.0, 0.1, x0=0.003,
        supports={"g": lumped.Support("g", motion="shake")},
        inputs={"shake": lumped.HarmonicInput("shake", 0.004, 2.3),
                "push": lumped.HarmonicInput("push", 30.0, 4.1)},
        forces={"f": lumped.Force("f", "b", "push")},
    )  # fmt: skip


#: stepper → (order, coarsest dt). The balance must close at least at the stepper's order.
ENERGY_ORDERS = {
    "euler": (1, 2e-4),
    "heun": (2, 2e-3),
    "rk4": (4, 8e-3),
    "symplectic-euler": (1, 2e-4),
    "trapezoid": (2, 2e-3),
    "newmark": (2, 2e-3),
}


@pytest.mark.parametrize("stepper", list(ENERGY_ORDERS))
def test_energy_balance_closes_to_the_stepper_order(stepper):
    order, dt = ENERGY_ORDERS[stepper]
    system = _energy_case()
    steps = [dt / 2**i for i in range(4)]
    errors = [
        float(np.max(np.abs(simulate(system, stepper, h, 2.0, check=False).balance_error)))
        for h in steps
    ]
    slope = observed_order(steps[1:], errors[1:])
    assert slope > order - 0.25, errors
    # Nothing else is lost: the error is small against the energy that went through.
    result = simulate(system, stepper, steps[-1], 2.0, check=False)
    through = (
        np.max(np.abs(result.support_work))
        + np.max(np.abs(result.force_work))
        + result.dissipated[-1]
    )
    assert errors[-1] < 0.05 * through


def test_energy_ledger_by_hand():
    """Dissipation = ∫ c (v − u')² dt, support work = −∫ f_element · u' dt, force work =
    ∫ F v dt (REFERENCES.md "Energy"), each integrated here by the trapezoid rule on
    a fine rk4 run, against the engine's own ledger."""
    system = _energy_case()
    result = simulate(system, "rk4", 1e-4, 2.0)
    mass, stiffness = 2.0, 800.0
    c = 2 * 0.1 * math.sqrt(stiffness * mass)
    t, x, v = result.time, result.displacement[:, 0], result.velocity[:, 0]
    u = 0.004 * np.sin(2 * math.pi * 2.3 * t)
    ud = 0.004 * 2 * math.pi * 2.3 * np.cos(2 * math.pi * 2.3 * t)
    F = 30.0 * np.sin(2 * math.pi * 4.1 * t)
    trapz = lambda y: np.concatenate([[0.0], np.cumsum(0.5 * (y[1:] + y[:-1]) * np.diff(t))])  # noqa: E731
    dissipated = trapz(c * (v - ud) ** 2)
    # The element (support below, body above) pulls the support up with its dynamic
    # tension f = k(x − u) + c(v − u'); the support pushes back with −f, so the power it
    # puts in is −f u': from m v' = −f + F, d/dt(½mv² + ½k(x − u)²) = −c(v − u')² − f u' + F v.
    support_work = trapz(-(stiffness * (x - u) + c * (v - ud)) * ud)
    force_work = trapz(F * v)
    kinetic = 0.5 * mass * v**2
    stored = 0.5 * stiffness * (x - u) ** 2
    np.testing.assert_allclose(result.kinetic, kinetic, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(result.stored, stored, rtol=1e-12, atol=1e-15)
    scale = np.max(np.abs(force_work))
    np.testing.assert_allclose(result.dissipated, dissipated, rtol=0, atol=1e-6 * scale)
    np.testing.assert_allclose(result.support_work, support_work, rtol=0, atol=1e-6 * scale)
    np.testing.assert_allclose(result.force_work, force_work, rtol=0, atol=1e-6 * scale)


def test_symplectic_euler_conserves_its_modified_energy():
    """Update (the stepper's docstring): v₁ = v − hω²x, x₁ = x + hv₁ (undamped). Then
    ω²x₁² + v₁² − hω²x₁v₁ = ω²x² + hω²xv₁ + v₁² = ω²x² + v² − hω²xv: exactly conserved
    (derived here; REFERENCES.md "Energy")."""
    mass, stiffness, h = 0.8, 500.0, 2e-3
    omega2 = stiffness / mass
    system = oscillator(mass, stiffness, 0.0, x0=0.02, v0=-0.4)
    result = simulate(system, "symplectic-euler", h, 20.0)
    x, v = result.displacement[:, 0], result.velocity[:, 0]
    modified = omega2 * x**2 + v**2 - h * omega2 * x * v
    assert np.max(np.abs(modified / modified[0] - 1)) < 1e-11
    # The plain energy is not conserved by the method: it oscillates at O(hω).
    plain = omega2 * x**2 + v**2
    assert np.max(np.abs(plain / plain[0] - 1)) > 0.1 * h * math.sqrt(omega2)


def test_explicit_euler_energy_grows_by_one_plus_omega_squared_per_step():
    """x₁ = x + hv, v₁ = v − hω²x ⇒ ω²x₁² + v₁² = (1 + h²ω²)(ω²x² + v²) (REFERENCES.md
    "Energy")."""
    mass, stiffness, h = 1.0, 400.0, 1e-3
    omega2 = stiffness / mass
    system = oscillator(mass, stiffness, 0.0, x0=0.01, v0=0.3)
    result = simulate(system, "euler", h, 0.5, check=False)
    energy = omega2 * result.displacement[:, 0] ** 2 + result.velocity[:, 0] ** 2
    steps = np.arange(len(energy))
    np.testing.assert_allclose(energy / energy[0], (1 + h * h * omega2) ** steps, rtol=1e-12)


# --------------------------------------------------------------------------- 8. contact


def hopper(v0: float = 1.0) -> tuple[lumped.System, float, float, float, float]:
    """A 10 kg body on a 4 kN/m compression-only spring, launched up at v0 (m/s), and
    the hand solution of the next test: (system, δ_s, t₁, v₁, t₂)."""
    mass, stiffness = 10.0, 4000.0
    omega = math.sqrt(stiffness / mass)
    system = lumped.System(
        name="hopper",
        bodies={"b": lumped.Body("b", mass, initial_velocity=v0)},
        supports={"g": lumped.Support("g")},
        springs={"tyre": lumped.Spring("tyre", ("g", "b"), stiffness, acts="compression")},
    )
    static = mass * G / stiffness
    t1 = math.asin(omega * static / v0) / omega
    v1 = math.sqrt(v0**2 - (omega * static) ** 2)
    return system, static, t1, v1, t1 + 2 * v1 / G


def test_lifting_body_flies_ballistic_between_lift_off_and_landing():
    """A body on a compression-only spring, pushed up at v0 from static equilibrium.

    Hand solution (x from static equilibrium, δ_s = mg/k the static compression,
    ω² = k/m): in contact x = (v0/ω) sin ωt, and the spring's total force −mg + kx
    reaches 0 at x = δ_s: lift-off at t₁ = arcsin(ωδ_s/v0)/ω with v₁ = √(v0² − ω²δ_s²).
    In flight only gravity acts: x = δ_s + v₁(t − t₁) − g(t − t₁)²/2, back at δ_s
    (landing) at t₂ = t₁ + 2v₁/g, with the apex δ_s + v₁²/(2g) at t₁ + v₁/g.
    """
    mass, stiffness, v0, dt = 10.0, 4000.0, 1.0, 1e-4
    omega = math.sqrt(stiffness / mass)
    system, static, t1, v1, t2 = hopper(v0)
    assert v0 > omega * static  # it does lift off
    result = simulate(system, "rk4", dt, t2 + 0.05)
    events = [(e.kind, e.element) for e in result.events]
    assert events[:2] == [("lift-off", "tyre"), ("landing", "tyre")]
    assert abs(result.events[0].time - t1) < 2 * dt
    assert abs(result.events[1].time - t2) < 2 * dt
    t, x = result.time, result.displacement[:, 0]
    contact = t < t1 - dt
    np.testing.assert_allclose(
        x[contact], v0 / omega * np.sin(omega * t[contact]), rtol=0, atol=1e-9
    )
    flight = (t > t1 + dt) & (t < t2 - dt)
    tau = t[flight] - t1
    np.testing.assert_allclose(x[flight], static + v1 * tau - 0.5 * G * tau**2, rtol=0, atol=1e-6)
    np.testing.assert_allclose(result.velocity[flight, 0], v1 - G * tau, rtol=0, atol=1e-5)
    np.testing.assert_allclose(result.acceleration[flight, 0], -G, rtol=1e-9)
    # The tyre carries no force in flight and −mg + kx in contact.
    tyre = result.element_ids.index("tyre")
    assert np.all(result.force[flight, tyre] == 0.0)
    np.testing.assert_allclose(
        result.force[contact, tyre], -mass * G + stiffness * x[contact], rtol=0, atol=1e-9
    )
    assert np.max(x) == pytest.approx(static + v1**2 / (2 * G), abs=1e-6)


def test_event_in_the_substep_after_a_jump_is_dated_after_it():
    """A body resting on a compression-only tyre; the road under it drops by the tyre's
    static compression δ_s plus ε at t_j (inside a step). The tyre goes slack at t_j
    (lift-off), the body falls freely, x = −g τ²/2, and the tyre touches again when
    x − u = δ_s, i.e. after τ = √(2ε/g) (landing) — here within the same step."""
    mass, stiffness, dt, t_jump = 10.0, 4000.0, 1e-3, 0.1003
    static = mass * G / stiffness
    tau = 3.5e-4
    epsilon = G * tau**2 / 2
    system = lumped.System(
        name="drop",
        bodies={"b": lumped.Body("b", mass)},
        supports={"road": lumped.Support("road", motion="drop")},
        springs={"tyre": lumped.Spring("tyre", ("road", "b"), stiffness, acts="compression")},
        inputs={"drop": lumped.StepInput("drop", -(static + epsilon), t_jump)},
    )
    result = simulate(system, "rk4", dt, 0.12)
    tyre = [e for e in result.events if e.element == "tyre"]
    assert [e.kind for e in tyre[:2]] == ["lift-off", "landing"]
    assert tyre[0].time == t_jump
    assert t_jump < tyre[1].time < math.ceil(t_jump / dt) * dt  # within the rest of that step
    assert abs(tyre[1].time - (t_jump + tau)) < 0.5 * (math.ceil(t_jump / dt) * dt - t_jump)


def test_end_stop_maximum_deflection_from_energy():
    """A body on a spring k with an end stop (gap g, extra stiffness k_g), launched at v0
    from static equilibrium, no damping: beyond the gap ½kx² + ½k_g(x − g)² = ½mv0²
    (energy conservation), so x_max is the positive root of
    (k + k_g)x² − 2k_g g x + k_g g² − m v0² = 0; the stop is met at
    t_c = arcsin(ωg/v0)/ω (still on the plain spring, x = (v0/ω) sin ωt)."""
    mass, stiffness, gap, gap_stiffness, v0, dt = 10.0, 4000.0, 0.02, 1.0e5, 1.0, 1e-4
    omega = math.sqrt(stiffness / mass)
    system = lumped.System(
        name="stop",
        bodies={"b": lumped.Body("b", mass, initial_velocity=v0)},
        supports={"g": lumped.Support("g")},
        springs={
            "k": lumped.Spring("k", ("g", "b"), stiffness, gap=gap, gap_stiffness=gap_stiffness)
        },
    )
    a, b, c = (
        stiffness + gap_stiffness,
        -2 * gap_stiffness * gap,
        gap_stiffness * gap**2 - mass * v0**2,
    )
    x_max = (-b + math.sqrt(b * b - 4 * a * c)) / (2 * a)
    assert x_max > gap
    result = simulate(system, "rk4", dt, 0.3)
    x = result.displacement[:, 0]

    def extreme(i):
        """Vertex of the parabola through samples i − 1, i, i + 1 (a sampled peak of the
        stiff phase, ω_g = √((k + k_g)/m), is low by up to (ω_g dt)²/8 ≈ 1e-5)."""
        y0, y1, y2 = x[i - 1 : i + 2]
        return y1 - (y2 - y0) ** 2 / (8 * (y2 - 2 * y1 + y0))

    # RK4 loses its order where the force has a kink (at the gap): tolerance 1e-5.
    assert extreme(int(np.argmax(x))) == pytest.approx(x_max, rel=1e-5)
    assert extreme(int(np.argmin(x))) == pytest.approx(-x_max, rel=1e-5)  # the stop acts both ways
    first = result.events[0]
    assert (first.kind, first.element) == ("stop-contact", "k")
    assert abs(first.time - math.asin(omega * gap / v0) / omega) < 2 * dt
    assert result.events[1].kind == "stop-release"
    # Undamped: energy (with the stop's share) is kept, up to the kinks' step errors.
    assert np.max(np.abs(result.balance_error)) < 2e-5 * 0.5 * mass * v0**2


@pytest.mark.parametrize(
    "stepper, tolerance",
    [("newmark", 2e-6), ("trapezoid", 2e-6), ("central-difference", 2e-6), ("backward-euler", 1e-3)],
)
def test_implicit_steppers_run_a_lifting_body_against_the_hand_solution(stepper, tolerance):
    """The hand solution of test_lifting_body_flies_ballistic_between_lift_off_and_landing,
    run by Newton's method in every step. Tolerances follow each method's order at
    ωh = 2·10⁻³: second order for Newmark's average acceleration, the trapezoid and
    central difference (Newmark with β = 0, γ = ½; Hughes, The Finite Element
    Method, 1987, §9.1 [recalled from memory]), first order for backward Euler."""
    dt = 1e-4
    system, static, t1, v1, t2 = hopper()
    result = simulate(system, stepper, dt, t2 + 0.05)
    assert result.status == "completed"
    events = [(e.kind, e.element) for e in result.events]
    assert events[:2] == [("lift-off", "tyre"), ("landing", "tyre")]
    assert abs(result.events[0].time - t1) < 2 * dt + tolerance
    assert abs(result.events[1].time - t2) < 2 * dt + 10 * tolerance
    x = result.displacement[:, 0]
    assert np.max(x) == pytest.approx(static + v1**2 / (2 * G), rel=tolerance * 20)
    flight = (result.time > t1 + dt + 10 * tolerance) & (result.time < t2 - dt - 10 * tolerance)
    np.testing.assert_allclose(result.acceleration[flight, 0], -G, rtol=1e-9)


@pytest.mark.parametrize("stepper", ["newmark", "trapezoid", "central-difference"])
def test_implicit_steppers_keep_the_end_stop_energy(stepper):
    """x_max of test_end_stop_maximum_deflection_from_energy (energy conservation),
    with Newton in every step; the average-acceleration rule conserves the energy of
    a linear undamped system exactly and central difference keeps its error bounded
    (Hughes 1987, §9.1 [recalled from memory]), so only the kinks at the gap and the
    step's own error cost accuracy."""
    mass, stiffness, gap, gap_stiffness, v0, dt = 10.0, 4000.0, 0.02, 1.0e5, 1.0, 1e-4
    system = lumped.System(
        name="stop",
        bodies={"b": lumped.Body("b", mass, initial_velocity=v0)},
        supports={"g": lumped.Support("g")},
        springs={"k": lumped.Spring("k", ("g", "b"), stiffness, gap=gap, gap_stiffness=gap_stiffness)},
    )
    a, b, c = stiffness + gap_stiffness, -2 * gap_stiffness * gap, gap_stiffness * gap**2 - mass * v0**2
    x_max = (-b + math.sqrt(b * b - 4 * a * c)) / (2 * a)
    result = simulate(system, stepper, dt, 0.3)
    assert np.max(result.displacement[:, 0]) == pytest.approx(x_max, rel=1e-4)
    assert np.min(result.displacement[:, 0]) == pytest.approx(-x_max, rel=1e-4)
    assert [e.kind for e in result.events[:2]] == ["stop-contact", "stop-release"]
    assert np.max(np.abs(result.balance_error)) < 1e-4 * 0.5 * mass * v0**2


def test_newton_path_on_a_linear_law_equals_the_affine_newmark_map():
    """A two-body system whose end stop is never reached runs through Newton's method;
    the same system without the stop runs through the affine Newmark map, which the
    step-limit tests check against Hughes' amplification matrix. Both are Newmark's
    formula, so they agree to rounding."""
    bodies = {"m1": lumped.Body("m1", 2.0, initial_displacement=0.01), "m2": lumped.Body("m2", 1.0)}
    springs = {"k1": lumped.Spring("k1", ("g", "m1"), 900.0), "k2": lumped.Spring("k2", ("m1", "m2"), 400.0)}
    dampers = {"c1": lumped.Damper("c1", ("m1", "m2"), coefficient=3.0)}
    plain = lumped.System(name="pair", bodies=bodies, supports={"g": lumped.Support("g")}, springs=springs,
                          dampers=dampers)  # fmt: skip
    far_stop = dict(springs, k1=lumped.Spring("k1", ("g", "m1"), 900.0, gap=10.0, gap_stiffness=1e6))
    newton = simulate(dataclasses.replace(plain, springs=far_stop), "newmark", 2e-3, 1.0)
    affine = simulate(plain, "newmark", 2e-3, 1.0)
    np.testing.assert_allclose(newton.displacement, affine.displacement, rtol=0, atol=1e-12)
    np.testing.assert_allclose(newton.velocity, affine.velocity, rtol=0, atol=1e-10)
    np.testing.assert_allclose(newton.dissipated, affine.dissipated, rtol=1e-9, atol=1e-15)


def test_newmark_converges_at_second_order_on_a_nonlinear_corner():
    """Newmark (average acceleration) is second order (Hughes 1987, §9.1 [recalled from
    memory]): on the quarter-car demo, whose tyre lifts off and whose end stop is hit,
    halving the step quarters the error against a fine RK4 run (the kinks cost a
    little: the ratio must exceed 3)."""
    prepared = lumped.simulate.prepare(lumped.load(lumped.demo_path("quarter_car")))
    reference = simulate(prepared, "rk4", 1e-5, 1.0, output_every=400, check=False)
    errors = []
    for dt in (1e-3, 5e-4, 2.5e-4):
        run = simulate(prepared, "newmark", dt, 1.0, output_every=round(4e-3 / dt), check=False)
        errors.append(np.max(np.abs(run.displacement - reference.displacement)))
    assert errors[0] / errors[1] > 3 and errors[1] / errors[2] > 3


# --------------------------------------------------------------------------- 9. run mechanics


def test_time_grid_includes_start_and_end_and_is_computed_not_accumulated():
    system = oscillator(1.0, 100.0, 0.1, x0=0.01)
    dt = 1e-3
    result = simulate(system, "rk4", dt, 0.7)
    assert result.time[0] == 0.0 and result.time[-1] == 0.7
    np.testing.assert_array_equal(result.time[:-1], np.arange(len(result.time) - 1) * dt)


def test_duration_not_a_whole_number_of_steps_ends_with_a_short_step():
    mass, stiffness, zeta = 1.0, 100.0, 0.1
    system = oscillator(mass, stiffness, zeta, x0=0.01, v0=0.05)
    dt, duration = 1e-3, 0.0105
    result = simulate(system, "rk4", dt, duration)
    assert result.time[-1] == duration
    assert result.time[-2] == pytest.approx(0.010, abs=1e-15)
    assert result.steps == 11
    # The last step is half a step long: the end state is the closed form at 0.0105 s
    # (a full last step would land 0.5 ms later, off by ~v·0.5 ms ≈ 2.5e-5 m).
    x, v = free_response(duration, math.sqrt(stiffness / mass), zeta, 0.01, 0.05)
    assert result.displacement[-1, 0] == pytest.approx(x, abs=1e-13)
    assert result.velocity[-1, 0] == pytest.approx(v, abs=1e-11)


@pytest.mark.parametrize("rate, every", [(100.0, 10), (300.0, 3), (1000.0, 1)])
def test_output_rate_samples_every_round_steps(rate, every):
    system = oscillator(1.0, 100.0, 0.1, x0=0.01)
    dt, duration = 1e-3, 0.2005
    result = simulate(system, "rk4", dt, duration, output_rate=rate)
    full = simulate(system, "rk4", dt, duration)
    assert every == max(1, round(1 / (rate * dt)))
    steps = np.arange(0, int(duration / dt) + 1, every)
    np.testing.assert_allclose(result.time[:-1], steps * dt, rtol=0, atol=1e-15)
    assert result.time[-1] == duration
    # The kept samples are the full run's samples at those steps: decimation, not
    # interpolation. Where no input acts, the steps between samples are joined into
    # one map (the same RK4 steps), so they agree to rounding rather than bit for bit.
    rounding = 1e-12 * np.max(np.abs(full.displacement))
    np.testing.assert_allclose(result.displacement[:-1], full.displacement[steps], rtol=0, atol=rounding)
    np.testing.assert_allclose(result.displacement[-1], full.displacement[-1], rtol=0, atol=rounding)
    by_count = simulate(system, "rk4", dt, duration, output_every=every)
    np.testing.assert_array_equal(by_count.time, result.time)


def test_progress_is_reported_up_to_one():
    system = oscillator(1.0, 100.0, 0.1, x0=0.01)
    seen = []
    simulate(system, "rk4", 1e-4, 3.0, progress=seen.append)
    assert seen and seen[-1] == 1.0
    assert all(b >= a for a, b in zip(seen, seen[1:], strict=False))


def test_cancel_stops_the_run_and_keeps_the_samples():
    system = oscillator(1.0, 100.0, 0.1, x0=0.01)
    calls = []

    def cancel():
        calls.append(1)
        return True

    result = simulate(system, "rk4", 1e-4, 10.0, cancel=cancel)
    assert calls and result.status == "cancelled"
    assert 1 < len(result.time) and result.time[-1] < 10.0
    full = simulate(system, "rk4", 1e-4, 10.0)
    kept = len(result.time)
    np.testing.assert_array_equal(result.time, full.time[:kept])
    np.testing.assert_array_equal(result.displacement, full.displacement[:kept])
    assert f"{result.time[-1]:.6g}" in result.message


def test_too_large_output_is_refused_before_the_run_with_its_size():
    system = oscillator(1.0, 100.0, 0.1, x0=0.01)
    seen = []
    dt, duration = 1e-4, 10.0
    with pytest.raises(RunError) as info:
        simulate(system, "rk4", dt, duration, max_output_bytes=1_000_000, progress=seen.append)
    assert seen == []  # never started
    text = str(info.value)
    samples = int(re.search(r"([\d,]+) samples", text).group(1).replace(",", ""))
    expected = round(duration / dt) + 1  # t = 0 … T, every step
    assert expected <= samples <= expected + 1
    assert re.search(r"[\d,.]+ MiB", text)
    # The same run under a roomy cap goes through.
    assert simulate(system, "rk4", dt, duration, max_output_bytes=10**9).status == "completed"


def test_diverging_run_stops_and_names_time_body_and_step_limit():
    mass, stiffness, zeta, dt = 10.0, 4000.0, 0.05, 0.05
    omega = math.sqrt(stiffness / mass)
    system = oscillator(mass, stiffness, zeta, x0=0.01, name="diverging", body="cab")
    limit = 2 * zeta / omega  # explicit Euler's exact limit hω = 2ζ (REFERENCES.md "Steppers")
    assert dt > 5 * limit
    result = simulate(system, "euler", dt, 20.0)
    assert result.status == "diverged"
    assert result.time[-1] < 20.0 and len(result.time) > 2
    text = result.message
    time_said = float(re.search(r"t = ([-+0-9.eE]+) s", text).group(1))
    assert time_said == pytest.approx(result.time[-1], rel=1e-5)
    assert "'cab'" in text
    limit_said = float(re.search(r"stability limit ([-+0-9.eE]+) s", text).group(1))
    assert limit_said == pytest.approx(limit, rel=1e-5)
    # The samples up to there are explicit Euler's iterates, z_{k+1} = (I + hA) z_k
    # (scipy.signal.cont2discrete 'euler').
    c = 2 * zeta * math.sqrt(stiffness * mass)
    A = np.array([[0.0, 1.0], [-stiffness / mass, -c / mass]])
    Ad = sig.cont2discrete((A, np.zeros((2, 1)), np.eye(2), np.zeros((2, 1))), dt, method="euler")[
        0
    ]
    z = np.array([0.01, 0.0])
    states = [z]
    for _ in range(len(result.time) - 1):
        z = Ad @ z
        states.append(z)
    states = np.array(states)
    np.testing.assert_allclose(result.displacement[:, 0], states[:, 0], rtol=1e-9, atol=1e-15)
    np.testing.assert_allclose(result.velocity[:, 0], states[:, 1], rtol=1e-9, atol=1e-15)


@pytest.mark.parametrize("stepper", ["exact"])
def test_linear_only_steppers_refuse_a_nonlinear_system_and_name_the_element(stepper):
    system = lumped.System(
        name="one-sided",
        bodies={"b": lumped.Body("b", 1.0)},
        supports={"g": lumped.Support("g")},
        springs={"tyre": lumped.Spring("tyre", ("g", "b"), 100.0, acts="compression")},
    )
    with pytest.raises(RunError, match="tyre.*newmark"):
        simulate(system, stepper, 1e-3, 0.1)


@pytest.mark.parametrize(
    "settings, words",
    [(dict(stepper="rk4", dt=-1e-3, duration=1.0), "dt"),
     (dict(stepper="rk4", dt=1e-3, duration=0.0), "duration"),
     (dict(stepper="rk9", dt=1e-3, duration=1.0), "rk9"),
     (dict(stepper=None, dt=1e-3, duration=1.0), "stepper")],
)  # fmt: skip
def test_bad_settings_are_refused(settings, words):
    system = oscillator(1.0, 100.0, 0.1, x0=0.01)
    with pytest.raises(RunError, match=words):
        simulate(system, settings["stepper"], settings["dt"], settings["duration"])


def test_step_longer_than_the_run_is_one_step_of_the_run():
    system = oscillator(1.0, 100.0, 0.1, x0=0.01)
    result = simulate(system, "rk4", 0.5, 0.01)
    assert result.time.tolist() == [0.0, 0.01]


# --------------------------------------------------------------------------- adaptive comparison runs


@pytest.mark.parametrize(
    "method",
    ["adaptive-rk45", "adaptive-dop853", "adaptive-radau", "adaptive-bdf", "adaptive-lsoda"],
)
def test_adaptive_runs_match_the_closed_form(method):
    mass, stiffness, zeta, x0, v0 = 3.0, 1200.0, 0.15, 0.012, -0.35
    omega = math.sqrt(stiffness / mass)
    result = simulate(oscillator(mass, stiffness, zeta, x0, v0), method, 1e-3, 1.0)
    assert result.status == "completed"
    np.testing.assert_allclose(result.time, np.arange(1001) * 1e-3, rtol=0, atol=1e-12)
    x, v = free_response(result.time, omega, zeta, x0, v0)
    # scipy's default tolerances in the engine: rtol 1e-8, atol 1e-10.
    np.testing.assert_allclose(result.displacement[:, 0], x, rtol=0, atol=1e-6 * x0)
    np.testing.assert_allclose(result.velocity[:, 0], v, rtol=0, atol=1e-6 * abs(v0))


def test_adaptive_run_applies_a_support_jump():
    mass, stiffness, zeta, lift, t_jump = 1.5, 2400.0, 0.3, 0.01, 0.1
    system = oscillator(
        mass, stiffness, zeta,
        supports={"g": lumped.Support("g", motion="kerb")},
        inputs={"kerb": lumped.StepInput("kerb", lift, t_jump)},
    )  # fmt: skip
    c = 2 * zeta * math.sqrt(stiffness * mass)
    result = simulate(system, "adaptive-dop853", 1e-3, 0.5)
    after = result.time >= t_jump
    grid = result.time[after] - t_jump
    response = control.step_response(
        control.tf([c, stiffness], [mass, c, stiffness]), np.arange(len(grid)) * 1e-3
    )
    np.testing.assert_allclose(grid, np.arange(len(grid)) * 1e-3, rtol=0, atol=1e-12)
    np.testing.assert_allclose(
        result.displacement[after, 0], lift * response.outputs, rtol=0, atol=1e-7 * lift
    )


def test_kernels_flush_subnormals_inside_and_restore_the_callers_mode():
    # IEEE 754 binary64: the smallest normal number is 2.2e-308 and 1e-160² = 1e-320
    # is subnormal (common practice). Inside the kernels subnormals are flushed to
    # zero; the caller's arithmetic keeps them after a run.
    system = lumped.uniform_chain(3, mass=1.0, stiffness=1e4, damping=1.0)
    bodies = {k: dataclasses.replace(b, initial_velocity=1e-160) for k, b in system.bodies.items()}
    run = simulate(dataclasses.replace(system, bodies=bodies), "rk4", 1e-3, 0.01, check=False)
    assert run.dissipated[-1] == 0.0  # c·v² ≈ 1e-320 per step flushed to zero
    assert run.velocity[-1, 0] > 0.0  # the normal-sized state itself is kept
    tiny = np.float64(1e-160)
    assert tiny * tiny == pytest.approx(1e-320, rel=1e-3)


def test_a_prepared_system_runs_exactly_as_the_system_and_is_reusable():
    # Consistency of the engine's own set-up (no outside reference needed: the same
    # arithmetic must give the same bits).
    from lumped.simulate import prepare

    system = lumped.load(lumped.demo_path("quarter_car"))
    prepared = prepare(system)
    direct = simulate(system, "rk4", 1e-3, 1.0, check=False)
    first = simulate(prepared, "rk4", 1e-3, 1.0, check=False)
    other = simulate(prepared, "heun", 5e-4, 0.5, check=False)
    again = simulate(prepared, "rk4", 1e-3, 1.0, check=False)
    for run in (first, again):
        np.testing.assert_array_equal(run.displacement, direct.displacement)
        np.testing.assert_array_equal(run.force, direct.force)
        np.testing.assert_array_equal(run.dissipated, direct.dissipated)
        assert [e.time for e in run.events] == [e.time for e in direct.events]
    assert other.stepper == "heun" and other.time[-1] == 0.5


@pytest.mark.parametrize("method", ["adaptive-dop853", "adaptive-radau"])
def test_adaptive_runs_report_contact_events_at_the_hand_times(method):
    """Lift-off and landing of the hopper (hand solution in hopper()), found by
    solve_ivp's event location on the engine's own contact values."""
    system, _, t1, _, t2 = hopper()
    result = simulate(system, method, None, t2 + 0.05, output_rate=1000)
    tyre = [(e.kind, e.time) for e in result.events if e.element == "tyre"]
    assert [k for k, _ in tyre[:2]] == ["lift-off", "landing"]
    assert tyre[0][1] == pytest.approx(t1, abs=1e-6)
    assert tyre[1][1] == pytest.approx(t2, abs=1e-5)


@pytest.mark.parametrize("stepper", ["newmark", "trapezoid", "backward-euler", "central-difference"])
def test_large_linear_systems_step_the_same_update_with_sparse_factorisations(stepper, monkeypatch):
    """Above DENSE_MAP_LIMIT bodies the implicit steppers apply their update step by
    step with sparse factorisations instead of a dense one-step map; it is the same
    formula (the dense map is checked against Hughes' amplification matrices in
    test_steppers), so both agree to rounding. A 250-body chain shaken at its ground
    and pushed at its top."""
    from lumped.linear_steppers import DENSE_MAP_LIMIT

    chain = lumped.uniform_chain(250, mass=0.5, stiffness=2e5, damping=5.0)
    assert len(chain.bodies) > DENSE_MAP_LIMIT
    top = f"m{len(chain.bodies)}"
    system = dataclasses.replace(
        chain,
        supports={"ground": lumped.Support("ground", motion="shake")},
        inputs={"shake": lumped.HarmonicInput("shake", 1e-3, 3.0), "push": lumped.StepInput("push", 10.0, 0.0105)},
        forces={"load": lumped.Force("load", top, "push")},
    )
    sparse = simulate(system, stepper, 1e-3, 0.05, check=False)
    monkeypatch.setattr(lumped.simulate, "DENSE_MAP_LIMIT", 10_000)
    dense = simulate(system, stepper, 1e-3, 0.05, check=False)
    scale = np.max(np.abs(dense.displacement))
    np.testing.assert_allclose(sparse.displacement, dense.displacement, rtol=0, atol=1e-9 * scale)
    np.testing.assert_allclose(sparse.velocity, dense.velocity, rtol=0, atol=1e-8 * np.max(np.abs(dense.velocity)))
    np.testing.assert_allclose(sparse.dissipated, dense.dissipated, rtol=1e-8, atol=1e-14)


@pytest.mark.parametrize("stepper", ["newmark", "trapezoid", "backward-euler"])
def test_newton_settles_near_rest_under_large_static_loads(stepper):
    """Regression: the quarter car settles after its bump to accelerations of
    1e-3 m/s² while its tyre carries 4.1 kN of static load; the rounding of those
    force sums (ε·4.1 kN / 40 kg) once exceeded Newton's relative tolerance and the
    run stopped at t ≈ 3.5 s. Newton's floor now follows the static loads (common
    practice: a tolerance no finer than the rounding of the residual)."""
    prepared = lumped.simulate.prepare(lumped.load(lumped.demo_path("quarter_car")))
    run = simulate(prepared, stepper, 2e-4, 10.0, output_every=50, check=False)
    assert run.status == "completed", run.message
    reference = simulate(prepared, "rk4", 1e-4, 10.0, output_every=100, check=False)
    tolerance = {"newmark": 1e-4, "trapezoid": 1e-4, "backward-euler": 2e-2}[stepper]
    scale = np.max(np.abs(reference.displacement))
    np.testing.assert_allclose(run.displacement, reference.displacement, rtol=0, atol=tolerance * scale)


def test_a_run_leaves_numpys_page_advice_as_it_found_it():
    # lumped switches numpy's huge-page advice off only while it runs (see
    # lumped.simulate._plain_pages); the caller's setting is back afterwards.
    core = getattr(np, "_core", None) or np.core
    advise = core.multiarray._set_madvise_hugepage  # numpy ≥ 1.20, and the project needs ≥ 1.26
    before = advise(True)
    try:
        simulate(oscillator(1.0, 100.0, 0.1, x0=0.01), "rk4", 1e-3, 0.05, check=False)
        assert advise(True) is True
        advise(False)
        simulate(oscillator(1.0, 100.0, 0.1, x0=0.01), "rk4", 1e-3, 0.05, check=False)
        assert advise(before) is False
    finally:
        advise(before)


@pytest.mark.parametrize("specialise", [True, False])
def test_a_run_frees_its_engine_when_it_returns(specialise, monkeypatch):
    # The engine's buffers go as soon as a run returns, without waiting for the cycle
    # collector (else every run's buffers would be fresh memory); regression of the
    # kernels' closures holding the engine.
    import gc
    import weakref

    import lumped.simulate as engine

    engines = []
    make = engine._Engine.__init__

    def recorded(self, *args, **kwargs):
        engines.append(weakref.ref(self))
        make(self, *args, **kwargs)

    monkeypatch.setattr(engine._Engine, "__init__", recorded)
    system = oscillator(1.0, 100.0, 0.1, x0=0.01)
    enabled = gc.isenabled()
    gc.disable()
    try:
        result = simulate(system, "rk4", 1e-3, 0.5, specialise=specialise, check=False)
        assert engines[-1]() is None
    finally:
        if enabled:
            gc.enable()
    assert result.status == "completed"


def test_convergence_study_says_why_contacts_lower_the_order():
    # On the quarter-car demo (invented) the end stop and the lifting tyre switch
    # abruptly, so RK4's error falls more slowly than h⁴ near the switches (common
    # practice: a non-smooth right-hand side lowers the order of one-step methods); the
    # study says so. A smooth linear system gets no such note.
    system = lumped.load(lumped.demo_path("quarter_car"))
    study = convergence_study(system, "rk4", 2e-4, 0.5, levels=4)
    assert study.observed_order is not None and study.observed_order < study.declared_order - 1
    (note,) = study.notes
    assert "tyre" in note and "suspension_spring" in note
    smooth = convergence_study(oscillator(1.0, 100.0, 0.1, x0=0.01), "rk4", 1e-2, 1.0, levels=4)
    assert smooth.notes == []


def test_element_channels_are_worked_out_once_when_first_read(monkeypatch):
    # A run's element channels (forces, deflections, the springs' stored energy) come
    # from its samples when first read, once; a run read only for its displacements
    # does not pay for them.
    import lumped.simulate as engine

    calls = []
    series = engine.kernels.element_series
    monkeypatch.setattr(engine.kernels, "element_series", lambda *args: calls.append(1) or series(*args))
    run = simulate(oscillator(2.0, 800.0, 0.05, x0=0.01), "rk4", 1e-3, 0.2, check=False)
    assert calls == [] and run.displacement.shape == (201, 1)
    # the spring's force is k x − m g (tension positive; static included), its energy ½ k x²
    np.testing.assert_allclose(run.force[:, 0], 800.0 * run.displacement[:, 0] - 2.0 * 9.81, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(run.stored, 0.5 * 800.0 * run.displacement[:, 0] ** 2, rtol=1e-12, atol=1e-15)
    assert len(calls) == 1


def test_free_blocks_of_two_mebibytes_are_counted_from_the_kernels_table(tmp_path):
    # /proc/buddyinfo lists free blocks of 2^order pages per zone (the Linux kernel's
    # documentation, Documentation/filesystems/proc.rst [recalled from memory]); with
    # 4 KiB pages, orders 9 and 10 are the blocks of 2 and 4 MiB.
    import os

    from lumped.simulate import _huge_pages_free

    table = tmp_path / "buddyinfo"
    table.write_text(
        "Node 0, zone      DMA      0      0      0      0      0      0      0      0      1      1      3\n"
        "Node 0, zone   Normal   8920   6152   3189   1133   1271    666    232    144     67     15    206\n"
    )
    if os.sysconf("SC_PAGE_SIZE") == 4096:
        assert _huge_pages_free(str(table)) == (1 + 15) * 2**21 + (3 + 206) * 2**22
    assert _huge_pages_free(str(tmp_path / "missing")) == 0
    table.write_text("Node 0, zone   Normal   8920   ?\nNode 0\n")  # a table this reading does not know
    assert _huge_pages_free(str(table)) == 0
