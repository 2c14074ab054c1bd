"""Static equilibrium under gravity: each body's static deflection and each element's
static force.

Linear systems take one sparse solve of ``K q = −m g − D_bᵀ p`` (``p`` the spring
preloads). Systems with one-sided springs take a semi-smooth Newton iteration on the
springs' contact states (an active-set method: for a piecewise-linear force law it
is Newton's method, exact in finitely many steps). A floating system is solved in
the frame that falls with it, where uniform gravity deforms nothing.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.sparse.csgraph import connected_components

from lumped.assemble import Matrices, congruence
from lumped.errors import LumpedError

__all__ = ["StaticState", "StaticError", "static_equilibrium", "MAX_NEWTON_ITERATIONS"]

#: Contact-state iterations before static equilibrium is declared not found.
MAX_NEWTON_ITERATIONS = 50


class StaticError(LumpedError):
    """No static equilibrium: the message names the elements or bodies at fault."""


@dataclass(frozen=True)
class StaticState:
    """Static equilibrium, measured from the unloaded positions (every element at its
    preload, no gravity).

    ``displacement[i]`` is body ``body_ids[i]``'s static deflection, m (negative =
    down); ``element_force`` (N, tension positive) and ``element_deflection`` (m) are
    per element in ``element_ids`` order; ``active`` is False for a one-sided spring
    that is slack at rest.
    """

    body_ids: tuple[str, ...]
    element_ids: tuple[str, ...]
    displacement: np.ndarray
    element_force: np.ndarray
    element_deflection: np.ndarray
    active: np.ndarray
    iterations: int

    def deflection_of(self, body_id: str) -> float:
        """Static deflection of ``body_id``, m."""
        return float(self.displacement[_positions(self.body_ids)[body_id]])

    def force_in(self, element_id: str) -> float:
        """Static force in ``element_id``, N (tension positive)."""
        return float(self.element_force[_positions(self.element_ids)[element_id]])


@lru_cache(maxsize=8)
def _positions(ids: tuple[str, ...]) -> dict[str, int]:
    """Index of each id in an id tuple (cached: summaries ask for every element)."""
    return {name: i for i, name in enumerate(ids)}


def static_equilibrium(matrices: Matrices) -> StaticState:
    """Solve for static equilibrium under gravity.

    Raises
    ------
    StaticError
        A one-sided spring would have to carry force it cannot (a compression-only
        tyre that would have to pull), some body is held by nothing, or the contact
        iteration does not settle.
    """
    m = matrices
    weight = -m.mass * m.gravity  # N, on each body
    one_sided = m.nonlinear.one_sided_index
    sign = m.nonlinear.one_sided_sign
    active = np.ones(len(m.element_ids), dtype=bool)
    history = []
    for iteration in range(1, MAX_NEWTON_ITERATIONS + 1):
        q = _solve_linear(m, active, weight)
        deflection = m.D @ q
        trial = m.preload + m.stiffness * deflection  # force each spring would carry if engaged
        # A compression-only spring (sign +1) engages when its force would be ≤ 0,
        # a tension-only one (sign −1) when it would be ≥ 0.
        engaged = sign * trial[one_sided] <= 0
        new_active = active.copy()
        new_active[one_sided] = engaged
        if np.array_equal(new_active, active):
            force = np.where(active, trial, 0.0)
            force[m.stiffness == 0] = 0.0
            return StaticState(m.body_ids, m.element_ids, q, force, deflection, active, iteration)
        key = new_active[one_sided].tobytes()
        if key in history:
            break
        history.append(key)
        _check_held(m, new_active, active, trial)
        active = new_active
    raise StaticError(
        "static equilibrium not found: the contact states of the one-sided springs "
        f"({', '.join(m.element_ids[i] for i in one_sided)}) do not settle after "
        f"{iteration} iterations"
    )


def _solve_linear(m: Matrices, active: np.ndarray, weight: np.ndarray) -> np.ndarray:
    """Body displacements with only the ``active`` springs: K_A q = weight − D_bᵀ p_A."""
    k = np.where(active, m.stiffness, 0.0)
    K = congruence(m.D, k).tocsc()
    rhs = weight - m.D.T @ np.where(active, m.preload, 0.0)
    free = _unheld_components(m, k)
    if free:
        if not m.floating:
            bodies = [m.body_ids[i] for i in free[0]]
            raise StaticError(
                f"static equilibrium not found: nothing holds {_names(bodies, 'body')} "
                "(no spring path to a support); set floating = true for a free system"
            )
        return _solve_floating(m, K, rhs, free)
    q = spla.spsolve(K, rhs) if K.shape[0] > 1 else rhs / K.toarray()[0]
    q = np.atleast_1d(np.asarray(q, dtype=float))
    if not np.all(np.isfinite(q)):
        raise StaticError("static equilibrium not found: the stiffness matrix is singular")
    return q


def _solve_floating(m: Matrices, K, rhs: np.ndarray, free: list[np.ndarray]) -> np.ndarray:
    """Equilibrium in the frame falling with each unsupported group of bodies.

    ``Φ`` (one column per group, 1 on its bodies) spans the rigid-body motions. The
    load is reduced by the inertia of the frame's acceleration, ``M Φ (Φᵀ M Φ)⁻¹ Φᵀ f``,
    and the solve is constrained by ``Φᵀ M q = 0`` (each group's centre of mass stays
    put), as a sparse saddle-point system.
    """
    n = m.n
    rows = np.concatenate(free)
    cols = np.concatenate([np.full(len(g), j) for j, g in enumerate(free)])
    Phi = sp.csr_matrix((np.ones(len(rows)), (rows, cols)), shape=(n, len(free)))
    MPhi = (m.M @ Phi).tocsr()
    group_mass = (Phi.T @ MPhi).toarray()
    load = rhs - MPhi @ np.linalg.solve(group_mass, Phi.T @ rhs)
    saddle = sp.block_array([[K, MPhi], [MPhi.T, None]]).tocsc()
    solution = spla.spsolve(saddle, np.concatenate([load, np.zeros(len(free))]))
    return np.asarray(solution[:n], dtype=float)


def _unheld_components(m: Matrices, k: np.ndarray) -> list[np.ndarray]:
    """Groups of body indices that no spring with k > 0 ties to a support."""
    n_b, n_s = m.n, len(m.support_ids)
    nodes = sp.hstack([m.D, m.D_s]).tocsr()  # element × (bodies, supports)
    nodes = nodes[k > 0]
    adjacency = (abs(nodes).T @ abs(nodes)).tocsr()
    count, labels = connected_components(adjacency, directed=False)
    held = set(labels[n_b:].tolist()) if n_s else set()
    body_labels = labels[:n_b]
    return [np.flatnonzero(body_labels == c) for c in range(count) if c not in held and np.any(body_labels == c)]


def _check_held(m: Matrices, new_active, old_active, trial) -> None:
    """Explain a contact change that would leave bodies hanging in the air."""
    k = np.where(new_active, m.stiffness, 0.0)
    free = _unheld_components(m, k)
    if free and not m.floating:
        released = np.flatnonzero(old_active & ~new_active)
        names = ", ".join(
            f"{m.element_ids[i]!r} ({'compression' if trial[i] > 0 else 'tension'} only; would need "
            f"{abs(trial[i]):.4g} N of {'tension' if trial[i] > 0 else 'compression'})"
            for i in released
        )
        bodies = [m.body_ids[i] for i in free[0]]
        raise StaticError(
            f"static equilibrium not found: one-sided spring {names} cannot carry that force, "
            f"and without it nothing holds {_names(bodies, 'body')}"
        )


def _names(ids: list[str], noun: str) -> str:
    shown = ", ".join(repr(i) for i in ids[:5]) + (" …" if len(ids) > 5 else "")
    return f"{noun} {shown}" if len(ids) == 1 else f"{len(ids)} bodies ({shown})"
