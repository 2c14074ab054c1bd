"""One-step maps of the steppers that run linear systems as a dense affine map,
z₁ = G z + H0 w₀ + H1 w₁ (w = [u, u', u'', F] at the step's start and end).

Each map is built by applying the stepper's own update formula (the one its
docstring and the stability analysis pin down) to the columns of an identity, so
that the matrices are the update, not a re-derivation of it.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg as la

from lumped.assemble import Matrices, state_space
from lumped.steppers import ExactStepper, RungeKuttaStepper, SecondOrderStepper, Stepper

__all__ = ["affine_maps"]


def affine_maps(matrices: Matrices, stepper: Stepper, h: float):
    """``(G, H0, H1, Qmap, Vmap, VWmap, to_state)`` of ``stepper`` at step ``h`` (s).

    ``to_state(q, v, w)`` turns body displacements and velocities (and the inputs at
    that instant) into the stepper's state z; q = Qmap z, v = Vmap z + VWmap w.
    """
    n = matrices.n
    ss = state_space(matrices, dense=True)
    A, B = ss.A, ss.B
    nw = B.shape[1]
    M = matrices.M.toarray()
    K = matrices.K.toarray()
    C = matrices.C.toarray()
    coupling = M @ B[n:, :]  # load on the bodies per input: [−K_s, −C_s, −M_s, P]
    eye_n, zero_n = np.eye(n), np.zeros((n, n))
    Qmap = np.hstack([eye_n, zero_n])
    Vmap = np.hstack([zero_n, eye_n])
    VWmap = np.zeros((n, nw))

    def as_state(q, v, w):
        return np.concatenate([q, v])

    to_state = as_state
    if isinstance(stepper, ExactStepper):
        G, H0, H1 = _first_order_hold(A, B, h)
    elif isinstance(stepper, RungeKuttaStepper):
        step = _implicit_rk(stepper, A, B, h)
        G, H0, H1 = _columns(step, 2 * n, nw)
    elif isinstance(stepper, SecondOrderStepper) and stepper.scheme == "newmark":
        step = _newmark(M, C, K, coupling, h, stepper.beta, stepper.gamma)
        G, H0, H1 = _columns(step, 2 * n, nw)
    elif isinstance(stepper, SecondOrderStepper) and stepper.scheme == "central-difference":
        S = np.linalg.inv(M / h + C / 2)
        step = _central_difference(M, C, K, coupling, h, S)
        G, H0, H1 = _columns(step, 2 * n, nw)
        Vmap = np.hstack([-0.5 * S @ K, S @ M / h])
        VWmap = 0.5 * S @ coupling
        Minv = np.linalg.inv(M)

        def to_state(q, v, w):
            acceleration = Minv @ (coupling @ w - K @ q - C @ v)
            return np.concatenate([q, v - 0.5 * h * acceleration])

    else:
        raise ValueError(f"no affine map for stepper {stepper.id!r}")
    return G, H0, H1, Qmap, Vmap, VWmap, to_state


def _columns(step, nz: int, nw: int):
    """G, H0, H1 of a linear ``step(z, w0, w1)`` acting on matrices column-wise."""
    G = step(np.eye(nz), np.zeros((nw, nz)), np.zeros((nw, nz)))
    H0 = step(np.zeros((nz, nw)), np.eye(nw), np.zeros((nw, nw)))
    H1 = step(np.zeros((nz, nw)), np.zeros((nw, nw)), np.eye(nw))
    return G, H0, H1


def _first_order_hold(A, B, h):
    """Exact discretisation with inputs linear over the step: with ẇ = (w₁ − w₀)/h,
    expm of [[A, B, 0], [0, 0, I], [0, 0, 0]]·h gives x₁ = Φx + Γ₀w₀ + Γ₁ẇ."""
    nz, nw = B.shape
    big = np.zeros((nz + 2 * nw, nz + 2 * nw))
    big[:nz, :nz] = A
    big[:nz, nz:nz + nw] = B
    big[nz:nz + nw, nz + nw:] = np.eye(nw)
    E = la.expm(big * h)
    Phi, Gamma0, Gamma1 = E[:nz, :nz], E[:nz, nz:nz + nw], E[:nz, nz + nw:]
    return Phi, Gamma0 - Gamma1 / h, Gamma1 / h


def _implicit_rk(stepper: RungeKuttaStepper, A, B, h):
    """A Runge–Kutta step on x' = A x + B w with stage inputs w(t + c_i h), c_i ∈ {0, 1}."""
    a, b, c = stepper.tableau.arrays()
    if not np.all(np.isin(c, (0.0, 1.0))):
        raise ValueError(f"{stepper.id}: stage nodes other than 0 and 1 are not supported here")
    s, nz = len(b), A.shape[0]
    system = np.eye(s * nz) - h * np.kron(a, A)
    lu = la.lu_factor(system)

    def step(x, w0, w1):
        rhs = np.concatenate([A @ x + B @ (w1 if ci == 1.0 else w0) for ci in c])
        stages = la.lu_solve(lu, rhs).reshape(s, nz, -1)
        return x + h * np.tensordot(b, stages, axes=1)

    return step


def _newmark(M, C, K, coupling, h, beta, gamma):
    """Newmark's update on z = (x, v) with loads f = coupling·w (see the stepper's docstring)."""
    n = M.shape[0]
    effective = la.lu_factor(M + gamma * h * C + beta * h * h * K)
    mass = la.lu_factor(M)

    def step(z, w0, w1):
        x, v = z[:n], z[n:]
        a0 = la.lu_solve(mass, coupling @ w0 - C @ v - K @ x)
        predictor_x = x + h * v + h * h * (0.5 - beta) * a0
        predictor_v = v + h * (1 - gamma) * a0
        a1 = la.lu_solve(effective, coupling @ w1 - C @ predictor_v - K @ predictor_x)
        return np.vstack([predictor_x + beta * h * h * a1, predictor_v + gamma * h * a1])

    return step


def _central_difference(M, C, K, coupling, h, S):
    """Central difference on z = (x_n, v_{n−1/2}): (M/h + C/2) v_{n+1/2} =
    (M/h − C/2) v_{n−1/2} + f_n − K x_n, x_{n+1} = x_n + h v_{n+1/2}."""
    n = M.shape[0]

    def step(z, w0, w1):
        x, v_half = z[:n], z[n:]
        v_next = S @ ((M / h - C / 2) @ v_half + coupling @ w0 - K @ x)
        return np.vstack([x + h * v_next, v_next])

    return step
