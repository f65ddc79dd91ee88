"""Reading buried utility lines, and the defaults table of allowable values per material."""
import math

import geopandas as gpd
import numpy as np
import pyproj
import pytest
import shapely

from settle.errors import InputError
from settle.inputs.utility_lines import (ALLOWABLE_KEYS, MATERIAL_LIMITS, MATERIALS, UtilityReadOptions, make_utilities,
                                  read_utilities)

CRS = "EPSG:25832"


def write(tmp_path, records, name="pipes.gpkg", crs=CRS, layer="pipes"):
    """A utility file from dicts with a "geometry" key; returns its path."""
    frame = gpd.GeoDataFrame(records, geometry="geometry", crs=crs)
    path = tmp_path / name
    frame.to_file(path, layer=layer) if path.suffix == ".gpkg" else frame.to_file(path)
    return path


def pipe(pid="W1", material="cast_iron", od=300.0, depth=1.0, line=((0, 0), (10, 0)), **extra):
    return {"id": pid, "material": material, "outer_diameter_mm": od, "depth_m": depth,
            "geometry": shapely.LineString(line), **extra}


# ------------------------------------------------------------------------------------------------ defaults table
def test_defaults_table_covers_the_materials_and_claims_no_published_value():
    # methods.md 6.2: "None of the numbers below was confirmed in a published source": every row must say so.
    assert MATERIALS == ("cast_iron", "ductile_iron", "steel", "pe", "pvc", "vitrified_clay", "concrete", "brick")
    for m in MATERIAL_LIMITS.values():
        assert m.status in ("common practice, no source", "from memory", "no values")
        values = [getattr(m, k) for k in ALLOWABLE_KEYS]
        assert all(math.isnan(v) for v in values) == (m.status == "no values")
        assert all(math.isnan(v) or v > 0 for v in values)


@pytest.mark.parametrize("material, key, low, high", [
    # The ranges of methods.md 6.2 (common practice / from memory there); the default is the cautious end.
    ("cast_iron", "allowable_bending_strain_ue", 100, 300),
    ("cast_iron", "allowable_joint_rotation_deg", 1.0, 1.0),
    ("ductile_iron", "allowable_axial_strain_ue", 1000, 1000),
    ("ductile_iron", "allowable_joint_rotation_deg", 1.5, 3.5),
    ("steel", "allowable_axial_strain_ue", 1000, 2000),
    ("pe", "allowable_bending_strain_ue", 10000, 25000),
    ("pvc", "allowable_axial_strain_ue", 5000, 10000),
    ("pvc", "allowable_joint_rotation_deg", 1.0, 2.0),
    # 10 to 80 mm/m joint deflection for clay pipes: atan(0.010) to atan(0.080) in degrees.
    ("vitrified_clay", "allowable_joint_rotation_deg", math.degrees(math.atan(0.010)), math.degrees(math.atan(0.08))),
])
def test_defaults_are_the_cautious_end_of_the_sheet_ranges(material, key, low, high):
    assert getattr(MATERIAL_LIMITS[material], key) == pytest.approx(low, rel=1e-12)
    assert low <= high


def test_no_joint_opening_value_is_made_up():
    # methods.md 6.2 gives no number for joint opening ("a few mm" for lead-run joints is not one).
    assert all(math.isnan(m.allowable_joint_opening_mm) for m in MATERIAL_LIMITS.values())


# ------------------------------------------------------------------------------------------------------ reading
def test_reads_2d_lines_with_depth_attribute_and_overrides(tmp_path):
    path = write(tmp_path, [
        pipe("W1", line=((0, 0), (5, 0), (5, 5)), segment_length_m=3.66, allowable_joint_opening_mm=5.0),
        pipe("G2", "pe", 125.0, 0.9, ((0, 10), (20, 10)), segment_length_m=None, allowable_joint_opening_mm=None),
    ])
    u = read_utilities(path, CRS)
    assert u.ids == ("W1", "G2") and u.materials == ("cast_iron", "pe")
    np.testing.assert_array_equal(u.outer_diameter_mm, [300.0, 125.0])
    np.testing.assert_array_equal(u.depths_m[0], [1.0, 1.0, 1.0])
    assert u.segment_length_m[0] == 3.66 and np.isnan(u.segment_length_m[1])
    np.testing.assert_array_equal(u.jointed, [True, False])
    np.testing.assert_allclose(u.length_m, [10.0, 20.0])
    assert u.allowable_joint_opening_mm[0] == 5.0 and np.isnan(u.allowable_joint_opening_mm[1])
    assert u.allowable_bending_strain_ue[0] == MATERIAL_LIMITS["cast_iron"].allowable_bending_strain_ue
    assert "allowable_joint_opening_mm" in u.limits_source[0] and "cast_iron defaults" in u.limits_source[0]
    assert u.limits_source[1] == "pe defaults (common practice, no source)"
    np.testing.assert_array_equal(u.checks_compression, [False, True])
    np.testing.assert_array_equal(u.bending_reduction_factor, [1.0, 1.0])


