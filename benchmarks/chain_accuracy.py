"""Benchmark: a 100 000-body chain at equal accuracy — the engine's RK4 against the
fastest scipy solve_ivp method reaching the same error (issue: time simulation
engine; target ≥ 2× faster).

Case: the uniform fixed–free chain (0.5 kg, 40 MN/m, 40 N·s/m per segment), its top
1 000 bodies displaced by 1 mm at t = 0, run for 20 ms. Error: the largest deviation
over output samples (every 0.5 ms) of the displacements divided by the largest
displacement, and likewise of the velocities (most bodies stay at rest, so a per-body
scale would divide by zero), against RK4 at a sixteenth of the step (error 16⁴ times
smaller). The engine runs a prepared system (assembly, static equilibrium and element
tables made once, as solve_ivp is timed on the assembled operator); its time is the
median of three runs less that of three one-step runs (a run's own set-up).

Run: python benchmarks/chain_accuracy.py [N]
"""

import dataclasses
import sys
import time

import numpy as np
from _timing import in_turns, median_time
from scipy.integrate import solve_ivp

import lumped
from lumped.simulate import prepare, simulate

TARGET = 2.0
DURATION, SAMPLE = 0.02, 5e-4


def chain(n: int) -> lumped.System:
    system = lumped.uniform_chain(n, mass=0.5, stiffness=4e7, damping=40.0)
    bodies = {k: dataclasses.replace(b, initial_displacement=1e-3 if i >= n - 1000 else 0.0)
              for i, (k, b) in enumerate(system.bodies.items())}  # fmt: skip
    return dataclasses.replace(system, bodies=bodies)


def error(displacement, velocity, reference) -> float:
    """Largest deviation of displacements and of velocities, each over its largest value."""
    return max(float(np.max(np.abs(displacement - reference.displacement)) / np.max(np.abs(reference.displacement))),
               float(np.max(np.abs(velocity - reference.velocity)) / np.max(np.abs(reference.velocity))))


def main(n: int = 100_000) -> None:
    system = chain(n)
    every = 6  # steps per output sample: dt = 83 µs, about half the RK4 limit (0.159 ms)
    dt = SAMPLE / every
    reference = simulate(system, "rk4", dt / 16, DURATION, output_every=16 * every, check=False)
    prepared = prepare(system)  # assembly and static equilibrium once, as solve_ivp's A is built once
    simulate(prepared, "rk4", dt, 10 * dt, check=False)  # compile
    setup, _ = median_time(lambda: simulate(prepared, "rk4", dt, dt, check=False), 3)
    full, run = median_time(lambda: simulate(prepared, "rk4", dt, DURATION, output_every=every, check=False), 3)
    ours = full - setup
    target_error = error(run.displacement, run.velocity, reference)
    print(f"chain of {n:,} bodies, rk4 at dt = {dt * 1e6:.1f} µs for {DURATION * 1e3:g} ms: {ours:.2f} s "
          f"beyond {setup:.2f} s for one step (medians of 3, on the prepared system), error {target_error:.2e}")

    matrices = lumped.assemble(system)
    space = lumped.state_space(matrices, dense=False)
    y0 = np.concatenate([[b.initial_displacement for b in system.bodies.values()], np.zeros(n)])
    times = np.arange(0.0, DURATION + 1e-12, SAMPLE)
    best = None
    for method in ("RK45", "DOP853"):
        for rtol in (1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8):
            start = time.perf_counter()
            solution = solve_ivp(lambda t, y: space.A @ y, (0, DURATION), y0, method=method,
                                 t_eval=times, rtol=rtol, atol=rtol * 1e-3)  # fmt: skip
            seconds = time.perf_counter() - start
            reached = error(solution.y[:n].T, solution.y[n:].T, reference)
            if reached <= target_error:
                print(f"solve_ivp {method} rtol {rtol:.0e}: {seconds:.2f} s, error {reached:.2e}")
                if best is None or seconds < best[0]:
                    best = (seconds, method, rtol)
                break
    if best:
        # The fastest again, in turns with the engine (the machine's speed drifts over minutes).
        _, method, rtol = best
        engine, ivp = in_turns(lambda: simulate(prepared, "rk4", dt, DURATION, output_every=every, check=False),
                               lambda: solve_ivp(lambda t, y: space.A @ y, (0, DURATION), y0, method=method,
                                                 t_eval=times, rtol=rtol, atol=rtol * 1e-3), 3)  # fmt: skip
        ratio = ivp / (engine - setup)
        print(f"fastest solve_ivp at equal error: {method}; timed in turns with the engine, medians of 3: "
              f"{ivp:.2f} s against {engine - setup:.2f} s; ratio = {ratio:.1f}× "
              f"(target ≥ {TARGET:g}×: {'met' if ratio >= TARGET else 'NOT met'})")
    else:
        print("no solve_ivp method reached the engine's error within rtol 1e-8")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100_000)
