"""The superposition engine: closed forms reproduced, identities that hold for any route.

Reference tunnel of methods.md section 1 (D = 3 m, z0 = 6 m, K = 0.5, VL = 1 %: i = 3 m, Smax = 9.3999 mm).
"""
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from settle.assessment import Assessment
from settle.inputs.model import Layer
from settle.engine.troughs import excavated_area, straight_tunnel_movements

from . import builders as b

VS = 0.01 * excavated_area(3.0)


def run(*drives, **kw):
    return Assessment(b.project(drives, **kw)).result


def test_straight_drive_equals_closed_form_on_the_grid():
    # A straight level drive is one element: the grid must equal the Attewell & Woodman closed form (methods.md s.2).
    r = run(b.drive([[0, 0], [100, 0]], 4.0))
    ref = straight_tunnel_movements(r.grid.x_m, r.grid.y_m, 100.0, VS, 3.0, 6.0)
    np.testing.assert_allclose(r.grid.settlement_mm, ref["settlement"] * 1e3, atol=1e-9)
    np.testing.assert_allclose(r.grid.ux_mm, ref["du"] * 1e3, atol=1e-9)
    np.testing.assert_allclose(r.grid.uy_mm, ref["dv"] * 1e3, atol=1e-9)
    assert r.grid.settlement_mm.max() == pytest.approx(9.3999, abs=1e-4)  # Peck (1969) Smax, methods.md s.1


def test_grid_covers_every_place_settling_more_than_the_threshold():
    # The 0.1 mm contour of the plane-strain trough lies at y = i sqrt(2 ln(Smax/0.1)) (Peck 1969 Gaussian).
    r = run(b.drive([[0, 0], [300, 0]], 4.0))
    y_edge = 3.0 * np.sqrt(2 * np.log(9.3999 / 0.1))
    mid = np.abs(r.grid.x_m - 150) < 0.5
    assert r.grid.y_m[mid].max() == pytest.approx(np.floor(y_edge), abs=1e-9)
    assert r.grid.settlement_mm.min() >= 0.1


def test_half_settlement_above_launch_shaft_and_face():
    # Attewell & Woodman (1982): Smax/2 above the start and above the face (methods.md section 2).
    p = b.points([[0, 0], [150, 0], [75, 0]])
    r = run(b.drive([[0, 0], [300, 0]], 4.0, face_chainage_m=150.0), points=p)
    assert r.points.settlement_mm == pytest.approx([9.3999 / 2, 9.3999 / 2, 9.3999], abs=1e-4)


def test_many_collinear_vertices_give_the_same_field():
    # Superposition: lengths of one straight tunnel add up to the whole (Phi differences telescope).
    one = run(b.drive([[0, 0], [120, 0]], 4.0))
    xs = np.concatenate([[0.0], np.sort(np.random.default_rng(1).uniform(0, 120, 37)), [120.0]])
    many = run(b.drive(np.column_stack([xs, 0 * xs]), 4.0))
    np.testing.assert_allclose(many.tiles.settlement_mm[(0, 0)][:5, :5], one.tiles.settlement_mm[(0, 0)][:5, :5])
    np.testing.assert_allclose(many.grid.settlement_mm, one.grid.settlement_mm, atol=1e-9)


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(angle=st.floats(0, 360), x0=st.floats(-1e4, 1e4), y0=st.floats(-1e4, 1e4))
def test_rotation_and_translation_invariance(angle, x0, y0):
    # Symmetry: the movements do not depend on where the drive is or which way it points.
    a = np.radians(angle)
    rot = np.array([[np.cos(a), -np.sin(a)], [np.sin(a), np.cos(a)]])
    local = np.array([[0.0, 0.0], [60.0, 0.0]])
    probe = np.array([[30.0, 2.0], [61.0, -4.0], [-2.0, 1.0], [30.0, 5.2]])
    place = lambda p: p @ rot.T + [x0, y0]  # noqa: E731
    ref = run(b.drive(local, 4.0), points=b.points(probe)).points
    got = run(b.drive(place(local), 4.0), points=b.points(place(probe))).points
    np.testing.assert_allclose(got.settlement_mm, ref.settlement_mm, atol=1e-9)
    np.testing.assert_allclose(got.horizontal_mm, ref.horizontal_mm, atol=1e-9)
    np.testing.assert_allclose(got.strain_max_ue, ref.strain_max_ue, atol=1e-6)
    np.testing.assert_allclose(got.strain_min_ue, ref.strain_min_ue, atol=1e-6)
    np.testing.assert_allclose(got.tilt, ref.tilt, atol=1e-12)
    np.testing.assert_allclose(np.column_stack([got.ux_mm, got.uy_mm]), np.column_stack([ref.ux_mm, ref.uy_mm]) @ rot.T,
                               atol=1e-9)


