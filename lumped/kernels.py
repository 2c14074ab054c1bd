"""Compiled inner loops (numba, cached on disk) of the stepping engine.

One element loop, :func:`body_accelerations`, gives every body's acceleration and
the three energy rates (dissipation, work by supports, work by forces) from a
state and the inputs at one instant; the explicit Runge–Kutta kernel (any tableau),
the symplectic Euler kernel and the output post-processing all call it, so the
physics lives in one place. Linear systems under implicit or exact steppers go
through :func:`affine_chunk`, one dense affine map per step; nonlinear systems under
Newmark, trapezoid, backward Euler or central difference through :func:`implicit_chunk`, Newton's method
on the same element loop.

Layout. Nodes are numbered bodies first (0 … n−1), then supports (n …). Element e
joins ``ea[e]`` (lower) to ``eb[e]``; its deflection from static equilibrium is
x_b − x_a and its force is positive in tension: +f on node a, −f on node b.
Element kinds: 0 spring, 1 linear damper, 2 asymmetric damper, 3 tabulated damper,
4 inerter (its body-side inertia is in the mass matrix; its support-side part is a
known force here).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from lumped.float_mode import flush_subnormals, restore_float_mode
from lumped.signal_kernels import HOT, input_values

__all__ = [
    "SPRING", "DAMPER", "ASYMMETRIC_DAMPER", "CURVE_DAMPER", "INERTER",
    "body_accelerations", "element_state", "rk_chunk", "symplectic_chunk", "affine_chunk",
    "implicit_chunk", "stage_time",
]  # fmt: skip

SPRING, DAMPER, ASYMMETRIC_DAMPER, CURVE_DAMPER, INERTER = 0, 1, 2, 3, 4

# Status codes returned by the chunk kernels.
OK, DIVERGED = 0, 1
#: Ends of steps read the inputs this fraction of a step early (their left limits).
LEFT_LIMIT = 1e-9


@njit(cache=True, inline="always", error_model="numpy")
def _spring_force(d, k, fs, acts, gap, gk):
    """Dynamic force (total − static) of a spring at deflection d from static."""
    f = k * d
    if acts != 0:
        total = fs + f
        if acts > 0 and total > 0.0:  # compression only: no tension in the total force
            total = 0.0
        elif acts < 0 and total < 0.0:  # tension only
            total = 0.0
        f = total - fs
    if d > gap:
        f += gk * (d - gap)
    elif d < -gap:
        f += gk * (d + gap)
    return f


@njit(cache=True, inline="always", error_model="numpy")
def _curve_force(dv, lo, hi, cv, cf):
    """Piecewise-linear damper curve through points lo … hi−1, extrapolated linearly."""
    if dv <= cv[lo]:
        j = lo
    elif dv >= cv[hi - 1]:
        j = hi - 2
    else:
        j = lo
        while cv[j + 1] < dv:
            j += 1
    slope = (cf[j + 1] - cf[j]) / (cv[j + 1] - cv[j])
    return cf[j] + slope * (dv - cv[j])


@njit(cache=True, inline="always", error_model="numpy")
def body_accelerations(q, v, U, Ud, Udd, FF, col, model, acc, rates):
    """Fill ``acc`` (n) with body accelerations and ``rates`` (3) with the power
    dissipated, delivered by supports and delivered by forces (W).

    Inputs are read as ``U[col, s]`` (support displacement), ``Ud`` (velocity),
    ``Udd`` (acceleration) and ``FF[col, f]`` (force values): row ``col`` of the
    chunk kernel's input rows, one per stage time of the step.

    ``model`` is the tuple built by the driver: ``(links, nonlinear, inerters,
    table, m_ptr, m_col, m_val, fbody, fscale, scratch)``: M⁻¹ as CSR arrays (one
    entry per row, read as a diagonal, without inerters between bodies), and
    ``scratch``, n floats of work space for the nodal forces. ``links = (a, b, k, c)`` are the
    linear springs and dampers merged per node pair — the tight loop that carries a
    large chain; ``nonlinear`` and ``inerters`` index the element ``table`` (see
    :func:`element_state`), evaluated one by one.
    """
    links, nonlinear, inerters, table, m_ptr, m_col, m_val, fbody, fscale, scratch = model
    la, lb, lk, lc = links
    ea, eb, kind, k, c, c2, fs, acts, gap, gk, coff, cv, cf = table
    n = q.shape[0]
    force = scratch  # nodal forces, then acc = M⁻¹ force
    for i in range(n):
        force[i] = 0.0
    dissipated = 0.0
    supports = 0.0
    for e in range(la.shape[0]):
        a = la[e]
        b = lb[e]
        if a < n and b < n:
            d = q[b] - q[a]
            dv = v[b] - v[a]
            f = lk[e] * d + lc[e] * dv
            dissipated += lc[e] * dv * dv
            force[a] += f
            force[b] -= f
        else:
            sa = Ud[col, a - n] if a >= n else 0.0
            sb = Ud[col, b - n] if b >= n else 0.0
            d = (q[b] if b < n else U[col, b - n]) - (q[a] if a < n else U[col, a - n])
            dv = (v[b] if b < n else Ud[col, b - n]) - (v[a] if a < n else Ud[col, a - n])
            f = lk[e] * d + lc[e] * dv
            dissipated += lc[e] * dv * dv
            supports += f * (sb - sa)
            if a < n:
                force[a] += f
            if b < n:
                force[b] -= f
    for m in range(nonlinear.shape[0]):
        e = nonlinear[m]
        a = ea[e]
        b = eb[e]
        d = (q[b] if b < n else U[col, b - n]) - (q[a] if a < n else U[col, a - n])
        dv = (v[b] if b < n else Ud[col, b - n]) - (v[a] if a < n else Ud[col, a - n])
        kd = kind[e]
        if kd == SPRING:
            f = _spring_force(d, k[e], fs[e], acts[e], gap[e], gk[e])
        elif kd == ASYMMETRIC_DAMPER:
            f = c[e] * dv if dv > 0.0 else c2[e] * dv
            dissipated += f * dv
        else:
            f = _curve_force(dv, coff[e], coff[e + 1], cv, cf)
            dissipated += f * dv
        sa = Ud[col, a - n] if a >= n else 0.0
        sb = Ud[col, b - n] if b >= n else 0.0
        supports += f * (sb - sa)
        if a < n:
            force[a] += f
        if b < n:
            force[b] -= f
    for m in range(inerters.shape[0]):
        # Only the support-side part of an inerter's force is known here; its
        # body-side inertia is in the mass matrix.
        e = inerters[m]
        a = ea[e]
        b = eb[e]
        f = 0.0
        if a >= n:
            f -= k[e] * Udd[col, a - n]
        if b >= n:
            f += k[e] * Udd[col, b - n]
        if a < n:
            force[a] += f
        if b < n:
            force[b] -= f
    work = 0.0
    for i in range(fbody.shape[0]):
        load = fscale[i] * FF[col, i]
        force[fbody[i]] += load
        work += load * v[fbody[i]]
    if m_ptr[n] == n:  # diagonal mass: one entry per row
        for i in range(n):
            acc[i] = m_val[i] * force[i]
    else:
        for i in range(n):
            s = 0.0
            for p in range(m_ptr[i], m_ptr[i + 1]):
                s += m_val[p] * force[m_col[p]]
            acc[i] = s
    for m in range(inerters.shape[0]):  # an inerter's whole force b·δ'' works on its support
        e = inerters[m]
        a = ea[e]
        b = eb[e]
        if a >= n or b >= n:
            sa = Ud[col, a - n] if a >= n else 0.0
            sb = Ud[col, b - n] if b >= n else 0.0
            relative = (acc[b] if b < n else Udd[col, b - n]) - (acc[a] if a < n else Udd[col, a - n])
            supports += k[e] * relative * (sb - sa)
    rates[0] = dissipated
    rates[1] = supports
    rates[2] = work


@njit(cache=True, inline="always", error_model="numpy")
def _element_values(kd, d, dv, dacc, k, c, c2, fs, acts, gap, gk, lo, hi, cv, cf):
    """Total force (N, static included, tension positive) and stored energy (J;
    inerters: ½ b δ'²) of an element of kind ``kd`` with these parameters (a curve
    damper's points lo … hi−1 of cv, cf), at deflection d from static (m), its rate
    dv and second rate dacc."""
    if kd == SPRING:
        return fs + _spring_force(d, k, fs, acts, gap, gk), _spring_energy(d, k, fs, acts, gap, gk)
    if kd == DAMPER:
        return c * dv, 0.0
    if kd == ASYMMETRIC_DAMPER:
        return (c * dv if dv > 0.0 else c2 * dv), 0.0
    if kd == CURVE_DAMPER:
        return _curve_force(dv, lo, hi, cv, cf), 0.0
    return k * dacc, 0.5 * k * dv * dv


@njit(cache=True, inline="always", error_model="numpy")
def element_state(
    q, v, a, u, ud, udd,
    ea, eb, kind, k, c, c2, fs, acts, gap, gk, coff, cv, cf,
    deflection, force, energy,
):  # fmt: skip
    """Per element at one instant: deflection from static (m), total force and stored
    energy (:func:`_element_values`)."""
    n = q.shape[0]
    for e in range(ea.shape[0]):
        i = ea[e]
        j = eb[e]
        xa = q[i] if i < n else u[i - n]
        xb = q[j] if j < n else u[j - n]
        va = v[i] if i < n else ud[i - n]
        vb = v[j] if j < n else ud[j - n]
        aa = a[i] if i < n else udd[i - n]
        ab = a[j] if j < n else udd[j - n]
        deflection[e] = xb - xa
        force[e], energy[e] = _element_values(kind[e], xb - xa, vb - va, ab - aa, k[e], c[e], c2[e], fs[e], acts[e],
                                              gap[e], gk[e], coff[e], coff[e + 1], cv, cf)  # fmt: skip


#: Elements up to which :func:`element_series` runs element by element (a long loop
#: over the samples each); beyond, sample by sample, so that wide rows stay in cache.
SERIES_BY_ELEMENT = 64


@njit(**HOT)
def element_series(
    q, v, a, u, ud, udd,
    ea, eb, kind, k, c, c2, fs, acts, gap, gk, coff, cv, cf,
    deflection, force, stored, inerter_energy, energy,
):  # fmt: skip
    """:func:`element_state` over samples (rows of q, v, a, u, ud, udd): fills
    ``deflection`` and ``force`` (samples × elements), and per sample the springs'
    stored energy and the inerters' kinetic energy (J); ``energy`` is work space of
    one float per element."""
    mode = flush_subnormals()
    n, samples, elements = q.shape[1], q.shape[0], ea.shape[0]
    for i in range(samples):
        stored[i] = 0.0
        inerter_energy[i] = 0.0
    if elements > SERIES_BY_ELEMENT:
        for i in range(samples):
            element_state(q[i], v[i], a[i], u[i], ud[i], udd[i], ea, eb, kind, k, c, c2, fs, acts,
                          gap, gk, coff, cv, cf, deflection[i], force[i], energy)  # fmt: skip
            for e in range(elements):
                if kind[e] == SPRING:
                    stored[i] += energy[e]
                else:
                    inerter_energy[i] += energy[e]  # zero but for inerters
    else:
        for e in range(elements):
            ia, ib = ea[e], eb[e]
            # An end on a body reads its column of q, v, a; on a support, of u, u', u''.
            qa, va, aa, ca = (q, v, a, ia) if ia < n else (u, ud, udd, ia - n)
            qb, vb, ab, cb = (q, v, a, ib) if ib < n else (u, ud, udd, ib - n)
            into = stored if kind[e] == SPRING else inerter_energy
            # The element's parameters as scalars: the loop's stores cannot change them.
            kd, ke, ce, c2e, fse, actse, gape, gke, lo, hi = (kind[e], k[e], c[e], c2[e], fs[e], acts[e], gap[e], gk[e],
                                                             coff[e], coff[e + 1])  # fmt: skip
            for i in range(samples):
                d = qb[i, cb] - qa[i, ca]
                deflection[i, e] = d
                force[i, e], stored_e = _element_values(kd, d, vb[i, cb] - va[i, ca], ab[i, cb] - aa[i, ca], ke, ce,
                                                        c2e, fse, actse, gape, gke, lo, hi, cv, cf)  # fmt: skip
                into[i] += stored_e
    restore_float_mode(mode)


@njit(cache=True, inline="always", error_model="numpy")
def _spring_energy(d, k, fs, acts, gap, gk):
    """∫₀^d (dynamic force) dδ for a spring: linear part, one-sided clip, end stop."""
    energy = 0.5 * k * d * d
    if acts != 0 and k > 0.0:
        # Contact ends where fs + kδ crosses 0, at δ0 = −fs/k; beyond it the dynamic
        # force is the constant −fs.
        d0 = -fs / k
        beyond = (acts > 0 and d > d0 and d0 >= 0.0) or (acts < 0 and d < d0 and d0 <= 0.0)
        if beyond:
            energy = 0.5 * k * d0 * d0 - fs * (d - d0)
    if d > gap:
        energy += 0.5 * gk * (d - gap) ** 2
    elif d < -gap:
        energy += 0.5 * gk * (d + gap) ** 2
    return energy


@njit(cache=True, error_model="numpy")
def _contact_values(q, U, col, n, watch_element, watch_kind, table, out):
    """For each watched element, a value whose sign change is an event: for one-sided
    springs fs + kδ (the force it would carry), for end stops |δ| − gap."""
    ea, eb, kind, k, c, c2, fs, acts, gap, gk, coff, cv, cf = table
    for w in range(watch_element.shape[0]):
        e = watch_element[w]
        a = ea[e]
        b = eb[e]
        xa = q[a] if a < n else U[col, a - n]
        xb = q[b] if b < n else U[col, b - n]
        d = xb - xa
        if watch_kind[w] == 0:
            out[w] = fs[e] + k[e] * d
        else:
            out[w] = abs(d) - gap[e]


def _input_rows(program, offsets) -> tuple:
    """Work arrays U, Ud, Udd (stage times × supports) and FF (× force items)."""
    supports, forces = len(program[5]), len(program[7])
    return (*(np.zeros((len(offsets), supports)) for _ in range(3)), np.zeros((len(offsets), forces)))


def rk_work(stages: int, n: int, program, offsets, watched: int) -> tuple:
    """Scratch arrays of :func:`rk_chunk` (its kernel allocates nothing)."""
    return (np.zeros((stages, n)), np.zeros((stages, n)), np.zeros((stages, 3)), np.zeros(n), np.zeros(n),
            np.zeros(3), np.zeros(watched), *_input_rows(program, offsets))  # fmt: skip


def symplectic_work(n: int, program, offsets, watched: int) -> tuple:
    """Scratch arrays of :func:`symplectic_chunk`."""
    return (np.zeros(n), np.zeros(3), np.zeros(watched), *_input_rows(program, offsets))


def affine_work(nz: int, n: int, program, offsets) -> tuple:
    """Scratch arrays of :func:`affine_chunk`."""
    rows = _input_rows(program, offsets)
    nw = 3 * rows[0].shape[1] + rows[3].shape[1]
    return (np.zeros(nw), np.zeros(nw), np.zeros(nz), np.zeros(n), np.zeros(n), np.zeros(n), np.zeros(3),
            np.zeros(3), *rows)  # fmt: skip


@njit(cache=True, inline="always", error_model="numpy")
def stage_time(clock, k, h, c):
    """Time (s) at which global step k reads its input row c.

    ``clock = (base, grid step, offsets)``: the step starts at base + k·(grid step)
    (base 0 on the run's grid; for one part of a split step, its start with grid step
    0) and row c is read at start + offsets[c]·h; rows past the start are read
    :data:`LEFT_LIMIT`·h early, so that at a jump or a kink on the grid the end of a
    step sees the value and rates from before it.
    """
    base, grid, offsets = clock
    t = base + k * grid + offsets[c] * h
    if offsets[c] > 0.0:
        t -= LEFT_LIMIT * h
    return t


@njit(cache=True, inline="always", error_model="numpy")
def _step_inputs(program, clock, k, h, U, Ud, Udd, FF):
    """The inputs of global step k at each stage time (:func:`stage_time`) into rows
    of U … FF."""
    for c in range(clock[2].shape[0]):
        input_values(stage_time(clock, k, h, c), program, c, U, Ud, Udd, FF)


@njit(**HOT)
def rk_chunk(
    A, B, stage_col, end_col, q, v, energy, h, k0, nsteps,
    program, clock,
    model, work,
    out_every, out_q, out_v, out_a, out_e, out_step, n_out,
    watch_element, watch_kind, watch_prev, ev_step, ev_frac, ev_watch, ev_value, n_ev,
    q_limit,
):  # fmt: skip
    """Advance ``nsteps`` explicit Runge–Kutta steps (tableau A, B) from global step
    ``k0``; stage i reads the inputs of column ``stage_col[i]`` of the step's input
    rows (:func:`_step_inputs`, from the input ``program`` and the ``clock``).

    Samples are written after each step whose global index is a multiple of
    ``out_every``. Returns (status, steps done, samples written, events written).
    """
    n = q.shape[0]
    s = B.shape[0]
    kq, kv, ke, qs, acc, rates, values, U, Ud, Udd, FF = work
    mode = flush_subnormals()
    m = n_out
    ne = n_ev
    for j in range(nsteps):
        _step_inputs(program, clock, k0 + j, h, U, Ud, Udd, FF)
        for i in range(s):
            stage_v = kq[i]  # the stage's velocity is its displacement rate
            for r in range(n):
                sq = q[r]
                sv = v[r]
                for other in range(i):
                    if A[i, other] != 0.0:
                        sq += h * A[i, other] * kq[other, r]
                        sv += h * A[i, other] * kv[other, r]
                qs[r] = sq
                stage_v[r] = sv
            body_accelerations(qs, stage_v, U, Ud, Udd, FF, stage_col[i], model, kv[i], ke[i])
        worst = 0.0
        for r in range(n):
            dq = 0.0
            dv = 0.0
            for i in range(s):
                dq += B[i] * kq[i, r]
                dv += B[i] * kv[i, r]
            q[r] += h * dq
            v[r] += h * dv
            x = abs(q[r])
            if not (x <= worst):  # catches NaN too
                worst = x
        for p in range(3):
            de = 0.0
            for i in range(s):
                de += B[i] * ke[i, p]
            energy[p] += h * de
        step = k0 + j + 1
        ne = _record_events(q, U, end_col, n, watch_element, watch_kind, model[3], watch_prev,
                            values, step, ev_step, ev_frac, ev_watch, ev_value, ne)  # fmt: skip
        if _diverged(worst, q_limit, mode):
            return DIVERGED, j + 1, m, ne
        if step % out_every == 0 and m < out_q.shape[0]:
            body_accelerations(q, v, U, Ud, Udd, FF, end_col, model, acc, rates)
            _store(m, step, q, v, acc, energy, out_q, out_v, out_a, out_e, out_step)
            m += 1
    restore_float_mode(mode)
    return OK, nsteps, m, ne


@njit(cache=True, inline="always", error_model="numpy")
def _store(m, step, q, v, acc, energy, out_q, out_v, out_a, out_e, out_step):
    for r in range(q.shape[0]):
        out_q[m, r] = q[r]
        out_v[m, r] = v[r]
        out_a[m, r] = acc[r]
    for p in range(3):
        out_e[m, p] = energy[p]
    out_step[m] = step


@njit(cache=True, inline="always", error_model="numpy")
def _largest(q):
    """max |q|, or NaN when some entry is not a number."""
    worst = 0.0
    for r in range(q.shape[0]):
        x = abs(q[r])
        if not (x <= worst):  # catches NaN too
            worst = x
    return worst


@njit(cache=True, inline="always", error_model="numpy")
def _trapezoid_energy(energy, old, rates, h):
    """Energy rates integrated by the trapezoid rule over a step; ``old`` ← ``rates``."""
    for p in range(3):
        energy[p] += 0.5 * h * (old[p] + rates[p])
        old[p] = rates[p]


@njit(cache=True, inline="always", error_model="numpy")
def _diverged(worst, q_limit, mode):
    """True (and the caller's float mode restored, as the kernel is about to return)
    when the largest |displacement| of a step is beyond the limit or not a number."""
    if worst <= q_limit:
        return False
    restore_float_mode(mode)
    return True


@njit(cache=True, inline="always", error_model="numpy")
def _record_events(q, U, col, n, watch_element, watch_kind, table, watch_prev, values, step,
                   ev_step, ev_frac, ev_watch, ev_value, ne):  # fmt: skip
    _contact_values(q, U, col, n, watch_element, watch_kind, table, values)
    for w in range(values.shape[0]):
        old = watch_prev[w]
        new = values[w]
        if (old > 0.0) != (new > 0.0):
            if ne < ev_step.shape[0]:
                ev_step[ne] = step
                ev_frac[ne] = old / (old - new) if old != new else 1.0
                ev_watch[ne] = w
                ev_value[ne] = new
            ne += 1
        watch_prev[w] = new
    return ne


@njit(**HOT)
def symplectic_chunk(
    q, v, energy, h, k0, nsteps,
    program, clock,
    model, work,
    out_every, out_q, out_v, out_a, out_e, out_step, n_out,
    watch_element, watch_kind, watch_prev, ev_step, ev_frac, ev_watch, ev_value, n_ev,
    q_limit,
):  # fmt: skip
    """Semi-implicit Euler: v₁ = v + h a(t, q, v); q₁ = q + h v₁ (damping on the old
    velocity, as in the stability analysis). Inputs: column 0 at the step start,
    column 1 at its end. Energy rates by the rectangle rule (first order, as the method)."""
    n = q.shape[0]
    acc, rates, values, U, Ud, Udd, FF = work
    mode = flush_subnormals()
    m = n_out
    ne = n_ev
    for j in range(nsteps):
        _step_inputs(program, clock, k0 + j, h, U, Ud, Udd, FF)
        body_accelerations(q, v, U, Ud, Udd, FF, 0, model, acc, rates)
        worst = 0.0
        for r in range(n):
            v[r] += h * acc[r]
            q[r] += h * v[r]
            x = abs(q[r])
            if not (x <= worst):
                worst = x
        for p in range(3):
            energy[p] += h * rates[p]
        step = k0 + j + 1
        ne = _record_events(q, U, 1, n, watch_element, watch_kind, model[3], watch_prev,
                            values, step, ev_step, ev_frac, ev_watch, ev_value, ne)  # fmt: skip
        if _diverged(worst, q_limit, mode):
            return DIVERGED, j + 1, m, ne
        if step % out_every == 0 and m < out_q.shape[0]:
            body_accelerations(q, v, U, Ud, Udd, FF, 1, model, acc, rates)
            _store(m, step, q, v, acc, energy, out_q, out_v, out_a, out_e, out_step)
            m += 1
    restore_float_mode(mode)
    return OK, nsteps, m, ne


@njit(**HOT)
def affine_chunk(
    G, H0, H1, z, energy, h, k0, nsteps, program, clock,
    model, work,
    out_every, out_q, out_v, out_a, out_e, out_step, n_out, q_limit,
):  # fmt: skip
    """Linear steppers as one affine map per step, z₁ = G z + H0 w₀ + H1 w₁, where
    w₀ = [u, u', u'', F] are the inputs at the step's start (input row 0) and w₁ at
    its end (row 1, left limits); z = (q, v). The acceleration and energy rates come from
    :func:`body_accelerations`, the rates integrated by the trapezoid rule (second
    order, as these steppers)."""
    nz = z.shape[0]
    w0, w1, znew, q, v, acc, rates, old, U, Ud, Udd, FF = work
    mode = flush_subnormals()
    _step_inputs(program, clock, k0, h, U, Ud, Udd, FF)
    _input_vector(U, Ud, Udd, FF, 0, w0)
    _halves(z, q, v)
    body_accelerations(q, v, U, Ud, Udd, FF, 0, model, acc, old)
    m = n_out
    for j in range(nsteps):
        _step_inputs(program, clock, k0 + j, h, U, Ud, Udd, FF)
        _input_vector(U, Ud, Udd, FF, 0, w0)
        _input_vector(U, Ud, Udd, FF, 1, w1)
        for r in range(nz):
            s = 0.0
            for other in range(nz):
                s += G[r, other] * z[other]
            for other in range(w0.shape[0]):
                s += H0[r, other] * w0[other] + H1[r, other] * w1[other]
            znew[r] = s
        for r in range(nz):
            z[r] = znew[r]
        _halves(z, q, v)
        body_accelerations(q, v, U, Ud, Udd, FF, 1, model, acc, rates)
        _trapezoid_energy(energy, old, rates, h)
        step = k0 + j + 1
        if _diverged(_largest(q), q_limit, mode):
            return DIVERGED, j + 1, m, 0
        if step % out_every == 0 and m < out_q.shape[0]:
            _store(m, step, q, v, acc, energy, out_q, out_v, out_a, out_e, out_step)
            m += 1
    restore_float_mode(mode)
    return OK, nsteps, m, 0


@njit(cache=True, inline="always", error_model="numpy")
def _input_vector(U, Ud, Udd, FF, row, w):
    """w = [u, u', u'', F] of input row ``row`` (the order of the state space's B)."""
    ns = U.shape[1]
    for s in range(ns):
        w[s] = U[row, s]
        w[ns + s] = Ud[row, s]
        w[2 * ns + s] = Udd[row, s]
    for f in range(FF.shape[1]):
        w[3 * ns + f] = FF[row, f]


@njit(cache=True, inline="always", error_model="numpy")
def _halves(z, q, v):
    """q, v ← the two halves of z = (q, v)."""
    n = q.shape[0]
    for r in range(n):
        q[r] = z[r]
        v[r] = z[n + r]


# Status of :func:`implicit_chunk` when Newton's method does not settle in a step.
NEWTON_FAILED = 2


@njit(**HOT)
def _accelerations(q, v, U, Ud, Udd, FF, col, model, acc, rates):
    """:func:`body_accelerations` called rather than inlined, for a kernel that
    evaluates it at several places (one compiled copy instead of one per place)."""
    body_accelerations(q, v, U, Ud, Udd, FF, col, model, acc, rates)


def implicit_work(n: int, program, offsets, watched: int) -> tuple:
    """Scratch arrays of :func:`implicit_chunk`."""
    vectors = tuple(np.zeros(n) for _ in range(10))
    return (*vectors, np.zeros(3), np.zeros(3), np.zeros(3), np.zeros((n, n)), np.zeros(n, dtype=np.int64),
            np.zeros(watched), *_input_rows(program, offsets))  # fmt: skip


@njit(**HOT)
def implicit_chunk(
    coefficients, q, v, energy, h, k0, nsteps,
    program, clock,
    model, work,
    out_every, out_q, out_v, out_a, out_e, out_step, n_out,
    watch_element, watch_kind, watch_prev, ev_step, ev_frac, ev_watch, ev_value, n_ev,
    q_limit, max_iterations, accel_scale,
):  # fmt: skip
    """Implicit one-step methods on the second-order form, for nonlinear systems:

        q₁ = q + h v + h² (α_q a + β a₁),   v₁ = v + h (α_v a + γ a₁),

    ``coefficients = (α_q, β, α_v, γ)``, with a₁ the acceleration at (t₁, q₁, v₁),
    found by Newton's method on R(a₁) = a₁ − a(q₁(a₁), v₁(a₁)). The Jacobian
    I − β h² ∂a/∂q − γ h ∂a/∂v comes from finite differences of
    :func:`body_accelerations` itself (the element laws are piecewise affine, so a
    difference is exact up to rounding away from a kink, and Newton's method on them
    settles in a few iterations). The acceleration at the chunk's start comes from the
    state there (so a support jump between chunks is seen). Energy rates by the
    trapezoid rule. Returns (status, steps done,
    samples written, events written); status :data:`NEWTON_FAILED` when a step does
    not settle within ``max_iterations`` evaluations. The LU factors of the Jacobian
    are kept from step to step and rebuilt only when they stop converging (a contact
    changed) or the step length changes; on a 100-body chain with a lifting end this
    halved the run time. A step has settled when the
    residual is within 10⁻¹² of the accelerations plus the rounding floor of the force
    sums, 64 ε × ``accel_scale`` (m/s²: the largest static force on a body over its
    mass, or g), which also sets the finite-difference probe. A correction that does not
    lower the residual is halved (backtracking), so that the iteration cannot cycle
    between contact states at a kink.
    """
    aq, beta, av, gamma = coefficients
    qp, vp, a, a1, base, q1, v1, acc, probe, step_change, rates, old, spare, J, pivots, values, U, Ud, Udd, FF = work
    mode = flush_subnormals()
    n = q.shape[0]
    m = n_out
    ne = n_ev
    _step_inputs(program, clock, k0, h, U, Ud, Udd, FF)
    _accelerations(q, v, U, Ud, Udd, FF, 0, model, a, old)
    bq = beta * h * h
    gv = gamma * h
    floor = 64 * 2.220446049250313e-16 * accel_scale  # rounding of the force sums, m/s²
    factored = -1.0  # the step length of the LU factors held in J (none yet)
    for j in range(nsteps):
        _step_inputs(program, clock, k0 + j, h, U, Ud, Udd, FF)
        for r in range(n):
            qp[r] = q[r] + h * v[r] + h * h * aq * a[r]
            vp[r] = v[r] + h * av * a[r]
            a1[r] = a[r]
        settled = False
        rounding = False  # the last correction was at the level of rounding
        previous = np.inf  # residual at the last accepted iterate
        fraction = 1.0  # of the Newton correction taken (halved when it does not help)
        reused = False  # the last correction came from an earlier step's Jacobian
        refresh = False
        for _ in range(max_iterations):
            for r in range(n):
                q1[r] = qp[r] + bq * a1[r]
                v1[r] = vp[r] + gv * a1[r]
            _accelerations(q1, v1, U, Ud, Udd, FF, 1, model, acc, rates)
            size = 0.0
            worst = 0.0
            for r in range(n):
                size = max(size, abs(acc[r]), abs(a1[r]))
                worst = max(worst, abs(acc[r] - a1[r]))
            if rounding or worst <= 1e-12 * size + floor:
                settled = True
                break
            if reused and worst > 0.25 * previous:
                # The earlier Jacobian no longer fits (a contact changed): back to the
                # last iterate, and a fresh one there.
                for r in range(n):
                    a1[r] = base[r]
                previous = np.inf
                reused = False
                refresh = True
                continue
            if worst >= previous and fraction > 1e-3:
                # Backtrack: at a kink a full correction can jump between contact states.
                fraction *= 0.5
                for r in range(n):
                    a1[r] = base[r] + fraction * step_change[r]
                continue
            previous = worst
            fraction = 1.0
            for r in range(n):
                base[r] = a1[r]
                step_change[r] = acc[r] - a1[r]  # −R
            reused = not refresh and factored == h
            if not reused:
                for c in range(n):
                    delta = 1e-7 * (abs(a1[c]) + 1e-3 * size + accel_scale)
                    q1[c] += bq * delta
                    v1[c] += gv * delta
                    _accelerations(q1, v1, U, Ud, Udd, FF, 1, model, probe, spare)
                    q1[c] -= bq * delta
                    v1[c] -= gv * delta
                    for r in range(n):
                        J[r, c] = (1.0 if r == c else 0.0) - (probe[r] - acc[r]) / delta
                _lu_in_place(J, pivots)
                factored = h
                refresh = False
            _lu_solve(J, pivots, step_change)
            correction = 0.0
            for r in range(n):
                a1[r] = base[r] + step_change[r]
                correction = max(correction, abs(step_change[r]))
            rounding = correction <= 1e-14 * size + floor
        if not settled:
            restore_float_mode(mode)
            return NEWTON_FAILED, j, m, ne
        for r in range(n):
            q[r] = q1[r]
            v[r] = v1[r]
            a[r] = a1[r]
        _trapezoid_energy(energy, old, rates, h)
        step = k0 + j + 1
        ne = _record_events(q, U, 1, n, watch_element, watch_kind, model[3], watch_prev,
                            values, step, ev_step, ev_frac, ev_watch, ev_value, ne)  # fmt: skip
        if _diverged(_largest(q), q_limit, mode):
            return DIVERGED, j + 1, m, ne
        if step % out_every == 0 and m < out_q.shape[0]:
            _store(m, step, q, v, acc, energy, out_q, out_v, out_a, out_e, out_step)
            m += 1
    restore_float_mode(mode)
    return OK, nsteps, m, ne


@njit(cache=True, inline="always", error_model="numpy")
def _lu_in_place(J, pivots):
    """J ← its LU factors (Gaussian elimination with partial pivoting; the row swaps
    in ``pivots``), for :func:`_lu_solve`."""
    n = J.shape[0]
    for col in range(n):
        pivot = col
        for r in range(col + 1, n):
            if abs(J[r, col]) > abs(J[pivot, col]):
                pivot = r
        pivots[col] = pivot
        if pivot != col:
            for c in range(n):
                J[col, c], J[pivot, c] = J[pivot, c], J[col, c]
        for r in range(col + 1, n):
            J[r, col] /= J[col, col]
            factor = J[r, col]
            if factor != 0.0:
                for c in range(col + 1, n):
                    J[r, c] -= factor * J[col, c]


@njit(cache=True, inline="always", error_model="numpy")
def _lu_solve(J, pivots, x):
    """x ← J⁻¹ x with the factors of :func:`_lu_in_place`."""
    n = x.shape[0]
    for col in range(n):
        p = pivots[col]
        if p != col:
            x[col], x[p] = x[p], x[col]
        for r in range(col + 1, n):
            x[r] -= J[r, col] * x[col]
    for r in range(n - 1, -1, -1):
        s = x[r]
        for c in range(r + 1, n):
            s -= J[r, c] * x[c]
        x[r] = s / J[r, r]
