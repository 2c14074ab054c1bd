"""Benchmark: RK4 on a 100 000-body chain — each step's time against its memory-traffic
floor (issue: time simulation engine; target: at most 2× the floor).

Floor = bytes a step must move ÷ memory bandwidth measured here (a compiled triad,
a[i] = b[i] + s·c[i], on arrays larger than the caches). Bytes per RK4 step, for the
sparse formulation the issue names: 4 stages × (CSR values and column indices of K
and C, 12 bytes per stored entry, plus their row pointers, 8 bytes per row) + the
state and stage vectors (each stage reads q, v and writes two n-vectors; the update
reads four stage pairs and the state and writes the state: about 28 vectors of 8n
bytes). The engine itself reads its own merged element table (two node indices,
stiffness and damping per node pair: 32 bytes per link), which is smaller.

Run: python benchmarks/chain_rk4.py [N]
"""

import sys
import time

import numpy as np
from numba import njit

import lumped
from lumped.simulate import simulate

TARGET_RATIO = 2.0


@njit(cache=True)
def _triad(a, b, c, s):
    for i in range(a.shape[0]):
        a[i] = b[i] + s * c[i]


def bandwidth(arrays) -> float:
    """Median bytes per second of the triad on ``arrays`` (3 × 64 MB, from :func:`triad_arrays`)."""
    a, b, c = arrays
    rates = []
    for _ in range(7):
        start = time.perf_counter()
        _triad(a, b, c, 2.0)
        rates.append(3 * 8 * len(a) / (time.perf_counter() - start))
    return float(np.median(rates))


def triad_arrays():
    n = 8_000_000
    arrays = np.zeros(n), np.ones(n), np.ones(n)
    _triad(*arrays, 2.0)
    return arrays


def main(n: int = 100_000) -> None:
    system = lumped.uniform_chain(n, mass=0.5, stiffness=4e7, damping=40.0)
    matrices = lumped.assemble(system)
    nnz = matrices.K.nnz + matrices.C.nnz
    floor_bytes = 4 * (12 * nnz + 8 * 2 * (n + 1)) + 28 * 8 * n
    steps_a, steps_b, dt = 200, 600, 5e-5
    simulate(system, "rk4", dt, 20 * dt, output_every=10**6, check=False)  # compile
    # The bandwidth and the step timed in turns: this shared machine's speed drifts over
    # minutes, and in turns both meet the same machine; the ratio is the median of the turns'.
    arrays, timings, rates = triad_arrays(), [], []
    for _ in range(5):
        rates.append(bandwidth(arrays))
        start = time.perf_counter()
        simulate(system, "rk4", dt, steps_a * dt, output_every=10**6, check=False)
        middle = time.perf_counter()
        simulate(system, "rk4", dt, steps_b * dt, output_every=10**6, check=False)
        end = time.perf_counter()
        timings.append(((end - middle) - (middle - start)) / (steps_b - steps_a))
    per_step, bw = float(np.median(timings)), float(np.median(rates))
    ratio = float(np.median(np.array(timings) * np.array(rates))) / floor_bytes
    floor = floor_bytes / bw
    print(f"chain of {n:,} bodies, K and C with {nnz:,} stored entries")
    print(f"floor formula: 4 × (12 B × nnz(K)+nnz(C) + 16 B × (n+1)) + 28 × 8 B × n = {floor_bytes / 1e6:.1f} MB per step")
    print(f"measured bandwidth (triad, median of five turns): {bw / 1e9:.1f} GB/s -> floor {floor * 1e3:.3f} ms per step")
    print(f"rk4 step (difference of two run lengths, median of 5): {per_step * 1e3:.3f} ms; "
          f"ratio to floor (median of the five turns, each against its own bandwidth) = {ratio:.2f} "
          f"(target ≤ {TARGET_RATIO:g}: {'met' if ratio <= TARGET_RATIO else 'NOT met'})")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100_000)
