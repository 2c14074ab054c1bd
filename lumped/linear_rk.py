"""Explicit Runge–Kutta steps of small linear systems as one affine map per step, for
one system or for many variants stepped side by side ("lanes").

On a linear system z' = A z + B w(t), z = (q, v), an explicit Runge–Kutta step is
exactly an affine map of the step's start state and the inputs at its distinct stage
times: z₁ = P x with x = (z, w(t + c₁h), …). The energy rates of the element loop
(dissipation, work by supports and by forces) are quadratic forms of a state and its
inputs, so the energy the stepping kernel integrates with the tableau's weights,
h Σⱼ bⱼ r(Yⱼ, wⱼ), is a quadratic form of x as well: E = xᵀ Q x. Both come out equal
to the stage-by-stage kernel up to rounding; what changes is the cost. A step of the
2-body corner costs one small matrix product here instead of four passes of the
element loop.

A, B and the rate forms are read off the engine's own element loop
(:func:`lumped.kernels.body_accelerations`) by probing it with unit vectors, so the
physics stays written once; a probe at a random point checks that the system is
linear before this path is taken. For one system the kernel steps a chunk first,
keeping each step's start, then takes every step's energy xᵀQx in a loop whose
steps are independent (the compiler vectorises it); for many lanes it accumulates
the outer products of x and turns them into energy only at output samples.

Lanes: variants laid side by side (:mod:`lumped.variants`) form a block-diagonal
system whose blocks share their structure and the inputs. Each block is a lane
with maps of its own; the inputs are evaluated once per step for all lanes, and the
lanes of a block of :data:`LANE_BLOCK` are stepped together through a chunk of
steps while their maps stay in the first-level cache. Free stretches (no input
acting) go one sample interval at a time for every lane (:func:`free_chunk`), so
that the samples are written row after row.
"""

from __future__ import annotations

import functools
import hashlib
import importlib.util
import math
import os
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numba import njit

from lumped.float_mode import flush_subnormals, restore_float_mode
from lumped.kernels import body_accelerations, stage_time
from lumped.signal_kernels import HOT, force_value, signal_span, support_motion

__all__ = ["Lanes", "lanes_of", "RKMaps", "rk_maps", "FreeMaps", "free_maps", "free_runs", "free_chunk", "free_work", "input_slots", "input_rows", "chunk_kernels", "is_compiled", "SPECIALISE_STEPS", "AFFINE_RK_LIMIT", "LANE_BLOCK", "FREE_LEAST_STEPS"]

#: Bodies per lane up to which explicit Runge–Kutta runs of linear systems take the
#: affine map (its cost grows as the square of the state; the element loop's as
#: the number of elements).
AFFINE_RK_LIMIT = 4
#: Lanes stepped together through a chunk.
LANE_BLOCK = 16
#: Lane-steps from which a run compiles its generated kernel when it is not in the
#: on-disk cache yet (the compile takes some 5 s for one lane, 15 s for many; the
#: kernel saves some 0.1 µs per lane-step).
SPECIALISE_STEPS = 10**8
#: Steps of free response (no input acting) from which a run joins them into one map
#: per sample interval (:func:`free_maps`) instead of stepping them one by one.
FREE_LEAST_STEPS = 64
#: The chunk kernel's sums may be evaluated in any order (and with fused
#: multiply-adds); results differ from the element-loop kernel's by rounding only.
REORDERED = dict(HOT, fastmath={"reassoc", "contract"})


@dataclass(frozen=True)
class Lanes:
    """A linear system as ``count`` independent copies (lanes) of one structure with
    ``n`` bodies each, and the first-order form of every lane read off the element
    loop: ``A`` (count, 2n, 2n), ``B`` (count, 2n, nw) on w = [u, u', u'', F] (the
    lane's own force items), ``forms`` (count, 3, d, d) with d = 2n + nw: the energy
    rates (dissipation, supports' work, forces' work; W) as yᵀ S y of y = (q, v, w).
    ``program`` is the input program of one lane."""

    count: int
    n: int
    A: np.ndarray
    B: np.ndarray
    forms: np.ndarray
    program: tuple


def lanes_of(model: tuple, program: tuple, n_bodies: int, count: int) -> Lanes | None:
    """The lanes of a system whose bodies are ``count`` consecutive groups of equal
    size (variant-major, as :mod:`lumped.variants` lays them out; ``count`` = 1 for a
    single system), from its kernel ``model`` and input ``program``; None when the
    system is not linear, has inerters or a coupled mass matrix, has lanes of more than
    :data:`AFFINE_RK_LIMIT` bodies, or its groups do not share one structure."""
    links, nonlinear, inerters, table, m_ptr, m_col, m_val, fbody, fscale = model
    if count < 1 or n_bodies % count or len(nonlinear) or len(inerters) or m_ptr[n_bodies] != n_bodies:
        return None
    n = n_bodies // count
    if n > AFFINE_RK_LIMIT:
        return None
    la, lb, lk, lc = links
    total = len(la)
    if total % count or len(fbody) % count or np.any((la >= n_bodies) & (lb >= n_bodies)):
        return None
    lane = np.where(la < n_bodies, la, lb) // n

    def local(node):
        return np.where(node < n_bodies, node % n, node - n_bodies + n)

    order = np.lexsort((local(lb), local(la), lane))
    per = total // count
    if np.any(np.bincount(lane, minlength=count) != per):
        return None
    la_l, lb_l = (local(x[order]).reshape(count, per) for x in (la, lb))
    forces = len(fbody) // count
    f_lane, f_local = fbody.reshape(count, forces) // n, fbody.reshape(count, forces) % n
    force_signal = program[7].reshape(count, forces)
    if (np.any(la_l != la_l[0]) or np.any(lb_l != lb_l[0]) or np.any(f_lane != np.arange(count)[:, None])
            or np.any(f_local != f_local[0]) or np.any(force_signal != force_signal[0])):  # fmt: skip
        return None
    lane_program = (*program[:7], force_signal[0].copy())
    ns = len(program[5])
    d = 2 * n + 3 * ns + forces
    dynamics = np.zeros((count, n, d))
    forms = np.zeros((count, 3, d, d))
    values = (lk[order].reshape(count, per), lc[order].reshape(count, per), m_val.reshape(count, n),
              fscale.reshape(count, forces))  # fmt: skip
    _probe(la_l[0].copy(), lb_l[0].copy(), *values, f_local[0].copy(), ns, table, dynamics, forms)
    if not _is_linear(la_l[0].copy(), lb_l[0].copy(), values, f_local[0].copy(), ns, table, dynamics, forms):
        return None
    nz = 2 * n
    A = np.zeros((count, nz, nz))
    A[:, :n, n:] = np.eye(n)
    A[:, n:, :] = dynamics[:, :, :nz]
    B = np.zeros((count, nz, d - nz))
    B[:, n:, :] = dynamics[:, :, nz:]
    return Lanes(count, n, A, B, forms, lane_program)


