"""Explicit Runge–Kutta steps of small linear systems as one affine map per step
(lumped.linear_rk): the maps against the textbook stability polynomial and equations
of motion, runs against closed forms, and the generated kernels against the
element-loop kernel they replace (the same steps, so equal to rounding)."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

import lumped
from lumped.linear_rk import AFFINE_RK_LIMIT, rk_maps
from lumped.simulate import prepare, simulate
from lumped.steppers import get_stepper
from lumped.variants import simulate_variants


def linear_corner() -> lumped.System:
    """The quarter-car demo (invented) made linear: no end stop, a tyre that pulls as
    well as pushes, the dampers at their mean coefficient."""
    system = lumped.load(lumped.demo_path("quarter_car"))
    springs = {k: dataclasses.replace(s, gap=None, gap_stiffness=None, acts="both") for k, s in system.springs.items()}
    dampers = {k: lumped.Damper(d.id, d.between, coefficient=d.linear_coefficient) for k, d in system.dampers.items()}
    return dataclasses.replace(system, springs=springs, dampers=dampers)


def stepped_oscillator(mass=2.0, stiffness=1800.0, zeta=0.2, force=25.0, t_step=0.05) -> lumped.System:
    """One body on a spring and damper to a fixed support, a force step at t_step
    (invented values)."""
    c = 2 * zeta * math.sqrt(stiffness * mass)
    return lumped.System(
        name="stepped oscillator",
        bodies={"b": lumped.Body("b", mass)},
        supports={"g": lumped.Support("g")},
        springs={"k": lumped.Spring("k", ("g", "b"), stiffness)},
        dampers={"c": lumped.Damper("c", ("g", "b"), coefficient=c)},
        inputs={"load": lumped.StepInput("load", force, t_step)},
        forces={"f": lumped.Force("f", "b", "load")},
    )


def _relative(a: np.ndarray, b: np.ndarray) -> float:
    return float(np.max(np.abs(a - b)) / max(np.max(np.abs(b)), 1e-300))


def test_rk4_map_is_its_stability_polynomial_of_the_equations_of_motion():
    # Classical RK4 on z' = Az: z₁ = (I + hA + (hA)²/2 + (hA)³/6 + (hA)⁴/24) z —
    # Hairer, Nørsett & Wanner, Solving ODEs I, §II.1 [recalled from memory]; A from
    # Newton's second law, m x'' = −k x − c x' (+ F).
    mass, stiffness, zeta = 2.0, 1800.0, 0.2
    c = 2 * zeta * math.sqrt(stiffness * mass)
    lanes = prepare(stepped_oscillator(mass, stiffness, zeta)).lanes
    A = np.array([[0.0, 1.0], [-stiffness / mass, -c / mass]])
    np.testing.assert_allclose(lanes.A[0], A, rtol=1e-14)
    a, b, c_nodes = get_stepper("rk4").tableau.arrays()
    offsets = np.unique(np.concatenate([c_nodes, [1.0]]))
    h = 2e-3
    maps = rk_maps(lanes, a, b, np.searchsorted(offsets, c_nodes), len(offsets), len(offsets) - 1, h)
    hA = h * A
    polynomial = np.eye(2) + hA + hA @ hA / 2 + hA @ hA @ hA / 6 + hA @ hA @ hA @ hA / 24
    np.testing.assert_allclose(maps.step[: 4 * 16 : 16].reshape(2, 2), polynomial, rtol=1e-13, atol=1e-16)


def test_generated_rk4_kernel_meets_the_closed_form_step_response():
    # Step response of a damped oscillator to a force step F at t_s, at T — Ogata,
    # Modern Control Engineering, 5th ed., §5-3 [recalled from memory]:
    # x = (F/k)(1 − e^{−ζωτ}(cos ω_d τ + ζ/√(1−ζ²) sin ω_d τ)), τ = T − t_s.
    mass, stiffness, zeta, force, t_step, T = 2.0, 1800.0, 0.2, 25.0, 0.05, 0.4
    omega = math.sqrt(stiffness / mass)
    omega_d = omega * math.sqrt(1 - zeta**2)
    tau = T - t_step
    decay = math.exp(-zeta * omega * tau)
    x = force / stiffness * (1 - decay * (math.cos(omega_d * tau) + zeta / math.sqrt(1 - zeta**2) * math.sin(omega_d * tau)))
    system = stepped_oscillator(mass, stiffness, zeta, force, t_step)
    fast = simulate(system, "rk4", 1e-3, T, specialise=True)
    general = simulate(system, "rk4", 1e-3, T, specialise=False)
    assert fast.displacement[-1, 0] == pytest.approx(x, rel=1e-7)
    assert _relative(fast.displacement, general.displacement) < 1e-12
    assert _relative(fast.dissipated, general.dissipated) < 1e-11
    assert fast.balance_ratio < 1e-8


@pytest.mark.parametrize("stepper", ["rk4", "heun"])
def test_generated_kernel_takes_the_element_loops_steps_on_the_corner(stepper):
    # The same explicit steps written as a matrix map: equal to rounding, every channel.
    prepared = prepare(linear_corner())
    fast = simulate(prepared, stepper, 2e-4, 1.0, output_rate=1000, check=False, specialise=True)
    general = simulate(prepared, stepper, 2e-4, 1.0, output_rate=1000, check=False, specialise=False)
    np.testing.assert_array_equal(fast.time, general.time)
    for name in ("displacement", "velocity", "acceleration", "force", "deflection", "kinetic", "stored",
                 "dissipated", "support_work"):  # fmt: skip
        assert _relative(getattr(fast, name), getattr(general, name)) < 1e-11, name
    assert fast.balance_ratio == pytest.approx(general.balance_ratio, rel=1e-6, abs=1e-12)


def test_variants_as_lanes_equal_the_variants_run_one_by_one():
    base = linear_corner()
    changes = {"springs.suspension_spring.stiffness": [16e3, 24e3, 31e3],
               "dampers.suspension_damper.coefficient": [1.1e3, 1.9e3, 2.6e3]}  # fmt: skip
    runs = simulate_variants(base, changes, "rk4", dt=5e-4, duration=1.5, output_rate=200, specialise=True)
    assert runs.status == "completed"
    for i in range(3):
        alone = simulate(runs.system(i), "rk4", 5e-4, 1.5, output_rate=200, check=False, specialise=False)
        assert _relative(runs.displacement[i], alone.displacement) < 1e-11
        assert _relative(runs.acceleration[i], alone.acceleration) < 1e-11
        assert _relative(runs.force[i], alone.force) < 1e-11


def test_a_diverging_lane_stops_every_lane_at_the_same_step_as_the_element_loop():
    # A tyre stiff enough to break RK4's step limit in the last variant only.
    base = linear_corner()
    changes = {"springs.tyre.stiffness": [2.3e5, 2.4e5, 4.0e9]}
    settings = dict(dt=5e-4, duration=1.0, output_rate=500)
    fast = simulate_variants(base, changes, "rk4", **settings, specialise=True)
    general = simulate_variants(base, changes, "rk4", **settings, specialise=False)
    assert fast.status == general.status == "diverged"
    assert fast.batch.steps == general.batch.steps
    np.testing.assert_array_equal(fast.time, general.time)
    assert _relative(fast.displacement[0], general.displacement[0]) < 1e-11


def test_nonlinear_and_larger_systems_keep_the_element_loop():
    assert prepare(lumped.load(lumped.demo_path("quarter_car"))).lanes is None  # end stop, lifting tyre
    chain = lumped.System(
        name="chain",
        bodies={f"m{i}": lumped.Body(f"m{i}", 1.0) for i in range(AFFINE_RK_LIMIT + 1)},
        supports={"g": lumped.Support("g")},
        springs={f"k{i}": lumped.Spring(f"k{i}", ("g" if i == 0 else f"m{i - 1}", f"m{i}"), 100.0)
                 for i in range(AFFINE_RK_LIMIT + 1)},
    )  # fmt: skip
    assert prepare(chain).lanes is None


@pytest.mark.parametrize(
    "signal",
    [
        lumped.BumpInput("sig", 0.05, 0.9, 5.0, time=0.2),
        lumped.StepInput("sig", 0.02, time=0.31),
        lumped.SweepInput("sig", 0.01, 1.0, 12.0, duration=0.4),
        lumped.HarmonicInput("sig", 0.01, 3.0, 0.4),
        lumped.TableInput("sig", "sig.csv", (0.0, 0.1, 0.35, 0.6), (0.0, 0.01, -0.02, 0.0)),
        lumped.RoadInput("sig", "C", 20.0, seed=3),
    ],
    ids=lambda s: s.kind,
)
def test_chunk_inputs_are_the_signals_at_every_stage_time(signal):
    # Each row of a chunk's inputs is the signal itself (lumped.excitation evaluates it
    # on its own, array by array) at the stage time k·h + c·h, read LEFT_LIMIT·h early
    # past a step's start, delayed per support — also where input_rows writes zeros
    # without evaluating the signal (outside a bump's passage, a sweep, before a step).
    from lumped.excitation import signal_for
    from lumped.kernels import LEFT_LIMIT
    from lumped.linear_rk import input_rows, input_slots

    system = lumped.System(
        name="two supports (invented)",
        bodies={"b": lumped.Body("b", 3.0)},
        supports={"front": lumped.Support("front", "sig"), "rear": lumped.Support("rear", "sig", delay=0.13)},
        springs={"kf": lumped.Spring("kf", ("front", "b"), 900.0), "kr": lumped.Spring("kr", ("rear", "b"), 900.0)},
        inputs={"sig": signal},
    )
    program = prepare(system).inputs.program
    h, steps, offsets = 1e-3, 250, np.array([0.0, 0.5, 1.0])
    inputs = tuple((c, kind, s) for c in range(3) for kind in (0, 1, 2) for s in range(2))
    slots = input_slots(inputs, len(offsets), 2, 0)
    source, delays = signal_for(system, "sig"), (0.0, 0.13)
    for k0 in (0, 180, 260, 420, 5000):
        rows = np.full((len(inputs), steps), np.nan)
        input_rows(program, (0.0, h, offsets), k0, steps, h, slots, rows)
        for b, (c, kind, s) in enumerate(inputs):
            t = 0.0 + (k0 + np.arange(steps)) * h + offsets[c] * h
            if offsets[c] > 0:
                t = t - LEFT_LIMIT * h
            expected = (source.value, source.rate, source.rate2)[kind](t - delays[s])
            np.testing.assert_array_equal(rows[b], expected, err_msg=f"k0 {k0}, row {c}, kind {kind}, support {s}")


def test_a_prepared_system_reuses_its_work_arrays_without_carrying_anything_over():
    # A second run takes the first run's work arrays (its chunk inputs, states and
    # energies still in them) and must give the same numbers bit for bit; a run at
    # other settings in between does not disturb it (regression of the work-array
    # pool; the reference is the engine's own first run).
    prepared = prepare(linear_corner())
    settings = dict(check=False, specialise=True)
    first = simulate(prepared, "rk4", 1e-3, 3.0, output_every=1, **settings)
    simulate(prepared, "rk4", 1e-3, 1.7, output_every=7, **settings)
    again = simulate(prepared, "rk4", 1e-3, 3.0, output_every=1, **settings)
    assert prepared.spare, "the runs kept no work arrays"
    for name in ("displacement", "velocity", "acceleration", "dissipated", "support_work", "force"):
        np.testing.assert_array_equal(getattr(again, name), getattr(first, name), err_msg=name)
