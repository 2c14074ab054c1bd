"""Time simulation: fixed-step runs with any stepper of the catalogue, and scipy's
adaptive integrators for comparison.

The driver owns the time grid, the inputs, the output and the checks; a compiled
kernel (:mod:`lumped.kernels`) only steps. The run goes in chunks of
:data:`CHUNK_STEPS` steps; between chunks the driver reports progress, asks whether
to cancel and checks for divergence. Output is decimated inside the kernel, so
memory follows the samples kept, not the steps taken.

Conventions: times are ``t_k = k·h`` (computed, never accumulated), with one
shortened last step when the duration is not a whole number of steps; samples are
the stepper's own states at every ``output_every``-th step plus t = 0 and the end;
displacements are from static equilibrium; element forces are total forces (static
included, tension positive) and deflections are from static equilibrium.
"""

from __future__ import annotations

import functools
import math
import os
from collections.abc import Callable, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from time import monotonic

import numpy as np
import scipy.sparse as sp

from lumped import kernels, signal_kernels
from lumped.assemble import DENSE_LIMIT, Matrices, assemble, copies, mass_solver
from lumped.errors import LumpedError
from lumped.excitation import Signal, signal_for
from lumped.kernels import LEFT_LIMIT
from lumped.linear_rk import (
    FREE_LEAST_STEPS,
    LANE_BLOCK,
    SPECIALISE_STEPS,
    Lanes,
    affine_rk_work,
    chunk_kernels,
    free_chunk,
    free_maps,
    free_runs,
    free_work,
    input_rows,
    input_slots,
    is_compiled,
    lanes_of,
    put_rows,
    rk_maps,
    unblocked,
)
from lumped.linear_steppers import DENSE_MAP_LIMIT, affine_maps, sparse_update
from lumped.model import System
from lumped.stability import StepCheck, check_step, step_count
from lumped.static import StaticState, static_equilibrium
from lumped.steppers import (
    ExactStepper,
    RungeKuttaStepper,
    SecondOrderStepper,
    Stepper,
    get_stepper,
    implicit_coefficients,
)

__all__ = ["RunError", "Event", "RunResult", "Prepared", "prepare", "prepare_copies", "simulate", "motion_channels", "channels_frame", "ADAPTIVE_METHODS", "BALANCE_WARNING", "CHUNK_STEPS"]

#: Steps per compiled chunk between the driver's progress/cancel/divergence checks.
CHUNK_STEPS = 8192
#: Shapes of work arrays a prepared system keeps for its next runs.
SPARE_SHAPES = 4
#: A body displacement beyond this many times the run's displacement scale diverged.
DIVERGENCE_FACTOR = 1e6
#: Default cap on the memory a run's output may take: a quarter of the machine's.
MEMORY_FRACTION = 0.25
#: Energy balance error, as a fraction of the energy through the system, above which a
#: finished run is flagged as inaccurate.
BALANCE_WARNING = 0.01
#: Implicit steppers on nonlinear systems: dense Newton systems up to this many bodies,
#: and at most this many Newton iterations in a step.
NEWTON_LIMIT = 500
NEWTON_ITERATIONS = 30
#: Dense mass matrices (inerters between bodies) up to this many bodies.
DENSE_MASS_LIMIT = 500
#: scipy.integrate.solve_ivp methods, by the ids the tool uses for them.
ADAPTIVE_METHODS = {
    "adaptive-rk45": "RK45",
    "adaptive-dop853": "DOP853",
    "adaptive-radau": "Radau",
    "adaptive-bdf": "BDF",
    "adaptive-lsoda": "LSODA",
}


class RunError(LumpedError):
    """A run that cannot start (bad settings, too large, unsupported combination)."""


@dataclass(frozen=True)
class Event:
    """A contact change: ``kind`` is "lift-off" / "landing" for one-sided springs,
    "stop-contact" / "stop-release" for end stops, "support-jump" for a step in a
    support's motion; ``time`` in s (interpolated within the step)."""

    time: float
    element: str
    kind: str


@dataclass
class RunResult:
    """A run's samples and evidence. Arrays are (samples,) or (samples, items), SI.

    ``displacement``/``velocity``/``acceleration``: bodies, in ``body_ids`` order;
    ``deflection``/``force``: elements, in ``element_ids`` order; ``support_*``:
    supports; ``force_input``: each force item's value in N (after ``scale``).
    Energy (J): ``kinetic``, ``stored`` (springs relative to static equilibrium),
    ``dissipated``, ``support_work``, ``force_work`` and ``balance_error`` =
    kinetic + stored + dissipated − initial energy − work done.
    ``status`` is "completed", "diverged" or "cancelled"; ``message`` says why.

    The element channels and the energies they give (``deflection``, ``force``,
    ``stored``, ``kinetic``) are worked out from the samples when first read
    (``element_series``), so that a run whose element channels nobody reads — a
    batch of variants read for its displacements — does not pay for them.
    """

    system_name: str
    stepper: str
    dt: float
    duration: float
    time: np.ndarray
    body_ids: tuple[str, ...]
    element_ids: tuple[str, ...]
    element_kinds: tuple[str, ...]
    support_ids: tuple[str, ...]
    force_ids: tuple[str, ...]
    displacement: np.ndarray
    velocity: np.ndarray
    acceleration: np.ndarray
    support_displacement: np.ndarray
    support_velocity: np.ndarray
    force_input: np.ndarray
    dissipated: np.ndarray
    support_work: np.ndarray
    force_work: np.ndarray
    #: Called once, when an element channel is first read: (deflection, force, stored, kinetic).
    element_series: Callable[[], tuple[np.ndarray, ...]] = field(repr=False, compare=False)
    events: list[Event] = field(default_factory=list)
    status: str = "completed"
    message: str = ""
    steps: int = 0
    check: StepCheck | None = None

    @functools.cached_property
    def _elements(self) -> tuple[np.ndarray, ...]:
        return self.element_series()

    @property
    def deflection(self) -> np.ndarray:
        """Element deflections from static equilibrium, m (samples × elements)."""
        return self._elements[0]

    @property
    def force(self) -> np.ndarray:
        """Element forces, static included, N, tension positive (samples × elements)."""
        return self._elements[1]

    @property
    def stored(self) -> np.ndarray:
        """Energy stored in the springs relative to static equilibrium, J."""
        return self._elements[2]

    @property
    def kinetic(self) -> np.ndarray:
        """Kinetic energy of the bodies (and inerters), J."""
        return self._elements[3]

    @property
    def balance_error(self) -> np.ndarray:
        """Energy not accounted for, J (the stepper's error on the energy balance)."""
        total = self.kinetic + self.stored + self.dissipated
        return total - total[0] - (self.support_work - self.support_work[0]) - (
            self.force_work - self.force_work[0]
        )

    @property
    def balance_ratio(self) -> float:
        """Largest |balance error| over the run ÷ the energy that passed through the
        system (the largest of kinetic + stored, dissipated, and work done); a ratio
        above :data:`BALANCE_WARNING` says the step was too large for an accurate run."""
        through = max(
            float(np.max(self.kinetic + self.stored - self.kinetic[0] - self.stored[0], initial=0.0)),
            float(np.max(np.abs(self.dissipated), initial=0.0)),
            float(np.max(np.abs(self.support_work) + np.abs(self.force_work), initial=0.0)),
            float(self.kinetic[0] + self.stored[0]),
        )
        error = float(np.max(np.abs(self.balance_error), initial=0.0))
        return error / through if through > 0 else (0.0 if error == 0 else math.inf)

    @property
    def diverged(self) -> bool:
        return self.status == "diverged"

    def channels(self) -> dict[str, tuple[str, np.ndarray]]:
        """Every output channel as ``"ID.quantity" → (unit, values)``, time first."""
        out = motion_channels(self)
        for s, support in enumerate(self.support_ids):
            out[f"{support}.displacement"] = ("m", self.support_displacement[:, s])
            out[f"{support}.velocity"] = ("m/s", self.support_velocity[:, s])
        for f, item in enumerate(self.force_ids):
            out[f"{item}.force"] = ("N", self.force_input[:, f])
        for name in ("kinetic", "stored", "dissipated", "support_work", "force_work"):
            out[f"energy.{name}"] = ("J", getattr(self, name))
        out["energy.balance_error"] = ("J", self.balance_error)
        return out

    def to_frame(self):
        """The channels as a pandas DataFrame with ``"ID.quantity [unit]"`` columns."""
        return channels_frame(self.channels())


