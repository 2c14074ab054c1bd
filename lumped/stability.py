"""Step limits: for a stepper and a mode, the largest stable step; for a system, the
smallest over its modes and the mode that sets it; for a chosen step and duration,
each mode's growth over the whole run, its numerical damping and period error, and
a recommended step.

The one mechanism for every stepper is its one-step amplification on the modal
oscillator at Ω = hω (see :mod:`lumped.steppers`). Since that depends on h and ω only
through Ω, a mode's limit is Ω_crit(ζ)/ω, with Ω_crit found once per damping ratio:
a log-spaced scan of the stepper's instability test from Ω = 1e-14 to 1e4, then
bisection of the first crossing to far below 1e-9 relative. No crossing up to 1e4
means the stepper is unconditionally stable on that mode; instability at the
smallest Ω means no positive step is stable (explicit Euler or Heun on an undamped
mode).

Systems of up to :data:`~lumped.assemble.DENSE_LIMIT` bodies use their exact
eigenvalues; larger ones use the bound on the stiffest mode (:func:`lumped.modal.stiffest_mode`),
which errs on the safe side, and the report says so. Since only |λ| is bounded there,
not the damping of each mode, the bound is taken at the damping ratio in [0, 1] at
which the stepper is least stable (:func:`least_stable_damping`): the limit then holds
for every mode whatever its damping, and a stepper that is unstable on undamped modes
(explicit Euler, Heun) gets no guaranteed step on a large system.
"""

from __future__ import annotations

import dataclasses
import functools
import math
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import minimize_scalar

from lumped.assemble import DENSE_LIMIT, Matrices, congruence
from lumped.errors import LumpedError
from lumped.modal import UNDAMPED_ZETA, damped_eigenvalues, stiffest_mode
from lumped.steppers import RungeKuttaStepper, Stepper, implicit_coefficients

__all__ = [
    "ModeCheck",
    "StepCheck",
    "critical_omega_h",
    "least_stable_damping",
    "max_stable_step",
    "check_step",
    "STABILITY_SAFETY",
    "STEPS_PER_PERIOD",
]

#: The recommended step is at most this fraction of the stability limit …
STABILITY_SAFETY = 0.5
#: … and gives at least this many steps per period of the highest mode considered.
STEPS_PER_PERIOD = 20
#: Accuracy rule of the recommended step: |ζ_numerical − ζ| ≤ a·ζ + b, |period error| ≤ p.
DAMPING_TOLERANCE = (0.05, 0.002)
PERIOD_TOLERANCE = 0.01
MAX_ACCURACY_HALVINGS = 30
#: Ω range scanned for the first unstable step (Ω = hω), and points per decade.
SCAN_RANGE = (1e-14, 1e4)
SCAN_POINTS_PER_DECADE = 40
#: Instability test: excess above this fraction of its terms' size (RK family) or of
#: the amplification matrix's size (second-order form) is growth, not rounding.
EXCESS_TOLERANCE = {"first-order": 1e-14, "second-order": 1e-12}
#: Bisection steps on the bracketing Ω interval (each halves it).
BISECTION_STEPS = 64
#: Damping ratios in [0, 1] scanned for the one with the smallest Ω_crit, before a
#: bounded refinement around the smallest.
LEAST_STABLE_POINTS = 201


class StepError(LumpedError):
    """A step-limit question that cannot be answered (bad step, no bodies, …)."""


def _unstable(stepper: Stepper, omega_h, zeta) -> np.ndarray:
    excess, scale = stepper.excess(omega_h, zeta)
    return excess > EXCESS_TOLERANCE[stepper.form] * scale


def critical_omega_h(stepper: Stepper, zeta) -> np.ndarray:
    """Ω_crit(ζ) = h_max·ω per damping ratio: ``inf`` when no crossing up to 1e4,
    0 when no positive step is stable. Vectorised over ``zeta``."""
    zeta = np.atleast_1d(np.asarray(zeta, dtype=float))
    zeta = np.where(np.abs(zeta) < UNDAMPED_ZETA, 0.0, zeta)
    unique, inverse = np.unique(zeta, return_inverse=True)
    lo_exp, hi_exp = np.log10(SCAN_RANGE)
    grid = np.logspace(lo_exp, hi_exp, int((hi_exp - lo_exp) * SCAN_POINTS_PER_DECADE) + 1)
    unstable = _unstable(stepper, grid[None, :], unique[:, None])
    first = np.argmax(unstable, axis=1)
    any_unstable = unstable.any(axis=1)
    result = np.full(len(unique), np.inf)
    result[any_unstable & (first == 0)] = 0.0
    bracket = any_unstable & (first > 0)
    if bracket.any():
        z = unique[bracket]
        lo = grid[first[bracket] - 1]
        hi = grid[first[bracket]]
        for _ in range(BISECTION_STEPS):
            mid = np.sqrt(lo * hi)
            bad = _unstable(stepper, mid, z)
            hi = np.where(bad, mid, hi)
            lo = np.where(bad, lo, mid)
        result[bracket] = lo
    return result[inverse]


