"""The stepper catalogue: one definition per stepper, read by both the stability check
and the stepping engine, so the two can never disagree.

Every stepper answers the same question about a mode: its one-step amplification on
the modal oscillator ``x'' + 2ζωx' + ω²x = 0`` at ``Ω = hω``. First-order-form
methods (the Runge–Kutta family and the exact discretisation) act on the
eigenvalues ``λ = ω(−ζ ± √(ζ²−1))`` through their stability function R(hλ);
second-order-form methods (symplectic Euler, central difference, Newmark) through
their 2×2 amplification matrix, whose update formula each docstring pins down.
A real (overdamped) eigenvalue λ of a system enters as ω = |λ|, ζ = 1: the
oscillator with a double root at λ.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction as F

import numpy as np

from lumped.steppers.tableau import ButcherTableau

__all__ = [
    "implicit_coefficients",
    "Stepper",
    "RungeKuttaStepper",
    "SecondOrderStepper",
    "ExactStepper",
    "STEPPERS",
    "get_stepper",
    "ButcherTableau",
]


def _directions(zeta):
    """μ± = −ζ ± √(ζ² − 1): the oscillator's eigenvalues for ω = 1."""
    zeta = np.asarray(zeta, dtype=float)
    root = np.sqrt(zeta.astype(complex) ** 2 - 1.0)
    return -zeta + root, -zeta - root


@dataclass(frozen=True)
class Stepper:
    """What every stepper declares.

    ``order``: global order of accuracy (``None`` for the exact discretisation).
    ``evaluations``: force evaluations (linear-part products) per step. ``cost``: the
    per-step work in words. ``explicit``: needs no linear solve per step.
    """

    id: str
    name: str
    order: int | None
    explicit: bool
    evaluations: int
    cost: str
    description: str

    #: "first-order" (acts on x' = Ax through R(hλ)) or "second-order" (on M, C, K).
    form = "first-order"

    def roots(self, omega_h, zeta) -> np.ndarray:
        """Eigenvalues (…, 2) of the one-step map on the modal oscillator at Ω = hω."""
        raise NotImplementedError

    def excess(self, omega_h, zeta) -> tuple[np.ndarray, np.ndarray]:
        """A function positive exactly where the step is unstable (spectral radius > 1),
        and the scale of its terms (for a rounding tolerance)."""
        raise NotImplementedError

    def spectral_radius(self, omega_h, zeta) -> np.ndarray:
        return np.max(np.abs(self.roots(omega_h, zeta)), axis=-1)


@dataclass(frozen=True)
class RungeKuttaStepper(Stepper):
    """A Runge–Kutta method given by its Butcher tableau, explicit or implicit."""

    tableau: ButcherTableau = field(default=None, repr=False)

    def roots(self, omega_h, zeta):
        omega_h = np.asarray(omega_h, dtype=float)
        plus, minus = _directions(zeta)
        return np.stack(
            [self.tableau.stability_function(omega_h * plus), self.tableau.stability_function(omega_h * minus)],
            axis=-1,
        )

    def excess(self, omega_h, zeta):
        plus, minus = _directions(zeta)
        e1, s1 = self.tableau.modulus_excess(omega_h, plus)
        e2, s2 = self.tableau.modulus_excess(omega_h, minus)
        return np.maximum(e1, e2), np.maximum(s1, s2)


