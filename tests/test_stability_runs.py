"""The real proof of the step limits: runs of the engine just inside a stepper's
reported limit stay bounded, runs just outside it grow.

The limit comes from `lumped check`'s machinery (lumped.stability); the runs come from
the stepping engine (lumped.simulate) with its own kernels, so the two are checked
against each other on a demo system, and the growth is watched long enough to tell
(near the limit the growth per step is small — a fact of the trade: the spectral
radius leaves 1 continuously, see REFERENCES.md "Trap").
"""

import dataclasses
import math

import numpy as np
import pytest

import lumped
from lumped.simulate import simulate
from lumped.stability import check_step

EXPLICIT = ["euler", "heun", "rk3", "rk4", "rk38", "symplectic-euler", "central-difference"]


def _machine_demo_at_rest_but_displaced():
    """The press-on-mounts demo (linear, damped), with its forcing removed and each
    body pushed off equilibrium so that every mode starts with some amplitude."""
    system = lumped.load(lumped.demo_path("machine_on_mounts"))
    bodies = {
        key: dataclasses.replace(body, initial_displacement=1e-3 * (1 + i))
        for i, (key, body) in enumerate(system.bodies.items())
    }
    return lumped.System(
        name=system.name, bodies=bodies, supports=system.supports, springs=system.springs,
        dampers=system.dampers, inerters=system.inerters,
    )  # fmt: skip


@pytest.mark.parametrize("stepper_id", EXPLICIT)
def test_run_inside_limit_is_bounded_and_outside_grows(stepper_id):
    system = _machine_demo_at_rest_but_displaced()
    stepper = lumped.get_stepper(stepper_id)
    matrices = lumped.assemble(system)
    limit = check_step(matrices, stepper, 1e-4, 1.0).max_stable_dt
    assert limit is not None and math.isfinite(limit)
    amplitude0 = 2e-3
    results = {}
    for factor in (0.95, 1.05):
        dt = factor * limit
        steps = 40_000
        run = simulate(system, stepper_id, dt, steps * dt, output_every=100, check=False)
        tail = np.abs(run.displacement[-len(run.time) // 10 :]).max() if run.status == "completed" else np.inf
        results[factor] = (run.status, tail / amplitude0)
    status_in, growth_in = results[0.95]
    status_out, growth_out = results[1.05]
    assert status_in == "completed" and growth_in < 1.0, results
    assert status_out == "diverged" or growth_out > 100.0, results
