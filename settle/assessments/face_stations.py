"""Face support window along a drive: stations, their stresses, and the pressures to hold at the crown.

The procedure, for one drive (`face_stations`):

1. Stations every `face_station_spacing_m` from the launch shaft, at the reception shaft, at every vertex of the
   alignment (where the cover changes its trend), where the crown, axis or invert crosses the top of a layer or the
   groundwater level, and at both ends of every river reach and support reach. A reach end is a step: a second
   station `STEP_M` (10 mm) on its other side shows the values there (river reach: both ends inside, the extra
   stations outside; support reach: from its start up to, not including, its end). No two stations lie closer than
   `MERGE_M` (5 mm) or print alike to 0.01 m: one stands for them, the drive's ends first, then the reach ends and
   their steps, then the vertices and crossings, then the regular stations.
2. At each station the ground surface is `GroundModel.surface_level(x, y)`, except in a river reach, where it is the
   river's `bed_level_m` and the river's `water_level_m` stands above it. Cover is measured from that surface to the
   crown. The water table is the river's water level in a river reach; elsewhere the groundwater level, taken at the
   ground surface where it stands above it (a warning says where: open water there belongs in [[rivers]]).
3. Stresses (`face_methods.vertical_stress`): each layer's `unit_weight_kn_m3` is its total unit weight, above and
   below the water table alike; pore pressure is hydrostatic below the water table and zero above it (no suction).
   Free water over a river bed adds gamma_w h_w to the total stress and to the pore pressure.
4. Minimum support at the crown, `support_min_kpa`:
   - drained, every ground: the wedge-and-silo model (`anagnostou_kovari_support`) on a square face B = H = D (the
     tunnel's outer diameter: the face's full height, the larger of the two squares methods.md section 7.1 c
     names), with the silo through the cover layers one by one, and the wedge with the thickness-weighted
     effective unit weight of the face and the SMALLEST friction angle and the smallest cohesion of the layers the
     face cuts (Broere 1998 shows that averaging a soft layer with a stiff one under-estimates the support a mixed
     face needs). The effective support s' is taken as no less than 0: a face that stands alone still needs the
     water pressure. The model assumes the slurry forms a filter cake that passes its whole excess pressure to the
     soil skeleton; in coarse ground slurry infiltrates and less reaches it (Broere 2015, methods.md section 7),
     which this check does not model. Required, DAUB-style partial factors (methods.md section 7.1 c, from memory):
     water_pressure_factor u + earth_pressure_factor s', checked at the crown, the axis and the invert and brought
     to the crown through the slurry column (`axis_to_crown`); the largest governs.
   - undrained, where the layer at the axis is cohesive: Broms & Bennermark (1967). `stability_ratio_n` is N with no
     support (flagged `n_above_critical` above `critical_stability_ratio`, 6: collapse); the total support at the
     axis that holds N at the working level `allowable_stability_ratio` (3: face movements stay small below N of
     about 2 to 4, Mair 1979, O'Reilly 1988, from memory), brought to the crown, is a second requirement
     (`min_governed_by` "broms_bennermark" where it governs).
   - `support_min_kpa` = the larger requirement + `support_margin_kpa`.
5. Maximum support at the crown, `support_max_kpa`: the smaller of
   - uplift: `blowout_kpa` (the total vertical stress at the crown, soil and free water) / `blowout_factor`, or, with
     `blowout_side_shear`, the block lifted against its weight and the shear on its sides
     (`uplift_with_shear_kpa`) / `blowout_factor`;
   - fracture: the Delft cavity-expansion pressure (Luger & Hergarden 1988) at the crown, where the confinement is
     least, `fracture_kpa`, / `fracture_factor`. The layer is the one just above the crown (undrained form in a
     cohesive layer, drained otherwise); the initial effective stress is the mean of the vertical and horizontal
     effective stresses in the plane of the face, sigma'_0 = sigma'_v,crown (1 + K0) / 2, with the layer's `k0`
     or Jaky's K0 = 1 - sin phi' (`cavity_initial_effective_stress`); the pore pressure is that at the crown (in
     clay the total stress sigma'_0 + u). The bore radius is D/2 (the outer diameter is the excavated diameter);
     the largest plastic radius is a share of the cover, and never less than D/2 (then the limit is the pressure
     at first yield). Not computed (NaN, and a warning) where the layer at the crown has no `shear_modulus_mpa`.
     `fracture_axis_kpa` keeps, for reference, the value at the axis from sigma'_v and the layer there, brought to
     the crown; it limits nothing.
6. The window. The operator holds a target crown pressure that swings by +/- the operating tolerance of the support
   mode of the reach (plain slurry or an air cushion). The lowest target that keeps every swing above the minimum
   is `support_min_kpa + tolerance`; the highest that keeps every swing below the maximum is
   `support_max_kpa - tolerance`. So
       window_kpa = support_max_kpa - support_min_kpa - 2 x operating tolerance,
   the room left to choose the target. It includes the partial factors and margin of the minimum, the factor(s) of
   the maximum and the tolerance on both sides; nothing else. status: "closed" where window_kpa < 0, "narrow" where
   0 <= window_kpa < window_margin_kpa, "open" otherwise. `low_cover` flags cover < low_cover_diameters x D (a rule
   of the trade, common practice).

7. Volume loss implied by the support, where the layer at the axis is cohesive (NaN elsewhere: the fit is for
   clay). With the face at `support_min_kpa` (the lowest the pressure goes when the target is held in the window),
   brought to the axis, the stability ratio is `stability_ratio_at_min_n` N = (sigma_v + q - sigma_T) / c_u; the
   ratio at collapse of a closed face, `critical_stability_ratio_tc` N_TC = 4 ln(2 C/D + 1) (Davis et al. 1980
   lower bound, from memory; it lies at or below the centrifuge values of Kimura & Mair 1981, so LF errs high);
   `load_factor` LF = N / N_TC; `implied_volume_loss_pct` VL = 0.23 exp(4.4 LF) % (Macklin 1999, from memory). The
   fit holds for LF >= 0.2: below (and where N < 0) the value at LF = 0.2, 0.55 %, is given, an upper estimate:
   VL grows with LF, and the fit says nothing of smaller values. Above LF = 1 the face is at collapse by N_TC and
   the value at LF = 1 (18.7 %) is given. `design_volume_loss_pct` is the drive's volume loss at the station
   (its reach's, when `design_drive` is given); `implied_above_design` flags, and a warning names, the stations
   where the implied value exceeds it.

All pressures are at crown level, kPa, compression positive; levels in m up positive; chainage in m along the 3-D
axis. These are planning bounds: the operating pressures are set and reviewed by the responsible engineer, under
local codes.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from ..engine.elements import reach_values
from ..errors import InputError
from ..inputs.face_settings import (SUPPORT_MODES, FaceOptions, LayerStrength, River, SupportReach,  # noqa: F401
                                    check_face_options, check_layer_strengths, check_numbered_rivers,
                                    check_support_reaches, river_label, support_label)
from ..inputs.ground import GroundModel
from ..inputs.model import Drive
from ..inputs.route import DriveResult, position_at
from . import face_methods as face

STATUSES = ("open", "narrow", "closed")  # the status vocabulary, from best to worst
SAME_CHAINAGE_M = 1e-3  # the end of a drive takes the support mode of the chainage this much before it [m]
MERGE_M = 5e-3  # no two stations of a drive lie closer than this: the nearer ones are merged [m]
STEP_M = 0.01  # a second station this far on the other side of a reach end shows the step there [m]
LEVEL_TOLERANCE_M = 1e-3  # a river bed this little above the ground is still at the ground [m]

CAUTION = ("Planning bounds only: the operating face pressures are set and reviewed by the responsible engineer, "
           "under local codes, and adjusted to what the drive shows.")


# ------------------------------------------------------------------------------------------------------ result
@dataclass
class FaceStations:
    """The face check along one drive: one row per station, all pressures at crown level. [kPa]"""

    drive: str
    outer_diameter_m: float
    chainage_m: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    axis_level_m: np.ndarray
    ground_level_m: np.ndarray  # the ground surface model at the station
    surface_level_m: np.ndarray  # what the face sees: the ground, or the river bed in a river reach
    water_level_m: np.ndarray  # water table (river water level in a river reach)
    in_river: np.ndarray  # bool
    cover_m: np.ndarray  # surface (bed) to crown
    total_stress_crown_kpa: np.ndarray
    effective_stress_crown_kpa: np.ndarray
    total_stress_axis_kpa: np.ndarray
    effective_stress_axis_kpa: np.ndarray
    water_pressure_kpa: np.ndarray  # at the crown
    water_pressure_axis_kpa: np.ndarray
    wedge_support_kpa: np.ndarray  # s', wedge-silo, unfactored, may be negative (face stands alone)
    wedge_angle_deg: np.ndarray
    wedge_silo_stress_kpa: np.ndarray  # sigma'_v of the silo on the wedge
    stability_ratio_n: np.ndarray  # Broms & Bennermark N without support; NaN where the axis is not in clay
    n_above_critical: np.ndarray  # bool: stability_ratio_n above critical_stability_ratio (collapse)
    support_min_kpa: np.ndarray
    min_governed_by: np.ndarray  # "wedge_silo" | "broms_bennermark" (N held at allowable_stability_ratio)
    blowout_kpa: np.ndarray  # total vertical stress at the crown, no factor
    uplift_with_shear_kpa: np.ndarray  # blow-out with shear on the block's sides, no factor
    fracture_kpa: np.ndarray  # Delft at the crown, initial stress from K0, no factor; NaN where not computed
    support_max_kpa: np.ndarray
    max_limited_by: np.ndarray  # "blowout" | "uplift_shear" | "fracture"
    support_mode: np.ndarray  # "slurry" | "air_cushion"
    tolerance_kpa: np.ndarray  # operating tolerance +/-
    window_kpa: np.ndarray
    status: np.ndarray  # "open" | "narrow" | "closed"
    low_cover: np.ndarray  # bool: cover_m < low_cover_limit_m
    low_cover_limit_m: float = np.nan  # low_cover_diameters x D
    slurry_unit_weight_kn_m3: float = 11.0
    warnings: list[str] = field(default_factory=list)
    # Delft at the axis from sigma'_v (the value used before the crown governed), brought to the crown, no factor;
    # for reference only. [kPa]
    fracture_axis_kpa: np.ndarray = field(default_factory=lambda: np.empty(0))
    # Working level in clay (NaN where the axis is not in a cohesive layer): N with the face at support_min_kpa,
    # N_TC of a closed face at this C/D (Davis et al. 1980), LF = N / N_TC, and the volume loss that LF implies
    # (Macklin 1999), against the design volume loss of the reach (NaN when the drive's inputs were not given).
    stability_ratio_at_min_n: np.ndarray = field(default_factory=lambda: np.empty(0))  # [-]
    critical_stability_ratio_tc: np.ndarray = field(default_factory=lambda: np.empty(0))  # [-]
    load_factor: np.ndarray = field(default_factory=lambda: np.empty(0))  # [-]
    implied_volume_loss_pct: np.ndarray = field(default_factory=lambda: np.empty(0))  # [%]
    design_volume_loss_pct: np.ndarray = field(default_factory=lambda: np.empty(0))  # [%]
    implied_above_design: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=bool))  # bool

    def __len__(self) -> int:
        return len(self.chainage_m)

    @property
    def crown_level_m(self) -> np.ndarray:
        return self.axis_level_m + self.outer_diameter_m / 2.0

    @property
    def invert_level_m(self) -> np.ndarray:
        return self.axis_level_m - self.outer_diameter_m / 2.0

    @property
    def hold_from_kpa(self) -> np.ndarray:
        """Lowest target crown pressure: minimum + tolerance. [kPa]"""
        return self.support_min_kpa + self.tolerance_kpa

    @property
    def hold_to_kpa(self) -> np.ndarray:
        """Highest target crown pressure: maximum - tolerance (below hold_from_kpa where the window is closed). [kPa]"""
        return self.support_max_kpa - self.tolerance_kpa

    def at_axis(self, pressure_crown) -> np.ndarray:
        """A crown pressure of these stations brought to the axis through the slurry column. [kPa]"""
        return face.crown_to_axis(pressure_crown, self.slurry_unit_weight_kn_m3, self.outer_diameter_m)


def _check_inside(label: str, a: float, b: float, drive: DriveResult) -> None:
    lo, hi = drive.start_chainage_m, drive.end_chainage_m
    if a < lo - 1e-6 or b > hi + 1e-6:
        raise InputError(f'{label}: chainage {a:g}-{b:g} m is outside the drive "{drive.name}" '
                         f"(chainage {lo:.2f} to {hi:.2f} m)")


# -------------------------------------------------------------------------------------------------- procedure
def _layer_index(level, tops):
    """Index of the layer holding each level (the top layer extends upward, the last downward)."""
    return np.clip(np.searchsorted(-tops, -np.asarray(level), side="right") - 1, 0, len(tops) - 1)


def _segments(upper, lower, tops, water):
    """The ground between two levels cut at layer tops and at the water table, from the top down.

    Returns thickness (n, m) [m], layer index (n, m) and submerged (n, m) (below the water table)."""
    cuts = np.column_stack([upper, lower, np.broadcast_to(tops, (len(upper), len(tops))), water])
    cuts = np.clip(cuts, lower[:, None], upper[:, None])
    cuts = -np.sort(-cuts, axis=1)  # descending
    thickness = cuts[:, :-1] - cuts[:, 1:]
    mid = 0.5 * (cuts[:, :-1] + cuts[:, 1:])
    return thickness, _layer_index(mid, tops), mid < water[:, None]


def _crossings(chain, levels, targets):
    """Chainages where a polyline of levels (one per vertex) crosses any target level strictly between vertices."""
    z0, z1 = levels[:-1, None], levels[1:, None]
    dz = z1 - z0
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = (np.asarray(targets)[None, :] - z0) / np.where(dz != 0, dz, np.nan)
    hit = (frac > 0) & (frac < 1)
    c0, c1 = chain[:-1, None], chain[1:, None]
    return (c0 + np.nan_to_num(frac) * (c1 - c0))[hit]


def _spread(groups, lo: float, hi: float) -> np.ndarray:
    """Chainages from groups of candidates, the first group first, none closer than MERGE_M to another and no two
    printed alike to 0.01 m (as face_pressures.csv prints them): a candidate too near one already kept is merged
    into it (dropped). [m]"""
    kept = np.empty(0)
    rank = np.empty(0, dtype=int)
    for g, group in enumerate(groups):
        c = np.unique(np.asarray(group, dtype=float))
        c = c[(c >= lo) & (c <= hi)]
        if len(kept) and len(c):
            i = np.searchsorted(kept, c)
            gap = np.minimum(np.abs(c - kept[np.clip(i - 1, 0, len(kept) - 1)]),
                             np.abs(kept[np.clip(i, 0, len(kept) - 1)] - c))
            c = c[gap >= MERGE_M]
        mine = []
        for value in c:  # sorted: each one kept only if far enough from the last one of the group kept
            if not mine or value - mine[-1] >= MERGE_M:
                mine.append(value)
        order = np.argsort(np.concatenate([kept, mine]), kind="stable")
        kept = np.concatenate([kept, mine])[order]
        rank = np.concatenate([rank, np.full(len(mine), g)])[order]
    printed = np.array([f"{v:.2f}" for v in kept])
    same = np.flatnonzero(printed[1:] == printed[:-1])  # pairs (k, k + 1) that would print alike
    drop = np.where(rank[same + 1] >= rank[same], same + 1, same)  # the later group gives way; equal: the second
    return np.delete(kept, drop)


def station_chainages(drive: DriveResult, ground: GroundModel, rivers, spacing_m: float,
                      support_reaches=()) -> np.ndarray:
    """Chainages of the stations of a drive (see the module docstring, step 1), sorted. [m]

    No two lie closer than MERGE_M (5 mm), nor print alike to 0.01 m. Where candidates are that close, one station
    stands for them all, chosen in this order: the drive's ends; the ends of river and support reaches and their
    step stations (STEP_M, 10 mm, on the other side); the vertices and the level crossings; the regular stations."""
    chain = drive.chainage_m
    axis = drive.axis_xyz_m[:, 2]
    tops = np.array([layer.top_level_m for layer in ground.ground.layers], dtype=float)
    targets = np.append(tops[1:], ground.ground.groundwater_level_m)
    half = drive.outer_diameter_m / 2.0
    ends = [chain[0], chain[-1]]
    steps = [[r.from_chainage_m - STEP_M, r.from_chainage_m, r.to_chainage_m, r.to_chainage_m + STEP_M]
             for r in rivers]
    steps += [[r.from_chainage_m - STEP_M, r.from_chainage_m, r.to_chainage_m - STEP_M, r.to_chainage_m]
              for r in support_reaches]
    kinks = [chain] + [_crossings(chain, axis + off, targets) for off in (half, 0.0, -half)]
    regular = np.arange(chain[0], chain[-1], spacing_m)
    groups = [ends, np.concatenate([np.asarray(h, dtype=float) for h in steps] or [np.empty(0)]),
              np.concatenate(kinks), regular]
    return _spread(groups, chain[0], chain[-1])


def _runs(chain, flag) -> str:
    edges = np.diff(np.concatenate([[0], flag.astype(int), [0]]))
    starts, stops = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1
    text = ", ".join(f"{chain[a]:.0f}-{chain[b]:.0f} m" if b > a else f"{chain[a]:.0f} m"
                     for a, b in list(zip(starts, stops))[:6])
    return text + (" ..." if len(starts) > 6 else "")


class _Places(NamedTuple):
    """Where the stations are and what stands above them. [m]"""

    chainage_m: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    axis_m: np.ndarray
    crown_m: np.ndarray
    invert_m: np.ndarray
    ground_m: np.ndarray  # the ground surface model
    surface_m: np.ndarray  # the ground, or the river bed in a river reach
    water_m: np.ndarray  # water table (river water level in a river reach)
    in_river: np.ndarray  # bool
    cover_m: np.ndarray  # surface (bed) to crown


class _Stresses(NamedTuple):
    """Vertical stresses and pore pressures at the crown, axis and invert. [kPa]"""

    total_crown: np.ndarray
    water_crown: np.ndarray
    effective_crown: np.ndarray
    total_axis: np.ndarray
    water_axis: np.ndarray
    effective_axis: np.ndarray
    water_invert: np.ndarray


class _Layers(NamedTuple):
    """The layers' properties as arrays, one entry per layer, top down."""

    tops_m: np.ndarray
    unit_weight_kn_m3: np.ndarray
    friction_deg: np.ndarray
    cohesion_kpa: np.ndarray
    undrained_kpa: np.ndarray  # NaN where not given
    shear_modulus_kpa: np.ndarray  # NaN where not given
    cohesive: np.ndarray  # bool
    k0: np.ndarray  # earth pressure coefficient at rest: the layer's k0, or Jaky's 1 - sin phi'


