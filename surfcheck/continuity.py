"""Continuity across a seam: one-sided polynomial fits at each station, G0..G3 with uncertainty, grades.

Estimator (per station, per side, using only that side's data, see sections.py): the side's section
points are written as a height function v(u) over the side's own tangent line at the seam point and
fitted by least squares with polynomials of degree 3, 4 and 5 over one-sided windows growing from
3 edge lengths to the data's reach. From each fit's coefficients a_j and their covariance
sigma^2 (A^T A)^-1 (sigma^2 from the fit's residual) follow the side's position at the seam (a0), its
tangent direction atan(a1), its curvature kappa = -v'' / (1 + v'^2)^(3/2) and its curvature rate
d kappa / d s = -(v''' / (1 + v'^2)^2 - 3 v' v''^2 / (1 + v'^2)^3), with variances by first-order
propagation (J C J^T). The bias of a fit is estimated from the next degree's fit on the same window
(an embedded estimate, as in Runge-Kutta-Fehlberg pairs): b^2 = max(0, (q_{d+1} - q_d)^2 - (var_{d+1}
- var_d)), the squared difference less its own noise. For each quantity the (degree, window) with the
smallest estimated mean-squared error var + b^2 is used, and its uncertainty is sqrt(var + b^2): a wide
window where the model still holds on noisy data, a narrow one where a low degree would report the
window's mean curvature. Curvature is signed by the outward normal (positive where the surface bends
away from it).

Jumps at the station: G0 the distance between the two sides' seam points in the section, G1 the
angle between their tangents (degrees), G2 the curvature jump |kappa_B - kappa_A| (and relative to the
larger |kappa|), G3 the curvature-rate jump; the two sides' uncertainties add in quadrature.

On a welded seam a small search for the true transition runs first (scanned parts are often labelled
an edge or two off): the section's points are split at candidate positions within +-2 edge lengths and
fitted by two cubics (a segmented regression with unknown breakpoint, Hudson 1966, JASA 61:1097); the
split moves only when it lowers the residual sum of squares by more than SEARCH_THRESHOLD residual
variances (about the 0.99 quantile of chi-squared with the two cubics' 8 coefficients).

Decision rule (ISO 14253-1 style guard bands with the expanded uncertainty U = k u, k the profile's
coverage factor, JCGM 100:2008): at a station an order is "ok" when value + U <= tolerance, "fail" when
value - U > tolerance, else "not resolved". A seam fails an order when any station fails it, holds it
when every station holds it, and is "not resolved" otherwise. ``achieved`` is the highest k with
G0..Gk all "ok" (-1 when G0 is not).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.seams import Curve
from surfcheck.sections import Section, cut_sections
from surfcheck.tolerances import ToleranceProfile

ORDERS = ("G0", "G1", "G2", "G3")
UNITS = ("{u}", "deg", "1/{u}", "1/{u}^2")
DEGREES = (3, 4, 5)  # fitted degrees; degree + 1 is fitted too, for the bias estimate
MIN_WINDOW_EDGES = 3.0
WINDOW_GROWTH = 1.25
SEARCH_EDGES = 2.0  # the transition search spans +-2 edge lengths
SEARCH_STEP_EDGES = 0.25
SEARCH_WINDOW_EDGES = 8.0
SEARCH_FLOOR = 1e-3  # a shift must beat residuals of this fraction of an edge length: a cubic over
# a few edges misfits a clean, curving surface by about as much, and that is no evidence of a shift
SEARCH_THRESHOLD = 20.0  # ~ chi-squared(8) 0.99 quantile; in units of the residual variance
STATUSES = ("ok", "fail", "not resolved")
REFERENCE_WINDOW_EDGES = 10.0  # window of the first cubic that gives a side's tangent and curvature
FLAT_TURN = 1e-3  # a side turning less than this (radians) over its data is fitted over its tangent


# ---------------------------------------------------------------- one-sided fits


@dataclass(frozen=True)
class SideEstimate:
    """One side at one station: per quantity (offset, heading, curvature, curvature rate) the value,
    its variance (including the bias estimate), and the degree and window it came from."""

    values: np.ndarray  # (4,): offset along ``normal`` from ``end``, heading (rad), kappa, d kappa/ds
    variances: np.ndarray  # (4,)
    degrees: np.ndarray  # (4,) int
    windows: np.ndarray  # (4,)
    end: np.ndarray  # (2,) the seam point the fit is taken at
    direction: np.ndarray  # (2,) the side's tangent line (A to B)
    count: int  # data points on the side

    @property
    def point(self) -> np.ndarray:
        """The fitted section curve's point at the seam, in section coordinates."""
        normal = np.array([-self.direction[1], self.direction[0]])
        return self.end + self.values[0] * normal