def test_transverse_strain_zero_at_i_and_greatest_tension_at_root3_i():
    # O'Reilly & New (1982): strain zero at y = i, tension greatest at y = sqrt(3) i (methods.md section 3).
    y = np.linspace(0, 12, 12001)
    p = b.points(np.column_stack([np.full_like(y, 250.0), y]))
    r = run(b.drive([[0, 0], [500, 0]], 4.0), points=p).points
    eps = r.strain_yy_ue
    assert eps[np.argmin(np.abs(y - 3.0))] == pytest.approx(0.0, abs=1e-6)
    assert y[np.argmax(eps)] == pytest.approx(np.sqrt(3) * 3.0, abs=1e-3)
    assert eps.max() == pytest.approx(699.13, abs=0.01)  # +0.06991 % (methods.md section 3, computed there)
    assert r.strain_max_ue[0] == pytest.approx(0.0, abs=1e-6)  # along the axis, far from the ends: no strain
    assert r.strain_min_ue[0] == pytest.approx(-1566.64, abs=0.01)  # -0.15666 % at y = 0 (methods.md s.3)


def test_reversing_a_complete_drive_changes_nothing():
    # Symmetry: a complete drive settles the ground the same whichever shaft it was launched from.
    xy = b.arc(200.0, 40.0, 15)
    fwd = run(b.drive(xy, 4.0), points=b.points(xy[::3] + [1.0, 2.0]))
    back = run(b.drive(xy[::-1], 4.0), points=b.points(xy[::3] + [1.0, 2.0]))
    np.testing.assert_allclose(back.points.settlement_mm, fwd.points.settlement_mm, atol=1e-9)
    np.testing.assert_allclose(back.points.ux_mm, fwd.points.ux_mm, atol=1e-9)


def _point_sink_reference(xy_axis, z_axis, x, y, n=20001):
    """Settlement by numerical integration of point sinks along a polyline (methods.md section 2)."""
    seg = np.diff(xy_axis, axis=0)
    s = np.concatenate([[0.0], np.cumsum(np.hypot(*seg.T))])
    t = np.linspace(0.0, s[-1], n)
    sx, sy = np.interp(t, s, xy_axis[:, 0]), np.interp(t, s, xy_axis[:, 1])
    ds = np.full(n, s[-1] / (n - 1))
    ds[[0, -1]] /= 2
    i = 0.5 * z_axis
    r2 = (x[:, None] - sx) ** 2 + (y[:, None] - sy) ** 2
    return (VS * ds / (2 * np.pi * i * i) * np.exp(-r2 / (2 * i * i))).sum(axis=1)


def test_curved_drive_matches_numerical_point_sinks():
    # A curve of radius 60 m (tight for a pipejack) drawn with 2 m chords: the superposed exact lengths equal the
    # point-sink integral along the same polyline (methods.md section 2, elemental sinks); what remains is the
    # quadrature error of the 20 001-sink sum (about 3e-7 mm).
    xy = b.arc(60.0, 90.0, 48)
    probe = np.concatenate([b.arc(60.0 - dr, 90.0, 9) for dr in (-6, -3, 0, 3, 6)])
    r = run(b.drive(xy, 4.0), points=b.points(probe), precision_mm=1e-9)
    ref = _point_sink_reference(xy, 6.0, probe[:, 0], probe[:, 1]) * 1e3
    assert np.abs(r.points.settlement_mm - ref).max() < 1e-5


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    radius=st.floats(40, 600), angle=st.floats(5, 120), n=st.integers(3, 40), depth=st.floats(3.5, 12),
    grade=st.floats(-0.02, 0.02), face=st.floats(0.2, 1.0), vl=st.floats(0.3, 3.0),
)
def test_volume_conservation_on_curved_inclined_routes(radius, angle, n, depth, grade, face, vl):
    # Identity: the volume of the surface trough equals the volume lost along the excavated length
    # (VL pi D^2/4 per metre of 3-D length), whatever the curvature, grade and face position.
    xy = b.arc(radius, angle, n)
    s = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy, axis=0).T))])
    z = np.minimum(10.0 - depth + grade * s, 10.0 - 3.0)  # keep at least 3 m of depth
    length = np.sum(np.sqrt(np.diff(s) ** 2 + np.diff(z) ** 2))  # chainage runs along the 3-D polyline
    d = b.drive(xy, z, vl_pct=vl, face_chainage_m=None if face == 1.0 else face * length * 0.999)
    r = run(d, spacing=0.5)
    assert r.lost_volume_m3 > 0
    assert r.settlement_volume_m3 == pytest.approx(r.lost_volume_m3, rel=2e-3)


