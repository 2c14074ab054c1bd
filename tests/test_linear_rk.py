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
from lumped.variants import simulate_variants, variant_system


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


SIGNALS = [
    lumped.BumpInput("sig", 0.05, 0.9, 5.0, time=0.2),
    lumped.StepInput("sig", 0.02, time=0.31),
    lumped.SweepInput("sig", 0.01, 1.0, 12.0, duration=0.4),
    lumped.HarmonicInput("sig", 0.01, 3.0, 0.4),
    lumped.TableInput("sig", "sig.csv", (0.0, 0.1, 0.35, 0.6), (0.0, 0.01, -0.02, 0.0)),
    lumped.RoadInput("sig", "C", 20.0, seed=3),
]


def _two_supports(signal) -> lumped.System:
    return lumped.System(
        name="two supports (invented)",
        bodies={"b": lumped.Body("b", 3.0)},
        supports={"front": lumped.Support("front", "sig"), "rear": lumped.Support("rear", "sig", delay=0.13)},
        springs={"kf": lumped.Spring("kf", ("front", "b"), 900.0), "kr": lumped.Spring("kr", ("rear", "b"), 900.0)},
        inputs={"sig": signal},
    )


@pytest.mark.parametrize("signal", SIGNALS, ids=lambda s: s.kind)
def test_inputs_at_sample_times_are_the_signals(signal):
    # The supports' motion at output times is the signal itself (lumped.excitation
    # evaluates it on its own), delayed per support — also at and just beside the ends
    # of the span outside which it is not evaluated (a bump's passage, a sweep).
    from lumped.excitation import signal_for

    system = _two_supports(signal)
    source, delays = signal_for(system, "sig"), np.array([0.0, 0.13])
    edges = np.array([0.0, 0.2, 0.38, 0.31, 0.4, 0.33, 0.51, 0.53])
    times = np.sort(np.concatenate([np.linspace(0.0, 1.2, 1201), edges, np.nextafter(edges, 1), np.nextafter(edges, -1)]))
    u, ud, udd, _ = prepare(system).inputs.at(times)
    for s in range(2):
        for got, rate in ((u, source.value), (ud, source.rate), (udd, source.rate2)):
            np.testing.assert_array_equal(got[:, s], rate(times - delays[s]), err_msg=f"support {s}")


@pytest.mark.parametrize("signal", SIGNALS, ids=lambda s: s.kind)
def test_chunk_inputs_are_the_signals_at_every_stage_time(signal):
    # Each row of a chunk's inputs is the signal itself (lumped.excitation evaluates it
    # on its own, array by array) at the stage time k·h + c·h, read LEFT_LIMIT·h early
    # past a step's start, delayed per support — also where input_rows writes zeros
    # without evaluating the signal (outside a bump's passage, a sweep, before a step).
    from lumped.excitation import signal_for
    from lumped.kernels import LEFT_LIMIT
    from lumped.linear_rk import input_rows, input_slots

    system = _two_supports(signal)
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


def _free_corner(**body_changes) -> lumped.System:
    """The linear corner with the bump moved beyond every run here, and the bodies'
    initial state changed (free response about static equilibrium)."""
    system = linear_corner()
    bodies = {k: dataclasses.replace(b, **body_changes.get(k, {})) for k, b in system.bodies.items()}
    inputs = {k: dataclasses.replace(i, time=100.0) for k, i in system.inputs.items()}
    return dataclasses.replace(system, bodies=bodies, inputs=inputs)


@pytest.fixture
def free_calls(monkeypatch):
    """The intervals of each call of the free-response kernels, many lanes' and one
    lane's (so a test knows they ran)."""
    import lumped.simulate as engine

    calls = []

    def counted(kernel, position):
        def call(*args):
            calls.append(args[position])
            return kernel(*args)

        return call

    def kernels_counted(*key):
        one, lanes, free_one = chunk_kernels(*key)
        return one, lanes, counted(free_one, 6)

    chunk_kernels = engine.chunk_kernels
    monkeypatch.setattr(engine, "free_chunk", counted(engine.free_chunk, 10))
    monkeypatch.setattr(engine, "chunk_kernels", kernels_counted)
    return calls


