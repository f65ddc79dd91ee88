"""Building damage categories at many construction stages, each building sampled once.

The construction envelope (`settle.procedure.envelope`) needs the category of a building at every stage whose face
lies within reach of it: often tens of stages. The procedure is that of `settle.assessments.buildings` (stage 1
screening, then stage 2 deep-beam categories wall by wall), applied to one copy of the building per stage, with
the work shared between the copies:

- the walls and their samples are found once per building, and the movements at a sample are found for all its
  stages in one evaluation (the `movements` callable, `settle.engine.field.movements_at_stages`);
- the interior grid of stage 1 is evaluated only where it can change the category. Points added to the walls'
  samples can only raise the largest settlement and slope, so a copy whose walls alone fail the screen is not
  screened out; and a copy whose walls give category 0 at stage 2 is category 0 whether it is screened out or not.
  So only a copy of category 1 or more whose walls pass the screen needs its interior, and the buildings the
  caller names in `full_check` (those with an undefined place at completion, where the interior may be undefined
  at a stage while the walls are not).

The categories are exactly those `assess_buildings` gives with the same movements (tests/test_building_stages.py
checks them against it, copy by copy).
"""
from __future__ import annotations

from typing import Callable

import numpy as np

from ..engine.movements import Movements
from ..inputs.building_settings import AssessmentOptions
from ..inputs.footprints import Buildings, Walls, footprint_walls
from .building_damage import NOT_ASSESSED, rankin_screening
from .buildings import (MAX_SAMPLE_SPACING_M, MIN_SAMPLE_INTERVALS, POINTS_PER_BATCH, _assess_parts,
                        _footprint_maxima, _governing, _modification_factors, _Samples, interior_points,
                        wall_samples)


def stage_categories(buildings: Buildings, first: np.ndarray, count: np.ndarray,
                     movements: Callable[..., Movements], options: AssessmentOptions | None = None,
                     full_check: np.ndarray | None = None) -> np.ndarray:
    """Damage category of each building at each of its stages: building b at stages first[b] .. first[b] +
    count[b] - 1 (none where count[b] is 0).

    Parameters
    ----------
    buildings : Buildings
    first, count : (n,) int      The first stage of each building and how many follow it.
    movements : callable         movements(x_m, y_m, depth_m, first, count, rows=None) -> Movements with one row per
                                 place and stage, in the order `rows` gives (`engine.field.movements_at_stages`);
                                 settlement, horizontal displacement and slope are read.
    options : AssessmentOptions
    full_check : (n,) bool       Buildings whose interior grid is evaluated at every stage (see the module).

    Returns
    -------
    ndarray of int  The category of building b at stage first[b] + j in row start[b] + j, start = cumsum(count) -
                    count; NOT_ASSESSED (-1) where a place of the building has undefined movements.
    """
    options = options or AssessmentOptions()
    options.check()
    first, count = np.asarray(first, dtype=np.int64), np.asarray(count, dtype=np.int64)
    full_check = np.zeros(len(buildings), dtype=bool) if full_check is None else np.asarray(full_check, bool)
    factors = _modification_factors(buildings, options) if options.stiffness_correction != "none" else None
    chosen = np.flatnonzero(count > 0)
    walls = footprint_walls(buildings.polygons[chosen])  # walls.building: index into `chosen`
    wall_range = np.searchsorted(walls.building, np.arange(len(chosen) + 1))
    per_wall = np.maximum(MIN_SAMPLE_INTERVALS, np.ceil(walls.length_m / MAX_SAMPLE_SPACING_M - 1e-9)) + 1
    points = np.cumsum(np.bincount(walls.building, weights=per_wall, minlength=len(chosen)) * count[chosen])
    cuts = np.searchsorted(points, np.arange(POINTS_PER_BATCH, points[-1] if len(chosen) else 0, POINTS_PER_BATCH))
    edges = np.unique(np.r_[0, cuts, len(chosen)])
    found = []
    for a, b in zip(edges[:-1], edges[1:]):
        batch = _Copies(buildings, chosen[a:b], first, count, walls, wall_range[a], wall_range[b], a)
        found.append(batch.categories(movements, options, factors, full_check))
    return np.concatenate(found) if found else np.empty(0, dtype=int)