def test_superposition_of_two_drives():
    # Superposition: the movements of two drives are the sums of their separate movements.
    one = b.drive([[0, 0], [80, 0]], 4.0, name="one")
    two = b.drive(b.arc(100, 30, 12, start=(0, 9)), 5.0, name="two", diameter=2.0, vl_pct=1.5)
    probe = b.points([[10, 4.5], [40, 3], [79, 8], [20, -3]])
    both = run(one, two, points=probe).points
    a = run(one, points=probe).points
    c = run(two, points=probe).points
    for f in ("settlement_mm", "ux_mm", "uy_mm", "strain_xx_ue", "strain_yy_ue", "strain_xy_ue", "slope_x"):
        np.testing.assert_allclose(getattr(both, f), getattr(a, f) + getattr(c, f), atol=1e-9)


def test_points_at_depth_use_the_subsurface_trough_and_refuse_below_the_crown():
    # Mair et al. (1993) in clay: at z = 3 m over the reference tunnel i = 2.025 m and Smax = 13.926 mm
    # (methods.md section 4, computed there). A point below the crown has no defined value.
    p = b.points([[250, 0], [250, 0], [250, 30]], depth=[3.0, 5.0, 5.0])
    r = run(b.drive([[0, 0], [500, 0]], 4.0), points=p)
    assert r.points.settlement_mm[0] == pytest.approx(13.926, abs=1e-3)
    assert np.isnan(r.points.settlement_mm[1])
    assert r.points.settlement_mm[2] == pytest.approx(0.0, abs=1e-9)  # deep but far from the tunnel: no effect
    assert any("crown" in w for w in r.warnings)


def test_layered_trough_width():
    # Selby (1988) / New & O'Reilly (1991): 3 m of sand (K 0.35) over 3 m of clay (K 0.5) to the axis at 6 m gives
    # i = 2.55 m (methods.md section 1, from memory there): Smax = 0.3133 VL D^2 / i.
    layers = (Layer("sand", 10.0, 19, 0.35, "granular"), Layer("clay", 7.0, 19, 0.5, "cohesive"))
    r = run(b.drive([[0, 0], [400, 0]], 4.0), ground_=b.ground(layers=layers), points=b.points([[200, 0]]))
    assert r.points.settlement_mm[0] == pytest.approx(0.01 * np.pi * 9 / 4 / (np.sqrt(2 * np.pi) * 2.55) * 1e3, rel=1e-9)


def test_reach_volume_loss_applies_on_its_length():
    # Far inside a reach the settlement is the plane-strain value for the reach's volume loss (Peck 1969).
    from settle.inputs.model import Reach

    d = b.drive([[0, 0], [600, 0]], 4.0, reaches=(Reach(200.0, 400.0, 2.0, 0.4),))
    r = run(d, points=b.points([[100, 0], [300, 0]]))
    assert r.points.settlement_mm[0] == pytest.approx(9.3999, abs=1e-4)
    assert r.points.settlement_mm[1] == pytest.approx(2 * 9.3999 * 0.5 / 0.4, abs=1e-3)


def test_places_and_grid_agree_where_they_coincide():
    # Two code paths (grid rasterisation, binned places) over a curved, inclined drive give the same movements at
    # the same nodes, to the run's precision (each element's contribution is cut below 0.001 mm).
    xy = b.arc(150.0, 70.0, 30)
    s = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy, axis=0).T))])
    r = run(b.drive(xy, 4.0 - 0.01 * s, face_chainage_m=120.0))
    pick = np.random.default_rng(3).choice(len(r.grid), 400, replace=False)
    again = run(b.drive(xy, 4.0 - 0.01 * s, face_chainage_m=120.0), points=b.points(
        np.column_stack([r.grid.x_m[pick], r.grid.y_m[pick]]))).points
    np.testing.assert_allclose(again.settlement_mm, r.grid.settlement_mm[pick], atol=0.01)
    np.testing.assert_allclose(again.ux_mm, r.grid.ux_mm[pick], atol=0.01)