@njit(cache=True, inline="always", error_model="numpy")
def _evaluate(y, n, ns, la, lb, lk, lc, m_inv, fbody, fscale, table, U, Ud, Udd, FF, acc, rates, scratch, empty,
              pointers):  # fmt: skip
    """Body accelerations and energy rates of one lane at y = (q, v, u, u', u'', F)
    (``empty``: no indices; ``pointers``: 0 … n, the diagonal mass's row pointers)."""
    for s in range(ns):
        U[0, s] = y[2 * n + s]
        Ud[0, s] = y[2 * n + ns + s]
        Udd[0, s] = y[2 * n + 2 * ns + s]
    for f in range(fbody.shape[0]):
        FF[0, f] = y[2 * n + 3 * ns + f]
    model = ((la, lb, lk, lc), empty, empty, table, pointers, pointers[:n], m_inv, fbody, fscale, scratch)
    body_accelerations(y[:n], y[n : 2 * n], U, Ud, Udd, FF, 0, model, acc, rates)


@njit(cache=True, error_model="numpy")
def _probe(la, lb, lk, lc, m_inv, fscale, fbody, ns, table, dynamics, forms):
    """Per lane: the accelerations' columns (``dynamics``, n × d) at unit vectors of
    y = (q, v, w), and the rate forms by polarisation, S_ab = (r(e_a + e_b) − r(e_a)
    − r(e_b)) / 2."""
    count, n = m_inv.shape
    d = dynamics.shape[2]
    nf = fbody.shape[0]
    y = np.zeros(d)
    U, Ud, Udd, FF = np.zeros((1, ns)), np.zeros((1, ns)), np.zeros((1, ns)), np.zeros((1, nf))
    acc, rates, scratch = np.zeros(n), np.zeros(3), np.zeros(n)
    empty, pointers = np.zeros(0, dtype=np.int64), np.arange(n + 1)
    single = np.zeros((d, 3))
    for i in range(count):
        for a in range(d):
            y[a] = 1.0
            _evaluate(y, n, ns, la, lb, lk[i], lc[i], m_inv[i], fbody, fscale[i], table, U, Ud, Udd, FF,
                      acc, rates, scratch, empty, pointers)  # fmt: skip
            y[a] = 0.0
            dynamics[i, :, a] = acc
            single[a] = rates
            for p in range(3):
                forms[i, p, a, a] = rates[p]
        for a in range(d):
            for b in range(a + 1, d):
                y[a] = 1.0
                y[b] = 1.0
                _evaluate(y, n, ns, la, lb, lk[i], lc[i], m_inv[i], fbody, fscale[i], table, U, Ud, Udd, FF,
                          acc, rates, scratch, empty, pointers)  # fmt: skip
                y[a] = 0.0
                y[b] = 0.0
                for p in range(3):
                    forms[i, p, a, b] = forms[i, p, b, a] = 0.5 * (rates[p] - single[a, p] - single[b, p])


def _is_linear(la, lb, values, fbody, ns, table, dynamics, forms) -> bool:
    """True when the probed maps reproduce the element loop at a random point of every
    lane (accelerations linear, rates quadratic, to 10⁻⁹ of their size)."""
    lk, lc, m_inv, fscale = values
    count, n = m_inv.shape
    y = np.random.default_rng(0).standard_normal((count, dynamics.shape[2]))
    acc, rates = np.zeros((count, n)), np.zeros((count, 3))
    _evaluate_lanes(y, n, ns, la, lb, lk, lc, m_inv, fbody, fscale, table, acc, rates)
    linear = np.einsum("ira,ia->ir", dynamics, y)
    quadratic = np.einsum("ia,ipab,ib->ip", y, forms, y)
    scale_a = np.abs(np.einsum("ira,ia->ira", dynamics, y)).sum(axis=2) + 1e-300
    scale_r = np.abs(np.einsum("ia,ipab,ib->ipab", y, forms, y)).sum(axis=(2, 3)) + 1e-300
    return bool(np.all(np.abs(linear - acc) <= 1e-9 * scale_a) and np.all(np.abs(quadratic - rates) <= 1e-9 * scale_r))


@njit(cache=True, error_model="numpy")
def _evaluate_lanes(y, n, ns, la, lb, lk, lc, m_inv, fbody, fscale, table, acc, rates):
    nf = fbody.shape[0]
    U, Ud, Udd, FF = np.zeros((1, ns)), np.zeros((1, ns)), np.zeros((1, ns)), np.zeros((1, nf))
    scratch = np.zeros(n)
    empty, pointers = np.zeros(0, dtype=np.int64), np.arange(n + 1)
    for i in range(y.shape[0]):
        _evaluate(y[i], n, ns, la, lb, lk[i], lc[i], m_inv[i], fbody, fscale[i], table, U, Ud, Udd, FF,
                  acc[i], rates[i], scratch, empty, pointers)  # fmt: skip


@dataclass(frozen=True)
class RKMaps:
    """One tableau's step on every lane, as rows of two arrays laid out in blocks of
    :data:`LANE_BLOCK` lanes (flat: block, row, lane in block; lanes padded with zeros
    to whole blocks), so that the generated kernel reads them at constant offsets and
    the compiler vectorises over the lanes of a block.

    With x = (z, w) — z the lane's state (2n) and w the step's inputs that reach it
    (``inputs``: (stage-time row, kind, item) each, kind 0 u, 1 u', 2 u'', 3 F):

    - ``step`` rows: P_z (2n × 2n) then P_w (2n × kept), z₁ = P_z z + P_w w;
    - ``sample`` rows: A_z (n × 2n) and A_w (n × kept), the acceleration at the step's
      end A_z z₁ + A_w w; then per rate p (dissipation, supports, forces) the energy
      increment's coefficients of z_a z_b (a ≤ b), z_a w_b and w_a w_b (a ≤ b).
    """

    step: np.ndarray
    sample: np.ndarray
    inputs: tuple[tuple[int, int, int], ...]
    rates: tuple[int, ...]  # the rates some lane has
    #: The step where no input acts, per lane: z₁ = P_z z (count, 2n, 2n), the energy
    #: increment zᵀ Q_p z of each rate (count, 3, 2n, 2n) and the acceleration A_z z
    #: (count, n, 2n); :func:`free_maps` joins them over a sample interval.
    free_step: np.ndarray
    free_energy: np.ndarray
    free_acc: np.ndarray


