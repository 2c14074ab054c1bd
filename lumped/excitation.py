"""Input signals as functions of time: value, first and second derivative, all
analytic (never differenced), vectorised over time.

Each input of a system file becomes a :class:`Signal`. A support follows its input
``delay`` seconds late; every signal is zero before its own time zero. Jumps in
value (a step, or a signal that does not start at zero) are listed by
:meth:`Signal.jumps`, so that the engine can apply them as what they are: an
instantaneous change of support position, which sends an impulse through every
damper attached.

Random roads follow ISO 8608: displacement PSD G_d(n) = G_d(n₀)(n/n₀)^−2 with
n₀ = 0.1 cycle/m and the class's geometric-mean G_d(n₀) (A: 16·10⁻⁶ m³, ×4 per
class), synthesised as a sum of cosines with amplitudes √(2 G_d(n_i) Δn) and random
phases (Shinozuka & Jan, J. Sound Vib. 25 (1972) [recalled from memory]), laid on a
uniform spatial grid by an inverse FFT and read between grid points by cubic Hermite
interpolation of the profile and its exact (spectral) slope.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from lumped import signal_kernels
from lumped.model import (
    BumpInput,
    HarmonicInput,
    RoadInput,
    StepInput,
    SweepInput,
    System,
    TableInput,
)

__all__ = [
    "Signal",
    "signal_for",
    "iso8608_reference_psd",
    "iso8608_psd",
    "ROAD_BAND",
    "ROAD_SPACING",
    "ROAD_POINTS",
    "ROAD_FADE_IN",
]

#: ISO 8608 reference spatial frequency n₀, cycles/m, and class A's G_d(n₀), m³.
N0 = 0.1
CLASS_A_PSD = 16e-6
#: Spatial frequency band synthesised, cycles/m (ISO 8608's classification range is
#: 0.011–2.83; the band reaches past it so that wheel-hop frequencies are excited).
ROAD_BAND = (0.01, 10.0)
#: Grid of the synthesised profile: spacing (m) and number of points (a power of 2);
#: the profile repeats after ROAD_SPACING × ROAD_POINTS ≈ 13 km.
ROAD_SPACING = 0.025
ROAD_POINTS = 2**19
#: Distance (m) over which a road fades in from zero, so every support starts at rest.
ROAD_FADE_IN = 5.0


def iso8608_reference_psd(road_class: str) -> float:
    """G_d(n₀) of an ISO 8608 class (geometric mean of the class), m³."""
    return CLASS_A_PSD * 4.0 ** "ABCDEFGH".index(road_class)


def iso8608_psd(road_class: str, n) -> np.ndarray:
    """Displacement PSD G_d(n), m³ (m² per cycle/m), at spatial frequency ``n`` (cycles/m)."""
    n = np.asarray(n, dtype=float)
    return iso8608_reference_psd(road_class) * (n / N0) ** -2.0


@dataclass(frozen=True)
class Signal:
    """Base: a signal of time, zero before t = 0. Subclasses give :meth:`code`, the
    encoding that :mod:`lumped.signal_kernels` evaluates (the same code the stepping
    kernels run, so that a signal has one definition)."""

    def code(self) -> tuple[int, tuple[float, ...], np.ndarray]:
        """``(kind, parameters, data)`` for :func:`lumped.signal_kernels.signal_motion`."""
        raise NotImplementedError

    def _encoded(self) -> tuple[int, np.ndarray, np.ndarray]:
        kind, parameters, data = self.code()
        p = np.zeros((1, signal_kernels.PARAMETERS))
        p[0, : len(parameters)] = parameters
        return kind, p, data

    def span(self) -> tuple[float, float]:
        """Times (s) outside of which the signal is zero, value and rates (the end may
        be inf)."""
        kind, p, _ = self._encoded()
        return signal_kernels.signal_span(kind, p, 0)

    def motion(self, t):
        """Value, rate and second rate at ``t`` (s, any shape), SI."""
        t = np.asarray(t, dtype=float)
        kind, p, data = self._encoded()
        flat = np.ascontiguousarray(t.ravel())
        parts = [np.empty_like(flat) for _ in range(3)]
        signal_kernels.signal_series(kind, p, data if len(data) else np.zeros(1), flat, *parts)
        shaped = tuple(part.reshape(t.shape) for part in parts)
        return shaped if t.ndim else tuple(float(part) for part in shaped)

    def value(self, t):
        return self.motion(t)[0]

    def rate(self, t):
        return self.motion(t)[1]

    def rate2(self, t):
        return self.motion(t)[2]

    def jumps(self) -> list[tuple[float, float]]:
        """(time, size) of each jump in value, SI."""
        return []

    @property
    def amplitude(self) -> float:
        """A size scale of the signal (its largest |value|, or a bound), SI."""
        raise NotImplementedError


_NO_DATA = np.zeros(0)


@dataclass(frozen=True)
class StepSignal(Signal):
    size: float
    time: float

    def code(self):
        return signal_kernels.STEP, (self.size, self.time), _NO_DATA

    def jumps(self):
        return [(self.time, self.size)] if self.size else []

    @property
    def amplitude(self):
        return abs(self.size)


@dataclass(frozen=True)
class BumpSignal(Signal):
    """(H/2)(1 − cos(2π V (t − t₀)/L)) while the bump is under the wheel."""

    height: float
    length: float
    speed: float
    time: float

    def code(self):
        return signal_kernels.BUMP, (self.height, self.length, self.speed, self.time), _NO_DATA

    @property
    def amplitude(self):
        return abs(self.height)


@dataclass(frozen=True)
class HarmonicSignal(Signal):
    """A sin(2π f t + φ) from t = 0."""

    size: float
    frequency: float
    phase: float

    def code(self):
        return signal_kernels.HARMONIC, (self.size, self.frequency, self.phase), _NO_DATA

    def jumps(self):
        start = self.size * math.sin(self.phase)
        return [(0.0, start)] if abs(start) > 1e-15 * abs(self.size) else []

    @property
    def amplitude(self):
        return abs(self.size)


@dataclass(frozen=True)
class SweepSignal(Signal):
    """A sin θ(t) for 0 ≤ t < T, instantaneous frequency θ'/2π from f₀ to f₁, linear or
    logarithmic in time; zero from T on."""

    size: float
    start: float
    stop: float
    duration: float
    logarithmic: bool

    def code(self):
        parameters = (self.size, self.start, self.stop, self.duration, float(self.logarithmic))
        return signal_kernels.SWEEP, parameters, _NO_DATA

    def jumps(self):
        theta_end = signal_kernels.sweep_phase(np.array([self.code()[1]]), 0, self.duration)[0]
        end = self.size * math.sin(theta_end)
        return [(self.duration, -end)] if abs(end) > 1e-12 * abs(self.size) else []

    @property
    def amplitude(self):
        return abs(self.size)


@dataclass(frozen=True, eq=False)
class TableSignal(Signal):
    """Piecewise-linear through (times, values); held at the end values outside them."""

    times: np.ndarray
    values: np.ndarray

    def __post_init__(self):
        data = np.concatenate([np.asarray(self.times, float), np.asarray(self.values, float)])
        object.__setattr__(self, "_data", data)

    def code(self):
        return signal_kernels.TABLE, (), self._data

    def jumps(self):
        start = float(np.interp(0.0, self.times, self.values))
        return [(0.0, start)] if start != 0.0 else []

    @property
    def amplitude(self):
        return float(np.max(np.abs(self.values)))


@dataclass(frozen=True, eq=False)
class RoadSignal(Signal):
    """An ISO 8608 random road under a wheel moving at ``speed``, from ``seed``: the
    synthesised profile read by cubic Hermite interpolation of its values and exact
    slopes, faded in from zero over :data:`ROAD_FADE_IN`."""

    road_class: str
    speed: float
    seed: int

    def __post_init__(self):
        object.__setattr__(self, "_data", _road_profile(self.road_class, self.seed))

    def code(self):
        return signal_kernels.ROAD, (self.speed, ROAD_SPACING, ROAD_FADE_IN), self._data

    @property
    def amplitude(self):
        return float(np.max(np.abs(self._data[:ROAD_POINTS])))

    def temporal_psd(self, f):
        """One-sided PSD of the road displacement at the wheel, m²/Hz, at ``f`` Hz:
        G_z(f) = G_d(f/V)/V inside the synthesised band, 0 outside."""
        f = np.asarray(f, dtype=float)
        n = f / self.speed
        inside = (n >= ROAD_BAND[0]) & (n <= ROAD_BAND[1])
        return np.where(inside, iso8608_psd(self.road_class, np.where(inside, n, N0)) / self.speed, 0.0)


_PROFILE_CACHE: dict[tuple[str, int], np.ndarray] = {}


def _road_profile(road_class: str, seed: int) -> np.ndarray:
    """Profile z (m) then slope z' (m/m) on the grid x_j = j·ROAD_SPACING, from the
    seed, as one array of 2 × ROAD_POINTS."""
    key = (road_class, seed)
    if key not in _PROFILE_CACHE:
        length = ROAD_SPACING * ROAD_POINTS
        dn = 1.0 / length
        k = np.arange(ROAD_POINTS // 2 + 1)
        n = k * dn
        inside = (n >= ROAD_BAND[0]) & (n <= ROAD_BAND[1])
        amplitude = np.zeros_like(n)
        amplitude[inside] = np.sqrt(2.0 * iso8608_psd(road_class, n[inside]) * dn)
        phase = np.random.default_rng(seed).uniform(0.0, 2 * np.pi, size=n.shape)
        # z(x) = Σ A_k cos(2π n_k x + φ_k) = Re Σ A_k e^{iφ_k} e^{2πi k j / N}
        coefficients = amplitude * np.exp(1j * phase)
        z = np.fft.irfft(coefficients, n=ROAD_POINTS) * (ROAD_POINTS / 2)
        dz = np.fft.irfft(coefficients * (2j * np.pi * n), n=ROAD_POINTS) * (ROAD_POINTS / 2)
        _PROFILE_CACHE[key] = np.concatenate([z, dz])
    return _PROFILE_CACHE[key]


#: Steps below which an input that acts only for a while is too brief for the step.
BRIEF_STEPS = 10


def brief_inputs(system: System, dt: float) -> list[str]:
    """Notes on the inputs of ``system`` that act for fewer than :data:`BRIEF_STEPS`
    steps of ``dt`` (s) — a bump passed in a few steps: the steps may pass over it."""
    notes = []
    for input_id in system.inputs:
        on, off = signal_for(system, input_id).span()
        if math.isfinite(off) and off - on < BRIEF_STEPS * dt:
            notes.append(
                f"input {input_id!r} acts for {off - on:.4g} s, fewer than {BRIEF_STEPS} steps of "
                f"dt = {dt:.4g} s: the steps may pass over it; take dt ≤ {(off - on) / BRIEF_STEPS:.3g} s"
            )
    return notes


def signal_for(system: System, input_id: str) -> Signal:
    """The signal of input ``input_id`` of ``system``, in SI units."""
    item = system.inputs[input_id]
    if isinstance(item, StepInput):
        return StepSignal(item.amplitude, item.time)
    if isinstance(item, BumpInput):
        return BumpSignal(item.height, item.length, item.speed, item.time)
    if isinstance(item, HarmonicInput):
        return HarmonicSignal(item.amplitude, item.frequency, item.phase)
    if isinstance(item, SweepInput):
        return SweepSignal(item.amplitude, item.start, item.stop, item.duration, item.spacing == "logarithmic")
    if isinstance(item, RoadInput):
        return RoadSignal(item.road_class, item.speed, item.seed)
    if isinstance(item, TableInput):
        return TableSignal(np.asarray(item.times, float), np.asarray(item.values, float) * item.scale)
    raise TypeError(f"input {input_id!r} of unknown kind {type(item).__name__}")
