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
    """Base: a signal of time, zero before t = 0. Subclasses give ``_value``,
    ``_rate`` (first derivative) and ``_rate2`` (second), each for t ≥ 0."""

    def value(self, t):
        t = np.asarray(t, dtype=float)
        return np.where(t >= 0, self._value(np.maximum(t, 0.0)), 0.0)

    def rate(self, t):
        t = np.asarray(t, dtype=float)
        return np.where(t >= 0, self._rate(np.maximum(t, 0.0)), 0.0)

    def rate2(self, t):
        t = np.asarray(t, dtype=float)
        return np.where(t >= 0, self._rate2(np.maximum(t, 0.0)), 0.0)

    def motion(self, t):
        """Value, rate and second rate at ``t`` together (one pass where it pays)."""
        t = np.asarray(t, dtype=float)
        started = t >= 0
        parts = self._motion(np.maximum(t, 0.0))
        return tuple(np.where(started, part, 0.0) for part in parts)

    def _motion(self, t):
        return self._value(t), self._rate(t), self._rate2(t)

    def jumps(self) -> list[tuple[float, float]]:
        """(time, size) of each jump in value, SI."""
        return []

    @property
    def amplitude(self) -> float:
        """A size scale of the signal (its largest |value|, or a bound), SI."""
        raise NotImplementedError


@dataclass(frozen=True)
class StepSignal(Signal):
    size: float
    time: float

    def _value(self, t):
        return np.where(t >= self.time, self.size, 0.0)

    def _rate(self, t):
        return np.zeros_like(t)

    _rate2 = _rate

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

    def _phase(self, t):
        s = (t - self.time) * self.speed / self.length
        return s, (s >= 0) & (s <= 1)

    def _value(self, t):
        s, on = self._phase(t)
        return np.where(on, 0.5 * self.height * (1 - np.cos(2 * np.pi * s)), 0.0)

    def _rate(self, t):
        s, on = self._phase(t)
        w = 2 * np.pi * self.speed / self.length
        return np.where(on, 0.5 * self.height * w * np.sin(2 * np.pi * s), 0.0)

    def _rate2(self, t):
        s, on = self._phase(t)
        w = 2 * np.pi * self.speed / self.length
        return np.where(on, 0.5 * self.height * w * w * np.cos(2 * np.pi * s), 0.0)

    def _motion(self, t):
        s, on = self._phase(t)
        w = 2 * np.pi * self.speed / self.length
        half = np.where(on, 0.5 * self.height, 0.0)
        cos, sin = np.cos(2 * np.pi * s), np.sin(2 * np.pi * s)
        return half * (1 - cos), half * w * sin, half * w * w * cos

    @property
    def amplitude(self):
        return abs(self.height)


@dataclass(frozen=True)
class HarmonicSignal(Signal):
    """A sin(2π f t + φ) from t = 0."""

    size: float
    frequency: float
    phase: float

    def _value(self, t):
        return self.size * np.sin(2 * np.pi * self.frequency * t + self.phase)

    def _rate(self, t):
        w = 2 * np.pi * self.frequency
        return self.size * w * np.cos(w * t + self.phase)

    def _rate2(self, t):
        w = 2 * np.pi * self.frequency
        return -self.size * w * w * np.sin(w * t + self.phase)

    def _motion(self, t):
        w = 2 * np.pi * self.frequency
        sin, cos = np.sin(w * t + self.phase), np.cos(w * t + self.phase)
        return self.size * sin, self.size * w * cos, -self.size * w * w * sin

    def jumps(self):
        start = self.size * math.sin(self.phase)
        return [(0.0, start)] if abs(start) > 1e-15 * abs(self.size) else []

    @property
    def amplitude(self):
        return abs(self.size)


@dataclass(frozen=True)
class SweepSignal(Signal):
    """A sin θ(t) for 0 ≤ t ≤ T, instantaneous frequency θ'/2π from f₀ to f₁, linear or
    logarithmic in time; zero after T."""

    size: float
    start: float
    stop: float
    duration: float
    logarithmic: bool

    def _theta(self, t):
        f0, f1, T = self.start, self.stop, self.duration
        if self.logarithmic and f1 != f0:
            k = math.log(f1 / f0) / T
            theta = 2 * np.pi * f0 * np.expm1(k * t) / k
            d1 = 2 * np.pi * f0 * np.exp(k * t)
            d2 = d1 * k
        else:
            rate = (f1 - f0) / T
            theta = 2 * np.pi * (f0 * t + 0.5 * rate * t * t)
            d1 = 2 * np.pi * (f0 + rate * t)
            d2 = np.full_like(t, 2 * np.pi * rate)
        return theta, d1, d2, t < T

    def _value(self, t):
        theta, _, _, on = self._theta(t)
        return np.where(on, self.size * np.sin(theta), 0.0)

    def _rate(self, t):
        theta, d1, _, on = self._theta(t)
        return np.where(on, self.size * np.cos(theta) * d1, 0.0)

    def _rate2(self, t):
        theta, d1, d2, on = self._theta(t)
        return np.where(on, self.size * (-np.sin(theta) * d1 * d1 + np.cos(theta) * d2), 0.0)

    def jumps(self):
        theta_end = self._theta(np.array([self.duration]))[0][0]
        end = self.size * math.sin(theta_end)
        return [(self.duration, -end)] if abs(end) > 1e-12 * abs(self.size) else []

    @property
    def amplitude(self):
        return abs(self.size)


