"""Benchmark: 1 000 variants of the corner (suspension stiffness and damping varied),
RK4, 10 s at 1 ms, output at 100 Hz, stepped together by one call (issue: time
simulation engine).

Targets: at least 10× faster than scipy's solve_ivp on the same variants stacked into
one system (printed twice: against RK45 at rtol 1e-6, and against the fastest of RK45
and DOP853 at the loosest rtol that reaches the engine's own error), and at least 20×
faster than the engine run variant by variant (timed on 40 variants and scaled).
Everything runs in this process.

The engine's call starts from the System (the changes checked, the base assembled, the
variants' matrices made, every set-up step included); solve_ivp's stacked state space
is built before it is timed. The call returns every variant's displacements,
velocities, accelerations, inputs and energy account; element forces and deflections
are worked out when first read, and the call with them read is printed beside it.

This machine is shared and its speed drifts by half over minutes, so the engine and
each solve_ivp reference are timed in turns (engine, reference, engine, …) and the
ratio is of their medians: both meet the same machine.

The corner is small and linear: each variant is a lane of one kernel generated for
its structure (lumped.linear_rk), compiled first by the script.

Run: python benchmarks/variants_corner.py [VARIANTS]
"""

import sys

import numpy as np
from _timing import in_turns
from corner_rk4 import linear_corner
from scipy.integrate import solve_ivp

import lumped
from lumped.convergence import relative_error
from lumped.excitation import signal_for
from lumped.simulate import simulate
from lumped.variants import _stacked, simulate_variants, variant_system

TARGET_IVP, TARGET_SINGLE = 10.0, 20.0


def verdict(ratio: float, target: float) -> str:
    return f"ratio {ratio:.1f}× (target ≥ {target:g}×: {'met' if ratio >= target else 'NOT met'})"


def main(count: int = 1000) -> None:
    base = linear_corner()
    changes = {
        "springs.suspension_spring.stiffness": np.linspace(16e3, 32e3, count),
        "dampers.suspension_damper.coefficient": np.linspace(1.2e3, 2.8e3, count),
    }
    settings = dict(dt=1e-3, duration=10.0, output_rate=100.0)
    # compile (the generated kernel of this structure, once per machine, then cached on disk)
    simulate_variants(base, {k: v[:2] for k, v in changes.items()}, "rk4", **settings, specialise=True)

    def batch():
        return simulate_variants(base, changes, "rk4", **settings)

    runs = batch()
    stacked = _stacked(base, changes, count)
    space = lumped.state_space(lumped.assemble(stacked), dense=False)
    bump = signal_for(base, "speed_bump")  # the one support's motion, shared by every variant
    w = np.zeros(space.B.shape[1])

    def rhs(t, y):
        w[0], w[1], w[2] = bump.value(t), bump.rate(t), bump.rate2(t)
        return space.A @ y + space.B @ w

    def solve(method, rtol):
        return solve_ivp(rhs, (0, 10.0), np.zeros(space.A.shape[0]), method=method, rtol=rtol, atol=rtol * 1e-3,
                         t_eval=runs.time, max_step=0.02).y.T  # fmt: skip

    engine, ivp = in_turns(batch, lambda: solve("RK45", 1e-6), 5)
    with_elements, _ = in_turns(lambda: batch().force, lambda: None, 3)
    print(f"{count} variants, rk4 10 s at 1 ms, one call: {engine:.3f} s median of 5 "
          f"({engine / (count * 10_000) * 1e9:.1f} ns per variant-step, all set-up included); "
          f"{with_elements:.3f} s with the element forces and deflections read too")
    print(f"solve_ivp RK45 rtol 1e-6 on the stacked {space.A.shape[0]}-state system: {ivp:.2f} s median of 5; "
          f"{verdict(ivp / engine, TARGET_IVP)}")

    # At equal accuracy: the engine's error (over samples and states, as in corner_rk4)
    # against a tight reference, and the loosest rtol at which solve_ivp reaches it.
    reference = solve("DOP853", 1e-12)
    states = np.hstack([runs.displacement.transpose(1, 0, 2).reshape(len(runs.time), -1),
                        runs.velocity.transpose(1, 0, 2).reshape(len(runs.time), -1)])  # fmt: skip
    target = relative_error(states, reference)
    best = None
    for method in ("RK45", "DOP853"):
        for rtol in (1e-6, 5e-7, 2e-7, 1e-7, 5e-8, 2e-8, 1e-8, 5e-9, 2e-9, 1e-9):
            error = relative_error(solve(method, rtol), reference)
            if error <= target:
                engine, seconds = in_turns(batch, lambda method=method, rtol=rtol: solve(method, rtol), 3)
                print(f"solve_ivp {method} rtol {rtol:.0e}: {seconds:.2f} s median of 3, error {error:.2e} "
                      f"(engine {engine:.3f} s in the same turns)")
                best = min(best or (seconds / engine, method), (seconds / engine, method))
                break
    if best:
        print(f"at the engine's error {target:.2e}: fastest solve_ivp {best[1]}; {verdict(best[0], TARGET_IVP)}")

    sample = 40
    variants = [variant_system(base, {k: v[i] for k, v in changes.items()}) for i in range(sample)]

    def one_by_one():
        for v in variants:
            simulate(v, "rk4", check=False, **settings)

    engine, single = in_turns(batch, one_by_one, 3)
    single *= count / sample
    print(f"variant by variant (scaled from {sample}): {single:.2f} s; {verdict(single / engine, TARGET_SINGLE)}")
    print(f"batch status: {runs.status}; displacement array {runs.displacement.shape}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1000)
