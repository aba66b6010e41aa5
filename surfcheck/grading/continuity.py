"""Continuity grades of a seam: G0..G3 per station from the two sides' one-sided estimates
(sidefit.py), decisions against a tolerance profile, and the summary per seam.

Per station (sections.py gives both sides' data in the section plane; on a welded seam the split
may first move to the true transition, transition.py): G0 is the distance between the two sides'
fitted curves at the seam point, G1 the angle between their tangents (degrees), G2 the curvature jump
|kappa_B - kappa_A| (and relative to the larger |kappa|), G3 the jump in d(kappa)/d(arc length); the
two sides' standard uncertainties add in quadrature (their data are disjoint but for the shared seam
vertices of a welded seam).

Decision rule (the guard bands of ISO 14253-1, with the expanded uncertainty U = k u of JCGM 100:2008,
k the profile's coverage factor, 2 by default): at a station an order is "ok" when value + U <=
tolerance, "fail" when value - U > tolerance, and "not resolved" otherwise, so that noise is not
taken for a jump and a jump is not hidden by noise. The tolerance of G2 (G3) at a station is
max(absolute, relative * the larger |kappa| (|rate|) of the two sides). A seam fails an order when
any station fails it, holds it when every station holds it, and is "not resolved" otherwise;
``achieved`` is the highest k with G0..Gk all "ok" (-1 when G0 is not).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from surfcheck.seams import Curve
from surfcheck.grading.sections import Section
from surfcheck.grading.sidefit import CURVATURE, HEADING, OFFSET, RATE, SideEstimate, fit_side
from surfcheck.grading.status import Status
from surfcheck.grading.tolerances import ToleranceProfile
from surfcheck.grading.transition import find_transition, split_at

ORDERS = ("G0", "G1", "G2", "G3")
UNITS = ("{u}", "deg", "1/{u}", "1/{u}^2")


# ---------------------------------------------------------------- results


@dataclass(frozen=True)
class OrderResult:
    """One order at one station: the measured value, its standard uncertainty, the tolerance that
    applied there and the decision ("ok", "fail" or "not resolved"); ``relative`` for G2 and G3."""

    value: float
    uncertainty: float
    tolerance: float
    status: Status
    relative: float | None = None

    def to_dict(self) -> dict:
        out = {"value": _measured(self.value, self.uncertainty), "uncertainty": _num(self.uncertainty),
               "tolerance": _num(self.tolerance), "status": self.status.value}
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
    status: Status
    max: float
    p95: float
    worst_station: int
    worst_position: np.ndarray

    def to_dict(self, unit: str) -> dict:
        return {"value": _measured(self.value, self.uncertainty), "uncertainty": _num(self.uncertainty),
                "tolerance": _num(self.tolerance), "status": self.status.value, "unit": unit,
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
    method: str = "mesh"  # "mesh" (one-sided fits to the triangles) or "exact B-rep" (the faces evaluated)
    deflection: float | None = None  # chordal deflection of the tessellation sparse sides were read from

    @property
    def limited_by(self) -> tuple[str, Status] | None:
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
            "chordal_deflection": self.deflection,
            "method": self.method,
            "tolerance": self.tolerance,
            "stations": len(self.stations),
            "achieved": self.achieved,
            "limited_by": None if limit is None else {"order": limit[0], "status": limit[1].value},
            "orders": {name: summary.to_dict(unit.format(u=self.units))
                       for name, summary, unit in zip(ORDERS, self.orders, UNITS)},
            "station_values": [s.to_dict() for s in self.stations],
        }


def _num(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None


def _measured(value: float, uncertainty: float) -> float | None:
    """A value only where its uncertainty is known: an estimate without one decides nothing (null)."""
    return _num(value) if np.isfinite(uncertainty) else None


# ---------------------------------------------------------------- decisions


def decide(value: float, uncertainty: float, tolerance: float, coverage: float) -> Status:
    """ok when value + k u <= tolerance, fail when value - k u > tolerance, else not resolved."""
    expanded = coverage * uncertainty
    if not np.isfinite(expanded):
        return Status.NOT_RESOLVED
    if value + expanded <= tolerance:
        return Status.OK
    if value - expanded > tolerance:
        return Status.FAIL
    return Status.NOT_RESOLVED


@dataclass(frozen=True)
class StationSides:
    """A station's data of each side (section coordinates, after the re-split at the found transition)
    and the two one-sided estimates the grade was computed from."""

    shift: float  # transition search offset along the section, length (0: split as labelled)
    data_a: np.ndarray  # (n_a, 2) float
    data_b: np.ndarray  # (n_b, 2) float
    a: SideEstimate
    b: SideEstimate


def fit_sides(section: Section, search: bool = False) -> StationSides:
    """Each side's data and its one-sided fit (sidefit.fit_side); with ``search`` on a welded seam the
    split first moves to the transition found along the section (transition.find_transition)."""
    shift = find_transition(section) if (search and section.welded) else 0.0
    if shift != 0.0:
        data_a, data_b, end_a = split_at(section, shift)
        end_b = end_a
    else:
        data_a, data_b, end_a, end_b = section.side_a, section.side_b, section.end_a, section.end_b
    (h_a, h_b), (floor_a, floor_b), (end_a_floor, end_b_floor) = section.scales, section.floors, section.end_floors
    return StationSides(shift, data_a, data_b, fit_side(data_a, end_a, -1.0, h_a, floor_a, end_a_floor),
                        fit_side(data_b, end_b, 1.0, h_b, floor_b, end_b_floor))


def decide_orders(profile: ToleranceProfile, gap: tuple[float, float], angle: tuple[float, float],
                  curvature: tuple[tuple[float, float], tuple[float, float]],
                  rate: tuple[tuple[float, float], tuple[float, float]]) -> tuple[OrderResult, ...]:
    """G0..G3 at one station from (value, standard uncertainty) pairs: the gap (length), the angle
    (degrees), and each side's (A, B) curvature and rate; the two sides' uncertainties of a jump add in
    quadrature, the G2 (G3) tolerance is max(absolute, relative * the larger |value| of the two sides)."""
    k = profile.coverage
    orders = [
        OrderResult(gap[0], gap[1], profile.g0_gap, decide(gap[0], gap[1], profile.g0_gap, k)),
        OrderResult(angle[0], angle[1], profile.g1_angle, decide(angle[0], angle[1], profile.g1_angle, k)),
    ]
    for (a, b), absolute, relative in ((curvature, profile.g2_abs, profile.g2_rel), (rate, profile.g3_abs, profile.g3_rel)):
        jump = float(abs(b[0] - a[0]))
        u_jump = float(np.hypot(a[1], b[1]))
        larger = float(max(abs(a[0]), abs(b[0])))
        tol = max(absolute, relative * larger)
        orders.append(OrderResult(jump, u_jump, tol, decide(jump, u_jump, tol, k),
                                  jump / larger if larger > 0 else 0.0))
    return tuple(orders)


def grade_sides(section: Section, sides: StationSides, profile: ToleranceProfile) -> StationResult:
    """Grade G0..G3 at one station from both sides' estimates against the profile (part units)."""
    a, b = sides.a, sides.b
    turn = (b.heading - a.heading + np.pi) % (2 * np.pi) - np.pi
    if section.welded:  # the sides share the seam's vertices: the mesh has no gap there, exactly
        gap, u_gap = 0.0, 0.0
    else:
        gap = float(np.linalg.norm(b.point - a.point))
        u_gap = float(np.sqrt(a.variances[OFFSET] + b.variances[OFFSET]))
    angle = float(np.degrees(abs(turn)))
    u_angle = float(np.degrees(np.hypot(a.uncertainty(HEADING), b.uncertainty(HEADING))))
    orders = decide_orders(
        profile, (gap, u_gap), (angle, u_angle),
        ((a.values[CURVATURE], a.uncertainty(CURVATURE)), (b.values[CURVATURE], b.uncertainty(CURVATURE))),
        ((a.values[RATE], a.uncertainty(RATE)), (b.values[RATE], b.uncertainty(RATE))))
    position = section.to_world(0.5 * (a.point + b.point))
    return StationResult(section.index, section.s, position, sides.shift, orders,
                         (a.curvature, b.curvature), (a.rate, b.rate), (a.count, b.count),
                         (float(a.windows[CURVATURE]), float(b.windows[CURVATURE])))


def summarize(stations: list[StationResult], order: int) -> OrderSummary:
    """Seam-level result of one order: fail if any station fails, ok if all are ok, else not
    resolved; the governing station is the one with the largest value / tolerance among those that
    share the seam's status."""
    results = [s.orders[order] for s in stations]
    status = Status.combine(r.status for r in results)
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
        if summary.status != Status.OK:
            break
        k += 1
    return k


def seam_grade(seam: Curve, welded: bool, results: list[StationResult], profile: ToleranceProfile,
               units: str, method: str = "mesh", length: float | None = None,
               deflection: float | None = None) -> SeamGrade:
    """A seam's grade from its graded stations (at least one): per-order summaries and ``achieved``;
    ``length`` defaults to the seam polyline's; ``deflection`` the chordal deflection of the
    tessellation where sides were read from the surface."""
    summaries = [summarize(results, k) for k in range(4)]
    return SeamGrade(seam.id, (seam.groups[0], seam.groups[1]), seam.length if length is None else length, welded,
                     units, profile.name, tuple(summaries), tuple(results), achieved_order(summaries), method,
                     deflection)
