"""The normal section of a parametric surface in a tangent direction: its curvature and the rate of
that curvature along its arc length, from the surface's partial derivatives up to third order.

The normal section at a point in the unit tangent direction D is the curve cut from the surface by the
plane through the point spanned by D and the unit normal N. Its curvature is the normal curvature
k_n(D) = II(w, w) / I(w, w), with w = (u', v') the parameter direction of D and I, II the first and
second fundamental forms (do Carmo, Differential Geometry of Curves and Surfaces, 1976, sections 3-2
and 3-3; Meusnier's theorem makes the normal section's curvature equal to k_n).

The rate: parametrise the section c(s) = S(u(s), v(s)) by arc length, c'(0) = D. It stays in its
plane and has unit speed, so c'' is parallel to N at s = 0; its tangential part fixes w2 = (u'', v'')
from I w2 = -(S_u . Q2, S_v . Q2), Q2 = S_uu u'^2 + 2 S_uv u'v' + S_vv v'^2. For a plane curve with
unit normal n, c''' = k' n - k^2 c', so k'(0) = n . c'''(0) with
c''' = Q3 + 3 (S_uu u'u'' + S_uv (u'v'' + u''v') + S_vv v'v'') + S_u u''' + S_v v''' and
Q3 = S_uuu u'^3 + 3 S_uuv u'^2 v' + 3 S_uvv u' v'^2 + S_vvv v'^3; the last two terms are tangent to the
surface and drop out. The rate changes sign with the direction of travel, the curvature does not.

Sign convention (the package's): curvature positive where the surface bends away from its outward
normal, so k = -N . c'' and k' = -N . c'''.
"""

from __future__ import annotations

import numpy as np


def _dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return np.einsum("...i,...i->...", a, b)


def _solve_first_form(su: np.ndarray, sv: np.ndarray, rhs_u: np.ndarray, rhs_v: np.ndarray):
    """(a, b) with I (a, b) = (rhs_u, rhs_v), I the first fundamental form [[E, F], [F, G]]."""
    E, F, G = _dot(su, su), _dot(su, sv), _dot(sv, sv)
    det = E * G - F * F
    return (G * rhs_u - F * rhs_v) / det, (E * rhs_v - F * rhs_u) / det


def normal_section(derivatives: dict[str, np.ndarray], normal: np.ndarray, direction: np.ndarray):
    """Curvature and curvature rate of the normal section of a surface in a tangent direction.

    Parameters
    ----------
    derivatives : dict of str to ndarray
        Partial derivatives of the surface S(u, v) at the point(s), each (..., 3): keys ``u, v, uu, uv,
        vv, uuu, uuv, uvv, vvv``.
    normal : ndarray
        (..., 3) unit outward normal.
    direction : ndarray
        (..., 3) unit tangent direction of travel (in the tangent plane).

    Returns
    -------
    curvature : ndarray
        Normal curvature k_n (do Carmo 3-2, 3-3), positive where the surface bends away from ``normal``.
    rate : ndarray
        d k / d s along the normal section, s its arc length in ``direction`` (derivation in the module
        docstring).
    """
    d = derivatives
    su, sv = d["u"], d["v"]
    w0, w1 = _solve_first_form(su, sv, _dot(su, direction), _dot(sv, direction))
    w0, w1 = w0[..., None], w1[..., None]
    q2 = d["uu"] * w0**2 + 2 * d["uv"] * w0 * w1 + d["vv"] * w1**2
    curvature = -_dot(normal, q2)
    z0, z1 = _solve_first_form(su, sv, -_dot(su, q2), -_dot(sv, q2))
    z0, z1 = z0[..., None], z1[..., None]
    q3 = d["uuu"] * w0**3 + 3 * d["uuv"] * w0**2 * w1 + 3 * d["uvv"] * w0 * w1**2 + d["vvv"] * w1**3
    mixed = 3 * (d["uu"] * w0 * z0 + d["uv"] * (w0 * z1 + z0 * w1) + d["vv"] * w1 * z1)
    rate = -_dot(normal, q3 + mixed)
    return curvature, rate
