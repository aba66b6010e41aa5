"""Smooth steps against exact derivatives from sympy and the published smoothstep polynomials."""

from math import comb

import mpmath
import numpy as np
import pytest
import scipy.special
import sympy as sp

from surfcheck.errors import InputError
from surfcheck.blend.steps import KINDS, partition_of_unity, smooth_step, smoothness

X = sp.Symbol("x", positive=True)
INTERIOR = np.concatenate([[1e-3, 0.01, 0.05], np.linspace(0.08, 0.92, 29), [0.95, 0.99, 0.999]])


def exact_step(kind: str, order: int) -> sp.Expr:
    """The step on (0, 1) as a sympy expression, written from its definition."""
    if kind == "linear":
        return X
    if kind == "hermite":
        n = 2 * order + 1
        return sp.expand(sum(comb(n, j) * X**j * (1 - X) ** (n - j) for j in range(order + 1, n + 1)))
    psi = (lambda z: z ** (order + 1)) if kind == "rational" else (lambda z: sp.exp(-1 / z))
    return psi(X) / (psi(X) + psi(1 - X))


def exact_values(expr: sp.Expr, n: int, points) -> np.ndarray:
    """n-th derivative of expr at points, evaluated exactly by sympy then mpmath at 40 digits."""
    f = sp.lambdify(X, sp.diff(expr, X, n), modules="mpmath")
    with mpmath.workdps(40):
        return np.array([float(f(mpmath.mpf(float(p)))) for p in points])


CASES = [("linear", 0), ("exp", 4)] + [(k, o) for k in ("hermite", "rational") for o in (1, 2, 3)]


@pytest.mark.parametrize("kind,order", CASES)
def test_derivatives_match_sympy_exact_derivatives(kind, order):
    # Reference: sympy's symbolic derivatives of each step's defining formula.
    expr = exact_step(kind, order)
    for n in range(order + 2):
        ours = smooth_step(INTERIOR, kind, order, n)
        ref = exact_values(expr, n, INTERIOR)
        scale = max(1.0, np.abs(ref).max())
        np.testing.assert_allclose(ours, ref, rtol=1e-9, atol=1e-12 * scale, err_msg=f"{kind} {order} d{n}")


@pytest.mark.parametrize("kind", ["hermite", "rational"])
@pytest.mark.parametrize("order", [1, 2, 3, 4])
def test_derivatives_up_to_order_vanish_at_ends_and_the_next_does_not(kind, order):
    # Reference: sympy's exact derivatives of the defining formula at 0 and 1.
    expr = exact_step(kind, order)
    for n in range(1, order + 2):
        d = sp.diff(expr, X, n)
        at0, at1 = float(d.subs(X, 0)), float(d.subs(X, 1))  # both formulas are smooth on [0, 1]
        ours = smooth_step(np.array([0.0, 1.0]), kind, order, n)
        np.testing.assert_allclose(ours, [at0, at1], atol=1e-9)
        if n <= order:
            assert at0 == 0.0 and at1 == 0.0  # definition of a C^k step (sympy, exact)
        else:
            assert abs(ours[0]) > 0.5 and abs(ours[1]) > 0.5  # C^k and no more: derivative k+1 jumps


def test_exp_step_derivatives_all_vanish_at_ends():
    # Published: every derivative of exp(-1/x) tends to 0 as x -> 0+ (Tu, An Introduction to
    # Manifolds, 2nd ed., sec. 1.3), so every derivative of the step vanishes at 0 and 1.
    # Reference: sympy's exact derivatives at 800 digits next to the ends (below 1e-300, so 0 in float64).
    expr = exact_step("exp", 0)
    ends = np.array([0.0, 1e-300, np.nextafter(1.0, 0.0), 1.0])
    near = np.array([1e-3, 1 - 1e-3, 2e-3, 1 - 2e-3])
    d = expr
    for n in range(0, 7):
        d = d if n == 0 else sp.diff(d, X)
        f = sp.lambdify(X, d, modules="mpmath")
        with mpmath.workdps(800):
            ref = [f(mpmath.mpf(float(p))) for p in near]
        ref_to_end = [float(r - (1 if (n == 0 and p > 0.5) else 0)) for r, p in zip(ref, near)]
        assert max(abs(r) for r in ref_to_end) < 1e-150
        ours = smooth_step(np.concatenate([ends, near]), "exp", 6, n)
        to_end = ours - np.where(np.concatenate([ends, near]) > 0.5, 1.0 if n == 0 else 0.0, 0.0)
        assert np.all(np.abs(to_end) < 1e-150)
    assert smoothness("exp", 2) == np.inf


@pytest.mark.parametrize("order,published", [(1, [0, 0, 3, -2]), (2, [0, 0, 0, 10, -15, 6])])
def test_hermite_has_the_published_smoothstep_coefficients(order, published):
    # Published: 3x^2 - 2x^3 (Ebert et al., Texturing and Modeling, 3rd ed. 2003, smoothstep);
    # 6x^5 - 15x^4 + 10x^3 (Perlin, "Improving Noise", SIGGRAPH 2002).
    x = np.linspace(0.0, 1.0, 101)
    np.testing.assert_allclose(smooth_step(x, "hermite", order), np.polynomial.polynomial.polyval(x, published),
                               atol=1e-14)


