"""ISO 2631-1 (1997) frequency weightings and the weighting filter.

- Weighting W(s) = H_h H_l H_t H_s, ISO 2631-1:1997 Annex A, with the Wk and Wd
  parameters listed in /work/shared/REFERENCES.md (an instrument manual's table citing
  ISO 8041). The analogue form is rebuilt here as polynomials in s and evaluated with
  ``scipy.signal.freqs``.
- Tabulated weighting factors at nominal band frequencies, ISO 2631-1:1997 Table 3
  [recalled from memory]: Wk 0.482 at 1 Hz, 1.039 at 5 Hz, 0.768 at 16 Hz; Wd 1.011 at
  1 Hz, 0.890 at 2 Hz.
- A sinusoid of amplitude A at f: a_w = |W(f)| A/√2 and VDV = A|W(f)| (3T/8)^¼
  (mean of sin⁴ is 3/8; REFERENCES.md, verified form).
- The time-domain filter against ``scipy.signal.lsim`` of the analogue filter.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal as signal

import lumped
from lumped.iso2631 import (
    WD,
    WK,
    WeightingError,
    get_weighting,
    weighted_signal,
    weighting_response,
)
from lumped.metrics import crest_factor, rms, sample_weights, vibration_dose_value

Q1 = 1 / math.sqrt(2)


def annex_a_polynomials(f1, f2, f3, f4, q4, f5=None, q5=None, f6=None, q6=None):
    """Numerator and denominator of W(s), ISO 2631-1:1997 Annex A, built here."""
    w1, w2, w3, w4 = (2 * math.pi * f for f in (f1, f2, f3, f4))
    num = np.polymul([1.0, 0.0, 0.0], [w2 * w2])  # s² · ω₂²
    den = np.polymul([1.0, w1 / Q1, w1 * w1], [1.0, w2 / Q1, w2 * w2])
    num = np.polymul(num, [1 / w3, 1.0])  # 1 + s/ω₃
    den = np.polymul(den, [1 / w4**2, 1 / (q4 * w4), 1.0])
    if f5 is not None:
        w5, w6 = 2 * math.pi * f5, 2 * math.pi * f6
        num = np.polymul(num, [1.0, w5 / q5, w5 * w5])
        den = np.polymul(den, [1.0, w6 / q6, w6 * w6])
    return num, den


WK_POLY = annex_a_polynomials(0.4, 100.0, 12.5, 12.5, 0.63, 2.37, 0.91, 3.35, 0.91)
WD_POLY = annex_a_polynomials(0.4, 100.0, 2.0, 2.0, 0.63)


@pytest.mark.parametrize("weighting, poly", [(WK, WK_POLY), (WD, WD_POLY)])
def test_weighting_matches_annex_a_form(weighting, poly):
    f = np.geomspace(0.05, 400, 500)
    _, expected = signal.freqs(*poly, worN=2 * np.pi * f)
    np.testing.assert_allclose(weighting_response(weighting, f), expected, rtol=1e-10)
    np.testing.assert_allclose(weighting.magnitude(f), np.abs(expected), rtol=1e-10)


@pytest.mark.parametrize(
    "name, frequency, table",
    [
        # ISO 2631-1:1997 Table 3, factors ×1000 at nominal band frequencies [recalled from memory]
        ("Wk", 1.0, 0.482),
        ("Wk", 5.0, 1.039),
        ("Wk", 16.0, 0.768),
        ("Wd", 1.0, 1.011),
        ("Wd", 2.0, 0.890),
    ],
)
def test_weighting_factors_at_nominal_frequencies(name, frequency, table):
    value = float(get_weighting(name).magnitude(frequency))
    assert value == pytest.approx(table, rel=0.02)


def test_wk_band_limits_and_step():
    # Annex A form: the high-pass makes |W| ∝ f² far below f₁, the low-pass ∝ f⁻² ·
    # (transition ∝ f⁻¹) far above f₂; the upward step is (f₅/f₆)² below f₅.
    low = WK.magnitude(np.array([1e-3, 2e-3]))
    assert low[1] / low[0] == pytest.approx(4.0, rel=1e-3)
    assert low[0] == pytest.approx((1e-3 / 0.4) ** 2 * (2.37 / 3.35) ** 2, rel=1e-3)
    high = WK.magnitude(np.array([1e4, 2e4]))
    assert high[0] / high[1] == pytest.approx(8.0, rel=1e-2)


@pytest.mark.parametrize("name, frequency", [("Wk", 1.0), ("Wk", 5.0), ("Wk", 16.0), ("Wd", 2.0), ("Wk", 40.0)])
def test_weighted_sinusoid_rms_vdv_and_crest_factor(name, frequency):
    rate, duration, amplitude, settle = 1000.0, 120.0, 1.7, 10.0
    t = np.arange(int(duration * rate) + 1) / rate
    a = amplitude * np.sin(2 * np.pi * frequency * t)
    aw = weighted_signal(a, rate, name)
    keep = t >= settle
    weights = sample_weights(t[keep])
    gain = abs(complex(weighting_response(name, frequency)))
    # a_w = |W(f)| A/√2; VDV = A|W(f)| (3T/8)^¼ over the window T (REFERENCES.md, verified form)
    assert rms(aw[keep], weights) == pytest.approx(gain * amplitude / math.sqrt(2), rel=1e-6)
    window = t[-1] - settle
    assert vibration_dose_value(aw[keep], weights) == pytest.approx(
        amplitude * gain * (3 * window / 8) ** 0.25, rel=1e-6
    )
    # crest factor of a sinusoid: √2 (common practice)
    assert crest_factor(aw[keep], weights) == pytest.approx(math.sqrt(2), rel=1e-3)


def test_time_domain_filter_matches_lsim_of_the_analogue_filter():
    rate, duration = 2000.0, 30.0
    t = np.arange(int(duration * rate)) / rate
    rng = np.random.default_rng(3)
    # A random signal band-limited well below the Nyquist frequency, from rest.
    sos = signal.butter(6, 60.0, fs=rate, output="sos")
    a = signal.sosfilt(sos, rng.standard_normal(len(t)))
    a[: int(rate)] *= np.linspace(0, 1, int(rate))
    for name, poly in (("Wk", WK_POLY), ("Wd", WD_POLY)):
        _, expected, _ = signal.lsim(signal.lti(*poly), a, t)
        got = weighted_signal(a, rate, name)
        error = np.sqrt(np.mean((got - expected) ** 2)) / np.sqrt(np.mean(expected**2))
        assert error < 2e-3


def test_filter_handles_several_channels():
    rate = 500.0
    t = np.arange(5000) / rate
    a = np.column_stack([np.sin(2 * np.pi * 3 * t), np.cos(2 * np.pi * 7 * t)])
    both = weighted_signal(a, rate)
    np.testing.assert_allclose(both[:, 1], weighted_signal(a[:, 1], rate), rtol=0, atol=1e-12)


def test_weighting_errors():
    with pytest.raises(WeightingError, match="'Wz'"):
        get_weighting("Wz")
    with pytest.raises(WeightingError, match="100 Hz is too low"):
        weighted_signal(np.zeros(100), 100.0)
    with pytest.raises(WeightingError, match="non-finite"):
        weighted_signal(np.array([0.0, np.nan, 1.0]), 1000.0)
    assert issubclass(WeightingError, lumped.LumpedError)
