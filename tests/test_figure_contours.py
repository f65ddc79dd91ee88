"""Bands and contours smoothed for the figures: specks dropped, the main shapes kept, the levels nested."""
import numpy as np
import pytest
import shapely
from shapely import LineString, MultiLineString, Point, Polygon

from gis_out import figure_contours as fc

SPACING_M = 1.0
# The buffers of the closing draw arcs as polygons of 8 segments a quarter circle: a full circle drawn so has
# 32 sin(2 pi / 32) / (2 pi) = 99.36 % of the circle's area, so 1 % is the area tolerance of a kept shape.
AREA_TOLERANCE = 0.01


def speckled_band():
    """A round band of radius 20 m (the main shape) with 12 square specks of 1 m2 around it, 5 to 9 m away."""
    main = Point(0.0, 0.0).buffer(20.0, quad_segs=64)
    specks = [shapely.box(x, y, x + 1.0, y + 1.0)
              for x, y in [(26 + 4 * (k % 2), -30 + 5 * k) for k in range(12)]]
    return main, specks


def test_specks_are_dropped_and_the_main_shape_kept():
    main, specks = speckled_band()
    cleaned = fc.clean_region(shapely.union_all([main, *specks]), fc.closing_radius_m(SPACING_M),
                              fc.min_island_area_m2(SPACING_M))
    parts = shapely.get_parts(cleaned.region)
    assert len(parts) == 1 and parts[0].contains(Point(0.0, 0.0))
    assert cleaned.dropped == len(specks)
    assert cleaned.dropped_area_m2 == pytest.approx(len(specks) * 1.0, rel=1e-6)
    # The closing adds no ground to a convex shape, up to the buffers' chords.
    assert abs(parts[0].area - main.area) / main.area < AREA_TOLERANCE


def test_small_holes_are_filled_and_large_ones_kept():
    outer = shapely.box(0.0, 0.0, 60.0, 60.0)
    small = shapely.box(10.0, 10.0, 12.0, 12.0)  # 4 m2, under 25 cells of 1 m2
    large = shapely.box(30.0, 30.0, 45.0, 45.0)  # 225 m2, wider than the closing (4 m) can fill
    cleaned = fc.clean_region(outer.difference(small).difference(large), fc.closing_radius_m(SPACING_M),
                              fc.min_island_area_m2(SPACING_M))
    (part,) = shapely.get_parts(cleaned.region)
    assert len(part.interiors) == 1
    # The closing rounds the hole's four corners (hollows of the region) with arcs of its radius r: each takes
    # r^2 (1 - pi/4) off the hole (a square corner less a quarter disc); the arcs' chords take 0.02 m2 more each.
    r = fc.closing_radius_m(SPACING_M)
    assert Polygon(part.interiors[0]).area == pytest.approx(large.area - 4 * r ** 2 * (1 - np.pi / 4), abs=0.1)
    assert part.contains(Point(11.0, 11.0))


def test_a_level_that_is_one_small_island_is_still_drawn():
    peak = Point(0.0, 0.0).buffer(2.0)  # 12.6 m2: under the island area, but all the ground above its level
    cleaned = fc.clean_region(peak, fc.closing_radius_m(SPACING_M), fc.min_island_area_m2(SPACING_M))
    assert cleaned.dropped == 0 and cleaned.region.area == pytest.approx(peak.area, rel=AREA_TOLERANCE)
    dropped = fc.clean_region(peak, 0.0, fc.min_island_area_m2(SPACING_M), keep_largest=False)
    assert dropped.region.is_empty and dropped.dropped == 1


def test_nearby_pieces_merge_over_the_closing_radius():
    # Two squares 3 m apart (under twice the 2 m radius) become one shape; 5 m apart they stay two.
    a = shapely.box(0.0, 0.0, 10.0, 10.0)
    for gap, pieces in ((3.0, 1), (5.0, 2)):
        b = shapely.box(10.0 + gap, 0.0, 20.0 + gap, 10.0)
        cleaned = fc.clean_region(a.union(b), fc.closing_radius_m(SPACING_M), fc.min_island_area_m2(SPACING_M))
        assert len(shapely.get_parts(cleaned.region)) == pieces


def test_figure_levels_are_nested_and_agree_with_their_lines():
    main, specks = speckled_band()
    inner = Point(0.0, 0.0).buffer(8.0, quad_segs=64)
    ring = main.difference(inner)
    bands = [shapely.union_all([ring, *specks]), inner]  # band 0 (with specks), band 1 inside it
    levels = fc.figure_levels([0, 1], [1.0, 2.0], bands, SPACING_M)
    assert levels.band == [0, 1]
    assert levels.dropped == {1.0: len(specks), 2.0: 0}
    b0, b1 = levels.bands
    assert b0.intersection(b1).area == pytest.approx(0.0, abs=1e-6)
    assert b0.union(b1).area == pytest.approx(main.area, rel=AREA_TOLERANCE)
    # The line at level k is the outline of the ground above it: for level 2 the inner circle.
    assert levels.lines[1].length == pytest.approx(inner.exterior.length, rel=AREA_TOLERANCE)
    assert levels.min_area_m2 == fc.MIN_ISLAND_CELLS * SPACING_M ** 2


def test_small_closed_rings_of_a_contour_are_dropped_and_open_parts_kept():
    big = Point(0.0, 0.0).buffer(10.0).exterior
    small = Point(40.0, 0.0).buffer(1.0).exterior  # 3.1 m2
    open_part = LineString([(50.0, 0.0), (60.0, 5.0)])
    kept, dropped = fc.drop_small_rings(MultiLineString([big, small, open_part]), 25.0)
    assert dropped == 1 and len(kept.geoms) == 2
    assert {round(g.length, 6) for g in kept.geoms} == {round(big.length, 6), round(open_part.length, 6)}


def test_the_island_area_is_a_multiple_of_the_grid_cell():
    for spacing in (0.5, 1.0, 2.0):
        assert fc.min_island_area_m2(spacing) == pytest.approx(fc.MIN_ISLAND_CELLS * spacing ** 2)
    assert fc.island_note(2.0) == f"islands under {fc.MIN_ISLAND_CELLS * 4:g} m² not drawn"
    assert np.isfinite(fc.closing_radius_m(1.0)) and fc.closing_radius_m(1.0) > 0