def _check_inputs(drive: DriveResult, strengths, layers, rivers, options: FaceOptions, support_reaches,
                  where: str) -> list:
    """Check the settings, strengths, support reaches and rivers; return this drive's rivers with their numbers."""
    check_face_options(options, where)
    check_layer_strengths(strengths, layers, where)
    check_support_reaches(support_reaches, drive.name, where)
    mine = [(n, r) for n, r in enumerate(rivers, 1) if r.drive == drive.name]
    check_numbered_rivers(mine, where)
    for n, river in mine:
        _check_inside(river_label(where, n, river), river.from_chainage_m, river.to_chainage_m, drive)
    for n, reach in enumerate(support_reaches, 1):
        _check_inside(support_label(where, drive.name, n), reach.from_chainage_m, reach.to_chainage_m, drive)
    return mine


def _place_stations(drive: DriveResult, ground: GroundModel, mine, options: FaceOptions, support_reaches,
                    where: str):
    """The stations' chainage, x, y and axis level, and the ground surface level there. [m]"""
    st = station_chainages(drive, ground, [r for _, r in mine], options.face_station_spacing_m, support_reaches)
    p = position_at(drive.axis_xyz_m, drive.chainage_m, st)
    x, y, axis = p[:, 0], p[:, 1], p[:, 2]
    ground_level = np.asarray(ground.surface_level(x, y), dtype=float)
    if np.isnan(ground_level).any():
        k = int(np.argmax(np.isnan(ground_level)))
        raise InputError(f'{where} [[drives]] "{drive.name}": station at chainage {st[k]:.1f} m is outside the '
                         f"ground surface ({ground.ground.surface.source}); extend the surface points or the DEM to cover the route")
    return st, x, y, axis, ground_level


