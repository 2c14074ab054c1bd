"""Compiled evaluation of input signals (numba, cached on disk): the one place where
each signal's value and analytic first and second rates are written down.

A signal is encoded as ``(kind, p, data, lo, hi)``: a kind code, up to
:data:`PARAMETERS` numbers ``p`` and a slice ``data[lo:hi]`` of a shared float array
(a table's times then values; a road's profile then slope). The stepping kernels
evaluate the inputs at every stage time through :func:`input_values`, so a run
keeps no per-step input tables; :class:`lumped.excitation.Signal` evaluates arrays
of times through :func:`signal_series`.

A run's inputs are a *program*: the tuple ``(kind, p, lo, hi, data, support_signal,
support_delay, force_signal)`` with one row of ``kind``/``p``/``lo``/``hi`` per
signal, and per support the index of the signal it follows (−1: fixed) and its
delay (s), per force item the index of its signal.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = [
    "FIXED", "STEP", "BUMP", "HARMONIC", "SWEEP", "TABLE", "ROAD", "PARAMETERS",
    "signal_motion", "signal_span", "signal_series", "support_motion", "force_value", "input_values", "input_series",
    "sweep_phase",
]  # fmt: skip

FIXED, STEP, BUMP, HARMONIC, SWEEP, TABLE, ROAD = range(7)
#: Numbers per signal in ``p``.
PARAMETERS = 5
#: Options of the compiled loops that run per step or per sample: numba's reference
#: counting off (``_nrt``), so that the arrays handed to inlined helpers cost nothing
#: — with it on, evaluating three stage inputs of one bump took 460 ns per step,
#: without it 12 ns. Such a function allocates nothing; its caller passes every
#: work array in.
HOT = dict(cache=True, error_model="numpy", _nrt=False)


@njit(cache=True, inline="always", error_model="numpy")
def sweep_phase(p, g, t):
    """Phase θ (rad) of a sweep ``p[g] = (size, f0, f1, duration, logarithmic)`` and its
    first two rates at t (s): instantaneous frequency θ'/2π from f0 to f1 over the
    duration, linear or logarithmic in time."""
    f0, f1, duration = p[g, 1], p[g, 2], p[g, 3]
    if p[g, 4] != 0.0 and f1 != f0:
        k = math.log(f1 / f0) / duration
        d1 = 2.0 * math.pi * f0 * math.exp(k * t)
        return 2.0 * math.pi * f0 * math.expm1(k * t) / k, d1, d1 * k
    rate = (f1 - f0) / duration
    return 2.0 * math.pi * (f0 * t + 0.5 * rate * t * t), 2.0 * math.pi * (f0 + rate * t), 2.0 * math.pi * rate


@njit(cache=True, inline="always", error_model="numpy")
def _table(data, lo, hi, t):
    """Piecewise linear through times data[lo:mid], values data[mid:hi], held at the
    end values outside; the rate is the slope of the segment at or after t."""
    count = (hi - lo) // 2
    times = lo
    values = lo + count
    if t < data[times]:
        return data[values], 0.0, 0.0
    if t >= data[times + count - 1]:
        return data[values + count - 1], 0.0, 0.0
    left, right = 0, count - 1  # data[times + left] <= t < data[times + right]
    while right - left > 1:
        middle = (left + right) // 2
        if data[times + middle] <= t:
            left = middle
        else:
            right = middle
    t0, t1 = data[times + left], data[times + right]
    x0, x1 = data[values + left], data[values + right]
    slope = (x1 - x0) / (t1 - t0)
    return x0 + slope * (t - t0), slope, 0.0


@njit(cache=True, inline="always", error_model="numpy")
def _road(p, g, data, lo, hi, t):
    """A road ``p[g] = (speed, spacing, fade length)`` under a wheel: cubic Hermite
    interpolation of the profile data[lo:mid] and its slope data[mid:hi] (per metre)
    on a periodic grid, faded in by a half cosine; value, rate, rate2 in time."""
    speed, spacing, fade = p[g, 0], p[g, 1], p[g, 2]
    points = (hi - lo) // 2
    x = t * speed
    s = x / spacing
    i = math.floor(s)
    u = s - i
    i0 = int(i) % points
    i1 = (i0 + 1) % points
    z0, z1 = data[lo + i0], data[lo + i1]
    d0, d1 = data[lo + points + i0] * spacing, data[lo + points + i1] * spacing
    u2 = u * u
    u3 = u2 * u
    z = (2 * u3 - 3 * u2 + 1) * z0 + (u3 - 2 * u2 + u) * d0 + (-2 * u3 + 3 * u2) * z1 + (u3 - u2) * d1
    dz = ((6 * u2 - 6 * u) * z0 + (3 * u2 - 4 * u + 1) * d0 + (-6 * u2 + 6 * u) * z1 + (3 * u2 - 2 * u) * d1) / spacing
    d2z = ((12 * u - 6) * z0 + (6 * u - 4) * d0 + (-12 * u + 6) * z1 + (6 * u - 2) * d1) / (spacing * spacing)
    if x < fade:
        arg = math.pi * x / fade
        w = 0.5 * (1.0 - math.cos(arg))
        dw = 0.5 * math.pi / fade * math.sin(arg)
        d2w = 0.5 * (math.pi / fade) ** 2 * math.cos(arg)
    else:
        w, dw, d2w = 1.0, 0.0, 0.0
    return w * z, speed * (w * dz + dw * z), speed * speed * (w * d2z + 2 * dw * dz + d2w * z)


@njit(cache=True, inline="always", error_model="numpy")
def signal_motion(kind, p, g, data, lo, hi, t):
    """Value, rate and second rate of one signal at t (s); zero before t = 0 and
    right-continuous at jumps. Parameters ``p[g]`` (SI; rows of one array, so that
    no array view is made in the stepping loop) by kind:

    - STEP ``(size, time)``;
    - BUMP ``(height, length, speed, time)``: (H/2)(1 − cos 2πs), s = V(t − t₀)/L in [0, 1];
    - HARMONIC ``(size, frequency, phase)``: A sin(2π f t + φ);
    - SWEEP ``(size, f0, f1, duration, logarithmic)``: A sin θ(t) until the duration;
    - TABLE: times and values in ``data[lo:hi]``;
    - ROAD ``(speed, spacing, fade length)``: profile and slope in ``data[lo:hi]``.
    """
    if t < 0.0 or kind == FIXED:
        return 0.0, 0.0, 0.0
    if kind == STEP:
        return (p[g, 0] if t >= p[g, 1] else 0.0), 0.0, 0.0
    if kind == BUMP:
        s = (t - p[g, 3]) * p[g, 2] / p[g, 1]
        if s < 0.0 or s > 1.0:
            return 0.0, 0.0, 0.0
        w = 2.0 * math.pi * p[g, 2] / p[g, 1]
        half = 0.5 * p[g, 0]
        cos = math.cos(2.0 * math.pi * s)
        return half * (1.0 - cos), half * w * math.sin(2.0 * math.pi * s), half * w * w * cos
    if kind == HARMONIC:
        w = 2.0 * math.pi * p[g, 1]
        sin = math.sin(w * t + p[g, 2])
        return p[g, 0] * sin, p[g, 0] * w * math.cos(w * t + p[g, 2]), -p[g, 0] * w * w * sin
    if kind == SWEEP:
        if t >= p[g, 3]:
            return 0.0, 0.0, 0.0
        theta, d1, d2 = sweep_phase(p, g, t)
        sin, cos = math.sin(theta), math.cos(theta)
        return p[g, 0] * sin, p[g, 0] * cos * d1, p[g, 0] * (-sin * d1 * d1 + cos * d2)
    if kind == TABLE:
        return _table(data, lo, hi, t)
    return _road(p, g, data, lo, hi, t)


@njit(cache=True, inline="always", error_model="numpy")
def signal_span(kind, p, g):
    """Times (s) outside of which :func:`signal_motion` of signal ``p[g]`` is exactly
    zero, value and rates: a bump's passage, a sweep's duration, a step from its time
    on; every signal is zero before t = 0."""
    if kind == FIXED:
        return 0.0, 0.0
    if kind == STEP:
        return max(p[g, 1], 0.0), math.inf
    if kind == BUMP:
        return max(p[g, 3], 0.0), p[g, 3] + p[g, 1] / p[g, 2]
    if kind == SWEEP:
        return 0.0, p[g, 3]
    return 0.0, math.inf


@njit(**HOT)
def signal_series(kind, p, data, t, value, rate, rate2):
    """:func:`signal_motion` of the signal with parameters ``p`` (1 × PARAMETERS) at
    every time of ``t`` (1-D), into the three outputs."""
    for i in range(t.shape[0]):
        value[i], rate[i], rate2[i] = signal_motion(kind, p, 0, data, 0, data.shape[0], t[i])


@njit(cache=True, inline="always", error_model="numpy")
def support_motion(t, program, s):
    """Displacement, velocity and acceleration of support s at t (s): its signal,
    delayed by the support's delay; zero for a fixed support."""
    kind, p, lo, hi, data, support_signal, support_delay, _ = program
    g = support_signal[s]
    if g < 0:
        return 0.0, 0.0, 0.0
    return signal_motion(kind[g], p, g, data, lo[g], hi[g], t - support_delay[s])