def rk_maps(lanes: Lanes, a: np.ndarray, b: np.ndarray, stage_col: np.ndarray, columns: int, end_col: int,
            h: float) -> RKMaps:  # fmt: skip
    """The maps of the explicit tableau (a, b) at step ``h`` (s); stage j reads the
    inputs of row ``stage_col[j]`` of the step's ``columns`` stage times, the step's
    end those of row ``end_col``. Input kinds that reach no lane (u'' without
    inerters, say) are left out."""
    count, nz, nw = lanes.B.shape
    nx = nz + columns * nw

    def last(x):
        """The lane index moved innermost."""
        return np.ascontiguousarray(np.moveaxis(x, 0, -1))

    A, B, S = last(lanes.A), last(lanes.B), last(lanes.forms)
    rated = np.flatnonzero(np.any(S != 0, axis=(1, 2, 3)))  # the rates some lane has
    step, energy = np.zeros((nz, nx, count)), np.zeros((3, nx, nx, count))
    work = np.zeros((len(b), nz, nx, count)), np.zeros((nz + nw, nx, count)), np.zeros((nz + nw, nx, count))
    _tableau_maps(A, B, S, rated, a, b, stage_col.astype(np.int64), h, step, energy, *work)
    n = nz // 2
    acc_w = np.zeros((n, nx, count))
    acc_w[:, nz + end_col * nw : nz + (end_col + 1) * nw] = B[n:]
    ns, nf = len(lanes.program[5]), len(lanes.program[7])
    kinds = [(0, s) for s in range(ns)] + [(1, s) for s in range(ns)] + [(2, s) for s in range(ns)] + [(3, f) for f in range(nf)]
    reach = (np.any(step[:, nz:] != 0, axis=(0, 2)) | np.any(energy[:, nz:] != 0, axis=(0, 2, 3))
             | np.any(acc_w[:, nz:] != 0, axis=(0, 2))).reshape(columns, nw).any(axis=0)  # fmt: skip
    used = [kind for kind in range(4) if any(reach[k] for k, (kk, _) in enumerate(kinds) if kk == kind)]
    keep = [(c, k) for c in range(columns) for k, (kind, _) in enumerate(kinds) if kind in used]
    kept = nz + np.array([c * nw + k for c, k in keep], dtype=np.int64)
    zi, zj = np.triu_indices(nz)
    wi, wj = np.triu_indices(len(keep))

    def rows(x):
        """(…, lanes) flattened to rows."""
        return x.reshape(-1, count)

    def doubled(i, j):
        return np.where(i == j, 1.0, 2.0)[:, None]

    def first(x):
        """The lane index moved outermost."""
        return np.ascontiguousarray(np.moveaxis(x, -1, 0))

    return RKMaps(
        step=blocked(rows(step[:, :nz]), rows(step[:, kept])),
        sample=blocked(rows(A[n:]), rows(acc_w[:, kept]), rows(energy[:, zi, zj] * doubled(zi, zj)),
                       rows(2.0 * energy[:, :nz][:, :, kept]), rows(energy[:, kept[wi], kept[wj]] * doubled(wi, wj))),
        inputs=tuple((c, *kinds[k]) for c, k in keep),
        rates=tuple(int(p) for p in np.flatnonzero(np.any(energy != 0, axis=(1, 2, 3)))),
        free_step=first(step[:, :nz]),
        free_energy=first(energy[:, :nz, :nz]),
        free_acc=lanes.A[:, n:, :].copy(),
    )


@njit(cache=True, error_model="numpy")
def _tableau_maps(A, B, S, rated, a, b, stage_col, h, step, energy, slopes, full, product):
    """The explicit tableau (a, b)'s step on every lane of x' = A x + B w, as maps of
    x = (z, w of every stage time): each stage Y_j = z + h Σᵢ a_ji K_i with the slope
    K_j = A Y_j + B w(row ``stage_col[j]``), the step z₁ = z + h Σⱼ b_j K_j into
    ``step`` (nz × nx), and the energy h Σⱼ b_j (Y_j, w_j)ᵀ S_p (Y_j, w_j) of each
    rate p of ``rated`` into ``energy`` (3 × nx × nx). The lane index is innermost in
    every array (A: nz × nz × lanes, B: nz × nw × lanes, S: 3 × d × d × lanes), so
    that the lane loops vectorise; ``slopes``, ``full`` and ``product`` are work space."""
    nz, nw, count = B.shape
    nx = step.shape[1]
    d = nz + nw
    for r in range(nz):
        for lane in range(count):
            step[r, r, lane] = 1.0
    reach = nz  # the columns a stage's maps may have: z and the inputs read so far
    for j in range(b.shape[0]):
        column = nz + stage_col[j] * nw
        reach = max(reach, column + nw)
        # The stage as a map of x, kept in full's first rows; its inputs below them.
        for r in range(d):
            for x in range(nx):
                for lane in range(count):
                    full[r, x, lane] = 1.0 if (r == x and r < nz) or (r >= nz and x == column + r - nz) else 0.0
        for i in range(j):
            if a[j, i] != 0.0:
                weight = h * a[j, i]
                for r in range(nz):
                    for x in range(nx):
                        for lane in range(count):
                            full[r, x, lane] += weight * slopes[i, r, x, lane]
        for r in range(nz):
            for x in range(nx):
                for lane in range(count):
                    slopes[j, r, x, lane] = 0.0
                for c in range(nz):
                    for lane in range(count):
                        slopes[j, r, x, lane] += A[r, c, lane] * full[c, x, lane]
            for k in range(nw):
                for lane in range(count):
                    slopes[j, r, column + k, lane] += B[r, k, lane]
        if b[j] == 0.0:
            continue
        weight = h * b[j]
        for r in range(nz):
            for x in range(nx):
                for lane in range(count):
                    step[r, x, lane] += weight * slopes[j, r, x, lane]
        for p in rated:
            for r in range(d):
                for x in range(reach):
                    for lane in range(count):
                        product[r, x, lane] = 0.0
                for c in range(d):
                    for x in range(reach):
                        for lane in range(count):
                            product[r, x, lane] += S[p, r, c, lane] * full[c, x, lane]
            for x in range(reach):  # the upper triangle (S is symmetric)
                for y in range(x, reach):
                    for r in range(d):
                        for lane in range(count):
                            energy[p, x, y, lane] += weight * full[r, x, lane] * product[r, y, lane]
    for p in rated:
        for x in range(nx):
            for y in range(x):
                for lane in range(count):
                    energy[p, x, y, lane] = energy[p, y, x, lane]