def _surface_and_water(mine, st, crown, ground_level, gw: float, where: str):
    """Surface level, water table [m] and the in-river flag at each station, river reaches taking bed and water."""
    surface = ground_level.copy()
    water = np.minimum(gw, ground_level)
    in_river = np.zeros(len(st), dtype=bool)
    for n, river in mine:
        inside = (st >= river.from_chainage_m - 1e-9) & (st <= river.to_chainage_m + 1e-9)
        label = river_label(where, n, river)
        above = inside & (river.bed_level_m > ground_level + LEVEL_TOLERANCE_M)
        if above.any():
            k = int(np.argmax(above))
            raise InputError(f"{label}: bed_level_m must not be above the ground surface; the surface is "
                             f"{ground_level[k]:.2f} m at chainage {st[k]:.1f} m; got {river.bed_level_m:g}")
        over = inside & (crown >= river.bed_level_m)
        if over.any():
            k = int(np.argmax(over))
            raise InputError(f"{label}: bed_level_m must be above the tunnel crown ({crown[k]:.2f} m at chainage "
                             f"{st[k]:.1f} m); got {river.bed_level_m:g}")
        surface[inside] = river.bed_level_m
        water[inside] = river.water_level_m
        in_river |= inside
    return surface, water, in_river


def _check_crown_below_surface(drive: DriveResult, st, crown, surface, where: str) -> None:
    """Refuse a station whose crown is at or above the surface."""
    if (crown >= surface).any():
        k = int(np.argmax(crown >= surface))
        raise InputError(f'{where} [[drives]] "{drive.name}": the crown is above the ground surface at chainage '
                         f"{st[k]:.1f} m (crown {crown[k]:.2f} m, surface {surface[k]:.2f} m)")


