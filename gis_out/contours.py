"""Settlement contours from the sparse tiles of a run: filled bands and contour lines.

The grid is never assembled: each tile is contoured on its own, with one extra row and column taken from the
neighbouring tiles, so that the pieces of two neighbouring tiles meet along the shared grid line. Pieces are then
merged across tiles, so a band or a line that crosses tile boundaries comes out as one geometry. Memory stays
proportional to the tiles present.

Conventions
-----------
- Settlement is positive downward, in mm; nodes in no tile are zero (see `settle.results.SettlementTiles`).
- Band `k` holds the ground where `levels_mm[k] < settlement <= levels_mm[k + 1]`; the last band is open above and its
  `upper_mm` is the largest settlement in the tiles. Bands keep their number when a band is empty and skipped, so
  band `k` always starts at `levels_mm[k]`.
- Between grid nodes the settlement is linear along grid lines (contourpy's quad algorithm, `ZInterp.Linear`).
- Merged coordinates are snap-rounded to a millionth of the grid spacing (see `snap_size_m`).
"""
from __future__ import annotations

import contourpy
import numpy as np
import shapely
from shapely import LineString, MultiLineString, MultiPolygon, Polygon

from settle.errors import InputError
from settle.engine.movements import SettlementTiles

# Neighbours whose extended tile reaches into tile (tr, tc): below, left and below-left (row index grows northward).
_REACHING_NEIGHBOURS = ((-1, 0), (0, -1), (-1, -1))


def check_levels(levels_mm, where: str = "contour_levels_mm") -> np.ndarray:
    """Validate contour levels and return them as a float64 array.

    Parameters
    ----------
    levels_mm : sequence of float  Settlement levels, positive and strictly increasing. [mm]
    where : str                    Where the levels came from (file and key), for the message.

    Returns
    -------
    ndarray  The levels. [mm]

    Raises
    ------
    InputError  When the list is empty, holds a value that is not a finite positive number, or is not increasing.
    """
    try:
        levels = np.asarray(levels_mm, dtype=float).ravel()
    except (TypeError, ValueError):
        raise InputError(f"{where}: contour levels must be numbers in mm; got {levels_mm!r}") from None
    if levels.size == 0:
        raise InputError(f"{where}: give at least one contour level in mm; got an empty list")
    if not np.all(np.isfinite(levels)) or np.any(levels <= 0.0):
        raise InputError(f"{where}: contour levels must be finite positive settlements in mm; got {list(levels_mm)}")
    if np.any(np.diff(levels) <= 0.0):
        raise InputError(f"{where}: contour levels must be strictly increasing; got {list(levels_mm)}")
    return levels


def _check_tiles(tiles: SettlementTiles) -> None:
    """Raise ValueError when the tiles break the SettlementTiles contract (a bug in the engine, not a user mistake)."""
    if not (np.isfinite(tiles.spacing_m) and tiles.spacing_m > 0.0):
        raise ValueError(f"SettlementTiles.spacing_m must be a positive number of metres; got {tiles.spacing_m!r}")
    if int(tiles.size) != tiles.size or tiles.size < 1:
        raise ValueError(f"SettlementTiles.size must be a positive integer; got {tiles.size!r}")
    for key, z in tiles.settlement_mm.items():
        if np.shape(z) != (tiles.size, tiles.size):
            raise ValueError(f"settlement tile {key} has shape {np.shape(z)}; expected ({tiles.size}, {tiles.size})")
        if not np.all(np.isfinite(z)):
            raise ValueError(f"settlement tile {key} holds NaN or infinite settlement")


def max_settlement_mm(tiles: SettlementTiles) -> float:
    """Largest settlement in the tiles (0 when there are none). [mm]"""
    return float(max((np.max(z) for z in tiles.settlement_mm.values()), default=0.0))


def _extended_tile(tiles: SettlementTiles, tr: int, tc: int) -> np.ndarray:
    """Tile (tr, tc) with one more row and column from its north, east and north-east neighbours. [mm]

    Returns an (size + 1, size + 1) array; parts with no tile are zero.
    """
    n = tiles.size
    get = tiles.settlement_mm.get
    z = np.zeros((n + 1, n + 1))
    for (dr, dc), rows, cols in (((0, 0), slice(0, n), slice(0, n)),
                                 ((1, 0), slice(n, n + 1), slice(0, n)),
                                 ((0, 1), slice(0, n), slice(n, n + 1)),
                                 ((1, 1), slice(n, n + 1), slice(n, n + 1))):
        t = get((tr + dr, tc + dc))
        if t is not None:
            z[rows, cols] = np.asarray(t, dtype=float)[: rows.stop - rows.start, : cols.stop - cols.start]
    return z


def _tiles_to_contour(tiles: SettlementTiles) -> list[tuple[int, int]]:
    """Keys of the tiles whose extended area holds data: those present and their south and west neighbours."""
    keys = {(int(tr), int(tc)) for tr, tc in tiles.settlement_mm}
    reach = {(tr + dr, tc + dc) for tr, tc in keys for dr, dc in _REACHING_NEIGHBOURS}
    return sorted(keys | reach)


