"""Settlement bands and contour lines made readable for the figures (never for the GeoPackage layers).

The `settlement_bands` layer follows the grid exactly, so a level the settlement only just reaches comes out as a
string of specks: on the demo the settlement along the water main ripples by a few tenths of a millimetre about
10 mm (a period of about 5 m, the length of the engine's tunnel elements there), and the 10 mm level is 15 pieces,
14 of them under 15 m2. Drawn as they are, they read as noise. For a figure each level is redrawn from the region
where the settlement exceeds it:

1. the region above level k is the union of bands k and up (so the levels stay nested: band k lies inside
   level k's region and outside level k + 1's);
2. the region is closed over `CLOSING_RADIUS_CELLS` grid spacings (buffered out, then back in): gaps and notches
   narrower than twice that are filled and outlines are rounded in their hollows; closing only adds ground, never
   removes it;
3. holes smaller than `MIN_ISLAND_CELLS` grid cells are filled (this also removes the zero-area slivers left
   where tiles were merged) and islands smaller than that are dropped, except the largest island of each level,
   so that a level the ground reaches is never drawn as absent (the peak of a trough is often one small island);
4. band k is drawn as region k less region k + 1, and the contour line at level k as the outline of region k, so
   the lines and the bands always agree.

This is our choice, for reading the figure; the numbers are in the layers. What it does to the drawn area: steps
2 and 3 add the filled gaps, notches and small holes; step 3 takes away the dropped islands, where the ground does
exceed the level: the figure states "islands under N m² not drawn" in its legend, so nobody reads a missing island as
ground below the level. Seen on the demo (1 m grid, so 25 m2 and a 2 m radius): the 1, 2 and 5 mm regions grow by
4.6, 0.05 and 0 m2 (under 0.1 %); the 10 mm level goes from 15 pieces (106.3 m2) to 2 shapes (110.6 m2), the
closing joining 11 specks into a strip along the drive and 2 islands of 0.6 m2 in all being dropped; the 15 mm
level, one island of 16 m2, is kept as the largest of its level. The largest settlement is reported by the run,
not read off the bands.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely
from shapely import MultiLineString, MultiPolygon, Polygon

#: Islands and holes smaller than this many grid cells are not drawn (our choice: 25 cells of 1 m, a 5 m square, is
#: about 2 mm square on the A4 plan of the 430 m demo site, too small to read as a shape). [-]
MIN_ISLAND_CELLS = 25
#: Each level's region is closed over this many grid spacings (our choice: merges pieces less than 4 cells apart,
#: smooths the hollows of an outline, and adds no ground to a convex shape). [-]
CLOSING_RADIUS_CELLS = 2.0
#: Segments per quarter circle in the buffers of the closing. [-]
_QUAD_SEGMENTS = 8


def min_island_area_m2(spacing_m: float) -> float:
    """The smallest island or hole drawn: `MIN_ISLAND_CELLS` cells of the grid. [m2]

    Parameters
    ----------
    spacing_m : float  The grid spacing of the run. [m]
    """
    return float(MIN_ISLAND_CELLS) * float(spacing_m) ** 2


def closing_radius_m(spacing_m: float) -> float:
    """The radius each level's region is closed over: `CLOSING_RADIUS_CELLS` grid spacings. [m]"""
    return float(CLOSING_RADIUS_CELLS) * float(spacing_m)


def island_note(spacing_m: float) -> str:
    """The words a figure shows about what the smoothing left out, e.g. "islands under 25 m² not drawn"."""
    return f"islands under {min_island_area_m2(spacing_m):g} m² not drawn"


@dataclass
class Cleaned:
    """A region after `clean_region`: what is drawn and what was left out."""

    region: MultiPolygon  # what is drawn (empty when nothing is left)
    dropped: int  # islands dropped
    dropped_area_m2: float  # their area [m2]
    filled_area_m2: float  # ground added by the closing and the holes filled [m2]


def clean_region(region, radius_m: float, min_area_m2: float, keep_largest: bool = True) -> Cleaned:
    """Close a region over a radius, fill its holes and drop its islands smaller than an area.

    Parameters
    ----------
    region : shapely geometry  Polygons (any mix; empty allowed). [m]
    radius_m : float           Closing radius: buffer out, then in, by it; 0 for no closing. [m]
    min_area_m2 : float        Holes and islands under this area are filled and dropped. [m2]
    keep_largest : bool        Keep the largest island even when it is small, so a level the ground reaches is
                               never drawn as absent (the peak of the trough is often one small island).

    Returns
    -------
    Cleaned  The region drawn (a MultiPolygon), the islands dropped and their area, and the area added. [m2]
    """
    region = shapely.make_valid(region) if not region.is_valid else region
    polys = [g for g in shapely.get_parts(region) if isinstance(g, Polygon) and not g.is_empty]
    if not polys:
        return Cleaned(MultiPolygon(), 0, 0.0, 0.0)
    start = shapely.union_all(polys)
    closed = start
    if radius_m > 0.0:
        closed = start.buffer(radius_m, quad_segs=_QUAD_SEGMENTS).buffer(-radius_m, quad_segs=_QUAD_SEGMENTS)
        closed = shapely.union(closed, start)  # the buffers' polygonal arcs may cut a hair off: closing only adds
    parts = [p for p in shapely.get_parts(closed) if isinstance(p, Polygon) and not p.is_empty]
    largest = max(range(len(parts)), key=lambda k: parts[k].area) if parts and keep_largest else -1
    kept, dropped, dropped_area = [], 0, 0.0
    for k, part in enumerate(parts):
        holes = [h for h in part.interiors if Polygon(h).area >= min_area_m2]
        whole = Polygon(part.exterior, holes)
        if whole.area < min_area_m2 and k != largest:
            dropped += 1
            dropped_area += float(part.area)
        else:
            kept.append(whole)
    drawn = MultiPolygon(kept) if kept else MultiPolygon()
    added = float(drawn.area) + dropped_area - float(start.area)
    return Cleaned(drawn, dropped, dropped_area, max(added, 0.0))