def motion_channels(run) -> dict[str, tuple[str, np.ndarray]]:
    """Time, then every body's displacement, velocity and acceleration and every
    element's force and deflection of ``run`` (a :class:`RunResult` or one variant
    of a batch), as ``"ID.quantity" → (unit, values)``."""
    out: dict[str, tuple[str, np.ndarray]] = {"time": ("s", run.time)}
    for i, body in enumerate(run.body_ids):
        out[f"{body}.displacement"] = ("m", run.displacement[:, i])
        out[f"{body}.velocity"] = ("m/s", run.velocity[:, i])
        out[f"{body}.acceleration"] = ("m/s^2", run.acceleration[:, i])
    for e, element in enumerate(run.element_ids):
        out[f"{element}.force"] = ("N", run.force[:, e])
        out[f"{element}.deflection"] = ("m", run.deflection[:, e])
    return out


def channels_frame(channels: dict[str, tuple[str, np.ndarray]]):
    """Channels (``"ID.quantity" → (unit, values)``) as a pandas DataFrame with
    ``"ID.quantity [unit]"`` columns."""
    import pandas as pd

    return pd.DataFrame({f"{name} [{unit}]": values for name, (unit, values) in channels.items()})


# --------------------------------------------------------------------------- set-up


@dataclass(frozen=True)
class _Elements:
    """The element table the kernels read (see :mod:`lumped.kernels`)."""

    ea: np.ndarray
    eb: np.ndarray
    kind: np.ndarray
    k: np.ndarray
    c: np.ndarray
    c2: np.ndarray
    fs: np.ndarray
    acts: np.ndarray
    gap: np.ndarray
    gk: np.ndarray
    coff: np.ndarray
    cv: np.ndarray
    cf: np.ndarray

    def args(self):
        return (self.ea, self.eb, self.kind, self.k, self.c, self.c2, self.fs, self.acts,
                self.gap, self.gk, self.coff, self.cv, self.cf)  # fmt: skip

    def taken(self, order: np.ndarray) -> _Elements:
        """The table of the elements ``order`` (indices), in that order."""
        curve = self.kind[order] == kernels.CURVE_DAMPER
        low, high = self.coff[order], self.coff[order + 1]
        points = np.concatenate([np.arange(a, b) for a, b in zip(low[curve], high[curve], strict=True)]
                                or [[]]).astype(np.int64)  # fmt: skip
        coff = np.concatenate([[0], np.cumsum(np.where(curve, high - low, 0))]).astype(np.int64)
        picked = (self.ea, self.eb, self.kind, self.k, self.c, self.c2, self.fs, self.acts, self.gap, self.gk)
        return _Elements(*(x[order] for x in picked), coff, self.cv[points], self.cf[points])

    def links(self):
        """Linear springs and dampers merged per (lower, upper) node pair: (a, b, k, c)."""
        spring = (self.kind == kernels.SPRING) & (self.acts == 0) & ~np.isfinite(self.gap)
        damper = self.kind == kernels.DAMPER
        linear = spring | damper
        pairs = np.stack([self.ea[linear], self.eb[linear]], axis=1)
        if not len(pairs):
            empty = np.zeros(0, dtype=np.int64)
            return empty, empty, np.zeros(0), np.zeros(0)
        unique, inverse = np.unique(pairs, axis=0, return_inverse=True)
        inverse = inverse.ravel()
        k = np.bincount(inverse, weights=np.where(spring[linear], self.k[linear], 0.0), minlength=len(unique))
        c = np.bincount(inverse, weights=np.where(damper[linear], self.c[linear], 0.0), minlength=len(unique))
        return unique[:, 0].copy(), unique[:, 1].copy(), k, c

    def nonlinear(self):
        """Indices of the elements evaluated one by one: nonlinear springs and dampers."""
        spring = (self.kind == kernels.SPRING) & ((self.acts != 0) | np.isfinite(self.gap))
        damper = (self.kind == kernels.ASYMMETRIC_DAMPER) | (self.kind == kernels.CURVE_DAMPER)
        return np.flatnonzero(spring | damper).astype(np.int64)

    def inerters(self):
        return np.flatnonzero(self.kind == kernels.INERTER).astype(np.int64)


def _element_table(matrices: Matrices, static: StaticState) -> _Elements:
    m = matrices
    n, ne = m.n, len(m.element_ids)
    body_cols = m.D.tocoo()
    support_cols = m.D_s.tocoo()
    ea = np.full(ne, -1, dtype=np.int64)
    eb = np.full(ne, -1, dtype=np.int64)
    for rows, cols, data, offset in ((body_cols.row, body_cols.col, body_cols.data, 0),
                                     (support_cols.row, support_cols.col, support_cols.data, n)):  # fmt: skip
        lower = data < 0
        ea[rows[lower]] = cols[lower] + offset
        eb[rows[~lower]] = cols[~lower] + offset
    code = {"spring": kernels.SPRING, "damper": kernels.DAMPER, "inerter": kernels.INERTER}
    kind = np.array([code[k] for k in m.element_kinds], dtype=np.int64)
    k = np.where(kind == kernels.INERTER, m.inertance, m.stiffness)
    c = m.damping.copy()
    c2 = m.damping.copy()
    nl = m.nonlinear
    kind[nl.asymmetric_index] = kernels.ASYMMETRIC_DAMPER
    c[nl.asymmetric_index] = nl.asymmetric_rebound
    c2[nl.asymmetric_index] = nl.asymmetric_compression
    kind[nl.curve_index] = kernels.CURVE_DAMPER
    coff = np.zeros(ne + 1, dtype=np.int64)
    for j, e in enumerate(nl.curve_index):
        coff[e] = nl.curve_offset[j]
        coff[e + 1] = nl.curve_offset[j + 1]
    acts = np.zeros(ne)
    acts[nl.one_sided_index] = nl.one_sided_sign
    gap = np.full(ne, np.inf)
    gk = np.zeros(ne)
    gap[nl.end_stop_index] = nl.end_stop_gap
    gk[nl.end_stop_index] = nl.end_stop_stiffness
    fs = np.where(kind == kernels.SPRING, static.element_force, 0.0)
    cv = nl.curve_velocity if len(nl.curve_velocity) else np.zeros(1)
    cf = nl.curve_force if len(nl.curve_force) else np.zeros(1)
    return _Elements(ea, eb, kind, k, c, c2, fs, acts, gap, gk, coff, cv, cf)


