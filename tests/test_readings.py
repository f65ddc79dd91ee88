"""Tests of the monitoring readings reader (settle.readings).

Every input is written into pytest's tmp_path. A bad row must be left out and reported by its line number (header =
line 1) with the reason; a problem with the whole file is one InputError naming the file (checked with match=).
"""
from __future__ import annotations

import re

import numpy as np
import pytest

from settle.errors import InputError
from settle.inputs.project_file import load_project
from settle.inputs.readings import SAME_PLACE_M, parse_date, read_readings

PROJECT = """\
[project]
name = "Readings test"
crs = "EPSG:27700"

[ground]
surface_level_m = 10.0
groundwater_level_m = 8.0

[[ground.layers]]
name = "Clay"
top_level_m = 10.0
unit_weight_kn_m3 = 19.0
trough_width_k = 0.5
behaviour = "cohesive"

[[drives]]
name = "North"
alignment = "north.csv"
outer_diameter_m = 1.8
volume_loss_pct = 1.0
{second}
{points}
[output]
grid_spacing_m = 1.0
contour_levels_mm = [1, 5]
"""
SECOND = """
[[drives]]
name = "South"
alignment = "south.csv"
outer_diameter_m = 1.2
volume_loss_pct = 1.0
"""
POINTS = """
[points]
file = "points.csv"
"""


def make_project(folder, two_drives=False, points=True):
    (folder / "north.csv").write_text("x,y,z\n0,0,4\n100,0,4\n")
    (folder / "south.csv").write_text("x,y,z\n0,-50,5\n80,-50,5\n")
    (folder / "points.csv").write_text("id,x,y,depth_m\nA,20,0,0\nB,20,3,0\nC,40,0,1.5\n")
    text = PROJECT.format(second=SECOND if two_drives else "", points=POINTS if points else "")
    (folder / "project.toml").write_text(text)
    return load_project(folder / "project.toml")


def write(folder, text, name="readings.csv"):
    path = folder / name
    path.write_text(text)
    return path


GOOD = """\
point_id,date,settlement_mm,face_chainage_m
A,2024-03-01,0.0,0
B,2024-03-01,0.1,0
A,2024-03-02T08:30,1.5,25
B,2024-03-02T09:30+01:00,0.9,25
C,2024-03-03T12:00:00Z,2.25,45.5
"""


def test_good_file_is_read_as_given(tmp_path):
    project = make_project(tmp_path)
    r = read_readings(write(tmp_path, GOOD), project)
    assert len(r) == 5 and r.left_out_count == 0
    assert list(r.point_id) == ["A", "B", "A", "B", "C"]
    # Places and depths come from the [points] table.
    np.testing.assert_array_equal(r.x_m, [20, 20, 20, 20, 40])
    np.testing.assert_array_equal(r.y_m, [0, 3, 0, 3, 0])
    np.testing.assert_array_equal(r.depth_m, [0, 0, 0, 0, 1.5])
    # Readings used as given: the first reading of B (0.1 mm) is not re-zeroed.
    np.testing.assert_array_equal(r.settlement_mm, [0.0, 0.1, 1.5, 0.9, 2.25])
    np.testing.assert_array_equal(r.face_chainage_m, [0, 0, 25, 25, 45.5])
    np.testing.assert_array_equal(r.drive, [0, 0, 0, 0, 0])
    np.testing.assert_array_equal(r.line, [2, 3, 4, 5, 6])
    assert r.date.dtype == np.dtype("datetime64[s]")
    # 09:30+01:00 is 08:30 UTC; a time without an offset is taken as UTC as written.
    assert str(r.date[3]) == "2024-03-02T08:30:00" and str(r.date[2]) == "2024-03-02T08:30:00"
    assert str(r.date[4]) == "2024-03-03T12:00:00"


@pytest.mark.parametrize("text, expected", [
    ("2024-03-01", "2024-03-01T00:00:00"),
    ("2024-03-01T23:59:59.7", "2024-03-01T23:59:59"),  # kept to the second
    ("2024-03-01T06:00-05:00", "2024-03-01T11:00:00"),
    ("2024-03-01T00:30Z", "2024-03-01T00:30:00"),
])
def test_parse_date(text, expected):
    assert str(parse_date(text)) == expected


