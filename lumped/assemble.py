"""Assembly: from the system graph to sparse M, C, K, the support-coupling blocks, the
nonlinear element tables and the first-order state-space form.

Every matrix comes from the oriented incidence (deflection map) ``D``: the element
deflections are ``δ = D_b q + D_s u`` for body displacements ``q`` and support
displacements ``u``, element forces are ``f = k∘δ + c∘δ' + b∘δ''`` (tension
positive), and the forces on the bodies are ``−D_bᵀ f``. Hence

    M q'' + C q' + K q = −(M_s u'' + C_s u' + K_s u) + P F

with ``M = diag(m) + D_bᵀ diag(b) D_b``, ``C = D_bᵀ diag(c) D_b``,
``K = D_bᵀ diag(k) D_b`` and the coupling blocks ``X_s = D_bᵀ diag(x) D_s``.
Everything is built from edge arrays in bulk, never by per-element indexing.
Nonlinear elements (end stops, one-sided springs, asymmetric and tabulated dampers)
enter the linear part by their linearisation at static equilibrium and are listed
apart in :class:`NonlinearElements`, for the stepping engine to correct.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import networkx as nx
import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from lumped.model import Damper, Spring, System

__all__ = ["Matrices", "NonlinearElements", "StateSpace", "assemble", "congruence", "copies", "state_space", "COPY_VALUES", "DENSE_LIMIT"]

#: Up to this many bodies, state-space matrices are dense arrays; above, linear operators.
DENSE_LIMIT = 2000


@dataclass(frozen=True)
class NonlinearElements:
    """The elements whose force is not linear in deflection and rate, by kind.

    Each ``*_index`` array indexes :attr:`Matrices.element_ids`. Forces are N, tension
    positive; deflections are measured from static equilibrium.

    - end stops: extra force ``gap_stiffness·(|δ| − gap)·sign δ`` once ``|δ| > gap``;
    - one-sided springs: ``acts_sign`` +1 for compression only (total force ≤ 0),
      −1 for tension only (total force ≥ 0);
    - asymmetric dampers: ``rebound`` coefficient for δ' > 0, ``compression`` for δ' < 0;
    - curve dampers: points ``curve_velocity[o:o+n]``, ``curve_force[o:o+n]`` with
      ``o = curve_offset[i]``, ``n = curve_offset[i+1] − o``.
    """

    end_stop_index: np.ndarray
    end_stop_gap: np.ndarray
    end_stop_stiffness: np.ndarray
    one_sided_index: np.ndarray
    one_sided_sign: np.ndarray
    asymmetric_index: np.ndarray
    asymmetric_rebound: np.ndarray
    asymmetric_compression: np.ndarray
    curve_index: np.ndarray
    curve_offset: np.ndarray
    curve_velocity: np.ndarray
    curve_force: np.ndarray

    @property
    def count(self) -> int:
        return (
            len(self.end_stop_index)
            + len(self.one_sided_index)
            + len(self.asymmetric_index)
            + len(self.curve_index)
        )


@dataclass(frozen=True)
class Matrices:
    """The assembled system, in SI units, over the free coordinates (the bodies).

    ``body_ids``, ``support_ids`` and ``element_ids`` fix the order of every row and
    column: ``M[i, j]`` couples ``body_ids[i]`` and ``body_ids[j]``; ``K_s[i, s]`` couples
    body ``i`` to support ``support_ids[s]``.
    """

    body_ids: tuple[str, ...]
    support_ids: tuple[str, ...]
    element_ids: tuple[str, ...]
    element_kinds: tuple[str, ...]
    mass: np.ndarray  # body masses, kg
    stiffness: np.ndarray  # per element, N/m (0 for dampers and inerters)
    damping: np.ndarray  # per element, linearised, N·s/m
    inertance: np.ndarray  # per element, kg
    preload: np.ndarray  # per element, N
    D: sp.csr_matrix  # element deflections from body displacements (n_elements × n_bodies)
    D_s: sp.csr_matrix  # element deflections from support displacements (n_elements × n_supports)
    M: sp.csr_matrix
    C: sp.csr_matrix
    K: sp.csr_matrix
    M_s: sp.csr_matrix
    C_s: sp.csr_matrix
    K_s: sp.csr_matrix
    force_ids: tuple[str, ...]
    P: sp.csr_matrix  # body forces from force inputs (n_bodies × n_forces)
    gravity: float  # m/s²
    floating: bool  # rigid-body motion allowed (no support needed)
    nonlinear: NonlinearElements

    @property
    def n(self) -> int:
        """Number of free coordinates (bodies)."""
        return len(self.body_ids)

    @property
    def mass_is_diagonal(self) -> bool:
        """True without inerters between bodies: M⁻¹ is then a vector."""
        return not np.any(self.inertance[self.D.getnnz(axis=1) > 1])

    def body_index(self, body_id: str) -> int:
        return self.body_ids.index(body_id)

    def element_index(self, element_id: str) -> int:
        return self.element_ids.index(element_id)


def assemble(system: System | nx.MultiGraph) -> Matrices:
    """Assemble ``system`` (or its graph) into sparse M, C, K and the coupling blocks.

    Reads node attributes ``kind`` ("body" or "support") and ``mass`` (kg), and edge
    attributes ``kind``, ``between`` (orientation, lower node first), ``order`` (row
    order; elements without it follow in graph order), ``stiffness``
    (N/m), ``coefficient`` (linearised, N·s/m), ``inertance`` (kg), ``preload`` (N)
    and ``item`` (the element dataclass, for the nonlinear tables). Node order is the
    graph's node order.

    Notes
    -----
    Cost is O(bodies + elements) with a handful of sparse products; a 100 000-body
    chain assembles in a fraction of a second.
    """
    graph = system.graph if isinstance(system, System) else system
    kinds = dict(graph.nodes(data="kind"))
    body_ids = tuple(n for n, k in kinds.items() if k == "body")
    support_ids = tuple(n for n, k in kinds.items() if k == "support")
    body_pos = {n: i for i, n in enumerate(body_ids)}
    support_pos = {n: i for i, n in enumerate(support_ids)}
    mass = np.array([graph.nodes[n]["mass"] for n in body_ids], dtype=float)

    edges = _edge_list(graph)
    edges.sort(key=lambda e: e[3].get("order", len(edges)))  # file order; stable otherwise
    n_e, n_b, n_s = len(edges), len(body_ids), len(support_ids)
    data = [d for *_, d in edges]
    element_ids = tuple(key for _, _, key, _ in edges)
    element_kinds = tuple(d["kind"] for d in data)
    ends = [d.get("between", (u, v)) for u, v, _, d in edges]

    def column(name: str) -> np.ndarray:
        return np.fromiter((d.get(name, 0.0) for d in data), dtype=float, count=n_e)

    stiffness, damping = column("stiffness"), column("coefficient")
    inertance, preload = column("inertance"), column("preload")

    force_ids, P = _force_map(system, body_pos)
    return _matrices(
        body_ids, support_ids, element_ids, element_kinds, mass, stiffness, damping, inertance, preload,
        D=_incidence(ends, body_pos, n_e, n_b),
        D_s=_incidence(ends, support_pos, n_e, n_s),
        force_ids=force_ids,
        P=P,
        gravity=float(graph.graph.get("gravity", 9.81)),
        floating=bool(graph.graph.get("floating", False)),
        nonlinear=_nonlinear_tables([d.get("item") for *_, d in edges]),
    )


#: The arrays whose values :func:`copies` may change per copy: per-body ``mass``, and
#: per element ``stiffness``, ``damping``, ``inertance`` and ``preload``.
COPY_VALUES = ("mass", "stiffness", "damping", "inertance", "preload")


def copies(matrices: Matrices, prefixes: Sequence[str], changes: Mapping[tuple[str, str], np.ndarray]) -> Matrices:
    """``len(prefixes)`` copies of ``matrices`` side by side: block-diagonal, the
    supports shared (a support is a prescribed motion, the same for every copy), copy
    i's bodies, elements and force items named ``prefixes[i] + id`` and laid copy by
    copy. ``changes`` gives per copy new values (SI) of one of :data:`COPY_VALUES` of
    one body or element: ``{("stiffness", "tyre"): [...], ("mass", "body"): [...]}``
    (the kernels read ``damping`` only for linear dampers, ``stiffness`` for every
    spring). What :func:`assemble` gives for the copies laid out as one system, at
    the cost of a few array operations."""
    count = len(prefixes)
    per_copy = {name: np.broadcast_to(getattr(matrices, name), (count, len(getattr(matrices, name))))
                for name in COPY_VALUES}  # fmt: skip
    for (name, item), values in changes.items():
        if name not in per_copy:
            raise ValueError(f"copies: {name!r} is not one of {', '.join(COPY_VALUES)}")
        ids = matrices.body_ids if name == "mass" else matrices.element_ids
        if item not in ids:
            raise ValueError(f"copies: no {'body' if name == 'mass' else 'element'} {item!r}")
        if not per_copy[name].flags.writeable:
            per_copy[name] = per_copy[name].copy()
        per_copy[name][:, ids.index(item)] = values

    def named(ids):
        return tuple(p + i for p in prefixes for i in ids)

    def block(x):
        return sp.kron(sp.identity(count, format="csr"), x, format="csr")

    return _matrices(
        named(matrices.body_ids), matrices.support_ids, named(matrices.element_ids), matrices.element_kinds * count,
        *(np.ascontiguousarray(per_copy[name]).ravel() for name in COPY_VALUES),
        D=block(matrices.D),
        D_s=sp.kron(np.ones((count, 1)), matrices.D_s, format="csr"),
        force_ids=named(matrices.force_ids),
        P=block(matrices.P),
        gravity=matrices.gravity,
        floating=matrices.floating,
        nonlinear=_copied_tables(matrices.nonlinear, count, len(matrices.element_ids)),
    )  # fmt: skip


def congruence(D: sp.csr_matrix, values: np.ndarray, right: sp.csr_matrix | None = None,
               diagonal: np.ndarray | None = None) -> sp.csr_matrix:  # fmt: skip
    """``Dᵀ diag(values) right`` (``right`` defaults to ``D``), plus ``diag(diagonal)``
    when given (a square product): each element's product of its incidence rows, summed, with no
    explicit zeros. Written as one sum of entries, since the few sparse products of
    the formula cost more than the sum for the small systems most runs are (a
    sparse product costs some 0.3 ms however small)."""
    right = D if right is None else right
    D, right = D.tocsr(), right.tocsr()
    rows = np.repeat(np.arange(D.shape[0]), np.diff(D.indptr))  # the element of each entry of D
    pairs = np.diff(right.indptr)[rows]  # entries of right in that element's row
    first = np.repeat(right.indptr[rows], pairs)
    k = first + np.arange(first.size) - np.repeat(np.cumsum(pairs) - pairs, pairs)
    i, j = np.repeat(D.indices, pairs), right.indices[k]
    data = np.repeat(D.data * values[rows], pairs) * right.data[k]
    if diagonal is not None:
        i, j = np.concatenate([np.arange(len(diagonal)), i]), np.concatenate([np.arange(len(diagonal)), j])
        data = np.concatenate([diagonal, data])
    product = sp.csr_matrix((data, (i, j)), shape=(D.shape[1], right.shape[1]))
    product.eliminate_zeros()
    return product


def _matrices(body_ids, support_ids, element_ids, element_kinds, mass, stiffness, damping, inertance, preload,
              D, D_s, **rest) -> Matrices:  # fmt: skip
    """:class:`Matrices` from the incidences and element values (the module's formulas)."""
    return Matrices(
        body_ids=body_ids,
        support_ids=support_ids,
        element_ids=element_ids,
        element_kinds=element_kinds,
        mass=mass,
        stiffness=stiffness,
        damping=damping,
        inertance=inertance,
        preload=preload,
        D=D,
        D_s=D_s,
        M=congruence(D, inertance, diagonal=mass),
        C=congruence(D, damping),
        K=congruence(D, stiffness),
        M_s=congruence(D, inertance, D_s),
        C_s=congruence(D, damping, D_s),
        K_s=congruence(D, stiffness, D_s),
        **rest,
    )


def _copied_tables(tables: NonlinearElements, count: int, elements: int) -> NonlinearElements:
    """The nonlinear tables of ``count`` copies of a system of ``elements`` elements."""

    def shifted(x, by):
        """``x`` once per copy, copy i's shifted by i·by."""
        return (x[None, :] + by * np.arange(count)[:, None]).ravel().astype(np.int64)

    def indices(x):
        return shifted(x, elements)

    points = tables.curve_offset[-1]
    offsets = np.append(shifted(tables.curve_offset[:-1], points), count * points)
    return NonlinearElements(
        end_stop_index=indices(tables.end_stop_index),
        end_stop_gap=np.tile(tables.end_stop_gap, count),
        end_stop_stiffness=np.tile(tables.end_stop_stiffness, count),
        one_sided_index=indices(tables.one_sided_index),
        one_sided_sign=np.tile(tables.one_sided_sign, count),
        asymmetric_index=indices(tables.asymmetric_index),
        asymmetric_rebound=np.tile(tables.asymmetric_rebound, count),
        asymmetric_compression=np.tile(tables.asymmetric_compression, count),
        curve_index=indices(tables.curve_index),
        curve_offset=offsets,
        curve_velocity=np.tile(tables.curve_velocity, count),
        curve_force=np.tile(tables.curve_force, count),
    )


def _edge_list(graph: nx.MultiGraph) -> list[tuple]:
    """``(u, v, key, data)`` of every edge once, in adjacency order: the same as
    ``graph.edges(keys=True, data=True)``, read straight from the adjacency dicts,
    which is about twice as fast on large graphs."""
    edges, seen = [], set()
    for u, neighbours in graph._adj.items():
        for v, keyed in neighbours.items():
            if v not in seen:
                edges.extend((u, v, key, data) for key, data in keyed.items())
        seen.add(u)
    return edges


def _incidence(ends, position: dict, n_rows: int, n_cols: int) -> sp.csr_matrix:
    """Signed incidence of element ends on the nodes in ``position``: −1 at the lower
    end ``a``, +1 at the upper end ``b`` (δ = x_b − x_a)."""
    lower = np.fromiter((position.get(a, -1) for a, _ in ends), dtype=np.int64, count=n_rows)
    upper = np.fromiter((position.get(b, -1) for _, b in ends), dtype=np.int64, count=n_rows)
    rows = np.arange(n_rows, dtype=np.int64)
    keep_lower, keep_upper = lower >= 0, upper >= 0
    return sp.csr_matrix(
        (
            np.concatenate([np.full(keep_lower.sum(), -1.0), np.full(keep_upper.sum(), 1.0)]),
            (np.concatenate([rows[keep_lower], rows[keep_upper]]),
             np.concatenate([lower[keep_lower], upper[keep_upper]])),
        ),
        shape=(n_rows, n_cols),
    )  # fmt: skip


def _force_map(system, body_pos: dict) -> tuple[tuple[str, ...], sp.csr_matrix]:
    forces = system.forces if isinstance(system, System) else {}
    ids = tuple(forces)
    rows = [body_pos[f.on] for f in forces.values()]
    P = sp.csr_matrix(
        ([f.scale for f in forces.values()], (rows, list(range(len(ids))))),
        shape=(len(body_pos), len(ids)),
    )
    return ids, P


def _nonlinear_tables(items: list) -> NonlinearElements:
    stop, sided, asym, curve = [], [], [], []
    for index, item in enumerate(items):
        if isinstance(item, Spring):
            if item.gap is not None:
                stop.append((index, item.gap, item.gap_stiffness))
            if item.acts != "both":
                sided.append((index, 1.0 if item.acts == "compression" else -1.0))
        elif isinstance(item, Damper):
            if item.rebound is not None:
                asym.append((index, item.rebound, item.compression))
            elif item.curve is not None:
                curve.append((index, item.curve))

    def column(rows, k, dtype=float):
        return np.array([r[k] for r in rows], dtype=dtype)

    offsets = np.cumsum([0] + [len(c) for _, c in curve]).astype(np.int64)
    return NonlinearElements(
        end_stop_index=column(stop, 0, np.int64),
        end_stop_gap=column(stop, 1),
        end_stop_stiffness=column(stop, 2),
        one_sided_index=column(sided, 0, np.int64),
        one_sided_sign=column(sided, 1),
        asymmetric_index=column(asym, 0, np.int64),
        asymmetric_rebound=column(asym, 1),
        asymmetric_compression=column(asym, 2),
        curve_index=column(curve, 0, np.int64),
        curve_offset=offsets,
        curve_velocity=np.array([p[0] for _, c in curve for p in c], dtype=float),
        curve_force=np.array([p[1] for _, c in curve for p in c], dtype=float),
    )


# --------------------------------------------------------------------------- state space


@dataclass(frozen=True)
class StateSpace:
    """``x' = A x + B w`` with ``x = [q, v]`` (m, m/s; bodies in ``body_ids`` order) and
    ``w = [u, u', u'', F]``: support displacement (m), velocity (m/s) and acceleration
    (m/s²) for each support, then each force input (its value before ``scale``, N).

    ``A`` and ``B`` are dense arrays up to :data:`DENSE_LIMIT` bodies and
    :class:`scipy.sparse.linalg.LinearOperator` above.
    """

    A: np.ndarray | spla.LinearOperator
    B: np.ndarray | spla.LinearOperator
    state_labels: tuple[str, ...]
    input_labels: tuple[str, ...]


def mass_solver(matrices: Matrices):
    """A function applying M⁻¹ to a vector or matrix: a division for a diagonal M, a
    sparse LU solve (factored once) when inerters couple the bodies."""
    if matrices.mass_is_diagonal:
        inverse = 1.0 / matrices.M.diagonal()
        return lambda rhs: (inverse[:, None] * rhs) if rhs.ndim == 2 else inverse * rhs
    lu = spla.splu(matrices.M.tocsc())
    return lambda rhs: lu.solve(np.asarray(rhs, dtype=float))


def state_space(matrices: Matrices, dense: bool | None = None) -> StateSpace:
    """The first-order form of the linearised system; ``dense`` defaults to
    ``matrices.n <= DENSE_LIMIT``."""
    n, n_s, n_f = matrices.n, len(matrices.support_ids), len(matrices.force_ids)
    dense = n <= DENSE_LIMIT if dense is None else dense
    solve = mass_solver(matrices)
    coupling = sp.hstack([-matrices.K_s, -matrices.C_s, -matrices.M_s, matrices.P]).tocsr()
    n_w = coupling.shape[1]
    labels = tuple(f"{b}.displacement" for b in matrices.body_ids) + tuple(
        f"{b}.velocity" for b in matrices.body_ids
    )
    inputs = tuple(
        f"{s}.{q}"
        for q in ("displacement", "velocity", "acceleration")
        for s in matrices.support_ids
    ) + tuple(f"{f}.force" for f in matrices.force_ids)
    assert n_w == 3 * n_s + n_f
    if dense:
        A = np.zeros((2 * n, 2 * n))
        A[:n, n:] = np.eye(n)
        A[n:, :n] = -solve(matrices.K.toarray())
        A[n:, n:] = -solve(matrices.C.toarray())
        B = np.zeros((2 * n, n_w))
        B[n:, :] = solve(coupling.toarray())
        return StateSpace(A, B, labels, inputs)
    K, C = matrices.K, matrices.C

    def a_matvec(x):
        x = np.asarray(x, dtype=float).ravel()
        q, v = x[:n], x[n:]
        return np.concatenate([v, -solve(K @ q + C @ v)])

    def b_matvec(w):
        w = np.asarray(w, dtype=float).ravel()
        return np.concatenate([np.zeros(n), solve(coupling @ w)])

    A = spla.LinearOperator((2 * n, 2 * n), matvec=a_matvec, dtype=float)
    B = spla.LinearOperator((2 * n, n_w), matvec=b_matvec, dtype=float)
    return StateSpace(A, B, labels, inputs)