@dataclass(frozen=True)
class _Inputs:
    """Support motions and force values as functions of time, and the compiled
    program (:mod:`lumped.signal_kernels`) the kernels evaluate them with."""

    supports: list[tuple[Signal | None, float]]  # (signal, delay) per support
    scales: np.ndarray  # per force item
    program: tuple

    def at(self, t: np.ndarray, before=0.0):
        """u, u', u'' (…, n_supports) and force-input values (…, n_forces) at times t.

        Signals are right-continuous. ``before`` (s, broadcasting with ``t``) reads
        them that much earlier: the end stage of a step reads them
        :data:`LEFT_LIMIT` × h early, so that at a step, a bump's edge or a table's
        knot on the grid it sees the value and rates from before it.
        """
        t = np.asarray(t, dtype=float) - before
        flat = np.ascontiguousarray(t.ravel())
        ns, nf = len(self.supports), len(self.scales)
        u, ud, udd = (np.zeros((len(flat), ns)) for _ in range(3))
        F = np.zeros((len(flat), nf))
        signal_kernels.input_series(flat, self.program, u, ud, udd, F)
        return tuple(x.reshape(t.shape + x.shape[1:]) for x in (u, ud, udd, F))

    def jumps(self, duration: float) -> list[tuple[float, int, float]]:
        """(time, support index, size) of every jump in support position in [0, T)."""
        out = []
        for s, (signal, delay) in enumerate(self.supports):
            if signal is None:
                continue
            for time, size in signal.jumps():
                if 0.0 <= time + delay < duration:
                    out.append((time + delay, s, size))
        return sorted(out)

    def scale(self) -> float:
        """Largest amplitude of any support motion, m (0 if none)."""
        return max((sig.amplitude for sig, _ in self.supports if sig is not None), default=0.0)


def _inputs(system: System, matrices: Matrices) -> _Inputs:
    signals = {key: signal_for(system, key) for key in system.inputs}
    supports = []
    for s in matrices.support_ids:
        support = system.supports[s]
        supports.append((signals[support.motion] if support.motion else None, support.delay))
    used = list(system.inputs)
    program = (
        *signal_kernels.encoded([signals[key].code() for key in used]),
        np.array([used.index(system.supports[s].motion) if system.supports[s].motion else -1
                  for s in matrices.support_ids], dtype=np.int64),
        np.array([delay for _, delay in supports], dtype=float),
        np.array([used.index(system.forces[f].input) for f in matrices.force_ids], dtype=np.int64),
    )  # fmt: skip
    return _Inputs(supports, np.array([system.forces[f].scale for f in matrices.force_ids]), program)


def _inverse_mass(matrices: Matrices) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """M⁻¹ as CSR arrays (row pointers, columns, values) for the kernels: diagonal
    without inerters between bodies, dense (up to :data:`DENSE_MASS_LIMIT`) with them."""
    if matrices.mass_is_diagonal:
        inverse = sp.diags_array(1.0 / matrices.M.diagonal()).tocsr()
    elif matrices.n > DENSE_MASS_LIMIT:
        raise RunError(
            f"inerters between bodies need a dense mass inverse, limited to {DENSE_MASS_LIMIT} "
            f"bodies; this system has {matrices.n}"
        )
    else:
        inverse = sp.csr_matrix(np.linalg.inv(matrices.M.toarray()))
    return inverse.indptr.astype(np.int64), inverse.indices.astype(np.int64), inverse.data.astype(float)


def _size(count: int) -> str:
    """A byte count for people: MiB, or KiB / bytes when small."""
    if count >= 2**20:
        return f"{count / 2**20:,.0f} MiB"
    return f"{count / 2**10:,.0f} KiB" if count >= 2**10 else f"{count} bytes"


#: Free memory in blocks of 2 MiB or more from which runs let numpy ask for huge pages.
HUGE_PAGES_FREE = 2**30
#: Seconds a look at the kernel's free blocks is trusted for.
HUGE_PAGES_LOOK = 1.0
_huge_pages_seen = [-math.inf, False]  # (when, whether enough blocks were free)


def _huge_pages_free(path: str = "/proc/buddyinfo") -> int:
    """Bytes the kernel holds free in blocks of 2 MiB or more (from its free-block
    counts, ``path``; 0 where they cannot be read)."""
    try:
        with open(path) as file:
            lines = file.read().splitlines()
        page = os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError):
        return 0
    total = 0
    for line in lines:  # "Node 0, zone   Normal   8920   6152 …": free blocks of 1, 2, 4 … pages
        for order, count in enumerate(line.split()[4:]):
            if page << order >= 2**21:
                total += int(count) * (page << order) if count.isdigit() else 0
    return total


@contextmanager
def _plain_pages():
    """numpy's transparent-huge-page advice off while a run allocates (and back as it
    was after), unless the kernel holds :data:`HUGE_PAGES_FREE` free in blocks of
    2 MiB. A huge page from a free block is a fault of 2 MiB at once: 48 MB of fresh
    output touched in 8–11 ms here, against 25–35 ms in 4 KiB pages. But where no
    such block is free, every fault of an advised array runs into page compaction: a
    100 000-body chain's post-processing wrote its 131 MB of fresh element arrays in
    0.42 s with the advice and 0.12 s without, on a machine whose free memory was
    in small pieces. Set LUMPED_HUGE_PAGES=1 to leave numpy's choice alone."""
    core = getattr(np, "_core", None) or np.core
    advise = getattr(core.multiarray, "_set_madvise_hugepage", None)
    if advise is None or os.environ.get("LUMPED_HUGE_PAGES") == "1" or _huge_blocks_free():
        yield
        return
    before = advise(False)
    try:
        yield
    finally:
        advise(before)


def _huge_blocks_free() -> bool:
    """True when :func:`_huge_pages_free` reaches :data:`HUGE_PAGES_FREE` (looked
    at once every :data:`HUGE_PAGES_LOOK` seconds)."""
    now = monotonic()
    if now - _huge_pages_seen[0] > HUGE_PAGES_LOOK:
        _huge_pages_seen[:] = now, _huge_pages_free() >= HUGE_PAGES_FREE
    return _huge_pages_seen[1]


def steps_per_sample(output_rate: float | None, dt: float) -> int:
    """Steps between output samples for ``output_rate`` (Hz; None: every step) at
    step ``dt`` (s): round(1/(rate·dt)), at least one."""
    return max(1, round(1.0 / (output_rate * dt))) if output_rate else 1


def memory_cap() -> int:
    """Bytes a run's output may take by default: a quarter of the machine's memory."""
    try:
        total = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        total = 8 * 2**30
    return int(MEMORY_FRACTION * total)


# --------------------------------------------------------------------------- the run


@dataclass(frozen=True)
class Prepared:
    """The set-up every run of one system shares: assembly, static equilibrium, the
    element table and the input program the kernels read. Made by :func:`prepare`;
    pass it to :func:`simulate` in place of the system to run the system many times
    (a convergence study, a step or duration scan) without repeating the set-up."""

    system: System
    matrices: Matrices
    static: StaticState
    table: _Elements
    inputs: _Inputs
    model: tuple  # the kernels' model tuple without its work array (see lumped.kernels)
    initial: tuple[np.ndarray, np.ndarray]  # the bodies' initial displacements (m) and velocities (m/s)
    lanes: Lanes | None = None  # small linear systems: explicit RK steps as affine maps
    #: The elements' order in a run's element channels (indices into the system's
    #: elements; None: the system's order), so that each copy's can be one block.
    element_order: np.ndarray | None = None
    maps: dict = field(default_factory=dict, compare=False, repr=False)  # their maps, by (tableau, step)
    #: Work arrays of finished runs, by their shape, for the next run to take (a run
    #: takes them out, so runs at the same time never share them; fresh arrays would
    #: cost their first touch of every page again).
    spare: dict = field(default_factory=dict, compare=False, repr=False)


