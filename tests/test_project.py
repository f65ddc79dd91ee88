"""Tests of the project-file loader (settle.project) and the table readers (settle.tables).

Every input is written into pytest's tmp_path. Error tests check the message names the file, key or row.
"""
from __future__ import annotations

import warnings

import geopandas as gpd
import numpy as np
import pyproj
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import LineString, MultiLineString, Point

from settle.errors import InputError
from settle.inputs.project_file import load_project
from settle.inputs.tables import check_alignment

BASE = """\
[project]
name = "Test site"
crs = "EPSG:27700"

[ground]
surface_level_m = 20.0
groundwater_level_m = 17.5

[[ground.layers]]
name = "Made ground"
top_level_m = 20.0
unit_weight_kn_m3 = 18.0
trough_width_k = 0.5
behaviour = "granular"

[[ground.layers]]
name = "Clay"
top_level_m = 18.0
unit_weight_kn_m3 = 20
trough_width_k = 0.5
behaviour = "cohesive"

[[drives]]
name = "West"
alignment = "west.csv"
outer_diameter_m = 1.5
volume_loss_pct = 1.0

[[drives]]
name = "East"
alignment = "data/east.csv"
outer_diameter_m = 2.4
inner_diameter_m = 2.0
volume_loss_pct = 1.5
face_chainage_m = 60.0
start_chainage_m = 10.0
trough_width_k = 0.45

[[drives.reaches]]
from_chainage_m = 40.0
to_chainage_m = 90.0
volume_loss_pct = 1.0

[[drives.reaches]]
from_chainage_m = 10.0
to_chainage_m = 40.0
volume_loss_pct = 2.5
trough_width_k = 0.6

[points]
file = "points.csv"

[output]
grid_spacing_m = 2.0
contour_levels_mm = [1, 5, 10, 20]
grid_threshold_mm = 0.5
"""

WEST_CSV = """\
x,y,z,note
500000.0,180000.0,12.0,launch shaft
500050.0,180000.0,11.5,
500100.0,180020.0,11.0,reception shaft
"""

EAST_CSV = """\
x,y,invert_z
500200,180000,10.0
500200,180050,9.8
500210,180100,9.6
"""

POINTS_CSV = """\
id,x,y,depth_m
P1,500010,180005,0
P2,500060,180010,1.5
"""


@pytest.fixture
def site(tmp_path):
    """A valid project folder: project.toml, two CSV alignments (one in a sub-folder), report points."""
    (tmp_path / "data").mkdir()
    (tmp_path / "project.toml").write_text(BASE)
    (tmp_path / "west.csv").write_text(WEST_CSV)
    (tmp_path / "data" / "east.csv").write_text(EAST_CSV)
    (tmp_path / "points.csv").write_text(POINTS_CSV)
    return tmp_path


def edit(folder, old, new, name="project.toml"):
    """Replace `old` (which must be present) by `new` in a file of the folder; return the project file path."""
    path = folder / name
    text = path.read_text()
    assert old in text, f"test set-up: {old!r} not in {name}"
    path.write_text(text.replace(old, new, 1))
    return folder / "project.toml"


def fails(path, pattern):
    """Load `path`, expecting an InputError whose message matches `pattern`; return the message."""
    with pytest.raises(InputError, match=pattern) as caught:
        load_project(path)
    message = str(caught.value)
    assert "\n" not in message  # one line
    return message