@functools.lru_cache(maxsize=128)
def least_stable_damping(stepper: Stepper) -> tuple[float, float]:
    """The damping ratio ζ* in [0, 1] at which ``stepper``'s limit Ω_crit(ζ) is smallest,
    and that smallest Ω_crit.

    Every mode has a damping ratio in [0, 1] (a real eigenvalue counts as ζ = 1), so
    Ω_crit(ζ*)/h is a bound on |λ| below which every mode is stable, whatever its
    damping. 0 for steppers unstable on an undamped mode, ``inf`` for unconditionally
    stable ones.
    """
    grid = np.linspace(0.0, 1.0, LEAST_STABLE_POINTS)
    limits = critical_omega_h(stepper, grid)
    k = int(np.argmin(limits))
    zeta, smallest = float(grid[k]), float(limits[k])
    if 0 < smallest < math.inf:
        bounds = (float(grid[max(k - 1, 0)]), float(grid[min(k + 1, len(grid) - 1)]))
        refined = minimize_scalar(
            lambda z: float(critical_omega_h(stepper, z)[0]), bounds=bounds, method="bounded",
            options={"xatol": 1e-10},
        )  # fmt: skip
        if refined.fun < smallest:
            zeta, smallest = float(refined.x), float(refined.fun)
    return zeta, smallest


def max_stable_step(stepper: Stepper, eigenvalues) -> np.ndarray:
    """Largest stable step (s) per mode given by its eigenvalue λ (rad/s): ``inf`` for
    no limit, 0 for none stable; rigid-body modes (λ = 0) set no limit."""
    lam = np.atleast_1d(np.asarray(eigenvalues, dtype=complex))
    omega = np.abs(lam)
    with np.errstate(invalid="ignore", divide="ignore"):
        zeta = np.where(omega > 0, -lam.real / np.where(omega > 0, omega, 1.0), 0.0)
        limit = critical_omega_h(stepper, zeta) / omega
    limit[omega == 0] = np.inf
    return limit


@dataclass(frozen=True)
class ModeCheck:
    """One mode at the chosen step: frequency (Hz), damping ratio, its step limit (s),
    spectral radius per step, growth over the run, and the stepper's numerical
    damping ratio and period error (T_numerical / T − 1) on it. ``state`` says which
    linearisation it belongs to ("linearised", "stiffest contact state" or "bound")."""

    state: str
    natural_frequency_hz: float
    damping_ratio: float
    max_stable_dt: float
    spectral_radius: float
    growth_over_run: float
    numerical_damping_ratio: float | None
    period_error: float | None

    def to_json(self) -> dict:
        return {k: _json_number(v) for k, v in self.__dict__.items()}


@dataclass(frozen=True)
class StepCheck:
    """The verdict on a stepper, step and duration for a system.

    ``max_stable_dt`` is ``None`` when no positive step is stable and ``inf`` when the
    stepper has no limit on this system; ``limiting_mode`` indexes ``modes``.
    ``source`` says whether exact eigenvalues or the stiffest-mode bound were used.
    ``runs`` is False when the stepper cannot run this system (a linear-only stepper
    on a system with nonlinear elements: a run is refused; the last note says why).
    """

    stepper: str
    dt: float
    duration: float
    steps: int
    stable: bool
    max_stable_dt: float | None
    limiting_mode: int | None
    growth_over_run: float
    recommended_dt: float
    recommendation_rule: str
    source: str
    modes: list[ModeCheck] = field(repr=False)
    notes: list[str] = field(default_factory=list)
    runs: bool = True

    def to_json(self) -> dict:
        limiting = self.modes[self.limiting_mode] if self.limiting_mode is not None else None
        return {
            "stepper": self.stepper,
            "dt": self.dt,
            "duration": self.duration,
            "steps": self.steps,
            "stable": self.stable,
            "max_stable_dt": _json_number(self.max_stable_dt),
            "limiting_mode": (
                None if limiting is None else {
                    "index": self.limiting_mode,
                    "natural_frequency_hz": limiting.natural_frequency_hz,
                    "damping_ratio": limiting.damping_ratio,
                }
            ),
            "growth_over_run": _json_number(self.growth_over_run),
            "recommended_dt": _json_number(self.recommended_dt),
            "recommendation_rule": self.recommendation_rule,
            "source": self.source,
            "modes": [m.to_json() for m in self.modes],
            "notes": self.notes,
            "runs": self.runs,
        }  # fmt: skip