@_plain_pages()
def prepare(system: System, lanes: int = 1) -> Prepared:
    """Assemble ``system`` and set up what its runs share (see :class:`Prepared`).

    ``lanes``: the system is that many copies of one structure side by side (variants,
    as :mod:`lumped.variants` lays them out); small linear ones then step each copy as
    a lane of :mod:`lumped.linear_rk` under explicit Runge–Kutta steppers.

    Raises
    ------
    RunError
        A system without bodies, or inerters between too many bodies.
    lumped.static.StaticError
        No static equilibrium.
    """
    return _prepared(system, *_assembled(system), lanes)


@_plain_pages()
def prepare_copies(system: System, prefixes: Sequence[str], changes: Mapping[tuple[str, str], np.ndarray]) -> Prepared:
    """What :func:`prepare` gives for ``len(prefixes)`` copies of ``system`` laid side
    by side (bodies and elements copy by copy, copy i's ids prefixed ``prefixes[i]``,
    the supports and inputs shared), with per-copy ``changes`` of matrix values as
    :func:`lumped.assemble.copies` takes them — made from the system's assembly by
    array operations, with no system of copies built. The result's ``system`` is
    ``system``; only the copies need a static equilibrium."""
    count = len(prefixes)
    matrices, inputs, force_body, initial = _assembled(system)
    program = (*inputs.program[:7], np.tile(inputs.program[7], count))
    copied = _Inputs(inputs.supports, np.tile(inputs.scales, count), program)
    force_body = (force_body[None, :] + matrices.n * np.arange(count)[:, None]).ravel()
    initial = tuple(np.tile(x, count) for x in initial)
    return _prepared(system, copies(matrices, prefixes, changes), copied, force_body, initial, count)


def _assembled(system: System) -> tuple:
    """The system's matrices, inputs, the body each force item acts on and the
    bodies' initial displacements and velocities: what :func:`_prepared` starts from."""
    matrices = assemble(system)
    if matrices.n == 0:
        raise RunError("the system has no bodies")
    force_body = np.array([matrices.body_ids.index(system.forces[f].on) for f in matrices.force_ids], dtype=np.int64)
    initial = tuple(np.array([getattr(system.bodies[b], name) for b in matrices.body_ids], dtype=float)
                    for name in ("initial_displacement", "initial_velocity"))  # fmt: skip
    return matrices, _inputs(system, matrices), force_body, initial


def _prepared(system, matrices, inputs, force_body, initial, lanes) -> Prepared:
    static = static_equilibrium(matrices)
    table = _element_table(matrices, static)
    model = (table.links(), table.nonlinear(), table.inerters(), table.args(), *_inverse_mass(matrices),
             force_body, inputs.scales.astype(float))  # fmt: skip
    return Prepared(system, matrices, static, table, inputs, model, initial,
                    lanes_of(model, inputs.program, matrices.n, lanes))  # fmt: skip


@_plain_pages()
def simulate(
    system: System | Prepared,
    stepper: str | Stepper | None = None,
    dt: float | None = None,
    duration: float | None = None,
    output_rate: float | None = None,
    output_every: int | None = None,
    max_output_bytes: int | None = None,
    progress: Callable[[float], None] | None = None,
    cancel: Callable[[], bool] | None = None,
    check: bool = True,
    specialise: bool | None = None,
) -> RunResult:
    """Run ``system`` (or a :class:`Prepared` one) with a fixed-step ``stepper`` (id
    or :class:`Stepper`) or an adaptive scipy method (``"adaptive-rk45"`` …), from
    static equilibrium plus the bodies' initial displacements and velocities.

    Parameters
    ----------
    dt, duration : float
        Step and run length, s (default: the file's ``[run]``).
    output_rate : float
        Samples per second, Hz: every ``round(1/(rate·dt))`` steps (default: the file's
        ``output_rate``, else every step). ``output_every`` gives the step count directly.
    max_output_bytes : int
        Refuse runs whose output would need more (default :func:`memory_cap`).
    progress : callable(fraction)
        Called between chunks with the fraction done.
    cancel : callable() -> bool
        Called between chunks; True stops the run, keeping the samples so far.
    check : bool
        Attach the step check (:func:`lumped.stability.check_step`) of this stepper and step.
    specialise : bool or None
        Small linear systems (and batches of their variants) under explicit
        Runge–Kutta steppers can step with a kernel generated for their structure
        (:mod:`lumped.linear_rk`): the same steps, several times faster, after a
        compile of 5–15 s once per structure and machine (cached on disk). None: use it
        when it is compiled already or the run has at least
        :data:`lumped.linear_rk.SPECIALISE_STEPS` steps (times variants); True: compile
        it if need be; False: never.

    Raises
    ------
    RunError
        Missing or bad settings, an output too large for memory, or a stepper that
        cannot run this system.
    """
    prepared = system if isinstance(system, Prepared) else None
    system = prepared.system if prepared else system
    run = system.run
    stepper = stepper if stepper is not None else run.stepper
    dt = dt if dt is not None else run.dt
    duration = duration if duration is not None else run.duration
    output_rate = output_rate if output_rate is not None else run.output_rate
    if stepper is None:
        raise RunError("no stepper given and the system's [run] table names none")
    if duration is None or not (math.isfinite(duration) and duration > 0):
        raise RunError(f"duration must be a positive time, got {duration!r}")
    if output_rate is not None and not (math.isfinite(output_rate) and output_rate > 0):
        raise RunError(f"output rate must be a positive frequency, got {output_rate!r} Hz")
    if isinstance(stepper, str) and stepper in ADAPTIVE_METHODS:
        from lumped.adaptive import simulate_adaptive

        return simulate_adaptive(prepared or system, ADAPTIVE_METHODS[stepper], stepper, duration,
                                 output_rate or (1 / dt if dt else None))  # fmt: skip
    if isinstance(stepper, str):
        try:
            stepper = get_stepper(stepper)
        except KeyError as exc:
            raise RunError(exc.args[0]) from None
    if dt is None or not (math.isfinite(dt) and dt > 0):
        raise RunError(f"dt must be a positive time step, got {dt!r}")
    if dt > duration:
        dt = duration
    prepared = prepared or prepare(system)
    matrices = prepared.matrices
    steps = step_count(dt, duration)
    if output_every is None:
        output_every = steps_per_sample(output_rate, dt)
    samples = steps // output_every + 2
    width = 3 * matrices.n + 2 * len(matrices.element_ids) + 2 * len(matrices.support_ids) + len(matrices.force_ids) + 7
    need = samples * width * 8 * 2  # kernel buffers plus the result's derived arrays
    cap = memory_cap() if max_output_bytes is None else max_output_bytes
    if need > cap:
        raise RunError(
            f"the output would need {_size(need)} ({samples:,} samples × {width} channels), "
            f"over the cap of {_size(cap)}; lower the output rate or raise the cap"
        )
    verdict = check_step(matrices, stepper, dt, duration) if check else None
    engine = _Engine(prepared, stepper, dt, duration, steps, output_every, samples, specialise)
    return engine.run(progress, cancel, verdict)