# ------------------------------------------------------------------------------------------------- valid projects
def test_full_valid_project_with_csv_alignments(site):
    project = load_project(site / "project.toml")
    assert project.name == "Test site"
    assert project.crs == "EPSG:27700"
    assert project.path == site / "project.toml"
    assert project.warnings == ()
    ground = project.ground
    assert ground.surface.level_m == 20.0 and ground.surface.points_xyz is None
    assert ground.groundwater_level_m == 17.5
    assert [layer.name for layer in ground.layers] == ["Made ground", "Clay"]
    assert ground.layers[1].unit_weight_kn_m3 == 20.0 and ground.layers[1].behaviour == "cohesive"

    west, east = project.drives
    assert west.vertical == "axis"
    np.testing.assert_array_equal(west.alignment_xy, [[500000, 180000], [500050, 180000], [500100, 180020]])
    np.testing.assert_array_equal(west.alignment_v, [12.0, 11.5, 11.0])
    assert west.source == str(site / "west.csv")
    assert west.face_chainage_m is None and west.start_chainage_m == 0.0 and west.reaches == ()
    assert west.inner_diameter_m is None and west.trough_width_k is None

    assert east.vertical == "invert"  # invert_z column: values passed on unchanged
    np.testing.assert_array_equal(east.alignment_v, [10.0, 9.8, 9.6])
    assert (east.outer_diameter_m, east.inner_diameter_m, east.volume_loss_pct) == (2.4, 2.0, 1.5)
    assert (east.face_chainage_m, east.start_chainage_m, east.trough_width_k) == (60.0, 10.0, 0.45)
    assert [(r.from_chainage_m, r.to_chainage_m) for r in east.reaches] == [(10.0, 40.0), (40.0, 90.0)]  # sorted
    assert east.reaches[0].trough_width_k == 0.6 and east.reaches[1].trough_width_k is None

    assert project.points.ids == ("P1", "P2")
    np.testing.assert_array_equal(project.points.depth_m, [0.0, 1.5])
    np.testing.assert_array_equal(project.points.x_m, [500010, 500060])
    out = project.output
    assert (out.grid_spacing_m, out.contour_levels_mm, out.grid_threshold_mm, out.precision_mm) == (
        2.0, (1.0, 5.0, 10.0, 20.0), 0.5, 0.001)


def test_defaults_and_optional_tables(site):
    path = edit(site, '[points]\nfile = "points.csv"\n', "")
    edit(site, "grid_threshold_mm = 0.5\n", "")
    project = load_project(path)
    assert project.points is None
    assert project.output.grid_threshold_mm == 0.1 and project.output.precision_mm == 0.001


def test_depth_m_alignment_column_and_points_without_depth(site):
    (site / "west.csv").write_text("x,y,depth_m\n0,0,6.0\n30,0,6.5\n60,5,7.0\n")
    (site / "points.csv").write_text("id,x,y\nA,1,2\n")
    project = load_project(site / "project.toml")
    assert project.drives[0].vertical == "depth"
    np.testing.assert_array_equal(project.drives[0].alignment_v, [6.0, 6.5, 7.0])
    np.testing.assert_array_equal(project.points.depth_m, [0.0])


def test_surface_points(site):
    (site / "surface.csv").write_text("x,y,z\n0,0,20\n100,0,21\n0,100,19.5\n100,100,20.5\n")
    path = edit(site, "surface_level_m = 20.0", 'surface_points = "surface.csv"')
    surface = load_project(path).ground.surface
    assert surface.level_m is None
    np.testing.assert_array_equal(surface.points_xyz[:, 2], [20, 21, 19.5, 20.5])
    assert surface.source == str(site / "surface.csv")


def test_web_mercator_is_accepted_with_a_warning(site):
    (site / "west.csv").write_text("x,y,z\n0,0,10\n30,0,10\n")
    (site / "data" / "east.csv").write_text("x,y,invert_z\n100,0,10\n100,50,10\n")
    project = load_project(edit(site, 'crs = "EPSG:27700"', 'crs = "epsg:3857"'))
    assert project.crs == "EPSG:3857"
    assert len(project.warnings) == 1 and "Web Mercator" in project.warnings[0]


# ----------------------------------------------------------------------------------------------- GIS alignments
BNG_LINE = np.array([[530000.0, 180000.0, 8.0], [530040.0, 180010.0, 7.8], [530090.0, 180030.0, 7.5]])


def _gis_project(site, alignment, extra=""):
    """Rewrite project.toml from BASE with drive West pointing at a GIS alignment file, plus extra keys."""
    (site / "project.toml").write_text(BASE)
    return edit(site, 'alignment = "west.csv"', f'alignment = "{alignment}"\n{extra}')