def _json_number(value):
    """inf stays inf (the command line writes it as the string "Infinity"); NaN becomes null."""
    if isinstance(value, float) and math.isnan(value):
        return None
    return value


def step_count(dt: float, duration: float) -> int:
    """Steps of a run: whole steps plus one shortened step for any remainder."""
    whole = math.floor(duration / dt + 1e-9)
    return whole + (1 if duration - whole * dt > 1e-12 * duration else 0)


def check_step(
    matrices: Matrices,
    stepper: Stepper,
    dt: float,
    duration: float,
    up_to_hz: float | None = None,
) -> StepCheck:
    """Check ``stepper`` at step ``dt`` (s) over ``duration`` (s) on ``matrices``.

    ``up_to_hz`` limits the modes the accuracy rule of the recommended step looks at
    (default: all modes).
    """
    if not (math.isfinite(dt) and dt > 0):
        raise StepError(f"dt must be a positive time step, got {dt!r} s")
    if not (math.isfinite(duration) and duration > 0):
        raise StepError(f"duration must be positive, got {duration!r} s")
    if matrices.n == 0:
        raise StepError("the system has no bodies")
    notes = []
    bound_only = matrices.n > DENSE_LIMIT
    states = None
    if not bound_only:
        eig = damped_eigenvalues(matrices)
        states = ["linearised"] * len(eig)
        source = "exact eigenvalues"
        stiff = stiffest_state(matrices)
        if stiff is not None:
            extra = damped_eigenvalues(stiff)
            eig = np.concatenate([eig, extra])
            states += ["stiffest contact state"] * len(extra)
            notes.append(
                "linearised at static equilibrium (end stops open, asymmetric and tabulated "
                "dampers at their slope through zero); the limit also covers the stiffest "
                "contact state (every end stop engaged, every nonlinear damper at its largest "
                "slope), whose modes are listed after the others"
            )
    else:
        top = stiffest_mode(matrices)
        # Every mode has |λ| ≤ the bound, but its damping ratio is unknown: the bound at
        # the ratio where the stepper is least stable gives a limit safe for all modes.
        # The estimate's own ratio, halved and doubled, is kept for the report.
        worst, _ = least_stable_damping(stepper)
        ratio = top.damping_ratio
        zetas = np.unique(np.clip([worst, ratio, 0.5 * ratio, 2 * ratio], 0, 1))
        eig = top.bound * (-zetas + 1j * np.sqrt(1 - zetas**2))
        source = "bound on the stiffest mode"
        notes.append(
            f"{matrices.n} bodies: limits use a guaranteed upper bound on the stiffest mode "
            f"({top.bound / (2 * math.pi):.6g} Hz; estimate {top.estimate / (2 * math.pi):.6g} Hz) "
            f"at the damping ratio where {stepper.id} is least stable ({worst:.3g}), and at the "
            f"estimate's ratio {top.damping_ratio:.3g} halved and doubled, so they err on the safe side"
        )
    omega = np.abs(eig)
    rigid = omega == 0
    with np.errstate(invalid="ignore", divide="ignore"):
        zeta = np.where(rigid, 0.0, -eig.real / np.where(rigid, 1.0, omega))
    zeta = np.where(np.abs(zeta) < UNDAMPED_ZETA, 0.0, zeta)
    limits = max_stable_step(stepper, eig)
    steps = step_count(dt, duration)
    log_rho, roots = _log_radius_and_root(stepper, dt * omega, zeta)
    with np.errstate(over="ignore"):
        growth = np.exp(np.minimum(steps * log_rho, 700.0))
    growth = np.where(steps * log_rho > 700.0, np.inf, growth)
    unstable_now = _unstable(stepper, dt * omega, zeta) & ~rigid
    growth[rigid] = 1.0
    modes = []
    for k in range(len(eig)):
        num_zeta, period = _numerical_behaviour(roots[k], eig[k], dt) if not rigid[k] else (None, None)
        modes.append(
            ModeCheck(
                state=states[k] if states else "bound",
                natural_frequency_hz=float(omega[k] / (2 * math.pi)),
                damping_ratio=float(zeta[k]),
                max_stable_dt=float(limits[k]),
                spectral_radius=float(np.exp(log_rho[k])),
                growth_over_run=float(growth[k]),
                numerical_damping_ratio=num_zeta,
                period_error=period,
            )
        )
    finite = ~rigid
    if finite.any() and np.isfinite(limits[finite]).any():
        limiting = int(np.flatnonzero(finite)[np.argmin(limits[finite])])
        system_limit = float(limits[limiting])
    else:
        limiting, system_limit = None, math.inf
    stable = not bool(unstable_now.any())
    linear = np.array([st == "linearised" for st in states]) if states else np.zeros(len(eig), bool)
    recommended, rule = _recommend(stepper, system_limit, eig[finite & linear], up_to_hz, bound_only)
    if system_limit == 0.0 and bound_only:
        notes.append(
            f"no positive step can be guaranteed stable with {stepper.id}: only a bound on the "
            f"stiffest mode is known, not every mode's damping, and {stepper.id} amplifies "
            f"an undamped mode at any step"
        )
    elif system_limit == 0.0:
        notes.append(
            f"no positive step is stable with {stepper.id}: it amplifies the undamped "
            f"{omega[limiting] / (2 * math.pi):.6g} Hz mode at any step"
        )
    runs = not (matrices.nonlinear.count and not runs_nonlinear(stepper))
    if not runs:
        notes.append(
            f"{stepper.id} runs linear systems only, and this system has nonlinear "
            "elements: a run with it is refused (use newmark, trapezoid, backward-euler, central-difference, "
            "an explicit Runge–Kutta stepper or symplectic-euler)"
        )
    run_growth = float(np.max(growth)) if len(growth) else 1.0
    if bound_only:
        # Only the stiffest mode is known; a large system's slow, lightly damped modes
        # may barely decay over the run, so no factor below 1 is claimed.
        run_growth = max(run_growth, 1.0)
    return StepCheck(
        stepper=stepper.id,
        dt=float(dt),
        duration=float(duration),
        steps=steps,
        stable=stable,
        max_stable_dt=None if system_limit == 0.0 else system_limit,
        limiting_mode=limiting,
        growth_over_run=run_growth,
        recommended_dt=recommended,
        recommendation_rule=rule,
        source=source,
        modes=modes,
        notes=notes,
        runs=runs,
    )