def polynomial_fits(u: np.ndarray, v: np.ndarray, window: float, max_degree: int) -> list:
    """Least-squares fits v ~ sum a_j u^j of every degree up to ``max_degree`` on one window, from one
    QR factorisation of the (scaled) Vandermonde matrix. Returns per degree (a, covariance) with the
    covariance sigma^2 (A^T A)^-1, sigma^2 = RSS / (n - p), or None where the fit is not determined."""
    t = u / window
    A = np.vander(t, max_degree + 1, increasing=True)
    Q, R = np.linalg.qr(A)
    qy = Q.T @ v
    scale = window ** -np.arange(max_degree + 1)
    diag = np.abs(np.diag(R))
    out = []
    for degree in range(max_degree + 1):
        p = degree + 1
        if len(u) < p + 2 or diag[:p].min() < 1e-9 * diag[0]:
            out.append(None)
            continue
        Rp = R[:p, :p]
        c = np.linalg.solve(Rp, qy[:p])
        resid = v - A[:, :p] @ c
        sigma2 = float(resid @ resid) / (len(u) - p)
        sigma2 = max(sigma2, (1e-15 * (np.abs(v).max() + window)) ** 2)
        Rinv = np.linalg.solve(Rp, np.eye(p))
        cov = sigma2 * (Rinv @ Rinv.T)
        out.append((c * scale[:p], cov * np.outer(scale[:p], scale[:p])))
    return out


def curve_quantities(b: np.ndarray, radius: float) -> np.ndarray:
    """Offset, heading, curvature and curvature rate at t = 0 of the curve whose height over a
    reference is w(t) = sum b_j t^j: over its tangent line (radius inf: v = w(u)) or over a circle of
    ``radius`` through the seam point, centred on the +v side (w = radius - R, t = radius * phi, polar
    coordinates R, phi about the centre). Curvature and rate are positive towards +v; heading is the
    tangent's angle from the u axis. Works on complex input (for complex-step derivatives)."""
    b0, b1, b2, b3 = b[0], b[1], b[2], b[3]
    if not np.isfinite(radius):
        g = 1.0 + b1 * b1
        return np.array([b0, np.arctan(b1), 2.0 * b2 / g**1.5, 6.0 * b3 / g**2 - 12.0 * b1 * b2 * b2 / g**3])
    # polar curve r(phi) = radius - w(radius * phi): curvature (r^2 + 2 r'^2 - r r'') / (r^2 + r'^2)^1.5
    r, r1, r2, r3 = radius - b0, -radius * b1, -2.0 * radius**2 * b2, -6.0 * radius**3 * b3
    speed2 = r * r + r1 * r1
    num, den = r * r + 2.0 * r1 * r1 - r * r2, speed2**1.5
    dnum = 2.0 * r * r1 + 3.0 * r1 * r2 - r * r3
    dden = 3.0 * np.sqrt(speed2) * r1 * (r + r2)
    rate = (dnum * den - num * dden) / den**2 / np.sqrt(speed2)
    return np.array([b0, np.arctan(-r1 / r), num / den, rate])


def section_quantities(b: np.ndarray, cov: np.ndarray, radius: float) -> tuple[np.ndarray, np.ndarray]:
    """curve_quantities and their variances J C J^T, J by complex-step differentiation (Squire and
    Trapp 1998, SIAM Review 40:110), exact to rounding."""
    b = np.asarray(b[:4], dtype=float)
    values = curve_quantities(b, radius)
    step = 1e-30
    J = np.empty((4, 4))
    for j in range(4):
        bj = b.astype(complex)
        bj[j] += 1j * step
        J[:, j] = curve_quantities(bj, radius).imag / step
    return values, np.einsum("ij,jk,ik->i", J, cov[:4, :4], J)


