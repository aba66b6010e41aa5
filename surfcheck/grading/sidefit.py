"""One-sided estimates of a section curve at a seam point: position, heading, curvature and
curvature rate, each with its uncertainty, from one side's data only.

Model. Near the seam point the side's section points are written as heights w(s) along the normals
of a reference clothoid through the seam point (its own foot arc length s, its curvature k0 + k1 s)
and fitted by least squares with polynomials w = sum b_j s^j of degree 2 to 5 over one-sided windows
|s| <= W growing from MIN_WINDOW_EDGES edge lengths to the data's reach. The reference starts as the
side's tangent line and is then moved to the side's own estimated curvature and (where significant)
curvature rate until it agrees with the estimate (a fixed-point iteration). Over it an arc or a
clothoid has zero heights and a curvature ramp nearly polynomial ones, so wide windows stay unbiased
where a graph over the tangent would report the window's mean curvature. Windows select by |s|,
which noise along the normal does not move.

Quantities. From a fit's coefficients and their covariance sigma^2 (A^T A)^-1 (sigma^2 the fit's
residual variance, at least the side's noise level) follow offset, heading, curvature and
d(curvature)/d(arc length) of the fitted curve at the seam (curve_quantities, an offset-curve
formula), with variances J C J^T by first-order propagation, J by complex-step differentiation
(Squire and Trapp 1998, SIAM Review 40:110).

Choice of window and degree, per quantity (offset and heading from degree 2, curvature and rate from
degree 3): among the windows that the intersection-of-confidence-intervals rule admits for a degree
(Goldenshluger and Nemirovski 1997, Math. Methods Statist. 6:135; Katkovnik 1999, IEEE Trans. Signal
Process. 47:2567: the intervals q +- ICI_GAMMA sd of a window and of all smaller ones share a
point), the (degree, window) with the smallest variance + bias^2. The bias^2 of a fit is estimated
from the next degree's fit on the same window (an embedded estimate, as in Runge-Kutta-Fehlberg
pairs): the squared difference of the two estimates less the variance of that difference (for nested
least-squares fits, the difference of their variances), an unbiased estimate of the squared bias.
The reported bias^2 is the larger of that and the ladder term: the squared differences to the next
LADDER_DEGREES degrees less LADDER_SIGNIFICANCE^2 times their variances (where the polynomial series
converges slowly, degree d + 1 can agree with d while both are off). The reported uncertainty is
sqrt(variance + bias^2), plus the part due to the reference being itself an estimate: (dq / d ref)^2
var(ref) for its curvature and rate, and the last step of the reference iteration (the a-posteriori
error of a fixed-point iteration). Each component is kept apart in the estimate's budget.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

# The uncertainty budget of a side's quantities (JCGM 100:2008, section 5: components added in
# quadrature): the fit's noise, its bias (embedded and ladder estimates), the reference's own
# uncertainty, the reference iteration's last step, and an interpolated side's unobserved first interval.
BUDGET = ("noise", "bias", "reference", "iteration", "interpolation")
DEGREES = (2, 3, 4, 5)  # fitted degrees; degree + 1 is fitted too, for the bias estimate
MIN_DEGREE = (2, 2, 3, 3)  # lowest degree for offset, heading (2) and curvature, rate (3)
MIN_WINDOW_EDGES = 3.0
WINDOW_GROWTH = 1.3
MIN_DOF = 4  # a fit needs this many points more than coefficients
SPREAD_BINS = 50  # ... and as many distinct abscissae as coefficients, told apart at 1/SPREAD_BINS of the
# window (points bunched at a few places, e.g. a CAD strip's seam vertices, determine no polynomial)
NOISE_POINTS = 40  # points in the window that gives a side's noise level
MAX_SLOPE = 0.3  # heights over a side's own reference are flatter than this at the seam (17 deg)
MAX_TILT = 1.0  # ... and than this (45 deg) across the window
ICI_GAMMA = 3.0  # half-width of the window rule's confidence intervals, in std devs
LADDER_DEGREES = 2  # higher degrees whose differences bound a fit's bias
LADDER_SIGNIFICANCE = 3.0  # a higher degree's difference counts as bias beyond this many std devs of it (as ICI_GAMMA)
RATE_SIGNIFICANCE = 3.0  # the reference takes the curvature rate when it exceeds this many std devs
REFERENCE_ITERATIONS = 4
REFERENCE_WINDOW_EDGES = 10.0  # window of the first cubic that gives a side's tangent
REFERENCE_TURN = 0.5  # radians the first cubic's curve may turn over its window (common practice, no published source)
REFERENCE_PASSES = 3
ROUNDING = 1e-9  # relative resolution of the whole chain (transforms, fits) in double precision
OFFSET, HEADING, CURVATURE, RATE = range(4)  # the quantities' places in SideEstimate's arrays
_STEP = 1e-30  # complex step
_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(16)


@dataclass(frozen=True)
class SideEstimate:
    """One side at one station: per quantity (offset along the side's normal from ``end``, heading
    in radians, curvature, curvature rate; section frame, curvature positive away from the outward
    normal) the value, its variance (with the bias estimate), and the degree and window it came from."""

    values: np.ndarray  # (4,)
    variances: np.ndarray  # (4,)
    degrees: np.ndarray  # (4,) int
    windows: np.ndarray  # (4,)
    end: np.ndarray  # (2,) the seam point the fit is taken at
    direction: np.ndarray  # (2,) the side's tangent line (A to B) the offset is measured across
    count: int  # data points on the side
    budget: np.ndarray | None = None  # (len(BUDGET), 4): each component's variance (BUDGET names them)

    @property
    def point(self) -> np.ndarray:
        """The fitted section curve's point at the seam, in section coordinates."""
        return self.end + self.values[OFFSET] * _left(self.direction)

    @property
    def heading(self) -> float:
        """The tangent's heading at the seam point, radians (section frame)."""
        return float(self.values[HEADING])

    @property
    def curvature(self) -> float:
        """Curvature at the seam point, 1/length (positive away from the outward normal)."""
        return float(self.values[CURVATURE])

    @property
    def rate(self) -> float:
        """d(curvature)/d(arc length) at the seam point, 1/length^2."""
        return float(self.values[RATE])

    def uncertainty(self, quantity: int) -> float:
        """Standard uncertainty of one quantity (OFFSET, HEADING, CURVATURE or RATE)."""
        return float(np.sqrt(self.variances[quantity]))


