"""Modal analysis of the linearised system at static equilibrium.

- Undamped modes: K φ = ω² M φ, mass-normalised (φᵀ M φ = 1); ``scipy.linalg.eigh`` up
  to :data:`~lumped.assemble.DENSE_LIMIT` bodies, ``scipy.sparse.linalg.eigsh``
  (shift-invert about 0, lowest modes) above.
- Damped eigenvalues of the first-order system x' = A x: from the undamped modes when
  the damping is classical (C M⁻¹ K = K M⁻¹ C, e.g. Rayleigh damping), where modal
  decoupling is exact; from ``scipy.linalg.eig`` of A otherwise (non-proportional
  damping). Each complex-conjugate pair and each real (overdamped) eigenvalue is one
  :class:`Mode`: natural frequency |λ|/2π, damped frequency Im λ/2π, damping ratio
  −Re λ/|λ|. Eigenvalues at zero are rigid-body modes of a floating system.
- Modal mass (shape scaled to unit largest displacement) and effective mass per
  support for support excitation.
- For large systems, the stiffest mode alone: a power-iteration estimate and a
  Gershgorin upper bound, both in milliseconds (:func:`stiffest_mode`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from lumped.assemble import DENSE_LIMIT, Matrices, mass_solver, state_space
from lumped.errors import LumpedError

__all__ = [
    "ModalError",
    "Mode",
    "ModalResult",
    "StiffestMode",
    "modal_analysis",
    "undamped_modes",
    "damped_eigenvalues",
    "stiffest_mode",
    "RIGID_TOLERANCE",
]

#: |λ| (or ω) below this fraction of the largest is a rigid-body mode.
RIGID_TOLERANCE = 1e-7
#: |Im λ| below this fraction of |λ| is a real (overdamped) eigenvalue.
REAL_TOLERANCE = 1e-9
#: Relative mismatch below which C M⁻¹ K = K M⁻¹ C counts as classical damping.
CLASSICAL_TOLERANCE = 1e-9
#: Damping ratios this small are zero to round-off: the mode is undamped.
UNDAMPED_ZETA = 1e-12


class ModalError(LumpedError):
    """Modal analysis asked of a system that cannot have one (e.g. no bodies)."""


@dataclass(frozen=True)
class Mode:
    """One complex-conjugate pair, or one real eigenvalue, of the damped system.

    ``eigenvalue`` is λ with Im λ ≥ 0 (rad/s). Frequencies are Hz. ``shape`` is the
    mass-normalised undamped shape of the undamped mode it belongs to (largest modal
    assurance with the damped shape), by body id; ``damped_shape`` the complex
    displacement shape, scaled so that its largest entry is 1.
    """

    eigenvalue: complex
    natural_frequency_hz: float
    damped_frequency_hz: float
    undamped_frequency_hz: float
    damping_ratio: float | None
    overdamped: bool
    rigid: bool
    undamped_index: int
    shape: dict[str, float]
    damped_shape: dict[str, complex]

    @property
    def omega(self) -> float:
        """|λ|, rad/s."""
        return abs(self.eigenvalue)

    def to_json(self) -> dict:
        return {
            "natural_frequency_hz": self.natural_frequency_hz,
            "damped_frequency_hz": self.damped_frequency_hz,
            "undamped_frequency_hz": self.undamped_frequency_hz,
            "damping_ratio": self.damping_ratio,
            "eigenvalue": [self.eigenvalue.real, self.eigenvalue.imag],
            "overdamped": self.overdamped,
            "rigid": self.rigid,
            "shape": self.shape,
            "damped_shape": {k: [v.real, v.imag] for k, v in self.damped_shape.items()},
        }


@dataclass(frozen=True)
class ModalResult:
    """The modes of a system, sorted by natural frequency, and the undamped modal data.

    ``omega`` (rad/s) and ``shapes`` (n × m, mass-normalised columns) are the undamped
    modes; ``modal_mass`` (kg) is φᵀMφ with each shape scaled to unit largest
    displacement; ``effective_mass[s]`` (kg, one value per undamped mode) is the mass
    each mode carries when support ``support_ids[s]`` moves; ``classical_damping``
    tells which way the damped eigenvalues were found.
    """

    body_ids: tuple[str, ...]
    support_ids: tuple[str, ...]
    modes: list[Mode]
    omega: np.ndarray
    shapes: np.ndarray
    modal_mass: np.ndarray
    effective_mass: dict[str, np.ndarray]
    classical_damping: bool

    def to_json(self) -> dict:
        return {
            "classical_damping": self.classical_damping,
            "modes": [m.to_json() for m in self.modes],
            "undamped": [
                {
                    "frequency_hz": float(w / (2 * math.pi)),
                    "modal_mass": float(mm),
                    "effective_mass": {s: float(e[j]) for s, e in self.effective_mass.items()},
                }
                for j, (w, mm) in enumerate(zip(self.omega, self.modal_mass, strict=True))
            ],
        }


def _require_bodies(matrices: Matrices) -> None:
    if matrices.n == 0:
        raise ModalError("the system has no bodies: there are no modes")


def undamped_modes(matrices: Matrices, count: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Undamped natural frequencies ω (rad/s, ascending) and mass-normalised shapes.

    All modes up to :data:`DENSE_LIMIT` bodies; above that the ``count`` lowest
    (default 20) by shift-invert Lanczos.
    """
    _require_bodies(matrices)
    n = matrices.n
    if n <= DENSE_LIMIT and count is None:
        w2, shapes = la.eigh(matrices.K.toarray(), matrices.M.toarray())
    else:
        count = min(count or 20, n - 1)
        w2, shapes = spla.eigsh(matrices.K.tocsc(), k=count, M=matrices.M.tocsc(), sigma=-1e-6 * _scale(matrices), which="LM")
        order = np.argsort(w2)
        w2, shapes = w2[order], shapes[:, order]
    top = max(float(np.max(np.abs(w2))), 1e-300)
    w2 = np.where(w2 < RIGID_TOLERANCE**2 * top, 0.0, w2)
    return np.sqrt(w2), shapes


