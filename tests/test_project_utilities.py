"""Project keys of the buried-utility assessment: [utilities]."""
import json

from settle.assessment import Assessment
from settle.inputs.project_file import load_project

from .test_project import edit, fails, site  # noqa: F401  (site is a fixture)

PIPES = {"type": "FeatureCollection",
         "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::27700"}}, "features": [
    {"type": "Feature", "properties": {"id": "W1", "material": "cast_iron", "outer_diameter_mm": 300,
                                       "depth_m": 1.0, "segment_length_m": 3.66},
     "geometry": {"type": "LineString", "coordinates": [[500030, 179980], [500030, 180020]]}}]}


def with_pipes(folder, table='[utilities]\nfile = "pipes.geojson"\n'):
    (folder / "pipes.geojson").write_text(json.dumps(PIPES))
    return edit(folder, "[output]", table + "\n[output]")


def test_utilities_are_read_and_assessed(site):
    path = with_pipes(site, '[utilities]\nfile = "pipes.geojson"\nnear_limit_fraction = 0.7\n')
    project = load_project(path)
    assert project.utilities.ids == ("W1",) and project.utility_options.near_limit_fraction == 0.7
    result = Assessment(project).greenfield().utilities().result
    assert result.utilities.status[0] in ("within limits", "near limit", "exceeds")
    assert result.utilities.max_settlement_mm[0] > 0


def test_no_utilities_table(site):
    project = load_project(site / "project.toml")
    assert project.utilities is None
    assert Assessment(project).greenfield().utilities().result.utilities is None


def test_unknown_utilities_key_and_bad_vertical(site):
    path = with_pipes(site, '[utilities]\nfile = "pipes.geojson"\nspacing_m = 0.2\n')
    fails(path, r'\[utilities\]: unknown key "spacing_m"')
    path = edit(site, "spacing_m = 0.2", 'vertical = "invert"')
    fails(path, r'\[utilities\]: vertical must be one of "depth", "axis"; got "invert"')


def test_unknown_material_names_the_pipe(site):
    PIPES["features"][0]["properties"]["material"] = "asbestos cement"
    try:
        path = with_pipes(site)
        fails(path, r'pipe "W1".*material')
    finally:
        PIPES["features"][0]["properties"]["material"] = "cast_iron"