@dataclass(frozen=True)
class TableSignal(Signal):
    """Piecewise-linear through (times, values); held at the end values outside them."""

    times: np.ndarray
    values: np.ndarray

    def _value(self, t):
        return np.interp(t, self.times, self.values)

    def _rate(self, t):
        slopes = np.diff(self.values) / np.diff(self.times)
        i = np.searchsorted(self.times, t, side="right") - 1
        inside = (i >= 0) & (i < len(slopes))
        return np.where(inside, slopes[np.clip(i, 0, len(slopes) - 1)], 0.0)

    def _rate2(self, t):
        return np.zeros_like(t)

    def jumps(self):
        start = float(np.interp(0.0, self.times, self.values))
        return [(0.0, start)] if start != 0.0 else []

    @property
    def amplitude(self):
        return float(np.max(np.abs(self.values)))


@dataclass(frozen=True, eq=False)
class RoadSignal(Signal):
    """An ISO 8608 random road under a wheel moving at ``speed``, from ``seed``."""

    road_class: str
    speed: float
    seed: int

    def __post_init__(self):
        object.__setattr__(self, "_grid", _road_profile(self.road_class, self.seed))

    def _position(self, t):
        return t * self.speed

    def _interp(self, x):
        """Cubic Hermite interpolation of profile z and slope z' (per metre): z, z', z''."""
        z, dz = self._grid
        h = ROAD_SPACING
        s = x / h
        i = np.floor(s).astype(np.int64)
        u = s - i
        i0 = i % ROAD_POINTS
        i1 = (i + 1) % ROAD_POINTS
        z0, z1, d0, d1 = z[i0], z[i1], dz[i0] * h, dz[i1] * h
        u2, u3 = u * u, u * u * u
        value = (2 * u3 - 3 * u2 + 1) * z0 + (u3 - 2 * u2 + u) * d0 + (-2 * u3 + 3 * u2) * z1 + (u3 - u2) * d1
        slope = ((6 * u2 - 6 * u) * z0 + (3 * u2 - 4 * u + 1) * d0 + (-6 * u2 + 6 * u) * z1 + (3 * u2 - 2 * u) * d1) / h
        curve = ((12 * u - 6) * z0 + (6 * u - 4) * d0 + (-12 * u + 6) * z1 + (6 * u - 2) * d1) / (h * h)
        return value, slope, curve

    def _fade(self, x):
        """Half-cosine fade-in over ROAD_FADE_IN metres: w, w', w'' per metre."""
        L = ROAD_FADE_IN
        on = x < L
        arg = np.pi * np.minimum(x, L) / L
        w = np.where(on, 0.5 * (1 - np.cos(arg)), 1.0)
        dw = np.where(on, 0.5 * np.pi / L * np.sin(arg), 0.0)
        d2w = np.where(on, 0.5 * (np.pi / L) ** 2 * np.cos(arg), 0.0)
        return w, dw, d2w

    def _value(self, t):
        x = self._position(t)
        z, _, _ = self._interp(x)
        w, _, _ = self._fade(x)
        return w * z

    def _rate(self, t):
        x = self._position(t)
        z, dz, _ = self._interp(x)
        w, dw, _ = self._fade(x)
        return self.speed * (w * dz + dw * z)

    def _rate2(self, t):
        x = self._position(t)
        z, dz, d2z = self._interp(x)
        w, dw, d2w = self._fade(x)
        return self.speed**2 * (w * d2z + 2 * dw * dz + d2w * z)

    def _motion(self, t):
        x = self._position(t)
        z, dz, d2z = self._interp(x)
        w, dw, d2w = self._fade(x)
        v = self.speed
        return w * z, v * (w * dz + dw * z), v * v * (w * d2z + 2 * dw * dz + d2w * z)

    @property
    def amplitude(self):
        return float(np.max(np.abs(self._grid[0])))

    def temporal_psd(self, f):
        """One-sided PSD of the road displacement at the wheel, m²/Hz, at ``f`` Hz:
        G_z(f) = G_d(f/V)/V inside the synthesised band, 0 outside."""
        f = np.asarray(f, dtype=float)
        n = f / self.speed
        inside = (n >= ROAD_BAND[0]) & (n <= ROAD_BAND[1])
        return np.where(inside, iso8608_psd(self.road_class, np.where(inside, n, N0)) / self.speed, 0.0)


_PROFILE_CACHE: dict[tuple[str, int], tuple[np.ndarray, np.ndarray]] = {}


def _road_profile(road_class: str, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Profile z (m) and slope z' (m/m) on the grid x_j = j·ROAD_SPACING, from the seed."""
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
        _PROFILE_CACHE[key] = (z, dz)
    return _PROFILE_CACHE[key]


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
