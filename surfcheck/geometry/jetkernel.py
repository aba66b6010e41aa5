"""Compiled pieces of a local polynomial ("jet") fit: least squares of a height over the tangent plane.

The surface near a point is taken as a height z = f(x, y) over its tangent plane and f is fitted, by
least squares, with the monomials x^a y^b of a chosen set (Cazals and Pouget 2003, "Estimating
differential quantities using polynomial fitting of osculating jets"). The normal equations are
assembled from the power sums sum w x^a y^b and sum w z x^a y^b (add_monomials, once per point) and
solved by Cholesky in place (solve_normal_equations); fit_local_jet does both for a vertex's
neighbours and graph_shape gives the curvatures of the fitted graph. The kernels of
surfcheck.geometry.differential and surfcheck.geometry.jumpfield are built from these; fit_height runs them over rows
of given points. Coordinates should be scaled to about unit size.
"""

from __future__ import annotations

import numba
import numpy as np

from surfcheck.errors import InputError


def jet_exponents(degree: int) -> list[tuple[int, int]]:
    """Monomials x^a y^b of a bivariate polynomial of total degree <= degree, constant first."""
    if not 1 <= degree <= 4:
        raise InputError(f"jet degree must be 1 to 4, not {degree}")
    return [(a, d - a) for d in range(degree + 1) for a in range(d, -1, -1)]


def exponent_arrays(exponents: list[tuple[int, int]]) -> tuple[np.ndarray, np.ndarray]:
    """The exponents as a kernel takes them: x powers and y powers, (p,) int64 each."""
    table = np.array(exponents, dtype=np.int64).reshape(-1, 2)
    return np.ascontiguousarray(table[:, 0]), np.ascontiguousarray(table[:, 1])


@numba.njit(cache=True, inline="always")
def tangent_frame(n0, n1, n2, frame):
    """Rows of ``frame`` (3, 3): t1 = unit(n x e_k) with e_k the axis of the normal's smallest
    component, t2 = n x t1, n; (t1, t2, n) right-handed and orthonormal for a unit n."""
    e0 = e1 = e2 = 0.0
    if abs(n0) <= abs(n1) and abs(n0) <= abs(n2):
        e0 = 1.0
    elif abs(n1) <= abs(n2):
        e1 = 1.0
    else:
        e2 = 1.0
    u0, u1, u2 = n1 * e2 - n2 * e1, n2 * e0 - n0 * e2, n0 * e1 - n1 * e0
    un = np.sqrt(u0 * u0 + u1 * u1 + u2 * u2)
    u0, u1, u2 = u0 / un, u1 / un, u2 / un
    frame[0, 0], frame[0, 1], frame[0, 2] = u0, u1, u2
    frame[1, 0], frame[1, 1], frame[1, 2] = n1 * u2 - n2 * u1, n2 * u0 - n0 * u2, n0 * u1 - n1 * u0
    frame[2, 0], frame[2, 1], frame[2, 2] = n0, n1, n2


@numba.njit(cache=True, inline="always")
def add_monomials(T, value, x, y, top):
    """T[a, b] += value x^a y^b for every a + b <= top."""
    xa = value
    for a in range(top + 1):
        term = xa
        for b in range(top + 1 - a):
            T[a, b] += term
            term *= y
        xa *= x


@numba.njit(cache=True)
def solve_normal_equations(S, Z, ex, ey, M, rhs, coef):
    """Least-squares coefficients of the monomials x^ex y^ey from the power sums S[a, b] = sum w x^a y^b
    and Z[a, b] = sum w z x^a y^b, written into ``coef`` (the right-hand side into ``rhs``).

    Cholesky factorisation in place in the work matrix M, with a relative ridge of 1e-10 of the mean
    diagonal that keeps rank-deficient systems (too few points) finite.
    """
    p = len(ex)
    for s in range(p):
        rhs[s] = Z[ex[s], ey[s]]
        for t in range(s, p):
            M[s, t] = S[ex[s] + ex[t], ey[s] + ey[t]]
    trace = 0.0
    for s in range(p):
        trace += M[s, s]
    ridge = 1e-10 * trace / p + 1e-300
    for s in range(p):  # the factor L fills the lower triangle; the upper holds the matrix
        acc = M[s, s] + ridge
        for t in range(s):
            acc -= M[s, t] * M[s, t]
        diag = np.sqrt(max(acc, ridge))
        for q in range(s + 1, p):
            acc = M[s, q]
            for t in range(s):
                acc -= M[q, t] * M[s, t]
            M[q, s] = acc / diag
        M[s, s] = diag  # the diagonal of L; the matrix's diagonal is no longer needed
    for s in range(p):
        acc = rhs[s]
        for t in range(s):
            acc -= M[s, t] * coef[t]
        coef[s] = acc / M[s, s]
    for s in range(p - 1, -1, -1):
        acc = coef[s]
        for t in range(s + 1, p):
            acc -= M[t, s] * coef[t]
        coef[s] = acc / M[s, s]


