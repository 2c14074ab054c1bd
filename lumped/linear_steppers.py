"""One-step updates of the steppers that run linear systems through their matrices,
z₁ = step(z, w₀, w₁) (w = [u, u', u'', F] at the step's start and end).

Each update is the stepper's own formula (the one its docstring and the stability
analysis pin down), written once on M, C, K and the input coupling. Small systems
apply it to the columns of an identity to get the dense affine map
z₁ = G z + H0 w₀ + H1 w₁ that the compiled :func:`lumped.kernels.affine_chunk`
steps (:func:`affine_maps`); larger ones apply it to the state itself, step by
step, with sparse factorisations (:func:`sparse_updates`).
"""

from __future__ import annotations

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from lumped.assemble import Matrices, state_space
from lumped.steppers import ExactStepper, SecondOrderStepper, Stepper, implicit_coefficients

__all__ = ["affine_maps", "sparse_updates", "DENSE_MAP_LIMIT"]

#: Bodies up to which the implicit steppers run a dense one-step map (above: sparse
#: factorisations applied step by step; a dense map costs (2n)² per step and n³ to make).
DENSE_MAP_LIMIT = 200


def affine_maps(matrices: Matrices, stepper: Stepper, h: float):
    """``(G, H0, H1, Qmap, Vmap, VWmap, to_state)`` of ``stepper`` at step ``h`` (s).

    ``to_state(q, v, w)`` turns body displacements and velocities (and the inputs at
    that instant) into the stepper's state z; q = Qmap z, v = Vmap z + VWmap w.
    """
    n = matrices.n
    if isinstance(stepper, ExactStepper):
        ss = state_space(matrices, dense=True)
        G, H0, H1 = _first_order_hold(ss.A, ss.B, h)
        return (G, H0, H1, np.hstack([np.eye(n), np.zeros((n, n))]), np.hstack([np.zeros((n, n)), np.eye(n)]),
                np.zeros((n, ss.B.shape[1])), lambda q, v, w: np.concatenate([q, v]))  # fmt: skip
    step, to_state, velocity = _updates(matrices, stepper, h, _dense_solver, dense=True)
    nw = _coupling(matrices).shape[1]
    G, H0, H1 = _columns(step, 2 * n, nw)
    # v is linear in (z, w): read its map off the same function.
    Vmap = velocity(np.eye(2 * n), np.zeros((nw, 2 * n)))
    VWmap = velocity(np.zeros((2 * n, nw)), np.eye(nw))
    return G, H0, H1, np.hstack([np.eye(n), np.zeros((n, n))]), Vmap, VWmap, to_state


def sparse_updates(matrices: Matrices, stepper: Stepper, h: float):
    """``(step, to_state, velocity)`` of ``stepper`` at step ``h`` with sparse
    factorisations: ``step(z, w0, w1)`` → z₁, ``to_state(q, v, w)`` → z,
    ``velocity(z, w)`` → body velocities; q is the first half of z."""
    return _updates(matrices, stepper, h, _sparse_solver, dense=False)


def _coupling(matrices: Matrices):
    """Load on the bodies per input w = [u, u', u'', F]: [−K_s, −C_s, −M_s, P]."""
    return sp.hstack([-matrices.K_s, -matrices.C_s, -matrices.M_s, matrices.P]).tocsr()


def _dense_solver(matrix):
    factors = la.lu_factor(matrix.toarray() if sp.issparse(matrix) else matrix)
    return lambda rhs: la.lu_solve(factors, rhs)


def _sparse_solver(matrix):
    factors = spla.splu(sp.csc_matrix(matrix))
    return factors.solve


def _updates(matrices: Matrices, stepper: Stepper, h: float, solver, dense: bool):
    """The stepper's update, to_state and velocity functions on (z, w), with linear
    solves made by ``solver(matrix)``; z and w may be vectors or matrices of columns."""
    M, C, K, coupling = matrices.M, matrices.C, matrices.K, _coupling(matrices)
    if dense:
        M, C, K, coupling = M.toarray(), C.toarray(), K.toarray(), coupling.toarray()
    n = matrices.n

    def as_state(q, v, w):
        return np.concatenate([q, v])

    def own_velocity(z, w):
        return z[n:]

    coefficients = implicit_coefficients(stepper)
    if coefficients is not None:
        step = _second_order_implicit(M, C, K, coupling, h, coefficients, solver)
        return step, as_state, own_velocity
    if isinstance(stepper, SecondOrderStepper) and stepper.scheme == "central-difference":
        return _central_difference(M, C, K, coupling, h, solver)
    raise ValueError(f"no update on the matrices for stepper {stepper.id!r}")


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


def _second_order_implicit(M, C, K, coupling, h, coefficients, solver):
    """q₁ = q + h v + h²(α_q a + β a₁), v₁ = v + h(α_v a + γ a₁), with a₁ from the
    equation of motion at the new state (Newmark; the trapezoid and backward Euler
    written on the second-order form, see :func:`lumped.steppers.implicit_coefficients`),
    on z = (q, v) and loads f = coupling·w."""
    n = M.shape[0]
    aq, beta, av, gamma = coefficients
    effective = solver(M + gamma * h * C + beta * h * h * K)
    mass = solver(M)

    def step(z, w0, w1):
        x, v = z[:n], z[n:]
        a0 = mass(coupling @ w0 - C @ v - K @ x)
        predictor_x = x + h * v + h * h * aq * a0
        predictor_v = v + h * av * a0
        a1 = effective(coupling @ w1 - C @ predictor_v - K @ predictor_x)
        return np.concatenate([predictor_x + beta * h * h * a1, predictor_v + gamma * h * a1])

    return step


def _central_difference(M, C, K, coupling, h, solver):
    """Central difference on z = (x_n, v_{n−1/2}): (M/h + C/2) v_{n+1/2} =
    (M/h − C/2) v_{n−1/2} + f_n − K x_n, x_{n+1} = x_n + h v_{n+1/2}; the velocity at
    t_n is v_n = (M/h + C/2)⁻¹ (M v_{n−1/2}/h − K x_n/2 + f_n/2)."""
    n = M.shape[0]
    centred = solver(M / h + C / 2)
    behind = M / h - C / 2
    mass = solver(M)

    def step(z, w0, w1):
        x, v_half = z[:n], z[n:]
        v_next = centred(behind @ v_half + coupling @ w0 - K @ x)
        return np.concatenate([x + h * v_next, v_next])

    def velocity(z, w):
        x, v_half = z[:n], z[n:]
        return centred(M @ v_half / h - 0.5 * (K @ x) + 0.5 * (coupling @ w))

    def to_state(q, v, w):
        acceleration = mass(coupling @ w - K @ q - C @ v)
        return np.concatenate([q, v - 0.5 * h * acceleration])

    return step, to_state, velocity