@dataclass(frozen=True)
class _Reference:
    """A side's tangent direction at the seam (A to B), its curvature there (towards +v, the
    direction's left normal) and the curve's point nearest the seam point, from a cubic fit."""

    direction: np.ndarray
    curvature: float
    point: np.ndarray


def _reference(points: np.ndarray, end: np.ndarray, sign: float, h: float) -> _Reference:
    """Tangent from the centroid of the side's data near the seam, refined with a cubic's slope."""
    rel = points - end
    dist = np.hypot(*rel.T)
    near = dist <= max(6.0 * h, np.sort(dist)[min(8, len(dist) - 1)])
    c = rel[near].mean(axis=0)
    d = sign * c / np.linalg.norm(c)
    n = np.array([-d[1], d[0]])
    u, v = rel @ d, rel @ n
    window = min(REFERENCE_WINDOW_EDGES * h, float(dist.max()))
    sel = (dist <= window) & (sign * u >= -0.5 * h)
    fits = polynomial_fits(u[sel], v[sel], window, 3) if sel.sum() >= 6 else []
    fit = next((f for f in reversed(fits) if f is not None), None)
    if fit is None:
        return _Reference(d, 0.0, np.asarray(end, dtype=float))
    a = fit[0]
    a = np.concatenate([a, np.zeros(4 - len(a))])
    beta = np.arctan(a[1])
    cb, sb = np.cos(beta), np.sin(beta)
    rotated = np.array([cb * d[0] - sb * d[1], sb * d[0] + cb * d[1]])
    return _Reference(rotated, float(2.0 * a[2] / (1.0 + a[1] ** 2) ** 1.5), end + a[0] * n)


def _heights(rel: np.ndarray, ref: _Reference) -> tuple[np.ndarray, np.ndarray, float, float]:
    """Points (relative to the seam point) as heights w over the reference at parameter t: over the
    tangent line where the side is nearly flat (radius inf), else over the circle of the reference
    curvature tangent there, in a frame mirrored (bend -1) so that the circle bends towards +v."""
    d = ref.direction
    u, v = rel @ d, rel @ np.array([-d[1], d[0]])
    if abs(ref.curvature) * np.hypot(u, v).max() < FLAT_TURN:
        return u, v, np.inf, 1.0
    bend = 1.0 if ref.curvature >= 0 else -1.0
    radius = 1.0 / abs(ref.curvature)
    dy = bend * v - radius
    return radius * np.arctan2(u, -dy), radius - np.hypot(u, dy), radius, bend


def fit_side(points: np.ndarray, end: np.ndarray, sign: float, h: float) -> SideEstimate:
    """One-sided estimate of a side at its seam point ``end`` (sign -1 for side A, whose data lies
    before the seam, +1 for side B). The height function is taken over the side's osculating circle
    at the seam (from a first cubic), or over its tangent line where the side is nearly flat, so
    that an arc is fitted without the bias of a graph over its tangent; then windows and degrees as
    in the module docstring."""
    if len(points) < 6:
        return _unresolved_side(end, len(points))
    ref = _reference(points, end, sign, h)
    d = ref.direction
    rel = points - end
    dist = np.hypot(*rel.T)
    t, w, radius, bend = _heights(rel, ref)
    on_side = sign * t >= -0.5 * h
    reach = float(dist[on_side].max()) if on_side.any() else 0.0
    w_min = MIN_WINDOW_EDGES * h
    windows = [w_min * WINDOW_GROWTH**j for j in range(64) if w_min * WINDOW_GROWTH**j < reach] + [reach]
    best = np.full(4, np.inf)
    values = np.zeros(4)
    degrees = np.zeros(4, dtype=int)
    chosen = np.zeros(4)
    max_degree = DEGREES[-1] + 1
    for window in windows:
        sel = on_side & (dist <= window)
        if sel.sum() < DEGREES[0] + 3:
            continue
        fits = polynomial_fits(t[sel], w[sel], window, max_degree)
        q = {deg: section_quantities(fits[deg][0], fits[deg][1], radius)
             for deg in range(DEGREES[0], max_degree + 1) if fits[deg]}
        for deg in DEGREES:
            if deg not in q:
                continue
            val, var = q[deg]
            if deg + 1 in q:
                val1, var1 = q[deg + 1]
                bias2 = np.maximum((val1 - val) ** 2 - np.maximum(var1 - var, 0.0), 0.0)
            else:
                bias2 = np.full(4, np.inf)
            score = var + bias2
            better = score < best
            best[better] = score[better]
            values[better] = val[better]
            degrees[better] = deg
            chosen[better] = window
    # back from the (possibly mirrored) +v-bending frame; surfcheck's curvature is positive away from
    # the outward normal (-v), so curvature and rate change sign
    values = values * np.array([bend, bend, -bend, -bend])
    values[1] += np.arctan2(d[1], d[0])
    return SideEstimate(values, best, degrees, chosen, np.asarray(end, dtype=float), d, len(points))