@pytest.mark.parametrize("project_crs, layer_crs, offset, tolerance_m", [
    # Pure map projections of one datum: the round trip is exact to far below the brief's 1 mm.
    ("EPSG:32630", "EPSG:4326", (170000.0, 5520000.0), 1e-3),  # UTM 30N <-> WGS 84 lon/lat
    ("EPSG:27700", "EPSG:4277", (0.0, 0.0), 1e-3),  # British National Grid <-> OSGB36 lon/lat
    # Across datums (OSGB36 -> WGS 84) PROJ uses a 7-parameter Helmert when the OSTN15 grid is not installed, and
    # inverts it only approximately: seen 1.04 mm on a pyproj forward + inverse alone, so 2 mm here.
    ("EPSG:27700", "EPSG:4326", (0.0, 0.0), 2e-3),
])
def test_geopackage_in_another_crs_is_reprojected(site, project_crs, layer_crs, offset, tolerance_m):
    # Line written in geographic lon/lat into a two-layer GeoPackage holding two named lines; the project CRS is
    # projected. Reprojecting back must give the original grid coordinates (round trip; brief: within 1 mm).
    line = BNG_LINE + [*offset, 0.0]
    lines = gpd.GeoDataFrame({"name": ["West", "Spur"]},
                             geometry=[LineString(line), LineString(line[:2] + [0.0, 500.0, 0.0])],
                             crs=project_crs).to_crs(layer_crs)
    assert abs(lines.geometry.iloc[0].coords[0][0]) < 10  # really in degrees
    lines.to_file(site / "routes.gpkg", layer="drive_lines", driver="GPKG")
    shafts = gpd.GeoDataFrame({"name": ["S1"]}, geometry=[Point(line[0, :2])], crs=project_crs)
    shafts.to_file(site / "routes.gpkg", layer="shafts", driver="GPKG")
    path = _gis_project(site, "routes.gpkg", 'alignment_layer = "drive_lines"\nalignment_feature = "West"')
    path.write_text(path.read_text().replace('crs = "EPSG:27700"', f'crs = "{project_crs}"'))
    project = load_project(path)
    west = project.drives[0]
    np.testing.assert_allclose(west.alignment_xy, line[:, :2], rtol=0, atol=tolerance_m)
    # A warning exactly when PROJ says a better transformation exists than the ones installed (a datum grid).
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # pyproj's own notice of a missing grid
        best = pyproj.transformer.TransformerGroup(layer_crs, project_crs, always_xy=True).best_available
    assert any("datum grid is missing" in w for w in project.warnings) == (not best)
    np.testing.assert_array_equal(west.alignment_v, line[:, 2])  # Z never changed
    assert west.vertical == "axis"
    assert west.source == f'{site / "routes.gpkg"} layer "drive_lines" feature "West"'


def test_geojson_alignment_with_depth_z(site):
    line = np.column_stack([BNG_LINE[:, :2], [5.0, 5.5, 6.0]])
    gpd.GeoDataFrame({"name": ["West"]}, geometry=[LineString(line)], crs="EPSG:27700").to_file(
        site / "west.geojson", driver="GeoJSON")
    west = load_project(_gis_project(site, "west.geojson", 'alignment_z = "depth"')).drives[0]
    assert west.vertical == "depth"
    np.testing.assert_allclose(west.alignment_xy, line[:, :2], rtol=0, atol=1e-3)
    np.testing.assert_array_equal(west.alignment_v, [5.0, 5.5, 6.0])


def test_gis_layer_without_crs_is_taken_in_project_crs_with_a_warning(site):
    frame = gpd.GeoDataFrame({"name": ["West"]}, geometry=[LineString(BNG_LINE)])
    with pytest.warns(UserWarning):  # the writer warns that no CRS is set; that is the case under test
        frame.to_file(site / "west.shp")
    project = load_project(_gis_project(site, "west.shp"))
    np.testing.assert_array_equal(project.drives[0].alignment_xy, BNG_LINE[:, :2])
    assert len(project.warnings) == 1 and "has no CRS" in project.warnings[0] and "west.shp" in project.warnings[0]


