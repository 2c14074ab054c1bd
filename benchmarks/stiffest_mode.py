"""Benchmark: the stiffest mode of a 100 000-body chain — estimate within 1 % and a
guaranteed upper bound, under a second together (issue: modal analysis and step limits).

Exact value: uniform fixed–free chain, ω_max = 2√(k/m)·sin((2n−1)π/(2(2n+1)))
(G. Strang, Computational Science and Engineering, 2007, §1.5 [recalled from memory]).
Reference, in the same process: scipy.sparse.linalg.eigsh(which="LA", tol=1e-4) on
M^{-1/2} K M^{-1/2}.

Run: python benchmarks/stiffest_mode.py [N]
"""

import math
import sys

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from _timing import median_time

import lumped
from lumped.modal import stiffest_mode

TARGET_SECONDS = 1.0


def main(n: int = 100_000) -> None:
    m, k = 0.5, 4e7
    matrices = lumped.assemble(lumped.uniform_chain(n, mass=m, stiffness=k, damping=40.0))
    exact = 2 * math.sqrt(k / m) * math.sin((2 * n - 1) * math.pi / (2 * (2 * n + 1)))
    seconds, top = median_time(lambda: stiffest_mode(matrices), repeats=5)
    scale = sp.diags_array(1 / np.sqrt(matrices.M.diagonal()))
    S = (scale @ matrices.K @ scale).tocsr()
    reference, value = median_time(
        lambda: spla.eigsh(S, k=1, which="LA", tol=1e-4, return_eigenvectors=False)[0], repeats=1
    )
    print(f"chain of {n:,} bodies: exact ω_max = {exact:.8g} rad/s")
    print(f"estimate {top.estimate:.8g} rad/s ({(top.estimate / exact - 1) * 100:+.4f} %), "
          f"bound {top.bound:.8g} rad/s ({(top.bound / exact - 1) * 100:+.2e} %), "
          f"{top.iterations} power iterations")
    print(f"stiffest_mode: {seconds * 1e3:.1f} ms median of 5 (target < {TARGET_SECONDS:g} s: "
          f"{'met' if seconds < TARGET_SECONDS and abs(top.estimate / exact - 1) < 0.01 and top.bound >= exact else 'NOT met'})")
    print(f"reference eigsh(LA, tol=1e-4): {reference:.3f} s (ω = {math.sqrt(value):.8g}); "
          f"ratio stiffest_mode / reference = {seconds / reference:.3f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100_000)
