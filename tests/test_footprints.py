"""Reading building footprints (GeoPackage, GeoJSON, Shapefile) and cutting them into walls."""
import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import MultiPolygon, Point, Polygon, box

from settle.errors import InputError
from settle.inputs.footprints import BuildingDefaults, buildings_from_table, footprint_walls, read_buildings

CRS = "EPSG:25832"
DEFAULTS = BuildingDefaults(default_height_m=6.0, default_foundation_depth_m=0.5, default_structure="masonry")


def write(tmp_path, rows, name="b.gpkg", crs=CRS, layer=None, **kw):
    frame = gpd.GeoDataFrame(pd.DataFrame([{k: v for k, v in r.items() if k != "geometry"} for r in rows]),
                             geometry=[r["geometry"] for r in rows], crs=crs)
    path = tmp_path / name
    frame.to_file(path, layer=layer, **kw)
    return path


def table(ids, polys, **columns):
    return buildings_from_table(polys, pd.DataFrame({"id": ids, **columns}), DEFAULTS, "b.gpkg", "[buildings]")


# ------------------------------------------------------------------------------------------------------ reading
def test_geopackage_with_attributes_and_defaults(tmp_path):
    rows = [
        {"id": "A", "height_m": 9.0, "foundation_depth_m": 1.2, "structure": "Frame", "owner": "x",
         "geometry": box(0, 0, 10, 8)},
        {"id": "B", "height_m": None, "foundation_depth_m": None, "structure": None, "owner": "y",
         "geometry": box(20, 0, 30, 8)},
    ]
    b = read_buildings(write(tmp_path, rows), CRS, DEFAULTS, "p.toml [buildings]")
    assert b.ids == ("A", "B")
    np.testing.assert_allclose(b.height_m, [9.0, 6.0])
    np.testing.assert_allclose(b.foundation_depth_m, [1.2, 0.5])
    assert b.structure == ("frame", "masonry")  # the type is matched without regard to letter case
    np.testing.assert_allclose(b.e_over_g, [12.5, 2.6])  # methods.md section 5.1 (from memory there)
    assert b.defaults_used == ("", "height_m, foundation_depth_m, structure")
    assert list(b.attributes["owner"]) == ["x", "y"]
    assert b.skipped == [] and b.repaired == [] and b.notes() == []
    assert shapely.equals(b.polygons[0], box(0, 0, 10, 8))


def test_geojson_in_another_crs_is_reprojected(tmp_path):
    # A footprint drawn in EPSG:25832, written in WGS 84, must come back where it was (to a millimetre).
    poly = box(500000, 5700000, 500012, 5700009)
    to_wgs = pyproj.Transformer.from_crs(CRS, "EPSG:4326", always_xy=True)
    wgs = shapely.transform(poly, lambda xy: np.column_stack(to_wgs.transform(xy[:, 0], xy[:, 1])))
    path = write(tmp_path, [{"id": 7, "geometry": wgs}], name="b.geojson", crs="EPSG:4326", driver="GeoJSON")
    b = read_buildings(path, CRS, DEFAULTS)
    assert b.ids == ("7",)
    got = shapely.get_coordinates(b.polygons[0])
    np.testing.assert_allclose(got, shapely.get_coordinates(poly), atol=1e-3)


@pytest.mark.filterwarnings("ignore:'crs' was not provided")
def test_shapefile_and_layer_without_crs_warns(tmp_path):
    path = write(tmp_path, [{"id": "S1", "geometry": box(0, 0, 5, 5)}], name="b.shp", crs=None)
    b = read_buildings(path, CRS, DEFAULTS)
    assert b.ids == ("S1",)
    assert any("has no CRS" in w and CRS in w for w in b.notes())


def test_not_a_gis_file(tmp_path):
    path = tmp_path / "b.csv"
    path.write_text("id,x,y\n1,2,3\n")
    with pytest.raises(InputError, match=r"b.csv: building footprints must be a GIS polygon layer \(.gpkg, "
                                         r".geojson, .json, .shp\); got a .csv"):
        read_buildings(path, CRS, DEFAULTS)
    with pytest.raises(InputError, match=r"nope.gpkg: cannot be read as a GIS file"):
        read_buildings(tmp_path / "nope.gpkg", CRS, DEFAULTS)


def test_layer_must_be_named_when_there_are_several(tmp_path):
    path = write(tmp_path, [{"id": "A", "geometry": box(0, 0, 5, 5)}], layer="houses")
    write(tmp_path, [{"id": "B", "geometry": box(0, 0, 5, 5)}], layer="sheds")
    with pytest.raises(InputError, match=r"holds 2 layers with geometry .*choose one with \[buildings\] layer"):
        read_buildings(path, CRS, DEFAULTS)
    b = read_buildings(path, CRS, BuildingDefaults(layer="sheds", default_structure="masonry",
                                                   default_height_m=5, default_foundation_depth_m=0))
    assert b.ids == ("B",)


