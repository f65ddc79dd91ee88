"""Building damage assessment: stage 1 screening and stage 2 deep-beam damage categories, wall by wall.

Procedure (`assess_buildings`), after Mair, Taylor & Burland (1996):

1. Stage 1 (Rankin 1988): the greenfield settlement and slope at foundation level, at points along every wall and
   on a grid inside the footprint. A building whose largest slope is below 1/500 and largest settlement below
   10 mm has negligible risk and is screened out (category 0).
2. Stage 2, for the others: every wall (`settle.footprints.footprint_walls`) is a weightless elastic deep beam that
   follows the greenfield settlement profile along it (Burland & Wroth 1974; Burland 1995). The profile is split at
   its inflection points into sagging and hogging parts. For each part: the deflection ratio Delta/L, the bending and
   diagonal strains of the beam (neutral axis at mid-height when sagging, at the base when hogging), the average
   horizontal strain along the part, their combination into a tensile strain (Burland 1995), and the damage
   category from the limiting tensile strain (Boscardin & Cording 1989; Burland 1995). A wall takes its worst part,
   a building its worst wall.
3. Optionally, the deflection ratios and horizontal strains are multiplied by relative-stiffness modification
   factors M that the user reads from the published design charts (Potts & Addenbrooke 1997; Franzius et al.
   2006). The charts are not reproduced here, so M are inputs; off by default, and named in the output when used.

Category 5. The published table gives the same limiting strain, more than 0.3 %, for category 4 (severe) and
category 5 (very severe); no strain criterion tells them apart. A strain above 0.3 % is therefore reported as
category 4 with the label "severe to very severe", and category 5 is never assigned by this method: telling 4 from
5 is a stage 3 judgement (crack widths, stability) for the engineer.

Sign conventions (the project's, `settle.results`): settlement positive downward; horizontal strain tensile positive;
slope dimensionless (1/500 = 0.002). Deflection ratios are reported as positive magnitudes with the mode beside
them: sagging where the middle of the part settles more than the chord between its ends, hogging where it settles
less. Strains are in per cent in every `_pct` field. The average horizontal strain is reported as computed (signed);
compressive values enter the combination as zero, not as a benefit (common practice, no source; methods.md
section 5.4).

References: `settle.assessments.building_damage`, which holds the published methods.
"""
from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Callable

import numpy as np
import shapely

from ..engine.movements import Movements
from ..errors import InputError
from ..inputs.building_settings import INTERIOR_SPACING_M, STIFFNESS_METHODS, AssessmentOptions
from ..inputs.footprints import MODIFICATION_ATTRIBUTES, Buildings, Walls, footprint_walls
from ..inputs.tables import shown
from .building_damage import (NOT_ASSESSED, apply_modification_factors, category_label, deep_beam_strains,
                              rankin_screening)

#: Walls are sampled at spacing <= min(MAX_SAMPLE_SPACING_M, L / MIN_SAMPLE_INTERVALS) (our choice).
MAX_SAMPLE_SPACING_M = 0.5
MIN_SAMPLE_INTERVALS = 40
#: Sagging/hogging parts shorter than this, or of fewer than MIN_PART_SAMPLES samples, join their neighbours (our
#: choice). [m]
MIN_PART_M = 1.0
MIN_PART_SAMPLES = 3
#: Second differences of settlement smaller than this share of the wall's largest settlement are taken as zero
#: curvature (rounding noise, not an inflection). [-]
CURVATURE_NOISE = 1e-9
#: Buildings are assessed in batches of about this many sample points, each one call of the movements callable
#: (bounds memory). [-]
POINTS_PER_BATCH = 500_000


