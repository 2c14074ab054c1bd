"""Runs with scipy's adaptive integrators (``solve_ivp``), for comparison with the
fixed-step engine. The right-hand side is the engine's own compiled element loop,
so both integrate the same equations; only the stepping differs."""

from __future__ import annotations

import numpy as np
from scipy.integrate import solve_ivp

from lumped import kernels

__all__ = ["simulate_adaptive", "ADAPTIVE_RTOL", "ADAPTIVE_ATOL"]

#: Default tolerances of the adaptive comparison runs (solve_ivp's rtol and atol).
ADAPTIVE_RTOL = 1e-8
ADAPTIVE_ATOL = 1e-10


def simulate_adaptive(
    system,
    method: str,
    stepper_id: str,
    duration: float,
    output_rate: float | None,
    rtol: float = ADAPTIVE_RTOL,
    atol: float = ADAPTIVE_ATOL,
):
    """Run ``system`` (a System or a Prepared one) with ``solve_ivp(method=...)`` and sample it at ``output_rate``
    (Hz; default 1 kHz), never stepping further than one sample interval.
    Returns a :class:`~lumped.simulate.RunResult`."""
    from lumped.simulate import Event, Prepared, RunError, _Engine, prepare

    prepared = system if isinstance(system, Prepared) else prepare(system)
    matrices = prepared.matrices
    rate = output_rate or 1000.0
    samples = int(round(duration * rate))
    dt = duration / max(samples, 1)
    engine = _Engine(prepared, _AdaptiveStepper(stepper_id), dt, duration, max(samples, 1), 1,
                     max(samples, 1) + 2)  # fmt: skip
    n = matrices.n
    acc, rates = np.zeros(n), np.zeros(3)

    def rhs(t, y):
        u, ud, udd, F = engine.inputs.at(np.array(t))
        engine._accelerations(y[:n], y[n:2 * n], u, ud, udd, F, acc, rates)
        return np.concatenate([y[n:2 * n], acc, rates])

    times = np.linspace(0.0, duration, max(samples, 1) + 1)
    jumps = engine.inputs.jumps(duration)
    for time, s, size in [j for j in jumps if j[0] == 0.0]:
        engine._apply_jump(s, size, time)
    bounds = sorted({0.0, duration, *[j[0] for j in jumps if j[0] > 0.0]})
    y = np.concatenate([engine.q, engine.v, engine.energy])
    contact = _contact_events(engine)
    pieces = []
    evaluations = 0
    for a, b in zip(bounds[:-1], bounds[1:], strict=True):
        inside = np.union1d(times[(times >= a) & (times <= b)], [a, b])
        # max_step: an adaptive method that sees a quiet start would otherwise step
        # clean over a short bump or pulse that comes later.
        solution = solve_ivp(rhs, (a, b), y, method=method, t_eval=inside, rtol=rtol, atol=atol,
                             max_step=1.0 / rate, events=contact or None)  # fmt: skip
        evaluations += solution.nfev
        if solution.status < 0:
            raise RunError(f"{stepper_id} failed at t = {solution.t[-1] if len(solution.t) else a:.6g} s: {solution.message}")
        pieces.append((solution.t, solution.y))
        y = solution.y[:, -1]
        if contact:
            _record_contacts(engine, solution.t_events, b, y)
        for time, s, size in [j for j in jumps if j[0] == b]:
            engine.q, engine.v, engine.energy = y[:n].copy(), y[n:2 * n].copy(), y[2 * n:].copy()
            engine._apply_jump(s, size, time)
            y = np.concatenate([engine.q, engine.v, engine.energy])
    t_all = np.concatenate([p[0] for p in pieces])
    y_all = np.concatenate([p[1] for p in pieces], axis=1)
    t_all, keep = np.unique(t_all, return_index=True)
    y_all = y_all[:, keep]
    count = len(t_all)
    engine.out_q = y_all[:n].T.copy()
    engine.out_v = y_all[n:2 * n].T.copy()
    engine.out_e = y_all[2 * n:].T.copy()
    engine.out_a = np.zeros_like(engine.out_q)
    for i, t in enumerate(t_all):
        u, ud, udd, F = engine.inputs.at(np.array(t))
        engine._accelerations(engine.out_q[i], engine.out_v[i], u, ud, udd, F, engine.out_a[i], rates)
    engine.count = count
    engine.out_step = np.round(t_all / dt).astype(np.int64)
    engine.h = dt
    result = engine._result("completed", f"{evaluations} right-hand-side evaluations", samples, None)
    result.time = t_all
    result.events = [e for e in result.events if isinstance(e, Event)]
    return result


def _contact_events(engine) -> list:
    """solve_ivp event functions, one per watched element (one-sided spring, end stop):
    the value whose sign change is a contact change (see lumped.kernels._contact_values)."""
    n = engine.m.n
    values = np.zeros(len(engine.watch_element))

    def contact_values(t, y):
        u, *_ = engine.inputs.at(np.array(t))
        kernels._contact_values(y[:n], np.reshape(u, (1, -1)), 0, n, engine.watch_element,
                                engine.watch_kind, engine.table.args(), values)  # fmt: skip
        return values

    return [lambda t, y, w=w: contact_values(t, y)[w] for w in range(len(values))]


def _record_contacts(engine, event_times, end: float, y_end: np.ndarray) -> None:
    """Events of one piece of an adaptive run, in time order: each root of a watched
    element's value flips its contact state. Leaves the values at the piece's ``end``
    in ``engine.watch_prev`` (a jump there compares against them)."""
    from lumped.simulate import Event

    positive = engine.watch_prev > 0
    for time, w in sorted((float(t), w) for w, times in enumerate(event_times) for t in times):
        positive[w] = not positive[w]
        kind = engine._event_kind(w, 1.0 if positive[w] else -1.0)
        engine.events.append(Event(time, engine.m.element_ids[engine.watch_element[w]], kind))
    u, *_ = engine.inputs.at(np.array(end))
    kernels._contact_values(y_end[: engine.m.n], np.reshape(u, (1, -1)), 0, engine.m.n, engine.watch_element,
                            engine.watch_kind, engine.table.args(), engine.watch_prev)  # fmt: skip


class _AdaptiveStepper:
    """Stands in for a catalogue stepper in the result's bookkeeping."""

    def __init__(self, stepper_id: str):
        self.id = stepper_id