def test_gis_line_without_z_is_an_error(site):
    gpd.GeoDataFrame({"name": ["West"]}, geometry=[LineString(BNG_LINE[:, :2])], crs="EPSG:27700").to_file(
        site / "flat.gpkg", layer="lines", driver="GPKG")
    message = fails(_gis_project(site, "flat.gpkg"), "the line has no Z")
    assert "flat.gpkg" in message


def test_several_lines_without_alignment_feature_lists_the_names(site):
    gpd.GeoDataFrame({"name": ["North", "South"]},
                     geometry=[LineString(BNG_LINE), LineString(BNG_LINE + [0, 100, 0])], crs="EPSG:27700").to_file(
        site / "lines.gpkg", layer="lines", driver="GPKG")
    fails(_gis_project(site, "lines.gpkg"), r'holds 2 features; choose one with alignment_feature.*"North", "South"')
    fails(_gis_project(site, "lines.gpkg", 'alignment_feature = "Nort"'),
          r'no feature is named "Nort" \(alignment_feature\); names found: "North", "South"')


def test_several_layers_without_alignment_layer_lists_the_layers(site):
    for layer in ("a", "b"):
        gpd.GeoDataFrame({"name": ["West"]}, geometry=[LineString(BNG_LINE)], crs="EPSG:27700").to_file(
            site / "two.gpkg", layer=layer, driver="GPKG")
    fails(_gis_project(site, "two.gpkg"), r'holds 2 layers with geometry \("a", "b"\); choose one with alignment_layer')
    fails(_gis_project(site, "two.gpkg", 'alignment_layer = "c"'), r'no layer "c" \(alignment_layer\)')


@pytest.mark.parametrize("geometry, attributes, extra, pattern", [
    (Point(530000, 180000, 8), {"name": ["West"]}, "", r'layer "g": a Point; a drive alignment must be a LineString'),
    (MultiLineString([BNG_LINE[:2], BNG_LINE[1:] + [0, 50, 0]]), {"name": ["West"]}, "",
     r'layer "g": a MultiLineString of 2 parts; a drive needs one continuous line'),
    (LineString(BNG_LINE), {"label": ["West"]}, 'alignment_feature = "West"',
     r'alignment_feature = "West" but the layer has no name attribute; attributes found: "label"'),
])
def test_gis_feature_errors(site, geometry, attributes, extra, pattern):
    gpd.GeoDataFrame(attributes, geometry=[geometry], crs="EPSG:27700").to_file(site / "g.gpkg", layer="g",
                                                                                driver="GPKG")
    fails(_gis_project(site, "g.gpkg", extra), pattern)


def test_gis_only_keys_with_a_csv_alignment(site):
    path = edit(site, 'alignment = "west.csv"', 'alignment = "west.csv"\nalignment_z = "depth"')
    fails(path, r'\[\[drives\]\] #1 "West": alignment_z applies only to a GIS or LandXML alignment; west\.csv is a CSV')


def test_gis_vertex_errors_name_the_vertex(site):
    line = BNG_LINE.copy()
    line[2, :2] = [529990.0, 180000.0]  # third vertex goes back past the first
    gpd.GeoDataFrame({"name": ["West"]}, geometry=[LineString(line)], crs="EPSG:27700").to_file(
        site / "back.gpkg", layer="lines", driver="GPKG")
    fails(_gis_project(site, "back.gpkg"), r'back\.gpkg layer "lines" vertex 2: the alignment turns 1\d\d\.\d degrees')


# ------------------------------------------------------------------------------------------- project file errors
def test_missing_project_file(tmp_path):
    fails(tmp_path / "nope.toml", r"nope\.toml: project file not found")


def test_toml_syntax_error_names_file_and_line(site):
    line = BASE.splitlines().index("volume_loss_pct = 1.0") + 1
    path = edit(site, "volume_loss_pct = 1.0", "volume_loss_pct = = 1.0")
    fails(path, rf"project\.toml: not valid TOML: .*line {line}\b")