# ------------------------------------------------------------------------------------------ sampling and profiles
def wall_samples(walls: Walls):
    """Points along every wall at spacing <= min(MAX_SAMPLE_SPACING_M, L / MIN_SAMPLE_INTERVALS), ends included.

    Returns
    -------
    (wall, s, x, y)  Wall index of each sample, distance from the wall's start [m], position [m]; walls in order,
                     samples in order along each wall.
    """
    length = walls.length_m
    intervals = np.maximum(MIN_SAMPLE_INTERVALS, np.ceil(length / MAX_SAMPLE_SPACING_M - 1e-9)).astype(np.int64)
    count = intervals + 1
    wall = np.repeat(np.arange(len(walls)), count)
    k = np.arange(wall.size) - np.repeat(np.cumsum(count) - count, count)
    s = k * (length / intervals)[wall]
    xy = walls.start_xy[wall] + s[:, None] * walls.direction[wall]
    return wall, s, xy[:, 0], xy[:, 1]


def interior_points(polygons, spacing_m: float = INTERIOR_SPACING_M):
    """Nodes of a grid of the given spacing (aligned on multiples of it) that fall inside each footprint.

    Returns
    -------
    (owner, x, y)  Index of the polygon of each point, and its position [m]; grouped by polygon.
    """
    polygons = np.asarray(polygons, dtype=object)
    bounds = shapely.bounds(polygons)
    c0 = np.ceil(bounds[:, 0] / spacing_m).astype(np.int64)
    c1 = np.floor(bounds[:, 2] / spacing_m).astype(np.int64)
    r0 = np.ceil(bounds[:, 1] / spacing_m).astype(np.int64)
    r1 = np.floor(bounds[:, 3] / spacing_m).astype(np.int64)
    nx, ny = np.maximum(c1 - c0 + 1, 0), np.maximum(r1 - r0 + 1, 0)
    count = nx * ny
    owner = np.repeat(np.arange(len(polygons)), count)
    k = np.arange(owner.size) - np.repeat(np.cumsum(count) - count, count)
    x = (c0[owner] + k % nx[owner]) * spacing_m
    y = (r0[owner] + k // np.maximum(nx[owner], 1)) * spacing_m
    shapely.prepare(polygons)
    inside = shapely.contains_xy(polygons[owner], x, y)
    return owner[inside], x[inside], y[inside]


def _segment_fill(values: np.ndarray, group: np.ndarray) -> np.ndarray:
    """Zeros replaced by the previous non-zero value of the same group, then leading zeros by the next one."""
    def forward(v, g):
        pos = np.arange(len(v))
        start = np.r_[True, g[1:] != g[:-1]]
        src = np.maximum.accumulate(np.where((v != 0) | start, pos, 0))
        return v[src]

    out = forward(values, group)
    return forward(out[::-1], group[::-1])[::-1]


def _runs(values: np.ndarray, group: np.ndarray):
    """Runs of equal values within groups: (first, last) positions of each run."""
    change = np.r_[True, (group[1:] != group[:-1]) | (values[1:] != values[:-1])]
    first = np.flatnonzero(change)
    last = np.r_[first[1:] - 1, len(values) - 1]
    return first, last


def profile_parts(wall: np.ndarray, s: np.ndarray, settlement: np.ndarray, min_part_m: float = MIN_PART_M):
    """Split the settlement profile along every wall into sagging and hogging parts at its inflection points.

    The curvature sign comes from second differences of settlement at the interior samples (negative: sagging, the
    settlement is concave; positive: hogging); differences below CURVATURE_NOISE of the wall's largest settlement
    count as zero and take the sign of their neighbours. Runs of one sign shorter than `min_part_m` or of fewer
    than MIN_PART_SAMPLES samples join their neighbours. A part ends at the sample of the two either side of a sign
    change with the smaller second difference (the one nearer the inflection); neighbouring parts share it.

    Parameters
    ----------
    wall : (n,) int      Wall index of each sample, grouped and in order along each wall (`wall_samples`).
    s : (n,) float       Distance along the wall. [m]
    settlement : (n,)    Settlement at the samples, finite. [any length unit]

    Returns
    -------
    (part_wall, first, last)  Wall of each part and its first and last sample (indices into the samples); parts
                              in order along each wall.
    """
    n = len(wall)
    wall_first = np.r_[True, wall[1:] != wall[:-1]]
    wall_last = np.r_[wall[1:] != wall[:-1], True]
    wall_id = wall[wall_first]
    dense = np.cumsum(wall_first) - 1  # 0, 1, ... over the walls given
    d2 = np.zeros(n)
    d2[1:-1] = settlement[:-2] - 2.0 * settlement[1:-1] + settlement[2:]
    interior = np.flatnonzero(~wall_first & ~wall_last)
    g = dense[interior]
    scale = np.maximum.reduceat(np.abs(settlement), np.flatnonzero(wall_first)) if n else np.zeros(0)
    curv = d2[interior]
    sign = np.where(np.abs(curv) > CURVATURE_NOISE * scale[g], np.sign(curv), 0.0)
    sign = _segment_fill(sign, g)

    wall_start = np.flatnonzero(wall_first)
    wall_end = np.flatnonzero(wall_last)
    spacing = s[wall_start + 1] - s[wall_start]  # per wall (samples are evenly spaced)
    first, last = _runs(sign, g)
    nodes = last - first + 1
    h = spacing[g[first]]
    runs_in_wall = np.bincount(g[first], minlength=len(scale))
    short = ((nodes < MIN_PART_SAMPLES) | (nodes * h < min_part_m)) & (runs_in_wall[g[first]] > 1)
    if short.any():
        kill = np.repeat(short, nodes)
        sign = _segment_fill(np.where(kill, 0.0, sign), g)
        first, last = _runs(sign, g)

    run_wall = g[first]
    first_run = np.r_[True, run_wall[1:] != run_wall[:-1]]
    last_run = np.r_[run_wall[1:] != run_wall[:-1], True]
    # boundary after each run (not the last of its wall): the sample nearer the inflection
    j = interior[last]
    j_next = interior[np.minimum(last + 1, len(interior) - 1)]
    boundary = np.where(np.abs(d2[j]) <= np.abs(d2[j_next]), j, j_next)
    p_first = np.where(first_run, wall_start[run_wall], np.r_[0, boundary[:-1]])
    p_last = np.where(last_run, wall_end[run_wall], boundary)
    return wall_id[run_wall], p_first, p_last


def part_deflection(first: np.ndarray, last: np.ndarray, s: np.ndarray, settlement: np.ndarray) -> np.ndarray:
    """Relative deflection Delta of each part: the largest deviation of the settlement from the chord joining the
    part's ends, signed (positive: the part settles more than the chord, sagging; negative: hogging).

    Returns
    -------
    ndarray  Delta, in the unit of `settlement`.
    """
    count = last - first + 1
    part = np.repeat(np.arange(len(first)), count)
    starts = np.cumsum(count) - count
    idx = np.repeat(first - starts, count) + np.arange(part.size)
    s_a, settlement_a = s[first], settlement[first]  # per part, then spread over its samples
    rise, run = settlement[last] - settlement_a, s[last] - s_a
    chord = settlement_a[part] + rise[part] * (s[idx] - s_a[part]) / run[part]
    dev = settlement[idx] - chord
    high = np.maximum.reduceat(dev, starts)
    low = np.minimum.reduceat(dev, starts)
    return np.where(high >= -low, high, low)


@dataclass
class PartResults:
    """Sagging and hogging parts of the assessed walls (arrays of one length)."""

    wall: np.ndarray  # index into Walls
    from_m: np.ndarray  # along the wall from its start [m]
    to_m: np.ndarray
    sagging: np.ndarray  # bool; False = hogging
    length_to_height: np.ndarray  # [-]
    greenfield_deflection_ratio: np.ndarray  # magnitude [-]
    greenfield_horizontal_strain_pct: np.ndarray  # average along the part, tensile positive [%]
    deflection_ratio: np.ndarray  # after modification factors (= greenfield when off) [-]
    horizontal_strain_pct: np.ndarray  # [%]
    bending_strain_pct: np.ndarray
    diagonal_strain_pct: np.ndarray
    combined_bending_strain_pct: np.ndarray
    combined_diagonal_strain_pct: np.ndarray
    tensile_strain_pct: np.ndarray
    bending_governs: np.ndarray  # bool
    category: np.ndarray  # int 0-4


@dataclass
class BuildingResults:
    """What the building assessment found. Per building arrays follow `Buildings`; walls follow `walls`."""

    max_settlement_mm: np.ndarray  # greenfield, at foundation level, over the footprint
    max_tilt: np.ndarray  # greenfield slope [-]
    screened_out: np.ndarray  # bool: stage 1 negligible risk
    deflection_ratio: np.ndarray  # of the governing part [-]; NaN when not assessed at stage 2
    horizontal_strain_pct: np.ndarray  # of the governing part, tensile positive [%]
    tensile_strain_pct: np.ndarray  # limiting tensile strain of the governing part [%]
    category: np.ndarray  # int 0-4; NOT_ASSESSED (-1) where movements are undefined
    category_label: np.ndarray  # text
    governing_wall: np.ndarray  # wall number within the building; -1 when none
    governing_mode: np.ndarray  # "sagging" | "hogging" | ""
    stiffness_correction: np.ndarray  # text per building: "none" or the method and the M used
    note: np.ndarray  # text per building
    walls: Walls
    wall_governing_part: np.ndarray  # index into parts; -1 for walls not assessed at stage 2
    wall_part_count: np.ndarray  # parts of each assessed wall (0 when not assessed)
    parts: PartResults
    options: AssessmentOptions


def _modification_factors(buildings: Buildings, options: AssessmentOptions) -> dict[str, np.ndarray]:
    """M per building: the building's attribute, else the project value; missing both is an InputError."""
    out = {}
    for name in MODIFICATION_ATTRIBUTES:
        own = buildings.modification.get(name, np.full(len(buildings), np.nan))
        project = options.modification_factors.get(name)
        m = np.where(np.isnan(own), np.nan if project is None else float(project), own)
        if np.isnan(m).any():
            k = int(np.argmax(np.isnan(m)))
            raise InputError(f"{buildings.source} building {shown(buildings.ids[k])}: {name} is empty and "
                             f"{options.key_prefix} {name} is not set; stiffness_correction = "
                             f"{shown(options.stiffness_correction)} needs every modification factor")
        out[name] = m
    return out


@dataclass
class _Samples:
    """Stage 1 and 2 points of a batch of buildings: the wall samples first, then the interior grid. Building and
    wall indices are those of the whole run."""

    owner: np.ndarray  # building of each point
    x: np.ndarray
    y: np.ndarray
    wall: np.ndarray  # wall of each wall sample (the first len(wall) points)
    along_m: np.ndarray  # distance of each wall sample from its wall's start [m]

    @classmethod
    def of(cls, buildings: Buildings, walls: Walls, first: int, end: int, w_first: int, w_end: int,
           interior_spacing_m: float) -> "_Samples":
        """Points of buildings first..end-1, whose walls are w_first..w_end-1."""
        sub = Walls(*(a[w_first:w_end] for a in (walls.building, walls.number, walls.part, walls.start_xy,
                                                  walls.end_xy)))
        wall, along, wx, wy = wall_samples(sub)
        owner, ix, iy = interior_points(buildings.polygons[first:end], interior_spacing_m)
        return cls(np.concatenate([sub.building[wall], owner + first]), np.concatenate([wx, ix]),
                   np.concatenate([wy, iy]), wall + w_first, along)


def _batches(buildings: Buildings, walls: Walls, interior_spacing_m: float):
    """(first, end, w_first, w_end) of batches of buildings of about POINTS_PER_BATCH points each."""
    n = len(buildings)
    wall_range = np.searchsorted(walls.building, np.arange(n + 1))
    area = shapely.area(buildings.polygons) / interior_spacing_m**2
    per_wall = np.maximum(MIN_SAMPLE_INTERVALS, walls.length_m / MAX_SAMPLE_SPACING_M) + 1
    points = np.cumsum(area + np.bincount(walls.building, weights=per_wall, minlength=n))
    cuts = np.searchsorted(points, np.arange(POINTS_PER_BATCH, points[-1] if n else 0, POINTS_PER_BATCH))
    edges = np.unique(np.r_[0, cuts, n])
    return [(a, b, wall_range[a], wall_range[b]) for a, b in zip(edges[:-1], edges[1:])]


def _evaluate(movements, x, y, depth) -> dict[str, np.ndarray]:
    """Settlement [mm], tilt [-] and horizontal displacement ux, uy [mm] at the points."""
    m: Movements = movements(x, y, depth)
    return {"settlement_mm": np.asarray(m.settlement_mm, dtype=float), "tilt": np.hypot(m.slope_x, m.slope_y),
            "ux_mm": np.asarray(m.ux_mm, dtype=float), "uy_mm": np.asarray(m.uy_mm, dtype=float)}


def _footprint_maxima(owner: np.ndarray, field_: dict, n: int):
    """Largest settlement [mm] and tilt [-] of each building, NaN (and `undefined` True) where any point is NaN."""
    undefined = np.bincount(owner, weights=np.isnan(field_["settlement_mm"]), minlength=n) > 0
    maxima = []
    for key in ("settlement_mm", "tilt"):
        m = np.full(n, -np.inf)
        np.maximum.at(m, owner, np.nan_to_num(field_[key], nan=-np.inf))
        m[undefined] = np.nan
        maxima.append(m)
    return maxima[0], maxima[1], undefined


def _governing(parts: PartResults, walls: Walls, assessed: np.ndarray):
    """Worst part of each wall (index into parts, -1 for walls not assessed) and worst wall of each building
    (index into walls, -1 where none); ties go to the first part along the wall and the lowest wall number."""
    w_count = len(walls)
    wall_part = np.full(w_count, -1)
    if len(parts.wall):
        order = np.lexsort((-parts.tensile_strain_pct, parts.wall))
        head = order[np.r_[True, parts.wall[order][1:] != parts.wall[order][:-1]]]
        wall_part[parts.wall[head]] = head
    strain = np.full(w_count, -np.inf)
    strain[wall_part >= 0] = parts.tensile_strain_pct[wall_part[wall_part >= 0]]
    worst_wall = np.full(len(assessed), -1)
    if w_count:
        order = np.lexsort((walls.number, -strain, walls.building))
        head = order[np.r_[True, walls.building[order][1:] != walls.building[order][:-1]]]
        worst_wall[walls.building[head]] = head
    worst_wall[~assessed] = -1
    return wall_part, worst_wall


def footprint_maxima(buildings: Buildings, movements: Callable[..., Movements],
                     options: AssessmentOptions | None = None):
    """The largest settlement [mm] and tilt [-] over each building's stage 1 points (walls and interior), and
    whether any of its points has undefined movements: what stage 1 screens on, without stage 2."""
    options = options or AssessmentOptions()
    walls = footprint_walls(buildings.polygons)
    n = len(buildings)
    settlement, tilt, undefined = np.full(n, np.nan), np.full(n, np.nan), np.zeros(n, dtype=bool)
    for first, end, w_first, w_end in _batches(buildings, walls, options.interior_spacing_m):
        samples = _Samples.of(buildings, walls, first, end, w_first, w_end, options.interior_spacing_m)
        field_ = _evaluate(movements, samples.x, samples.y, buildings.foundation_depth_m[samples.owner])
        settlement[first:end], tilt[first:end], undefined[first:end] = _footprint_maxima(samples.owner - first,
                                                                                         field_, end - first)
    return settlement, tilt, undefined


def assess_buildings(buildings: Buildings, movements: Callable[..., Movements],
                     options: AssessmentOptions | None = None) -> BuildingResults:
    """Stage 1 screening and stage 2 deep-beam damage categories of every building.

    Parameters
    ----------
    buildings : Buildings        From `settle.footprints.read_buildings`.
    movements : callable         movements(x_m, y_m, depth_m) -> settle.results.Movements: the greenfield
                                 movements of every drive at the construction stage of the run, at points at a
                                 depth below the ground surface. NaN where undefined (below a tunnel crown).
    options : AssessmentOptions

    Returns
    -------
    BuildingResults  A building with any undefined movement at its foundation level is not assessed
                     (category -1, with a note).
    """
    options = options or AssessmentOptions()
    options.check()
    factors = _modification_factors(buildings, options) if options.stiffness_correction != "none" else None
    walls = footprint_walls(buildings.polygons)
    n = len(buildings)
    max_settlement, max_tilt = np.full(n, np.nan), np.full(n, np.nan)
    undefined, screened = np.zeros(n, dtype=bool), np.zeros(n, dtype=bool)
    found = []
    for first, end, w_first, w_end in _batches(buildings, walls, options.interior_spacing_m):
        samples = _Samples.of(buildings, walls, first, end, w_first, w_end, options.interior_spacing_m)
        field_ = _evaluate(movements, samples.x, samples.y, buildings.foundation_depth_m[samples.owner])
        # stage 1
        s, t, u = _footprint_maxima(samples.owner - first, field_, end - first)
        max_settlement[first:end], max_tilt[first:end], undefined[first:end] = s, t, u
        screened[first:end] = rankin_screening(t, s, options.screening_slope_limit,
                                               options.screening_settlement_limit_mm) & ~u
        # stage 2
        found.append(_assess_parts(samples, field_, walls, ~screened & ~undefined, buildings.height_m,
                                   buildings.e_over_g, factors, options))
    parts = _concatenate(found)
    wall_part, worst_wall = _governing(parts, walls, ~screened & ~undefined)
    return _results(buildings, walls, parts, wall_part, worst_wall, max_settlement, max_tilt, screened, undefined,
                    factors, options)


def _concatenate(found: list[PartResults]) -> PartResults:
    if not found:
        return _no_parts()
    return PartResults(**{f.name: np.concatenate([getattr(p, f.name) for p in found]) for f in fields(PartResults)})


def _no_parts() -> PartResults:
    empty_f, empty_i = np.empty(0), np.empty(0, dtype=int)
    return PartResults(empty_i, *(empty_f,) * 2, np.empty(0, bool), *(empty_f,) * 10, np.empty(0, bool), empty_i)


def _results(buildings, walls, parts, wall_part, worst_wall, max_settlement, max_tilt, screened, undefined,
             factors, options) -> BuildingResults:
    """Per building values of the governing part, with a note saying where each result comes from."""
    n = len(buildings)
    part = np.where(worst_wall >= 0, wall_part[np.maximum(worst_wall, 0)], -1)
    has = part >= 0

    def pick(values, empty):
        out = np.full(n, empty, dtype=np.asarray(values).dtype if len(values) else type(empty))
        out[has] = values[part[has]]
        return out

    category = np.where(undefined, NOT_ASSESSED, pick(parts.category, 0)).astype(int)
    mode = np.where(has, np.where(pick(parts.sagging, False), "sagging", "hogging"), "").astype(object)
    note = np.full(n, "", dtype=object)
    for k in np.flatnonzero(has):
        q = part[k]
        note[k] = (f"stage 2: wall {walls.number[worst_wall[k]]}, {mode[k]} part {parts.from_m[q]:.1f}-"
                   f"{parts.to_m[q]:.1f} m along it, {'bending' if parts.bending_governs[q] else 'diagonal'} "
                   "strain governs")
    note[screened] = (f"stage 1: greenfield slope below {options.screening_slope_limit:g} and settlement below "
                      f"{options.screening_settlement_limit_mm:g} mm; negligible risk")
    note[undefined] = ("not assessed: the foundation level is at or below the crown of a drive that reaches the "
                       "building, where the greenfield relations do not hold")
    return BuildingResults(
        max_settlement_mm=max_settlement,
        max_tilt=max_tilt,
        screened_out=screened,
        deflection_ratio=pick(parts.deflection_ratio, np.nan),
        horizontal_strain_pct=pick(parts.horizontal_strain_pct, np.nan),
        tensile_strain_pct=pick(parts.tensile_strain_pct, np.nan),
        category=category,
        category_label=category_label(category),
        governing_wall=np.where(has, walls.number[np.maximum(worst_wall, 0)] if len(walls) else -1, -1),
        governing_mode=mode,
        stiffness_correction=_correction_text(factors, options, n),
        note=note,
        walls=walls,
        wall_governing_part=wall_part,
        wall_part_count=np.bincount(parts.wall, minlength=len(walls)),
        parts=parts,
        options=options,
    )


def _assess_parts(samples: _Samples, field_: dict, walls: Walls, assessed: np.ndarray, height_m: np.ndarray,
                  e_over_g: np.ndarray, factors, options: AssessmentOptions) -> PartResults:
    """Stage 2: the sagging and hogging parts of the walls of the assessed buildings, with their deflection ratio,
    average horizontal strain, beam strains and category. `height_m`, `e_over_g` and `factors` are per building
    (as indexed by walls.building)."""
    n_wall_samples = len(samples.wall)
    keep = assessed[walls.building][samples.wall]
    index = None if keep.all() else np.flatnonzero(keep)  # of the wall samples of assessed buildings

    def kept(values):
        return values[:n_wall_samples] if index is None else values[index]

    w_of, s_along, prof = kept(samples.wall), kept(samples.along_m), kept(field_["settlement_mm"])
    if len(w_of) == 0:
        return _no_parts()
    p_wall, first, last = profile_parts(w_of, s_along, prof)
    length = s_along[last] - s_along[first]
    delta_mm = part_deflection(first, last, s_along, prof)
    sagging = delta_mm > 0
    dr_gf = np.abs(delta_mm) * 1e-3 / length
    t = walls.direction[p_wall]
    ends = (first, last) if index is None else (index[first], index[last])
    along = [field_["ux_mm"][k] * t[:, 0] + field_["uy_mm"][k] * t[:, 1] for k in ends]  # displacement along [mm]
    eh_gf = (along[1] - along[0]) * 1e-3 / length
    b = walls.building[p_wall]
    if factors is not None:
        dr, eh = apply_modification_factors(dr_gf, eh_gf, sagging, *(factors[k][b] for k in MODIFICATION_ATTRIBUTES))
    else:
        dr, eh = dr_gf, eh_gf
    ratio = length / height_m[b]
    beam = deep_beam_strains(dr, eh, ratio, e_over_g[b], ~sagging, options.poisson_ratio)
    pct = 100.0
    return PartResults(
        wall=p_wall, from_m=s_along[first], to_m=s_along[last], sagging=sagging, length_to_height=ratio,
        greenfield_deflection_ratio=dr_gf, greenfield_horizontal_strain_pct=eh_gf * pct, deflection_ratio=dr,
        horizontal_strain_pct=eh * pct, bending_strain_pct=beam["bending"] * pct,
        diagonal_strain_pct=beam["diagonal"] * pct, combined_bending_strain_pct=beam["combined_bending"] * pct,
        combined_diagonal_strain_pct=beam["combined_diagonal"] * pct, tensile_strain_pct=beam["tensile"] * pct,
        bending_governs=beam["bending_governs"], category=beam["category"],
    )


def _correction_text(factors, options: AssessmentOptions, n: int) -> np.ndarray:
    if factors is None:
        return np.full(n, "none", dtype=object)
    name = STIFFNESS_METHODS[options.stiffness_correction]
    m = [factors[k] for k in MODIFICATION_ATTRIBUTES]
    return np.array([f"{name}: modification factors from the user, M_DRsag {a:g}, M_DRhog {b:g}, M_eps_ht {c:g}, "
                     f"M_eps_hc {d:g}" for a, b, c, d in zip(*m)], dtype=object)
