"""Hostile input to the readers: files that are not files or are too large, nesting that exhausts a parser, numbers
that are not plausible, coordinates that are not numbers, dates in another form, attributes that clash by letter
case. Each one is an InputError naming the file and the key, row or feature, never another exception, a hang or a
row silently lost.
"""
from __future__ import annotations

import contextlib
import json
import math
import os
import tempfile
import threading
import tomllib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from shapely.geometry import LineString

import gis_out
import settle
from settle.errors import InputError
from settle.inputs.project_file import MAX_TOML_DEPTH, load_project
from settle.inputs.readings import read_readings
from settle.inputs.tables import COORDINATE_LIMIT_M, LEVEL_LIMIT_M

from . import test_project
from .test_project import BASE, EAST_CSV, POINTS_CSV, WEST_CSV, edit, fails
from .test_readings import make_project, write

BNG = {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::27700"}}

site = test_project.site  # the fixture: a valid project folder (project.toml, two CSV alignments, report points)


# ----------------------------------------------------------------------------------------------------------- files
@contextlib.contextmanager
def fifo(path: Path):
    """A named pipe at `path` that cannot hang the test: a writer opens it meanwhile, so a reader that opened it by
    mistake reads an empty file instead of waiting for ever; at the end the writer is released if nobody read."""
    os.mkfifo(path)

    def writer():
        with open(path, "wb"):
            pass

    thread = threading.Thread(target=writer, daemon=True)
    thread.start()
    try:
        yield path
    finally:
        reader = os.open(path, os.O_RDONLY | os.O_NONBLOCK)  # lets the writer's open return
        thread.join()
        os.close(reader)


def test_a_named_pipe_as_an_input_is_refused_before_it_is_opened(site):
    with fifo(site / "pipe.csv"):
        fails(edit(site, 'file = "points.csv"', 'file = "pipe.csv"'),
              r'project\.toml \[points\]: file = "pipe\.csv": .*pipe\.csv is a named pipe \(FIFO\), not a regular '
              r"file")


def test_a_named_pipe_as_the_project_file_is_refused(tmp_path):
    with fifo(tmp_path / "project.toml") as path:
        fails(path, r"project file: .*project\.toml is a named pipe \(FIFO\), not a regular file")


def test_a_named_pipe_as_the_readings_file_is_refused(tmp_path):
    project = make_project(tmp_path)
    with fifo(tmp_path / "readings.csv") as path, pytest.raises(InputError, match=r"readings file: .*readings\.csv "
                                                                                  r"is a named pipe \(FIFO\)"):
        read_readings(path, project)


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="needs /dev/zero")
@pytest.mark.parametrize("old, new", [('file = "points.csv"', 'file = "/dev/zero"'),
                                      ('alignment = "west.csv"', 'alignment = "/dev/zero"')])
def test_a_device_as_an_input_is_refused_without_reading_it(site, old, new):
    fails(edit(site, old, new), r'= "/dev/zero": /dev/zero is a character device, not a regular file')


def test_a_file_over_the_size_limit_is_refused_naming_the_key_and_the_limit(site):
    (site / "points.csv").write_text(POINTS_CSV + "".join(f"Q{k},500010,180005,0\n" for k in range(200)))
    path = edit(site, "grid_threshold_mm = 0.5", "grid_threshold_mm = 0.5\ninput_size_limit_mb = 0.001")
    fails(path, r'\[points\]: file = "points\.csv": .*points\.csv is 0\.0 MB, more than the limit of 0\.001 MB '
                r"\(\[output\] input_size_limit_mb\)")
    edit(site, "input_size_limit_mb = 0.001", "input_size_limit_mb = 1")
    assert load_project(path).output.input_size_limit_mb == 1.0


def test_the_size_limit_and_the_memory_limit_are_read_and_checked(site):
    output = load_project(site / "project.toml").output
    assert output.input_size_limit_mb == 512.0 and output.memory_limit_mb is None
    path = edit(site, "grid_threshold_mm = 0.5", "grid_threshold_mm = 0.5\nmemory_limit_mb = 2048")
    assert load_project(path).output.memory_limit_mb == 2048.0
    fails(edit(site, "memory_limit_mb = 2048", "memory_limit_mb = 0"),
          r"\[output\]: memory_limit_mb must be more than 0 and at most 10000000; got 0")
    fails(edit(site, "memory_limit_mb = 0", "input_size_limit_mb = -1"),
          r"\[output\]: input_size_limit_mb must be more than 0 and at most 10000000; got -1")