#: (text in the project file, what it becomes, the message expected): every mistake is named by its file, table and
#: key, says what is wrong and shows what was given. In turn: unknown keys (the closest known one suggested), missing
#: required keys, values of the wrong type, values out of their range.
MISTAKES = [
    ("volume_loss_pct = 1.0", "volume_loss = 1.0",
     r'\[\[drives\]\] #1 "West": unknown key "volume_loss"; did you mean "volume_loss_pct"\?'),
    ("outer_diameter_m = 2.4", "outer_diameter = 2.4",
     r'\[\[drives\]\] #2 "East": unknown key "outer_diameter"; did you mean "outer_diameter_m"\?'),
    ("grid_spacing_m = 2.0", "grid_spacing_m = 2.0\ngrid_threshold = 1",
     r'\[output\]: unknown key "grid_threshold"; did you mean "grid_threshold_mm"\?'),
    ("[points]", "[point]", r'project\.toml: unknown key "point"; did you mean "points"\?'),
    ("trough_width_k = 0.6", "trough_k = 0.6",
     r'\[\[drives\.reaches\]\] #2: unknown key "trough_k"; did you mean "trough_width_k"\?'),
    ('name = "West"\n', "", r"\[\[drives\]\] #1: missing required key name"),
    ("groundwater_level_m = 17.5\n", "", r"\[ground\]: missing required key groundwater_level_m"),
    ("volume_loss_pct = 1.5\n", "", r'\[\[drives\]\] #2 "East": missing required key volume_loss_pct'),
    ('behaviour = "cohesive"\n', "", r'\[\[ground\.layers\]\] #2 "Clay": missing required key behaviour'),
    ("to_chainage_m = 40.0\n", "", r"\[\[drives\.reaches\]\] #2: missing required key to_chainage_m"),
    ("grid_spacing_m = 2.0\n", "", r"\[output\]: missing required key grid_spacing_m"),
    ("volume_loss_pct = 1.0", "volume_loss_pct = true",
     r'volume_loss_pct must be a positive number of per cent; got true'),
    ("surface_level_m = 20.0", 'surface_level_m = "20"',
     r'\[ground\]: surface_level_m must be a number of metres; got "20"'),
    ("top_level_m = 18.0", "top_level_m = nan", r'"Clay": top_level_m must be a number of metres; got nan'),
    ('name = "West"', "name = 3", r"\[\[drives\]\] #1: name must be non-empty text in quotes; got 3"),
    ("contour_levels_mm = [1, 5, 10, 20]", "contour_levels_mm = 5", r"contour_levels_mm must be a non-empty list"),
    ("contour_levels_mm = [1, 5, 10, 20]", 'contour_levels_mm = [1, "5"]',
     r'contour_levels_mm item 2 must be a positive number of millimetres; got "5"'),
    ('[project]\nname = "Test site"\ncrs = "EPSG:27700"\n', 'project = "Test site"\n',
     r'project\.toml: \[project\] must be a table .*; got "Test site"'),
    ("outer_diameter_m = 1.5", "outer_diameter_m = 12", r'"West": outer_diameter_m must be from 0.1 to 10 m; got 12'),
    ("volume_loss_pct = 1.0", "volume_loss_pct = 0", r"volume_loss_pct must be more than 0 and at most 20 %; got 0"),
    ("volume_loss_pct = 1.5", "volume_loss_pct = 20.5", r'"East": volume_loss_pct must be .* at most 20 %; got 20.5'),
    ("unit_weight_kn_m3 = 18.0", "unit_weight_kn_m3 = 180", r"unit_weight_kn_m3 must be from 5 to 30 kN/m3; got 180"),
    ("trough_width_k = 0.45", "trough_width_k = 2", r'"East": trough_width_k must be from 0.1 to 1.5; got 2'),
    ("trough_width_k = 0.6", "trough_width_k = 0.05", r"\[\[drives\.reaches\]\] #2: trough_width_k must be from 0.1"),
    ('behaviour = "granular"', 'behaviour = "sand"', r'behaviour must be one of "cohesive", "granular"; got "sand"'),
    ("inner_diameter_m = 2.0", "inner_diameter_m = 2.4", r"inner_diameter_m must be more than 0 and less than 2.4 m"),
    ("face_chainage_m = 60.0", "face_chainage_m = 5.0", r'"East": face_chainage_m must be at least 10 m; got 5.0'),
    ("top_level_m = 18.0", "top_level_m = 20.0",
     r'#2 "Clay": top_level_m must be below the top of the layer above \("Made ground", 20 m\)'),
    ("grid_spacing_m = 2.0", "grid_spacing_m = 0", r"\[output\]: grid_spacing_m must be more than 0 m; got 0"),
    ("contour_levels_mm = [1, 5, 10, 20]", "contour_levels_mm = [1, 10, 5]",
     r"contour_levels_mm must increase strictly; item 3 \(5\) follows 10"),
    ("contour_levels_mm = [1, 5, 10, 20]", "contour_levels_mm = [-1, 5]",
     r"contour_levels_mm item 1 must be more than 0 mm; got -1"),
    ("contour_levels_mm = [1, 5, 10, 20]", "contour_levels_mm = []", r"contour_levels_mm must be a non-empty list"),
    ("grid_threshold_mm = 0.5", "grid_threshold_mm = 0.5\nprecision_mm = 0.5",
     r"precision_mm must be less than grid_threshold_mm \(0.5 mm\); got 0.5"),
]