def test_reads_3d_lines_whose_z_is_the_axis_level(tmp_path):
    line = shapely.LineString([(0, 0, 8.5), (10, 0, 8.0), (20, 0, 7.0)])
    path = write(tmp_path, [{"id": "S1", "material": "vitrified_clay", "outer_diameter_mm": 225.0,
                             "segment_length_m": 1.5, "geometry": line}], name="sewer.geojson")
    surface = lambda x, y: 10.0 + 0.01 * np.asarray(x)  # noqa: E731  (a gently sloping surface)
    u = read_utilities(path, CRS, UtilityReadOptions(vertical="axis", surface_level=surface))
    np.testing.assert_allclose(u.depths_m[0], [1.5, 2.1, 3.2])  # surface minus Z at each vertex


def test_layer_in_another_crs_is_transformed(tmp_path):
    to_wgs = pyproj.Transformer.from_crs(CRS, "EPSG:4326", always_xy=True)
    lon, lat = to_wgs.transform([500000.0, 500030.0], [5700000.0, 5700040.0])
    path = write(tmp_path, [pipe(line=list(zip(lon, lat)))], crs="EPSG:4326")
    u = read_utilities(path, CRS)
    np.testing.assert_allclose(u.lines_xy[0], [[500000.0, 5700000.0], [500030.0, 5700040.0]], atol=1e-4)
    assert u.length_m[0] == pytest.approx(50.0, abs=1e-4)


@pytest.mark.filterwarnings("ignore:'crs' was not provided")
def test_layer_without_crs_is_taken_in_the_project_crs_with_a_warning(tmp_path):
    path = write(tmp_path, [pipe()], crs=None)
    u = read_utilities(path, CRS)
    assert any("no CRS" in w for w in u.warnings)


def test_repeated_vertices_are_dropped(tmp_path):
    u = read_utilities(write(tmp_path, [pipe(line=((0, 0), (5, 0), (5, 0), (10, 0)))]), CRS)
    np.testing.assert_array_equal(u.lines_xy[0], [[0, 0], [5, 0], [10, 0]])


# -------------------------------------------------------------------------------------------------- bad input
def test_unknown_material_lists_the_known_ones(tmp_path):
    path = write(tmp_path, [pipe("W7", material="cast iron")])
    with pytest.raises(InputError, match=r'pipe "W7": material "cast iron" is not known; known materials: '
                                         r'"cast_iron", "ductile_iron".*did you mean "cast_iron"'):
        read_utilities(path, CRS)


def test_missing_depth_names_the_pipe_and_field(tmp_path):
    path = write(tmp_path, [pipe("W1"), pipe("W2", depth=None, line=((0, 5), (9, 5)))])
    with pytest.raises(InputError, match=r'pipes.gpkg layer "pipes" pipe "W2": depth_m is missing'):
        read_utilities(path, CRS)


def test_missing_depth_attribute_hints_at_3d_lines(tmp_path):
    rec = pipe(line=((0, 0, 9.0), (10, 0, 9.0)))
    del rec["depth_m"]
    with pytest.raises(InputError, match=r'missing attribute "depth_m".*vertical = "axis"'):
        read_utilities(write(tmp_path, [rec]), CRS)


@pytest.mark.parametrize("od, message", [
    (0.0, r'pipe "W1": outer_diameter_mm must be a number from 10 to 5000 mm; got 0$'),
    (-150.0, r"got -150$"),
    (0.3, r"got 0.3 \(a diameter in metres\?\)"),
])
def test_non_positive_or_implausible_diameter(tmp_path, od, message):
    with pytest.raises(InputError, match=message):
        read_utilities(write(tmp_path, [pipe(od=od)]), CRS)


@pytest.mark.parametrize("record, message", [
    (pipe(depth=0.0), r'pipe "W1": depth_m must be more than 0 m'),
    (pipe(depth=0.1), r'pipe "W1": the pipe axis lies 0.1 m below the surface, less than its radius \(0.15 m\)'),
    (pipe(segment_length_m=0.0), r'pipe "W1": segment_length_m must be more than 0 m'),
    (pipe(allowable_bending_strain_ue=-5.0), r'pipe "W1": allowable_bending_strain_ue must be more than 0'),
    (pipe(bending_reduction_factor=1.5), r'pipe "W1": bending_reduction_factor must be more than 0 and at most 1'),
    (pipe(bending_reduction_factor=0.5, segment_length_m=3.0),
     r'pipe "W1": bending_reduction_factor applies to continuous pipes only'),
    (pipe(allowable_axial_strain_ue="0,3"), r'pipe "W1": allowable_axial_strain_ue is not a number; got "0,3"'),
    (pipe(line=((0, 0), (0, 0))), r'pipe "W1": the line has no length in plan'),
])
def test_bad_attributes_name_the_pipe_and_field(tmp_path, record, message):
    with pytest.raises(InputError, match=message):
        read_utilities(write(tmp_path, [record]), CRS)