def _log_radius_and_root(stepper: Stepper, omega_h: np.ndarray, zeta: np.ndarray):
    """log of the spectral radius per mode (accurate near 1) and the principal root."""
    roots = stepper.roots(omega_h, zeta)  # (modes, 2)
    if isinstance(stepper, RungeKuttaStepper):
        plus = -zeta + np.sqrt(zeta.astype(complex) ** 2 - 1)
        minus = -zeta - np.sqrt(zeta.astype(complex) ** 2 - 1)
        logs = []
        for mu in (plus, minus):
            excess, _ = stepper.tableau.modulus_excess(omega_h, mu)
            d2 = stepper.tableau.denominator_modulus2(omega_h * mu)
            logs.append(0.5 * np.log1p(excess / d2))
        log_rho = np.maximum(*logs)
    else:
        log_rho = np.log(np.max(np.abs(roots), axis=-1))
    principal = np.where(roots[:, 0].imag >= 0, roots[:, 0], roots[:, 1])
    return log_rho, principal


def _numerical_behaviour(root: complex, lam: complex, dt: float):
    """Numerical damping ratio and period error of one step's principal root."""
    if root == 0:
        return 1.0, None
    log_root = complex(np.log(root))  # = h·λ_numerical
    magnitude = abs(log_root)
    num_zeta = float(-log_root.real / magnitude) if magnitude > 0 else None
    if lam.imag > 0 and log_root.imag > 0:
        period = float(lam.imag * dt / log_root.imag - 1.0)
    else:
        period = None
    return num_zeta, period