@dataclass(frozen=True)
class Fits:
    """Least-squares fits of every degree 0..P-1 on each of J windows (see polynomial_fits)."""

    coef: np.ndarray  # (J, P, P): [j, d] degree d's coefficients (unscaled), zero-padded
    cov: np.ndarray  # (J, P, 4, 4): covariance of the first four coefficients
    sigma2: np.ndarray  # (J, P): residual variance, at least the noise level squared
    ok: np.ndarray  # (J, P): the fit is determined (p + MIN_DOF points, full rank)


def polynomial_fits(t: np.ndarray, w: np.ndarray, windows: np.ndarray, max_degree: int, noise: float = 0.0,
                    inside: np.ndarray | None = None) -> Fits:
    """Least-squares fits w ~ sum b_j t^j of every degree 0..max_degree on each window |t| <= W
    (and ``inside``) holding enough distinct abscissae (SPREAD_BINS), batched: one QR factorisation of the scaled Vandermonde matrix per window (rows
    outside a window weigh zero), every degree from its leading block (the inverse of a leading block
    of a triangular matrix is the leading block of its inverse)."""
    windows = np.atleast_1d(np.asarray(windows, dtype=float))
    P = max_degree + 1
    mask = np.abs(t)[None, :] <= windows[:, None]
    if inside is not None:
        mask &= inside[None, :]
    count = mask.sum(axis=1)
    A = _powers(t[None, :] / windows[:, None], P) * mask[:, :, None]
    y = w[None, :] * mask
    Q, R = np.linalg.qr(A)
    qy = np.einsum("jnp,jn->jp", Q, y)
    resid = y - np.einsum("jnp,jp->jn", Q, qy)
    tail = np.cumsum((qy**2)[:, ::-1], axis=1)[:, ::-1]  # tail[:, d] = sum_{i >= d} qy_i^2
    rss = (resid**2).sum(axis=1)[:, None] + np.concatenate([tail[:, 1:], np.zeros((len(windows), 1))], axis=1)
    diag = np.abs(np.diagonal(R, axis1=1, axis2=2))
    full_rank = np.minimum.accumulate(diag, axis=1) >= 1e-9 * np.maximum(diag[:, :1], 1e-300)
    spread = np.array([_distinct_abscissae(t[m] / W) for m, W in zip(mask, windows)])
    ok = (count[:, None] >= np.arange(1, P + 1) + MIN_DOF) & (spread[:, None] >= np.arange(1, P + 1)) & full_rank
    R = R + np.eye(P) * np.where(full_rank, 0.0, 1.0)[:, None, :]  # unused degrees: keep R invertible
    Rinv = np.triu(np.linalg.inv(R))
    lower = np.tri(P, dtype=bool)  # lower[d, i]: coefficient i belongs to degree d's fit
    scale = windows[:, None] ** -np.arange(P)[None, :]  # (J, P)
    coef = np.einsum("jik,jdk->jdi", Rinv, lower[None] * qy[:, None, :]) * lower[None] * scale[:, None, :]
    dof = np.maximum(count[:, None] - np.arange(1, P + 1)[None, :], 1)
    floor = (1e-15 * (np.abs(w).max(initial=0.0) + windows)) ** 2
    sigma2 = np.maximum(np.maximum(rss / dof, noise**2), floor[:, None])
    top = Rinv[:, :4, :] * scale[:, :4, None]  # rows of the first four coefficients
    outer = np.cumsum(np.einsum("jik,jlk->jkil", top, top), axis=1)  # sum over columns k <= d
    return Fits(coef, sigma2[:, :, None, None] * outer, sigma2, ok)


