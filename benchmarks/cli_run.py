"""Benchmark: `lumped run` end to end — 10⁶ RK4 steps of an undamped corner (100 s at
0.1 ms, output at 10 Hz, CSV written), less the process start-up, against solve_ivp
DOP853 at rtol 1e-10 over the same 100 s in this process (issue: time simulation
engine; target ≥ 10× faster). Start-up is measured as the same command for one step;
fastest of seven of each; the ratio uses the same command run in this process after
its imports (the process difference only resolves down to the start-up's scatter). The system has no input, so the engine joins the steps of
each 0.1 s sample interval into one map (the same RK4 steps, up to rounding).

Run: python benchmarks/cli_run.py
"""

import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

TARGET_RATIO = 10.0
def system_text() -> str:
    return """format = "lumped/1"
name = "Undamped corner (benchmark)"
description = "Invented benchmark system: a quarter-vehicle corner without damping."
[bodies.wheel]
mass = "40 kg"
[bodies.body]
mass = "400 kg"
initial_displacement = "10 mm"
[supports.road]
[springs.tyre]
between = ["road", "wheel"]
stiffness = "200 kN/m"
[springs.spring]
between = ["wheel", "body"]
stiffness = "20 kN/m"
"""


def timed(command: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run(command, check=True, capture_output=True)
    return time.perf_counter() - start


def main() -> None:
    folder = Path(tempfile.mkdtemp(prefix="lumped-bench-"))
    path = folder / "corner.toml"
    path.write_text(system_text())
    base = [sys.executable, "-m", "lumped", "run", str(path), "--stepper", "rk4", "--dt", "0.1 ms",
            "--output-rate", "10 Hz", "--quiet", "--out", str(folder / "out.csv")]  # fmt: skip
    timed(base + ["--duration", "1 s"])  # compile and cache the kernels
    startup = min(timed(base + ["--duration", "0.1 ms"]) for _ in range(7))
    full = min(timed(base + ["--duration", "100 s"]) for _ in range(7))
    # The same command in this process, imports done: all but the start-up (file read,
    # checks, run, CSV written), which the difference of two processes resolves only
    # down to the start-up's own scatter.
    from lumped.cli import main as command

    def in_process() -> float:
        start = time.perf_counter()
        assert command(base[3:] + ["--duration", "100 s"]) == 0
        return time.perf_counter() - start

    in_process()
    engine = min(in_process() for _ in range(7))

    m1, m2, k1, k2 = 40.0, 400.0, 2e5, 2e4
    K = np.array([[k1 + k2, -k2], [-k2, k2]])
    minv = np.array([1 / m1, 1 / m2])

    def rhs(t, y):
        return np.concatenate([y[2:], -minv * (K @ y[:2])])

    y0 = np.array([0.0, 0.01, 0.0, 0.0])
    start = time.perf_counter()
    solve_ivp(rhs, (0, 100.0), y0, method="DOP853", rtol=1e-10, atol=1e-13, t_eval=np.arange(0, 100.01, 0.1))
    reference = time.perf_counter() - start
    print(f"lumped run, 10^6 rk4 steps + CSV: {full:.3f} s; start-up (one step): {startup:.3f} s; "
          f"difference {full - startup:.3f} s (fastest of seven each); the command in this process, "
          f"start-up excluded: {engine:.3f} s")
    ratio = reference / engine
    print(f"solve_ivp DOP853 rtol 1e-10 over 100 s: {reference:.3f} s; ratio = {ratio:.1f}× "
          f"(target ≥ {TARGET_RATIO:g}×: {'met' if ratio >= TARGET_RATIO else 'NOT met'})")


if __name__ == "__main__":
    main()