class _Engine:
    """One fixed-step run: set-up, chunk loop, jumps, post-processing."""

    def __init__(self, prepared: Prepared, stepper, dt, duration, steps, output_every, samples, specialise=None):
        self.system = prepared.system
        self.prepared = prepared
        matrices = self.m = prepared.matrices
        static = prepared.static
        self.stepper = stepper
        self.h = dt
        self.T = duration
        self.steps = steps
        self.every = output_every
        self.table = prepared.table
        self.inputs = prepared.inputs
        self.lanes = prepared.lanes if specialise is not False else None
        self.specialise = specialise
        self.model = (*prepared.model, np.zeros(matrices.n))  # work space of its own
        n = matrices.n
        self.q, self.v = (x.copy() for x in prepared.initial)
        self.energy = np.zeros(3)
        # Rows are written as samples are taken, and only those are read (no zeros to pay for).
        self.out_q, self.out_v, self.out_a, self.out_e = (np.empty((samples, width)) for width in (n, n, n, 3))
        self.out_step = np.zeros(samples, dtype=np.int64)
        self.count = 0
        self.events: list[Event] = []
        self._finish: list = []  # called when the run ends
        scale = max(
            float(np.max(np.abs(static.displacement))) if n else 0.0,
            self.inputs.scale(),
            float(np.max(np.abs(self.q))) if n else 0.0,
            1e-6,
        )
        self.q_limit = DIVERGENCE_FACTOR * scale
        self._prepare_watch()

    # -- set-up per stepper

    def _prepare_watch(self):
        nl = self.m.nonlinear
        elements = list(nl.one_sided_index) + list(nl.end_stop_index)
        kinds = [0] * len(nl.one_sided_index) + [1] * len(nl.end_stop_index)
        self.watch_element = np.array(elements, dtype=np.int64)
        self.watch_kind = np.array(kinds, dtype=np.int64)
        self.watch_sign = np.array(list(nl.one_sided_sign) + [0.0] * len(nl.end_stop_index))
        self.ev_capacity = 65536 if len(elements) else 0  # events kept (beyond: counted)
        self.ev_step = np.zeros(self.ev_capacity, dtype=np.int64)
        self.ev_frac = np.zeros(self.ev_capacity)
        self.ev_watch = np.zeros(self.ev_capacity, dtype=np.int64)
        self.ev_value = np.zeros(self.ev_capacity)
        self.n_ev = 0
        self.substep_events: list[tuple[int, int, float, float]] = []  # (first, end, t0, h)
        self.watch_prev = np.zeros(len(elements))
        if len(elements):
            u, *_ = self.inputs.at(np.array(0.0))
            kernels._contact_values(self.q, np.reshape(u, (1, -1)), 0, self.m.n,
                                    self.watch_element, self.watch_kind, self.table.args(),
                                    self.watch_prev)  # fmt: skip

    def _store_initial(self):
        u, ud, udd, F = self.inputs.at(np.array(0.0))
        acc, rates = np.zeros(self.m.n), np.zeros(3)
        self._accelerations(self.q, self.v, u, ud, udd, F, acc, rates)
        i = self.count
        self.out_q[i], self.out_v[i], self.out_a[i], self.out_e[i], self.out_step[i] = self.q, self.v, acc, self.energy, 0
        self.count += 1

    def _accelerations(self, q, v, u, ud, udd, F, acc, rates):
        U, Ud, Udd, FF = (np.ascontiguousarray(np.reshape(x, (1, -1))) for x in (u, ud, udd, F))
        kernels.body_accelerations(q, v, U, Ud, Udd, FF, 0, self.model, acc, rates)

    # -- the loop

    def run(self, progress, cancel, verdict) -> RunResult:
        self._choose_kernel()
        jumps = [(self._on_grid(t), s, size) for t, s, size in self.inputs.jumps(self.T)]
        status, message = "completed", ""
        for time, s, size in [j for j in jumps if j[0] == 0.0]:
            self._apply_jump(s, size, time)
        self._store_initial()
        interior = [j for j in jumps if j[0] > 0.0]
        k = 0
        while k < self.steps:
            # Step j covers [j·h, (j+1)·h); the one holding the next jump is split.
            jump_step = math.floor(interior[0][0] / self.h + 1e-12) if interior else self.steps
            end = min(self.steps, k + CHUNK_STEPS, jump_step)
            if interior and jump_step <= k:
                t_jump, s, size = interior.pop(0)
                result = self._split_step(k, t_jump, s, size)
                k += 1 if result[0] == kernels.OK else 0
            else:
                result = self._advance(k, end - k)
                k = end if result[0] == kernels.OK else k + result[1]
            if result[0] == kernels.DIVERGED:
                status, message = "diverged", self._divergence_message(k, verdict)
                break
            if result[0] == kernels.NEWTON_FAILED:
                status = "diverged"
                message = (
                    f"{self.stepper.id}: Newton's method did not settle within {NEWTON_ITERATIONS} "
                    f"iterations in the step from t = {self._time(k):.6g} s (step {k:,}); the step is too "
                    "large for the contact changes there; lower dt"
                )
                break
            if progress is not None:
                progress(k / self.steps)
            if cancel is not None and cancel():
                status, message = "cancelled", f"cancelled at t = {self._time(k):.6g} s"
                break
        if status == "completed" and self.out_step[self.count - 1] != self.steps:
            self._store_current(self.steps)
        elif status != "completed" and self.out_step[self.count - 1] != k:
            self._store_current(k)
        for finish in self._finish:
            finish()
        # The kernel's closures hold the engine: without them, its buffers are freed
        # as soon as the run returns (else only by the cycle collector, later, and
        # the next run's buffers would be fresh pages to fault in).
        self._kernel, self._finish = None, []
        return self._result(status, message, k, verdict)

    def _time(self, k: int) -> float:
        return self.T if k >= self.steps else k * self.h

    def _on_grid(self, time: float) -> float:
        """``time``, or the grid time k·h it misses only by rounding (0.123 s is
        1230 × 0.1 ms on paper, 0.12300000000000001 s on the grid)."""
        k = round(time / self.h)
        return self._time(k) if abs(time - k * self.h) <= LEFT_LIMIT * self.h else time

    def _store_current(self, k: int):
        u, ud, udd, F = self.inputs.at(np.array(self._time(k)))
        acc, rates = np.zeros(self.m.n), np.zeros(3)
        self._accelerations(self.q, self.v, u, ud, udd, F, acc, rates)
        if self.count >= len(self.out_step):
            self._grow()
        i = self.count
        self.out_q[i], self.out_v[i], self.out_a[i], self.out_e[i], self.out_step[i] = self.q, self.v, acc, self.energy, k
        self.count += 1

    def _grow(self):
        for name in ("out_q", "out_v", "out_a", "out_e", "out_step"):
            array = getattr(self, name)
            setattr(self, name, np.concatenate([array, np.zeros_like(array[:8])]))

    # -- stepping: uniform pieces of steps, inputs evaluated in the kernels, one kernel per family

    def _pieces(self, k0: int, count: int, substep=None):
        """``(first step, steps, step length, clock)`` of the uniform pieces of steps
        k0 … k0+count−1: a shortened last step runs on its own, and ``substep`` =
        (start time, length) runs step k0 as one part of a split step. The clock
        (see :func:`lumped.kernels._step_inputs`) computes stage times from the step
        index, never accumulating them; the run ends at T."""
        if substep is not None:
            t0, h = substep
            return [(k0, 1, h, (t0, 0.0, self.offsets))]
        short = self.T - (self.steps - 1) * self.h
        if abs(short - self.h) <= LEFT_LIMIT * self.h:  # a whole number of steps but for rounding
            short = self.h
        runs = [(k0, count)]
        if k0 + count == self.steps and short != self.h and count > 1:
            runs = [(k0, count - 1), (self.steps - 1, 1)]
        return [(start, n, short if start == self.steps - 1 else self.h, (0.0, self.h, self.offsets))
                for start, n in runs]  # fmt: skip

    def _advance(self, k0: int, count: int, substep=None):
        """Steps k0 … k0+count−1 (or one substep); returns (status, steps done)."""
        for start, n, h, clock in self._pieces(k0, count, substep):
            status, done = self._kernel(start, n, h, clock)
            if status != kernels.OK:
                return status, start - k0 + done
        return kernels.OK, count

    def _choose_kernel(self):
        stepper = self.stepper
        if isinstance(stepper, RungeKuttaStepper) and stepper.explicit:
            a, b, c = stepper.tableau.arrays()
            self.offsets = np.unique(np.concatenate([c, [1.0]]))
            stage_col = np.searchsorted(self.offsets, c).astype(np.int64)
            end_col = int(np.searchsorted(self.offsets, 1.0))
            work = kernels.rk_work(len(b), self.m.n, self.inputs.program, self.offsets, len(self.watch_element))

            def kernel(start, n, h, clock):
                status, done, self.count, self.n_ev = kernels.rk_chunk(
                    a, b, stage_col, end_col, self.q, self.v, self.energy, h, start, n,
                    self.inputs.program, clock, self.model, work,
                    *self._output_buffers(), *self._event_buffers(), self.q_limit,
                )  # fmt: skip
                return status, done

            if self.lanes is not None:
                kernel = self._affine_rk_kernel(a, b, stage_col, end_col, kernel)

        elif isinstance(stepper, SecondOrderStepper) and stepper.scheme == "symplectic-euler":
            self.offsets = np.array([0.0, 1.0])
            work = kernels.symplectic_work(self.m.n, self.inputs.program, self.offsets, len(self.watch_element))

            def kernel(start, n, h, clock):
                status, done, self.count, self.n_ev = kernels.symplectic_chunk(
                    self.q, self.v, self.energy, h, start, n, self.inputs.program, clock, self.model, work,
                    *self._output_buffers(), *self._event_buffers(), self.q_limit,
                )  # fmt: skip
                return status, done

        else:
            self.offsets = np.array([0.0, 1.0])
            coefficients = implicit_coefficients(stepper)
            if self.m.nonlinear.count and coefficients is not None:
                kernel = self._implicit_kernel(np.array(coefficients))
            else:
                kernel = self._affine_kernel()
        self._kernel = kernel

    def _affine_rk_kernel(self, a, b, stage_col, end_col, general):
        """An explicit Runge–Kutta stepper on a small linear system (or on lanes of
        variants): one affine map per step (:mod:`lumped.linear_rk`), made once per
        step length, in the generated kernels — or, when the run should not compile
        them (see ``specialise`` of :func:`simulate`), the element-loop kernel
        ``general``; either way with the free stretches joined per sample interval."""
        lanes, memo, work = self.lanes, self.prepared.maps, {}
        n, columns = lanes.n, len(self.offsets)

        def maps_at(h):
            key = (a.tobytes(), b.tobytes(), h)
            if key not in memo:
                memo[key] = rk_maps(lanes, a, b, stage_col, columns, end_col, h)
            return memo[key]

        maps = maps_at(self.h)
        may_compile = self.specialise is True or self.steps * lanes.count >= SPECIALISE_STEPS
        generated = may_compile or is_compiled(2 * n, maps.inputs, maps.rates, "one" if lanes.count == 1 else "lanes")
        # One lane's free stretches in a generated kernel too (when the others are);
        # else in free_chunk, which pays for one lane from two steps per sample.
        written_out = generated and (lanes.count > 1 or may_compile
                                     or is_compiled(2 * n, maps.inputs, maps.rates, "free_one"))  # fmt: skip
        free_ready = written_out or lanes.count > 1 or self.every >= 2

        def stepwise(start, count, h, clock):
            """Steps start … start+count−1 one by one in the generated kernel (their
            inputs W made first), or in ``general``."""
            if not generated:
                return general(start, count, h, clock)
            maps = maps_at(h)
            one, many, _ = chunk_kernels(2 * n, maps.inputs, maps.rates)
            slots, lane, inputs, scratch = work[h]
            input_rows(lanes.program, clock, start, count, h, slots, inputs)
            if lanes.count == 1:
                lane[: 2 * n * LANE_BLOCK : LANE_BLOCK] = np.concatenate([self.q, self.v])
                status, done, samples = one(maps.step, maps.sample, lane, self.energy, start, count, inputs, *scratch,
                                            *self._output_buffers(), self.q_limit)  # fmt: skip
                z = lane[: 2 * n * LANE_BLOCK : LANE_BLOCK]
                self.q, self.v = z[:n].copy(), z[n:].copy()
            else:
                put_rows(lane, np.concatenate([self.q.reshape(lanes.count, n).T, self.v.reshape(lanes.count, n).T]))
                start_lane, start_energy = lane.copy(), self.energy.copy()

                def chunk(steps):
                    return many(maps.step, maps.sample, lane, scratch[0], self.energy, start, steps, inputs,
                                *scratch[1:], *self._output_buffers(), self.q_limit)  # fmt: skip

                status, done, samples = chunk(count)
                if status != kernels.OK:  # every lane again, to the step where one diverged
                    lane[:], self.energy[:] = start_lane, start_energy
                    _, done, samples = chunk(done)
                z = unblocked(lane, 2 * n, lanes.count)
                self.q, self.v = z[:n].T.ravel(), z[n:].T.ravel()
            self.count = samples
            return status, done

        def free(first, intervals, h):
            """Sample intervals of free response from step ``first`` (:func:`free_chunk`)."""
            key = ("free", a.tobytes(), b.tobytes(), h, self.every)
            if key not in memo:
                memo[key] = free_maps(maps_at(h), self.every)
            joined = memo[key]
            z = np.ascontiguousarray(np.concatenate([self.q.reshape(lanes.count, n).T, self.v.reshape(lanes.count, n).T]))
            if lanes.count == 1 and written_out:
                maps = maps_at(h)
                free_one = chunk_kernels(2 * n, maps.inputs, maps.rates)[2]
                status, done, self.count = free_one(joined.phi, joined.energy, joined.acc, z, self.energy, first,
                                                    intervals, *self._output_buffers(), self.q_limit)  # fmt: skip
                self.q, self.v = z[:n, 0].copy(), z[n:, 0].copy()
                return status, done
            status, done, self.count = free_chunk(joined.phi, joined.energy, joined.first, joined.second, joined.rates,
                                                  joined.acc, z, free_work(joined), self.energy, first, intervals,
                                                  *self._output_buffers(), self.q_limit)  # fmt: skip
            self.q, self.v = z[:n].T.ravel(), z[n:].T.ravel()
            return status, done

        def kernel(start, count, h, clock):
            maps = maps_at(h)
            if generated:
                try:
                    chunk_kernels(2 * n, maps.inputs, maps.rates)
                except RuntimeError as exc:  # no place to write the generated kernel
                    raise RunError(str(exc)) from None
            if h not in work:
                slots = input_slots(maps.inputs, columns, len(lanes.program[5]), len(lanes.program[7]))
                if generated:
                    key = (maps.inputs, maps.rates, lanes.count, min(CHUNK_STEPS, self.steps), self.every)
                    arrays = self.prepared.spare.pop(key, None) or affine_rk_work(maps, lanes, *key[3:])
                    self._finish.append(lambda: _keep_spare(self.prepared.spare, key, arrays))
                else:  # no inputs to fill: input_rows only finds their window
                    arrays = None, np.zeros((len(maps.inputs), 0)), None
                work[h] = slots, *arrays
            slots, _, inputs, _ = work[h]
            # Stretches where no input acts, a whole sample interval at a time.
            window = input_rows(lanes.program, clock, start, count, h, slots, inputs, False)
            runs = free_runs(window, start, count, self.every, FREE_LEAST_STEPS) if h == self.h and free_ready else []
            if not runs:
                return stepwise(start, count, h, clock)
            k = start
            for first, intervals in [*runs, (start + count, 0)]:
                if first > k:
                    status, done = stepwise(k, first - k, h, clock)
                    if status != kernels.OK:
                        return status, k - start + done
                    k = first
                if intervals:
                    status, done = free(first, intervals, h)
                    k = first + done * self.every
                    if status != kernels.OK:  # the step-by-step kernel finds the step that diverged
                        rest = first + intervals * self.every - k
                        status, done = stepwise(k, rest, h, clock)
                        if status != kernels.OK:
                            return status, k - start + done
                        k += rest
            return kernels.OK, count

        return kernel

    def _implicit_kernel(self, coefficients):
        """Newmark, trapezoid, backward Euler or central difference on a nonlinear system: Newton's method
        in every step (:func:`lumped.kernels.implicit_chunk`), dense up to
        :data:`NEWTON_LIMIT` bodies."""
        if self.m.n > NEWTON_LIMIT:
            raise RunError(
                f"{self.stepper.id} on a nonlinear system solves a dense Newton system every step, "
                f"limited to {NEWTON_LIMIT} bodies; this system has {self.m.n}; use an explicit stepper (rk4)"
            )
        work = kernels.implicit_work(self.m.n, self.inputs.program, self.offsets, len(self.watch_element))
        # Acceleration scale of the force sums (m/s²): the largest static load on a
        # body over its mass, or gravity; it sets Newton's rounding floor.
        table, n = self.table, self.m.n
        load = np.zeros(n)
        for ends in (table.ea, table.eb):
            on_body = ends < n
            np.add.at(load, ends[on_body], np.abs(table.fs[on_body]))
        scale = max(float(np.max(load / self.m.mass)), abs(self.m.gravity), 1e-6)

        def kernel(start, n, h, clock):
            status, done, self.count, self.n_ev = kernels.implicit_chunk(
                coefficients, self.q, self.v, self.energy, h, start, n, self.inputs.program, clock,
                self.model, work, *self._output_buffers(), *self._event_buffers(), self.q_limit,
                NEWTON_ITERATIONS, scale,
            )  # fmt: skip
            return status, done

        return kernel

    def _output_buffers(self):
        return (self.every, self.out_q, self.out_v, self.out_a, self.out_e, self.out_step, self.count)

    def _event_buffers(self):
        return (self.watch_element, self.watch_kind, self.watch_prev, self.ev_step, self.ev_frac,
                self.ev_watch, self.ev_value, self.n_ev)  # fmt: skip

    def _affine_kernel(self):
        if self.m.nonlinear.count:
            names = ", ".join(self.m.element_ids[i] for i in _nonlinear_indices(self.m))
            raise RunError(
                f"{self.stepper.id} runs linear systems only; this system has nonlinear "
                f"elements ({names}); use newmark, trapezoid, backward-euler or central-difference (Newton in every step), "
                "an explicit Runge–Kutta stepper (rk4, rk38, rk3, heun, euler) or symplectic-euler"
            )
        exact = isinstance(self.stepper, ExactStepper)
        if exact and self.m.n > DENSE_LIMIT:
            raise RunError(
                f"{self.stepper.id} builds a dense one-step matrix, limited to {DENSE_LIMIT} bodies; "
                f"this system has {self.m.n}; use an explicit stepper (rk4) or an implicit one for larger systems"
            )
        if not exact and self.m.n > DENSE_MAP_LIMIT:
            return self._sparse_kernel()
        cache: dict[float, tuple] = {}
        work = kernels.affine_work(2 * self.m.n, self.m.n, self.inputs.program, self.offsets)

        def kernel(start, n, h, clock):
            if h not in cache:
                cache[h] = affine_maps(self.m, self.stepper, h)
            G, H0, H1 = cache[h]
            z = np.concatenate([self.q, self.v])
            status, done, self.count, _ = kernels.affine_chunk(
                G, H0, H1, z, self.energy, h, start, n, self.inputs.program, clock,
                self.model, work, *self._output_buffers(), self.q_limit,
            )  # fmt: skip
            self.q, self.v = z[: self.m.n].copy(), z[self.m.n :].copy()
            return status, done

        return kernel

    def _sparse_kernel(self):
        """An implicit stepper on a linear system above DENSE_MAP_LIMIT bodies: its
        update applied step by step with sparse factorisations (made once per step
        length), in Python; the samples, energy rates (trapezoid rule) and
        divergence check as in :func:`lumped.kernels.affine_chunk`."""
        cache: dict[float, tuple] = {}
        acc, rates, old = np.zeros(self.m.n), np.zeros(3), np.zeros(3)
        n_bodies = self.m.n

        def inputs_at(time, before=0.0):
            """(u, u', u'', F) at ``time`` and the same as one vector w."""
            parts = self.inputs.at(np.array(time), before)
            return parts, np.concatenate(parts)

        def kernel(start, n, h, clock):
            if h not in cache:
                cache[h] = sparse_update(self.m, self.stepper, h)
            step = cache[h]
            base, grid, _ = clock
            parts, w0 = inputs_at(base + start * grid)
            z = np.concatenate([self.q, self.v])
            self._accelerations(self.q, self.v, *parts, acc, old)
            for j in range(n):
                t0 = base + (start + j) * grid
                parts, w1 = inputs_at(t0 + h, LEFT_LIMIT * h)
                z = step(z, w0, w1)
                self.q, self.v = z[:n_bodies], z[n_bodies:]
                self._accelerations(self.q, self.v, *parts, acc, rates)
                self.energy += 0.5 * h * (old + rates)
                old[:] = rates
                if not (np.max(np.abs(self.q)) <= self.q_limit):
                    return kernels.DIVERGED, j + 1
                if (start + j + 1) % self.every == 0 and self.count < len(self.out_step):
                    i = self.count
                    self.out_q[i], self.out_v[i], self.out_a[i], self.out_e[i] = self.q, self.v, acc, self.energy
                    self.out_step[i] = start + j + 1
                    self.count += 1
                w0 = inputs_at(t0 + h)[1]
            return kernels.OK, n

        return kernel

    def _split_step(self, k, t_jump, s, size):
        """Step k → k+1 in two substeps around a jump at ``t_jump``."""
        t_start = k * self.h
        t_end = self._time(k + 1)
        every, self.every = self.every, 1 << 62  # no samples at the inner point
        status = (kernels.OK, 0)
        if t_jump > t_start:
            status = self._substep(k, t_start, t_jump - t_start)
        self.every = every
        if status[0] != kernels.OK:
            return status
        self._apply_jump(s, size, t_jump)
        return self._substep(k, t_jump, t_end - t_jump)

    def _substep(self, k: int, start: float, length: float):
        """One part of a split step; events found in it are dated within it."""
        first = self.n_ev
        status = self._advance(k, 1, (start, length))
        self.substep_events.append((first, self.n_ev, start, length))
        return status

    def _apply_jump(self, s: int, size: float, time: float):
        """A support jumps by ``size``: dampers to it give the bodies an impulse,
        Δv = −M⁻¹ C_s e_s · size; the change of energy is booked as support work.

        Signals are right-continuous, so a sample at the jump time shows the state
        just after it; contact changes the jump causes are events at that time.
        """
        if self.m.M_s[:, [s]].nnz:
            raise RunError(
                f"support {self.m.support_ids[s]!r} jumps at t = {time:g} s through an inerter, "
                "which would need an infinite force; give it a bump or a table with a finite rise"
            )
        before = self._energy_now(time)
        impulse = -(self.m.C_s[:, [s]].toarray().ravel()) * size
        self.v = self.v + mass_solver(self.m)(impulse)
        self.energy[1] += self._energy_now(time, shift=(s, size)) - before
        self.events.append(Event(time, self.m.support_ids[s], "support-jump"))
        if len(self.watch_element):
            u, *_ = self.inputs.at(np.array(time))
            values = np.zeros_like(self.watch_prev)
            kernels._contact_values(self.q, np.reshape(u, (1, -1)), 0, self.m.n,
                                    self.watch_element, self.watch_kind, self.table.args(), values)  # fmt: skip
            for w in np.flatnonzero((values > 0) != (self.watch_prev > 0)):
                self.events.append(Event(time, self.m.element_ids[self.watch_element[w]],
                                         self._event_kind(w, values[w])))  # fmt: skip
            self.watch_prev[:] = values
        if self.count and abs(self._time(int(self.out_step[self.count - 1])) - time) <= LEFT_LIMIT * self.h:
            self.count -= 1
            self._store_current(int(self.out_step[self.count]))

    def _event_kind(self, w: int, value: float) -> str:
        positive = value > 0
        if self.watch_kind[w] == 0:
            lifted = positive if self.watch_sign[w] > 0 else not positive
            return "lift-off" if lifted else "landing"
        return "stop-contact" if positive else "stop-release"

    def _energy_now(self, time: float, shift=None) -> float:
        """Kinetic plus stored energy with the supports where they were just before
        ``time`` (moved by ``shift`` = (support, size) when given), J."""
        u, ud, udd, _ = self.inputs.at(np.array(time), before=LEFT_LIMIT * self.h)
        u = np.array(u, dtype=float)
        if shift is not None:
            u[shift[0]] += shift[1]
        kinetic = 0.5 * float(self.v @ (self.m.M @ self.v))
        deflection = np.zeros(len(self.m.element_ids))
        force = np.zeros_like(deflection)
        energy = np.zeros_like(deflection)
        kernels.element_state(self.q, self.v, np.zeros(self.m.n), u, ud, udd, *self.table.args(),
                              deflection, force, energy)  # fmt: skip
        return kinetic + float(energy[self.table.kind == kernels.SPRING].sum())

    def _divergence_message(self, k: int, verdict: StepCheck | None) -> str:
        body = self.m.body_ids[int(np.nanargmax(np.where(np.isfinite(self.q), np.abs(self.q), np.inf)))]
        text = f"run diverged at t = {self._time(k):.6g} s (step {k:,}): body {body!r} grew without bound"
        if verdict is not None and verdict.max_stable_dt is not None and math.isfinite(verdict.max_stable_dt):
            mode = verdict.modes[verdict.limiting_mode]
            if self.h > verdict.max_stable_dt:
                text += (
                    f"; dt = {self.h:.6g} s breaks the {self.stepper.id} stability limit "
                    f"{verdict.max_stable_dt:.6g} s of the {mode.natural_frequency_hz:.5g} Hz mode"
                )
            else:
                text += (
                    f"; dt is within the linear stability limit {verdict.max_stable_dt:.6g} s, so a "
                    "nonlinear element (end stop, one-sided spring) stiffened the system beyond it"
                )
        elif verdict is not None and verdict.max_stable_dt is None:
            text += f"; no positive step is stable with {self.stepper.id} on this system"
        return text

    # -- results

    def _result(self, status, message, k, verdict) -> RunResult:
        count = self.count
        steps = self.out_step[:count]
        time = np.where(steps >= self.steps, self.T, steps * self.h)
        q, v, a = (_trimmed(x[:count], x) for x in (self.out_q, self.out_v, self.out_a))
        u, ud, udd, F = self.inputs.at(time)
        order = self.prepared.element_order
        table = self.table if order is None else self.table.taken(order)
        element_ids, element_kinds = self.m.element_ids, self.m.element_kinds
        if order is not None:
            element_ids = tuple(element_ids[e] for e in order)
            element_kinds = tuple(element_kinds[e] for e in order)
        events = self._events()
        return RunResult(
            system_name=self.system.name,
            stepper=self.stepper.id,
            dt=self.h,
            duration=self.T,
            time=time,
            body_ids=self.m.body_ids,
            element_ids=element_ids,
            element_kinds=element_kinds,
            support_ids=self.m.support_ids,
            force_ids=self.m.force_ids,
            displacement=q,
            velocity=v,
            acceleration=a,
            support_displacement=u,
            support_velocity=ud,
            force_input=F * self.inputs.scales,
            dissipated=self.out_e[:count, 0].copy(),
            support_work=self.out_e[:count, 1].copy(),
            force_work=self.out_e[:count, 2].copy(),
            element_series=_ElementSeries(q, v, a, u, ud, udd, table, self.m.mass),
            events=events,
            status=status,
            message=message,
            steps=k,
            check=verdict,
        )

    def _events(self) -> list[Event]:
        out = list(self.events)
        count = min(self.n_ev, self.ev_capacity)
        for j in range(count):
            w = int(self.ev_watch[j])
            element = self.m.element_ids[int(self.watch_element[w])]
            step = int(self.ev_step[j])
            t0, t1 = (step - 1) * self.h, self._time(step)
            for first, end, start, length in self.substep_events:
                if first <= j < end:
                    t0, t1 = start, start + length
            time = t0 + float(self.ev_frac[j]) * (t1 - t0)
            out.append(Event(time, element, self._event_kind(w, self.ev_value[j])))
        if self.n_ev > self.ev_capacity:
            out.append(Event(math.nan, "", f"{self.n_ev - self.ev_capacity} more events not kept"))
        return sorted(out, key=lambda e: (e.time, e.element))