def _powers(x: np.ndarray, P: int) -> np.ndarray:
    """(..., P) the powers x^0 .. x^(P-1) by repeated multiplication (a float power per element is
    tens of times slower)."""
    out = np.empty(x.shape + (P,))
    out[..., 0] = 1.0
    for j in range(1, P):
        np.multiply(out[..., j - 1], x, out=out[..., j])
    return out


def _distinct_abscissae(x: np.ndarray) -> int:
    """How many places the abscissae ``x`` (in window units) occupy, told apart at 1/SPREAD_BINS: the
    occupied bins of that width, on the grid that splits fewer of them of two grids half a bin apart
    (rows of a mesh carried into the section are tight clusters; one astride a bin edge is one place)."""
    return min(len(np.unique(np.floor(x * SPREAD_BINS + shift))) for shift in (0.0, 0.5))


def curve_quantities(b: np.ndarray, k0: float, k1: float) -> np.ndarray:
    """(4, ...) offset, heading, curvature and curvature rate at s = 0 of the curve
    C(s) = X(s) + w(s) N(s) whose heights w(s) = sum b_j s^j (b: (4, ...)) stand on a reference
    clothoid X (unit tangent T, normal N = T turned left, curvature k0 + k1 s, arc length s).

    With a = 1 - kappa w and c = w': C' = a T + c N, and the curvature of C is
    (kappa (a^2 + c^2) + a c' - a' c) / (a^2 + c^2)^1.5; differentiating once more gives its rate per
    unit length of C. Curvature and rate are positive towards N; heading is C's tangent angle from T.
    Works on complex input (complex-step derivatives)."""
    b0, b1, b2, b3 = b[0], b[1], b[2], b[3]
    a = 1.0 - k0 * b0
    da = -k1 * b0 - k0 * b1
    dda = -2.0 * k1 * b1 - 2.0 * k0 * b2
    c, dc, ddc = b1, 2.0 * b2, 6.0 * b3
    speed2 = a * a + c * c
    speed = np.sqrt(speed2)
    num = k0 * speed2 + a * dc - da * c
    den = speed2 * speed
    dnum = k1 * speed2 + 2.0 * k0 * (a * da + c * dc) + a * ddc - dda * c
    dden = 3.0 * speed * (a * da + c * dc)
    rate = (dnum * den - num * dden) / (den * den) / speed
    return np.stack([b0, np.arctan(c / a), num / den, rate])