def test_free_response_is_the_rk4_polynomial_to_the_power_of_the_samples(free_calls):
    # Free vibration of the corner from an initial displacement: RK4 on z' = Az takes
    # z_k = P^k z₀, P = Σⱼ₌₀⁴ (hA)ʲ/j! (Hairer, Nørsett & Wanner, Solving ODEs I, §II.1
    # [recalled from memory]); A from Newton's second law with the demo's masses,
    # stiffnesses and the damper's mean coefficient (quarter-car demo, invented).
    system = _free_corner(body={"initial_displacement": 0.02}, wheel={"initial_velocity": -0.3})
    m_w, m_b = system.bodies["wheel"].mass, system.bodies["body"].mass
    k_t, k_s = system.springs["tyre"].stiffness, system.springs["suspension_spring"].stiffness
    c_s = system.dampers["suspension_damper"].coefficient
    M = np.diag([m_w, m_b])
    K = np.array([[k_t + k_s, -k_s], [-k_s, k_s]])
    C = np.array([[c_s, -c_s], [-c_s, c_s]])
    A = np.block([[np.zeros((2, 2)), np.eye(2)], [-np.linalg.solve(M, K), -np.linalg.solve(M, C)]])
    h, every = 1e-3, 50
    hA = h * A
    P = sum(np.linalg.matrix_power(hA, j) / math.factorial(j) for j in range(5))
    run = simulate(system, "rk4", h, 3.0, output_rate=1 / (every * h), check=False, specialise=True)
    assert sum(free_calls) == 60, "the run did not take the free-response path"
    z0 = np.array([0.0, 0.02, -0.3, 0.0])  # wheel, body displacement; wheel, body velocity
    expected = np.array([np.linalg.matrix_power(P, k * every) @ z0 for k in range(61)])
    assert _relative(run.displacement, expected[:, :2]) < 1e-12
    assert _relative(run.velocity, expected[:, 2:]) < 1e-12
    # Newton's second law at each sample: a = −M⁻¹(K q + C v).
    assert _relative(run.acceleration, -(expected[:, :2] @ K.T + expected[:, 2:] @ C.T) / [m_w, m_b]) < 1e-12
    # No input: the damper dissipates the mechanical energy lost, up to the stepper's
    # error, which falls as h⁴ (RK4's order; halving h divides it by 16).
    assert run.support_work[-1] == 0.0
    half = simulate(system, "rk4", h / 2, 3.0, output_rate=1 / (every * h), check=False, specialise=True)
    assert 12 < run.balance_ratio / half.balance_ratio < 20


@pytest.mark.parametrize(("count", "generated"), [(1, True), (40, True), (1, False), (40, False)])
def test_free_stretches_take_the_step_by_step_kernels_states(count, generated, monkeypatch, free_calls):
    # Around the bump, free stretches joined a sample interval at a time; the steps
    # are the same, so every channel and the energy equal the step-by-step run to
    # rounding. 12.3456 s is no whole number of steps and spans chunks. Without the
    # generated kernels (a short run that does not compile them), the steps around
    # the free stretches are the element loop's.
    import lumped.simulate as engine

    base = _free_corner(body={"initial_displacement": 0.01})
    base = dataclasses.replace(base, inputs={k: dataclasses.replace(i, time=4.1) for k, i in base.inputs.items()})
    settings = dict(dt=5e-4, duration=12.3456, output_rate=50.0, specialise=True if generated else None)
    if not generated:
        monkeypatch.setattr(engine, "is_compiled", lambda *key: False)
        monkeypatch.setattr(engine, "chunk_kernels", None)  # never reached
    changes = {"springs.suspension_spring.stiffness": np.linspace(16e3, 32e3, count),
               "dampers.suspension_damper.coefficient": np.linspace(1.2e3, 2.8e3, count)}  # fmt: skip

    def run():
        if count == 1:
            return simulate(base, "rk4", check=False, **settings)
        return simulate_variants(base, changes, "rk4", **settings).batch

    joined = run()
    assert free_calls, "the run did not take the free-response path"
    monkeypatch.setattr(engine, "FREE_LEAST_STEPS", 10**12)
    stepwise = run()
    np.testing.assert_array_equal(joined.time, stepwise.time)
    assert joined.time[-1] == 12.3456
    for name in ("displacement", "velocity", "acceleration", "force", "kinetic", "stored", "dissipated", "support_work"):
        assert _relative(getattr(joined, name), getattr(stepwise, name)) < 1e-11, name
    assert joined.balance_ratio == pytest.approx(stepwise.balance_ratio, rel=1e-6, abs=1e-12)