def _generators(tiles: SettlementTiles, lowest_mm: float):
    """Yield a contour generator for each extended tile that reaches above `lowest_mm`. [mm]"""
    n, h = tiles.size, float(tiles.spacing_m)
    for tr, tc in _tiles_to_contour(tiles):
        z = _extended_tile(tiles, tr, tc)
        if not np.max(z) > lowest_mm:
            continue
        # Coordinates from integer node indices, so that a grid line shared by two tiles has identical coordinates.
        x = tiles.origin_x_m + np.arange(tc * n, tc * n + n + 1) * h
        y = tiles.origin_y_m + np.arange(tr * n, tr * n + n + 1) * h
        yield contourpy.contour_generator(x, y, z, name="serial", line_type=contourpy.LineType.Separate,
                                          fill_type=contourpy.FillType.OuterOffset)


def _polygons(points: list[np.ndarray], offsets: list[np.ndarray]) -> list[Polygon]:
    """Polygons (exterior then holes) from contourpy OuterOffset output."""
    return [Polygon(p[o[0]:o[1]], [p[a:b] for a, b in zip(o[1:-1], o[2:])]) for p, o in zip(points, offsets)]


def snap_size_m(tiles: SettlementTiles) -> float:
    """Grid the merged geometry is snap-rounded to: a millionth of the grid spacing. [m]

    Two tiles compute the same crossing on their shared grid line in different orders, so the two copies can differ
    in the last bits (seen: 3e-11 m at British National Grid coordinates). Snap-rounding while merging makes them
    one vertex, so no sliver or pin-hole is left along tile boundaries. Coordinates move by at most half of this.
    """
    return 1e-6 * float(tiles.spacing_m)


def _merge_polygons(pieces: list[Polygon], grid_m: float) -> MultiPolygon | None:
    """Union of band pieces from all tiles, as one MultiPolygon with holes kept; None when it has no area."""
    pieces_arr = np.empty(len(pieces), dtype=object)
    pieces_arr[:] = pieces
    bad = ~shapely.is_valid(pieces_arr)
    if bad.any():  # degenerate pieces (a level met exactly at a saddle node); repair before the overlay
        pieces_arr[bad] = shapely.make_valid(pieces_arr[bad])
    parts = shapely.get_parts(shapely.unary_union(pieces_arr, grid_size=grid_m))
    parts = [g for g in parts if isinstance(g, Polygon) and g.area > 0.0]
    return MultiPolygon(parts) if parts else None


def _merge_lines(pieces: list[np.ndarray], grid_m: float) -> MultiLineString | None:
    """Contour pieces from all tiles joined end to end (snap-rounded, then shapely.line_merge); None when empty."""
    noded = shapely.unary_union([LineString(p) for p in pieces], grid_size=grid_m)
    merged = shapely.line_merge(noded)
    parts = [g for g in shapely.get_parts(merged) if isinstance(g, LineString) and g.length > 0.0]
    return MultiLineString(parts) if parts else None


def settlement_bands(tiles: SettlementTiles, levels_mm, where: str = "contour_levels_mm") -> list[dict]:
    """Filled settlement bands between consecutive levels, plus an open band above the last level.

    Parameters
    ----------
    tiles : SettlementTiles   Surface settlement on the project grid. [mm]
    levels_mm : sequence      Band boundaries, positive and strictly increasing. [mm]
    where : str               Where the levels came from, for error messages.

    Returns
    -------
    list of dict  One row per non-empty band, lowest first, with keys `band` (int, k = index of its lower level),
                  `lower_mm`, `upper_mm` [mm] and `geometry` (MultiPolygon with holes, merged across tiles).
                  The top band's `upper_mm` is the largest settlement in the tiles.

    Notes
    -----
    Band k holds lower_mm < S <= upper_mm (contourpy's filled-contour convention).
    """
    levels = check_levels(levels_mm, where)
    _check_tiles(tiles)
    top_mm = max_settlement_mm(tiles)
    if top_mm <= levels[0]:
        return []
    bounds = [(lo, hi) for lo, hi in zip(levels[:-1], levels[1:])] + [(levels[-1], top_mm)]
    bounds = [(float(lo), float(hi)) for lo, hi in bounds if lo < top_mm]
    pieces: list[list[Polygon]] = [[] for _ in bounds]
    for cg in _generators(tiles, levels[0]):
        for k, (lo, hi) in enumerate(bounds):
            pieces[k].extend(_polygons(*cg.filled(lo, hi)))
    rows = []
    for k, (lo, hi) in enumerate(bounds):
        geom = _merge_polygons(pieces[k], snap_size_m(tiles)) if pieces[k] else None
        if geom is not None:
            rows.append({"band": k, "lower_mm": lo, "upper_mm": hi, "geometry": geom})
    return rows


def settlement_lines(tiles: SettlementTiles, levels_mm, where: str = "contour_levels_mm") -> list[dict]:
    """Contour lines of settlement, one MultiLineString per level reached.

    Parameters
    ----------
    tiles, levels_mm, where   As for `settlement_bands`; the levels are the contour levels here. [mm]

    Returns
    -------
    list of dict  One row per level that the settlement crosses, lowest first, with keys `level_mm` [mm] and
                  `geometry` (MultiLineString; pieces from neighbouring tiles joined with shapely.line_merge,
                  so a closed contour is one closed ring).
    """
    levels = check_levels(levels_mm, where)
    _check_tiles(tiles)
    pieces: list[list[np.ndarray]] = [[] for _ in levels]
    for cg in _generators(tiles, levels[0]):
        for k, level in enumerate(levels):
            pieces[k].extend(line for line in cg.lines(float(level)) if len(line) >= 2)
    rows = []
    for k, level in enumerate(levels):
        geom = _merge_lines(pieces[k], snap_size_m(tiles)) if pieces[k] else None
        if geom is not None:
            rows.append({"level_mm": float(level), "geometry": geom})
    return rows