@numba.njit(cache=True)
def fit_local_jet(local, count, ex, ey, degree, S, Z, M, rhs, coef):
    """Least-squares jet with the monomials x^ex y^ey (of total degree at most ``degree``) through the
    first ``count`` rows (x, y, z) of ``local``, each of weight 1, into ``coef``. S and Z (at least
    2 degree + 1 and degree + 1 square) keep the power sums, ``rhs`` the right-hand side; M is work.
    Returns sum z^2, so the residual sum of squares is that minus coef . rhs."""
    if degree == 2:
        zz = quadric_power_sums(local, count, S, Z)
    else:
        S[:, :] = 0.0
        Z[:, :] = 0.0
        zz = 0.0
        for k in range(count):
            x, y, z = local[k, 0], local[k, 1], local[k, 2]
            add_monomials(S, 1.0, x, y, 2 * degree)  # power sums sum x^a y^b, a + b <= 2 degree
            add_monomials(Z, z, x, y, degree)  # and sum z x^a y^b, a + b <= degree
            zz += z * z
    solve_normal_equations(S, Z, ex, ey, M, rhs, coef)
    return zz


@numba.njit(cache=True, inline="always")
def quadric_power_sums(local, count, S, Z):
    """The power sums of a quadric jet (add_monomials with top 4 and 2, unrolled so that the sums
    stay in registers: the default jet's fits take about half the time): S[a, b] = sum x^a y^b for
    a + b <= 4, Z[a, b] = sum z x^a y^b for a + b <= 2, over the first ``count`` rows of ``local``
    (S at least 5 square, Z at least 3; other entries zero). Returns sum z^2."""
    s10 = s01 = s20 = s11 = s02 = s30 = s21 = s12 = s03 = s40 = s31 = s22 = s13 = s04 = 0.0
    z00 = z10 = z01 = z20 = z11 = z02 = zz = 0.0
    for k in range(count):
        x, y, z = local[k, 0], local[k, 1], local[k, 2]
        xx, xy, yy = x * x, x * y, y * y
        s10, s01, s20, s11, s02 = s10 + x, s01 + y, s20 + xx, s11 + xy, s02 + yy
        s30, s21, s12, s03 = s30 + xx * x, s21 + xx * y, s12 + x * yy, s03 + yy * y
        s40, s31, s22, s13, s04 = s40 + xx * xx, s31 + xx * xy, s22 + xx * yy, s13 + xy * yy, s04 + yy * yy
        z00, z10, z01 = z00 + z, z10 + z * x, z01 + z * y
        z20, z11, z02, zz = z20 + z * xx, z11 + z * xy, z02 + z * yy, zz + z * z
    S[:, :] = 0.0
    Z[:, :] = 0.0
    S[0, 0], S[1, 0], S[0, 1], S[2, 0], S[1, 1], S[0, 2] = count, s10, s01, s20, s11, s02
    S[3, 0], S[2, 1], S[1, 2], S[0, 3] = s30, s21, s12, s03
    S[4, 0], S[3, 1], S[2, 2], S[1, 3], S[0, 4] = s40, s31, s22, s13, s04
    Z[0, 0], Z[1, 0], Z[0, 1], Z[2, 0], Z[1, 1], Z[0, 2] = z00, z10, z01, z20, z11, z02
    return zz


@numba.njit(cache=True)
def graph_shape(fx, fy, fxx, fxy, fyy):
    """k1 >= k2 and the (x, y) parameter direction of k1 of the graph z = f(x, y) at the origin.

    From the first and second fundamental forms (do Carmo 1976, section 3-3): det(II - k I) = 0, with
    the sign flipped so that a graph bending down, away from +z, is positive.
    """
    W = np.sqrt(1.0 + fx * fx + fy * fy)
    E, Fm, G = 1.0 + fx * fx, fx * fy, 1.0 + fy * fy
    L, M, N = -fxx / W, -fxy / W, -fyy / W
    det_I = E * G - Fm * Fm
    H = (E * N + G * L - 2.0 * Fm * M) / (2.0 * det_I)
    K = (L * N - M * M) / det_I
    root = np.sqrt(max(H * H - K, 0.0))
    k1, k2 = H + root, H - root
    # (II - k1 I) v = 0: take the better conditioned of the two rows' null vectors.
    a, b, d = L - k1 * E, M - k1 * Fm, N - k1 * G
    if a * a + b * b >= b * b + d * d:
        v0, v1 = b, -a
    else:
        v0, v1 = d, -b
    if np.sqrt(v0 * v0 + v1 * v1) <= 1e-12 * (abs(k1) + 1e-300):
        v0, v1 = 1.0, 0.0
    return k1, k2, v0, v1


@numba.njit(cache=True)
def _fit_rows(x, y, z, w, ex, ey):
    p, top = len(ex), int(np.max(ex + ey))
    coef = np.empty((len(x), p))
    S, Z = np.empty((2 * top + 1, 2 * top + 1)), np.empty((top + 1, top + 1))
    M, rhs = np.empty((p, p)), np.empty(p)
    for r in range(len(x)):
        S[:, :] = 0.0
        Z[:, :] = 0.0
        for k in range(x.shape[1]):
            add_monomials(S, w[r, k], x[r, k], y[r, k], 2 * top)
            add_monomials(Z, w[r, k] * z[r, k], x[r, k], y[r, k], top)
        solve_normal_equations(S, Z, ex, ey, M, rhs, coef[r])
    return coef


def fit_height(x: np.ndarray, y: np.ndarray, z: np.ndarray, w: np.ndarray,
               exponents: list[tuple[int, int]]) -> np.ndarray:
    """Weighted least-squares fits z ~ sum c_ab x^a y^b, one for each row of the (c, k) point arrays
    with weights ``w`` (c, k); (c, p) coefficients in the order of ``exponents``."""
    x, y, z, w = (np.ascontiguousarray(a, dtype=np.float64) for a in (x, y, z, w))
    return _fit_rows(x, y, z, w, *exponent_arrays(exponents))