def _groundwater_above_surface_warnings(drive: DriveResult, st, gw: float, ground_level, in_river) -> list[str]:
    """A warning where the groundwater level stands above the ground outside any river reach."""
    capped = ~in_river & (gw > ground_level)
    if not capped.any():
        return []
    return [(f'drive "{drive.name}": groundwater_level_m ({gw:g} m) is above the ground surface at chainage '
             f"{_runs(st, capped)} outside any river reach; the face check takes the water table at the surface "
             "there and counts no free water. If there is open water, describe it with [[rivers]].")]


def _stations_and_places(drive: DriveResult, ground: GroundModel, mine, options: FaceOptions, support_reaches,
                         where: str):
    """Steps 1-2: the stations, their positions, surface, water table and cover, and the warnings on the water."""
    d = float(drive.outer_diameter_m)
    half = d / 2.0
    gw = float(ground.ground.groundwater_level_m)
    st, x, y, axis, ground_level = _place_stations(drive, ground, mine, options, support_reaches, where)
    crown, invert = axis + half, axis - half
    surface, water, in_river = _surface_and_water(mine, st, crown, ground_level, gw, where)
    _check_crown_below_surface(drive, st, crown, surface, where)
    warnings = _groundwater_above_surface_warnings(drive, st, gw, ground_level, in_river)
    cover = surface - crown
    places = _Places(chainage_m=st, x_m=x, y_m=y, axis_m=axis, crown_m=crown, invert_m=invert, ground_m=ground_level,
                     surface_m=surface, water_m=water, in_river=in_river, cover_m=cover)
    return places, warnings