def _unresolved_side(end: np.ndarray, count: int) -> SideEstimate:
    return SideEstimate(np.zeros(4), np.full(4, np.inf), np.zeros(4, dtype=int), np.zeros(4),
                        np.asarray(end, dtype=float), np.array([1.0, 0.0]), count)


# ---------------------------------------------------------------- transition search


def _merged(section: Section) -> np.ndarray:
    """Both sides' section points, each vertex once."""
    _, first = np.unique(np.concatenate([section.ids_a, section.ids_b]), return_index=True)
    return np.concatenate([section.side_a, section.side_b])[first]


def find_transition(section: Section) -> float:
    """Offset along the section's x of the split between the sides that fits best, 0.0 unless a
    split within +-SEARCH_EDGES edge lengths lowers the residual sum of squares of two cubic heights
(over each side's reference circle, as in fit_side) by more
    than SEARCH_THRESHOLD residual variances. Every candidate splits the same points (each vertex once),
    so the sums compare; ties go to the smaller shift."""
    h = section.edge
    xy = _merged(section)
    window = SEARCH_WINDOW_EDGES * h
    xy = xy[np.abs(xy[:, 0]) <= window + SEARCH_EDGES * h]
    x = xy[:, 0]
    if len(x) < 24:
        return 0.0
    heights = [_heights(xy, _reference(xy[x <= 0.0], np.zeros(2), -1.0, h))[:2],
               _heights(xy, _reference(xy[x >= 0.0], np.zeros(2), 1.0, h))[:2]]

    def rss(delta: float) -> float:
        total = 0.0
        for (t, w), part in zip(heights, (x < delta, x >= delta)):
            if part.sum() < 8:
                return np.inf
            A = np.vander(t[part] / window, 4, increasing=True)
            r = w[part] - A @ np.linalg.lstsq(A, w[part], rcond=None)[0]
            total += float(r @ r)
        return total

    steps = np.arange(-SEARCH_EDGES, SEARCH_EDGES + 1e-9, SEARCH_STEP_EDGES) * h
    steps = steps[np.argsort(np.abs(steps), kind="stable")]
    scores = np.array([rss(float(delta)) for delta in steps])
    best = float(scores.min())
    if not np.isfinite(best):
        return 0.0
    sigma2 = max(best / (len(x) - 8), (SEARCH_FLOOR * h) ** 2)
    k = int(np.flatnonzero(scores <= best + sigma2)[0])
    return float(steps[k]) if scores[0] - scores[k] > SEARCH_THRESHOLD * sigma2 else 0.0


