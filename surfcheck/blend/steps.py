"""Smooth steps: functions phi with phi = 0 for x <= 0, phi = 1 for x >= 1, phi(x) + phi(1 - x) = 1.

Four kinds, each with the continuity class it guarantees at x = 0 and x = 1:

- ``linear``: phi(x) = x on [0, 1]; C^0.
- ``hermite`` of order k: the polynomial of degree 2k + 1 whose derivatives 1..k vanish at 0 and 1,
  phi(x) = sum_{j=k+1}^{2k+1} C(2k+1, j) x^j (1-x)^(2k+1-j) (the Bernstein form of the general
  smoothstep; k = 1 gives 3x^2 - 2x^3 [Ebert et al., Texturing and Modeling, 2003], k = 2 gives
  6x^5 - 15x^4 + 10x^3 [Perlin, Improving Noise, SIGGRAPH 2002]); C^k. It equals the regularised
  incomplete beta function I_x(k+1, k+1).
- ``rational`` of order k: psi(x) / (psi(x) + psi(1 - x)) with psi(x) = x^(k+1); C^k.
- ``exp``: the same with psi(x) = exp(-1/x) for x > 0 and 0 otherwise, the standard C-infinity
  partition-of-unity building block (e.g. Tu, An Introduction to Manifolds, sec. 13.1); every
  derivative vanishes at 0 and 1.

Evaluation folds x > 1/2 onto 1 - x with phi(x) = 1 - phi(1 - x), so only [0, 1/2] is evaluated, where
psi(1 - x) >= exp(-2) keeps the quotient well conditioned. Quotient derivatives use the Leibniz
recursion phi^(n) = (a^(n) - sum_{j<n} C(n, j) phi^(j) s^(n-j)) / s for phi = a / s, s = a + b.
Derivatives of exp(-1/x) are P_n(1/x) exp(-1/x) with P_0 = 1, P_{n+1}(y) = y^2 (P_n(y) - P_n'(y)),
evaluated in logarithmic form so that x down to the smallest float neither overflows nor gives NaN.
"""

from __future__ import annotations

from functools import lru_cache
from math import comb, factorial

import numpy as np
import numpy.polynomial.polynomial as npoly

from surfcheck.errors import InputError

KINDS = ("linear", "hermite", "rational", "exp")
MAX_ORDER = 8
MAX_DERIVATIVE = 9


def smoothness(kind: str, order: int) -> float:
    """The continuity class C^k of a step at 0 and 1: 0 for linear, ``order`` for hermite and
    rational, infinity for exp."""
    _check_kind(kind)
    return {"linear": 0, "hermite": order, "rational": order, "exp": np.inf}[kind]


def smooth_step(x, kind: str = "exp", order: int = 2, derivative: int = 0) -> np.ndarray:
    """The value (``derivative`` = 0) or the n-th derivative (n <= 9) of a smooth step at x.

    At x = 0 and x = 1 the derivative is the one-sided one from inside [0, 1]; outside [0, 1] every
    derivative is 0. NaN in x gives NaN.

    Parameters
    ----------
    x : array_like of float
        Positions; the step rises over [0, 1].
    kind : str
        Step kind (KINDS).
    order : int
        Order of the step (its C^order class for the polynomial kinds).
    derivative : int
        Derivative to return, 0..9.

    Returns
    -------
    ndarray of float
        Same shape as x.
    """
    _check_kind(kind)
    if not (isinstance(order, (int, np.integer)) and 0 <= order <= MAX_ORDER):
        raise InputError(f"step order must be an integer from 0 to {MAX_ORDER}, not {order!r}")
    if not (isinstance(derivative, (int, np.integer)) and 0 <= derivative <= MAX_DERIVATIVE):
        raise InputError(f"step derivatives go from 0 to {MAX_DERIVATIVE}, not {derivative!r}")
    x = np.asarray(x, dtype=np.float64)
    out = np.zeros(x.shape)
    if derivative == 0:
        out[x > 1.0] = 1.0
    inside = (x >= 0.0) & (x <= 1.0)
    upper = inside & (x > 0.5)
    lower = inside & ~upper
    out[lower] = _left_half(x[lower], kind, order, derivative)
    folded = _left_half(1.0 - x[upper], kind, order, derivative)
    out[upper] = 1.0 - folded if derivative == 0 else -((-1.0) ** derivative) * folded
    out[np.isnan(x)] = np.nan
    return out


