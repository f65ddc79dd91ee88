"""The run's work cut into tasks by drive and by tiles along the route, and their results put back together.

Assets (buildings) are grouped by the drive nearest to them and by the tile of `TILE_LENGTH_M` of plan length along
that drive into which they project; a group larger than `MAX_ASSETS_PER_TASK` is cut into runs of that size. Groups
depend on the project only, never on how many workers there are, so every mode runs the same tasks.

Each task's results follow its own rows; `gather_rows` puts per-asset results back in the project's order, and
`gather_building_results` does the same for the building assessment, whose walls and parts refer to one another by
index.
"""
from __future__ import annotations

import dataclasses

import numpy as np
import shapely

from ..assessments.buildings import BuildingResults, PartResults
from ..inputs.footprints import Walls

#: Length of route, in plan, whose assets make one task. [m]
TILE_LENGTH_M = 250.0
#: The most assets in one task: a larger tile is cut into runs of this many.
MAX_ASSETS_PER_TASK = 2500


def asset_groups(geometries, drives, tile_length_m: float = TILE_LENGTH_M,
                 max_assets: int = MAX_ASSETS_PER_TASK) -> list[np.ndarray]:
    """Rows of the assets (shapely geometries) in tasks: by nearest drive, then by tile along it (the plan length to
    the point of the drive's axis nearest the asset's centroid), each task's rows increasing.

    Parameters
    ----------
    geometries : array of shapely geometries  The assets' footprints or lines.
    drives : list of DriveResult               The run's drives (`axis_xyz_m`).
    """
    n = len(geometries)
    if n == 0:
        return []
    centres = shapely.centroid(np.asarray(geometries, dtype=object))
    axes = [shapely.LineString(d.axis_xyz_m[:, :2]) for d in drives]
    distance = np.column_stack([shapely.distance(centres, axis) for axis in axes])
    nearest = np.argmin(distance, axis=1)
    along = np.empty(n)
    for d, axis in enumerate(axes):
        mine = nearest == d
        along[mine] = shapely.line_locate_point(axis, centres[mine])
    tile = np.floor(along / tile_length_m).astype(np.int64)
    order = np.lexsort((np.arange(n), tile, nearest))
    key = np.column_stack([nearest[order], tile[order]])
    cuts = np.flatnonzero(np.any(np.diff(key, axis=0) != 0, axis=1)) + 1
    groups = []
    for rows in np.split(order, cuts):
        groups.extend(rows[a:a + max_assets] for a in range(0, len(rows), max_assets))
    return groups


def gather_rows(parts: list, rows: list[np.ndarray], n: int, skip: tuple[str, ...] = ()):
    """One result of `n` rows from the results of tasks (dataclasses of one type), each over its own `rows`.

    A field that holds one value per row (an array whose first axis, a tuple or a dict of arrays whose length, is
    the task's row count) is put back at the rows; any other field (options, the sample count) is the same in every
    task and is taken from the first. Fields in `skip` are left to the caller."""
    first = parts[0]
    changes = {}
    for f in dataclasses.fields(first):
        if f.name in skip:
            continue
        values = [getattr(p, f.name) for p in parts]
        if all(_per_row(v, len(r)) for v, r in zip(values, rows)):
            changes[f.name] = _placed(values, rows, n)
    return dataclasses.replace(first, **changes)


def _per_row(value, count: int) -> bool:
    if isinstance(value, np.ndarray):
        return value.ndim >= 1 and value.shape[0] == count
    if isinstance(value, tuple):
        return len(value) == count
    if isinstance(value, dict):
        return bool(value) and all(isinstance(v, np.ndarray) and v.shape[:1] == (count,) for v in value.values())
    return False


def _placed(values: list, rows: list[np.ndarray], n: int):
    """Per-row values of the tasks placed at their rows of n."""
    first = values[0]
    if isinstance(first, dict):
        return {k: _placed([v[k] for v in values], rows, n) for k in first}
    at = np.concatenate(rows)
    if isinstance(first, tuple):
        out = [None] * n
        for i, v in zip(at, (item for value in values for item in value)):
            out[i] = v
        return tuple(out)
    stacked = np.concatenate(values)
    out = np.empty((n,) + stacked.shape[1:], dtype=stacked.dtype)
    out[at] = stacked
    return out


def gather_building_results(parts: list[BuildingResults], rows: list[np.ndarray], n: int) -> BuildingResults:
    """The building assessment of the whole table from that of its tasks: per-building fields at their rows, the
    walls in building order (as `footprint_walls` gives them) and the parts in wall order, with the indices that
    join them renumbered."""
    merged = gather_rows(parts, rows, n, skip=("walls", "wall_governing_part", "wall_part_count", "parts"))
    wall_offsets = np.cumsum([0] + [len(p.walls) for p in parts])
    part_offsets = np.cumsum([0] + [len(p.parts.wall) for p in parts])
    building = np.concatenate([r[p.walls.building] for p, r in zip(parts, rows)]).astype(np.int64)
    wall_order = np.argsort(building, kind="stable")
    new_wall = np.empty_like(wall_order)
    new_wall[wall_order] = np.arange(len(wall_order))

    def walls_field(name):
        return np.concatenate([getattr(p.walls, name) for p in parts])[wall_order]

    walls = Walls(building=building[wall_order], number=walls_field("number"), part=walls_field("part"),
                  start_xy=walls_field("start_xy"), end_xy=walls_field("end_xy"))
    part_wall = np.concatenate([p.parts.wall + o for p, o in zip(parts, wall_offsets[:-1])]).astype(np.int64)
    part_wall = new_wall[part_wall] if len(part_wall) else part_wall
    part_order = np.argsort(part_wall, kind="stable")
    new_part = np.empty_like(part_order)
    new_part[part_order] = np.arange(len(part_order))
    found = {f.name: np.concatenate([getattr(p.parts, f.name) for p in parts])[part_order]
             for f in dataclasses.fields(PartResults) if f.name != "wall"}
    governing = np.concatenate([np.where(p.wall_governing_part >= 0, p.wall_governing_part + o, -1)
                                for p, o in zip(parts, part_offsets[:-1])]).astype(np.int64)
    governing = np.where(governing >= 0, new_part[np.maximum(governing, 0)] if len(new_part) else -1, -1)
    return dataclasses.replace(
        merged, walls=walls, parts=PartResults(wall=part_wall[part_order], **found),
        wall_governing_part=governing[wall_order].astype(parts[0].wall_governing_part.dtype),
        wall_part_count=np.concatenate([p.wall_part_count for p in parts])[wall_order])
