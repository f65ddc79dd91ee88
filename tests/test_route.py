"""Route geometry: vertical references, chainage, depth and cover, checks an engineer expects, tunnel elements."""
import numpy as np
import pytest

from settle.errors import InputError
from settle.engine.elements import tunnel_elements
from settle.inputs.ground import GroundModel
from settle.inputs.model import Drive, Ground, Layer, Reach, Surface
from settle.inputs.route import build_drive, chainage

from . import builders as b

SAND = Layer("sand", 10.0, 19.0, 0.35, "granular")
CLAY = Layer("clay", 7.0, 19.5, 0.5, "cohesive")


def model(surface=None, layers=(SAND, CLAY)):
    return GroundModel(Ground(surface or Surface(level_m=10.0), 8.0, layers))


def drive(v, vertical="axis", xy=((0, 0), (30, 40), (90, 120)), **kw):
    kw.setdefault("inner_diameter_m", 1.6)
    return Drive("D", np.asarray(xy, float), np.asarray(v, float), vertical, 2.0, 1.0, **kw)


def test_chainage_is_along_the_3d_axis():
    # 3-4-5 triangles: plan 50 m then 100 m, with level changes of 0 and 0.6 m.
    xyz = np.array([[0, 0, 4.0], [30, 40, 4.0], [90, 120, 4.6]])
    assert chainage(xyz, 100.0) == pytest.approx([100.0, 150.0, 150.0 + np.hypot(100.0, 0.6)])


def test_axis_invert_and_depth_give_the_same_route():
    g = model()
    axis, _ = build_drive(drive([4.0, 4.0, 3.5]), g)
    invert, _ = build_drive(drive([3.2, 3.2, 2.7], "invert"), g)  # axis = invert + ID/2 = invert + 0.8
    depth, _ = build_drive(drive([6.0, 6.0, 6.5], "depth"), g)  # axis = surface 10 - depth
    for other in (invert, depth):
        np.testing.assert_allclose(other.axis_xyz_m, axis.axis_xyz_m)
    assert axis.axis_depth_m == pytest.approx([6.0, 6.0, 6.5])
    assert axis.cover_m == pytest.approx([5.0, 5.0, 5.5])  # depth - OD/2


def test_depth_below_a_triangulated_surface():
    # A plane z = 12 - 0.01 x through survey points: depth is taken below the local surface.
    pts = np.array([[-10, -10, 12.1], [200, -10, 10.0], [200, 200, 10.0], [-10, 200, 12.1]])
    g = model(Surface(points_xyz=pts, source="survey.csv"))
    d, _ = build_drive(drive([5.0, 5.0, 5.0], "depth"), g)
    assert d.axis_xyz_m[:, 2] == pytest.approx(12.0 - 0.01 * np.array([0, 30, 90]) - 5.0)
    assert d.axis_depth_m == pytest.approx([5.0, 5.0, 5.0])


def test_route_off_the_triangulated_surface_is_an_input_error():
    pts = np.array([[-10, -10, 10], [50, -10, 10], [50, 50, 10], [-10, 50, 10]])
    g = model(Surface(points_xyz=pts, source="survey.csv"))
    with pytest.raises(InputError, match=r"leaves the triangulated ground surface \(survey.csv\) at chainage 150.0"):
        build_drive(drive([4.0, 4.0, 4.0]), g, "p.toml")


def test_crown_above_ground_is_an_input_error():
    with pytest.raises(InputError, match=r'p.toml \[\[drives\]\] "D": the crown is above the ground surface at '
                                         r"chainage 150.2 m \(cover -0.50 m"):
        build_drive(drive([4.0, 4.0, 9.5]), model(), "p.toml")  # the axis rises to 9.5 m at the end, 150.2 m


def test_crown_above_a_dip_in_the_surface_between_vertices_is_caught():
    # A river channel between two vertices: the surface dips to 6 m at x = 50 while the vertices are well covered.
    pts = np.array([[-10, -10, 10], [49, -10, 10], [50, -10, 6], [51, -10, 10], [120, -10, 10],
                    [-10, 10, 10], [49, 10, 10], [50, 10, 6], [51, 10, 10], [120, 10, 10]], float)
    g = model(Surface(points_xyz=pts, source="survey.csv"))
    with pytest.raises(InputError, match="crown is above the ground surface at chainage 50.0 m"):
        build_drive(drive([5.5, 5.5], xy=((0, 0), (100, 0))), g)