def _layer_table(layers, strengths) -> _Layers:
    """The layers' levels, weights and strengths as arrays. [m, kN/m3, deg, kPa]"""
    return _Layers(
        tops_m=np.array([layer.top_level_m for layer in layers], dtype=float),
        unit_weight_kn_m3=np.array([layer.unit_weight_kn_m3 for layer in layers], dtype=float),
        friction_deg=np.array([s.friction_angle_deg for s in strengths], dtype=float),
        cohesion_kpa=np.array([s.cohesion_kpa for s in strengths], dtype=float),
        undrained_kpa=np.array([np.nan if s.undrained_strength_kpa is None else s.undrained_strength_kpa
                                for s in strengths]),
        shear_modulus_kpa=np.array([np.nan if s.shear_modulus_mpa is None else s.shear_modulus_mpa * 1e3
                                    for s in strengths]),
        cohesive=np.array([layer.behaviour == "cohesive" for layer in layers]),
        k0=np.array([face.jaky_k0(s.friction_angle_deg) if s.k0 is None else s.k0 for s in strengths], dtype=float))


def _stresses(places: _Places, lay: _Layers) -> _Stresses:
    """Step 3: total and effective vertical stress and pore pressure at the crown, axis and invert. [kPa]"""
    surface, water, tops, gamma = places.surface_m, places.water_m, lay.tops_m, lay.unit_weight_kn_m3
    tot_c, u_c, eff_c = face.vertical_stress(places.crown_m, surface, water, tops, gamma)
    tot_a, u_a, eff_a = face.vertical_stress(places.axis_m, surface, water, tops, gamma)
    _, u_i, _ = face.vertical_stress(places.invert_m, surface, water, tops, gamma)
    return _Stresses(total_crown=tot_c, water_crown=u_c, effective_crown=eff_c, total_axis=tot_a, water_axis=u_a,
                     effective_axis=eff_a, water_invert=u_i)


