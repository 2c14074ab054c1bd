"""Accuracy evidence for a run: the same run at h, h/2, h/4, … and the observed order.

Linear systems without inputs are held against the exact discretisation (matrix
exponential) at the same sample times; anything else against a Richardson estimate
from successive halvings (L. F. Richardson, Phil. Trans. R. Soc. A 210 (1911)
[recalled from memory]). The error of a run is the largest deviation over common
samples and states (displacements and velocities), each divided by that state's
largest magnitude; the observed order is the slope of a least-squares line through
log(error) against log(h).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from lumped.model import System
from lumped.simulate import RunError, prepare, simulate
from lumped.steppers import get_stepper

__all__ = ["ConvergenceStudy", "convergence_study", "relative_error"]


@dataclass(frozen=True)
class ConvergenceStudy:
    """Steps (s), error of each run (relative, see module notes), the observed order
    and the stepper's declared one, and how the errors were measured."""

    stepper: str
    steps: list[float]
    errors: list[float]
    observed_order: float | None
    declared_order: int | None
    method: str
    notes: list[str] = field(default_factory=list)

    def to_json(self) -> dict:
        return {
            "stepper": self.stepper,
            "dt": self.steps,
            "error": self.errors,
            "observed_order": self.observed_order,
            "declared_order": self.declared_order,
            "method": self.method,
            "notes": self.notes,
        }


def relative_error(states: np.ndarray, reference: np.ndarray) -> float:
    """Largest |states − reference| over samples, each state divided by its largest |reference|."""
    scale = np.max(np.abs(reference), axis=0)
    scale = np.where(scale > 0, scale, 1.0)
    return float(np.max(np.abs(states - reference) / scale))


def _states(result, every: int) -> np.ndarray:
    return np.hstack([result.displacement[::every], result.velocity[::every]])


def convergence_study(system: System, stepper: str, dt: float, duration: float, levels: int = 4) -> ConvergenceStudy:
    """Run at dt, dt/2, … dt/2^(levels−1) and measure the error of each run."""
    if levels < 3:
        raise RunError("a convergence study needs at least 3 step sizes")
    steps = [dt / 2**i for i in range(levels)]
    prepared = prepare(system)  # one set-up for every run
    # Sample the coarsest run's grid in every run (the finer runs every 2^i steps).
    runs = [simulate(prepared, stepper, h, duration, output_every=2**i, check=False) for i, h in enumerate(steps)]
    for run in runs:
        if run.status != "completed":
            raise RunError(f"convergence run at dt = {run.dt:g} s {run.status}: {run.message}")
    linear_free = not system.inputs and all(e.is_linear for e in system.elements.values())
    order = get_stepper(stepper).order
    if linear_free:
        exact = [simulate(prepared, "exact", h, duration, output_every=2**i, check=False) for i, h in enumerate(steps)]
        errors = [relative_error(_states(r, 1), _states(e, 1)) for r, e in zip(runs, exact, strict=True)]
        method = "against the exact discretisation (matrix exponential) at the same samples"
        h_fit, e_fit = steps, errors
    else:
        states = [_states(r, 1) for r in runs]
        errors = [relative_error(states[i], states[i + 1]) for i in range(levels - 1)]
        method = "Richardson: difference between successive halvings (error of the coarser run)"
        h_fit, e_fit = steps[:-1], errors
        steps = steps[:-1]
    positive = [(h, e) for h, e in zip(h_fit, e_fit, strict=True) if e > 0 and math.isfinite(e)]
    observed = None
    if len(positive) >= 2:
        x = np.log([p[0] for p in positive])
        y = np.log([p[1] for p in positive])
        observed = float(np.polyfit(x, y, 1)[0])
    notes = []
    contacts = [s.id for s in system.springs.values() if not s.is_linear]  # end stops, one-sided springs
    if contacts and observed is not None and order is not None and observed < order - 1:
        notes.append(
            f"the observed order is below the declared {order}: contact elements ({', '.join(contacts)}) switch "
            "abruptly, and near each switch the error falls more slowly than the stepper's order"
        )
    return ConvergenceStudy(stepper, list(steps), list(errors), observed, order, method, notes)