def test_low_cover_warns_with_the_chainage():
    # Cover under twice the outer diameter is warned about, not refused (rule of thumb of the trade, common practice).
    d, warnings = build_drive(drive([6.0, 6.5, 6.5], xy=((0, 0), (50, 0), (100, 0))), model())
    assert d.cover_m.min() == pytest.approx(2.5)
    assert len(warnings) == 1
    assert "cover is less than 2 x the outer diameter (4.00 m" in warnings[0]
    assert "at chainage 0-100 m" in warnings[0] and "smallest 2.50 m" in warnings[0]
    _, none = build_drive(drive([4.0, 4.0, 4.0]), model())
    assert none == []


def test_face_and_reaches_outside_the_drive_are_input_errors():
    with pytest.raises(InputError, match="face_chainage_m = 400 is outside the drive"):
        build_drive(drive([4.0, 4.0, 4.0], face_chainage_m=400.0), model())
    with pytest.raises(InputError, match=r"\[\[drives.reaches\]\] #1: chainage 100-300 m is outside the drive"):
        build_drive(drive([4.0, 4.0, 4.0], reaches=(Reach(100.0, 300.0, 2.0),)), model())


def test_elements_stop_at_the_face_and_split_at_reaches_and_bends():
    bent = ((0, 0), (50, 0), (100, 50))
    d = drive([4.0, 4.0, 4.0], xy=bent, face_chainage_m=120.0, reaches=(Reach(20.0, 30.0, 2.0, 0.45),))
    g = model()
    geometry, _ = build_drive(d, g)
    e = tunnel_elements(d, geometry, g, 0)
    assert e.chainage_from_m[0] == 0.0 and e.chainage_to_m[-1] == pytest.approx(120.0)
    cuts = set(np.round(e.chainage_to_m, 9))
    assert {20.0, 30.0, 50.0} <= cuts  # reach ends and the bend at the vertex (chainage 50 m)
    inside = (e.chainage_from_m >= 20) & (e.chainage_to_m <= 30)
    assert np.all(e.volume_loss[inside] == 0.02) and np.all(e.trough_width_k[inside] == 0.45)
    assert np.all(e.volume_loss[~inside] == 0.01)
    # K from the layers, thickness weighted: 3 m of sand (0.35) and 3 m of clay (0.5) above the axis at 6 m depth.
    assert e.trough_width_k[~inside] == pytest.approx(0.425)
    assert geometry.lost_volume_m3 == pytest.approx(np.pi * 4 / 4 * (0.01 * 110 + 0.02 * 10))


def test_a_sloping_drive_is_cut_where_its_depth_changes():
    # Axis falls 3 m over 100 m: depth 4 -> 7 m, cut so that no element's depth varies by more than 2 %.
    d = drive([6.0, 3.0], xy=((0, 0), (100, 0)))
    g = model()
    geometry, _ = build_drive(d, g)
    e = tunnel_elements(d, geometry, g, 0)
    assert len(e) > 10
    span = 0.03 * (e.chainage_to_m - e.chainage_from_m)  # depth change over each element (3 m per ~100 m)
    assert np.all(span <= 0.02 * e.axis_depth_m * 1.0001 + 0.03 * 2.0)
    # Volume is that of the 3-D length.
    assert geometry.lost_volume_m3 == pytest.approx(0.01 * np.pi * np.hypot(100, 3))


def test_elements_do_not_depend_on_redundant_vertices():
    straight = b.drive([[0, 0], [100, 0]], 4.0)
    many = b.drive(np.column_stack([np.linspace(0, 100, 21), np.zeros(21)]), 4.0)
    g = GroundModel(b.ground())
    ea = tunnel_elements(straight, build_drive(straight, g)[0], g, 0)
    eb = tunnel_elements(many, build_drive(many, g)[0], g, 0)
    assert len(ea) == len(eb) == 1
