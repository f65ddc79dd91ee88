"""Tests of gis_out.contours: settlement bands and lines from sparse tiles, with no seams between tiles."""
from __future__ import annotations

import contourpy
import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely import MultiLineString, MultiPolygon

from gis_out.contours import settlement_bands, settlement_lines, snap_size_m
from settle.errors import InputError
from settle.engine.movements import SettlementTiles

ORIGIN = (530_000.0, 180_000.0)  # British National Grid magnitudes, to exercise float precision far from 0


def tiles_from(field, spacing_m, size, rows, cols, precision_mm=1e-3, origin=ORIGIN):
    """SettlementTiles sampled from field(x, y) [mm], keeping only tiles with a node at or above `precision_mm`."""
    tiles = {}
    for tr in rows:
        for tc in cols:
            x = origin[0] + np.arange(tc * size, tc * size + size) * spacing_m
            y = origin[1] + np.arange(tr * size, tr * size + size) * spacing_m
            xx, yy = np.meshgrid(x, y)  # row index first: rows are y
            z = field(xx, yy)
            z[z < precision_mm] = 0.0  # as the engine: below the run's precision is zero
            if z.any():
                tiles[(tr, tc)] = z
    return SettlementTiles(spacing_m, origin[0], origin[1], size, tiles)


def whole_grid_pieces(tiles, lo, hi=None):
    """Contour the tiles assembled into one array with a zero border: the reference with no tiling at all.

    Returns polygons for the band (lo, hi], or lines at level lo when hi is None.
    """
    n = tiles.size
    keys = np.array(list(tiles.settlement_mm))
    r0, c0 = keys.min(axis=0) - 1
    r1, c1 = keys.max(axis=0) + 2
    z = np.zeros(((r1 - r0) * n, (c1 - c0) * n))
    for (tr, tc), t in tiles.settlement_mm.items():
        z[(tr - r0) * n:(tr - r0 + 1) * n, (tc - c0) * n:(tc - c0 + 1) * n] = t
    x = tiles.origin_x_m + np.arange(c0 * n, c1 * n) * tiles.spacing_m
    y = tiles.origin_y_m + np.arange(r0 * n, r1 * n) * tiles.spacing_m
    cg = contourpy.contour_generator(x, y, z, line_type="Separate", fill_type="OuterOffset")
    if hi is None:
        return [shapely.LineString(line) for line in cg.lines(lo)]
    pts, offs = cg.filled(lo, hi)
    return [shapely.Polygon(p[o[0]:o[1]], [p[a:b] for a, b in zip(o[1:-1], o[2:])]) for p, o in zip(pts, offs)]


# ---------------------------------------------------------------------------------------------------------------
# An axisymmetric Gaussian bowl S(r) = Smax exp(-r^2 / 2 i^2) spanning 5 x 5 tiles of 16 x 16 nodes.
# The ground with S > s is the disc r < r_s, r_s^2 = 2 i^2 ln(Smax / s), of area A(s) = 2 pi i^2 ln(Smax / s).
# So the band lo < S <= hi is an annulus of area A(lo) - A(hi) = 2 pi i^2 ln(hi / lo), and the open top band above
# lo is the disc of area 2 pi i^2 ln(Smax / lo). (Derived here from the Gaussian; the same identity gives the
# trough volume 2 pi i^2 Smax.)
SMAX_MM, I_M, H_M, SIZE = 30.0, 12.0, 1.0, 16
CENTRE = (ORIGIN[0] + 64.37, ORIGIN[1] + 64.61)  # near the common corner of tiles (3, 3), (3, 4), (4, 3), (4, 4)
LEVELS_MM = (1.0, 3.0, 10.0, 20.0)


def bowl(x, y):
    """Gaussian settlement bowl [mm] at x, y [m]."""
    return SMAX_MM * np.exp(-((x - CENTRE[0]) ** 2 + (y - CENTRE[1]) ** 2) / (2.0 * I_M**2))


def bowl_radius(s):
    """Radius of the contour S = s of the bowl: r = i sqrt(2 ln(Smax / s)). [m]"""
    return I_M * np.sqrt(2.0 * np.log(SMAX_MM / s))


