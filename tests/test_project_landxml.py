"""A LandXML alignment in the project file: `alignment = "route.xml"` with `alignment_name`, `alignment_z` and
`alignment_profile`; its staStart is the drive's start chainage; keys of another kind of file are refused."""
from __future__ import annotations

import math

import numpy as np
import pytest

from settle.inputs.project_file import load_project
from settle.procedure.orchestrator import Assessment

from .test_landxml import METRIC, alignment, curve, document, line, pvis
from .test_project import edit, fails, site  # noqa: F401  (site is a fixture)

E0, N0 = 500_000.0, 180_000.0  # West's launch shaft in tests/test_project.py BASE (EPSG:27700)
R = 150.0  # a left-hand arc of 150 m radius after a 40 m straight
ARC_L = 60.0
CENTRE = (E0 + 40.0, N0 + R)
END = (CENTRE[0] + R * math.sin(ARC_L / R), CENTRE[1] - R * math.cos(ARC_L / R))


def route_xml(name="West main", sta_start=250.0):
    geometry = line((E0, N0), (E0 + 40.0, N0)) + curve((E0 + 40.0, N0), CENTRE, END, "ccw", ARC_L, R)
    return alignment(geometry, pvis((sta_start, 12.0), (sta_start + 100.0, 11.0)), name=name, sta_start=sta_start)


WEST = ('alignment = "west.csv"', 'alignment = "west.xml"')


def test_a_landxml_drive_runs_with_its_stations_as_chainage_and_its_arc_in_chords(site):  # noqa: F811
    (site / "west.xml").write_text(document(route_xml()))
    project = load_project(edit(site, *WEST))
    west = project.drives[0]
    assert west.start_chainage_m == 250.0 and west.vertical == "axis"
    route = Assessment(project).route().drives[0]
    assert route.chainage_m[0] == 250.0
    # chord rule: every vertex on the arc lies on the circle, and the chords depart from it by at most 5 mm
    # (sagitta c^2 / 8R, from the circle's geometry)
    on_arc = route.axis_xyz_m[route.axis_xyz_m[:, 0] > E0 + 40.0 + 1e-6, :2]
    np.testing.assert_allclose(np.hypot(*(on_arc - CENTRE).T), R, atol=1e-6)
    chord = np.hypot(*np.diff(route.axis_xyz_m[:, :2], axis=0).T)
    assert np.max(chord[1:] ** 2 / (8 * R)) <= 0.005 + 1e-9
    # levels: the 1 % grade of the profile at each vertex's plan station (along the arc: 40 m + R x its angle)
    xy = route.axis_xyz_m[:, :2]
    angle = np.arctan2(xy[:, 0] - CENTRE[0], CENTRE[1] - xy[:, 1])
    station = np.where(xy[:, 0] > E0 + 40.0 + 1e-6, 40.0 + R * angle, xy[:, 0] - E0)
    np.testing.assert_allclose(route.axis_xyz_m[:, 2], 12.0 - 0.01 * station, atol=1e-9)


def test_alignment_name_chooses_among_several_and_invert_levels_need_the_bore(site):  # noqa: F811
    (site / "west.xml").write_text(document(route_xml("A"), route_xml("B", sta_start=0.0)))
    fails(edit(site, *WEST), r'west\.xml: holds 2 alignments; choose one with alignment_name .* "A", "B"')
    path = edit(site, 'alignment = "west.xml"', 'alignment = "west.xml"\nalignment_name = "B"')
    assert load_project(path).drives[0].start_chainage_m == 0.0
    path = edit(site, 'alignment_name = "B"', 'alignment_name = "B"\nalignment_z = "invert"')
    fails(path, r"the alignment gives invert levels .* inner_diameter_m is needed")


@pytest.mark.parametrize("extra, pattern", [
    ('start_chainage_m = 10.0', r"start_chainage_m = 10 but the LandXML alignment starts at station 250\.000"),
    ('alignment_z = "depth"', r'alignment_z must be one of "axis", "invert"'),
    ('alignment_layer = "x"', r"alignment_layer applies only to a GIS alignment; west\.xml is a LandXML file"),
    ('alignment_name = 3', r"alignment_name must be non-empty text"),
    ('alignment_name = "nope"', r'"nope"'),
])
def test_landxml_keys_are_checked(site, extra, pattern):  # noqa: F811
    (site / "west.xml").write_text(document(route_xml()))
    fails(edit(site, 'alignment = "west.csv"', f'alignment = "west.xml"\n{extra}'), pattern)


def test_landxml_keys_with_a_csv_alignment_are_refused(site):  # noqa: F811
    fails(edit(site, 'alignment = "west.csv"', 'alignment = "west.csv"\nalignment_name = "A"'),
          r"alignment_name applies only to a LandXML alignment; west\.csv is a CSV")


def test_a_landxml_in_feet_is_refused(site):  # noqa: F811
    feet = METRIC.replace('linearUnit="meter"', 'linearUnit="foot"')
    (site / "west.xml").write_text(document(route_xml(), units=feet))
    fails(edit(site, *WEST), r"west\.xml.*metres only")