@pytest.mark.parametrize("old, new, pattern", MISTAKES)
def test_a_mistake_is_named_with_its_key_and_value(site, old, new, pattern):
    fails(edit(site, old, new), pattern)


def test_missing_tables(site):
    path = site / "project.toml"
    path.write_text(BASE[:BASE.index("[output]")])
    fails(path, r"project\.toml: missing table \[output\]")
    path.write_text(BASE[:BASE.index("[[drives]]")] + BASE[BASE.index("[points]"):])
    fails(path, r"project\.toml: missing \[\[drives\]\]; give at least one")
    path.write_text(BASE[:BASE.index("[[ground.layers]]")] + BASE[BASE.index("[[drives]]"):])
    fails(path, r"\[ground\]: missing \[\[ground\.layers\]\]; give at least one")
    path.write_text(BASE[:BASE.index('[[drives]]\nname = "East"')].replace("[[drives]]", "[drives]"))
    fails(path, r"project\.toml: drives must be one or more tables, each under a \[\[drives\]\] header; got a single")


def test_wrong_type_message_is_exactly_the_style_guide_example(site, monkeypatch):
    # Message format from /work/shared/style.md, "Errors for people".
    monkeypatch.chdir(site)
    edit(site, "outer_diameter_m = 2.4", 'outer_diameter_m = "2,4"')
    with pytest.raises(InputError) as caught:
        load_project("project.toml")
    assert str(caught.value) == ('project.toml [[drives]] #2 "East": outer_diameter_m must be a positive number of '
                                 'metres; got "2,4"')


@pytest.mark.parametrize("crs, pattern", [
    ("EPSG:4326", r'\[project\]: crs "EPSG:4326" \(WGS 84\) is not projected'),
    ("EPSG:2229", r'\[project\]: crs "EPSG:2229" .* has axes in US survey foot; give a projected CRS in metres'),
    ("27700", r'\[project\]: crs must be an EPSG code written "EPSG:nnnn".*got "27700"'),
    ("EPSG:999999", r'\[project\]: crs "EPSG:999999" is not a known EPSG'),
])
def test_crs_must_be_projected_in_metres(site, crs, pattern):
    fails(edit(site, 'crs = "EPSG:27700"', f'crs = "{crs}"'), pattern)


def test_surface_level_xor_surface_points(site):
    (site / "surface.csv").write_text("x,y,z\n0,0,20\n100,0,21\n0,100,19.5\n")
    fails(edit(site, "surface_level_m = 20.0", 'surface_level_m = 20.0\nsurface_points = "surface.csv"'),
          r"\[ground\]: give exactly one of surface_level_m .* got surface_level_m and surface_points")
    fails(edit(site, 'surface_level_m = 20.0\nsurface_points = "surface.csv"', ""),
          r"\[ground\]: give exactly one of surface_level_m .* got none")


