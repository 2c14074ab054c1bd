"""Frequency response of the linearised system at static equilibrium.

With every quantity varying as X e^{iωt}, the equations of motion of
:mod:`lumped.assemble` become, per frequency,

    Z(ω) Q = P_in,   Z(ω) = K + iω C − ω² M,

where the right-hand side of a **support input** (a prescribed support displacement
U = 1 m; its velocity iωU and acceleration −ω²U enter through C_s and M_s) is
−(K_s + iω C_s − ω² M_s) e_s, and that of a **force input** (1 N on a body) is e_b.
Body velocity and acceleration are iω Q and −ω² Q (absolute, like the run's
channels); element deflections are Δ = D Q + D_s U and element forces (linearised,
tension positive) are (k + iω c − ω² b) Δ. Nonlinear elements enter by their
linearisation at static equilibrium, exactly as in :mod:`lumped.modal`.

Responses are per unit input: m/m (transmissibility), m/N, (m/s²)/m, N/m, N/N …

Solving: up to :data:`DENSE_FREQUENCY_LIMIT` bodies one batched
``numpy.linalg.solve`` on a stacked (F, n, n) array of Z(ω) (in chunks that bound the
memory); above, one sparse solve per frequency on the shared sparsity pattern of K,
C and M — LAPACK's banded solver after a reverse Cuthill–McKee ordering when the band
is narrow (chains: O(n) per frequency), SuperLU (``scipy.sparse.linalg.splu``) otherwise.
Systems beyond :data:`~lumped.assemble.DENSE_LIMIT` bodies have their grid refined
around their lowest modes and their stiffest mode only.

The default grid is log-spaced from a decade below the lowest mode to a decade above
the highest, with points added densely within a few half-power bandwidths of each
damped mode so that no resonance is missed; peaks are found as local maxima of |H|
on the grid and each refined by a bounded 1-D maximisation to 1e-6 relative in
frequency.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.optimize import minimize_scalar

from lumped.assemble import DENSE_LIMIT, Matrices, assemble
from lumped.errors import LumpedError
from lumped.model import System

__all__ = [
    "FrequencyError",
    "Peak",
    "Transfer",
    "FrequencyResponse",
    "frequency_grid",
    "frequency_response",
    "transfer",
    "transmissibility",
    "find_peaks",
    "BODY_QUANTITIES",
    "ELEMENT_QUANTITIES",
    "DENSE_FREQUENCY_LIMIT",
    "POINTS_PER_DECADE",
]

#: Up to this many bodies the solve is one batched dense solve; above, sparse LU.
DENSE_FREQUENCY_LIMIT = 200
#: Default density of the log-spaced grid.
POINTS_PER_DECADE = 100
#: Points added around each damped mode, and their reach in half-power bandwidths
#: (2ζ f_n) on either side of the mode's peak.
POINTS_PER_MODE = 41
REFINE_BANDWIDTHS = 4.0
#: Most refinement points in a default grid (modes share them when there are many).
MAX_REFINE_POINTS = 8000
#: Damping ratio used to place refinement points around an undamped mode.
UNDAMPED_REFINE_ZETA = 1e-6
#: Relative tolerance in frequency of a refined peak.
PEAK_TOLERANCE = 1e-6
#: Bytes of working arrays per batch of frequencies.
BATCH_BYTES = 64 * 2**20
#: Sparse systems whose reordered half-bandwidth is at most this use the banded solver.
BANDED_LIMIT = 64
#: Largest result a frequency response keeps (bytes); beyond, name fewer outputs.
MAX_RESULT_BYTES = 2 * 2**30
#: Lowest modes found for the grid of a system beyond DENSE_LIMIT bodies.
LARGE_SYSTEM_MODES = 20

#: Output quantities of a body, and their units.
BODY_QUANTITIES = {"displacement": "m", "velocity": "m/s", "acceleration": "m/s^2"}
#: Output quantities of an element (``displacement`` means its deflection).
ELEMENT_QUANTITIES = {"force": "N", "deflection": "m", "displacement": "m",
                      "velocity": "m/s", "acceleration": "m/s^2"}  # fmt: skip
INPUT_UNITS = {"support": "m", "force": "N"}
_KEPT = "this response (keep it with outputs=)"


class FrequencyError(LumpedError):
    """A frequency response asked with an id that does not exist, an empty frequency
    range, a quantity an item does not have, or a system with no input."""


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class Peak:
    """A resonance peak of one transfer: frequency (Hz), |H| (per unit input, in the
    transfer's unit) and phase (degrees) at the peak."""

    frequency_hz: float
    magnitude: float
    phase_deg: float

    def to_json(self) -> dict:
        return {"frequency_hz": self.frequency_hz, "magnitude": self.magnitude, "phase_deg": self.phase_deg}


@dataclass(frozen=True)
class Transfer:
    """One input → output frequency response H(f), per unit input.

    ``input_kind`` is "support" (prescribed displacement, m) or "force" (N on
    ``input_body``); ``output_kind`` is "body" or "element"; ``unit`` reads
    output per input (e.g. ``"m/m"``, ``"m/N"``, ``"N/m"``). ``frequency`` in Hz,
    ``response`` complex, ``peaks`` ascending in frequency.
    """

    input_id: str
    input_kind: str
    input_body: str | None
    output_id: str
    output_kind: str
    quantity: str
    unit: str
    frequency: np.ndarray
    response: np.ndarray
    peaks: tuple[Peak, ...] = ()

    @property
    def magnitude(self) -> np.ndarray:
        """|H(f)|, in :attr:`unit`."""
        return np.abs(self.response)

    @property
    def phase_deg(self) -> np.ndarray:
        """Phase of H(f), degrees in (−180, 180] (output leads the input when positive)."""
        return np.degrees(np.angle(self.response))

    @property
    def label(self) -> str:
        """E.g. ``"span.displacement per N of force at span"``."""
        source = (f"m of support {self.input_id}" if self.input_kind == "support"
                  else f"N of force {self.input_id}" + (f" on {self.input_body}" if self.input_body != self.input_id else ""))  # fmt: skip
        return f"{self.output_id}.{self.quantity} per {source}"

    def to_json(self) -> dict:
        """``frequency_hz``, ``magnitude``, ``phase_deg``, ``real``, ``imag`` lists and the
        ``peaks``, with the ids, quantity and unit (per unit input)."""
        return {
            "input": self.input_id,
            "input_kind": self.input_kind,
            "input_body": self.input_body,
            "output": self.output_id,
            "output_kind": self.output_kind,
            "quantity": self.quantity,
            "unit": self.unit,
            "label": self.label,
            "frequency_hz": self.frequency.tolist(),
            "magnitude": self.magnitude.tolist(),
            "phase_deg": self.phase_deg.tolist(),
            "real": self.response.real.tolist(),
            "imag": self.response.imag.tolist(),
            "peaks": [p.to_json() for p in self.peaks],
        }


@dataclass(frozen=True)
class _Input:
    id: str
    kind: str  # "support" or "force"
    index: int  # support index, or body index for a force
    body: str | None


@dataclass(frozen=True)
class FrequencyResponse:
    """Complex responses of bodies and elements to each input, per unit input.

    Arrays are (frequencies, items, inputs): ``displacement`` of the bodies in
    ``body_ids`` (m per unit input), ``deflection`` and ``force`` of the elements in
    ``element_ids`` (m and N per unit input, force tension positive, linearised).
    ``input_ids`` lists the inputs: a support id (1 m of prescribed displacement) or a
    force id / body id (1 N on that body). ``natural_frequencies_hz`` and
    ``damping_ratios`` are the modes the grid was refined around; ``solver`` says
    how Z(ω) was solved ("dense batched", "sparse banded" or "sparse LU").
    """

    frequency: np.ndarray
    input_ids: tuple[str, ...]
    input_kinds: tuple[str, ...]
    input_bodies: tuple[str | None, ...]
    body_ids: tuple[str, ...]
    element_ids: tuple[str, ...]
    element_kinds: tuple[str, ...]
    displacement: np.ndarray
    deflection: np.ndarray
    force: np.ndarray
    natural_frequencies_hz: tuple[float, ...] = ()
    damping_ratios: tuple[float, ...] = ()
    solver: str = ""
    _problem: object = field(default=None, compare=False, repr=False)

    @property
    def omega(self) -> np.ndarray:
        """Angular frequencies, rad/s."""
        return 2 * np.pi * self.frequency

    @property
    def velocity(self) -> np.ndarray:
        """Body velocities iωQ, m/s per unit input."""
        return 1j * self.omega[:, None, None] * self.displacement

    @property
    def acceleration(self) -> np.ndarray:
        """Body accelerations −ω²Q, m/s² per unit input."""
        return -(self.omega**2)[:, None, None] * self.displacement

    def _input(self, input_id: str) -> int:
        if input_id not in self.input_ids:
            raise FrequencyError(
                f"input {input_id!r} is not among the inputs of this response ({', '.join(self.input_ids)})"
            )
        return self.input_ids.index(input_id)

    def response(self, input_id: str, output_id: str, quantity: str = "displacement") -> np.ndarray:
        """H(f) of ``output_id``'s ``quantity`` to ``input_id`` on the grid (complex)."""
        j = self._input(input_id)
        kind, quantity = _output_kind(output_id, quantity, self.body_ids, self.element_ids, _KEPT)
        return self._column(kind, output_id, quantity, j, self.frequency, None)

    def _column(self, kind, output_id, quantity, j, frequency, arrays):
        """The response column from stored (or freshly solved) arrays."""
        displacement, deflection, force = arrays if arrays is not None else (self.displacement, self.deflection, self.force)
        w = 2 * np.pi * np.asarray(frequency, dtype=float)
        if kind == "body":
            q = displacement[:, self.body_ids.index(output_id), j]
            return _derivative(q, w, quantity)
        e = self.element_ids.index(output_id)
        if quantity == "force":
            return force[:, e, j]
        return _derivative(deflection[:, e, j], w, quantity)

    def transfer(self, input_id: str, output_id: str, quantity: str = "displacement",
                 peaks: bool = True) -> Transfer:  # fmt: skip
        """The :class:`Transfer` of one input → output pair, with its resonance peaks
        refined off the grid (``peaks=False`` skips that)."""
        j = self._input(input_id)
        kind, quantity = _output_kind(output_id, quantity, self.body_ids, self.element_ids, _KEPT)
        unit_out = BODY_QUANTITIES[quantity] if kind == "body" else ELEMENT_QUANTITIES[quantity]
        unit_in = INPUT_UNITS[self.input_kinds[j]]
        unit = f"{unit_out}/{unit_in}" if "/" not in unit_out else f"({unit_out})/{unit_in}"
        h = self._column(kind, output_id, quantity, j, self.frequency, None)
        found: tuple[Peak, ...] = ()
        if peaks and self._problem is not None:
            problem = self._problem

            def evaluate(f: float) -> complex:
                arrays = problem.solve(np.array([f]), [j])
                return complex(self._column(kind, output_id, quantity, 0, np.array([f]), arrays)[0])

            found = tuple(find_peaks(self.frequency, h, evaluate))
        return Transfer(
            input_id=self.input_ids[j], input_kind=self.input_kinds[j], input_body=self.input_bodies[j],
            output_id=output_id, output_kind=kind, quantity=quantity, unit=unit,
            frequency=self.frequency.copy(), response=h, peaks=found,
        )  # fmt: skip

    def transmissibility(self, support_id: str, body_id: str, peaks: bool = True) -> Transfer:
        """Displacement (= acceleration) transmissibility from support ``support_id`` to
        body ``body_id``, m/m."""
        j = self._input(support_id)
        if self.input_kinds[j] != "support":
            raise FrequencyError(f"transmissibility: {support_id!r} is a force, not a support")
        if body_id not in self.body_ids:
            raise FrequencyError(f"transmissibility: {body_id!r} is not a body of this response")
        return self.transfer(support_id, body_id, "displacement", peaks=peaks)


def _derivative(x: np.ndarray, w: np.ndarray, quantity: str) -> np.ndarray:
    if quantity in ("displacement", "deflection"):
        return x
    if quantity == "velocity":
        return 1j * w * x
    return -(w**2) * x


def _output_kind(output_id, quantity, body_ids, element_ids, where: str = "the system") -> tuple[str, str]:
    if output_id in body_ids:
        if quantity not in BODY_QUANTITIES:
            raise FrequencyError(
                f"output {output_id!r} is a body: its quantities are {', '.join(BODY_QUANTITIES)}, not {quantity!r}"
            )
        return "body", quantity
    if output_id in element_ids:
        if quantity not in ELEMENT_QUANTITIES:
            raise FrequencyError(
                f"output {output_id!r} is an element: its quantities are force, deflection, "
                f"velocity, acceleration, not {quantity!r}"
            )
        return "element", "deflection" if quantity == "displacement" else quantity
    raise FrequencyError(f"output {output_id!r} is not a body or element of {where}")


# --------------------------------------------------------------------------- solving


class _Problem:
    """Z(ω) Q = R(ω) for chosen inputs, and the chosen outputs from Q.

    Dense systems stack Z(ω) over a batch of frequencies for one ``numpy.linalg.solve``.
    Sparse systems share one sparsity pattern for K, C and M, so Z(ω) is assembled by
    adding three data vectors; after a reverse Cuthill–McKee ordering, a narrow band
    (chains, ladders) is solved by LAPACK's banded solver, anything else by SuperLU.
    """

    def __init__(self, matrices: Matrices, inputs: list[_Input], bodies: list[int], elements: list[int],
                 dense: bool | None = None):  # fmt: skip
        self.m = m = matrices
        self.inputs = inputs
        self.bodies = np.asarray(bodies, dtype=np.int64)
        self.elements = np.asarray(elements, dtype=np.int64)
        self.dense = m.n <= DENSE_FREQUENCY_LIMIT if dense is None else dense
        if self.dense:
            self.M, self.C, self.K = (x.toarray() for x in (m.M, m.C, m.K))
        else:
            self._sparse_setup()
        self.coupling = {
            item.index: tuple(x[:, [item.index]].toarray().ravel() for x in (m.K_s, m.C_s, m.M_s))
            for item in inputs if item.kind == "support"
        }  # fmt: skip
        self.D = m.D[self.elements].tocsr() if len(self.elements) else None
        self.D_s = m.D_s[self.elements].toarray() if len(self.elements) else None
        self.k = m.stiffness[self.elements]
        self.c = m.damping[self.elements]
        self.b = m.inertance[self.elements]

    def _sparse_setup(self) -> None:
        from scipy.sparse.csgraph import reverse_cuthill_mckee

        m = self.m
        pattern = (abs(m.K) + abs(m.C) + abs(m.M)).tocsr()
        pattern.data[:] = 1.0
        perm = np.asarray(reverse_cuthill_mckee(pattern, symmetric_mode=True), dtype=np.int64)
        self.perm = perm
        self.inverse = np.argsort(perm)

        shared = pattern[perm][:, perm].tocoo()
        order = np.lexsort((shared.row, shared.col))
        rows, cols = shared.row[order].astype(np.int64), shared.col[order].astype(np.int64)

        def values(x):  # x reordered, read on the shared pattern
            return np.asarray(x.tocsr()[perm][:, perm][rows, cols], dtype=float).ravel()

        self.k_data, self.c_data, self.m_data = values(m.K), values(m.C), values(m.M)
        self.rows, self.cols = rows, cols
        band = int(np.max(np.abs(rows - cols))) if len(rows) else 0
        self.band = band
        self.banded = band <= BANDED_LIMIT
        if self.banded:
            self.band_index = (band + rows - cols, cols)
        else:
            n = m.n
            self.csc_template = sp.csc_matrix((self.k_data.astype(complex), (rows, cols)), shape=(n, n))
            self.csc_template.sort_indices()
            # Map from the COO order to the CSC data order.
            probe = sp.csc_matrix((np.arange(1, len(rows) + 1, dtype=float), (rows, cols)), shape=(n, n))
            probe.sort_indices()
            self.csc_order = probe.data.astype(np.int64) - 1

    @property
    def solver(self) -> str:
        if self.dense:
            return "dense batched"
        return "sparse banded" if self.banded else "sparse LU"

    def _rhs(self, w: np.ndarray, which: list[int]) -> np.ndarray:
        """(F, n, inputs) right-hand sides."""
        R = np.zeros((len(w), self.m.n, len(which)), dtype=complex)
        for col, j in enumerate(which):
            item = self.inputs[j]
            if item.kind == "support":
                ks, cs, ms = self.coupling[item.index]
                R[:, :, col] = -(ks[None, :] + 1j * w[:, None] * cs[None, :] - (w**2)[:, None] * ms[None, :])
            else:
                R[:, item.index, col] = 1.0
        return R

    def _solve_sparse(self, w: float, R: np.ndarray) -> np.ndarray:
        data = self.k_data + 1j * w * self.c_data - w * w * self.m_data
        rhs = R[self.perm]
        try:
            if self.banded:
                b = self.band
                ab = np.zeros((2 * b + 1, self.m.n), dtype=complex)
                ab[self.band_index] = data
                x = la.solve_banded((b, b), ab, rhs, check_finite=False)
            else:
                Z = self.csc_template.copy()
                Z.data = data[self.csc_order]
                x = spla.splu(Z).solve(rhs)
        except (la.LinAlgError, RuntimeError):  # exactly singular: an undamped resonance
            return np.full(R.shape, np.inf, dtype=complex)
        return x[self.inverse]

    def solve(self, frequency: np.ndarray, which: list[int] | None = None):
        """(displacement, deflection, force) arrays (F, items, inputs) of the chosen
        outputs at ``frequency`` (Hz) for inputs ``which`` (default all), solved in
        batches that bound the memory."""
        which = list(range(len(self.inputs))) if which is None else which
        w = 2 * np.pi * np.asarray(frequency, dtype=float)
        n, F, n_in = self.m.n, len(w), len(which)
        ne = len(self.elements)
        displacement = np.empty((F, len(self.bodies), n_in), dtype=complex)
        deflection = np.empty((F, ne, n_in), dtype=complex)
        force = np.empty((F, ne, n_in), dtype=complex)
        per_frequency = 16 * n * (n if self.dense else 1) + 16 * (n + ne) * n_in
        batch = max(1, int(BATCH_BYTES // per_frequency))
        dynamic = None
        for start in range(0, F, batch):
            ws = w[start:start + batch]
            R = self._rhs(ws, which)
            if self.dense:
                Z = self.K[None] + 1j * ws[:, None, None] * self.C[None] - (ws**2)[:, None, None] * self.M[None]
                try:
                    Q = np.linalg.solve(Z, R)
                except np.linalg.LinAlgError:
                    Q = np.stack([_solve_one_dense(Z[i], R[i]) for i in range(len(ws))])
            else:
                Q = np.stack([self._solve_sparse(wi, R[i]) for i, wi in enumerate(ws)])
            part = slice(start, start + len(ws))
            displacement[part] = Q[:, self.bodies, :]
            if ne:
                # Δ = D Q + D_s U, all frequencies and inputs of the batch at once (D sparse).
                flat = Q.transpose(1, 0, 2).reshape(n, len(ws) * n_in)
                d = np.asarray(self.D @ flat).reshape(ne, len(ws), n_in).transpose(1, 0, 2)
                for col, j in enumerate(which):
                    item = self.inputs[j]
                    if item.kind == "support":
                        d[:, :, col] += self.D_s[:, item.index][None, :]
                dynamic = self.k[None, :] + 1j * ws[:, None] * self.c[None, :] - (ws**2)[:, None] * self.b[None, :]
                deflection[part] = d
                force[part] = dynamic[:, :, None] * d
        return displacement, deflection, force


def _solve_one_dense(Z: np.ndarray, R: np.ndarray) -> np.ndarray:
    try:
        return np.linalg.solve(Z, R)
    except np.linalg.LinAlgError:
        return np.full(R.shape, np.inf, dtype=complex)


# --------------------------------------------------------------------------- grid


def _modes(matrices: Matrices) -> tuple[np.ndarray, np.ndarray]:
    """Natural frequencies (Hz) and damping ratios of the oscillatory modes (ζ < 1,
    not rigid); overdamped modes are appended with their |λ| and ζ ≥ 1."""
    from lumped.modal import RIGID_TOLERANCE, modal_analysis, stiffest_mode, undamped_modes

    if matrices.n <= DENSE_LIMIT:
        lam = np.asarray(modal_analysis(matrices, shapes=False).eigenvalues, dtype=complex)
        mag = np.abs(lam)
        keep = mag > RIGID_TOLERANCE * max(float(np.max(mag)) if len(mag) else 0.0, 1e-300)
        lam, mag = lam[keep], mag[keep]
        return mag / (2 * math.pi), np.clip(-lam.real / np.where(mag > 0, mag, 1.0), 0.0, None)
    omega, phi = undamped_modes(matrices, count=LARGE_SYSTEM_MODES)
    keep = omega > 0
    omega, phi = omega[keep], phi[:, keep]
    cmodal = np.einsum("ij,ij->j", phi, matrices.C @ phi)
    zeta = cmodal / (2 * omega)
    top = stiffest_mode(matrices)
    omega = np.append(omega, top.estimate)
    zeta = np.append(zeta, top.damping_ratio)
    return omega / (2 * math.pi), zeta


def frequency_grid(
    matrices: Matrices,
    f_min: float | None = None,
    f_max: float | None = None,
    points_per_decade: int = POINTS_PER_DECADE,
    refine: bool = True,
    modes: tuple[np.ndarray, np.ndarray] | None = None,
) -> np.ndarray:
    """The default frequency grid of a system, Hz, ascending, without repeats.

    Log-spaced at ``points_per_decade`` from ``f_min`` (default: a decade below the
    lowest mode) to ``f_max`` (default: a decade above the highest), both included,
    plus, with ``refine``, :data:`POINTS_PER_MODE` points clustered within
    ±:data:`REFINE_BANDWIDTHS` half-power bandwidths (2ζ f_n) of each damped mode's
    peak (ζ < 1), never exactly on an undamped natural frequency.

    ``modes`` = (natural frequencies Hz, damping ratios), if already known.

    Raises
    ------
    FrequencyError
        An empty or non-positive range, or fewer than one point per decade.
    """
    if not (isinstance(points_per_decade, (int, np.integer)) and points_per_decade >= 1):
        raise FrequencyError(f"points per decade: must be a whole number ≥ 1, got {points_per_decade!r}")
    if modes is None and (f_min is None or f_max is None or refine):
        modes = _modes(matrices)
    fn, zeta = (np.asarray(x, dtype=float) for x in modes) if modes is not None else (np.zeros(0), np.zeros(0))
    if (f_min is None or f_max is None) and not len(fn):
        raise FrequencyError("frequency range: the system has no modes to set it; give the lowest and highest frequency")
    lo = float(f_min) if f_min is not None else float(np.min(fn)) / 10
    hi = float(f_max) if f_max is not None else float(np.max(fn)) * 10
    if not (math.isfinite(lo) and math.isfinite(hi) and lo > 0):
        raise FrequencyError(f"frequency range: must be positive and finite, got {lo:g} Hz to {hi:g} Hz")
    if not hi > lo:
        raise FrequencyError(f"frequency range: empty, from {lo:g} Hz to {hi:g} Hz (the highest must exceed the lowest)")
    count = max(2, int(math.ceil(points_per_decade * math.log10(hi / lo))) + 1)
    grid = [np.geomspace(lo, hi, count)]
    if refine and len(fn):
        oscillatory = zeta < 1.0
        per_mode = int(np.clip(MAX_REFINE_POINTS // max(1, int(oscillatory.sum())), 7, POINTS_PER_MODE))
        half = per_mode // 2
        # Offsets in half-power bandwidths, clustered towards the peak.
        steps = np.geomspace(0.01, REFINE_BANDWIDTHS, half)
        for f, z in zip(fn[oscillatory], zeta[oscillatory], strict=True):
            undamped = z <= 0
            z_eff = UNDAMPED_REFINE_ZETA if undamped else z
            centre = f * math.sqrt(max(1.0 - 2.0 * z * z, 0.0)) if z < math.sqrt(0.5) else f
            offsets = 2.0 * z_eff * f * steps
            points = np.concatenate([centre - offsets[::-1], centre + offsets] + ([] if undamped else [[centre]]))
            grid.append(points[(points >= lo) & (points <= hi)])
    out = np.unique(np.concatenate(grid))
    return out[(out >= lo) & (out <= hi)]


# --------------------------------------------------------------------------- peaks


def find_peaks(frequency: np.ndarray, response: np.ndarray, evaluate=None,
               tolerance: float = PEAK_TOLERANCE) -> list[Peak]:  # fmt: skip
    """Resonance peaks of |H| on the grid ``frequency`` (Hz): interior local maxima,
    each refined (when ``evaluate(f) -> complex H`` is given) by a bounded scalar
    maximisation of |H(f)| between the neighbouring grid points, to ``tolerance``
    relative in frequency. Maxima below 1e-9 of the largest |H| are ignored."""
    f = np.asarray(frequency, dtype=float)
    mag = np.abs(np.asarray(response))
    if len(f) < 3:
        return []
    finite = np.isfinite(mag)
    top = float(np.max(mag[finite])) if np.any(finite) else 0.0
    inner = np.arange(1, len(f) - 1)
    is_peak = (mag[inner] > mag[inner - 1]) & (mag[inner] >= mag[inner + 1]) & (mag[inner] >= 1e-9 * top)
    peaks = []
    for i in inner[is_peak]:
        if evaluate is None or not np.isfinite(mag[i]):
            h = complex(np.asarray(response)[i])
            peaks.append(Peak(float(f[i]), abs(h), math.degrees(np.angle(h))))
            continue
        a, b = float(f[i - 1]), float(f[i + 1])
        result = minimize_scalar(lambda x: -abs(evaluate(x)), bounds=(a, b), method="bounded",
                                 options={"xatol": 0.25 * tolerance * float(f[i]), "maxiter": 500})  # fmt: skip
        best = float(result.x)
        h_best = evaluate(best)
        if not abs(h_best) >= mag[i]:  # the grid point itself was the best found
            best, h_best = float(f[i]), complex(np.asarray(response)[i])
        peaks.append(Peak(best, abs(h_best), math.degrees(np.angle(h_best))))
    return peaks


# --------------------------------------------------------------------------- entry points


def _matrices_of(system: System | Matrices) -> tuple[Matrices, System | None]:
    if isinstance(system, Matrices):
        return system, None
    return assemble(system), system


def _resolve_inputs(matrices: Matrices, system: System | None, inputs: Sequence[str] | None) -> list[_Input]:
    force_bodies = {}
    for j, fid in enumerate(matrices.force_ids):
        rows = matrices.P[:, [j]].nonzero()[0]
        if len(rows):
            force_bodies[fid] = matrices.body_ids[int(rows[0])]
        elif system is not None:
            force_bodies[fid] = system.forces[fid].on
    if inputs is None:
        inputs = list(matrices.support_ids) + list(matrices.force_ids)
        if not inputs:
            raise FrequencyError(
                "inputs: the system has no supports and no forces; name the bodies to apply a unit force to"
            )
    elif isinstance(inputs, str):
        inputs = [inputs]
    out = []
    for item in inputs:
        if item in matrices.support_ids:
            out.append(_Input(item, "support", matrices.support_ids.index(item), None))
        elif item in force_bodies:
            body = force_bodies[item]
            out.append(_Input(item, "force", matrices.body_ids.index(body), body))
        elif item in matrices.body_ids:
            out.append(_Input(item, "force", matrices.body_ids.index(item), item))
        else:
            raise FrequencyError(
                f"input {item!r} is not a support, force or body of the system "
                f"(supports: {', '.join(matrices.support_ids) or 'none'})"
            )
    if not out:
        raise FrequencyError("inputs: the list of inputs is empty")
    return out


def _resolve_outputs(matrices: Matrices, outputs: Sequence[str] | None) -> tuple[list[int], list[int]]:
    if outputs is None:
        return list(range(matrices.n)), list(range(len(matrices.element_ids)))
    if isinstance(outputs, str):
        outputs = [outputs]
    bodies, elements = [], []
    for item in outputs:
        if item in matrices.body_ids:
            bodies.append(matrices.body_ids.index(item))
        elif item in matrices.element_ids:
            elements.append(matrices.element_index(item))
        else:
            raise FrequencyError(f"output {item!r} is not a body or element of the system")
    return bodies, elements


def _check_frequencies(frequencies) -> np.ndarray:
    f = np.atleast_1d(np.asarray(frequencies, dtype=float))
    if f.ndim != 1 or len(f) == 0:
        raise FrequencyError("frequencies: the list is empty")
    if not np.all(np.isfinite(f)) or np.any(f < 0):
        raise FrequencyError("frequencies: every frequency must be finite and not negative (Hz)")
    return np.unique(f)


def frequency_response(
    system: System | Matrices,
    frequencies=None,
    inputs: Sequence[str] | str | None = None,
    outputs: Sequence[str] | str | None = None,
    *,
    f_min: float | None = None,
    f_max: float | None = None,
    points_per_decade: int = POINTS_PER_DECADE,
    refine: bool = True,
    dense: bool | None = None,
) -> FrequencyResponse:
    """Frequency response of every chosen output to every chosen input, per unit input.

    Parameters
    ----------
    system : System or Matrices
        The system (assembled here) or its matrices.
    frequencies : array of float, optional
        The grid, Hz (≥ 0; sorted, repeats dropped). Default :func:`frequency_grid`
        with ``f_min``, ``f_max`` (Hz), ``points_per_decade`` and ``refine``.
    inputs : ids, optional
        Support ids (1 m of prescribed displacement), force ids (1 N of that force,
        on its body) or body ids (1 N on that body). Default: every support and force.
    outputs : ids, optional
        Body and element ids to keep (default all); fewer saves memory on large systems.
    dense : bool, optional
        Force the batched dense (True) or the sparse per-frequency (False) solve;
        default dense up to :data:`DENSE_FREQUENCY_LIMIT` bodies.

    Raises
    ------
    FrequencyError
        An unknown id, an empty frequency range or list, or no inputs.
    """
    matrices, sys_ = _matrices_of(system)
    if matrices.n == 0:
        raise FrequencyError("the system has no bodies")
    items = _resolve_inputs(matrices, sys_, inputs)
    bodies, elements = _resolve_outputs(matrices, outputs)
    modes = (np.zeros(0), np.zeros(0))
    if frequencies is None:
        if f_min is not None and f_max is not None and not refine:
            modes = None
        else:
            modes = _modes(matrices)
        grid = frequency_grid(matrices, f_min, f_max, points_per_decade, refine, modes)
    else:
        if f_min is not None or f_max is not None:
            raise FrequencyError("frequencies: give either a list of frequencies or a range, not both")
        grid = _check_frequencies(frequencies)
    size = 16 * len(grid) * (len(bodies) + 2 * len(elements)) * len(items)
    if size > MAX_RESULT_BYTES:
        raise FrequencyError(
            f"outputs: keeping {len(bodies)} bodies and {len(elements)} elements at {len(grid)} "
            f"frequencies for {len(items)} inputs needs {size / 2**30:.1f} GiB; name the outputs you need"
        )
    problem = _Problem(matrices, items, bodies, elements, dense)
    displacement, deflection, force = problem.solve(grid)
    fn, zeta = modes if modes is not None else (np.zeros(0), np.zeros(0))
    return FrequencyResponse(
        frequency=grid,
        input_ids=tuple(i.id for i in items),
        input_kinds=tuple(i.kind for i in items),
        input_bodies=tuple(i.body for i in items),
        body_ids=tuple(matrices.body_ids[i] for i in bodies),
        element_ids=tuple(matrices.element_ids[i] for i in elements),
        element_kinds=tuple(matrices.element_kinds[i] for i in elements),
        displacement=displacement,
        deflection=deflection,
        force=force,
        natural_frequencies_hz=tuple(float(x) for x in fn),
        damping_ratios=tuple(float(x) for x in zeta),
        solver=problem.solver,
        _problem=problem,
    )


def transfer(
    system: System | Matrices,
    input_id: str,
    output_id: str,
    quantity: str = "displacement",
    frequencies=None,
    *,
    f_min: float | None = None,
    f_max: float | None = None,
    points_per_decade: int = POINTS_PER_DECADE,
    peaks: bool = True,
) -> Transfer:
    """One input → output :class:`Transfer` (see :func:`frequency_response` for the
    ids and grid), with its resonance peaks. ``quantity``: displacement, velocity or
    acceleration of a body; force, deflection (= displacement), velocity or
    acceleration of an element's deflection."""
    matrices, sys_ = _matrices_of(system)
    if matrices.n == 0:
        raise FrequencyError("the system has no bodies")
    _resolve_inputs(matrices, sys_, [input_id])
    _output_kind(output_id, quantity, matrices.body_ids, matrices.element_ids)
    response = frequency_response(
        matrices if sys_ is None else sys_, frequencies, [input_id], [output_id],
        f_min=f_min, f_max=f_max, points_per_decade=points_per_decade,
    )  # fmt: skip
    return response.transfer(input_id, output_id, quantity, peaks=peaks)


def transmissibility(system: System | Matrices, support_id: str, body_id: str, frequencies=None,
                     **grid) -> Transfer:  # fmt: skip
    """Displacement (= acceleration) transmissibility |X/U| from support ``support_id``
    to body ``body_id``, m/m, with its peaks."""
    matrices, _ = _matrices_of(system)
    if support_id not in matrices.support_ids:
        raise FrequencyError(f"transmissibility: {support_id!r} is not a support of the system")
    if body_id not in matrices.body_ids:
        raise FrequencyError(f"transmissibility: {body_id!r} is not a body of the system")
    return transfer(system, support_id, body_id, "displacement", frequencies, **grid)