@dataclass(frozen=True)
class _ElementSeries:
    """A run's element channels, worked out from its samples (SI) when called:
    (deflection, force, stored, kinetic). A plain object of arrays, so that a run
    pickles (a batch handed to another process) whether or not they were read."""

    q: np.ndarray
    v: np.ndarray
    a: np.ndarray
    u: np.ndarray
    ud: np.ndarray
    udd: np.ndarray
    table: _Elements
    mass: np.ndarray

    def __call__(self) -> tuple[np.ndarray, ...]:
        count, ne = len(self.q), len(self.table.ea)
        with _plain_pages():
            deflection, force = np.empty((count, ne)), np.empty((count, ne))
            stored, inerter_energy = np.empty(count), np.empty(count)
            ends = (np.ascontiguousarray(x) for x in (self.q, self.v, self.a, self.u, self.ud, self.udd))
            kernels.element_series(*ends, *self.table.args(), deflection, force, stored, inerter_energy, np.empty(ne))
        return deflection, force, stored, 0.5 * ((self.v * self.v) @ self.mass) + inerter_energy


def _keep_spare(spare: dict, key: tuple, arrays: tuple) -> None:
    """Keep a finished run's work arrays for the next run of the same shape (a few
    shapes at most: a system run at many settings keeps only its latest)."""
    if key not in spare and len(spare) >= SPARE_SHAPES:
        spare.pop(next(iter(spare)))
    spare.setdefault(key, arrays)


def _trimmed(samples: np.ndarray, buffer: np.ndarray) -> np.ndarray:
    """The samples kept: a view of the run's buffer when it is (nearly) full, else a
    copy, so that a run stopped early does not hold its whole buffer."""
    return samples if 2 * len(samples) >= len(buffer) else samples.copy()


def _nonlinear_indices(m: Matrices) -> list[int]:
    nl = m.nonlinear
    return sorted(set(nl.end_stop_index) | set(nl.one_sided_index) | set(nl.asymmetric_index) | set(nl.curve_index))