@njit(cache=True, inline="always", error_model="numpy")
def force_value(t, program, f):
    """Value of force item f's signal at t (s), before the item's scale."""
    kind, p, lo, hi, data, _, _, force_signal = program
    g = force_signal[f]
    return signal_motion(kind[g], p, g, data, lo[g], hi[g], t)[0]


@njit(cache=True, inline="always", error_model="numpy")
def input_values(t, program, row, U, Ud, Udd, FF):
    """Every support's motion and every force item's value at t (s), into row ``row``
    of U, Ud, Udd (rows × supports) and FF (rows × force items)."""
    for s in range(program[5].shape[0]):
        U[row, s], Ud[row, s], Udd[row, s] = support_motion(t, program, s)
    for f in range(program[7].shape[0]):
        FF[row, f] = force_value(t, program, f)


@njit(**HOT)
def input_series(t, program, U, Ud, Udd, FF):
    """:func:`input_values` at every time of ``t`` (1-D), one row each; a support's
    signal is evaluated only within its span (:func:`signal_span`), zero elsewhere."""
    kind, p, _, _, _, support_signal, support_delay, force_signal = program
    for s in range(support_signal.shape[0]):
        g = support_signal[s]
        on, off = signal_span(kind[g], p, g) if g >= 0 else (math.inf, -math.inf)
        for i in range(t.shape[0]):
            if on <= t[i] - support_delay[s] <= off:
                U[i, s], Ud[i, s], Udd[i, s] = support_motion(t[i], program, s)
            else:
                U[i, s], Ud[i, s], Udd[i, s] = 0.0, 0.0, 0.0
    for f in range(force_signal.shape[0]):
        for i in range(t.shape[0]):
            FF[i, f] = force_value(t[i], program, f)


def encoded(signals) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """``(kind, p, lo, hi, data)`` of a sequence of signals' ``(kind, p, data)`` codes.
    The data arrays are joined (not copied when only one signal has any)."""
    kind = np.array([c[0] for c in signals], dtype=np.int64)
    p = np.zeros((max(len(signals), 1), PARAMETERS))
    lo = np.zeros(len(signals), dtype=np.int64)
    hi = np.zeros(len(signals), dtype=np.int64)
    pieces, offset = [], 0
    for i, (_, parameters, data) in enumerate(signals):
        p[i, : len(parameters)] = parameters
        lo[i] = offset
        offset += len(data)
        hi[i] = offset
        if len(data):
            pieces.append(data)
    if len(pieces) == 1:
        joined = pieces[0]
    elif pieces:
        joined = np.concatenate(pieces)
    else:
        joined = np.zeros(1)
    return kind, p, lo, hi, joined
