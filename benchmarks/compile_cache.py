"""Benchmark: compilation cached on disk — a fresh process's first run of an
already-compiled kernel adds under 0.5 s (issue: time simulation engine).

Measured as (first run − second run) inside a fresh process, after an earlier process
has compiled and cached the kernels.

Run: python benchmarks/compile_cache.py
"""

import subprocess
import sys

TARGET_SECONDS = 0.5
PROBE = """
import time, lumped
from lumped.simulate import simulate
system = lumped.load(lumped.demo_path("quarter_car"))
t0 = time.perf_counter(); simulate(system, "rk4", 1e-4, 0.5, check=False); t1 = time.perf_counter()
simulate(system, "rk4", 1e-4, 0.5, check=False); t2 = time.perf_counter()
print((t1 - t0) - (t2 - t1))
"""


def main() -> None:
    subprocess.run([sys.executable, "-c", PROBE], check=True, capture_output=True)  # fill the cache
    extra = min(float(subprocess.run([sys.executable, "-c", PROBE], check=True, capture_output=True,
                                     text=True).stdout) for _ in range(3))  # fmt: skip
    print(f"first run in a fresh process costs {extra:.3f} s more than the second "
          f"(target < {TARGET_SECONDS:g} s: {'met' if extra < TARGET_SECONDS else 'NOT met'})")


if __name__ == "__main__":
    main()