@pytest.mark.parametrize("csv_text, pattern", [
    ("x,y,z\n0,0,20\n10,10,21\n20,20,19\n30,30.0000001,18\n", r"surface\.csv: all 4 surface points lie on one line"),
    ("x,y,z\n0,0,20\n10,0,21\n", r"surface\.csv: 2 surface point\(s\); need at least 3"),
    ("x,y,level\n0,0,20\n10,0,21\n0,10,22\n", r'surface\.csv: missing column "z"; columns found: "x", "y", "level"'),
    ("x,y,z\n0,0,20\n10,0,21\n0,10,22\n10.0,0.0,25\n", r"surface\.csv: rows 3 and 5 give the same plan position"),
])
def test_surface_points_errors(site, csv_text, pattern):
    (site / "surface.csv").write_text(csv_text)
    fails(edit(site, "surface_level_m = 20.0", 'surface_points = "surface.csv"'), pattern)


def test_duplicate_drive_names(site):
    fails(edit(site, 'name = "East"', 'name = "West"'),
          r'\[\[drives\]\] #2 "West": name is already used by \[\[drives\]\] #1')


def test_overlapping_reaches_name_both(site):
    fails(edit(site, "to_chainage_m = 40.0", "to_chainage_m = 45.0"),
          r'"East": \[\[drives\.reaches\]\] #2 \(10 to 45 m\) and #1 \(40 to 90 m\) overlap')
    fails(edit(site, "to_chainage_m = 45.0", "to_chainage_m = 5.0"),
          r"\[\[drives\.reaches\]\] #2: to_chainage_m must be more than 10 m; got 5.0")


def test_invert_levels_need_the_inner_diameter(site):
    fails(edit(site, "inner_diameter_m = 2.0\n", ""),
          r'"East": the alignment gives invert levels .*east\.csv\); inner_diameter_m is needed')


def test_alignment_suffix_must_be_known(site):
    (site / "west.txt").write_text(WEST_CSV)
    fails(edit(site, 'alignment = "west.csv"', 'alignment = "west.txt"'),
          r'alignment must be a \.csv file, a GIS line layer .* or a LandXML file \(\.xml\); got "west\.txt"')


# ------------------------------------------------------------------------------------------------ CSV errors
def test_csv_file_missing_names_the_key_and_the_resolved_path(site):
    path = edit(site, 'alignment = "data/east.csv"', 'alignment = "data/eest.csv"')
    message = fails(path, r'\[\[drives\]\] #2 "East": alignment = "data/eest.csv": file not found: ')
    assert message.endswith(str((site / "data" / "eest.csv").resolve()))
    (site / "project.toml").write_text(BASE)
    fails(edit(site, 'file = "points.csv"', 'file = "pts.csv"'), r'\[points\]: file = "pts.csv": file not found: ')
    (site / "folder.csv").mkdir()
    (site / "project.toml").write_text(BASE)
    fails(edit(site, 'alignment = "west.csv"', 'alignment = "folder.csv"'), r"a folder, not a file")