def _split_at(section: Section, delta: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Both sides' data re-split at x = delta (each vertex once), and the data point nearest the split."""
    xy = _merged(section)
    below = xy[:, 0] < delta
    return xy[below], xy[~below], xy[np.argmin(np.abs(xy[:, 0] - delta))]


# ---------------------------------------------------------------- results


@dataclass(frozen=True)
class OrderResult:
    """One order at one station: the measured value, its standard uncertainty, the tolerance that
    applied there and the decision ("ok", "fail" or "not resolved"); ``relative`` for G2 and G3."""

    value: float
    uncertainty: float
    tolerance: float
    status: str
    relative: float | None = None

    def to_dict(self) -> dict:
        out = {"value": _num(self.value), "uncertainty": _num(self.uncertainty),
               "tolerance": _num(self.tolerance), "status": self.status}
        if self.relative is not None:
            out["relative"] = _num(self.relative)
        return out


@dataclass(frozen=True)
class StationResult:
    """All four orders at one station, with each side's curvature and curvature rate."""

    index: int
    s: float
    position: np.ndarray  # (3,) seam point (after the transition search)
    shift: float  # transition search offset along the section, length
    orders: tuple[OrderResult, OrderResult, OrderResult, OrderResult]
    curvature: tuple[float, float]  # side A, side B (1/length)
    rate: tuple[float, float]  # d kappa / d s, side A, side B (1/length^2)
    counts: tuple[int, int]  # data points per side
    windows: tuple[float, float]  # window used for the curvature, side A, side B

    def to_dict(self) -> dict:
        out = {"index": self.index, "s": self.s, "position": [float(c) for c in self.position],
               "shift": self.shift}
        out.update({name: r.to_dict() for name, r in zip(ORDERS, self.orders)})
        out.update({"curvature": [_num(c) for c in self.curvature], "rate": [_num(c) for c in self.rate],
                    "points": list(self.counts), "windows": [_num(w) for w in self.windows]})
        return out


@dataclass(frozen=True)
class OrderSummary:
    """One order over a seam: the governing station's value, uncertainty and tolerance, the seam's
    status, the maximum and 95th percentile of the station values, where the governing station is."""

    value: float
    uncertainty: float
    tolerance: float
    status: str
    max: float
    p95: float
    worst_station: int
    worst_position: np.ndarray

    def to_dict(self, unit: str) -> dict:
        return {"value": _num(self.value), "uncertainty": _num(self.uncertainty),
                "tolerance": _num(self.tolerance), "status": self.status, "unit": unit,
                "max": _num(self.max), "p95": _num(self.p95), "worst_station": self.worst_station,
                "worst_position": [float(c) for c in self.worst_position]}


@dataclass(frozen=True)
class SeamGrade:
    """The grade of one seam: per-order summaries, the stations, and ``achieved`` (-1..3)."""

    id: str
    groups: tuple[str, str]
    length: float
    welded: bool
    units: str
    tolerance: str
    orders: tuple[OrderSummary, OrderSummary, OrderSummary, OrderSummary]
    stations: tuple[StationResult, ...]
    achieved: int

    @property
    def limited_by(self) -> tuple[str, str] | None:
        """The first order that does not hold and why ("fail" or "not resolved"), None at G3."""
        if self.achieved >= 3:
            return None
        k = self.achieved + 1
        return ORDERS[k], self.orders[k].status

    def to_dict(self) -> dict:
        limit = self.limited_by
        return {
            "id": self.id,
            "groups": list(self.groups),
            "length": self.length,
            "welded": self.welded,
            "tolerance": self.tolerance,
            "stations": len(self.stations),
            "achieved": self.achieved,
            "limited_by": None if limit is None else {"order": limit[0], "status": limit[1]},
            "orders": {name: summary.to_dict(unit.format(u=self.units))
                       for name, summary, unit in zip(ORDERS, self.orders, UNITS)},
            "station_values": [s.to_dict() for s in self.stations],
        }


def _num(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None


# ---------------------------------------------------------------- decisions


def decide(value: float, uncertainty: float, tolerance: float, coverage: float) -> str:
    """ok when value + k u <= tolerance, fail when value - k u > tolerance, else not resolved."""
    expanded = coverage * uncertainty
    if not np.isfinite(expanded):
        return "not resolved"
    if value + expanded <= tolerance:
        return "ok"
    if value - expanded > tolerance:
        return "fail"
    return "not resolved"


def grade_section(section: Section, profile: ToleranceProfile, search: bool = True) -> StationResult:
    """Fit both sides at one station and grade G0..G3 against the profile (in the part's units)."""
    shift = find_transition(section) if (search and section.welded) else 0.0
    if shift != 0.0:
        data_a, data_b, end_a = _split_at(section, shift)
        end_b = end_a
    else:
        data_a, data_b, end_a, end_b = section.side_a, section.side_b, section.end_a, section.end_b
    a = fit_side(data_a, end_a, -1.0, section.edge)
    b = fit_side(data_b, end_b, 1.0, section.edge)
    k = profile.coverage
    gap = float(np.linalg.norm(b.point - a.point))
    turn = (b.values[1] - a.values[1] + np.pi) % (2 * np.pi) - np.pi
    # on a welded seam the common seam point lies off the curves by about the fits' offsets; where
    # the tangents differ, that moves the two sides' points apart by offset * sin(angle)
    off = max(abs(a.values[0]), abs(b.values[0])) * abs(np.sin(turn)) if section.welded else 0.0
    u_gap = float(np.sqrt(a.variances[0] + b.variances[0] + off**2))
    angle, u_angle = float(np.degrees(abs(turn))), float(np.degrees(np.sqrt(a.variances[1] + b.variances[1])))
    orders = [
        OrderResult(gap, u_gap, profile.g0_gap, decide(gap, u_gap, profile.g0_gap, k)),
        OrderResult(angle, u_angle, profile.g1_angle, decide(angle, u_angle, profile.g1_angle, k)),
    ]
    for q, absolute, relative in ((2, profile.g2_abs, profile.g2_rel), (3, profile.g3_abs, profile.g3_rel)):
        jump = float(abs(b.values[q] - a.values[q]))
        u_jump = float(np.sqrt(a.variances[q] + b.variances[q]))
        larger = float(max(abs(a.values[q]), abs(b.values[q])))
        tol = max(absolute, relative * larger)
        orders.append(OrderResult(jump, u_jump, tol, decide(jump, u_jump, tol, k),
                                  jump / larger if larger > 0 else 0.0))
    position = section.to_world(0.5 * (a.point + b.point))
    return StationResult(section.index, section.s, position, shift, tuple(orders),
                         (float(a.values[2]), float(b.values[2])), (float(a.values[3]), float(b.values[3])),
                         (a.count, b.count), (float(a.windows[2]), float(b.windows[2])))


def summarize(stations: list[StationResult], order: int) -> OrderSummary:
    """Seam-level result of one order: fail if any station fails, ok if all are ok, else not
    resolved; the governing station is the one with the largest value / tolerance among those that
    share the seam's status."""
    results = [s.orders[order] for s in stations]
    statuses = [r.status for r in results]
    status = "fail" if "fail" in statuses else ("ok" if all(x == "ok" for x in statuses) else "not resolved")
    ratio = np.array([r.value / r.tolerance if r.status == status else -np.inf for r in results])
    worst = int(np.argmax(ratio))
    values = np.array([r.value for r in results])
    r = results[worst]
    return OrderSummary(r.value, r.uncertainty, r.tolerance, status, float(values.max()),
                        float(np.percentile(values, 95)), stations[worst].index, stations[worst].position)


def achieved_order(summaries: list[OrderSummary]) -> int:
    """Highest k with G0..Gk all ok; -1 when G0 is not."""
    k = -1
    for summary in summaries:
        if summary.status != "ok":
            break
        k += 1
    return k


def grade_seam(
    part: Part,
    seam: Curve,
    profile: ToleranceProfile,
    stations: int | None = None,
    spacing: float | None = None,
    *,
    strip: float | None = None,
    reach: float | None = None,
    search: bool = True,
) -> SeamGrade:
    """Grade the continuity of a seam between two face groups (welded, or separate shells).

    ``stations`` (a count) or ``spacing`` (a length) place the stations; by default they are two
    strip widths apart, at most 48. ``strip`` and ``reach`` are passed to sections.cut_sections;
    ``search`` enables the transition search on welded seams. Tolerances are converted to the part's
    units.
    """
    if seam.kind != "seam":
        raise InputError(f"{seam.id} is a {seam.kind}, not a seam between two groups")
    profile = profile.in_units(part.units)
    sections = cut_sections(part, seam, stations, spacing, strip, reach)
    if not sections:
        raise InputError(f"{seam.id}: no station has data on both sides; check the groups {seam.groups}")
    results = [grade_section(section, profile, search) for section in sections]
    summaries = [summarize(results, k) for k in range(4)]
    return SeamGrade(seam.id, (seam.groups[0], seam.groups[1]), seam.length, sections[0].welded, part.units,
                     profile.name, tuple(summaries), tuple(results), achieved_order(summaries))