def partition_of_unity(x, edges, kind: str = "exp", order: int = 2, derivative: int = 0) -> np.ndarray:
    """Weights w_0..w_m (shape (m + 1, *x.shape)) that sum to 1, for m transition intervals on a line.

    ``edges`` is a sequence of (start, end) intervals in increasing order, not overlapping. w_0 = 1
    left of the first interval, w_i = 1 between interval i-1 and interval i, w_m = 1 right of the last;
    across interval i the weight passes from w_i to w_{i+1} along the chosen step.

    Parameters
    ----------
    x : array_like of float
        Positions on the line.
    edges : sequence of (float, float)
        Transition intervals.
    kind : str
        Step kind (KINDS).
    order : int
        Order of the step (its C^order class for the polynomial kinds).
    derivative : int
        Derivative of the weights to return.

    Returns
    -------
    (m + 1, *x.shape) float
        The weights, or their derivatives.
    """
    x = np.asarray(x, dtype=np.float64)
    edges = np.asarray(edges, dtype=np.float64).reshape(-1, 2)
    if len(edges) == 0:
        raise InputError("a partition of unity needs at least one transition interval")
    if not np.all(edges[:, 1] > edges[:, 0]) or not np.all(edges[1:, 0] >= edges[:-1, 1]):
        raise InputError("transition intervals must have start < end and follow one another without overlap")
    steps = [
        smooth_step((x - a) / (b - a), kind, order, derivative) / (b - a) ** derivative for a, b in edges
    ]
    first = (1.0 if derivative == 0 else 0.0) - steps[0]
    middle = [steps[i - 1] - steps[i] for i in range(1, len(steps))]
    return np.stack([first, *middle, steps[-1]])


def _check_kind(kind: str) -> None:
    if kind not in KINDS:
        raise InputError(f"unknown step kind {kind!r}; choose one of {', '.join(KINDS)}")


def _left_half(y: np.ndarray, kind: str, order: int, n: int) -> np.ndarray:
    """The n-th derivative of the step at y in [0, 1/2]."""
    if kind == "linear":
        return y if n == 0 else np.full(y.shape, 1.0 if n == 1 else 0.0)
    if kind == "hermite":
        return npoly.polyval(y, npoly.polyder(_hermite_coefficients(order), n))
    psi = _rational_psi if kind == "rational" else _exp_psi
    a = [psi(y, m, order) for m in range(n + 1)]
    s = [a[m] + (-1.0) ** m * psi(1.0 - y, m, order) for m in range(n + 1)]
    phi: list[np.ndarray] = []
    for k in range(n + 1):
        acc = a[k] - sum(comb(k, j) * phi[j] * s[k - j] for j in range(k))
        phi.append(acc / s[0])
    return phi[n]


def hermite_polynomial(order: int) -> npoly.Polynomial:
    """The Hermite smoothstep of order k as a numpy Polynomial (degree 2k + 1), for exact integrals."""
    return npoly.Polynomial(_hermite_coefficients(order))


@lru_cache(maxsize=None)
def _hermite_coefficients(order: int) -> np.ndarray:
    """Power-basis coefficients (ascending) of sum_{j=k+1}^{2k+1} C(2k+1, j) x^j (1-x)^(2k+1-j)."""
    n = 2 * order + 1
    total = np.zeros(n + 1)
    for j in range(order + 1, n + 1):
        term = npoly.polymul(npoly.polypow([0.0, 1.0], j), npoly.polypow([1.0, -1.0], n - j))
        total[: len(term)] += comb(n, j) * term
    return total


def _rational_psi(y: np.ndarray, m: int, order: int) -> np.ndarray:
    """The m-th derivative of y^(k+1) for y in [0, 1]."""
    p = order + 1
    if m > p:
        return np.zeros(y.shape)
    return factorial(p) / factorial(p - m) * y ** (p - m)


@lru_cache(maxsize=None)
def _exp_derivative_polynomial(m: int) -> np.ndarray:
    """Ascending coefficients of P_m with d^m/dx^m exp(-1/x) = P_m(1/x) exp(-1/x)."""
    p = np.array([1.0])
    for _ in range(m):
        p = npoly.polymul([0.0, 0.0, 1.0], npoly.polysub(p, npoly.polyder(p)))
    return p


def _exp_psi(y: np.ndarray, m: int, order: int) -> np.ndarray:
    """The m-th derivative of exp(-1/y) for y in [0, 1], 0 at y = 0, without overflow for tiny y."""
    coefficients = _exp_derivative_polynomial(m)
    top = len(coefficients) - 1  # P_m(1/y) = y^-top * Q(y), Q(y) = sum_i c_i y^(top - i)
    positive = y > 0.0
    safe = np.where(positive, y, 1.0)
    q = npoly.polyval(safe, coefficients[::-1])
    with np.errstate(over="ignore", under="ignore"):
        scale = np.exp(-1.0 / safe - top * np.log(safe))
    return np.where(positive, q * scale, 0.0)