def test_input_files_lists_every_file_read_once_in_order(site):
    project = load_project(site / "project.toml")
    assert project.input_files == tuple((site / name).resolve() for name in
                                        ("project.toml", "west.csv", "data/east.csv", "points.csv"))
    # Two drives on one alignment file: read twice, listed once.
    path = edit(site, 'alignment = "data/east.csv"', 'alignment = "west.csv"')
    project = load_project(path)
    assert [p.name for p in project.input_files] == ["project.toml", "west.csv", "points.csv"]


def _shapefile_alignment(site) -> Path:
    line = LineString([(530000.0, 180000.0, 8.0), (530040.0, 180010.0, 7.8)])
    gpd.GeoDataFrame({"name": ["West"]}, geometry=[line], crs="EPSG:27700").to_file(site / "west.shp")
    return edit(site, 'alignment = "west.csv"', 'alignment = "west.shp"')


def test_a_shapefile_is_read_with_its_sidecars(site):
    path = _shapefile_alignment(site)
    names = [p.name for p in load_project(path).input_files]
    sidecars = [s for s in (".shx", ".dbf", ".prj", ".cpg") if (site / f"west{s}").exists()]
    assert {".shx", ".dbf", ".prj"} <= set(sidecars)
    assert names[:2 + len(sidecars)] == ["project.toml", "west.shp"] + [f"west{s}" for s in sidecars]


def test_a_sidecar_over_the_size_limit_is_refused(site):
    path = _shapefile_alignment(site)
    (site / "west.cpg").write_text("UTF-8" + " " * 2000)
    edit(site, "grid_threshold_mm = 0.5", "grid_threshold_mm = 0.5\ninput_size_limit_mb = 0.001")
    fails(path, r'alignment = "west\.shp": .*west\.cpg is 0\.0 MB, more than the limit of 0\.001 MB')


# -------------------------------------------------------------------------------------------------------- nesting
@pytest.mark.parametrize("nest, pattern", [
    ("[" * 40 + "]" * 40, rf"nested 41 levels deep, more than {MAX_TOML_DEPTH}"),
    ("[" * 1000 + "]" * 1000, rf"nested too deeply \(more than {MAX_TOML_DEPTH} levels\)"),
    ("{a = " * 1000 + "1" + "}" * 1000, r"nested too deeply"),
])
def test_deep_nesting_is_refused_naming_the_file(site, nest, pattern):
    fails(edit(site, "grid_threshold_mm = 0.5", f"grid_threshold_mm = 0.5\nnest = {nest}"),
          rf"project\.toml: tables or arrays are {pattern}")


def test_deep_dotted_keys_are_refused(site):
    fails(edit(site, "grid_threshold_mm = 0.5", "grid_threshold_mm = 0.5\n" + ".".join(["a"] * 1000) + " = 1"),
          r"project\.toml: tables or arrays are nested 1000 levels deep")


# ---------------------------------------------------------------------------------------------------------- ranges
@pytest.mark.parametrize("old, new, pattern", [
    ("start_chainage_m = 10.0", "start_chainage_m = 1e16",
     r'"East": start_chainage_m must be from -10000000 to 10000000 m; got 1e\+16'),
    ("face_chainage_m = 60.0", "face_chainage_m = 1e308", r'"East": face_chainage_m must be from -10000000 to '
                                                          r"10000000 m; got 1e\+308"),
    ("surface_level_m = 20.0", "surface_level_m = 1e308",
     r"\[ground\]: surface_level_m must be from -10000 to 10000 m"),
    ("groundwater_level_m = 17.5", "groundwater_level_m = nan", r"groundwater_level_m must be a number of metres; "
                                                               r"got nan"),
    ("top_level_m = 18.0", "top_level_m = -1e308", r'"Clay": top_level_m must be from -10000 to 10000 m'),
    ("to_chainage_m = 90.0", "to_chainage_m = 1e12", r"\[\[drives.reaches\]\] #1: to_chainage_m must be from "
                                                     r"-10000000 to 10000000 m; got 1000000000000"),
    ("grid_threshold_mm = 0.5", "grid_threshold_mm = 0.5\nsections_chainage_m = [inf]",
     r"sections_chainage_m item 1 must be a number of metres; got inf"),
])
def test_implausible_numbers_in_the_project_file_are_refused(site, old, new, pattern):
    fails(edit(site, old, new), pattern)


