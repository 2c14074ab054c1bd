"""Benchmark: a 100 000-body chain, built in code, from system to sparse M, C, K.

Target (issue: foundation): under 2 s. Reference, run in the same process on the same
graph: networkx's own `incidence_matrix(oriented=True)` — one of the per-edge helpers
the assembly must beat by building from edge arrays in bulk.

Run: python benchmarks/assemble_chain.py [N]
"""

import sys

import networkx as nx
from _timing import median_time

import lumped

TARGET_SECONDS = 2.0


def main(n: int = 100_000) -> None:
    system = lumped.uniform_chain(n, mass=0.5, stiffness=4e7, damping=40.0)
    seconds, matrices = median_time(lambda: lumped.assemble(system), repeats=5)
    reference, _ = median_time(lambda: nx.incidence_matrix(system.graph, oriented=True), repeats=3)
    print(f"chain of {n:,} bodies, {len(matrices.element_ids):,} elements")
    print(f"assemble (M, C, K, couplings, tables): {seconds:.3f} s median of 5 "
          f"(target < {TARGET_SECONDS:g} s: {'met' if seconds < TARGET_SECONDS else 'NOT met'})")
    print(f"reference networkx.incidence_matrix alone: {reference:.3f} s; "
          f"ratio assemble / reference = {seconds / reference:.2f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100_000)