@dataclass(frozen=True)
class FreeMaps:
    """The steps of a sample interval of free response (no input acting) as one map
    (:func:`free_maps`), the lane index innermost: z after = ``phi`` z (2n, 2n, count); the energy of the interval of rate
    p, Σₜ ``energy[p, t]`` z_a z_b over the pairs (a, b) = (``first[t]``,
    ``second[t]``), a ≤ b (3, pairs, count; ``rates`` those not zero); the
    acceleration at its end ``acc`` z (n, 2n, count)."""

    phi: np.ndarray
    energy: np.ndarray
    first: np.ndarray
    second: np.ndarray
    rates: np.ndarray
    acc: np.ndarray


def free_maps(maps: RKMaps, every: int) -> FreeMaps:
    """The free response of ``every`` steps of ``maps`` joined (by repeated squaring):
    Φ = P_zᵉ and, for each rate, E = Σᵢ₌₀ᵉ⁻¹ (P_zⁱ)ᵀ Q P_zⁱ — the step-by-step
    kernel's states and energy up to rounding."""

    def join(first, second):
        """(Φ, E) of the steps of ``first`` followed by those of ``second``."""
        (pa, ea), (pb, eb) = first, second
        return pb @ pa, ea + np.swapaxes(pa, 1, 2)[:, None] @ eb @ pa[:, None]

    rated = np.flatnonzero(np.any(maps.free_energy != 0, axis=(0, 2, 3)))  # the others stay zero
    power, total, left = (maps.free_step, maps.free_energy[:, rated]), None, every
    with np.errstate(over="ignore", invalid="ignore"):  # an unstable step: the kernel reports it
        while left:
            if left & 1:
                total = power if total is None else join(total, power)
            left >>= 1
            if left:
                power = join(power, power)
    phi, energy = total
    count, nz = phi.shape[:2]
    first, second = np.triu_indices(nz)
    pairs = np.zeros((count, 3, len(first)))
    pairs[:, rated] = (energy + np.swapaxes(energy, 2, 3))[:, :, first, second] * np.where(first == second, 0.5, 1.0)
    rates = np.flatnonzero(np.any(pairs != 0, axis=(0, 2)))

    def innermost(x):
        return np.ascontiguousarray(np.moveaxis(x, 0, -1))

    return FreeMaps(innermost(phi), innermost(pairs), first.astype(np.int64),
                    second.astype(np.int64), rates.astype(np.int64), innermost(maps.free_acc))  # fmt: skip