@pytest.mark.parametrize("name, old, new, pattern", [
    ("west.csv", "500050.0,180000.0", "1e308,180000.0",
     r"west\.csv row 3: x, y \(1e\+308, 180000\) must be finite numbers from -10000000 to 10000000 m"),
    ("west.csv", "500050.0,180000.0,11.5", "500050.0,180000.0,-2e4",
     r"west\.csv row 3: axis level must be from -10000 to 10000 m; got -20000"),
    ("data/east.csv", "500200,180050,9.8", "500200,180050,1e308", r"east\.csv row 3: invert level must be from"),
    ("points.csv", "P2,500060,180010", "P2,-1e300,180010", r"points\.csv row 3: x, y \(-1e\+300, 180010\)"),
    ("points.csv", "P2,500060,180010,1.5", "P2,500060,180010,5000",
     r'points\.csv row 3: column "depth_m" must be a number at most 1000; got "5000"'),
])
def test_implausible_numbers_in_the_tables_are_refused_naming_the_row(site, name, old, new, pattern):
    edit(site, old, new, name=name)
    fails(site / "project.toml", pattern)


def test_implausible_survey_levels_are_refused(site):
    (site / "survey.csv").write_text("x,y,z\n499000,179000,20\n501000,179000,20\n500000,181000,1e308\n")
    fails(edit(site, "surface_level_m = 20.0", 'surface_points = "survey.csv"'),
          r'survey\.csv row 4: column "z" must be a number at most 10000; got "1e308"')


def _square(x, y, size=8.0):
    return [[x, y], [x + size, y], [x + size, y + size], [x, y + size], [x, y]]


def _houses(site, rings, properties=None):
    features = [{"type": "Feature", "properties": {"id": f"H{k}", "height_m": 8.0, **(properties or {})},
                 "geometry": {"type": "Polygon", "coordinates": [ring]}} for k, ring in enumerate(rings, start=1)]
    text = json.dumps({"type": "FeatureCollection", "crs": BNG, "features": features}, allow_nan=True)
    (site / "houses.geojson").write_text(text)
    return edit(site, "[output]", '[buildings]\nfile = "houses.geojson"\ndefault_foundation_depth_m = 1.0\n'
                                  'default_structure = "masonry"\n\n[output]')


@pytest.mark.parametrize("bad, pattern", [
    (math.nan, r'houses\.geojson layer "houses" building "H2": x, y \(nan, 179995\) must be finite numbers'),
    (1e308, r'building "H2": x, y \(1e\+308, 179995\) must be finite numbers from -10000000 to 10000000 m'),
])
def test_a_footprint_vertex_that_is_not_a_plausible_number_names_the_building(site, bad, pattern):
    ring = _square(500040.0, 179995.0)
    ring[1][0] = bad
    fails(_houses(site, [_square(500020.0, 179995.0), ring]), pattern)


def test_a_footprint_larger_than_the_limit_names_the_building(site):
    fails(_houses(site, [_square(500020.0, 179995.0, size=5000.0)]),
          r'building "H1": the footprint spans 5000 m in plan, more than 2000 m')


def test_a_building_height_beyond_the_limit_names_the_building(site):
    fails(_houses(site, [_square(500020.0, 179995.0)], {"height_m": 1e5}),
          r'building "H1": height_m must be a number at most 1000; got 100000')


@pytest.mark.parametrize("coordinates, extra, pattern", [
    ([[500030, 179980], ["NaN", 180020]], "", r'pipe "W1" vertex 2: a coordinate is not a number'),
    ([[500030, 179980], [500030, 1e308]], "", r'pipe "W1" vertex 2: x, y \(500030, 1e\+308\) must be finite'),
    ([[500030, 179980, 10], [500030, 180020, -1e5]], '\nvertical = "axis"',
     r'pipe "W1" vertex 2: the pipe axis level \(Z\) must be from -10000 to 10000 m; got -100000'),
    ([[500030, 179980], [560030, 179980]], "", r'pipe "W1": the pipe is 60000 m long in plan, more than 50000 m'),
])
def test_a_utility_vertex_that_is_not_plausible_names_the_pipe(site, coordinates, extra, pattern):
    coordinates = [[math.nan if c == "NaN" else c for c in xy] for xy in coordinates]
    pipe = {"type": "Feature", "properties": {"id": "W1", "material": "pe", "outer_diameter_mm": 300, "depth_m": 1.0},
            "geometry": {"type": "LineString", "coordinates": coordinates}}
    (site / "pipes.geojson").write_text(json.dumps({"type": "FeatureCollection", "crs": BNG, "features": [pipe]}))
    fails(edit(site, "[output]", f'[utilities]\nfile = "pipes.geojson"{extra}\n\n[output]'), pattern)