def _cover_segments(places: _Places, lay: _Layers):
    """The cover cut into segments: thickness [m], layer index and effective unit weight [kN/m3]."""
    t_cov, j_cov, wet_cov = _segments(places.surface_m, places.crown_m, lay.tops_m, places.water_m)
    g_cov = lay.unit_weight_kn_m3[j_cov] - face.GAMMA_W * wet_cov
    return t_cov, j_cov, g_cov


def _wedge_silo_minimum(d: float, places: _Places, s: _Stresses, cover_segments, q, lay: _Layers,
                        options: FaceOptions):
    """Drained minimum: wedge-silo s', wedge angle, silo stress and the factored requirement at the crown. [kPa]"""
    t_cov, j_cov, g_cov = cover_segments
    gamma, phi_l, c_l = lay.unit_weight_kn_m3, lay.friction_deg, lay.cohesion_kpa
    t_face, j_face, wet_face = _segments(places.crown_m, places.invert_m, lay.tops_m, places.water_m)
    g_face = (t_face * (gamma[j_face] - face.GAMMA_W * wet_face)).sum(axis=1) / d
    present = t_face > 0
    phi_face = np.where(present, phi_l[j_face], np.inf).min(axis=1)
    c_face = np.where(present, c_l[j_face], np.inf).min(axis=1)
    s_eff, angle, silo = face.anagnostou_kovari_support(
        d, d, g_face, phi_face, c_face, t_cov, g_cov, phi_l[j_cov], c_l[j_cov],
        options.silo_lateral_ratio, options.wedge_lateral_ratio, q)
    earth = options.earth_pressure_factor * np.clip(s_eff, 0.0, None)
    fw, gs = options.water_pressure_factor, options.slurry_unit_weight_kn_m3
    drained = np.maximum.reduce([fw * s.water_crown + earth,
                                 face.axis_to_crown(fw * s.water_axis + earth, gs, d),
                                 fw * s.water_invert + earth - gs * d])  # the invert is D below the crown
    return s_eff, angle, silo, drained


def _axis_layer(axis, lay: _Layers):
    """The layer at the axis: its index, whether it is cohesive, and its undrained strength (NaN if not). [kPa]"""
    j_axis = _layer_index(axis, lay.tops_m)
    clay = lay.cohesive[j_axis]
    cu = np.where(clay, lay.undrained_kpa[j_axis], np.nan)
    return j_axis, clay, cu


def _broms_bennermark_minimum(d: float, tot_a, clay, cu, q, options: FaceOptions):
    """Undrained minimum where the axis is in clay: stability ratio N without support, and the requirement at the
    crown that holds N at the working level `allowable_stability_ratio`. [-, kPa]"""
    gs = options.slurry_unit_weight_kn_m3
    with np.errstate(invalid="ignore"):
        n_ratio = np.where(clay, face.broms_bennermark_stability_ratio(tot_a, np.where(clay, cu, 1.0), 0.0, q), np.nan)
    undrained = np.where(clay, face.axis_to_crown(
        face.broms_bennermark_support(tot_a, np.where(clay, cu, 0.0), options.allowable_stability_ratio, q), gs, d),
        -np.inf)
    return n_ratio, undrained


def _implied_volume_loss(d: float, cover, tot_a, clay, cu, q, support_min, options: FaceOptions):
    """Where the axis is in clay: N with the face at support_min (brought to the axis), N_TC at C/D, the load
    factor and the volume loss it implies (Macklin 1999; LF held within 0.2 to 1, see the module docstring).
    NaN elsewhere. [-, -, -, %]"""
    held = face.crown_to_axis(support_min, options.slurry_unit_weight_kn_m3, d)
    with np.errstate(invalid="ignore", divide="ignore"):
        n_held = np.where(clay, face.broms_bennermark_stability_ratio(tot_a, np.where(clay, cu, 1.0), held, q), np.nan)
        n_tc = np.where(clay, face.davis_heading_stability_ratio(cover, d), np.nan)
        lf = n_held / n_tc
    implied = face.macklin_volume_loss_pct(np.clip(lf, face.MACKLIN_LOWEST_LOAD_FACTOR, 1.0))
    return n_held, n_tc, lf, np.where(clay, implied, np.nan)


def _uplift_limit(d: float, s: _Stresses, cover_segments, lay: _Layers, options: FaceOptions):
    """Blow-out with side shear (K0 of each cover layer), unfactored, and the factored uplift limit at the crown.
    [kPa]"""
    t_cov, j_cov, g_cov = cover_segments
    tot_c = s.total_crown
    shear = face.uplift_resistance_with_shear(tot_c, d, t_cov, g_cov, lay.friction_deg[j_cov], lay.cohesion_kpa[j_cov],
                                              lay.k0[j_cov])
    uplift = (shear if options.blowout_side_shear else tot_c) / options.blowout_factor
    return shear, uplift