@pytest.mark.parametrize("row, reason", [
    (",2024-03-02,1.0,10", r"row 3: point_id is empty"),
    ("A,2024-03-02,1;2,10", r'row 3: settlement_mm is not a number; got "1;2"'),
    ("A,2024-03-02,,10", r'row 3: settlement_mm is not a number; got ""'),
    ("A,2024-03-02,nan,10", r'row 3: settlement_mm must be a finite number; got "nan"'),
    ("A,2024-03-02,1.0,ten", r'row 3: face_chainage_m is not a number; got "ten"'),
    ("A,2024-03-02,1.0,100.5", r'row 3: face_chainage_m 100.5 is outside drive "North" \(chainage 0.00 to 100.00 m\)'),
    ("A,,1.0,10", r"row 3: date is empty"),
    ("Z9,2024-03-02,1.0,10", r'row 3: point "Z9": the row gives no x, y and it is not in the \[points\] table'),
    ("A,2024-03-01,1.0,10", r'row 3: point "A" already has a reading dated 2024-03-01T00:00:00 \(row 2\); duplicate'),
    ("A,2024-02-28,1.0,10", r"row 3: date 2024-02-28T00:00:00 is before the reading of point \"A\" on row 2"),
])
def test_bad_rows_are_left_out_with_their_line_and_reason(tmp_path, row, reason):
    project = make_project(tmp_path)
    path = write(tmp_path, "point_id,date,settlement_mm,face_chainage_m\nA,2024-03-01,0.5,5\n" + row + "\n"
                 "B,2024-03-04,0.7,20\n")
    r = read_readings(path, project)
    assert list(r.line) == [2, 4] and r.left_out_count == 1
    assert r.left_out[0].line == 3
    (message,) = r.left_out_messages()
    assert message.startswith(f"{path} row 3: ")
    assert re.search(reason, message), message


def test_face_that_moves_back_is_left_out(tmp_path):
    project = make_project(tmp_path)
    path = write(tmp_path, "point_id,date,settlement_mm,face_chainage_m\nA,2024-03-01,0.5,30\nA,2024-03-02,0.6,20\n"
                 "A,2024-03-03,0.8,40\n")
    r = read_readings(path, project)
    assert list(r.line) == [2, 4]
    assert "row 3: face_chainage_m 20 is behind the face of the earlier reading of point \"A\" on row 2 (30 m)" in \
        r.left_out_messages()[0]


def test_each_rejection_is_counted(tmp_path):
    project = make_project(tmp_path)
    path = write(tmp_path, "point_id,date,settlement_mm,face_chainage_m\nA,2024-03-01,0.5,5\nA,2024-03-01,0.6,5\n"
                 "Q,2024-03-01,0.1,5\nB,,0.1,5\nB,2024-03-05,x,5\nC,2024-03-05,1.0,9\n")
    r = read_readings(path, project)
    assert len(r) == 2 and r.left_out_count == 4
    assert [x.line for x in r.left_out] == [3, 4, 5, 6]


def test_rows_may_carry_their_own_place(tmp_path):
    project = make_project(tmp_path)
    path = write(tmp_path, "point_id,x,y,depth_m,date,settlement_mm,face_chainage_m\n"
                 "N1,50,-4,,2024-03-01,0.2,10\n"        # not in [points]: its own place, at the surface
                 "N1,,,,2024-03-02,0.4,20\n"            # placed by the row above
                 "A,20.05,0,,2024-03-01,0.3,10\n"       # agrees with [points] within SAME_PLACE_M
                 "B,21,3,,2024-03-01,0.3,10\n"          # 1 m from its [points] place: left out
                 "N1,50.5,-4,,2024-03-03,0.5,30\n"      # 0.5 m from its first place: left out
                 "N1,50,-4,2.0,2024-03-04,0.5,30\n"     # another depth: left out
                 "C,40,,,2024-03-01,0.3,10\n")          # only one of x, y
    r = read_readings(path, project)
    assert list(r.line) == [2, 3, 4]
    np.testing.assert_allclose(r.x_m, [50, 50, 20.05])
    np.testing.assert_allclose(r.y_m, [-4, -4, 0])
    np.testing.assert_allclose(r.depth_m, [0, 0, 0])
    messages = r.left_out_messages()
    assert 'row 5: point "B": x, y are 1.000 m from its place in the [points] table' in messages[0]
    assert f"within {SAME_PLACE_M:g} m" in messages[0]
    assert 'row 6: point "N1": x, y are 0.500 m from its place on row 2' in messages[1]
    assert 'row 7: point "N1": depth_m 2 differs from its depth on row 2 (0 m)' in messages[2]
    assert 'row 8: point "C": give both x and y, or neither' in messages[3]


