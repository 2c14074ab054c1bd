"""ISO 2631-1 (1997) frequency weightings for whole-body vibration, as analogue
transfer functions and as a filter for sampled accelerations.

Each weighting is the product of four analogue stages (ISO 2631-1, Annex A), with
s = iω and ω_k = 2π f_k:

- band-limiting high-pass  H_h(s) = s² / (s² + ω₁ s/Q₁ + ω₁²),  Q₁ = 1/√2;
- band-limiting low-pass   H_l(s) = ω₂² / (s² + ω₂ s/Q₁ + ω₂²);
- acceleration–velocity transition
  H_t(s) = (1 + s/ω₃) / (1 + s/(Q₄ ω₄) + s²/ω₄²);
- upward step  H_s(s) = (s² + ω₅ s/Q₅ + ω₅²) / (s² + ω₆ s/Q₆ + ω₆²)
  (gain (f₅/f₆)² at low frequency, 1 at high frequency; Wk only).

Parameters (Hz): Wk (vertical, seated or standing) f₁ 0.4, f₂ 100, f₃ = f₄ = 12.5,
Q₄ 0.63, f₅ 2.37, Q₅ 0.91, f₆ 3.35, Q₆ 0.91; Wd (horizontal) f₁ 0.4, f₂ 100,
f₃ = f₄ = 2.0, Q₄ 0.63, no upward step.

All accelerations are m/s², frequencies Hz, sample rates Hz.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from lumped.errors import LumpedError

__all__ = [
    "Weighting",
    "WeightingError",
    "WK",
    "WD",
    "WEIGHTINGS",
    "get_weighting",
    "weighting_response",
    "weighted_signal",
    "MIN_SAMPLE_RATE",
]

#: Q of the band-limiting filters (Butterworth), ISO 2631-1 Annex A.
Q_BAND = 1.0 / math.sqrt(2.0)
#: Sampled signals must resolve the weighting up to 80 Hz, the top of ISO 2631-1's
#: range for health and comfort: at least twice that, Hz.
MIN_SAMPLE_RATE = 160.0
#: The zero padding holds the filter's slowest pole decaying by e^-PAD_DECAYS.
PAD_DECAYS = 30.0


class WeightingError(LumpedError):
    """An unknown weighting, or a signal the weighting filter cannot process."""


@dataclass(frozen=True)
class Weighting:
    """One ISO 2631-1 frequency weighting: the corner frequencies (Hz) and quality
    factors of its four stages; ``f5``/``f6`` are None without an upward step."""

    name: str
    f1: float
    f2: float
    f3: float
    f4: float
    q4: float
    f5: float | None = None
    q5: float | None = None
    f6: float | None = None
    q6: float | None = None
    description: str = ""

    def response(self, frequency) -> np.ndarray:
        """Complex weighting factor W(i 2π f) at ``frequency`` (Hz, any shape)."""
        return weighting_response(self, frequency)

    def magnitude(self, frequency) -> np.ndarray:
        """|W(f)| at ``frequency`` (Hz): the weighting factor (dimensionless)."""
        return np.abs(weighting_response(self, frequency))

    def poles(self) -> np.ndarray:
        """Poles of W(s), rad/s (the roots of each stage's denominator)."""
        w = [2 * math.pi * f for f in (self.f1, self.f2, self.f4)]
        quadratics = [(1.0, w[0] / Q_BAND, w[0] ** 2), (1.0, w[1] / Q_BAND, w[1] ** 2),
                      (1.0, w[2] / self.q4, w[2] ** 2)]  # fmt: skip
        if self.f6 is not None:
            w6 = 2 * math.pi * self.f6
            quadratics.append((1.0, w6 / self.q6, w6**2))
        return np.concatenate([np.roots(q) for q in quadratics])


WK = Weighting(
    "Wk", 0.4, 100.0, 12.5, 12.5, 0.63, 2.37, 0.91, 3.35, 0.91,
    description="ISO 2631-1 Wk: vertical (z) whole-body vibration, seated or standing",
)  # fmt: skip
WD = Weighting(
    "Wd", 0.4, 100.0, 2.0, 2.0, 0.63,
    description="ISO 2631-1 Wd: horizontal (x, y) whole-body vibration, seated or standing",
)  # fmt: skip
WEIGHTINGS = {"Wk": WK, "Wd": WD}


def get_weighting(weighting: str | Weighting) -> Weighting:
    """The weighting named ``"Wk"`` or ``"Wd"`` (case-insensitive), or ``weighting`` itself."""
    if isinstance(weighting, Weighting):
        return weighting
    for name, item in WEIGHTINGS.items():
        if isinstance(weighting, str) and weighting.lower() == name.lower():
            return item
    raise WeightingError(f"weighting: unknown weighting {weighting!r}; known: {', '.join(WEIGHTINGS)}")


def _quadratic(s, w, q):
    return s * s + w * s / q + w * w


def weighting_response(weighting: str | Weighting, frequency) -> np.ndarray:
    """The complex weighting factor W(s) at s = i 2π ``frequency`` (Hz), the product
    H_h H_l H_t H_s of ISO 2631-1 Annex A (see the module notes). Dimensionless."""
    w = get_weighting(weighting)
    s = 2j * np.pi * np.asarray(frequency, dtype=float)
    w1, w2, w3, w4 = (2 * np.pi * f for f in (w.f1, w.f2, w.f3, w.f4))
    high = s * s / _quadratic(s, w1, Q_BAND)
    low = w2 * w2 / _quadratic(s, w2, Q_BAND)
    transition = (1 + s / w3) / (1 + s / (w.q4 * w4) + (s / w4) ** 2)
    out = high * low * transition
    if w.f5 is not None:
        w5, w6 = 2 * np.pi * w.f5, 2 * np.pi * w.f6
        out = out * _quadratic(s, w5, w.q5) / _quadratic(s, w6, w.q6)
    return out


@lru_cache(maxsize=8)
def _slowest_decay(weighting: Weighting) -> float:
    """Decay rate (1/s) of the weighting's slowest pole."""
    return float(np.min(-weighting.poles().real))


def weighted_signal(acceleration, sample_rate: float, weighting: str | Weighting = "Wk") -> np.ndarray:
    """The frequency-weighted acceleration a_w(t), m/s², of a uniformly sampled
    ``acceleration`` (m/s²; 1-D, or 2-D with time along axis 0) at ``sample_rate`` Hz.

    Method: the record is zero-padded, transformed by a real FFT, multiplied by the
    analogue W(i 2π f_k) at every bin and transformed back; the padding is long
    enough for the slowest pole of W to decay by e^-30, so the circular convolution
    equals the causal response of the analogue filter to the record (starting from
    rest at its first sample) to that accuracy.

    Why this and not a recursive digital filter: the bilinear transform warps the
    frequency axis (exact at one pre-warped frequency only) and, at the output rates
    of a run (a few hundred Hz to a few kHz), bends the 100 Hz band limit and the
    phase of the upper stages; the FFT applies the analogue magnitude *and* phase
    exactly at every frequency below the Nyquist frequency, at O(N log N) cost, so the
    weighted RMS, peak (crest factor) and fourth-power dose all see the analogue
    filter. The price is memory for the whole record, which a run holds anyway.

    Raises
    ------
    WeightingError
        A sample rate below :data:`MIN_SAMPLE_RATE` (the weighting reaches 80 Hz), a
        non-finite sample, or fewer than two samples.
    """
    w = get_weighting(weighting)
    a = np.asarray(acceleration, dtype=float)
    if not (math.isfinite(sample_rate) and sample_rate >= MIN_SAMPLE_RATE):
        raise WeightingError(
            f"weighting {w.name}: sample rate {sample_rate:g} Hz is too low; the weighting "
            f"reaches 80 Hz, so give at least {MIN_SAMPLE_RATE:g} Hz (e.g. a higher output rate)"
        )
    if a.shape[0] < 2:
        raise WeightingError(f"weighting {w.name}: needs at least two samples, got {a.shape[0]}")
    if not np.all(np.isfinite(a)):
        raise WeightingError(f"weighting {w.name}: the acceleration has non-finite samples")
    decay = _slowest_decay(w)
    pad = int(math.ceil(PAD_DECAYS / decay * sample_rate))
    size = _fast_length(a.shape[0] + pad)
    spectrum = np.fft.rfft(a, n=size, axis=0)
    factor = weighting_response(w, np.fft.rfftfreq(size, d=1.0 / sample_rate))
    # The Nyquist bin of a real signal must stay real.
    if size % 2 == 0:
        factor[-1] = factor[-1].real
    shape = (-1,) + (1,) * (a.ndim - 1)
    return np.fft.irfft(spectrum * factor.reshape(shape), n=size, axis=0)[: a.shape[0]]


def _fast_length(n: int) -> int:
    """The smallest 2^a 3^b 5^c ≥ n (a length numpy's FFT handles fast)."""
    best = 1 << (n - 1).bit_length()
    p5 = 1
    while p5 < best:
        p35 = p5
        while p35 < best:
            value = p35
            while value < n:
                value *= 2
            best = min(best, value)
            p35 *= 3
        p5 *= 5
    return best