def _delft(d: float, cover, sigma_eff, u, j, lay: _Layers, options: FaceOptions):
    """Delft cavity-expansion pressure at one level (unfactored), with the initial effective stress given and the
    properties of layer j: undrained in a cohesive layer, drained otherwise; NaN where the layer has no G. [kPa]"""
    clay = lay.cohesive[j]
    g = lay.shear_modulus_kpa[j]
    has_g = np.isfinite(g)
    half = d / 2.0
    plastic = np.maximum(np.where(clay, options.fracture_radius_cohesive, options.fracture_radius_granular) * cover,
                         half)
    safe_g = np.where(has_g, g, 1.0)
    p = np.where(clay,
                 face.delft_fracture_pressure_undrained(sigma_eff + u, np.where(clay, lay.undrained_kpa[j], 1.0),
                                                        safe_g, half, plastic),
                 face.delft_fracture_pressure(sigma_eff, u, lay.friction_deg[j], lay.cohesion_kpa[j], safe_g, half,
                                              plastic))
    return np.where(has_g, p, np.nan), has_g


def _fracture(d: float, places: _Places, s: _Stresses, j_axis, lay: _Layers, options: FaceOptions):
    """Delft fracture pressure at the crown (the layer just above it, initial stress sigma'_v (1 + K0) / 2), and
    for reference at the axis (the layer there, sigma'_v) brought to the crown; both unfactored, NaN where the
    layer has no G; and has-G at the crown. [kPa]"""
    j_crown = _layer_index(places.crown_m + LEVEL_TOLERANCE_M, lay.tops_m)
    initial = face.cavity_initial_effective_stress(s.effective_crown, lay.k0[j_crown])
    crown, has_g = _delft(d, places.cover_m, initial, s.water_crown, j_crown, lay, options)
    axis, _ = _delft(d, places.cover_m, s.effective_axis, s.water_axis, j_axis, lay, options)
    return crown, face.axis_to_crown(axis, options.slurry_unit_weight_kn_m3, d), j_crown, has_g


def _maximum_support(uplift, fracture, options: FaceOptions):
    """The smaller of the factored uplift and fracture limits, and which one it is. [kPa]"""
    fracture_limit = fracture / options.fracture_factor
    support_max = np.fmin(uplift, fracture_limit)
    max_by = np.where(fracture_limit < uplift, "fracture", "uplift_shear" if options.blowout_side_shear else "blowout")
    return support_max, max_by


def _no_fracture_warnings(drive: DriveResult, st, layers, j_crown, has_g) -> list[str]:
    """A warning where the layer at the crown has no shear modulus, so no fracture limit."""
    if not (~has_g).any():
        return []
    names = sorted({layers[j].name for j in j_crown[~has_g]})
    return [(f'drive "{drive.name}": no shear_modulus_mpa for layer(s) {", ".join(names)} at the crown; '
             f"no fracture limit at chainage {_runs(st, ~has_g)} (the uplift limit alone)")]


def _volume_loss_warnings(drive: DriveResult, st, implied, design, above) -> list[str]:
    """A warning where the volume loss implied by the minimum support exceeds the design volume loss."""
    if not above.any():
        return []
    k = int(np.argmax(np.where(above, implied - design, -np.inf)))
    return [(f'drive "{drive.name}": the volume loss implied by the face support in clay (Macklin 1999, at the '
             f"minimum support) exceeds the design volume loss at chainage {_runs(st, above)}; largest excess "
             f"{implied[k]:.2f} % against {design[k]:.2f} % at {st[k]:.1f} m")]


def _support_modes(st, options: FaceOptions, support_reaches):
    """Support mode and operating tolerance at each station. [kPa]"""
    # A support reach holds from its start up to (not including) its end; the end of the drive takes the mode
    # just before it.
    mode = np.full(len(st), options.support_mode, dtype=object)
    at = np.where(st >= st[-1], st - SAME_CHAINAGE_M, st)
    for reach in support_reaches:
        mode[(at >= reach.from_chainage_m) & (at < reach.to_chainage_m)] = reach.mode
    tol = np.array([options.tolerance_kpa(m) for m in mode])
    return mode, tol


def _window_and_status(support_min, support_max, tol, options: FaceOptions):
    """The room left to choose the target crown pressure [kPa] and its status."""
    window = support_max - support_min - 2.0 * tol
    status = np.where(window < 0, "closed", np.where(window < options.window_margin_kpa, "narrow", "open"))
    return window, status


def _window_warnings(drive: DriveResult, st, window, status) -> list[str]:
    """A warning for each closed or narrow run of stations, with its smallest window."""
    warnings = []
    for word in ("closed", "narrow"):
        hit = status == word
        if hit.any():
            warnings.append(f'drive "{drive.name}": face support window {word} at chainage {_runs(st, hit)}; '
                            f"smallest window {window[hit].min():.1f} kPa")
    return warnings