@pytest.mark.parametrize("order", range(0, 7))
def test_hermite_is_the_hermite_interpolant_and_the_incomplete_beta(order):
    # Reference 1 (definition): the unique polynomial of degree 2k+1 with p(0) = 0, p(1) = 1 and
    # derivatives 1..k zero at both ends, solved exactly by sympy.
    # Reference 2: scipy.special.betainc(k+1, k+1, x), the regularised incomplete beta function,
    # equal to the binomial tail sum (Abramowitz and Stegun 26.5.24).
    c = sp.symbols(f"c0:{2 * order + 2}")
    p = sum(ci * X**i for i, ci in enumerate(c))
    conditions = [p.subs(X, 0), p.subs(X, 1) - 1]
    conditions += [sp.diff(p, X, j).subs(X, e) for j in range(1, order + 1) for e in (0, 1)]
    interpolant = p.subs(sp.solve(conditions, c))
    x = np.linspace(0.0, 1.0, 41)
    ref = np.array([float(interpolant.subs(X, sp.Rational(i, 40))) for i in range(41)])
    np.testing.assert_allclose(smooth_step(x, "hermite", order), ref, atol=1e-13)
    np.testing.assert_allclose(smooth_step(x, "hermite", order), scipy.special.betainc(order + 1, order + 1, x),
                               atol=1e-13)


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("order", [1, 3])
def test_symmetry_monotonicity_and_range(kind, order):
    # Definition of a step (common practice, no published source beyond the definition):
    # phi(x) + phi(1 - x) = 1, phi' >= 0, 0 <= phi <= 1.
    x = np.linspace(-0.5, 1.5, 2001)
    phi = smooth_step(x, kind, order)
    np.testing.assert_allclose(phi + smooth_step(1.0 - x, kind, order), 1.0, atol=1e-15)
    assert np.all(np.diff(phi) >= 0.0)
    assert np.all(smooth_step(x, kind, order, 1) >= 0.0)
    assert phi.min() == 0.0 and phi.max() == 1.0
    assert smooth_step(0.5, kind, order) == pytest.approx(0.5, abs=1e-15)


@pytest.mark.parametrize("kind", KINDS)
def test_no_nan_or_overflow_far_out_and_next_to_the_ends(kind):
    # Issue requirement: finite values for x in [-1e6, 1e6] and within 1e-300 of 0 and 1.
    tiny = np.array([5e-324, 1e-320, 1e-300, 1e-200, 1e-100, 1e-20])
    x = np.concatenate([np.linspace(-1e6, 1e6, 10001), tiny, -tiny, 1 - tiny, 1 + tiny,
                        [np.nextafter(1.0, 0.0), np.nextafter(0.0, 1.0)]])
    with np.errstate(over="raise", invalid="raise", divide="raise"):  # underflow to 0 is exact here
        for n in range(0, 5):
            values = smooth_step(x, kind, 3, n)
            assert np.all(np.isfinite(values))
            if n == 0:
                assert values.min() >= 0.0 and values.max() <= 1.0


def test_partition_of_unity_sums_to_one_with_plateaus():
    # Definition of a partition of unity (Tu, An Introduction to Manifolds, sec. 13.1): weights in
    # [0, 1] summing to 1; derivatives sum to 0.
    x = np.linspace(-1.0, 7.0, 4001)
    edges = [(0.0, 1.0), (2.5, 3.0), (3.0, 6.0)]
    w = partition_of_unity(x, edges, "hermite", 2)
    assert w.shape == (4, len(x))
    np.testing.assert_allclose(w.sum(axis=0), 1.0, atol=1e-15)
    assert w.min() >= 0.0 and w.max() <= 1.0
    assert np.all(w[0][x <= 0] == 1.0) and np.all(w[1][(x >= 1) & (x <= 2.5)] == 1.0)
    assert np.all(w[3][x >= 6] == 1.0)
    np.testing.assert_allclose(w[1][x <= 1], smooth_step(x[x <= 1], "hermite", 2), atol=1e-15)
    for n in (1, 2):
        dw = partition_of_unity(x, edges, "exp", 2, derivative=n)
        np.testing.assert_allclose(dw.sum(axis=0), 0.0, atol=1e-9)
    # chain rule on the stretched interval [3, 6]: d/dx phi((x-3)/3) = phi'((x-3)/3) / 3
    np.testing.assert_allclose(partition_of_unity(4.5, edges, "exp", 2, 1)[3], smooth_step(0.5, "exp", 2, 1) / 3)


@pytest.mark.parametrize(
    "call",
    [
        lambda: smooth_step(0.3, "cubic"),
        lambda: smooth_step(0.3, "hermite", 2, derivative=10),
        lambda: smooth_step(0.3, "hermite", -1),
        lambda: partition_of_unity(0.3, [(0.0, 1.0), (0.5, 2.0)]),
        lambda: partition_of_unity(0.3, [(1.0, 1.0)]),
    ],
)
def test_bad_requests_are_input_errors(call):
    with pytest.raises(InputError):
        call()