def interpolation_tolerance(lo, hi):
    """Estimated bound on |numerical - analytic| band area on a grid of spacing h. [m2]

    Two errors move the computed contour off the circle r = r_s:
    - the crossing on a cell edge comes from linear interpolation, which errs by at most h^2/8 max|f''| (standard
      bound, from memory), i.e. by h^2/8 |S''|/|S'| in position; for the bowl |S''|/|S'| <= max(|r^2/i^2 - 1|, 1)/r
      (radial and tangential curvature of S);
    - across a cell the contour is a chord, up to h sqrt(2) long, whose sagitta on a circle of radius r is at most
      (h sqrt(2))^2 / (8 r) = h^2 / (4 r).
    The area errs by at most 2 pi r times their sum, for each boundary of the band. An estimate, not a proof.
    """
    total = 0.0
    for r in [bowl_radius(lo)] + ([bowl_radius(hi)] if hi < SMAX_MM else []):
        shift = H_M**2 / 8.0 * max(abs(r**2 / I_M**2 - 1.0), 1.0) / r + H_M**2 / (4.0 * r)
        total += 2.0 * np.pi * r * shift
    return total


@pytest.fixture(scope="module")
def bowl_tiles():
    return tiles_from(bowl, H_M, SIZE, range(0, 9), range(0, 9))