def _scale(matrices: Matrices) -> float:
    return float(np.max(matrices.K.diagonal() / matrices.M.diagonal())) or 1.0


def is_classically_damped(matrices: Matrices) -> bool:
    """True when C M⁻¹ K = K M⁻¹ C (to round-off): the undamped modes decouple C too."""
    if matrices.C.nnz == 0:
        return True
    solve = mass_solver(matrices)
    K, C = matrices.K, matrices.C
    if matrices.mass_is_diagonal:
        inv = sp.diags_array(1.0 / matrices.M.diagonal())
        left, right = C @ inv @ K, K @ inv @ C
        diff = abs(left - right).max()
        size = max(abs(left).max(), 1e-300)
    else:
        Kd, Cd = K.toarray(), C.toarray()
        left, right = Cd @ solve(Kd), Kd @ solve(Cd)
        diff, size = np.max(np.abs(left - right)), max(np.max(np.abs(left)), 1e-300)
    return bool(diff <= CLASSICAL_TOLERANCE * size)


def _modal_eigenvalues(omega: np.ndarray, zeta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Eigenvalues (Im ≥ 0 representatives) of decoupled modes, with their mode index.

    For a rigid-body mode (ω = 0) ``zeta`` holds half its modal damping c (1/s): its
    eigenvalues are 0 and −c. Without damping (c at round-off against the largest ω)
    the double eigenvalue 0 is one rigid-body mode, as it is from the state matrix.
    """
    values, index = [], []
    top = float(np.max(omega)) if len(omega) else 0.0
    for j, (w, z) in enumerate(zip(omega, zeta, strict=True)):
        if w == 0.0:
            decay = 2.0 * z
            if decay > RIGID_TOLERANCE * top:
                values += [0.0 + 0.0j, -decay + 0.0j]
                index += [j, j]
            else:
                values.append(0.0 + 0.0j)
                index.append(j)
        elif z < 1.0:
            values.append(complex(-z * w, w * math.sqrt(1.0 - z * z)))
            index.append(j)
        else:
            root = w * math.sqrt(z * z - 1.0)
            values += [complex(-z * w + root, 0.0), complex(-z * w - root, 0.0)]
            index += [j, j]
    return np.array(values, dtype=complex), np.array(index, dtype=int)


def damped_eigenvalues(matrices: Matrices) -> np.ndarray:
    """The first-order system's eigenvalues, one per conjugate pair (Im > 0) or real
    eigenvalue, sorted by |λ| (rad/s). Up to :data:`DENSE_LIMIT` bodies."""
    return modal_analysis(matrices, shapes=False).eigenvalues


@dataclass(frozen=True)
class _Eigen:
    eigenvalues: np.ndarray
    vectors: np.ndarray | None  # displacement parts, n × len(eigenvalues)
    undamped_index: np.ndarray


def modal_analysis(matrices: Matrices, shapes: bool = True):
    """All modes of a system of up to :data:`DENSE_LIMIT` bodies (see module notes).

    With ``shapes=False`` only the eigenvalues are found (faster), returned as an
    object with an ``eigenvalues`` array.
    """
    _require_bodies(matrices)
    if matrices.n > DENSE_LIMIT:
        raise ModalError(
            f"full modal analysis is limited to {DENSE_LIMIT} bodies (this system has "
            f"{matrices.n}); use stiffest_mode() or undamped_modes(count=...) for large systems"
        )
    omega, phi = undamped_modes(matrices)
    classical = is_classically_damped(matrices)
    if classical:
        cmodal = np.einsum("ij,ij->j", phi, matrices.C @ phi)
        with np.errstate(divide="ignore", invalid="ignore"):
            zeta = np.where(omega > 0, cmodal / (2 * np.where(omega > 0, omega, 1.0)), cmodal / 2)
        eig, index = _modal_eigenvalues(omega, zeta)
        vectors = phi[:, index].astype(complex)
    else:
        ss = state_space(matrices, dense=True)
        if shapes:
            values, right = la.eig(ss.A)
        else:
            values, right = la.eigvals(ss.A), None
        scale = max(np.max(np.abs(values)), 1e-300)
        real = np.abs(values.imag) <= REAL_TOLERANCE * np.maximum(np.abs(values), RIGID_TOLERANCE * scale)
        keep = real | (values.imag > 0)
        # A rigid-body mode is a double (defective) eigenvalue 0 of the state matrix,
        # which rounding splits into a tiny complex pair or two tiny real values: one
        # mode either way, so keep half of the rigid eigenvalues.
        rigid = np.flatnonzero(np.abs(values) <= RIGID_TOLERANCE * scale)
        keep[rigid] = False
        keep[rigid[: len(rigid) // 2]] = True
        values = values.copy()
        values[rigid] = 0.0
        eig = np.where(real, values.real + 0j, values)[keep]
        vectors = right[: matrices.n, keep] if right is not None else None
        index = _match_undamped(vectors, phi, matrices) if vectors is not None else np.zeros(len(eig), int)
    order = np.lexsort((np.abs(eig.imag), np.abs(eig)))
    eig, index = eig[order], index[order]
    vectors = vectors[:, order] if vectors is not None else None
    if not shapes:
        return _Eigen(eig, None, index)
    return _result(matrices, eig, vectors, index, omega, phi, classical)


def _match_undamped(vectors: np.ndarray, phi: np.ndarray, matrices: Matrices) -> np.ndarray:
    """For each damped shape, the undamped mode with the largest modal assurance."""
    Mphi = matrices.M @ phi
    overlap = np.abs(Mphi.T @ vectors) ** 2  # |φ_jᵀ M ψ|², φ mass-normalised
    norms = np.real(np.einsum("ij,ij->j", np.conj(vectors), matrices.M @ vectors))
    return np.argmax(overlap / np.maximum(norms, 1e-300), axis=0)


def _result(matrices, eig, vectors, index, omega, phi, classical) -> ModalResult:
    body_ids = matrices.body_ids
    scale = max(float(np.max(np.abs(eig))), 1e-300)
    modes = []
    for k, lam in enumerate(eig):
        magnitude = abs(lam)
        rigid = magnitude <= RIGID_TOLERANCE * scale
        zeta = None if rigid else float(-lam.real / magnitude)
        if zeta is not None and abs(zeta) < UNDAMPED_ZETA:
            zeta = 0.0
        psi = vectors[:, k]
        psi = psi / psi[np.argmax(np.abs(psi))]
        j = int(index[k])
        modes.append(
            Mode(
                eigenvalue=complex(lam),
                natural_frequency_hz=float(magnitude / (2 * math.pi)),
                damped_frequency_hz=float(abs(lam.imag) / (2 * math.pi)),
                undamped_frequency_hz=float(omega[j] / (2 * math.pi)),
                damping_ratio=zeta,
                overdamped=bool(lam.imag == 0 and not rigid),
                rigid=bool(rigid),
                undamped_index=j,
                shape={b: float(v) for b, v in zip(body_ids, _sign_fixed(phi[:, j]), strict=True)},
                damped_shape={b: complex(v) for b, v in zip(body_ids, psi, strict=True)},
            )
        )
    unit = phi / np.max(np.abs(phi), axis=0)
    modal_mass = np.einsum("ij,ij->j", unit, matrices.M @ unit)
    effective = {}
    for s, support in enumerate(matrices.support_ids):
        load = _support_load(matrices, s)
        gamma = phi.T @ load  # φ mass-normalised: participation = φᵀ ℓ
        effective[support] = gamma**2
    return ModalResult(body_ids, matrices.support_ids, modes, omega, phi, modal_mass, effective, classical)


def _sign_fixed(shape: np.ndarray) -> np.ndarray:
    """A shape with its largest entry positive (shapes are defined up to sign)."""
    return shape if shape[np.argmax(np.abs(shape))] >= 0 else -shape


def _support_load(matrices: Matrices, s: int) -> np.ndarray:
    """ℓ = M r + M_s e_s: the inertia load per unit acceleration of support ``s``, with
    r = −K⁻¹ K_s e_s the bodies' quasi-static motion when that support moves by 1."""
    K = matrices.K.toarray()
    ks = matrices.K_s[:, [s]].toarray().ravel()
    r = -np.linalg.lstsq(K, ks, rcond=None)[0]
    return matrices.M @ r + matrices.M_s[:, [s]].toarray().ravel()


# --------------------------------------------------------------------------- stiffest mode


@dataclass(frozen=True)
class StiffestMode:
    """The stiffest mode of a (large) system: |λ| estimate and guaranteed bound, rad/s.

    ``bound`` ≥ the largest |λ| of the damped system: with Rayleigh quotients
    k = xᴴKx ≤ ρ(M⁻¹K) and c = xᴴCx ≤ ρ(M⁻¹C) for xᴴMx = 1, every root of
    λ² + cλ + k = 0 has |λ| ≤ max(√k, c); the spectral radii are bounded by
    Gershgorin discs of M^{-1/2} K M^{-1/2} and M^{-1/2} C M^{-1/2}.
    ``estimate`` comes from power iteration on M^{-1/2} K M^{-1/2} (a lower bound of
    the undamped ω_max), ``damping_ratio`` from the same vector.
    """

    estimate: float
    bound: float
    damping_ratio: float
    iterations: int

    @property
    def gap(self) -> float:
        """(bound − estimate) / estimate: the estimate is within this of the truth."""
        return (self.bound - self.estimate) / self.estimate if self.estimate > 0 else math.inf


#: Power iterations stop when the estimate is this close to the bound, or after MAX.
STIFFEST_GAP = 1e-3
STIFFEST_MAX_ITERATIONS = 300


def _gershgorin(matrix: sp.csr_matrix, inv_sqrt_mass: np.ndarray) -> float:
    """Largest Gershgorin row sum of D A D with D = diag(inv_sqrt_mass)."""
    scaled = sp.diags_array(inv_sqrt_mass) @ abs(matrix) @ sp.diags_array(inv_sqrt_mass)
    return float(np.max(np.asarray(scaled.sum(axis=1)).ravel())) if matrix.nnz else 0.0


def stiffest_mode(matrices: Matrices, seed: int = 0) -> StiffestMode:
    """Estimate and bound the largest |λ| of the damped system (rad/s), fast at any size.

    Costs a few hundred sparse products at most; on a 100 000-body chain it takes a
    fraction of a second. Systems whose inerters couple bodies use a Gershgorin
    lower bound of M for the scaling.
    """
    _require_bodies(matrices)
    if matrices.mass_is_diagonal:
        inv_sqrt = 1.0 / np.sqrt(matrices.M.diagonal())
        k_bound = _gershgorin(matrices.K, inv_sqrt)
        c_bound = _gershgorin(matrices.C, inv_sqrt)
    else:
        M = matrices.M
        radius = np.asarray(abs(M).sum(axis=1)).ravel() - np.abs(M.diagonal())
        m_min = float(np.min(M.diagonal() - radius))
        if m_min <= 0:
            m_min = float(spla.eigsh(M.tocsc(), k=1, which="SA", return_eigenvectors=False)[0])
        inv_sqrt = np.full(matrices.n, 1.0 / math.sqrt(m_min))
        k_bound = float(np.max(np.asarray(abs(matrices.K).sum(axis=1)).ravel())) / m_min
        c_bound = float(np.max(np.asarray(abs(matrices.C).sum(axis=1)).ravel())) / m_min
    bound = max(math.sqrt(k_bound), c_bound)
    # Power iteration on S = M^{-1/2} K M^{-1/2} (diagonal-M scaling; with inerters the
    # Rayleigh quotient of the generalised problem is used instead).
    rng = np.random.default_rng(seed)
    x = rng.standard_normal(matrices.n)
    solve = mass_solver(matrices)
    diagonal = matrices.mass_is_diagonal
    sqrt_inv = 1.0 / np.sqrt(matrices.M.diagonal()) if diagonal else None
    estimate, iterations = 0.0, 0
    for iterations in range(1, STIFFEST_MAX_ITERATIONS + 1):  # noqa: B007 (reported)
        if diagonal:
            y = sqrt_inv * (matrices.K @ (sqrt_inv * x))
            rayleigh = float(x @ y) / float(x @ x)
        else:
            y = solve(matrices.K @ x)
            rayleigh = float(x @ (matrices.K @ x)) / float(x @ (matrices.M @ x))
        norm = np.linalg.norm(y)
        if norm == 0:
            break
        x = y / norm
        estimate = math.sqrt(max(rayleigh, 0.0))
        if estimate > 0 and (bound - estimate) <= STIFFEST_GAP * estimate:
            break
    v = sqrt_inv * x if diagonal else x  # back to physical coordinates
    mass = float(v @ (matrices.M @ v))
    k = float(v @ (matrices.K @ v)) / mass
    c = float(v @ (matrices.C @ v)) / mass
    zeta = c / (2 * math.sqrt(k)) if k > 0 else 0.0
    return StiffestMode(estimate=estimate, bound=bound, damping_ratio=min(zeta, 1.0), iterations=iterations)