def face_stations(drive: DriveResult, ground: GroundModel, strengths, rivers=(), options: FaceOptions | None = None,
                  support_reaches=(), where: str = "project", design_drive: Drive | None = None) -> FaceStations:
    """Minimum and maximum face support pressure, and the window between them, at stations along one drive.

    Parameters
    ----------
    drive : DriveResult            The drive's computed axis and chainage (`settle.route.build_drive`).
    ground : GroundModel           Surface, layers and groundwater level.
    strengths : sequence of LayerStrength   One per layer of `ground.ground.layers`, in that order.
    rivers : sequence of River     All the project's rivers; those of other drives are ignored (their numbering in
                                   messages is their place in this sequence).
    options : FaceOptions          Settings; defaults as documented there.
    support_reaches : sequence of SupportReach   This drive's support modes; elsewhere `options.support_mode`.
    where : str                    The project file, for messages.
    design_drive : Drive, optional The same drive as the project file gives it: its volume loss per reach, against
                                   which the volume loss implied by the support is checked (step 7). Without it
                                   design_volume_loss_pct is NaN and nothing is compared.

    Returns
    -------
    FaceStations  One row per station; see the module docstring for what each pressure holds. [kPa, m]
    """
    options = options or FaceOptions()
    layers = ground.ground.layers
    mine = _check_inputs(drive, strengths, layers, rivers, options, support_reaches, where)
    d = float(drive.outer_diameter_m)
    places, warnings = _stations_and_places(drive, ground, mine, options, support_reaches, where)
    st = places.chainage_m
    lay = _layer_table(layers, strengths)
    s = _stresses(places, lay)

    # Minimum: wedge-silo (drained); Broms & Bennermark at the working N (undrained) where the axis is in clay.
    cover_segments = _cover_segments(places, lay)
    q = np.where(places.in_river, 0.0, options.surcharge_kpa)
    s_eff, angle, silo, drained = _wedge_silo_minimum(d, places, s, cover_segments, q, lay, options)
    j_axis, clay, cu = _axis_layer(places.axis_m, lay)
    n_ratio, undrained = _broms_bennermark_minimum(d, s.total_axis, clay, cu, q, options)
    support_min = np.maximum(drained, undrained) + options.support_margin_kpa
    min_by = np.where(undrained > drained, "broms_bennermark", "wedge_silo")

    # What the minimum means for the ground in clay: the volume loss it implies, against the design.
    n_held, n_tc, lf, implied = _implied_volume_loss(d, places.cover_m, s.total_axis, clay, cu, q, support_min, options)
    design = (np.full(len(st), np.nan) if design_drive is None else 100.0 * reach_values(design_drive, st)[0])
    with np.errstate(invalid="ignore"):
        above = np.isfinite(implied) & np.isfinite(design) & (implied > design)
    warnings += _volume_loss_warnings(drive, st, implied, design, above)

    # Maximum: uplift (with or without side shear) and fracture at the crown.
    shear, uplift = _uplift_limit(d, s, cover_segments, lay, options)
    fracture, fracture_axis, j_crown, has_g = _fracture(d, places, s, j_axis, lay, options)
    support_max, max_by = _maximum_support(uplift, fracture, options)
    warnings += _no_fracture_warnings(drive, st, layers, j_crown, has_g)

    # Window.
    mode, tol = _support_modes(st, options, support_reaches)
    window, status = _window_and_status(support_min, support_max, tol, options)
    low_limit = options.low_cover_diameters * d
    warnings += _window_warnings(drive, st, window, status)

    return FaceStations(
        drive=drive.name, outer_diameter_m=d, chainage_m=st, x_m=places.x_m, y_m=places.y_m,
        axis_level_m=places.axis_m, ground_level_m=places.ground_m, surface_level_m=places.surface_m,
        water_level_m=places.water_m, in_river=places.in_river, cover_m=places.cover_m,
        total_stress_crown_kpa=s.total_crown, effective_stress_crown_kpa=s.effective_crown,
        total_stress_axis_kpa=s.total_axis, effective_stress_axis_kpa=s.effective_axis,
        water_pressure_kpa=s.water_crown, water_pressure_axis_kpa=s.water_axis, wedge_support_kpa=s_eff,
        wedge_angle_deg=angle, wedge_silo_stress_kpa=silo,
        stability_ratio_n=n_ratio, n_above_critical=np.nan_to_num(n_ratio) > options.critical_stability_ratio,
        support_min_kpa=support_min, min_governed_by=min_by.astype(object), blowout_kpa=s.total_crown,
        uplift_with_shear_kpa=shear, fracture_kpa=fracture, support_max_kpa=support_max,
        max_limited_by=max_by.astype(object), support_mode=mode, tolerance_kpa=tol, window_kpa=window,
        status=status.astype(object), low_cover=places.cover_m < low_limit, low_cover_limit_m=low_limit,
        slurry_unit_weight_kn_m3=options.slurry_unit_weight_kn_m3, warnings=warnings,
        fracture_axis_kpa=fracture_axis, stability_ratio_at_min_n=n_held, critical_stability_ratio_tc=n_tc,
        load_factor=lf, implied_volume_loss_pct=implied, design_volume_loss_pct=design, implied_above_design=above,
    )