@pytest.mark.parametrize("count", [1, 3])
def test_a_run_diverging_in_a_free_stretch_stops_at_the_step_by_step_kernels_step(count, monkeypatch, free_calls):
    # A tyre far too stiff for RK4 at this step (ωh ≈ 4.9, beyond the stability limit
    # 2.785 — common practice, the RK4 stability interval on the imaginary axis) in the
    # last variant: the free stretch finds it at a sample, the step-by-step kernel
    # finds the step, as a run without free stretches does.
    import lumped.simulate as engine

    base = _free_corner(wheel={"initial_displacement": 0.01})
    changes = {"springs.tyre.stiffness": [2.3e5, 2.4e5, 4.0e9][-count:]}
    settings = dict(dt=5e-4, duration=2.0, output_rate=10.0, specialise=True)

    def run():
        if count == 1:
            return simulate(variant_system(base, changes_of(0)), "rk4", check=False, **settings)
        return simulate_variants(base, changes, "rk4", **settings).batch

    def changes_of(i):
        return {path: values[i] for path, values in changes.items()}

    joined = run()
    assert free_calls, "the run did not take the free-response path"
    monkeypatch.setattr(engine, "FREE_LEAST_STEPS", 10**12)
    stepwise = run()
    assert joined.status == stepwise.status == "diverged"
    assert joined.steps == stepwise.steps
    assert joined.message == stepwise.message
    np.testing.assert_array_equal(joined.time, stepwise.time)
    assert _relative(joined.displacement, stepwise.displacement) < 1e-11


def test_the_kernel_cache_keeps_the_modules_used_last(tmp_path, monkeypatch):
    # A new generated module makes room in the cache directory: it keeps the
    # KEPT_KERNELS modules used last, with their compiled code, and drops the rest.
    import os

    from lumped import linear_rk

    monkeypatch.setenv("LUMPED_KERNEL_CACHE", str(tmp_path))
    (tmp_path / "__pycache__").mkdir()
    old = []
    for i in range(linear_rk.KEPT_KERNELS + 5):
        module = tmp_path / f"lumped_kernel_{i:016x}.py"
        module.write_text("# stand-in\n")
        compiled = tmp_path / "__pycache__" / f"{module.stem}.one-10.py311.nbi"
        compiled.write_text("")
        os.utime(module, (1e9 + i, 1e9 + i))  # module i used at time i
        old.append((module, compiled))
    module = linear_rk._generated_module(linear_rk._kernel_source(2, (), ()))
    assert hasattr(module, "one")
    kept = sorted(tmp_path.glob("lumped_kernel_*.py"))
    assert len(kept) == linear_rk.KEPT_KERNELS
    for i, (module_file, compiled) in enumerate(old):
        gone = i < len(old) - (linear_rk.KEPT_KERNELS - 1)  # the least recently used
        assert module_file.exists() != gone and compiled.exists() != gone, i