def test_bowl_spans_several_tiles(bowl_tiles):
    """The test field is tiled as intended: the 1 mm contour crosses at least 4 x 4 tiles."""
    r = bowl_radius(LEVELS_MM[0])
    cols = {int((CENTRE[0] + dx - ORIGIN[0]) // (H_M * SIZE)) for dx in (-r, r)}
    assert max(cols) - min(cols) + 1 >= 4
    assert len(bowl_tiles.settlement_mm) >= 16


def test_bowl_band_areas_match_annuli(bowl_tiles):
    rows = settlement_bands(bowl_tiles, LEVELS_MM)
    assert [r["band"] for r in rows] == [0, 1, 2, 3]
    top = max(np.max(t) for t in bowl_tiles.settlement_mm.values())
    uppers = list(LEVELS_MM[1:]) + [SMAX_MM]
    for row, lo, hi in zip(rows, LEVELS_MM, uppers):
        expected = 2.0 * np.pi * I_M**2 * np.log(hi / lo)  # annulus (disc for the top band) area, derived above
        assert row["geometry"].area == pytest.approx(expected, abs=interpolation_tolerance(lo, hi))
        assert row["lower_mm"] == lo
        assert row["upper_mm"] == (hi if hi < SMAX_MM else top)  # the top band ends at the largest settlement
    assert rows[-1]["upper_mm"] < SMAX_MM  # the peak falls between nodes


def test_bowl_bands_are_single_valid_polygons_without_seams(bowl_tiles):
    rows = settlement_bands(bowl_tiles, LEVELS_MM)
    for row in rows:
        geom = row["geometry"]
        assert isinstance(geom, MultiPolygon) and geom.is_valid
        assert len(geom.geoms) == 1, f"band {row['band']} split into {len(geom.geoms)} pieces (a seam)"
    assert [len(r["geometry"].geoms[0].interiors) for r in rows] == [1, 1, 1, 0]  # annuli keep their hole
    # Bands tile the ground above the lowest level: no overlap, no gap.
    union = shapely.unary_union([r["geometry"] for r in rows])
    assert union.area == pytest.approx(sum(r["geometry"].area for r in rows), rel=1e-12)
    assert len(union.geoms if hasattr(union, "geoms") else [union]) == 1


def test_bowl_lines_are_closed_rings_at_the_analytic_radius(bowl_tiles):
    rows = settlement_lines(bowl_tiles, LEVELS_MM)
    assert [r["level_mm"] for r in rows] == list(LEVELS_MM)
    for row in rows:
        geom = row["geometry"]
        assert isinstance(geom, MultiLineString)
        assert len(geom.geoms) == 1, f"level {row['level_mm']} split into {len(geom.geoms)} pieces"
        ring = geom.geoms[0]
        assert ring.is_closed and ring.is_simple
        xy = np.asarray(ring.coords)
        r = np.hypot(xy[:, 0] - CENTRE[0], xy[:, 1] - CENTRE[1])
        # Within one grid spacing of r = i sqrt(2 ln(Smax / level)).
        assert np.all(np.abs(r - bowl_radius(row["level_mm"])) < H_M)


def test_lines_are_the_band_boundaries(bowl_tiles):
    """The 3 mm line is the outer boundary of band 1 and the inner boundary of band 0."""
    bands = settlement_bands(bowl_tiles, LEVELS_MM)
    line = settlement_lines(bowl_tiles, LEVELS_MM)[1]["geometry"]
    outer = bands[1]["geometry"].geoms[0].exterior
    hole = bands[0]["geometry"].geoms[0].interiors[0]
    assert line.hausdorff_distance(outer) <= snap_size_m(bowl_tiles)  # equal up to the snap-rounding grid
    assert line.hausdorff_distance(hole) <= snap_size_m(bowl_tiles)


# ---------------------------------------------------------------------------------------------------------------
# Tiling changes nothing: the same field contoured as one array (with a zero border) gives the same geometry.
@st.composite
def bumpy_fields(draw):
    """Sum of 1-4 Gaussian bumps on a 96 x 80 m area, with random levels."""
    bumps = draw(st.lists(st.tuples(st.floats(10, 86), st.floats(10, 70), st.floats(3, 14), st.floats(1, 25)),
                          min_size=1, max_size=4))
    levels = sorted(draw(st.sets(st.floats(0.3, 20).map(lambda v: round(v, 2)), min_size=1, max_size=4)))
    spacing = draw(st.sampled_from([0.5, 0.7, 1.0]))
    size = draw(st.sampled_from([8, 16]))

    def field(x, y):
        z = np.zeros_like(x)
        for cx, cy, s, a in bumps:
            z += a * np.exp(-((x - ORIGIN[0] - cx * spacing) ** 2 + (y - ORIGIN[1] - cy * spacing) ** 2)
                            / (2.0 * (s * spacing) ** 2))
        return z

    tiles = tiles_from(field, spacing, size, range(-1, 96 // size + 2), range(-1, 96 // size + 2))
    return tiles, levels


@settings(max_examples=25, deadline=None)
@given(bumpy_fields())
def test_tiled_equals_untiled(case):
    tiles, levels = case
    top = max(np.max(t) for t in tiles.settlement_mm.values())
    bands = {r["band"]: r for r in settlement_bands(tiles, levels)}
    bounds = list(zip(levels, list(levels[1:]) + [top]))
    for k, (lo, hi) in enumerate(bounds):
        ref = shapely.unary_union(whole_grid_pieces(tiles, lo, hi)) if lo < top else shapely.Polygon()
        if ref.area == 0.0:
            assert k not in bands  # empty bands are skipped
            continue
        got = bands[k]["geometry"]
        assert got.is_valid
        # Snap-rounding moves vertices by at most g/2 in x and y: area changes by at most perimeter x g.
        assert got.symmetric_difference(ref).area <= ref.length * snap_size_m(tiles)
        ref_parts = shapely.get_parts(ref)
        assert len(got.geoms) == len(ref_parts)  # no seam splits a polygon
        assert sum(len(p.interiors) for p in got.geoms) == sum(len(p.interiors) for p in ref_parts)
    lines = {r["level_mm"]: r["geometry"] for r in settlement_lines(tiles, levels)}
    for level in levels:
        ref = shapely.line_merge(shapely.MultiLineString(whole_grid_pieces(tiles, level)))
        ref_parts = shapely.get_parts(ref)
        if len(ref_parts) == 0:
            assert level not in lines
            continue
        assert len(lines[level].geoms) == len(ref_parts)
        vertices = shapely.get_num_coordinates(ref)
        assert lines[level].length == pytest.approx(ref.length, abs=2.0 * vertices * snap_size_m(tiles))
        assert lines[level].hausdorff_distance(ref) <= snap_size_m(tiles)


def test_lone_tile_closes_on_the_zeros_around_it():
    """One tile of uniform 10 mm, no neighbours: bands close through the zero nodes on all four sides.

    Hand calculation with linear interpolation between the 10 mm nodes and the 0 mm nodes one spacing h = 1 m
    outside: S = s at 1 - s/10 of a spacing outside the tile (0.9 m for 1 mm, 0.5 m for 5 mm). In the four corner
    cells only the tile's corner node is wet, so each corner is cut by a triangle of legs (1 - s/10)^2 / 2 in
    area. Tile span 15 m between node centres:
      A(>5) = (15 + 2 x 0.5)^2 - 4 x 0.5^2 / 2 = 256 - 0.5 = 255.5 m2
      A(>1) = (15 + 2 x 0.9)^2 - 4 x 0.9^2 / 2 = 282.24 - 1.62 = 280.62 m2
    """
    tiles = SettlementTiles(1.0, 0.0, 0.0, 16, {(0, 0): np.full((16, 16), 10.0)})
    rows = settlement_bands(tiles, (1.0, 5.0))
    assert [r["band"] for r in rows] == [0, 1]
    assert rows[1]["geometry"].area == pytest.approx(255.5, abs=1e-9)
    assert rows[0]["geometry"].area == pytest.approx(280.62 - 255.5, abs=1e-9)
    assert rows[0]["geometry"].bounds == pytest.approx((-0.9, -0.9, 15.9, 15.9))
    assert rows[1]["upper_mm"] == 10.0
    lines = settlement_lines(tiles, (1.0, 5.0))
    assert all(len(r["geometry"].geoms) == 1 and r["geometry"].geoms[0].is_closed for r in lines)


def test_far_apart_tiles_need_no_bounding_box():
    """Two tiles 16 km apart give two separate discs without allocating the grid between them."""
    z = 5.0 * np.exp(-((np.arange(16)[:, None] - 7.5) ** 2 + (np.arange(16)[None, :] - 7.5) ** 2) / 8.0)
    tiles = SettlementTiles(1.0, 0.0, 0.0, 16, {(0, 0): z, (1000, 1000): z.copy()})
    (row,) = settlement_bands(tiles, (1.0,))
    assert len(row["geometry"].geoms) == 2
    a, b = row["geometry"].geoms
    assert a.area == pytest.approx(b.area, rel=1e-9)  # the same field in both: identical discs


def test_band_numbers_follow_levels_and_upper_is_never_null():
    """Levels above the largest settlement: bands keep their level index; the partial band ends at its level."""
    tiles = SettlementTiles(1.0, 0.0, 0.0, 16, {(0, 0): np.full((16, 16), 10.0)})
    rows = settlement_bands(tiles, (1.0, 5.0, 50.0, 80.0))
    assert [(r["band"], r["lower_mm"], r["upper_mm"]) for r in rows] == [(0, 1.0, 5.0), (1, 5.0, 50.0)]
    assert settlement_bands(tiles, (20.0, 30.0)) == []
    assert [r["level_mm"] for r in settlement_lines(tiles, (1.0, 5.0, 50.0))] == [1.0, 5.0]


def test_no_tiles_give_no_rows():
    tiles = SettlementTiles(1.0, 0.0, 0.0, 16, {})
    assert settlement_bands(tiles, (1.0, 5.0)) == []
    assert settlement_lines(tiles, (1.0, 5.0)) == []


@pytest.mark.parametrize("levels, match", [
    ((), "at least one contour level"),
    ((1.0, 1.0), "strictly increasing"),
    ((5.0, 1.0), "strictly increasing"),
    ((0.0, 1.0), "finite positive"),
    ((1.0, float("nan")), "finite positive"),
    (("1", "x"), "must be numbers"),
])
def test_bad_levels_name_the_key(levels, match):
    tiles = SettlementTiles(1.0, 0.0, 0.0, 16, {})
    with pytest.raises(InputError, match=rf"^project.toml \[output\] contour_levels_mm: .*{match}"):
        settlement_bands(tiles, levels, where="project.toml [output] contour_levels_mm")
    with pytest.raises(InputError, match=match):
        settlement_lines(tiles, levels)


def test_malformed_tiles_are_a_bug_not_a_user_error():
    tiles = SettlementTiles(1.0, 0.0, 0.0, 16, {(0, 0): np.zeros((8, 8))})
    with pytest.raises(ValueError, match=r"tile \(0, 0\) has shape \(8, 8\); expected \(16, 16\)"):
        settlement_bands(tiles, (1.0,))