def test_the_bounds_are_our_named_constants():
    assert COORDINATE_LIMIT_M == 1e7 and LEVEL_LIMIT_M == 1e4


# ----------------------------------------------------------------------------------------------------------- dates
@pytest.mark.parametrize("date, pattern", [
    ("01/03/2024", r'row 3: date "01/03/2024" is not an ISO 8601 date \(YYYY-MM-DD'),
    ("2024-03-01 8:30", r'row 3: date "2024-03-01 8:30" is not an ISO 8601 date'),
    ("20240301", r'row 3: date "20240301" is not an ISO 8601 date'),
    ("2024-02-30", r'row 3: date "2024-02-30" is not a calendar date and time'),
    ("9999-12-31T23:30-01:00", r'row 3: date "9999-12-31T23:30-01:00" is outside the dates a reading may carry '
                               r"\(1900-01-01 to 2200-12-31\)"),
    ("0001-01-01", r'row 3: date "0001-01-01" is outside the dates'),
])
def test_a_date_in_another_form_or_out_of_span_refuses_the_whole_file(tmp_path, date, pattern):
    project = make_project(tmp_path)
    path = write(tmp_path, "point_id,date,settlement_mm,face_chainage_m\nA,2024-03-01,0.5,5\n"
                           f"A,{date},0.6,10\nB,2024-03-04,0.7,20\n")
    with pytest.raises(InputError, match=pattern) as caught:
        read_readings(path, project)
    assert str(caught.value).startswith(f"{path} row 3: ") and "never guessed" in str(caught.value)


def test_day_first_dates_no_longer_lose_rows_silently(tmp_path):
    project = make_project(tmp_path)
    rows = "".join(f"A,{day:02d}/03/2024,0.{day},{day}\n" for day in range(1, 21))  # 13/03 on would not parse
    with pytest.raises(InputError, match=r'row 2: date "01/03/2024" is not an ISO 8601 date'):
        read_readings(write(tmp_path, "point_id,date,settlement_mm,face_chainage_m\n" + rows), project)


def test_implausible_reading_values_are_left_out_and_reported(tmp_path):
    project = make_project(tmp_path)
    path = write(tmp_path, "point_id,date,settlement_mm,face_chainage_m\nA,2024-03-01,0.5,5\n"
                           "B,2024-03-02,1e308,10\nC,2024-03-02,0.7,1e16\n")
    r = read_readings(path, project)
    assert list(r.line) == [2] and [x.line for x in r.left_out] == [3, 4]
    assert "settlement_mm must be a number from -10000 to 10000; got \"1e308\"" in r.left_out_messages()[0]
    assert "face_chainage_m 1e+16 is outside drive" in r.left_out_messages()[1]


# ------------------------------------------------------------------------------------------------------ attributes
def test_case_clashing_and_date_attributes_reach_the_geopackage(site, tmp_path_factory):
    rings = [_square(500020.0, 179995.0), _square(500040.0, 179995.0)]
    path = _houses(site, rings)
    text = json.loads((site / "houses.geojson").read_text())
    for feature, use, built, surveyed in zip(text["features"], ("shop", "home"), ("1901-05-01", None),
                                             ("2020-01-02T03:04:05Z", None)):
        feature["properties"].update(use=use, USE=use.upper(), built=built, surveyed=surveyed)
    (site / "houses.geojson").write_text(json.dumps(text))
    project = load_project(path)
    assert str(project.buildings.attributes["built"].dtype).startswith("datetime64")  # read as a date, not text
    layers = gis_out.frames(settle.run(project))
    out = tmp_path_factory.mktemp("out") / "houses.gpkg"
    gis_out.write_geopackage(out, {"buildings": layers["buildings"]})
    written = pyogrio.read_dataframe(out)
    assert list(written["use"]) == ["shop", "home"] and list(written["input_USE"]) == ["SHOP", "HOME"]
    assert written["built"][0] == "1901-05-01" and written["surveyed"][0] == "2020-01-02T03:04:05+00:00"
    assert written["built"].isna()[1]


