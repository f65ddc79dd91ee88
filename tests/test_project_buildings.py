"""Project keys of the building damage assessment: [buildings]."""
import json

from settle.assessment import Assessment
from settle.inputs.project_file import load_project

from .test_project import edit, fails, site  # noqa: F401  (site is a fixture)

HOUSES = {"type": "FeatureCollection",
          "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::27700"}},
          "features": [
              {"type": "Feature", "properties": {"id": "H1", "height_m": 8.0},
               "geometry": {"type": "Polygon", "coordinates": [[[500020, 179995], [500028, 179995],
                                                               [500028, 180008], [500020, 180008],
                                                               [500020, 179995]]]}}]}


def with_houses(folder, table):
    (folder / "houses.geojson").write_text(json.dumps(HOUSES))
    return edit(folder, "[output]", '[buildings]\nfile = "houses.geojson"\n' + table + "\n[output]")


def test_buildings_are_read_with_defaults_and_assessed(site):
    path = with_houses(site, 'default_foundation_depth_m = 1.0\ndefault_structure = "masonry"\n'
                             "[buildings.e_over_g]\nterrace = 3.0\n")
    project = load_project(path)
    assert project.buildings.ids == ("H1",)
    assert project.buildings.foundation_depth_m[0] == 1.0 and project.buildings.e_over_g[0] == 2.6
    result = Assessment(project).greenfield().buildings().result
    assert result.buildings.category[0] in range(5)


def test_missing_attribute_without_default_names_the_building(site):
    path = with_houses(site, 'default_structure = "masonry"\n')
    fails(path, r'houses.geojson layer "houses": no attribute "foundation_depth_m" and no .*'
                r"\[buildings\] default_foundation_depth_m")


def test_unknown_key_and_bad_correction(site):
    path = with_houses(site, "poisson = 0.3\n")
    fails(path, r'\[buildings\]: unknown key "poisson"; did you mean "poisson_ratio"')
    path = edit(site, "poisson = 0.3", 'stiffness_correction = "rigid"')
    fails(path, r"\[buildings\]: stiffness_correction must be one of")