class _Copies:
    """One copy of each of a batch of buildings per stage: the buildings' wall samples once, and the copies' walls
    and samples laid out copy by copy, as `assess_buildings` lays out buildings."""

    def __init__(self, buildings: Buildings, which: np.ndarray, first, count, walls: Walls, w_first: int,
                 w_end: int, offset: int):
        self.buildings, self.which = buildings, which
        self.first, self.count = first[which], count[which]
        sub = Walls(*(a[w_first:w_end] for a in (walls.building, walls.number, walls.part, walls.start_xy,
                                                  walls.end_xy)))
        sub.building = sub.building - offset  # 0 .. len(which) - 1
        m = len(which)
        wall, along, wx, wy = wall_samples(sub)
        owner = sub.building[wall]
        # the buildings' samples, place by place, each wanted at its building's stages
        self.x, self.y, self.owner = wx, wy, owner
        n_samples = np.bincount(owner, minlength=m)
        s_start = np.cumsum(n_samples) - n_samples
        n_walls = np.bincount(sub.building, minlength=m)
        w_start = np.cumsum(n_walls) - n_walls
        # the copies: copy c is building copy_of[c] at its stage number stage_of[c] (0, 1, ... from its first)
        copies = int(self.count.sum())
        self.copy_of = np.repeat(np.arange(m), self.count)
        self.stage_of = np.arange(copies) - np.repeat(np.cumsum(self.count) - self.count, self.count)
        # their points copy by copy: point k of copy c is sample s_start[b] + o at row place_row[..] + stage
        self.per_copy = per_copy = n_samples[self.copy_of]
        point_copy = np.repeat(np.arange(copies), per_copy)
        o = np.arange(point_copy.size) - np.repeat(np.cumsum(per_copy) - per_copy, per_copy)
        sample = s_start[self.copy_of][point_copy] + o
        place_row = np.cumsum(self.count[owner]) - self.count[owner]
        self.rows = np.empty(point_copy.size, dtype=np.int64)  # the row of each place and stage, copy by copy
        self.rows[place_row[sample] + self.stage_of[point_copy]] = np.arange(point_copy.size)
        # the copies' walls, wall by wall as the buildings' are
        per_copy_walls = n_walls[self.copy_of]
        wall_copy = np.repeat(np.arange(copies), per_copy_walls)
        src = w_start[self.copy_of][wall_copy] + (np.arange(wall_copy.size) - np.repeat(
            np.cumsum(per_copy_walls) - per_copy_walls, per_copy_walls))
        self.walls = Walls(wall_copy, sub.number[src], sub.part[src], sub.start_xy[src], sub.end_xy[src])
        copy_w_start = np.cumsum(per_copy_walls) - per_copy_walls
        self.samples = _Samples(point_copy, wx[sample], wy[sample],
                                copy_w_start[point_copy] + (wall[sample] - w_start[owner[sample]]), along[sample])

    def categories(self, movements, options: AssessmentOptions, factors, full_check) -> np.ndarray:
        """Stage 2 on the walls of every copy, then the interior grid where it can change the category."""
        b = self.which
        depth = self.buildings.foundation_depth_m[b]
        moved = movements(self.x, self.y, depth[self.owner], self.first[self.owner], self.count[self.owner],
                          self.rows)
        field_ = {"settlement_mm": moved.settlement_mm, "tilt": np.hypot(moved.slope_x, moved.slope_y),
                  "ux_mm": moved.ux_mm, "uy_mm": moved.uy_mm}
        settlement, tilt, undefined = self._wall_maxima(field_)
        building = b[self.copy_of]
        copy_factors = None if factors is None else {k: v[building] for k, v in factors.items()}
        parts = _assess_parts(self.samples, field_, self.walls, ~undefined, self.buildings.height_m[building],
                              self.buildings.e_over_g[building], copy_factors, options)
        wall_part, worst_wall = _governing(parts, self.walls, ~undefined)
        part = np.where(worst_wall >= 0, wall_part[np.maximum(worst_wall, 0)], -1)
        category = np.where(part >= 0, parts.category[np.maximum(part, 0)] if len(parts.category) else 0, 0)
        walls_pass = rankin_screening(tilt, settlement, options.screening_slope_limit,
                                      options.screening_settlement_limit_mm)
        interior = ~undefined & (((category >= 1) & walls_pass) | full_check[building])
        if interior.any():
            inner_s, inner_t, inner_u = self._interior_maxima(np.flatnonzero(interior), movements, options)
            s, t = np.fmax(settlement[interior], inner_s), np.fmax(tilt[interior], inner_t)
            screened = rankin_screening(t, s, options.screening_slope_limit, options.screening_settlement_limit_mm)
            category[interior] = np.where(inner_u, NOT_ASSESSED, np.where(screened, 0, category[interior]))
        return np.where(undefined, NOT_ASSESSED, category).astype(int)

    def _wall_maxima(self, field_: dict):
        """Largest settlement [mm] and tilt [-] over the wall samples of each copy (NaN, and `undefined` True, where
        any is NaN): `buildings._footprint_maxima` for points grouped copy by copy."""
        if not len(self.per_copy) or self.per_copy.min() == 0:
            return _footprint_maxima(self.samples.owner, field_, len(self.per_copy))
        starts = np.cumsum(self.per_copy) - self.per_copy
        undefined = np.add.reduceat(np.isnan(field_["settlement_mm"]), starts) > 0
        maxima = [np.where(undefined, np.nan, np.fmax.reduceat(field_[k], starts)) for k in ("settlement_mm", "tilt")]
        return maxima[0], maxima[1], undefined

    def _interior_maxima(self, copies: np.ndarray, movements, options: AssessmentOptions):
        """Largest settlement [mm] and tilt [-] on the interior grid of these copies, and whether any is undefined."""
        building = self.which[self.copy_of[copies]]
        owner, x, y = interior_points(self.buildings.polygons[building], options.interior_spacing_m)
        stage = self.first[self.copy_of[copies]] + self.stage_of[copies]
        moved = movements(x, y, self.buildings.foundation_depth_m[building][owner], stage[owner],
                          np.ones(len(owner), dtype=np.int64))
        field_ = {"settlement_mm": moved.settlement_mm, "tilt": np.hypot(moved.slope_x, moved.slope_y)}
        return _footprint_maxima(owner, field_, len(copies))
