"""Settings of the face support check: the `[face]` keys, layer strengths, rivers and support reaches, with their
defaults (each with its status) and the checks that name the key of a value out of range."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from .model import Layer
from .published_defaults import (ANAGNOSTOU_KOVARI_SILO_RATIO, ANAGNOSTOU_KOVARI_WEDGE_RATIO,
                                 BROMS_BENNERMARK_ALLOWABLE_N, BROMS_BENNERMARK_CRITICAL_N, GAMMA_W,
                                 MIN_COVER_DIAMETERS)

SUPPORT_MODES = ("slurry", "air_cushion")
FRICTION_ANGLE_RANGE_DEG = (0.0, 50.0)
SLURRY_UNIT_WEIGHT_RANGE_KN_M3 = (GAMMA_W, 16.0)
#: Range allowed for a layer's k0: a plausibility bound of the tool (about 0.3 in loose sand to 2 and more in heavily
#: overconsolidated clay).
K0_RANGE = (0.2, 3.0)


@dataclass(frozen=True)
class LayerStrength:
    """Strength of one ground layer, in the order of `Ground.layers`.

    friction_angle_deg      effective friction angle phi', 0 to 50. [deg]
    cohesion_kpa            effective cohesion c', >= 0. [kPa]
    undrained_strength_kpa  undrained shear strength c_u, > 0: required for a cohesive layer, not allowed for a
                            granular one. [kPa]
    shear_modulus_mpa       shear modulus G for the Delft fracture pressure, > 0; optional (no fracture limit where
                            the layer at the crown has none). [MPa]
    k0                      earth pressure coefficient at rest, sigma'_h / sigma'_v, 0.2 to 3; optional, default
                            Jaky's 1 - sin(friction_angle_deg) (from memory). It sets the initial stress of the
                            fracture limit and the side shear of the uplift limit. [-]
    """

    friction_angle_deg: float
    cohesion_kpa: float
    undrained_strength_kpa: float | None = None
    shear_modulus_mpa: float | None = None
    k0: float | None = None


@dataclass(frozen=True)
class River:
    """Open water over part of a drive. Between the chainages (both included) the ground surface is the bed and the
    water stands at `water_level_m` (design high water) above it."""

    drive: str
    from_chainage_m: float
    to_chainage_m: float
    bed_level_m: float
    water_level_m: float
    name: str = ""


@dataclass(frozen=True)
class SupportReach:
    """Part of a drive with its own face support mode: "slurry" (plain slurry circuit) or "air_cushion" (slurry whose
    pressure an air cushion holds)."""

    from_chainage_m: float
    to_chainage_m: float
    mode: str


@dataclass(frozen=True)
class FaceOptions:
    """Settings of the face check ([face] keys; every default documented with its status).

    face_station_spacing_m        5.0   spacing of regular stations [m]; the issue's default.
    slurry_unit_weight_kn_m3      11.0  slurry in the chamber, for crown <-> axis [kN/m^3]; within 10.5 to 12
                                        (common practice, methods.md section 10); allowed 9.81 to 16.
    support_mode                  "slurry"  mode where no support reach says otherwise.
    earth_pressure_factor         1.5   on the effective support s' (DAUB style, from memory, methods.md 7.1 c).
    water_pressure_factor         1.05  on the pore pressure (DAUB style, from memory, methods.md 7.1 c).
    support_margin_kpa            0.0   added to the minimum [kPa]; the partial factors are the margin on the
                                        mechanics and the tolerance is counted in the window, so none by default.
    blowout_factor                1.1   on the uplift limit (from memory, DAUB; methods.md 7.2).
    blowout_side_shear            False use the uplift limit with shear on the block's sides (methods.md 7.2, from
                                        memory; "use with caution at very low cover").
    fracture_factor               1.5   on the Delft pressure (common practice, low end of 1.5 to 2, methods.md 7.3).
    fracture_radius_granular      0.667 largest plastic radius / cover in granular ground (2/3; from memory,
                                        methods.md 7.3).
    fracture_radius_cohesive      0.5   the same in cohesive ground (1/2; from memory, methods.md 7.3).
    silo_lateral_ratio            0.8   K_s (Anagnostou & Kovari 1994, from memory, methods.md 7.1 c).
    wedge_lateral_ratio           0.4   K_w (Anagnostou & Kovari 1994, from memory, methods.md 7.1 c).
    critical_stability_ratio      6.0   Broms & Bennermark critical N, at collapse (from memory, methods.md 7.1 a);
                                        `n_above_critical` flags N without support above it.
    allowable_stability_ratio     3.0   the N the minimum support holds in cohesive ground (working level): face
                                        movements stay small below N of about 2 to 4 (Mair 1979; O'Reilly 1988;
                                        from memory); more than 0, at most critical_stability_ratio.
    surcharge_kpa                 0.0   surface surcharge outside river reaches [kPa]; none by default.
    tolerance_air_cushion_kpa     10.0  operating tolerance +/- with an air cushion [kPa] (methods.md 7.1 c gives
                                        about +/-10 kPa for slurry shields, from memory).
    tolerance_slurry_kpa          20.0  operating tolerance +/- of a plain slurry circuit [kPa]; NO SOURCE: the tool's
                                        cautious assumption (twice the air cushion's); set it for the machine.
    window_margin_kpa             10.0  a window narrower than this is "narrow" [kPa]; no source, the tool's default.
    low_cover_diameters           2.0   cover below this many outer diameters is flagged (common practice,
                                        methods.md section 10).
    """

    face_station_spacing_m: float = 5.0
    slurry_unit_weight_kn_m3: float = 11.0
    support_mode: str = "slurry"
    earth_pressure_factor: float = 1.5
    water_pressure_factor: float = 1.05
    support_margin_kpa: float = 0.0
    blowout_factor: float = 1.1
    blowout_side_shear: bool = False
    fracture_factor: float = 1.5
    fracture_radius_granular: float = 2.0 / 3.0
    fracture_radius_cohesive: float = 0.5
    silo_lateral_ratio: float = ANAGNOSTOU_KOVARI_SILO_RATIO
    wedge_lateral_ratio: float = ANAGNOSTOU_KOVARI_WEDGE_RATIO
    critical_stability_ratio: float = BROMS_BENNERMARK_CRITICAL_N
    allowable_stability_ratio: float = BROMS_BENNERMARK_ALLOWABLE_N
    surcharge_kpa: float = 0.0
    tolerance_air_cushion_kpa: float = 10.0
    tolerance_slurry_kpa: float = 20.0
    window_margin_kpa: float = 10.0
    low_cover_diameters: float = MIN_COVER_DIAMETERS

    def tolerance_kpa(self, mode: str) -> float:
        """Operating tolerance +/- of a support mode. [kPa]"""
        return {"slurry": self.tolerance_slurry_kpa, "air_cushion": self.tolerance_air_cushion_kpa}[mode]


def _bad(where: str, key: str, what: str, value) -> InputError:
    shown = f'"{value}"' if isinstance(value, str) else f"{value:g}" if isinstance(value, (int, float)) else value
    return InputError(f"{where}: {key} must be {what}; got {shown}")


def _number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool) and bool(np.isfinite(value))


def check_face_options(options: FaceOptions, where: str = "project") -> None:
    """Raise InputError naming the [face] key whose value is out of range."""
    label = f"{where} [face]"
    lo_gs, hi_gs = SLURRY_UNIT_WEIGHT_RANGE_KN_M3
    critical = options.critical_stability_ratio
    rules = {
        "face_station_spacing_m": (lambda v: v > 0, "a number of metres more than 0"),
        "slurry_unit_weight_kn_m3": (lambda v: lo_gs <= v <= hi_gs,
                                     f"a number from {lo_gs:g} (water) to {hi_gs:g} kN/m3"),
        "earth_pressure_factor": (lambda v: v >= 1, "a factor of at least 1"),
        "water_pressure_factor": (lambda v: v >= 1, "a factor of at least 1"),
        "support_margin_kpa": (lambda v: v >= 0, "a number of kPa at least 0"),
        "blowout_factor": (lambda v: v >= 1, "a factor of at least 1"),
        "fracture_factor": (lambda v: v >= 1, "a factor of at least 1"),
        "fracture_radius_granular": (lambda v: 0 < v <= 1, "a share of the cover more than 0 and at most 1"),
        "fracture_radius_cohesive": (lambda v: 0 < v <= 1, "a share of the cover more than 0 and at most 1"),
        "silo_lateral_ratio": (lambda v: 0 < v <= 3, "a ratio more than 0 and at most 3"),
        "wedge_lateral_ratio": (lambda v: 0 <= v <= 3, "a ratio from 0 to 3"),
        "critical_stability_ratio": (lambda v: v > 0, "a number more than 0"),
        "allowable_stability_ratio": (lambda v: 0 < v <= critical, "a number more than 0 and at most "
                                      f"critical_stability_ratio ({critical:g})" if _number(critical) else ""),
        "surcharge_kpa": (lambda v: v >= 0, "a number of kPa at least 0"),
        "tolerance_air_cushion_kpa": (lambda v: v >= 0, "a number of kPa at least 0"),
        "tolerance_slurry_kpa": (lambda v: v >= 0, "a number of kPa at least 0"),
        "window_margin_kpa": (lambda v: v >= 0, "a number of kPa at least 0"),
        "low_cover_diameters": (lambda v: v > 0, "a number more than 0"),
    }
    for key, (ok, what) in rules.items():
        value = getattr(options, key)
        if not _number(value) or not ok(value):
            raise _bad(label, key, what, value)
    if options.support_mode not in SUPPORT_MODES:
        raise _bad(label, "support_mode", "one of " + ", ".join(f'"{m}"' for m in SUPPORT_MODES),
                   options.support_mode)
    if not isinstance(options.blowout_side_shear, bool):
        raise _bad(label, "blowout_side_shear", "true or false", options.blowout_side_shear)


def check_layer_strengths(strengths, layers: tuple[Layer, ...], where: str = "project") -> None:
    """Raise InputError naming the layer and key of a strength that is missing or out of range."""
    if len(strengths) != len(layers):
        raise InputError(f"{where} [[ground.layers]]: {len(layers)} layers but strengths for {len(strengths)}; "
                         "give friction_angle_deg and cohesion_kpa for every layer")
    lo, hi = FRICTION_ANGLE_RANGE_DEG
    for n, (s, layer) in enumerate(zip(strengths, layers), 1):
        label = f'{where} [[ground.layers]] #{n} "{layer.name}"'
        if not _number(s.friction_angle_deg) or not lo <= s.friction_angle_deg <= hi:
            raise _bad(label, "friction_angle_deg", f"a number of degrees from {lo:g} to {hi:g}", s.friction_angle_deg)
        if not _number(s.cohesion_kpa) or s.cohesion_kpa < 0:
            raise _bad(label, "cohesion_kpa", "a number of kPa at least 0", s.cohesion_kpa)
        cu = s.undrained_strength_kpa
        if layer.behaviour == "cohesive":
            if cu is None:
                raise InputError(f"{label}: undrained_strength_kpa is required for a cohesive layer (the Broms & "
                                 "Bennermark face check needs it)")
            if not _number(cu) or cu <= 0:
                raise _bad(label, "undrained_strength_kpa", "a number of kPa more than 0", cu)
        elif cu is not None:
            raise InputError(f'{label}: undrained_strength_kpa applies only to a cohesive layer; this one is '
                             f'"{layer.behaviour}"; got {cu:g}')
        g = s.shear_modulus_mpa
        if g is not None and (not _number(g) or g <= 0):
            raise _bad(label, "shear_modulus_mpa", "a number of MPa more than 0", g)
        lo_k0, hi_k0 = K0_RANGE
        if s.k0 is not None and (not _number(s.k0) or not lo_k0 <= s.k0 <= hi_k0):
            raise _bad(label, "k0", f"a number from {lo_k0:g} to {hi_k0:g}", s.k0)


def _check_reach_ends(label: str, a, b) -> None:
    if not _number(a):
        raise _bad(label, "from_chainage_m", "a number of metres", a)
    if not _number(b) or b <= a:
        raise InputError(f"{label}: to_chainage_m must be more than from_chainage_m ({a:g}); got {b}")


def check_rivers(rivers, drive_names, where: str = "project") -> None:
    """Raise InputError for a river that names no drive, has its ends the wrong way round, a water level below its
    bed, or overlaps another river on the same drive. (Against the drive's geometry: `face_stations`.)"""
    for n, river in enumerate(rivers, 1):
        if river.drive not in drive_names:
            names = ", ".join(f'"{d}"' for d in drive_names)
            raise InputError(f'{river_label(where, n, river)}: drive "{river.drive}" is not a drive of the project '
                             f"(drives: {names})")
    check_numbered_rivers(list(enumerate(rivers, 1)), where)


def check_numbered_rivers(numbered, where: str) -> None:
    """The checks of `check_rivers` that need no drive, on (number, River) pairs."""
    for index, (n, river) in enumerate(numbered):
        label = river_label(where, n, river)
        _check_reach_ends(label, river.from_chainage_m, river.to_chainage_m)
        if not _number(river.bed_level_m):
            raise _bad(label, "bed_level_m", "a level in metres", river.bed_level_m)
        if not _number(river.water_level_m) or river.water_level_m < river.bed_level_m:
            raise InputError(f"{label}: water_level_m must not be below the bed (bed_level_m = "
                             f"{river.bed_level_m:g}); got {river.water_level_m}")
        for m, other in numbered[:index]:
            if other.drive == river.drive and river.from_chainage_m < other.to_chainage_m \
                    and other.from_chainage_m < river.to_chainage_m:
                raise InputError(f"{label}: chainage {river.from_chainage_m:g}-{river.to_chainage_m:g} m overlaps "
                                 f"[[rivers]] #{m} ({other.from_chainage_m:g}-{other.to_chainage_m:g} m) on the "
                                 f'same drive "{river.drive}"')


def check_support_reaches(reaches, drive_name: str, where: str = "project") -> None:
    """Raise InputError for a support reach with an unknown mode, its ends the wrong way round, or an overlap."""
    for n, reach in enumerate(reaches, 1):
        label = support_label(where, drive_name, n)
        _check_reach_ends(label, reach.from_chainage_m, reach.to_chainage_m)
        if reach.mode not in SUPPORT_MODES:
            raise _bad(label, "mode", "one of " + ", ".join(f'"{m}"' for m in SUPPORT_MODES), reach.mode)
        for m, other in enumerate(reaches[: n - 1], 1):
            if reach.from_chainage_m < other.to_chainage_m and other.from_chainage_m < reach.to_chainage_m:
                raise InputError(f"{label}: chainage {reach.from_chainage_m:g}-{reach.to_chainage_m:g} m overlaps "
                                 f"#{m} ({other.from_chainage_m:g}-{other.to_chainage_m:g} m)")


def river_label(where, n, river) -> str:
    named = f' "{river.name}"' if river.name else ""
    return f"{where} [[rivers]] #{n}{named}"


def support_label(where, drive_name, n) -> str:
    return f'{where} [[drives]] "{drive_name}" [[drives.face_support]] #{n}'