def quantities_with_variance(b: np.ndarray, cov: np.ndarray, k0: float, k1: float) -> tuple[np.ndarray, np.ndarray]:
    """curve_quantities of many fits, b (n, 4) and cov (n, 4, 4), with variances J C J^T: (n, 4) each."""
    b = np.asarray(b, dtype=float)
    values = curve_quantities(b.T, k0, k1).T
    J = np.empty((len(b), 4, 4))
    for j in range(4):
        bj = b.astype(complex)
        bj[:, j] += 1j * _STEP
        J[:, :, j] = curve_quantities(bj.T, k0, k1).imag.T / _STEP
    return values, np.einsum("nij,njk,nik->ni", J, cov, J)


@dataclass(frozen=True)
class Reference:
    """A side's reference clothoid through its seam point: tangent direction there (A to B),
    curvature k0 and curvature rate k1 (positive towards the direction's left normal)."""

    direction: np.ndarray
    k0: float = 0.0
    k1: float = 0.0


def _left(d: np.ndarray) -> np.ndarray:
    return np.array([-d[1], d[0]])


def _rotate(d: np.ndarray, angle: float) -> np.ndarray:
    c, s = np.cos(angle), np.sin(angle)
    return np.array([c * d[0] - s * d[1], s * d[0] + c * d[1]])


def initial_reference(points: np.ndarray, end: np.ndarray, sign: float, h: float,
                      passes: int = REFERENCE_PASSES) -> Reference:
    """A first tangent (A to B) and curvature at the seam: direction from the centroid of the data
    near the seam, refined by the slope of a cubic over REFERENCE_WINDOW_EDGES edges, whose
    curvature it also takes. Where that cubic's curve turns by more than REFERENCE_TURN over its
    window or leaves the tangent steeply (a tight blend seen through a section frame whose normal
    was averaged over the blend), the window shrinks to turn by REFERENCE_TURN and the cubic is
    fitted again about the refined tangent (a fixed-point step, at most ``passes``)."""
    rel = points - end
    dist = np.hypot(*rel.T)
    near = dist <= max(6.0 * h, np.sort(dist)[min(8, len(dist) - 1)])
    c = rel[near].mean(axis=0)
    ref = Reference(sign * c / np.linalg.norm(c))
    window = min(REFERENCE_WINDOW_EDGES * h, float(dist.max()))
    for _ in range(passes):
        d = ref.direction
        u, v = rel @ d, rel @ _left(d)
        fits = polynomial_fits(u, v, window, 3, inside=sign * u >= -0.5 * h)
        if not fits.ok[0, 3]:
            return ref
        a1, a2 = fits.coef[0, 3, 1], fits.coef[0, 3, 2]
        ref = Reference(_rotate(d, float(np.arctan(a1))), float(2.0 * a2 / (1.0 + a1 * a1) ** 1.5))
        turn = abs(ref.k0) * window
        if turn <= REFERENCE_TURN and abs(a1) <= MAX_SLOPE:
            return ref
        window = max(window * min(1.0, REFERENCE_TURN / max(turn, 1e-300)), MIN_WINDOW_EDGES * h)
    return ref


def heights(rel: np.ndarray, ref: Reference) -> tuple[np.ndarray, np.ndarray]:
    """Points (relative to the seam point) as arc length s of their foot on the reference clothoid
    and signed height w along its left normal there (Newton's method on (p - X(s)) . T(s) = 0 from
    the projection on the tangent; X by 16-point Gauss-Legendre quadrature, exact to rounding over
    the turning of a side's data)."""
    d, n = ref.direction, _left(ref.direction)
    u, v = rel @ d, rel @ n
    if ref.k0 == 0.0 and ref.k1 == 0.0:
        return u, v
    s = u.copy()
    for _ in range(6):
        x, y, theta = _clothoid(s, ref.k0, ref.k1)
        dx, dy = u - x, v - y
        along = dx * np.cos(theta) + dy * np.sin(theta)
        normal = -dx * np.sin(theta) + dy * np.cos(theta)
        step = along / np.maximum(1.0 - (ref.k0 + ref.k1 * s) * normal, 0.1)
        s = s + np.clip(step, -0.5 * np.abs(u) - 1e-3, 0.5 * np.abs(u) + 1e-3)
    x, y, theta = _clothoid(s, ref.k0, ref.k1)
    return s, -(u - x) * np.sin(theta) + (v - y) * np.cos(theta)