def free_runs(window: tuple[int, int], k0: int, nsteps: int, every: int, least: int) -> list[tuple[int, int]]:
    """The stretches of steps k0 … k0+nsteps−1 outside the ``window`` of
    :func:`input_rows` (where no input acts), made of whole sample intervals (global
    steps i·every … (i+1)·every − 1) and at least ``least`` steps long: (first step,
    intervals) each."""
    first, end = window
    quiet = [(k0, k0 + nsteps)] if first >= end else [(k0, k0 + first), (k0 + end, k0 + nsteps)]
    runs = []
    for start, stop in quiet:
        start = -(-start // every) * every
        intervals = (stop - start) // every
        if intervals > 0 and intervals * every >= least:
            runs.append((start, intervals))
    return runs


@njit(**REORDERED)
def free_chunk(phi, form, first, second, rates, acc, z, work, energy, k0, intervals, every,
               out_q, out_v, out_a, out_e, out_step, n_out, q_limit):  # fmt: skip
    """``intervals`` sample intervals of free response from global step k0 (a sample
    step) for every lane: z (2n, count) ← Φ z (:class:`FreeMaps`), the energy
    gained, and a sample at each interval's end, as :func:`chunk_kernels` writes
    them. One interval at a time for all lanes, the lane index innermost (which the
    compiler vectorises), so that the samples are written row after row and the maps
    of some thousand lanes stay in the cache. An interval that ends with some lane
    beyond ``q_limit`` (or not a number) is not taken: the kernel returns (1,
    intervals before it, samples), z and ``energy`` as at its start. Returns (0,
    intervals, samples) else. ``work``: :func:`free_work`."""
    mode = flush_subnormals()
    nz, count = z.shape
    n = nz // 2
    nr, pairs = rates.shape[0], first.shape[0]
    spare, slope, gains = work
    capacity = out_q.shape[0]
    m = n_out
    for i in range(intervals):
        for r in range(nr):
            gained = 0.0
            for t in range(pairs):
                a, b = first[t], second[t]
                for lane in range(count):
                    gained += form[rates[r], t, lane] * z[a, lane] * z[b, lane]
            gains[r] = gained
        _lane_products(phi, z, spare)
        fine = True
        for a in range(n):
            for lane in range(count):
                fine &= abs(spare[a, lane]) <= q_limit
        if not fine:
            restore_float_mode(mode)
            return 1, i, m
        for a in range(nz):
            for lane in range(count):
                z[a, lane] = spare[a, lane]
        for r in range(nr):
            energy[rates[r]] += gains[r]
        if m < capacity:
            _lane_products(acc, z, slope)
            for lane in range(count):
                for r in range(n):
                    out_q[m, lane * n + r] = z[r, lane]
                    out_v[m, lane * n + r] = z[n + r, lane]
                    out_a[m, lane * n + r] = slope[r, lane]
            for p in range(3):
                out_e[m, p] = energy[p]
            out_step[m] = k0 + (i + 1) * every
            m += 1
    restore_float_mode(mode)
    return 0, intervals, m


@njit(inline="always", **REORDERED)
def _lane_products(matrix, z, out):
    """out[r] = Σ_b matrix[r, b] z[b] in every lane (the lane index innermost)."""
    count = z.shape[1]
    for r in range(out.shape[0]):
        for lane in range(count):
            out[r, lane] = 0.0
        for b in range(z.shape[0]):
            for lane in range(count):
                out[r, lane] += matrix[r, b, lane] * z[b, lane]


def free_work(maps: FreeMaps) -> tuple:
    """Work space of :func:`free_chunk` for ``maps``: the next states, the accelerations and the energy gains."""
    nz, count = maps.phi.shape[1:]
    return np.zeros((nz, count)), np.zeros((nz // 2, count)), np.zeros(3)


def blocked(*parts: np.ndarray) -> np.ndarray:
    """Rows (rows, lanes) — of one array or of several, one after another — as a flat
    (blocks, rows, :data:`LANE_BLOCK`) array, padded with zero lanes; written in one
    pass, each part straight into its place."""
    count = parts[0].shape[1]
    blocks, full = -(-count // LANE_BLOCK), count // LANE_BLOCK
    out = np.empty((blocks, sum(part.shape[0] for part in parts), LANE_BLOCK))
    if full < blocks:
        out[full] = 0.0
    row = 0
    for part in parts:
        rows = part.shape[0]
        out[:full, row : row + rows] = part[:, : full * LANE_BLOCK].reshape(rows, full, LANE_BLOCK).transpose(1, 0, 2)
        out[full:, row : row + rows, : count - full * LANE_BLOCK] = part[:, full * LANE_BLOCK :]
        row += rows
    return out.ravel()


def _grid(flat: np.ndarray, count: int) -> np.ndarray:
    """A :func:`blocked` array of ``count`` lanes as a (blocks, rows, LANE_BLOCK) view."""
    blocks = -(-count // LANE_BLOCK)
    return flat.reshape(blocks, flat.size // (blocks * LANE_BLOCK), LANE_BLOCK)


def unblocked(flat: np.ndarray, rows: int, count: int) -> np.ndarray:
    """The first ``rows`` rows of a :func:`blocked` array of ``count`` lanes, as (rows, lanes)."""
    return _grid(flat, count)[:, :rows, :].transpose(1, 0, 2).reshape(rows, -1)[:, :count]


def put_rows(flat: np.ndarray, rows: np.ndarray) -> None:
    """Overwrite the first rows of a :func:`blocked` array with ``rows`` (rows, lanes)."""
    grid = _grid(flat, rows.shape[1])
    grid[:, : rows.shape[0], :] = _grid(blocked(rows), rows.shape[1])


def input_slots(inputs: tuple[tuple[int, int, int], ...], columns: int, supports: int, forces: int) -> np.ndarray:
    """Where :func:`input_rows` writes each input: (stage-time rows × [u, u', u'' of
    every support, then every force item]) → row of W, −1 for inputs no lane reads."""
    slots = np.full((columns, 3 * supports + forces), -1, dtype=np.int64)
    for b, (row, kind, item) in enumerate(inputs):
        slots[row, kind * supports + item] = b
    return slots


@njit(**HOT)
def input_rows(program, clock, k0, nsteps, h, slots, W, fill=True):
    """The inputs that the maps read (:attr:`RKMaps.inputs`) of steps k0 … k0+nsteps−1
    at their stage times, as :func:`lumped.kernels._step_inputs` reads them: W[b, j]
    is input b of step k0 + j (``slots`` from :func:`input_slots`). One input at a time,
    in a tight loop over the steps; a support's signal is evaluated only over the
    steps its span (:func:`lumped.signal_kernels.signal_span`) may reach, with a step
    to spare on either side, and is zero elsewhere. Returns (first, end): every
    input is zero outside steps k0 + first … k0 + end − 1 (first ≥ end: everywhere);
    with ``fill`` False, only that (W is not written)."""
    kind, p, lo, hi, data, support_signal, support_delay, force_signal = program
    ns = support_signal.shape[0]
    base, grid, offsets = clock
    window_first, window_end = nsteps, 0
    for c in range(slots.shape[0]):
        for s in range(ns):
            bu, bd, ba = slots[c, s], slots[c, ns + s], slots[c, 2 * ns + s]
            g = support_signal[s]
            first, end = 0, 0
            if g >= 0 and grid > 0.0:
                on, off = signal_span(kind[g], p, g)
                start = base + offsets[c] * h - support_delay[s]  # step k reads its signal at start + k·grid
                first = min(max(int(math.floor((on - start) / grid)) - 1 - k0, 0), nsteps)
                end = nsteps if off == math.inf else min(max(int(math.ceil((off - start) / grid)) + 2 - k0, first), nsteps)
            elif g >= 0:
                end = nsteps
            if bu < 0 and bd < 0 and ba < 0:
                continue
            if first < end:
                window_first, window_end = min(window_first, first), max(window_end, end)
            if not fill:
                continue
            for b in (bu, bd, ba):
                if b >= 0:
                    W[b, :first] = 0.0
                    W[b, end:nsteps] = 0.0
            for j in range(first, end):
                u, ud, udd = support_motion(stage_time(clock, k0 + j, h, c), program, s)
                if bu >= 0:
                    W[bu, j] = u
                if bd >= 0:
                    W[bd, j] = ud
                if ba >= 0:
                    W[ba, j] = udd
        for f in range(force_signal.shape[0]):
            b = slots[c, 3 * ns + f]
            if b >= 0:
                window_first, window_end = 0, nsteps
                for j in range(nsteps if fill else 0):
                    W[b, j] = force_value(stage_time(clock, k0 + j, h, c), program, f)
    return window_first, window_end


def affine_rk_work(maps: RKMaps, lanes: Lanes, steps: int, every: int) -> tuple:
    """Work arrays of the chunk kernels, for chunks of up to ``steps`` steps with a
    sample every ``every`` steps: the :func:`blocked` lane state z, the inputs W of
    :func:`input_rows`, and the scratch of the kernel (one lane: the states at the
    steps' starts and the steps' energy increments; many lanes: the blocked sums of
    z_a z_b and z_a w_b over a chunk, the inputs' products at samples and at the
    chunk's end; see :func:`chunk_kernels`)."""
    nz, kept = 2 * lanes.n, len(maps.inputs)
    lane = blocked(np.zeros((nz, lanes.count)))
    inputs = np.zeros((kept, steps))
    if lanes.count == 1:
        return lane, inputs, (np.zeros((nz, steps + 1)), np.zeros((3, steps)))
    blocks = -(-lanes.count // LANE_BLOCK)
    pairs = kept * (kept + 1) // 2
    scratch = (np.zeros(blocks * (nz * (nz + 1) // 2 + nz * kept) * LANE_BLOCK), np.empty((steps // every + 1, pairs)),
               np.empty(pairs))  # fmt: skip
    return lane, inputs, scratch


def chunk_kernels(nz: int, inputs: tuple[tuple[int, int, int], ...], rates: tuple[int, ...]):
    """The compiled chunk kernels ``(one, lanes, free_one)`` for lanes of state size ``nz``
    reading ``inputs`` and integrating ``rates`` (see :class:`RKMaps`): generated
    Python with every sum written out at constant offsets, compiled by numba on first
    use and cached on disk (:func:`_generated_module`). Signatures::

        one(step, sample, lane, energy, k0, nsteps, W, H, inc,
            out_every, out_q, out_v, out_a, out_e, out_step, n_out, q_limit)
        lanes(step, sample, lane, sums, energy, k0, nsteps, W, snap, total,
              out_every, out_q, out_v, out_a, out_e, out_step, n_out, q_limit)
        free_one(phi, energy_form, acc, z, energy, k0, intervals,
                 out_every, out_q, out_v, out_a, out_e, out_step, n_out, q_limit)
            -> (status, steps or intervals done, samples written)

    Both advance the lanes (the :func:`blocked` state ``lane``) ``nsteps`` steps from
    global step k0, reading the inputs W of :func:`input_rows`. Samples are written
    after each step whose global index is a multiple of ``out_every``, lane i's bodies
    at columns i·n … i·n + n − 1; ``energy`` (3) gains the energy of every lane.

    ``one`` runs a single lane in three passes over the chunk: the steps, with the
    maps and the state in local variables, keeping each step's start state in ``H``
    (nz × steps + 1); each step's energy increment xᵀQx into ``inc`` (3 × steps),
    a loop whose steps are independent, so the compiler vectorises it; then the
    samples and the running energy. For many lanes, ``lanes`` takes the inputs'
    products once per step, then runs the chunk block by block (:data:`LANE_BLOCK`
    lanes, the lane index innermost, which the compiler vectorises), the sums in
    ``sums``. A lane beyond ``q_limit`` (or not a number) stops the run at that step:
    ``one`` stops there (the step is not sampled); ``lanes`` stops its block and limits
    the blocks after it, and the caller runs the chunk again from its start to the
    returned step count, so that every lane ends at the same step.

    ``free_one`` is :func:`free_chunk` for a single lane (z: 2n × 1; the maps of
    :func:`free_maps`) written out, the maps and the state in local variables: it
    stops before an interval that ends beyond ``q_limit``, z and ``energy`` at its start.
    """
    key = (nz, inputs, rates)
    if key not in _KERNELS:
        module = _generated_module(_kernel_source(nz, inputs, rates))
        _KERNELS[key] = module.one, module.lanes, module.free_one
    return _KERNELS[key]


def is_compiled(nz: int, inputs: tuple[tuple[int, int, int], ...], rates: tuple[int, ...], function: str) -> bool:
    """True when the generated kernel ``function`` ("one", "lanes" or "free_one") for this
    structure is in numba's on-disk cache already (a first run then costs no compile)."""
    if (nz, inputs, rates, function) in _COMPILED:
        return True
    name = _module_name(_kernel_source(nz, inputs, rates))
    try:
        directory = _cache_directory()
    except RuntimeError:
        return False
    if any((directory / "__pycache__").glob(f"{name}.{function}-*.nbi")):
        _COMPILED.add((nz, inputs, rates, function))
        return True
    return False


_COMPILED: set = set()


def _module_name(source: str) -> str:
    return "lumped_kernel_" + hashlib.sha256(source.encode()).hexdigest()[:16]


_KERNELS: dict = {}


@functools.lru_cache(maxsize=64)
def _kernel_source(nz: int, inputs, rates) -> str:
    n, kept = nz // 2, len(inputs)
    block = LANE_BLOCK
    pairs_z = [(a, b) for a in range(nz) for b in range(a, nz)]
    pairs_w = [(a, b) for a in range(kept) for b in range(a, kept)]
    # Rows of the maps (see RKMaps) and of the sums (z_a z_b, a ≤ b, then z_a w_b).
    pw_row = nz * nz
    step_rows = pw_row + nz * kept
    aw_row = n * nz
    zz_first = aw_row + n * kept  # then z_a z_b of each rate, z_a w_b of each, w_a w_b of each
    zw_first = zz_first + 3 * len(pairs_z)
    ww_first = zw_first + 3 * nz * kept

    def lines(items, indent):
        return "\n".join(" " * indent + item for item in items) if items else " " * indent + "pass"

    def total(terms):
        return " + ".join(terms) if terms else "0.0"

    def at(name, base, row):
        """Entry ``row`` of a many-lane array: rows of a block at constant offsets from
        lb (state), ub (sums), sb (step maps) or pb (sample maps)."""
        return f"{name}[{base} + {row * block} + i]"

    def first_lane(name):
        return lambda row: f"{name}[{row * block}]"

    def step_lines(coefficient, state, sum_of=None):
        """Step z and check it (adding the step's start (z, w) to the sums first when
        ``sum_of`` is given): ``coefficient``, ``state`` and ``sum_of`` name the step
        map's rows, z_r and the sums."""
        sums = [] if sum_of is None else (
            [f"{sum_of(t)} += z{a} * z{b}" for t, (a, b) in enumerate(pairs_z)]
            + [f"{sum_of(len(pairs_z) + a * kept + b)} += z{a} * w{b}" for a in range(nz) for b in range(kept)])  # fmt: skip
        return (
            sums
            + [f"y{r} = ({total([f'{coefficient(r * nz + a)} * z{a}' for a in range(nz)])}) + "
               f"({total([f'{coefficient(pw_row + r * kept + b)} * w{b}' for b in range(kept)])})" for r in range(nz)]
            + [f"{state(r)} = y{r}" for r in range(nz)]
            + [f"fine &= abs(y{r}) <= q_limit" for r in range(n)]
        )  # fmt: skip

    def sample_lines(coefficient, column):
        """Displacement, velocity and acceleration of the lane into sample m."""
        return (
            [f"out_q[m, {column}{r}] = z{r}" for r in range(n)]
            + [f"out_v[m, {column}{r}] = z{n + r}" for r in range(n)]
            + [f"out_a[m, {column}{r}] = ({total([f'{coefficient(r * nz + a)} * z{a}' for a in range(nz)])}) + "
               f"({total([f'{coefficient(aw_row + r * kept + b)} * w{b}' for b in range(kept)])})" for r in range(n)]
        )  # fmt: skip

    def energies(coefficient, sum_of, target, op="+="):
        """Each rate's energy, Σ coefficient × sum (z_a z_b and z_a w_b by ``sum_of``,
        w_a w_b as r…), added to (``op`` "=": put in) ``target(p)``."""
        out = []
        for p in rates:
            terms = ([f"{coefficient(zz_first + p * len(pairs_z) + t)} * {sum_of(t)}" for t in range(len(pairs_z))]
                     + [f"{coefficient(zw_first + p * nz * kept + c)} * {sum_of(len(pairs_z) + c)}"
                        for c in range(nz * kept)]
                     + [f"{coefficient(ww_first + p * len(pairs_w) + t)} * r{t}" for t in range(len(pairs_w))])  # fmt: skip
            out.append(f"{target(p)} {op} {total(terms)}")
        return out

    w_loads = [f"w{b} = W[{b}, j]" for b in range(kept)]
    products = [f"r{t} += w{a} * w{b}" for t, (a, b) in enumerate(pairs_w)]

    # One lane: maps and state in local variables (c…, z…); then each step's energy
    # from the products of its start (a… of z, r… of w), then the samples.
    def product(t):
        return f"a{nz + t}"

    setup = [f"c{r} = step[{r * block}]" for r in range(step_rows)] + [f"z{a} = lane[{a * block}]" for a in range(nz)]
    history = [f"H[{a}, j] = z{a}" for a in range(nz)]
    body = [*history, *w_loads, "fine = True", *step_lines(lambda r: f"c{r}", lambda r: f"z{r}")]
    store = [f"H[{a}, limit] = z{a}" for a in range(nz)] + [f"lane[{a * block}] = z{a}" for a in range(nz)]
    coefficients = {}

    def energy_coefficient(row):
        return coefficients.setdefault(row, f"g{len(coefficients)}")

    increments = energies(energy_coefficient, product, lambda p: f"inc[{p}, j]", op="=")
    step_energy = (
        [f"z{a} = H[{a}, j]" for a in range(nz)] + w_loads
        + [f"{product(t)} = z{a} * z{b}" for t, (a, b) in enumerate(pairs_z)]
        + [f"{product(len(pairs_z) + a * kept + b)} = z{a} * w{b}" for a in range(nz) for b in range(kept)]
        + [f"r{t} = w{a} * w{b}" for t, (a, b) in enumerate(pairs_w)] + increments
    )  # fmt: skip
    energy_setup = [f"{name} = sample[{row * block}]" for row, name in coefficients.items()]
    sample = ([f"z{a} = H[{a}, j + 1]" for a in range(nz)] + w_loads + sample_lines(first_lane("sample"), "")
              + [f"out_e[m, {p}] = e{p}" for p in range(3)])  # fmt: skip

    # Many lanes: a block's lanes in the innermost loop, the sums in ``sums``.
    def lane_sum(t):
        return at("sums", "ub", t)

    def lane_sample(row):
        return at("sample", "pb", row)

    lane_energies = energies(lane_sample, lane_sum, lambda p: f"e{p}") or ["pass"]
    lanes_body = [*w_loads, "fine = True", f"for i in range({block}):",
                  *("    " + x for x in [f"z{a} = {at('lane', 'lb', a)}" for a in range(nz)]
                    + step_lines(lambda r: at("step", "sb", r), lambda r: at("lane", "lb", r), lane_sum))]  # fmt: skip
    lanes_sample = (
        [f"r{t} = snap[m - n_out, {t}]" for t in range(len(pairs_w))] + ["e0 = 0.0", "e1 = 0.0", "e2 = 0.0"]
        + [f"for i in range({block}):  # padding lanes add zeros", *("    " + x for x in lane_energies)]
        + [f"for i in range(min({block}, count - blk * {block})):", f"    column = (blk * {block} + i) * {n}",
           *("    " + x for x in [f"z{a} = {at('lane', 'lb', a)}" for a in range(nz)]
             + sample_lines(lane_sample, "column + "))]
        + [f"out_e[m, {p}] += e{p}" for p in range(3)]
    )  # fmt: skip
    # One lane's free response (:class:`FreeMaps`): maps f… (Φ), h… (energy forms)
    # and s… (acceleration) and the state in local variables.
    free_setup = (
        [f"f{a * nz + b} = phi[{a}, {b}, 0]" for a in range(nz) for b in range(nz)]
        + [f"h{p}_{t} = form[{p}, {t}, 0]" for p in rates for t in range(len(pairs_z))]
        + [f"s{r * nz + b} = acc[{r}, {b}, 0]" for r in range(n) for b in range(nz)]
        + [f"z{a} = z[{a}, 0]" for a in range(nz)] + [f"e{p} = energy[{p}]" for p in range(3)]
    )  # fmt: skip
    free_step = (
        [f"q{p} = {total([f'h{p}_{t} * z{a} * z{b}' for t, (a, b) in enumerate(pairs_z)])}" for p in rates]
        + [f"y{r} = {total([f'f{r * nz + a} * z{a}' for a in range(nz)])}" for r in range(nz)]
        + ["fine = True"] + [f"fine &= abs(y{r}) <= q_limit" for r in range(n)]
    )  # fmt: skip
    free_take = [f"z{r} = y{r}" for r in range(nz)] + [f"e{p} += q{p}" for p in rates]
    free_sample = (
        [f"out_q[m, {r}] = z{r}" for r in range(n)] + [f"out_v[m, {r}] = z{n + r}" for r in range(n)]
        + [f"out_a[m, {r}] = {total([f's{r * nz + b} * z{b}' for b in range(nz)])}" for r in range(n)]
        + [f"out_e[m, {p}] = e{p}" for p in range(3)]
    )  # fmt: skip
    free_store = [f"z[{a}, 0] = z{a}" for a in range(nz)] + [f"energy[{p}] = e{p}" for p in range(3)]
    return _TEMPLATE.format(
        free_setup=lines(free_setup, 4), free_step=lines(free_step, 8), free_take=lines(free_take, 8),
        free_sample=lines(free_sample, 12), free_store=lines(free_store, 4),
        nz=nz, kept=kept, block=block, n=n, sum_rows=(len(pairs_z) + nz * kept) * block,
        step_rows=step_rows * block, sample_rows=(ww_first + 3 * len(pairs_w)) * block,
        setup=lines(setup, 4), one_body=lines(body, 8), store=lines(store, 4),
        energy_setup=lines(energy_setup, 8), step_energy=lines(step_energy, 12),
        rated=bool(rates), running=lines([f"e{p} += inc[{p}, j]" for p in rates], 8), sample=lines(sample, 16),
        lanes_loop=_step_loop(8, "limit", lanes_body, lanes_sample),
        r_init=lines([f"r{t} = 0.0" for t in range(len(pairs_w))], 4),
        w_loads_1=lines(w_loads, 8),
        products=lines(products, 8),
        snap_store=lines([f"snap[m - n_out, {t}] = r{t}" for t in range(len(pairs_w))], 16),
        final_loads=lines([f"r{t} = total[{t}]" for t in range(len(pairs_w))], 4),
        snap_total=lines([f"total[{t}] = r{t}" for t in range(len(pairs_w))], 4),
        lane_energy=lines(lane_energies, 12),
    )  # fmt: skip


def _step_loop(indent: int, steps: str, body: list[str], sample: list[str]) -> str:
    """The generated step loop: ``body`` (which sets ``fine``) in every step, a stop
    at the first step that is not fine, ``sample`` after every ``out_every``-th step."""
    pad = " " * indent
    inner = "\n".join(f"{pad}    {line}" for line in body)
    at_sample = "\n".join(f"{pad}            {line}" for line in sample)
    return (f"{pad}for j in range({steps}):\n{inner}\n{pad}    if not fine:\n{pad}        status = 1\n"
            f"{pad}        limit = j + 1\n{pad}        break\n{pad}    until -= 1\n{pad}    if until == 0:\n"
            f"{pad}        until = out_every\n{pad}        if m < capacity:\n{at_sample}\n"
            f"{pad}            out_step[m] = k0 + j + 1\n{pad}            m += 1")  # fmt: skip


_TEMPLATE = '''"""Generated by lumped.linear_rk: one lane of state size {nz} reading {kept} inputs.
Do not edit: the file is made again when it is missing."""

from numba import njit

from lumped.float_mode import flush_subnormals, restore_float_mode
from lumped.linear_rk import REORDERED


@njit(**REORDERED)
def one(step, sample, lane, energy, k0, nsteps, W, H, inc,
        out_every, out_q, out_v, out_a, out_e, out_step, n_out, q_limit):
    mode = flush_subnormals()
    capacity = out_q.shape[0]
{setup}
    status = 0
    limit = nsteps
    for j in range(nsteps):
{one_body}
        if not fine:
            status = 1
            limit = j + 1
            break
{store}
    if {rated}:
{energy_setup}
        for j in range(limit):
{step_energy}
    e0 = energy[0]
    e1 = energy[1]
    e2 = energy[2]
    last = limit - 1 if status else limit  # the step that diverged is not sampled
    m = n_out
    until = out_every - k0 % out_every
    for j in range(limit):
{running}
        if j == last:
            break
        until -= 1
        if until == 0:
            until = out_every
            if m < capacity:
{sample}
                out_step[m] = k0 + j + 1
                m += 1
    energy[0] = e0
    energy[1] = e1
    energy[2] = e2
    restore_float_mode(mode)
    return status, limit, m


@njit(**REORDERED)
def lanes(step, sample, lane, sums, energy, k0, nsteps, W, snap, total,
          out_every, out_q, out_v, out_a, out_e, out_step, n_out, q_limit):
    mode = flush_subnormals()
    blocks = lane.shape[0] // {block} // {nz}
    count = out_q.shape[1] // {n}
    capacity = out_q.shape[0]
    # The inputs' products, shared by every lane: running sums, kept at each sample.
{r_init}
    m = n_out
    until = out_every - k0 % out_every
    for j in range(nsteps):
{w_loads_1}
{products}
        until -= 1
        if until == 0:
            until = out_every
            if m < capacity:
{snap_store}
                for p in range(3):
                    out_e[m, p] = energy[p]
                m += 1
{snap_total}
    for x in range(sums.shape[0]):
        sums[x] = 0.0
    status = 0
    limit = nsteps
    for blk in range(blocks):
        lb = blk * {nz} * {block}
        ub = blk * {sum_rows}
        sb = blk * {step_rows}
        pb = blk * {sample_rows}
        m = n_out
        until = out_every - k0 % out_every
{lanes_loop}
{final_loads}
    e0 = 0.0
    e1 = 0.0
    e2 = 0.0
    for blk in range(blocks):
        ub = blk * {sum_rows}
        pb = blk * {sample_rows}
        for i in range({block}):
{lane_energy}
    energy[0] += e0
    energy[1] += e1
    energy[2] += e2
    restore_float_mode(mode)
    return status, limit, m


@njit(**REORDERED)
def free_one(phi, form, acc, z, energy, k0, intervals, every,
             out_q, out_v, out_a, out_e, out_step, n_out, q_limit):
    mode = flush_subnormals()
    capacity = out_q.shape[0]
{free_setup}
    status = 0
    done = intervals
    m = n_out
    for i in range(intervals):
{free_step}
        if not fine:
            status = 1
            done = i
            break
{free_take}
        if m < capacity:
{free_sample}
            out_step[m] = k0 + (i + 1) * every
            m += 1
{free_store}
    restore_float_mode(mode)
    return status, done, m
'''


def _cache_directory() -> Path:
    """Where generated kernels are written: ``LUMPED_KERNEL_CACHE``, else the user's
    cache directory (``$XDG_CACHE_HOME/lumped`` or ``~/.cache/lumped``), else a
    directory of this user's in the system's temporary directory."""
    chosen = os.environ.get("LUMPED_KERNEL_CACHE")
    home = Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache") / "lumped"
    for place in ([Path(chosen)] if chosen else []) + [home, Path(tempfile.gettempdir()) / f"lumped-{os.getuid()}"]:
        try:
            place.mkdir(parents=True, exist_ok=True)
            if os.access(place, os.W_OK):
                return place
        except OSError:
            continue
    raise RuntimeError(
        "no writable directory for lumped's generated kernels (tried $LUMPED_KERNEL_CACHE, the user's cache "
        "directory and the temporary directory); set LUMPED_KERNEL_CACHE, or run with specialise=False"
    )


def _generated_module(source: str):
    """Import ``source`` as a module kept in the cache directory (written atomically
    under a name taken from its hash, so that numba's on-disk cache finds it again).
    A new module makes room: the directory keeps the :data:`KEPT_KERNELS` used last."""
    name = _module_name(source)
    directory = _cache_directory()
    path = directory / f"{name}.py"
    if not path.exists() or path.read_text() != source:
        handle, temporary = tempfile.mkstemp(dir=directory, suffix=".tmp")
        with os.fdopen(handle, "w") as file:
            file.write(source)
        os.replace(temporary, path)
        _prune(directory, name)
    if name in sys.modules:
        return sys.modules[name]
    try:  # when it was used last (not the source's time, which numba's cache checks)
        path.with_suffix(".used").touch()
    except OSError:
        pass
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module  # numba's cache finds the module again by its name
    spec.loader.exec_module(module)
    return module


#: Generated modules the kernel cache directory keeps (with their compiled code).
KEPT_KERNELS = 64


def _prune(directory: Path, keep: str) -> None:
    """Remove the generated modules of ``directory`` beyond the :data:`KEPT_KERNELS`
    used last (``keep`` among them), with their compiled code; best effort."""

    def last_used(module: Path) -> float:
        marker = module.with_suffix(".used")
        return (marker if marker.exists() else module).stat().st_mtime

    try:
        others = sorted((m for m in directory.glob("lumped_kernel_*.py") if m.stem != keep), key=last_used,
                        reverse=True)  # fmt: skip
        for stale in others[KEPT_KERNELS - 1 :]:
            for file in (stale, stale.with_suffix(".used"), *(directory / "__pycache__").glob(f"{stale.stem}.*")):
                file.unlink(missing_ok=True)
    except OSError:
        pass