@pytest.mark.parametrize("csv_text, pattern", [
    ("x,y,level\n0,0,1\n10,0,1\n", r'west\.csv: needs exactly one vertical column.*found none of them; '
                                   r'columns found: "x", "y", "level"'),
    ("x,y,z,depth_m\n0,0,1,5\n10,0,1,5\n", r"west\.csv: needs exactly one vertical column.*found 2 of them"),
    ("easting,y,z\n0,0,1\n10,0,1\n", r'west\.csv: missing column "x"; columns found: "easting", "y", "z"'),
    ("x;y;z\n0;0;1\n", r"""missing column "x"; columns found: "x;y;z" \(the header seems to use ';'"""),
    ("x,y,z\n0,0,1\n10,abc,1\n", r'west\.csv row 3: column "y" is not a number; got "abc"'),
    ("x,y,z\n0,0,1\n\n10,0,\n", r'west\.csv row 4: column "z" is empty'),  # blank line 3 still counts
    ("x,y,z\n0,0,1\n10,0,1,5\n", r"west\.csv row 3: 4 cells but the header names 3 columns"),
    ("x,y,z\n0,0,inf\n10,0,1\n", r'west\.csv row 2: column "z" must be a finite number; got "inf"'),
    ("x,y,depth_m\n0,0,5\n10,0,-1\n", r"west\.csv row 3: depth of the axis below the surface must be more than 0"),
    ("x,y,z\n0,0,1\n", r"west\.csv: the alignment has 1 vertex; a drive needs at least 2"),
    ("x,y,z\n0,0,1\n10,0,1\n10.0004,0,1\n20,0,1\n", r"west\.csv row 4: repeats the vertex of row 3"),
    ("x,y,z\n0,0,1\n10,0,1\n10,0,3\n20,0,1\n", r"west\.csv row 4: same plan position as row 3 but another level"),
    ("x,y,z\n0,0,1\n10,0,1\n0,1,1\n", r"west\.csv row 3: the alignment turns 17\d\.\d degrees in plan here"),
    ("x,y,z\n0,0,1\n10,0,1\n10,10,1\n", r"west\.csv row 3: the alignment turns 90\.0 degrees"),
    ("x,y,z\n0,0,1\n10,0,1\n".encode("utf-16"), r"west\.csv: not UTF-8 text"),
])
def test_alignment_csv_errors(site, csv_text, pattern):
    target = site / "west.csv"
    target.write_bytes(csv_text) if isinstance(csv_text, bytes) else target.write_text(csv_text)
    fails(site / "project.toml", pattern)


def test_csv_with_spreadsheet_bom_and_extra_columns_reads(site):
    (site / "west.csv").write_bytes("\ufeffx, y ,z,comment\n0,0,1,a\n10,0,1,\n,,,\n".encode("utf-8"))
    west = load_project(site / "project.toml").drives[0]
    np.testing.assert_array_equal(west.alignment_xy, [[0, 0], [10, 0]])


@pytest.mark.parametrize("csv_text, pattern", [
    ("id,x,y\nA,0,0\nB,1,1\nA,2,2\n", r'points\.csv row 4: id "A" is already used on row 2'),
    ("id,x,y,depth_m\nA,0,0,-0.5\n", r'points\.csv row 2: column "depth_m" must be a number at least 0; got "-0.5"'),
    ("name,x,y\nA,0,0\n", r'points\.csv: missing column "id"; columns found: "name", "x", "y"'),
    ("id,x,y\n,0,0\n", r'points\.csv row 2: column "id" is empty'),
    ("id,x,y\n", r"points\.csv: no points below the header"),
])
def test_points_csv_errors(site, csv_text, pattern):
    (site / "points.csv").write_text(csv_text)
    fails(site / "project.toml", pattern)


# ------------------------------------------------------------------------------------ property: turning angle
@settings(max_examples=60, deadline=None)
@given(turn_deg=st.floats(0.0, 179.0).filter(lambda a: abs(a - 90.0) > 1e-3),
       heading_deg=st.floats(-180.0, 180.0), length_m=st.floats(0.01, 500.0))
def test_turning_angle_of_90_degrees_or_more_is_an_error(turn_deg, heading_deg, length_m):
    # Geometry identity: the third vertex leaves the middle one at `turn_deg` from the incoming direction.
    h, t = np.radians(heading_deg), np.radians(heading_deg + turn_deg)
    xy = np.array([[0.0, 0.0], [length_m * np.cos(h), length_m * np.sin(h)]])
    xy = np.vstack([xy, xy[1] + length_m * np.array([np.cos(t), np.sin(t)])]) + [500000.0, 180000.0]
    labels = ["vertex 1", "vertex 2", "vertex 3"]
    if turn_deg >= 90.0:
        with pytest.raises(InputError, match="vertex 2: the alignment turns"):
            check_alignment(xy, np.zeros(3), "axis", "line", labels)
    else:
        check_alignment(xy, np.zeros(3), "axis", "line", labels)