def test_missing_attribute_without_default_names_building_and_field(tmp_path):
    rows = [{"id": "A", "height_m": 5.0, "geometry": box(0, 0, 5, 5)},
            {"id": "B", "height_m": None, "geometry": box(9, 0, 15, 5)}]
    no_height = BuildingDefaults(default_foundation_depth_m=0.0, default_structure="masonry")
    with pytest.raises(InputError, match=r'building "B": height_m is empty and \[buildings\] default_height_m is '
                                         r"not set"):
        read_buildings(write(tmp_path, rows), CRS, no_height)


def test_absent_column_without_default_is_one_error_for_the_layer(tmp_path):
    rows = [{"id": "A", "geometry": box(0, 0, 5, 5)}]
    with pytest.raises(InputError, match=r'no attribute "structure" and no \[buildings\] default_structure; '
                                         r'.*attributes found: "id"'):
        read_buildings(write(tmp_path, rows), CRS, BuildingDefaults(default_height_m=5, default_foundation_depth_m=0))


@pytest.mark.parametrize("field, value, message", [
    ("height_m", -3.0, r'building "A": height_m must be a number more than 0; got -3.0'),
    ("height_m", "tall", r'building "A": height_m must be a number more than 0; got "tall"'),
    ("foundation_depth_m", -0.5, r'building "A": foundation_depth_m must be a number at least 0; got -0.5'),
    ("structure", "timber", r'building "A": structure "timber" is not in the E/G table; known types: "masonry", '
                            r'"frame"'),
])
def test_wrong_values_are_errors_even_with_a_default(field, value, message):
    # A default fills a missing value only; it never replaces a wrong one.
    with pytest.raises(InputError, match=message):
        table(["A"], [box(0, 0, 5, 5)], **{field: [value]})


def test_numeric_text_is_read_as_a_number():
    b = table(["A"], [box(0, 0, 5, 5)], height_m=["7.5"])
    assert b.height_m[0] == 7.5


def test_ids_must_exist_and_be_unique():
    with pytest.raises(InputError, match=r'feature 2: id "A" is already used by feature 1'):
        table(["A", "A"], [box(0, 0, 5, 5), box(9, 0, 15, 5)])
    with pytest.raises(InputError, match=r'feature 2: attribute "id" is empty'):
        table(["A", None], [box(0, 0, 5, 5), box(9, 0, 15, 5)])
    with pytest.raises(InputError, match=r'no attribute "ref" \(\[buildings\] id_attribute\).*found: "id"'):
        buildings_from_table([box(0, 0, 1, 1)], pd.DataFrame({"id": ["A"]}),
                             BuildingDefaults(id_attribute="ref", default_height_m=1, default_structure="masonry",
                                              default_foundation_depth_m=0))


def test_whole_float_ids_lose_the_decimal_point():
    assert table([12.0, 13.5], [box(0, 0, 5, 5), box(9, 0, 15, 5)]).ids == ("12", "13.5")


def test_configured_attribute_names_and_own_e_over_g_table():
    d = BuildingDefaults(id_attribute="TOID", height_attribute="RelH", structure_attribute="kind",
                         default_foundation_depth_m=0.0, e_over_g={"masonry": 2.6, "steel": 10.0})
    frame = pd.DataFrame({"TOID": ["t1"], "RelH": [11.0], "kind": ["steel"]})
    b = buildings_from_table([box(0, 0, 5, 5)], frame, d)
    assert (b.ids, b.height_m[0], b.structure, b.e_over_g[0]) == (("t1",), 11.0, ("steel",), 10.0)


def test_default_structure_must_be_in_the_table():
    with pytest.raises(InputError, match=r'\[buildings\] default_structure must be one of .*got "brick"'):
        buildings_from_table([box(0, 0, 5, 5)], pd.DataFrame({"id": ["A"]}),
                             BuildingDefaults(default_structure="brick", default_height_m=1,
                                              default_foundation_depth_m=0))


def test_invalid_geometries_are_repaired_or_skipped_and_counted():
    bow = Polygon([(0, 0), (2, 2), (2, 0), (0, 2)])  # self-intersecting: two triangles after repair
    flat = Polygon([(0, 0), (1, 1), (2, 2), (0, 0)])  # no area at all
    b = table(["ok", "bow", "empty", "flat", "line"],
              [box(0, 0, 5, 5), bow, Polygon(), flat, shapely.LineString([(0, 0), (1, 1)])])
    assert b.ids == ("ok", "bow")
    assert [name for name, _ in b.skipped] == ['building "empty"', 'building "flat"', 'building "line"']
    assert "no geometry" in b.skipped[0][1] and "not a polygon" in b.skipped[2][1]
    assert b.repaired[0][0] == 'building "bow"' and "Self-intersection" in b.repaired[0][1]
    assert b.polygons[1].is_valid and b.polygons[1].area == pytest.approx(2.0)
    notes = " ".join(b.notes())
    assert "3 footprint(s) skipped" in notes and "1 footprint(s) repaired" in notes
    assert list(b.attributes["id"]) == ["ok", "bow"]