def _recommend(stepper: Stepper, limit: float, eig: np.ndarray, up_to_hz: float | None, bound_only: bool):
    """Recommended step and the rule that gave it: the smaller of the safety fraction of
    the stability limit and the steps-per-period rule, halved until the numerical
    damping and period error on every mode considered are within tolerance."""
    candidates = []
    rule = []
    if math.isfinite(limit) and limit > 0:
        candidates.append(STABILITY_SAFETY * limit)
        rule.append(f"{STABILITY_SAFETY:g} × the stability limit")
    omega = np.abs(eig)
    keep = omega > 0
    if up_to_hz is not None:
        keep &= omega <= 2 * math.pi * up_to_hz
    considered = eig[keep]
    if len(considered) and not bound_only:
        highest = float(np.max(np.abs(considered)))
        candidates.append(2 * math.pi / highest / STEPS_PER_PERIOD)
        scope = f"modes up to {up_to_hz:g} Hz" if up_to_hz is not None else "all modes"
        rule.append(
            f"{STEPS_PER_PERIOD} steps per period of the highest mode considered "
            f"({highest / (2 * math.pi):.4g} Hz; {scope})"
        )
    if not candidates:
        return math.nan, "no finite rule applies"
    h = float(min(candidates))
    text = "the smaller of " + " and ".join(rule) if len(rule) > 1 else rule[0]
    if len(considered) and not bound_only:
        halvings = 0
        while not _accurate(stepper, considered, h) and halvings < MAX_ACCURACY_HALVINGS:
            h *= 0.5
            halvings += 1
        text += (
            f", halved until every mode considered has its damping ratio within "
            f"{DAMPING_TOLERANCE[0]:g}·ζ + {DAMPING_TOLERANCE[1]:g} and its period within "
            f"{PERIOD_TOLERANCE:.0%}"
        )
        if halvings:
            text += f" ({halvings} halving{'s' if halvings > 1 else ''})"
    return h, text


def _accurate(stepper: Stepper, eig: np.ndarray, h: float) -> bool:
    """True when the stepper's numerical damping and period error at step ``h`` are
    within tolerance on every given mode."""
    omega = np.abs(eig)
    zeta = -eig.real / omega
    _, roots = _log_radius_and_root(stepper, h * omega, zeta)
    for root, lam in zip(roots, eig, strict=True):
        num_zeta, period = _numerical_behaviour(root, lam, h)
        true_zeta = float(-lam.real / abs(lam))
        if num_zeta is None or abs(num_zeta - true_zeta) > DAMPING_TOLERANCE[0] * true_zeta + DAMPING_TOLERANCE[1]:
            return False
        if period is not None and abs(period) > PERIOD_TOLERANCE:
            return False
    return True


def runs_nonlinear(stepper: Stepper) -> bool:
    """True for the steppers the engine runs on systems with nonlinear elements: the
    explicit Runge–Kutta family, symplectic Euler, and the steppers written on the
    second-order form (Newmark, trapezoid, backward Euler, central difference:
    Newton's method in every step)."""
    return (
        (isinstance(stepper, RungeKuttaStepper) and stepper.explicit)
        or getattr(stepper, "scheme", "") == "symplectic-euler"
        or implicit_coefficients(stepper) is not None
    )


def stiffest_state(matrices: Matrices) -> Matrices | None:
    """The matrices of the stiffest contact state: every end stop engaged (its gap
    stiffness added) and every asymmetric or tabulated damper at its largest slope;
    None for a linear system."""
    nl = matrices.nonlinear
    if not (len(nl.end_stop_index) or len(nl.asymmetric_index) or len(nl.curve_index)):
        return None
    stiffness = matrices.stiffness.copy()
    stiffness[nl.end_stop_index] += nl.end_stop_stiffness
    damping = matrices.damping.copy()
    damping[nl.asymmetric_index] = np.maximum(nl.asymmetric_rebound, nl.asymmetric_compression)
    for j, e in enumerate(nl.curve_index):
        v = nl.curve_velocity[nl.curve_offset[j]:nl.curve_offset[j + 1]]
        f = nl.curve_force[nl.curve_offset[j]:nl.curve_offset[j + 1]]
        damping[e] = float(np.max(np.diff(f) / np.diff(v)))
    return dataclasses.replace(
        matrices,
        stiffness=stiffness,
        damping=damping,
        K=congruence(matrices.D, stiffness),
        C=congruence(matrices.D, damping),
    )
