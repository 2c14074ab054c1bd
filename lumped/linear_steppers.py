"""One-step updates of the steppers that run linear systems through their matrices,
z₁ = step(z, w₀, w₁) (w = [u, u', u'', F] at the step's start and end).

Each update is the stepper's own formula (the one its docstring and the stability
analysis pin down), written once on M, C, K and the input coupling. Small systems
apply it to the columns of an identity to get the dense affine map
z₁ = G z + H0 w₀ + H1 w₁ that the compiled :func:`lumped.kernels.affine_chunk`
steps (:func:`affine_maps`); larger ones apply it to the state itself, step by
step, with sparse factorisations (:func:`sparse_update`).
"""

from __future__ import annotations

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from lumped.assemble import Matrices, state_space
from lumped.steppers import ExactStepper, Stepper, implicit_coefficients

__all__ = ["affine_maps", "sparse_update", "DENSE_MAP_LIMIT"]

#: Bodies up to which the implicit steppers run a dense one-step map (above: sparse
#: factorisations applied step by step; a dense map costs (2n)² per step and n³ to make).
DENSE_MAP_LIMIT = 200


def affine_maps(matrices: Matrices, stepper: Stepper, h: float):
    """``(G, H0, H1)`` of ``stepper`` at step ``h`` (s), on the state z = (q, v)."""
    n = matrices.n
    if isinstance(stepper, ExactStepper):
        ss = state_space(matrices, dense=True)
        return _first_order_hold(ss.A, ss.B, h)
    return _columns(_update(matrices, stepper, h, _dense_solver, dense=True), 2 * n, _coupling(matrices).shape[1])


def sparse_update(matrices: Matrices, stepper: Stepper, h: float):
    """``step(z, w0, w1)`` → z₁ of ``stepper`` at step ``h``, z = (q, v), with sparse
    factorisations."""
    return _update(matrices, stepper, h, _sparse_solver, dense=False)


def _coupling(matrices: Matrices):
    """Load on the bodies per input w = [u, u', u'', F]: [−K_s, −C_s, −M_s, P]."""
    return sp.hstack([-matrices.K_s, -matrices.C_s, -matrices.M_s, matrices.P]).tocsr()


def _dense_solver(matrix):
    factors = la.lu_factor(matrix.toarray() if sp.issparse(matrix) else matrix)
    return lambda rhs: la.lu_solve(factors, rhs)


def _sparse_solver(matrix):
    factors = spla.splu(sp.csc_matrix(matrix))
    return factors.solve


def _update(matrices: Matrices, stepper: Stepper, h: float, solver, dense: bool):
    """The stepper's update on (z, w), with linear solves made by ``solver(matrix)``;
    z and w may be vectors or matrices of columns."""
    M, C, K, coupling = matrices.M, matrices.C, matrices.K, _coupling(matrices)
    if dense:
        M, C, K, coupling = M.toarray(), C.toarray(), K.toarray(), coupling.toarray()
    coefficients = implicit_coefficients(stepper)
    if coefficients is None:
        raise ValueError(f"no update on the matrices for stepper {stepper.id!r}")
    return _second_order_implicit(M, C, K, coupling, h, coefficients, solver)


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
    equation of motion at the new state (Newmark, central difference as Newmark with
    β = 0, and the trapezoid and backward Euler written on the second-order form, see
    :func:`lumped.steppers.implicit_coefficients`), on z = (q, v) and loads
    f = coupling·w."""
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