# ------------------------------------------------------------------------------------------------- mutated project
def _toml_value(value) -> str:
    """A scalar or a list of scalars as TOML."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf") if math.isinf(value) else repr(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False).replace("\x7f", "\\u007f")
    return "[" + ", ".join(_toml_value(v) for v in value) + "]"


def _is_table_array(value) -> bool:
    return isinstance(value, list) and bool(value) and all(isinstance(item, dict) for item in value)


def to_toml(doc: dict) -> str:
    """A parsed document written back as TOML (tables and arrays of tables as headers)."""
    lines: list[str] = []

    def emit(table: dict, path: list[str]) -> None:
        for key, value in table.items():
            if not isinstance(value, dict) and not _is_table_array(value):
                lines.append(f"{json.dumps(key)} = {_toml_value(value)}")
        for key, value in table.items():
            header = ".".join(json.dumps(k) for k in path + [key])
            if isinstance(value, dict):
                lines.append(f"[{header}]")
                emit(value, path + [key])
            elif _is_table_array(value):
                for item in value:
                    lines.append(f"[[{header}]]")
                    emit(item, path + [key])

    emit(doc, [])
    return "\n".join(lines) + "\n"


def _leaves(item, path=()):
    """Paths to every scalar of a parsed document."""
    children = item.items() if isinstance(item, dict) else enumerate(item)
    for key, value in children:
        if isinstance(value, (dict, list)):
            yield from _leaves(value, path + (key,))
        else:
            yield path + (key,)


LEAVES = list(_leaves(tomllib.loads(BASE)))
NUMBERS = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.sampled_from([1e308, -1e308, 1e16, 0.0, -1.0]),
                    st.integers(min_value=-2**63, max_value=2**63 - 1))
TEXTS = st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=30)


@st.composite
def mutations(draw):
    """Up to three leaves of the test project, each replaced: a number by any float or integer, text by any text."""
    doc = tomllib.loads(BASE)
    for path in draw(st.lists(st.sampled_from(LEAVES), min_size=1, max_size=3, unique=True)):
        parent = doc
        for key in path[:-1]:
            parent = parent[key]
        old = parent[path[-1]]
        parent[path[-1]] = draw(TEXTS if isinstance(old, str) else NUMBERS)
    return doc


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(doc=mutations())
def test_a_mutated_project_loads_or_raises_an_input_error_of_one_line(doc):
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        (folder / "data").mkdir()
        (folder / "west.csv").write_text(WEST_CSV)
        (folder / "data" / "east.csv").write_text(EAST_CSV)
        (folder / "points.csv").write_text(POINTS_CSV)
        (folder / "project.toml").write_text(to_toml(doc), encoding="utf-8")
        try:
            project = load_project(folder / "project.toml")
        except InputError as error:
            assert str(error) and "\n" not in str(error)
            return
        assert np.isfinite(project.ground.groundwater_level_m)
        assert all(abs(d.start_chainage_m) <= COORDINATE_LIMIT_M for d in project.drives)


def test_attribute_names_are_made_unique_whatever_their_case_and_dates_become_text():
    import datetime

    import pandas as pd
    from shapely.geometry import Polygon

    from settle.assessments.building_tables import _input_columns
    from settle.inputs.footprints import BuildingDefaults, buildings_from_table

    table = pd.DataFrame({"id": ["A", "B"], "height_m": [5.0, 6.0], "use": ["x", "y"], "input_use": ["p", "q"],
                          "USE": ["X", "Y"], "Category": [1, 2],
                          "on": [datetime.date(2001, 2, 3), None], "at": [datetime.time(7, 5), None]})
    squares = [Polygon(_square(0.0, 0.0)), Polygon(_square(20.0, 0.0))]
    buildings = buildings_from_table(squares, table, BuildingDefaults(default_foundation_depth_m=1.0,
                                                                      default_structure="masonry"))
    columns = _input_columns(buildings)
    assert list(columns) == ["use", "input_use", "input_input_USE", "input_Category", "on", "at"]
    assert len({name.lower() for name in columns}) == len(columns)
    assert list(columns["on"]) == ["2001-02-03", None] and list(columns["at"]) == ["07:05:00", None]


def test_a_space_may_stand_for_the_t_between_date_and_time():
    # RFC 3339 section 5.6 allows it, and it cannot be read two ways.
    from settle.inputs.readings import parse_date

    assert parse_date("2024-03-01 08:30") == parse_date("2024-03-01T08:30")


@pytest.mark.parametrize("key", ["memory_limit_mb", "input_size_limit_mb"])
def test_a_limit_too_large_to_limit_anything_is_refused(site, key):
    fails(edit(site, "[output]", f"[output]\n{key} = 1e308"),
          rf"\[output\]: {key} must be more than 0 and at most 10000000; got 1e\+308")
