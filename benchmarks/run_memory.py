"""Benchmark: a 10⁷-step run with 10⁴ output samples keeps its peak memory within
50 MB of the process's baseline, and a run whose output would exceed the cap is
refused before it starts (issue: time simulation engine).

Peak resident memory is read from the kernel (ru_maxrss) after a warm-up run, so the
baseline includes the imported libraries and the compiled kernels.

Run: python benchmarks/run_memory.py
"""

import resource

import lumped
from lumped.simulate import RunError, simulate

TARGET_MB = 50.0


def peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def main() -> None:
    system = lumped.load(lumped.demo_path("quarter_car"))
    simulate(system, "rk4", 1e-4, 0.1, output_every=1000, check=False)  # warm up, compile
    baseline = peak_mb()
    run = simulate(system, "rk4", 1e-5, 100.0, output_every=1000, check=False)  # 10^7 steps
    growth = peak_mb() - baseline
    print(f"10^7 rk4 steps, {len(run.time):,} samples: peak memory {growth:.1f} MB above baseline "
          f"(target within {TARGET_MB:g} MB: {'met' if growth <= TARGET_MB else 'NOT met'})")
    try:
        simulate(system, "rk4", 1e-6, 1e4, max_output_bytes=2**30, check=False)
        print("a run needing more than the cap was NOT refused")
    except RunError as exc:
        print(f"refused before starting: {exc}")


if __name__ == "__main__":
    main()