def test_repeated_and_empty_ids(tmp_path):
    with pytest.raises(InputError, match=r'pipe "A": id "A" is already used by another pipe'):
        read_utilities(write(tmp_path, [pipe("A"), pipe("A", line=((0, 3), (4, 3)))]), CRS)
    with pytest.raises(InputError, match=r'layer "pipes" feature 2: id is empty'):
        read_utilities(write(tmp_path, [pipe("A"), pipe(None)], name="b.gpkg"), CRS)


def test_geometry_must_be_one_line(tmp_path):
    two = shapely.MultiLineString([((0, 0), (1, 0)), ((5, 0), (6, 0))])
    with pytest.raises(InputError, match=r'pipe "W1": a MultiLineString of 2 parts'):
        read_utilities(write(tmp_path, [{**pipe(), "geometry": two}]), CRS)
    with pytest.raises(InputError, match=r'pipe "W1": a Point; a utility must be a line'):
        read_utilities(write(tmp_path, [{**pipe(), "geometry": shapely.Point(0, 0)}], name="p.gpkg"), CRS)


def test_axis_levels_need_z_a_surface_and_a_pipe_below_it(tmp_path):
    flat = UtilityReadOptions(vertical="axis", surface_level=lambda x, y: np.full(np.shape(x), 10.0))
    with pytest.raises(InputError, match=r'pipe "W1": the line has no Z, but \[utilities\] vertical = "axis"'):
        read_utilities(write(tmp_path, [pipe()]), CRS, flat)
    high = pipe(line=((0, 0, 9.0), (10, 0, 10.5)))
    with pytest.raises(InputError, match=r'pipe "W1" vertex 2: the pipe axis level 10.5 m is not below the ground '
                                         r"surface \(10 m\)"):
        read_utilities(write(tmp_path, [high], name="h.gpkg"), CRS, flat)
    outside = UtilityReadOptions(vertical="axis", surface_level=lambda x, y: np.where(np.asarray(x) > 5, np.nan, 10.0))
    with pytest.raises(InputError, match=r'pipe "W1" vertex 2: outside the ground surface survey'):
        read_utilities(write(tmp_path, [pipe(line=((0, 0, 9.0), (10, 0, 9.0)))], name="o.gpkg"), CRS, outside)
    step = pipe(line=((0, 0, 9.0), (0, 0, 8.0), (10, 0, 8.0)))
    with pytest.raises(InputError, match=r'pipe "W1" vertex 2: same plan position as vertex 1 but another level'):
        read_utilities(write(tmp_path, [step], name="s.gpkg"), CRS, flat)


def test_file_and_layer_mistakes(tmp_path):
    with pytest.raises(InputError, match=r"\[utilities\] file: .*pipes.csv is not a GIS line file"):
        read_utilities(tmp_path / "pipes.csv", CRS)
    with pytest.raises(InputError, match=r"\[utilities\] file: .*pipes.shp is a shapefile, which cuts attribute names"):
        read_utilities(tmp_path / "pipes.shp", CRS)
    with pytest.raises(InputError, match=r"\[utilities\] file: .*nothing.gpkg does not exist"):
        read_utilities(tmp_path / "nothing.gpkg", CRS)
    path = write(tmp_path, [pipe()], layer="water")
    write(tmp_path, [pipe()], layer="gas")
    with pytest.raises(InputError, match=r"holds 2 layers with geometry .*; choose one with \[utilities\] layer"):
        read_utilities(path, CRS)
    assert read_utilities(path, CRS, UtilityReadOptions(layer="gas")).ids == ("W1",)
    with pytest.raises(InputError, match=r"\[utilities\] vertical must be one of"):
        read_utilities(path, CRS, UtilityReadOptions(vertical="level"))


def test_make_utilities_broadcasts_one_depth_per_pipe():
    u = make_utilities(["a"], ["steel"], [np.array([[0.0, 0.0], [3.0, 4.0]])], [2.0], [500.0])
    np.testing.assert_array_equal(u.depths_m[0], [2.0, 2.0])
    assert np.isnan(u.allowable_joint_rotation_deg[0]) and not u.jointed[0]