def test_a_layer_of_points_is_an_error():
    with pytest.raises(InputError, match=r"none of the 2 features is a usable polygon footprint; geometry types "
                                         r"found: Point"):
        table(["a", "b"], [Point(0, 0), Point(1, 1)])


def test_z_is_dropped_and_multipolygons_stay_one_building():
    two = MultiPolygon([box(0, 0, 4, 4), box(10, 0, 14, 4)])
    cube = Polygon([(0, 0, 5), (4, 0, 5), (4, 4, 5), (0, 4, 5)])
    b = table(["two", "z"], [two, cube])
    assert len(b) == 2 and not b.polygons[1].has_z
    w = footprint_walls(b.polygons)
    assert list(w.building) == [0] * 8 + [1] * 4
    assert list(w.part[:8]) == [1] * 4 + [2] * 4
    assert list(w.number[:8]) == list(range(1, 9))


def test_modification_factors_are_read_when_given():
    b = table(["A", "B"], [box(0, 0, 5, 5), box(9, 0, 15, 5)], m_dr_sag=[0.4, None])
    np.testing.assert_allclose(b.modification["m_dr_sag"], [0.4, np.nan])
    assert np.isnan(b.modification["m_eps_ht"]).all()
    with pytest.raises(InputError, match=r'building "A": m_dr_hog must be a number at least 0; got -1'):
        table(["A"], [box(0, 0, 5, 5)], m_dr_hog=[-1])


# -------------------------------------------------------------------------------------------------------- walls
def wall_set(walls, k=0):
    """Walls of building k as a set of unordered end-point pairs, rounded to a micrometre."""
    sel = walls.building == k
    out = set()
    for a, b in zip(np.round(walls.start_xy[sel], 6), np.round(walls.end_xy[sel], 6)):
        out.add(frozenset([tuple(a), tuple(b)]))
    return out


def test_collinear_vertices_merge_into_one_wall():
    # A terrace house drawn with the neighbours' party-wall nodes on its front and back: still 4 walls.
    poly = Polygon([(0, 0), (3, 0), (7, 0), (10, 0), (10, 6), (4, 6), (0, 6)])
    w = footprint_walls([poly])
    assert len(w) == 4
    assert sorted(np.round(w.length_m, 9)) == [6, 6, 10, 10]


def test_l_shape_and_courtyard():
    ell = Polygon([(0, 0), (10, 0), (10, 4), (4, 4), (4, 10), (0, 10)])
    court = box(0, 0, 20, 20).difference(box(5, 5, 15, 15))
    w = footprint_walls([ell, court])
    assert np.sum(w.building == 0) == 6 and np.sum(w.building == 1) == 8
    assert w.length_m[w.building == 1].sum() == pytest.approx(80 + 40)


def test_slight_kink_merges_but_a_bend_away_from_the_chord_does_not():
    # 1 degree kink at the middle of a 20 m facade: 0.087 m off the chord, within the 0.1 m tolerance: one wall.
    kink = np.tan(np.radians(1.0)) * 10 / 2
    slight = Polygon([(0, 0), (10, -kink), (20, 0), (20, 8), (0, 8)])
    # Two 1.5 degree turns 10 m apart on a 30 m facade: the middle vertices lie 0.26 m off the chord.
    off = 10 * np.tan(np.radians(1.5))
    bent = Polygon([(0, 0), (10, -off), (20, -off), (30, 0), (30, 8), (0, 8)])
    w = footprint_walls([slight, bent])
    assert np.sum(w.building == 0) == 4
    assert np.sum(w.building == 1) == 6


def test_a_finely_drawn_circle_keeps_its_edges():
    # Every turn (1 degree) is below the tolerance: fewer than three corners, so every edge is a wall.
    a = np.radians(np.arange(0, 360, 1.0))
    w = footprint_walls([Polygon(np.column_stack([10 * np.cos(a), 10 * np.sin(a)]))])
    assert len(w) == 360


@settings(max_examples=25, deadline=None)
@given(start=st.integers(0, 5), reverse=st.booleans(), dx=st.floats(-1e5, 1e5), dy=st.floats(-1e5, 1e5))
def test_walls_do_not_depend_on_vertex_order(start, reverse, dx, dy):
    # Identity: the same shape gives the same walls, numbers and directions, however its ring is written.
    ring = np.array([(0, 0), (4, 0), (10, 0), (10, 4), (4, 9), (0, 9)], dtype=float) + [dx, dy]
    ring2 = np.roll(ring, -start, axis=0)
    if reverse:
        ring2 = ring2[::-1]
    a, b = footprint_walls([Polygon(ring)]), footprint_walls([Polygon(ring2)])
    np.testing.assert_array_equal(a.number, b.number)
    np.testing.assert_allclose(a.start_xy, b.start_xy)
    np.testing.assert_allclose(a.end_xy, b.end_xy)
    assert len(a) == 5