def test_points_without_a_points_table(tmp_path):
    project = make_project(tmp_path, points=False)
    path = write(tmp_path, "point_id,x,y,date,settlement_mm,face_chainage_m\nP,10,1,2024-03-01,0.2,10\n"
                 "Q,,,2024-03-01,0.2,10\n")
    r = read_readings(path, project)
    assert list(r.point_id) == ["P"]
    assert 'row 3: point "Q": the row gives no x, y and the project has no [points] table' in r.left_out_messages()[0]


def test_depth_must_not_be_negative(tmp_path):
    project = make_project(tmp_path)
    path = write(tmp_path, "point_id,depth_m,date,settlement_mm,face_chainage_m\nA,-1,2024-03-01,0.2,10\n"
                 "C,,2024-03-01,0.2,10\nB,2.5,2024-03-01,0.1,10\n")
    r = read_readings(path, project)
    np.testing.assert_array_equal(r.depth_m, [1.5, 2.5])  # C from the [points] table; B's own depth
    assert "row 2: depth_m must be at least 0 (below the ground surface); got \"-1\"" in r.left_out_messages()[0]


def test_several_drives_need_the_drive_column(tmp_path):
    project = make_project(tmp_path, two_drives=True)
    with pytest.raises(InputError, match=r'readings.csv: missing column "drive"; the project has 2 drives '
                                         r'\("North", "South"\)'):
        read_readings(write(tmp_path, GOOD), project)
    path = write(tmp_path, "point_id,drive,date,settlement_mm,face_chainage_m\nA,North,2024-03-01,0.2,10\n"
                 "S1,South,2024-03-01,0.2,70\n"      # South's own place is needed: S1 is not in [points]
                 "A,,2024-03-02,0.3,20\nA,West,2024-03-03,0.3,20\nB,South,2024-03-01,0.1,79.5\n"
                 "C,South,2024-03-01,0.1,80.5\n")
    r = read_readings(path, project)
    assert list(r.line) == [2, 6] and list(r.drive) == [0, 1]
    assert r.drive_names == ("North", "South")
    messages = r.left_out_messages()
    assert 'row 3: point "S1": the row gives no x, y' in messages[0]
    assert "row 4: drive is empty; the project has 2 drives" in messages[1]
    assert 'row 5: drive "West" is not a drive of the project; drives: "North", "South"' in messages[2]
    assert 'row 7: face_chainage_m 80.5 is outside drive "South" (chainage 0.00 to 80.00 m)' in messages[3]


def test_one_drive_may_be_named(tmp_path):
    project = make_project(tmp_path)
    path = write(tmp_path, "point_id,drive,date,settlement_mm,face_chainage_m\nA,North,2024-03-01,0.2,10\n"
                 "B,,2024-03-01,0.2,10\nC,South,2024-03-01,0.2,10\n")
    r = read_readings(path, project)
    assert list(r.drive) == [0, 0] and r.left_out_count == 1


@pytest.mark.parametrize("text, message", [
    ("point_id,date,settlement_mm\nA,2024-03-01,1\n", r'readings.csv: missing column "face_chainage_m"'),
    ("point_id;date;settlement_mm;face_chainage_m\n", r"missing column \"point_id\".*seems to use ';'"),
    ("point_id,date,settlement_mm,face_chainage_m\n", r"readings.csv: no readings below the header"),
    ("point_id,date,settlement_mm,face_chainage_m\nA,2024-03-01,x,1\nB,2024-03-01,1,-4\n",
     r'readings.csv: all 2 readings were left out; first: .*readings.csv row 2: settlement_mm is not a number'),
    ("point_id,x,date,settlement_mm,face_chainage_m\nA,1,2024-03-01,1,1\n", r'readings.csv: missing column "y"'),
])
def test_whole_file_problems(tmp_path, text, message):
    project = make_project(tmp_path)
    with pytest.raises(InputError, match=message):
        read_readings(write(tmp_path, text), project)


def test_no_way_to_place_the_points(tmp_path):
    project = make_project(tmp_path, points=False)
    with pytest.raises(InputError, match=r"readings.csv: no x, y columns and the project has no \[points\] table"):
        read_readings(write(tmp_path, GOOD), project)


def test_subset_keeps_the_rows_left_out(tmp_path):
    project = make_project(tmp_path)
    r = read_readings(write(tmp_path, GOOD + "A,,1,1\n"), project)
    s = r.subset(r.point_id == "A")
    assert list(s.line) == [2, 4] and s.left_out_count == 1 and s.drive_names == ("North",)
