"""Butcher tableaux held exactly (fractions), self-checking, with the stability
function R(z) = N(z)/D(z) derived from them.

R(z) = det(I − zA + z𝟙bᵀ) / det(I − zA) (Hairer & Wanner, *Solving ODEs II*, 2nd ed.,
1996, Prop. IV.3.2 [recalled from memory]); both determinants are polynomials in z,
found exactly by the Faddeev–LeVerrier recursion on rational matrices.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

__all__ = ["ButcherTableau", "CANCELLED"]

#: A coefficient of |N|² − |D|² this small against the sum of its terms' sizes is an
#: exact cancellation blurred by rounding (a few ulps), and is set to zero.
CANCELLED = 1e-13


def _exact(rows) -> tuple[tuple[Fraction, ...], ...]:
    return tuple(tuple(Fraction(x) for x in row) for row in rows)


def _det_polynomial(X: list[list[Fraction]]) -> list[Fraction]:
    """Coefficients (lowest power first) of det(I − zX), exactly.

    Faddeev–LeVerrier gives the characteristic polynomial p(λ) = det(λI − X) =
    Σ c_k λ^k; then det(I − zX) = z^s p(1/z) = Σ_k c_{s−k} z^k.
    """
    s = len(X)
    c = [Fraction(0)] * (s + 1)
    c[s] = Fraction(1)
    Mk = [[Fraction(0)] * s for _ in range(s)]
    for k in range(1, s + 1):
        # M_k = X M_{k−1} + c_{s−k+1} I ;  c_{s−k} = −tr(X M_k)/k
        prod = [[sum(X[i][m] * Mk[m][j] for m in range(s)) for j in range(s)] for i in range(s)]
        Mk = [[prod[i][j] + (c[s - k + 1] if i == j else 0) for j in range(s)] for i in range(s)]
        XM = [[sum(X[i][m] * Mk[m][j] for m in range(s)) for j in range(s)] for i in range(s)]
        c[s - k] = -sum(XM[i][i] for i in range(s)) / k
    return [c[s - k] for k in range(s + 1)]


@dataclass(frozen=True)
class ButcherTableau:
    """An s-stage Runge–Kutta method: ``a`` (s×s), weights ``b``, nodes ``c``.

    Entries may be ints, fractions or decimal strings; they are kept as exact
    fractions. On creation the tableau checks itself: each row of ``a`` sums to its
    node ``c_i`` and the weights sum to 1.
    """

    a: tuple[tuple[Fraction, ...], ...]
    b: tuple[Fraction, ...]
    c: tuple[Fraction, ...]
    numerator: tuple[float, ...] = field(init=False, repr=False)
    denominator: tuple[float, ...] = field(init=False, repr=False)
    floats: tuple = field(init=False, repr=False, compare=False)  # a, b, c as floats

    def __post_init__(self):
        a, b, c = _exact(self.a), tuple(Fraction(x) for x in self.b), tuple(Fraction(x) for x in self.c)
        s = len(b)
        if len(a) != s or any(len(row) != s for row in a) or len(c) != s:
            raise ValueError("Butcher tableau: a must be s×s with s = len(b) = len(c)")
        for i, row in enumerate(a):
            if sum(row) != c[i]:
                raise ValueError(f"Butcher tableau: row {i} of a sums to {sum(row)}, not c[{i}] = {c[i]}")
        if sum(b) != 1:
            raise ValueError(f"Butcher tableau: weights sum to {sum(b)}, not 1")
        object.__setattr__(self, "a", a)
        object.__setattr__(self, "b", b)
        object.__setattr__(self, "c", c)
        object.__setattr__(self, "floats", (tuple(tuple(float(x) for x in row) for row in a),
                                            tuple(float(x) for x in b), tuple(float(x) for x in c)))  # fmt: skip
        A = [list(row) for row in a]
        shifted = [[A[i][j] - b[j] for j in range(s)] for i in range(s)]  # A − 𝟙bᵀ
        object.__setattr__(self, "numerator", tuple(float(x) for x in _det_polynomial(shifted)))
        object.__setattr__(self, "denominator", tuple(float(x) for x in _det_polynomial(A)))

    @property
    def stages(self) -> int:
        return len(self.b)

    @property
    def explicit(self) -> bool:
        return all(self.a[i][j] == 0 for i in range(self.stages) for j in range(i, self.stages))

    def arrays(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """``a``, ``b``, ``c`` as float arrays, for the stepping kernels."""
        a, b, c = self.floats
        return np.array(a), np.array(b), np.array(c)

    def stability_function(self, z):
        """R(z) for complex ``z`` (array-like)."""
        z = np.asarray(z, dtype=complex)
        return np.polynomial.polynomial.polyval(z, self.numerator) / np.polynomial.polynomial.polyval(
            z, self.denominator
        )

    def modulus_excess(self, omega_h, direction):
        """|N(z)|² − |D(z)|² at z = Ω·μ, and the size of its terms, without cancellation.

        ``omega_h`` (Ω = h|λ|) and the unit complex ``direction`` (μ = λ/|λ|) broadcast.
        |R(z)| > 1 exactly where the excess is positive. Expanding |P(Ωμ)|² as
        Σ_k Ω^k Σ_{i+j=k} p_i p_j μ^i μ̄^j drops the constant term (which cancels
        between N and D) before any rounding, and a coefficient smaller than its
        rounding error (:data:`CANCELLED`) is set to the zero it is in exact
        arithmetic. So the sign is right even where |R| − 1 is far below machine
        precision: explicit Euler and Heun are unstable on an undamped mode at any Ω.
        """
        omega_h = np.asarray(omega_h, dtype=float)
        mu = np.asarray(direction, dtype=complex)
        coefficients, scale = _squared_modulus_coefficients(self.numerator, self.denominator, mu)
        coefficients = np.where(np.abs(coefficients) <= CANCELLED * scale, 0.0, coefficients)
        excess = np.zeros(np.broadcast(omega_h, mu).shape)
        magnitude = np.zeros_like(excess)
        power = np.ones_like(excess)
        for k in range(1, coefficients.shape[-1]):
            power = power * omega_h
            excess = excess + coefficients[..., k] * power
            magnitude = magnitude + np.abs(coefficients[..., k]) * power
        return excess, magnitude

    def denominator_modulus2(self, z):
        """|D(z)|² for complex ``z``."""
        return np.abs(np.polynomial.polynomial.polyval(np.asarray(z, dtype=complex), self.denominator)) ** 2


def _squared_modulus_coefficients(n, d, mu):
    """Coefficients in Ω of |N(Ωμ)|² − |D(Ωμ)|² (and of the sum of |terms|), per μ."""
    degree = max(len(n), len(d)) - 1
    n = np.pad(np.array(n), (0, degree + 1 - len(n)))
    d = np.pad(np.array(d), (0, degree + 1 - len(d)))
    mu = np.asarray(mu, dtype=complex)[..., None]
    powers = mu ** np.arange(degree + 1)  # μ^i
    conj = np.conj(powers)
    out = np.zeros(mu.shape[:-1] + (2 * degree + 1,))
    scale = np.zeros_like(out)
    for i in range(degree + 1):
        for j in range(degree + 1):
            weight = n[i] * n[j] - d[i] * d[j]
            if weight == 0:
                continue
            term = (weight * powers[..., i] * conj[..., j]).real
            out[..., i + j] += term
            scale[..., i + j] += abs(n[i] * n[j]) + abs(d[i] * d[j])
    return out, scale