@dataclass(frozen=True)
class SecondOrderStepper(Stepper):
    """A method on ``M q'' + C q' + K q = f`` directly, with a 2×2 amplification matrix
    on the modal oscillator. ``beta`` and ``gamma`` are the Newmark parameters (unused
    by the others)."""

    scheme: str = ""
    beta: float = 0.25
    gamma: float = 0.5
    form = "second-order"

    def amplification(self, omega_h, zeta) -> np.ndarray:
        """The one-step matrix G (…, 2, 2) at Ω = hω, time scaled so that ω = 1.

        - ``symplectic-euler``: v₁ = v + h a(x, v); x₁ = x + h v₁, with the damping
          force on the old velocity v; state (x, v).
        - ``central-difference``: (x₊ − 2x + x₋)/h² + 2ζω(x₊ − x₋)/(2h) + ω²x = 0,
          the velocity centred; state (x_n, x_{n−1}).
        - ``newmark``: x₁ = x + h v + h²((½ − β) a + β a₁), v₁ = v + h((1 − γ) a + γ a₁),
          a₁ from the equation of motion at the new state; state (x, v).
        """
        W, z = np.broadcast_arrays(np.asarray(omega_h, dtype=float), np.asarray(zeta, dtype=float))
        G = np.empty(W.shape + (2, 2))
        if self.scheme == "symplectic-euler":
            G[..., 0, 0] = 1 - W**2
            G[..., 0, 1] = W * (1 - 2 * z * W)
            G[..., 1, 0] = -W
            G[..., 1, 1] = 1 - 2 * z * W
        elif self.scheme == "central-difference":
            G[..., 0, 0] = (2 - W**2) / (1 + z * W)
            G[..., 0, 1] = -(1 - z * W) / (1 + z * W)
            G[..., 1, 0] = 1.0
            G[..., 1, 1] = 0.0
        elif self.scheme == "newmark":
            b, g = self.beta, self.gamma
            L = np.empty_like(G)
            R = np.empty_like(G)
            L[..., 0, 0] = 1 + b * W**2
            L[..., 0, 1] = 2 * z * b * W**2
            L[..., 1, 0] = g * W
            L[..., 1, 1] = 1 + 2 * z * g * W
            R[..., 0, 0] = 1 - (0.5 - b) * W**2
            R[..., 0, 1] = W - 2 * z * (0.5 - b) * W**2
            R[..., 1, 0] = -(1 - g) * W
            R[..., 1, 1] = 1 - 2 * z * (1 - g) * W
            G = np.linalg.solve(L, R)
        else:
            raise ValueError(f"unknown second-order scheme {self.scheme!r}")
        return G

    def roots(self, omega_h, zeta):
        G = self.amplification(omega_h, zeta)
        tr = G[..., 0, 0] + G[..., 1, 1]
        det = G[..., 0, 0] * G[..., 1, 1] - G[..., 0, 1] * G[..., 1, 0]
        disc = np.sqrt((tr**2 - 4 * det).astype(complex))
        return np.stack([(tr + disc) / 2, (tr - disc) / 2], axis=-1)

    def excess(self, omega_h, zeta):
        # Schur–Cohn (Jury) conditions for λ² − tr λ + det: both roots in the closed
        # unit disc iff |det| ≤ 1 and |tr| ≤ 1 + det.
        G = self.amplification(omega_h, zeta)
        tr = G[..., 0, 0] + G[..., 1, 1]
        det = G[..., 0, 0] * G[..., 1, 1] - G[..., 0, 1] * G[..., 1, 0]
        return np.maximum(np.abs(det) - 1, np.abs(tr) - 1 - det), 1 + np.abs(tr) + np.abs(det)


@dataclass(frozen=True)
class ExactStepper(Stepper):
    """The exact discretisation of the linear system, x₁ = e^{hA} x (+ input terms)."""

    def roots(self, omega_h, zeta):
        plus, minus = _directions(zeta)
        W = np.asarray(omega_h, dtype=float)
        return np.stack([np.exp(W * plus), np.exp(W * minus)], axis=-1)

    def excess(self, omega_h, zeta):
        plus, _ = _directions(zeta)
        W = np.asarray(omega_h, dtype=float)
        return np.expm1(2 * W * plus.real), np.ones(np.broadcast(W, plus).shape)


_RK_COST = "{s} force evaluations per step"
_IMPLICIT_COST = "linear systems: one solve per step (matrix factored once); nonlinear: Newton iterations per step"


def implicit_coefficients(stepper: Stepper) -> tuple[float, float, float, float] | None:
    """``(α_q, β, α_v, γ)`` of an implicit stepper written on the second-order form,
    q₁ = q + h v + h²(α_q a + β a₁), v₁ = v + h(α_v a + γ a₁), or None.

    Newmark gives (½ − β, β, 1 − γ, γ), and central difference is Newmark with β = 0,
    γ = ½ (the velocity centred): (½, 0, ½, ½). A Runge–Kutta tableau qualifies when each
    stage either sits at the step's start (c = 0, nothing implicit) or is the step's
    end (c = 1, its row of a equal to b): then v₁ = v + h Σ bᵢ aᵢ and
    q₁ = q + h v + h² Σⱼ (bA)ⱼ aⱼ, summed over the two kinds of stage — the trapezoid
    gives (¼, ¼, ½, ½), backward Euler (0, 1, 0, 1).
    """
    if isinstance(stepper, SecondOrderStepper) and stepper.scheme == "newmark":
        return 0.5 - stepper.beta, stepper.beta, 1.0 - stepper.gamma, stepper.gamma
    if isinstance(stepper, SecondOrderStepper) and stepper.scheme == "central-difference":
        return 0.5, 0.0, 0.5, 0.5
    if not isinstance(stepper, RungeKuttaStepper) or stepper.explicit:
        return None
    t = stepper.tableau
    start = [i for i in range(t.stages) if t.c[i] == 0 and all(x == 0 for x in t.a[i])]
    end = [i for i in range(t.stages) if t.c[i] == 1 and tuple(t.a[i]) == tuple(t.b)]
    if len(start) + len(end) != t.stages:
        return None
    bA = [sum(t.b[i] * t.a[i][j] for i in range(t.stages)) for j in range(t.stages)]
    return (float(sum(bA[j] for j in start)), float(sum(bA[j] for j in end)),
            float(sum(t.b[i] for i in start)), float(sum(t.b[i] for i in end)))  # fmt: skip


