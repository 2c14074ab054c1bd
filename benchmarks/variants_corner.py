"""Benchmark: 1 000 variants of the corner (suspension stiffness and damping varied),
RK4, 10 s at 1 ms, stepped together by one call (issue: time simulation engine).

Targets: at least 10× faster than scipy's solve_ivp on the same variants stacked into
one system (printed twice: against RK45 at rtol 1e-6, and against the fastest of RK45
and DOP853 at the loosest rtol that reaches the engine's own error), and at least 20×
faster than the engine run variant by variant (timed on 40 variants and scaled). Everything runs in this process.

The corner is small and linear: each variant is a lane of one kernel generated for
its structure (lumped.linear_rk), compiled first by the script.

Run: python benchmarks/variants_corner.py [VARIANTS]
"""

import sys
import time

import numpy as np
from _timing import median_time
from corner_rk4 import linear_corner
from scipy.integrate import solve_ivp

import lumped
from lumped.convergence import relative_error
from lumped.excitation import signal_for
from lumped.simulate import simulate
from lumped.variants import _stacked, simulate_variants, variant_system

TARGET_IVP, TARGET_SINGLE = 10.0, 20.0


def main(count: int = 1000) -> None:
    base = linear_corner()
    changes = {
        "springs.suspension_spring.stiffness": np.linspace(16e3, 32e3, count),
        "dampers.suspension_damper.coefficient": np.linspace(1.2e3, 2.8e3, count),
    }
    settings = dict(dt=1e-3, duration=10.0, output_rate=100.0)
    # compile (the generated kernel of this structure, once per machine, then cached on disk)
    simulate_variants(base, {k: v[:2] for k, v in changes.items()}, "rk4", **settings, specialise=True)
    batch, runs = median_time(lambda: simulate_variants(base, changes, "rk4", **settings), 5)
    # Element channels (forces, deflections) are worked out when first read: timed apart.
    with_elements, _ = median_time(lambda: simulate_variants(base, changes, "rk4", **settings).force, 5)

    sample = 40
    variants = [variant_system(base, {k: v[i] for k, v in changes.items()}) for i in range(sample)]
    start = time.perf_counter()
    for v in variants:
        simulate(v, "rk4", check=False, **settings)
    one_by_one = (time.perf_counter() - start) / sample * count

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

    ivp, _ = median_time(lambda: solve("RK45", 1e-6), 3)
    print(f"{count} variants, rk4 10 s at 1 ms, one call: {batch:.3f} s median of 5 "
          f"({batch / (count * 10_000) * 1e9:.1f} ns per variant-step, all set-up included); "
          f"{with_elements:.3f} s with the element forces and deflections read too")
    print(f"variant by variant (scaled from {sample}): {one_by_one:.2f} s; ratio {one_by_one / batch:.1f}× "
          f"(target ≥ {TARGET_SINGLE:g}×: {'met' if one_by_one / batch >= TARGET_SINGLE else 'NOT met'})")
    print(f"solve_ivp RK45 rtol 1e-6 on the stacked {space.A.shape[0]}-state system: {ivp:.2f} s median of 3; "
          f"ratio {ivp / batch:.1f}× (target ≥ {TARGET_IVP:g}×: {'met' if ivp / batch >= TARGET_IVP else 'NOT met'})")

    # At equal accuracy: the engine's error (over samples and states, as in corner_rk4)
    # against a tight reference, and the loosest rtol at which solve_ivp reaches it.
    reference = solve("DOP853", 1e-12)
    engine = np.hstack([runs.displacement.transpose(1, 0, 2).reshape(len(runs.time), -1),
                        runs.velocity.transpose(1, 0, 2).reshape(len(runs.time), -1)])  # fmt: skip
    target = relative_error(engine, reference)
    best = None
    for method in ("RK45", "DOP853"):
        for rtol in (1e-6, 5e-7, 2e-7, 1e-7, 5e-8, 2e-8, 1e-8, 5e-9, 2e-9, 1e-9):
            error = relative_error(solve(method, rtol), reference)
            if error <= target:
                seconds, _ = median_time(lambda method=method, rtol=rtol: solve(method, rtol), 3)
                print(f"solve_ivp {method} rtol {rtol:.0e}: {seconds:.2f} s median of 3, error {error:.2e}")
                best = min(best or (seconds, method), (seconds, method))
                break
    if best:
        ratio = best[0] / batch
        print(f"at the engine's error {target:.2e}: fastest solve_ivp {best[1]} {best[0]:.2f} s; ratio {ratio:.1f}× "
              f"(target ≥ {TARGET_IVP:g}×: {'met' if ratio >= TARGET_IVP else 'NOT met'})")
    print(f"batch status: {runs.status}; displacement array {runs.displacement.shape}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1000)
