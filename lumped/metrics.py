"""Design figures: ride comfort, suspension travel, dynamic support (tyre) load and
static sag, from a time run or, for a random ISO 8608 road, spectrally from the
frequency response — one table of :class:`Figure` rows that the dashboard, the
command line and sweeps all read.

Two sources, the same keys:

- :func:`run_figures` reads a :class:`~lumped.simulate.RunResult`: RMS and peak of
  each body's acceleration; its ISO 2631-1 frequency-weighted RMS a_w (Wk by
  default), crest factor peak(|a_w|)/a_w and vibration dose value
  VDV = (∫ a_w⁴ dt)^¼; each travel element's peak and RMS deflection from static and
  the time spent beyond its end-stop gap; each load element's RMS dynamic force over
  its static force and the time in lift-off (total force no longer of its static
  sign: a tyre off the ground).
- :func:`road_figures` needs no run: for a stationary random road the output PSD is
  |H(f)|² × the road's one-sided temporal PSD G_z(f) (m²/Hz, ISO 8608 at the given
  speed), the RMS is √(∫ PSD df), and the weighted acceleration has |W(f)|² in the
  integrand. Shares of time beyond an end stop or in lift-off are Gaussian estimates
  (a linear system under a Gaussian road responds Gaussian). The system is the one
  linearised at static equilibrium: end stops, lift-off and asymmetric dampers act
  only in a run.

Every figure is SI: m, m/s², m/s^1.75 (VDV), s, N, or 1 for ratios and shares.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from lumped.assemble import Matrices, assemble
from lumped.errors import LumpedError
from lumped.excitation import ROAD_BAND, RoadSignal
from lumped.frequency import POINTS_PER_DECADE, frequency_grid, frequency_response
from lumped.iso2631 import MIN_SAMPLE_RATE, get_weighting, weighted_signal, weighting_response
from lumped.model import ISO_8608_CLASSES, RoadInput, Spring, System
from lumped.static import static_equilibrium

__all__ = [
    "Figure",
    "Figures",
    "FigureError",
    "run_figures",
    "road_figures",
    "static_figures",
    "figure_value",
    "rms",
    "crest_factor",
    "vibration_dose_value",
    "spectral_rms",
    "gaussian_exceedance",
    "sample_weights",
    "default_items",
    "ROAD_POINTS_PER_DECADE",
]

#: Grid density of the spectral integrals (plus refinement around every mode).
ROAD_POINTS_PER_DECADE = 2 * POINTS_PER_DECADE
#: Relative spread of sample intervals still counted as uniform sampling.
UNIFORM_TOLERANCE = 1e-6

ISO2631 = "ISO 2631-1:1997"
COMMON = "common practice"


class FigureError(LumpedError):
    """A figure asked of a run or system that cannot give it: an id that is not
    there, a channel the run lacks, a window outside the run, no road input."""


@dataclass(frozen=True)
class Figure:
    """One row of the figures table.

    ``key`` is the machine name (the same for a run and for a road, so that the two
    can be compared, e.g. ``"weighted_acceleration_rms"``), ``name`` the text for
    people, ``value`` SI in ``unit`` ("1" for ratios and shares), ``rule`` the standard
    or practice it follows and how it was computed, ``item`` the body or element id,
    ``source`` "static", "run" or "road".
    """

    key: str
    name: str
    value: float
    unit: str
    rule: str
    item: str
    source: str

    def to_json(self) -> dict:
        return {"key": self.key, "name": self.name, "value": self.value, "unit": self.unit,
                "rule": self.rule, "item": self.item, "source": self.source}  # fmt: skip


def figure_value(rows: Sequence[Figure], key: str, item: str) -> float:
    """The value of the row with ``key`` and ``item``.

    Raises
    ------
    FigureError
        No such row.
    """
    for row in rows:
        if row.key == key and row.item == item:
            return row.value
    raise FigureError(f"figures: no figure {key!r} for item {item!r}")


# --------------------------------------------------------------------------- small pure functions


def sample_weights(time: np.ndarray) -> np.ndarray:
    """Each sample's share of the time span, s: half the intervals on either side
    (the trapezoid rule), so that Σ w x is ∫ x dt for a sampled x."""
    t = np.asarray(time, dtype=float)
    if len(t) < 2:
        return np.zeros(len(t))
    dt = np.diff(t)
    w = np.zeros(len(t))
    w[:-1] += 0.5 * dt
    w[1:] += 0.5 * dt
    return w


def rms(values, weights=None) -> float:
    """Root mean square of ``values`` (any unit), weighted by ``weights`` (e.g. the
    samples' time shares) when given."""
    x = np.asarray(values, dtype=float)
    if weights is None:
        return float(np.sqrt(np.mean(x * x)))
    w = np.asarray(weights, dtype=float)
    return float(np.sqrt(np.sum(w * x * x) / np.sum(w)))


def crest_factor(weighted, weights=None) -> float:
    """Peak |a_w| over the RMS a_w (ISO 2631-1's crest factor), dimensionless."""
    value = rms(weighted, weights)
    return float(np.max(np.abs(weighted)) / value) if value > 0 else math.nan


def vibration_dose_value(weighted, weights) -> float:
    """VDV = (∫ a_w⁴ dt)^¼, m/s^1.75, with ``weights`` the samples' time shares (s)."""
    a = np.asarray(weighted, dtype=float)
    return float(np.sum(np.asarray(weights, dtype=float) * a**4) ** 0.25)


def spectral_rms(frequency, psd) -> float:
    """√(∫ PSD df) by the trapezoid rule over the grid ``frequency`` (Hz); ``psd`` is
    one-sided (unit²/Hz)."""
    return float(math.sqrt(max(float(np.trapezoid(np.asarray(psd, dtype=float), np.asarray(frequency, dtype=float))), 0.0)))


def gaussian_exceedance(threshold: float, sigma: float, two_sided: bool) -> float:
    """Share of time a zero-mean Gaussian signal of RMS ``sigma`` spends beyond
    ``threshold``: on both sides (|x| > threshold) or on one side only."""
    if sigma <= 0:
        return 0.0
    tail = math.erfc(threshold / (sigma * math.sqrt(2.0)))
    return tail if two_sided else 0.5 * tail


# --------------------------------------------------------------------------- items


def default_items(system: System, matrices: Matrices | None = None) -> tuple[list[str], list[str], list[str]]:
    """The bodies, travel elements and load elements a figures table covers by default:
    every body; every spring with an end stop or with both ends on bodies (suspension
    travel); every spring with an end on a support (support or tyre load)."""
    matrices = matrices if matrices is not None else assemble(system)
    on_support = np.asarray(matrices.D_s.getnnz(axis=1)).ravel() > 0
    travel, loads = [], []
    for e, (element, kind) in enumerate(zip(matrices.element_ids, matrices.element_kinds, strict=True)):
        if kind != "spring":
            continue
        spring = system.springs.get(element)
        if on_support[e]:
            loads.append(element)
        if (spring is not None and spring.gap is not None) or not on_support[e]:
            travel.append(element)
    return list(matrices.body_ids), travel, loads


def _choose(given, default, known: Sequence[str], what: str) -> list[str]:
    if given is None:
        return list(default)
    if isinstance(given, str):
        given = [given]
    for item in given:
        if item not in known:
            raise FigureError(f"figures: {what} {item!r} does not exist (known: {', '.join(known[:8])}"
                              f"{' …' if len(known) > 8 else ''})")  # fmt: skip
    return list(given)


def _gap(system: System, element: str) -> float | None:
    spring = system.springs.get(element)
    return spring.gap if isinstance(spring, Spring) else None


def static_figures(system: System, matrices: Matrices | None = None, bodies=None, static=None) -> list[Figure]:
    """Static sag of each body: its static deflection under gravity, m (negative = down),
    as ``lumped show`` prints it."""
    matrices = matrices if matrices is not None else assemble(system)
    static = static if static is not None else static_equilibrium(matrices)
    chosen = _choose(bodies, matrices.body_ids, matrices.body_ids, "body")
    return [
        Figure("static_sag", "static sag (negative = down)", static.deflection_of(b), "m",
               "static equilibrium under gravity", b, "static")  # fmt: skip
        for b in chosen
    ]


# --------------------------------------------------------------------------- from a run


def _uniform_rate(time: np.ndarray) -> tuple[float, int]:
    """Sample rate (Hz) and the number of leading samples on a uniform grid (a
    shortened last interval is left out)."""
    dt = np.diff(time)
    if len(dt) == 0 or not dt[0] > 0:
        raise FigureError("figures: the run has fewer than two samples")
    step = dt[0]
    count = len(time)
    if abs(dt[-1] - step) > UNIFORM_TOLERANCE * step:
        count -= 1
        dt = dt[:-1]
    if len(dt) and np.max(np.abs(dt - step)) > UNIFORM_TOLERANCE * step:
        raise FigureError("figures: the run's samples are not evenly spaced; the frequency weighting "
                          "needs a fixed output rate")  # fmt: skip
    return 1.0 / step, count


class Figures(list):
    """The rows of a figures table (a list of :class:`Figure`), and ``notes``: the
    figures left out and why (text for people)."""

    def __init__(self, rows=(), notes=()):
        super().__init__(rows)
        self.notes = list(notes)


def run_figures(
    system: System,
    result,
    *,
    bodies: Sequence[str] | None = None,
    travel: Sequence[str] | None = None,
    loads: Sequence[str] | None = None,
    weighting: str = "Wk",
    start: float = 0.0,
) -> list[Figure]:
    """The figures table of a run of ``system``.

    Parameters
    ----------
    system : System
        The system that was run (for gaps and static loads).
    result : RunResult
        The run; the frequency-weighted figures need evenly spaced samples at
        ≥ 160 Hz (:data:`lumped.iso2631.MIN_SAMPLE_RATE`); from coarser samples they
        are left out, and the table's ``notes`` say so.
    bodies, travel, loads : ids, optional
        Bodies for ride figures, elements for travel, elements for load figures
        (defaults: :func:`default_items`).
    weighting : "Wk" or "Wd"
        ISO 2631-1 weighting of the acceleration (Wk: vertical).
    start : float
        Statistics over t ≥ ``start`` (s), to leave a start-up transient out; the
        weighting filter runs from the first sample.

    Raises
    ------
    FigureError
        A diverged run, a channel the run lacks, an unknown id, or ``start`` at or
        after the end of the run.
    """
    w = get_weighting(weighting)
    if getattr(result, "status", "completed") == "diverged":
        raise FigureError(f"figures: the run diverged ({result.message}); its figures would mean nothing")
    time = np.asarray(result.time, dtype=float)
    if len(time) < 2:
        raise FigureError("figures: the run has fewer than two samples")
    if not (math.isfinite(start) and start < time[-1]):
        raise FigureError(f"figures: start {start:g} s is at or after the end of the run ({time[-1]:g} s)")
    matrices = assemble(system)
    if tuple(matrices.body_ids) != tuple(result.body_ids):
        raise FigureError("figures: the run's bodies are not the system's; pass the system that was run")
    default_b, default_t, default_l = default_items(system, matrices)
    chosen_b = _choose(bodies, default_b, result.body_ids, "body")
    chosen_t = _choose(travel, default_t, result.element_ids, "element")
    chosen_l = _choose(loads, default_l, result.element_ids, "element")
    for name, needed in (("acceleration", chosen_b), ("deflection", chosen_t), ("force", chosen_l)):
        array = getattr(result, name, None)
        if needed and (array is None or np.shape(array)[0] != len(time)):
            raise FigureError(f"figures: the run has no {name} channel ({needed[0]}.{name}), which the figures need")
    static = static_equilibrium(matrices)
    rows = static_figures(system, matrices, chosen_b, static)

    rate, uniform = _uniform_rate(time) if chosen_b else (math.nan, len(time))
    weighted = rate >= MIN_SAMPLE_RATE
    notes = [] if weighted or not chosen_b else [
        f"no frequency-weighted figures (a_w, crest factor, VDV): the samples come at {rate:.6g} Hz, and the "
        f"{w.name} weighting, which reaches 80 Hz, needs at least {MIN_SAMPLE_RATE:g} Hz; raise the output rate"]  # fmt: skip
    window = time >= start
    weights = _window_weights(time, window)
    span = f"over {time[window][0]:g}–{time[-1]:g} s"
    uniform_window = window[:uniform]
    uniform_weights = _window_weights(time[:uniform], uniform_window)
    for b in chosen_b:
        a = np.asarray(result.acceleration[:, _index(result.body_ids)[b]], dtype=float)
        rows += [
            Figure("acceleration_rms", "RMS acceleration", rms(a, weights), "m/s^2", f"{COMMON}, {span}", b, "run"),
            Figure("acceleration_peak", "peak acceleration", float(np.max(np.abs(a[window]))), "m/s^2",
                   f"{COMMON}, largest |a| {span}", b, "run"),
        ]  # fmt: skip
        if not weighted:
            continue
        aw = weighted_signal(a[:uniform], rate, w)
        aw_rms = rms(aw, uniform_weights)
        rows += [
            Figure("weighted_acceleration_rms", f"frequency-weighted RMS acceleration a_w ({w.name})", aw_rms,
                   "m/s^2", f"{ISO2631}, {w.name} weighting, RMS {span}", b, "run"),
            Figure("crest_factor", f"crest factor ({w.name})", crest_factor(aw[uniform_window], uniform_weights[uniform_window]),
                   "1", f"{ISO2631}, peak |a_w| / a_w; above 9 the RMS method understates shocks, use the VDV",
                   b, "run"),
            Figure("vibration_dose_value", f"vibration dose value ({w.name})", vibration_dose_value(aw, uniform_weights),
                   "m/s^1.75", f"{ISO2631}, (∫ a_w⁴ dt)^¼ {span}", b, "run"),
        ]  # fmt: skip
    for e in chosen_t:
        d = np.asarray(result.deflection[:, _index(result.element_ids)[e]], dtype=float)
        rows += [
            Figure("travel_peak", "peak travel (from static)", float(np.max(np.abs(d[window]))), "m",
                   f"{COMMON}, largest |deflection − static| {span}", e, "run"),
            Figure("travel_rms", "RMS travel (from static)", rms(d, weights), "m", f"{COMMON}, {span}", e, "run"),
        ]  # fmt: skip
        gap = _gap(system, e)
        if gap is not None:
            beyond = np.abs(d) > gap
            rows.append(Figure("end_stop_time", "time against the end stop", float(np.sum(weights[beyond])), "s",
                               f"{COMMON}, |deflection − static| > gap {gap:g} m, {span}", e, "run"))  # fmt: skip
            rows.append(Figure("end_stop_share", "share of time against the end stop",
                               float(np.sum(weights[beyond]) / np.sum(weights)), "1",
                               f"{COMMON}, |deflection − static| > gap {gap:g} m, {span}", e, "run"))  # fmt: skip
    for e in chosen_l:
        rows += _run_load_rows(e, np.asarray(result.force[:, _index(result.element_ids)[e]], dtype=float),
                               static.force_in(e), weights, span, _one_sided(system, e))  # fmt: skip
    return Figures(rows, notes)


def _window_weights(time: np.ndarray, window: np.ndarray) -> np.ndarray:
    """Time shares (s) of the samples inside ``window``, zero outside."""
    out = np.zeros(len(time))
    out[window] = sample_weights(time[window])
    return out


@lru_cache(maxsize=16)
def _index(ids: tuple[str, ...]) -> dict[str, int]:
    """Position of each id (cached: a figures table looks up every item)."""
    return {name: i for i, name in enumerate(ids)}


def _one_sided(system: System, element: str) -> bool:
    """True for a spring that can lift off (acts in compression or tension only)."""
    spring = system.springs.get(element)
    return isinstance(spring, Spring) and spring.acts != "both"


def _run_load_rows(element: str, force: np.ndarray, static_force: float, weights: np.ndarray, span: str,
                   one_sided: bool) -> list[Figure]:  # fmt: skip
    dynamic = force - static_force
    sigma = rms(dynamic, weights)
    rows = [Figure("dynamic_load_rms", "RMS dynamic load", sigma, "N", f"{COMMON}, total − static force, {span}",
                   element, "run")]  # fmt: skip
    if static_force != 0:
        rows.append(Figure("dynamic_load_ratio", "RMS dynamic load / static load", sigma / abs(static_force), "1",
                           f"{COMMON}, static load {static_force:.6g} N, {span}", element, "run"))  # fmt: skip
    if static_force != 0:
        # A one-sided spring (a tyre) lifts off; a two-way one (a mount) has its force reversed.
        lifted = np.sign(force) * np.sign(static_force) <= 0
        key, name = ("lift_off", "in lift-off") if one_sided else ("force_reversal", "with the force reversed")
        rows += [
            Figure(f"{key}_time", f"time {name}", float(np.sum(weights[lifted])), "s",
                   f"{COMMON}, total force not of its static sign, {span}", element, "run"),
            Figure(f"{key}_share", f"share of time {name}", float(np.sum(weights[lifted]) / np.sum(weights)), "1",
                   f"{COMMON}, total force not of its static sign, {span}", element, "run"),
        ]  # fmt: skip
    return rows


# --------------------------------------------------------------------------- from a road, spectrally


@dataclass(frozen=True)
class _Road:
    id: str
    road_class: str
    speed: float
    seed: int
    supports: tuple[tuple[str, float], ...]  # (support id, delay s)


def _roads(system: System, matrices: Matrices, road, road_class, speed, supports) -> list[_Road]:
    roads = {k: v for k, v in system.inputs.items() if isinstance(v, RoadInput)}
    if road is not None and road not in roads:
        known = ", ".join(roads) or "none"
        raise FigureError(f"road figures: {road!r} is not a road input of the system (road inputs: {known})")
    chosen = [road] if road is not None else list(roads)
    if road_class is not None and road_class not in ISO_8608_CLASSES:
        raise FigureError(f"road figures: class must be an ISO 8608 class A to H, got {road_class!r}")
    if speed is not None and not (math.isfinite(speed) and speed > 0):
        raise FigureError(f"road figures: speed must be positive, got {speed!r} m/s")
    if supports is not None:
        supports = [supports] if isinstance(supports, str) else list(supports)
        for s in supports:
            if s not in matrices.support_ids:
                raise FigureError(f"road figures: support {s!r} does not exist "
                                  f"(supports: {', '.join(matrices.support_ids) or 'none'})")  # fmt: skip
        if not supports:
            raise FigureError("road figures: the list of supports is empty")
    out = []
    if not chosen:
        if road_class is None or speed is None or supports is None:
            raise FigureError("road figures: the system has no road input; give a road class, a speed and the "
                              "supports the road drives")  # fmt: skip
        delays = tuple((s, system.supports[s].delay if s in system.supports else 0.0) for s in supports)
        return [_Road("road", road_class, float(speed), 0, delays)]
    for rid in chosen:
        item = roads[rid]
        driven = [s for s in matrices.support_ids if system.supports[s].motion == rid] if supports is None else supports
        if not driven:
            raise FigureError(f"road figures: no support follows road input {rid!r}")
        out.append(_Road(rid, road_class or item.road_class, float(speed or item.speed), item.seed,
                         tuple((s, system.supports[s].delay) for s in driven)))  # fmt: skip
    return out


def road_figures(
    system: System,
    road: str | None = None,
    *,
    road_class: str | None = None,
    speed: float | None = None,
    supports: Sequence[str] | None = None,
    bodies: Sequence[str] | None = None,
    travel: Sequence[str] | None = None,
    loads: Sequence[str] | None = None,
    weighting: str = "Wk",
    points_per_decade: int = ROAD_POINTS_PER_DECADE,
) -> list[Figure]:
    """The figures table of ``system`` driven by a random ISO 8608 road, computed
    spectrally from the frequency response (no run).

    Parameters
    ----------
    road : str, optional
        A road input id of the system (default: every road input, taken as
        independent tracks whose variances add).
    road_class, speed : optional
        Replace the road's ISO 8608 class (A–H) and speed (m/s); with a system that
        has no road input, give both and ``supports``.
    supports : ids, optional
        Supports the road drives (default: those following the road input), each
        with its own delay (a rear wheel on the front wheel's track).
    bodies, travel, loads : ids, optional
        As in :func:`run_figures`.
    weighting : "Wk" or "Wd"
        ISO 2631-1 weighting of the acceleration.
    points_per_decade : int
        Density of the integration grid, which is also refined around every mode.

    Notes
    -----
    PSD_y(f) = |H_y(f)|² G_z(f) with H_y = Σ_s H_{y,s}(f) e^{−i2πf τ_s} over the driven
    supports (delays τ_s), G_z(f) = G_d(f/V)/V the road's one-sided temporal PSD
    (m²/Hz) on the synthesised band, and RMS_y = √(∫ PSD_y df); the weighted
    acceleration has |W(f)|² in the integrand. The system is linearised at static
    equilibrium (end stops, one-sided springs and asymmetric dampers act only in a
    run); shares beyond an end stop and in lift-off assume a Gaussian response.

    Raises
    ------
    FigureError
        An unknown id, a bad class or speed, or no road to drive the system.
    """
    w = get_weighting(weighting)
    matrices = assemble(system)
    roads = _roads(system, matrices, road, road_class, speed, supports)
    default_b, default_t, default_l = default_items(system, matrices)
    chosen_b = _choose(bodies, default_b, matrices.body_ids, "body")
    chosen_t = _choose(travel, default_t, matrices.element_ids, "element")
    chosen_l = _choose(loads, default_l, matrices.element_ids, "element")
    static = static_equilibrium(matrices)
    rows = static_figures(system, matrices, chosen_b, static)

    from lumped.frequency import _modes

    modes = _modes(matrices)
    keys = ("acc", "weighted", "travel", "load")
    variance = {k: {} for k in keys}
    for item in roads:
        lo, hi = ROAD_BAND[0] * item.speed, ROAD_BAND[1] * item.speed
        # Just inside the band, where the road PSD is defined.
        grid = frequency_grid(matrices, lo * (1 + 1e-12), hi * (1 - 1e-12), points_per_decade, True, modes)
        ids = [s for s, _ in item.supports]
        response = frequency_response(matrices, grid, inputs=ids,
                                      outputs=list(dict.fromkeys(chosen_b + chosen_t + chosen_l)))  # fmt: skip
        omega = response.omega
        phase = np.stack([np.exp(-1j * omega * delay) for _, delay in item.supports], axis=1)  # (F, supports)
        g = RoadSignal(item.road_class, item.speed, item.seed).temporal_psd(grid)
        weight2 = np.abs(weighting_response(w, grid)) ** 2

        def combined(array, index, phase=phase):
            return np.sum(array[:, index, :] * phase, axis=1)

        for b in chosen_b:
            a = combined(response.acceleration, _index(response.body_ids)[b])
            power = np.abs(a) ** 2 * g
            variance["acc"][b] = variance["acc"].get(b, 0.0) + spectral_rms(grid, power) ** 2
            variance["weighted"][b] = variance["weighted"].get(b, 0.0) + spectral_rms(grid, power * weight2) ** 2
        for e in chosen_t:
            d = combined(response.deflection, _index(response.element_ids)[e])
            variance["travel"][e] = variance["travel"].get(e, 0.0) + spectral_rms(grid, np.abs(d) ** 2 * g) ** 2
        for e in chosen_l:
            f = combined(response.force, _index(response.element_ids)[e])
            variance["load"][e] = variance["load"].get(e, 0.0) + spectral_rms(grid, np.abs(f) ** 2 * g) ** 2

    what = "; ".join(f"ISO 8608 class {r.road_class} at {r.speed:g} m/s under {', '.join(s for s, _ in r.supports)}"
                     for r in roads)  # fmt: skip
    spectral = f"spectral, √∫|H|²G df, linearised, {what}"
    for b in chosen_b:
        rows += [
            Figure("acceleration_rms", "RMS acceleration", math.sqrt(variance["acc"][b]), "m/s^2",
                   f"{COMMON}, {spectral}", b, "road"),
            Figure("weighted_acceleration_rms", f"frequency-weighted RMS acceleration a_w ({w.name})",
                   math.sqrt(variance["weighted"][b]), "m/s^2", f"{ISO2631}, {w.name} weighting, {spectral}", b, "road"),
        ]  # fmt: skip
    for e in chosen_t:
        sigma = math.sqrt(variance["travel"][e])
        rows.append(Figure("travel_rms", "RMS travel (from static)", sigma, "m", f"{COMMON}, {spectral}", e, "road"))
        gap = _gap(system, e)
        if gap is not None:
            rows.append(Figure("end_stop_share", "share of time against the end stop",
                               gaussian_exceedance(gap, sigma, two_sided=True), "1",
                               f"{COMMON}, Gaussian response, P(|deflection| > gap {gap:g} m), {spectral}", e, "road"))  # fmt: skip
    for e in chosen_l:
        sigma = math.sqrt(variance["load"][e])
        static_force = static.force_in(e)
        rows.append(Figure("dynamic_load_rms", "RMS dynamic load", sigma, "N", f"{COMMON}, {spectral}", e, "road"))
        if static_force != 0:
            rows.append(Figure("dynamic_load_ratio", "RMS dynamic load / static load", sigma / abs(static_force),
                               "1", f"{COMMON}, static load {static_force:.6g} N, {spectral}", e, "road"))  # fmt: skip
        if static_force != 0:
            key, name = ("lift_off", "in lift-off") if _one_sided(system, e) else (
                "force_reversal", "with the force reversed")
            rows.append(Figure(f"{key}_share", f"share of time {name}",
                               gaussian_exceedance(abs(static_force), sigma, two_sided=False), "1",
                               f"{COMMON}, Gaussian response, P(dynamic load beyond the static load), {spectral}",
                               e, "road"))  # fmt: skip
    return rows
