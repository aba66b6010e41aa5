"""Tolerance profiles for continuity grades: named profiles and TOML profile files.

A profile holds one tolerance per order: G0 gap (length), G1 angle (degrees), G2 curvature jump
(absolute in 1/length and relative to the larger curvature), G3 curvature-rate jump (absolute in
1/length^2 and relative to the larger rate), the coverage factor k of the expanded uncertainty
U = k u used by the decision rule (JCGM 100:2008, GUM, section 6: k = 2 for about 95 %), and the
length unit the figures are stated in. Relative tolerances widen the absolute ones:
an order's tolerance at a station is max(absolute, relative * larger magnitude on the two sides).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace
from pathlib import Path

from surfcheck.errors import InputError

_LENGTH_UNITS_IN_MM = {"um": 1e-3, "mm": 1.0, "cm": 10.0, "m": 1000.0, "in": 25.4, "inch": 25.4}
_FIGURES = ("g0_gap", "g1_angle", "g2_abs", "g2_rel", "g3_abs", "g3_rel", "coverage")
_LENGTH_POWER = {"g0_gap": 1, "g2_abs": -1, "g3_abs": -2}  # how each figure scales with the length unit


@dataclass(frozen=True)
class ToleranceProfile:
    """Tolerances for G0..G3 and the coverage factor; lengths in ``units``."""

    name: str
    g0_gap: float  # largest gap between the two sides' section curves at the seam, length
    g1_angle: float  # largest angle between their tangents, degrees
    g2_abs: float  # largest curvature jump, 1/length
    g2_rel: float  # ... or this fraction of the larger curvature, whichever is larger
    g3_abs: float  # largest jump in d(curvature)/d(arc length), 1/length^2
    g3_rel: float  # ... or this fraction of the larger rate, whichever is larger
    coverage: float = 2.0  # k in U = k u (GUM section 6)
    units: str = "mm"
    description: str = ""
    origin: str = ""

    def __post_init__(self) -> None:
        where = f"tolerance profile {self.name!r}"
        for name in _FIGURES:
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
                raise InputError(f"{where}: {name} must be a number, not {value!r}")
            if value < 0 or (value == 0 and name in ("g0_gap", "g1_angle", "g2_abs", "g3_abs", "coverage")):
                raise InputError(f"{where}: {name} must be positive, not {value!r}")
            object.__setattr__(self, name, float(value))
        if self.g2_rel >= 1 or self.g3_rel >= 1:
            raise InputError(f"{where}: relative tolerances must be below 1 (a fraction, not a percentage)")
        if self.g1_angle >= 90:
            raise InputError(f"{where}: g1_angle is in degrees and must be below 90")
        if self.units not in _LENGTH_UNITS_IN_MM:
            known = ", ".join(_LENGTH_UNITS_IN_MM)
            raise InputError(f"{where}: unknown length unit {self.units!r} (use one of {known})")

    def in_units(self, units: str) -> "ToleranceProfile":
        """The same profile with its lengths stated in ``units`` (mm, cm, m, um, in)."""
        if units == self.units:
            return self
        if units not in _LENGTH_UNITS_IN_MM:
            known = ", ".join(_LENGTH_UNITS_IN_MM)
            raise InputError(f"part unit {units!r} unknown for tolerances (use one of {known})")
        factor = _LENGTH_UNITS_IN_MM[self.units] / _LENGTH_UNITS_IN_MM[units]  # new units per old unit
        scaled = {name: getattr(self, name) * factor**power for name, power in _LENGTH_POWER.items()}
        return replace(self, units=units, **scaled)

    def to_dict(self) -> dict:
        return {f.name: getattr(self, f.name) for f in fields(self)}


# Figures: common practice, from memory; no published source. Styling follows what visible
# (class-A) surface work is commonly held to; general is typical CAD modelling and exchange
# tolerance for machined and molded parts; scan allows for measured data with noise of a few
# hundredths of a millimetre.
STYLING = ToleranceProfile(
    "styling", g0_gap=0.005, g1_angle=0.05, g2_abs=0.001, g2_rel=0.02, g3_abs=0.001, g3_rel=0.1,
    description="strict: visible styling surfaces",
    origin="common practice for visible surfaces, from memory; no published source",
)
GENERAL = ToleranceProfile(
    "general", g0_gap=0.01, g1_angle=0.5, g2_abs=0.005, g2_rel=0.1, g3_abs=0.01, g3_rel=0.25,
    description="default: machined and molded parts",
    origin="common CAD modelling and exchange practice, from memory; no published source",
)
SCAN = ToleranceProfile(
    "scan", g0_gap=0.05, g1_angle=2.0, g2_abs=0.05, g2_rel=0.25, g3_abs=0.05, g3_rel=0.5,
    description="measured data (scans with noise of about 0.01 mm)",
    origin="common practice for inspection of scanned parts, from memory; no published source",
)
PROFILES = {p.name: p for p in (STYLING, GENERAL, SCAN)}
DEFAULT_PROFILE = "general"


def load_profile(name_or_path: str | Path) -> ToleranceProfile:
    """A named profile (styling, general, scan) or one read from a TOML file with the same keys.

    The file gives ``g0_gap, g1_angle, g2_abs, g2_rel, g3_abs, g3_rel`` and optionally ``coverage``,
    ``units``, ``name``, ``description``, ``origin``; ``base = "general"`` (or another name) fills in
    the figures the file leaves out.

    Parameters
    ----------
    name_or_path : str or Path
        A profile name or a TOML file.

    Returns
    -------
    ToleranceProfile
        The tolerances in their stated units.
    """
    text = str(name_or_path)
    if text in PROFILES:
        return PROFILES[text]
    path = Path(text)
    if path.suffix.lower() != ".toml":
        raise InputError(f"unknown tolerance profile {text!r}: use {', '.join(PROFILES)} or a .toml file")
    try:
        import tomllib
    except ModuleNotFoundError:  # Python 3.10: the same parser, packaged as tomli
        import tomli as tomllib
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(f"tolerance file not found: {path}") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read tolerance file {path}: {exc}") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"tolerance file {path} is not valid TOML: {exc}") from None
    return profile_from_mapping(data, default_name=path.stem, where=str(path))


def profile_from_mapping(data: dict, default_name: str = "custom", where: str = "tolerances") -> ToleranceProfile:
    """A profile from a mapping with the TOML file's keys; unknown keys or bad values raise InputError."""
    allowed = {f.name for f in fields(ToleranceProfile)} | {"base"}
    unknown = sorted(set(data) - allowed)
    if unknown:
        raise InputError(f"{where}: unknown key(s) {', '.join(unknown)} (allowed: {', '.join(sorted(allowed))})")
    values = dict(data)
    base_name = values.pop("base", None)
    if base_name is not None:
        if base_name not in PROFILES:
            raise InputError(f"{where}: base {base_name!r} is not one of {', '.join(PROFILES)}")
        base = PROFILES[base_name].to_dict()
        del base["name"]
        base.update(description="", origin=f"from {where}, the rest from {base_name}")
        values = {**base, **values}
    missing = [k for k in _FIGURES[:-1] if k not in values]
    if missing:
        raise InputError(f"{where}: missing {', '.join(missing)} (or give base = \"general\")")
    for key in ("name", "units", "description", "origin"):
        if key in values and not isinstance(values[key], str):
            raise InputError(f"{where}: {key} must be a string")
    values.setdefault("name", default_name)
    values.setdefault("origin", f"user file {where}")
    return ToleranceProfile(**values)