def _rk(id, name, order, a, b, c, description):
    tableau = ButcherTableau(a, b, c)
    s = tableau.stages
    explicit = tableau.explicit
    return RungeKuttaStepper(
        id=id,
        name=name,
        order=order,
        explicit=explicit,
        evaluations=s if explicit else 1,
        cost=_RK_COST.format(s=s) if explicit else _IMPLICIT_COST,
        description=description,
        tableau=tableau,
    )


_h = F(1, 2)
_CATALOGUE = [
    _rk("euler", "explicit Euler", 1, [[0]], [1], [0],
        "First order; unstable on every undamped mode; for teaching and checks."),
    _rk("heun", "Heun (explicit trapezoid, RK2)", 2, [[0, 0], [1, 0]], [_h, _h], [0, 1],
        "Second order; weakly unstable on lightly damped modes over long runs."),
    _rk("rk3", "Kutta's third-order method", 3,
        [[0, 0, 0], [_h, 0, 0], [-1, 2, 0]], [F(1, 6), F(2, 3), F(1, 6)], [0, _h, 1],
        "Third order; stable on undamped modes up to hω = √3."),
    _rk("rk4", "classical Runge–Kutta (RK4)", 4,
        [[0, 0, 0, 0], [_h, 0, 0, 0], [0, _h, 0, 0], [0, 0, 1, 0]],
        [F(1, 6), F(1, 3), F(1, 3), F(1, 6)], [0, _h, _h, 1],
        "Fourth order; the usual explicit choice; undamped limit hω = 2√2."),
    _rk("rk38", "Kutta's 3/8 rule", 4,
        [[0, 0, 0, 0], [F(1, 3), 0, 0, 0], [F(-1, 3), 1, 0, 0], [1, -1, 1, 0]],
        [F(1, 8), F(3, 8), F(3, 8), F(1, 8)], [0, F(1, 3), F(2, 3), 1],
        "Fourth order, same stability as RK4, smaller error constant."),
    SecondOrderStepper(
        id="symplectic-euler", name="semi-implicit (symplectic) Euler", order=1, explicit=True,
        evaluations=1, cost="one force evaluation per step",
        description="Velocity first, then position; no energy drift when undamped; hω ≤ 2.",
        scheme="symplectic-euler",
    ),
    SecondOrderStepper(
        id="central-difference", name="central difference", order=2, explicit=True,
        evaluations=1, cost="one force evaluation per step (one solve if damping couples bodies)",
        description="Second order, velocity centred; stable for hω ≤ 2 at any damping.",
        scheme="central-difference",
    ),
    SecondOrderStepper(
        id="newmark", name="Newmark (average acceleration by default)", order=2, explicit=False,
        evaluations=1, cost=_IMPLICIT_COST,
        description="β = 1/4, γ = 1/2: unconditionally stable, second order, no numerical damping.",
        scheme="newmark",
    ),
    _rk("trapezoid", "implicit trapezoid", 2, [[0, 0], [_h, _h]], [_h, _h], [0, 1],
        "Second order, A-stable, no numerical damping on linear systems."),
    _rk("backward-euler", "backward Euler", 1, [[1]], [1], [1],
        "First order, L-stable; damps high modes strongly."),
    ExactStepper(
        id="exact", name="exact discretisation (matrix exponential)", order=None, explicit=True,
        evaluations=1, cost="one dense matrix-vector product per step (matrix exponential once)",
        description="Exact for linear systems whose inputs are linear over each step (first-order hold); dense up to 2 000 bodies.",
    ),
]  # fmt: skip

#: Every stepper by id, in the order menus show them.
STEPPERS: dict[str, Stepper] = {s.id: s for s in _CATALOGUE}


def get_stepper(stepper_id: str, beta: float | None = None, gamma: float | None = None) -> Stepper:
    """The stepper ``stepper_id``; ``beta`` and ``gamma`` set Newmark's parameters.

    Raises
    ------
    KeyError
        Unknown id (the message lists the known ones).
    ValueError
        ``beta``/``gamma`` given for another stepper, or out of range.
    """
    if stepper_id not in STEPPERS:
        raise KeyError(f"unknown stepper {stepper_id!r}; known: {', '.join(STEPPERS)}")
    stepper = STEPPERS[stepper_id]
    if beta is None and gamma is None:
        return stepper
    if stepper_id != "newmark":
        raise ValueError(f"beta and gamma apply to newmark only, not {stepper_id!r}")
    beta = stepper.beta if beta is None else float(beta)
    gamma = stepper.gamma if gamma is None else float(gamma)
    if not (0 <= beta <= 0.5 and 0 <= gamma <= 1):
        raise ValueError(f"newmark needs 0 ≤ beta ≤ 0.5 and 0 ≤ gamma ≤ 1, got {beta}, {gamma}")
    order = 2 if gamma == 0.5 else 1
    return SecondOrderStepper(
        id="newmark", name=f"Newmark (β = {beta:g}, γ = {gamma:g})", order=order,
        explicit=beta == 0, evaluations=1, cost=stepper.cost, description=stepper.description,
        scheme="newmark", beta=beta, gamma=gamma,
    )  # fmt: skip