def drop_small_rings(lines, min_area_m2: float):
    """A contour's parts without the closed rings that enclose less than an area (open parts are kept).

    Parameters
    ----------
    lines : LineString or MultiLineString  A contour line. [m]
    min_area_m2 : float                    Closed rings enclosing less than this are dropped. [m2]

    Returns
    -------
    (MultiLineString, int)  The parts kept, and how many rings were dropped.
    """
    parts = [g for g in shapely.get_parts(lines) if g.length > 0.0]
    keep = [g for g in parts if not (g.is_closed and len(g.coords) >= 4 and Polygon(g.coords).area < min_area_m2)]
    return MultiLineString(keep), len(parts) - len(keep)


@dataclass
class FigureLevels:
    """Bands and contour lines for a figure (see the module docstring), from the `settlement_bands` layer."""

    band: list[int]  # the band number of each row (the layer's `band`)
    lower_mm: list[float]  # [mm]
    bands: list[MultiPolygon]  # band k: level k's region less level k + 1's [m]
    lines: list[MultiLineString]  # the outline of level k's region [m]
    dropped: dict = field(default_factory=dict)  # level [mm] -> islands dropped
    dropped_area_m2: dict = field(default_factory=dict)  # level [mm] -> their area [m2]
    filled_area_m2: dict = field(default_factory=dict)  # level [mm] -> ground added by the closing [m2]
    min_area_m2: float = 0.0  # the island area used [m2]


def figure_levels(band: np.ndarray, lower_mm: np.ndarray, geometry, spacing_m: float) -> FigureLevels:
    """Smoothed bands and their contour lines, for drawing.

    Parameters
    ----------
    band : array_like of int     The `band` field of the settlement_bands layer (k: from level k up).
    lower_mm : array_like        The `lower_mm` field: level k. [mm]
    geometry : array_like        The bands' polygons. [m]
    spacing_m : float            The grid spacing: sets the closing radius and the island area. [m]

    Returns
    -------
    FigureLevels  One entry per band present that keeps some ground, lowest first.
    """
    band = np.asarray(band, dtype=np.int64)
    lower = np.asarray(lower_mm, dtype=float)
    geoms = np.asarray(geometry, dtype=object)
    order = np.argsort(band, kind="stable")
    band, lower, geoms = band[order], lower[order], geoms[order]
    radius, min_area = closing_radius_m(spacing_m), min_island_area_m2(spacing_m)
    out = FigureLevels([], [], [], [], min_area_m2=min_area)
    regions = []
    for k in range(len(band)):
        cleaned = clean_region(shapely.union_all(geoms[k:]), radius, min_area)
        regions.append(cleaned.region)
        level = float(lower[k])
        out.dropped[level] = cleaned.dropped
        out.dropped_area_m2[level] = cleaned.dropped_area_m2
        out.filled_area_m2[level] = cleaned.filled_area_m2
    # Each region is cleaned on its own; intersecting with the one below keeps the levels nested (a region kept
    # inside an island dropped below would draw a band with no band around it).
    for k in range(1, len(regions)):
        regions[k] = _polygons(shapely.intersection(regions[k], regions[k - 1]))
    for k in range(len(band)):
        above = regions[k + 1] if k + 1 < len(regions) else MultiPolygon()
        drawn = _polygons(shapely.difference(regions[k], above))
        if drawn.is_empty:
            continue
        out.band.append(int(band[k]))
        out.lower_mm.append(float(lower[k]))
        out.bands.append(drawn)
        out.lines.append(_outline(regions[k]))
    return out


def _polygons(geom) -> MultiPolygon:
    """The polygons of a geometry (an overlay may also give lines or points where outlines touch)."""
    polys = [g for g in shapely.get_parts(geom) if isinstance(g, Polygon) and g.area > 0.0]
    return MultiPolygon(polys) if polys else MultiPolygon()


def _outline(region: MultiPolygon) -> MultiLineString:
    """The rings of a region (exteriors and holes) as lines."""
    rings = [r for p in shapely.get_parts(region) for r in (p.exterior, *p.interiors)]
    return MultiLineString([np.asarray(r.coords) for r in rings]) if rings else MultiLineString()