def _clothoid(s: np.ndarray, k0: float, k1: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Position (x, y) and heading at arc lengths s of the clothoid through 0 with heading 0 there."""
    sigma = 0.5 * s[:, None] * (1.0 + _GL_NODES[None, :])
    phase = k0 * sigma + 0.5 * k1 * sigma * sigma
    x = 0.5 * s * (np.cos(phase) @ _GL_WEIGHTS)
    y = 0.5 * s * (np.sin(phase) @ _GL_WEIGHTS)
    return x, y, k0 * s + 0.5 * k1 * s * s


class _Side:
    """One side's data as heights over a reference, and its fits."""

    def __init__(self, points: np.ndarray, end: np.ndarray, sign: float, h: float, ref: Reference,
                 floor: float = 0.0) -> None:
        self.ref, self.h, self.sign, self.floor = ref, h, sign, floor
        self.t, self.w = heights(points - end, ref)
        self.on_side = sign * self.t >= -0.5 * h
        self.reach = float(np.abs(self.t[self.on_side]).max()) if self.on_side.any() else 0.0

    def fits(self, windows: np.ndarray, noise: float) -> tuple[np.ndarray, np.ndarray]:
        """(windows, degrees, 4) quantities (section frame) and variances of every degree's fit on
        each window; NaN / inf where a degree cannot be fitted or its heights are steep (such a fit
        describes noise or another curve, and its linearised uncertainty would not hold)."""
        windows = np.atleast_1d(np.asarray(windows, dtype=float))
        P = DEGREES[-1] + 2
        f = polynomial_fits(self.t, self.w, windows, P - 1, noise, self.on_side)
        j = np.arange(1, P)
        slope0 = f.coef[:, :, 1]
        slope_end = (f.coef[:, :, 1:] * j * (self.sign * windows[:, None, None]) ** (j - 1)).sum(axis=2)
        usable = f.ok & (np.arange(P) >= DEGREES[0]) & (np.abs(slope0) <= MAX_SLOPE) & (np.abs(slope_end) <= MAX_TILT)
        vals = np.full((len(windows), P, 4), np.nan)
        vars_ = np.full((len(windows), P, 4), np.inf)
        if usable.any():
            q, var = quantities_with_variance(f.coef[usable][:, :4], f.cov[usable], self.ref.k0, self.ref.k1)
            vals[usable], vars_[usable] = self.to_section(q), var
        return vals, vars_

    def to_section(self, q: np.ndarray) -> np.ndarray:
        """Quantities to the section frame: the heading adds the reference direction's angle, and
        surfcheck's curvature is positive away from the outward normal (the reference's left normal
        is the section's +y, the outward normal), so curvature and rate change sign."""
        out = q * np.array([1.0, 1.0, -1.0, -1.0])
        out[..., 1] += np.arctan2(self.ref.direction[1], self.ref.direction[0])
        return out

    def noise_level(self, w_min: float) -> float:
        """The noise: the residual of the highest fitted degree on the smallest window (at least
        w_min) holding NOISE_POINTS points. Fits whose own residual is smaller (by chance, or
        over-fitted on few points) use this instead."""
        t = np.abs(self.t[self.on_side])
        if len(t) < NOISE_POINTS:
            return self.floor
        window = max(w_min, float(np.sort(t)[NOISE_POINTS - 1]))
        f = polynomial_fits(self.t, self.w, window, DEGREES[-1], inside=self.on_side)
        return max(float(np.sqrt(f.sigma2[0, -1])) if f.ok[0, -1] else 0.0, self.floor)


def fit_side(points: np.ndarray, end: np.ndarray, sign: float, h: float, floor: float = 0.0,
             end_floor=(0.0, 0.0, 0.0, 0.0)) -> SideEstimate:
    """One-sided estimate of a side at its seam point ``end``: ``sign`` -1 for side A (its data lies
    before the seam), +1 for side B; ``h`` the typical edge length; ``floor`` the least standard
    deviation of a point about the section curve (for data interpolated between mesh points, which
    shows no residual of its own); ``end_floor`` a standard uncertainty per quantity (offset,
    heading, curvature, rate) that the data cannot show, added in quadrature (JCGM 100:2008, 5.1.2),
    e.g. an interpolated side's unobserved first interval (surface_cut.py). See the module docstring."""
    end = np.asarray(end, dtype=float)
    if len(points) < NOISE_POINTS // 4:
        return _unresolved(end, len(points))
    ref = Reference(initial_reference(points, end, sign, h).direction)
    side = _Side(points, end, sign, h, ref, floor)
    est = _estimate(side, len(points), end)
    step = np.zeros(4)  # the iteration's last change of the quantities
    for _ in range(REFERENCE_ITERATIONS):
        if not np.isfinite(est.variances[HEADING:RATE]).all():
            break
        new = _reference_from(est, side.reach)
        u_k0, u_k1 = est.uncertainty(CURVATURE), est.uncertainty(RATE)
        converged = abs(new.k0 - ref.k0) <= 0.1 * u_k0 + 1e-12 and abs(new.k1 - ref.k1) <= 0.1 * u_k1 + 1e-12
        new_side = _Side(points, end, sign, h, new, floor)
        new_est = _estimate(new_side, len(points), end)
        if not np.isfinite(new_est.variances[HEADING:RATE]).all():
            break  # keep the last reference that gave an estimate
        step = new_est.values - est.values
        ref, side, est = new, new_side, new_est
        if converged:
            break
    est = _with_reference_noise(est, points, end, sign, h, ref)
    rounding = (ROUNDING * np.array([h, 1.0, 1.0 / h, 1.0 / h**2])) ** 2
    # the a-posteriori error of the fixed-point iteration: where the references cycle between two fits
    # instead of converging, the fixed point lies between them (a 2-cycle of a map that contracts near
    # it straddles it), so the estimate is off by up to half their difference; a converged iteration's
    # last step is below a tenth of u and adds nothing that matters
    budget = est.budget.copy()
    iteration, interpolation = np.square(0.5 * step), np.square(end_floor)
    budget[BUDGET.index("iteration")], budget[BUDGET.index("interpolation")] = iteration, interpolation
    return replace(est, variances=np.maximum(est.variances + iteration + interpolation, rounding), budget=budget)


def _reference_from(est: SideEstimate, reach: float) -> Reference:
    """The reference clothoid of an estimate: its heading and curvature, and its curvature rate
    where that is significant and turns the reference by less than a radian over the data (else 0:
    a noisy rate would only bend the reference away from the data)."""
    k1 = -est.rate
    significant = (np.isfinite(est.variances[RATE]) and abs(k1) > RATE_SIGNIFICANCE * est.uncertainty(RATE)
                   and 0.5 * abs(k1) * reach**2 <= 1.0)
    return Reference(np.array([np.cos(est.heading), np.sin(est.heading)]), -est.curvature, k1 if significant else 0.0)


def _estimate(side: _Side, count: int, end: np.ndarray) -> SideEstimate:
    """Fits on growing windows and the choice of _select, per quantity."""
    w_min = MIN_WINDOW_EDGES * side.h
    n = max(0, int(np.ceil(np.log(max(side.reach, w_min) / w_min) / np.log(WINDOW_GROWTH))))
    windows = np.append(w_min * WINDOW_GROWTH ** np.arange(n), side.reach)
    windows = windows[windows <= side.reach]
    if len(windows) == 0:
        return _unresolved(end, count)
    vals, vars_ = side.fits(windows, side.noise_level(w_min))
    best, (win, deg) = _select(vals, vars_)
    if not np.isfinite(best).any():
        return _unresolved(end, count)
    values = np.where(np.isfinite(best), vals[win, deg, np.arange(4)], 0.0)
    resolved = np.isfinite(best)
    noise = np.where(resolved, vars_[win, deg, np.arange(4)], np.inf)
    budget = np.zeros((len(BUDGET), 4))
    budget[0] = noise
    budget[1][resolved] = best[resolved] - noise[resolved]
    return SideEstimate(values, best, deg, windows[win], end, side.ref.direction, count, budget)


def _select(vals: np.ndarray, vars_: np.ndarray) -> tuple[np.ndarray, tuple[np.ndarray, np.ndarray]]:
    """Per quantity, the (window, degree) with the smallest variance + bias^2 among the windows the
    ICI rule admits (bias from the next degree), and its variance + the larger of that bias^2 and the
    ladder's (the next LADDER_DEGREES degrees; see the module docstring). vals, vars_: (windows,
    degrees, 4)."""
    score = np.full(vals.shape, np.inf)
    stated = np.full(vals.shape, np.inf)
    for deg in DEGREES:
        here, v = vals[:, deg], vars_[:, deg]
        valid = np.isfinite(here) & np.isfinite(v) & np.isfinite(vals[:, deg + 1])
        sd = np.sqrt(np.where(valid, v, np.inf))
        lower = np.maximum.accumulate(np.where(valid, here - ICI_GAMMA * sd, -np.inf), axis=0)
        upper = np.minimum.accumulate(np.where(valid, here + ICI_GAMMA * sd, np.inf), axis=0)
        admitted = np.logical_and.accumulate(lower <= upper, axis=0) & valid
        admitted &= deg >= np.array(MIN_DEGREE)[None, :]
        with np.errstate(invalid="ignore"):
            square = (vals[:, deg + 1:deg + 1 + LADDER_DEGREES] - here[:, None]) ** 2
            spread = np.maximum(vars_[:, deg + 1:deg + 1 + LADDER_DEGREES] - v[:, None], 0.0)
            embedded = np.maximum(square[:, 0] - spread[:, 0], 0.0)
            ladder = np.where(np.isfinite(square), square - LADDER_SIGNIFICANCE**2 * spread, -np.inf).max(axis=1)
        score[:, deg] = np.where(admitted, v + embedded, np.inf)
        stated[:, deg] = np.where(admitted, v + np.maximum(embedded, ladder), np.inf)
    flat = score.reshape(-1, 4)
    k = np.argmin(flat, axis=0)
    win, deg = np.unravel_index(k, vals.shape[:2])
    return stated.reshape(-1, 4)[k, np.arange(4)], (win, deg)


def _with_reference_noise(est: SideEstimate, points, end, sign, h, ref: Reference) -> SideEstimate:
    """Add to each quantity's variance the part that comes from the reference being itself an
    estimate: for its curvature and (where used) its rate, (dq / d ref)^2 var(ref), the slopes by
    central differences at the chosen fits. A perturbed reference that leaves a fit unusable adds
    nothing."""
    variances = est.variances.copy()
    budget = est.budget.copy()
    windows = np.unique(est.windows)
    for field, k in (("k0", CURVATURE), ("k1", RATE)):
        u_ref = est.uncertainty(k)
        if (field == "k1" and ref.k1 == 0.0) or not np.isfinite(u_ref) or u_ref == 0.0:
            continue
        moved = [_Side(points, end, sign, h, replace(ref, **{field: getattr(ref, field) + e * u_ref})).fits(windows, 0.0)[0]
                 for e in (1.0, -1.0)]
        for q in range(4):
            j = int(np.searchsorted(windows, est.windows[q]))
            slope = (moved[0][j, est.degrees[q], q] - moved[1][j, est.degrees[q], q]) / (2.0 * u_ref)
            if np.isfinite(slope):
                variances[q] += (slope * u_ref) ** 2
                budget[BUDGET.index("reference"), q] += (slope * u_ref) ** 2
    return replace(est, variances=variances, budget=budget)


def _unresolved(end: np.ndarray, count: int) -> SideEstimate:
    return SideEstimate(np.zeros(4), np.full(4, np.inf), np.zeros(4, dtype=int), np.zeros(4), end,
                        np.array([1.0, 0.0]), count, np.full((len(BUDGET), 4), np.inf))
