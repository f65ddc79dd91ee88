"""Buried utilities: the strain and joint methods, and the per-pipe procedure on the engine's movements.

Reference case of methods.md section 6.1 (computed there): the section 1 tunnel (D = 3 m, z0 = 6 m, K = 0.5, VL = 1 %,
clay) with a 0.3 m OD cast-iron main at 1 m depth. Subsurface trough (Mair et al. 1993, section 4): i_p = 2.675 m,
Smax,p = 10.542 mm.
"""
import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from settle.assessment import Assessment
from settle.errors import InputError
from settle.assessments.utilities import CROSSES, EXCEEDS, NEAR, NOT_CHECKED, STATUSES, WITHIN, assess_utilities
from settle.assessments.utility_strains import (axial_strain, bending_strain, extreme_fibre_strains, ground_curvature,
                                               joint_extreme_fibre_opening, joint_opening, joint_rotation)
from settle.assessments.utility_tables import CRITICAL_POINT_FIELDS, UTILITY_FIELDS, critical_point_rows, status_counts, utility_rows
from settle.engine.field import movements_at_points
from settle.engine.movements import Movements
from settle.inputs.utility_lines import make_utilities
from settle.inputs.utility_settings import UtilityOptions

from . import builders as b

I_P = 2.675  # trough width at 1 m depth [m], methods.md 6.1 (computed there)
SMAX_P = 10.542e-3  # settlement above the axis at 1 m depth [m], methods.md 6.1 (computed there)


def engine(*drives):
    """The lead's movements callable, built from the engine: every drive superposed, at a depth."""
    a = Assessment(b.project(drives)).route()
    return lambda x, y, depth: movements_at_points(a.elements, a.ground, x, y, depth)


REFERENCE = engine(b.drive([[0, 0], [200, 0]], 4.0))  # methods.md section 1 tunnel, complete, axis at x in 0..200


def pipes(lines, depth=1.0, material="cast_iron", od=300.0, segment=None, **kw):
    lines = [np.asarray(line, dtype=float) for line in lines]
    n = len(lines)
    ids = kw.pop("ids", [f"P{k}" for k in range(n)])
    seg = None if segment is None else np.broadcast_to(np.asarray(segment, float), (n,))
    return make_utilities(ids, [material] * n, lines, [depth] * n, [od] * n, seg, **kw)


def at(results, pipe, chainage):
    """Index into the profiles of the sample of `pipe` nearest `chainage`."""
    p = results.profiles
    cand = np.flatnonzero(p.pipe == pipe)
    return cand[np.argmin(np.abs(p.chainage_m[cand] - chainage))]


def synthetic(settlement_m=None, slope=None, ux_m=None, strain=None):
    """A movements callable from formulas (metres, fractions); zero where nothing is given."""
    def movements(x, y, depth):
        x, y = np.asarray(x, float), np.asarray(y, float)
        zero = np.zeros_like(x)
        s = settlement_m(x, y) if settlement_m else zero
        sx, sy = slope(x, y) if slope else (zero, zero)
        ux = ux_m(x, y) if ux_m else zero
        exx, eyy, exy = strain(x, y) if strain else (zero, zero, zero)
        return Movements(x, y, np.asarray(depth, float), s * 1e3, ux * 1e3, zero, exx * 1e6, eyy * 1e6, exy * 1e6,
                         sx, sy)
    return movements


# --------------------------------------------------------------------------------------------------- the methods
@pytest.mark.parametrize("kappa, d, expected", [
    (1.4732e-3, 0.3, 2.2098e-4),  # methods.md 6.1: 221 microstrain at the centre (computed there)
    ([1.4732e-3, 3.565e-4], 0.3, [2.2098e-4, 5.3475e-5]),  # and 53 microstrain along the drive (computed there)
    (np.array([-1e-3]), np.array([1.0]), np.array([-5e-4])),  # hogging: the sign follows the curvature
])
def test_bending_strain_is_half_the_diameter_times_curvature(kappa, d, expected):
    np.testing.assert_allclose(bending_strain(kappa, d), expected, rtol=1e-12)


def test_ground_curvature_is_exact_for_a_parabola_and_sagging_positive():
    # A settlement S = 2e-3 - 5e-4 s^2 (a sagging bowl) has -S'' = 1e-3 at every s; the second difference is exact.
    s = np.linspace(-3, 3, 7)
    bowl = lambda t: 2e-3 - 5e-4 * t**2  # noqa: E731
    np.testing.assert_allclose(ground_curvature(bowl(s - 0.1), bowl(s), bowl(s + 0.1), 0.1), 1e-3, rtol=1e-9)
    # Peck (1969) Gaussian: curvature Smax/i^2 at the centre (methods.md 1); error 3h^2/(12 i^2) relative.
    g = lambda t: SMAX_P * np.exp(-t**2 / (2 * I_P**2))  # noqa: E731
    assert ground_curvature(g(-0.05), g(0.0), g(0.05), 0.05) == pytest.approx(1.4732e-3, rel=2e-4)


def test_axial_strain_is_the_normal_strain_along_the_tangent():
    exx, eyy, exy = 300.0, -500.0, 200.0
    assert axial_strain(exx, eyy, exy, 1.0, 0.0) == exx
    assert axial_strain(exx, eyy, exy, [0.0], [1.0]) == pytest.approx(eyy)
    c = np.sqrt(0.5)
    assert axial_strain(exx, eyy, exy, c, c) == pytest.approx((exx + eyy) / 2 + exy)


@settings(max_examples=40, deadline=None)
@given(exx=st.floats(-3e3, 3e3), eyy=st.floats(-3e3, 3e3), exy=st.floats(-3e3, 3e3), angle=st.floats(0, 2 * np.pi))
def test_axial_strain_lies_between_the_principal_strains_and_keeps_the_trace(exx, eyy, exy, angle):
    # Identity (Mohr's circle): the normal strain in any direction lies between the principal strains, and the
    # normal strains in two perpendicular directions add up to exx + eyy.
    t = np.array([np.cos(angle), np.sin(angle)])
    e1 = axial_strain(exx, eyy, exy, *t)
    e2 = axial_strain(exx, eyy, exy, -t[1], t[0])
    radius = np.hypot((exx - eyy) / 2, exy)
    assert (exx + eyy) / 2 - radius - 1e-9 <= e1 <= (exx + eyy) / 2 + radius + 1e-9
    assert e1 + e2 == pytest.approx(exx + eyy, abs=1e-9)


def test_extreme_fibres_at_the_greatest_tension_across_the_tunnel():
    # methods.md 6.1 and 1 (computed there): at |y| = sqrt(3) i_p the axial strain is +0.0941 % and the hogging
    # curvature 0.4463 Smax/i^2, a bending strain of 0.4463 x 221 microstrain.
    tension, compression = extreme_fibre_strains(941.0, -0.4463 * 221.0)
    assert tension == pytest.approx(941.0 + 98.63, abs=0.01)
    assert compression == pytest.approx(941.0 - 98.63, abs=0.01)


def test_joint_rotation_of_a_uniform_curvature_is_kappa_times_pipe_length():
    # methods.md 6.1 (computed there): kappa = 1.4732e-3 1/m, Lp = 3.66 m gives 5.39e-3 rad = 0.309 deg. A sagging
    # settlement S = -kappa s^2 / 2 has slope -kappa s: +kappa Lp/2 behind the joint, -kappa Lp/2 ahead of it.
    kappa, lp = 1.4732e-3, 3.66
    theta = joint_rotation(0.0, -kappa * (-lp / 2), 0.0, -kappa * (lp / 2), 0.0, 1.0)
    assert theta == pytest.approx(5.392e-3, rel=1e-3)
    assert np.degrees(theta) == pytest.approx(0.309, abs=5e-4)


def test_joint_opening_of_a_uniform_strain_is_strain_times_pipe_length():
    # methods.md 6.1 (computed there): +0.0941 % over Lp = 3.66 m pulls a joint out 3.44 mm.
    eps, lp = 9.41e-4, 3660.0  # [-], [mm]
    opening = joint_opening([0.0], [eps * -lp / 2], [0.0], [eps * lp / 2], 0.0, 1.0)
    assert opening[0] == pytest.approx(3.44, abs=5e-3)
    # Along -t the same ground closes nothing: the sign follows the tangent, not the drawing direction.
    assert joint_opening(eps * lp / 2, 0.0, -eps * lp / 2, 0.0, -1.0, 0.0) == pytest.approx(eps * lp)


def test_joint_opening_at_the_extreme_fibre_closed_form():
    # Pure rotation: the methods.md 6.1 joint rotation of 5.39e-3 rad (computed there) on the 300 mm main opens the
    # joint's opening side by theta OD/2 = 0.8085 mm, whichever way the joint turns.
    np.testing.assert_allclose(joint_extreme_fibre_opening(0.0, [5.39e-3, -5.39e-3], 300.0), 0.8085, rtol=1e-12)
    # Pure pull-out: the methods.md 6.1 pull-out of 3.44 mm (computed there) is unchanged.
    assert joint_extreme_fibre_opening(3.44, 0.0, 300.0) == 3.44
    # Both: the parts add. An axial closing of 1 mm leaves the opening side closed by 1 - 0.8085 mm; a closing of
    # 0.5 mm leaves it open by 0.3085 mm.
    np.testing.assert_allclose(joint_extreme_fibre_opening([3.44, -1.0, -0.5], 5.39e-3, 300.0),
                               [4.2485, -0.1915, 0.3085], rtol=1e-12)


@settings(max_examples=60, deadline=None)
@given(axial=st.floats(-20.0, 20.0), theta=st.floats(-0.1, 0.1), od=st.floats(10.0, 5000.0),
       scale=st.floats(0.01, 100.0))
def test_joint_opening_at_the_extreme_fibre_properties(axial, theta, od, scale):
    total = joint_extreme_fibre_opening(axial, theta, od)
    assert total >= axial  # never below the axial part (so never below a positive axial opening)
    assert joint_extreme_fibre_opening(axial, -theta, od) == total  # either way the joint turns
    # The rotation's share grows linearly with the diameter.
    assert joint_extreme_fibre_opening(axial, theta, scale * od) - axial == pytest.approx(scale * (total - axial),
                                                                                           rel=1e-9, abs=1e-12)


# ------------------------------------------------------------------------------------------------ the procedure
def test_main_across_the_tunnel_matches_methods_6_1():
    # methods.md 6.1 check values (computed there) for the cast-iron main at 1 m depth crossing the tunnel.
    u = pipes([[[100, -20], [100, 20]]])
    r = assess_utilities(u, REFERENCE)
    centre = at(r, 0, 20.0)
    assert r.max_settlement_mm[0] == pytest.approx(10.542, abs=1e-3)  # Smax,p
    assert r.profiles.curvature_per_m[centre] == pytest.approx(1.4732e-3, rel=2e-4)  # Smax,p / i_p^2
    assert r.max_bending_strain_ue[0] == pytest.approx(221.0, abs=0.5)  # (D/2) kappa
    assert r.profiles.axial_strain_ue[centre] == pytest.approx(-2108.0, abs=1.0)  # -0.2108 % at the centre
    assert r.min_axial_strain_ue[0] == pytest.approx(-2108.0, abs=1.0)
    assert r.max_axial_strain_ue[0] == pytest.approx(941.0, abs=0.5)  # +0.0941 % ...
    k = r.check_place["axial"][0]
    assert abs(r.profiles.chainage_m[k] - 20.0) == pytest.approx(np.sqrt(3) * I_P, abs=0.05)  # ... at sqrt(3) i_p
    assert r.max_ground_slope[0] == pytest.approx(2.390e-3, abs=1e-6)  # 0.6065 Smax,p / i_p
    # Cast iron limits of 100 microstrain (methods.md 6.2, common practice): the main exceeds them in tension.
    assert r.status[0] == EXCEEDS and r.governing_check[0] == "fibre strain"
    assert r.check_utilisation["fibre"][0] == pytest.approx((r.max_axial_strain_ue[0] + 0.4463 * 221.0) / 100,
                                                            rel=2e-3)


@pytest.mark.parametrize("angle_deg", [90.0, 60.0, 30.0])
def test_pipe_crossing_at_an_angle_bends_with_the_gaussian_along_it(angle_deg):
    # Peck (1969) Gaussian along a line crossing the axis at angle a, far from the shafts: S(s) = Smax exp(-(s sin a)^2
    # / 2i^2), so the curvature at the axis is Smax sin^2(a) / i^2 (methods.md 1); the axial strain there equals the
    # ground's horizontal strain along the pipe, read from the same movements.
    a = np.radians(angle_deg)
    t = np.array([np.cos(a), np.sin(a)])
    half = 20.0 / np.sin(a)
    u = pipes([[[100, 0] - half * t, [100, 0] + half * t]])
    r = assess_utilities(u, REFERENCE)
    k = at(r, 0, half)
    assert r.profiles.x_m[k] == pytest.approx(100.0, abs=1e-9) and r.profiles.y_m[k] == pytest.approx(0, abs=1e-9)
    assert r.profiles.curvature_per_m[k] == pytest.approx(SMAX_P * np.sin(a) ** 2 / I_P**2, rel=3e-4)
    m = REFERENCE(np.array([100.0]), np.array([0.0]), np.array([1.0]))
    ground = t[0] ** 2 * m.strain_xx_ue + 2 * t[0] * t[1] * m.strain_xy_ue + t[1] ** 2 * m.strain_yy_ue
    assert r.profiles.axial_strain_ue[k] == pytest.approx(ground[0], rel=1e-12)
    if angle_deg == 90.0:
        assert r.profiles.axial_strain_ue[k] == pytest.approx(m.strain_yy_ue[0], rel=1e-12)


def test_main_along_the_drive_near_the_face_matches_methods_6_1():
    # methods.md 6.1 (computed there): the same main laid along the drive, face at x = 100 m: curvature
    # 0.24197 Smax,p / i_p^2 = 3.565e-4 1/m, bending 53 microstrain, transient axial strain 0.0510 % (tension ahead
    # of the face, compression behind it, at |x - x_f| = i_p).
    r = assess_utilities(pipes([[[50, 0], [150, 0]]]), engine(b.drive([[0, 0], [200, 0]], 4.0, face_chainage_m=100.0)))
    k = r.check_place["bending"][0]
    assert abs(r.profiles.curvature_per_m[k]) == pytest.approx(3.565e-4, rel=5e-4)
    assert abs(r.profiles.x_m[k] - 100.0) == pytest.approx(I_P, abs=0.05)
    assert r.max_bending_strain_ue[0] == pytest.approx(53.47, abs=0.05)
    assert r.max_axial_strain_ue[0] == pytest.approx(510.2, abs=0.3)
    assert r.min_axial_strain_ue[0] == pytest.approx(-510.2, abs=0.3)
    assert r.profiles.x_m[r.check_place["axial"][0]] == pytest.approx(100.0 + I_P, abs=0.05)


def test_pipe_parallel_to_the_drive_far_from_the_shafts_does_not_bend():
    # Plane strain far from the shafts (Attewell & Woodman 1982 closed form): nothing changes along the axis.
    r = assess_utilities(pipes([[[60, 3], [140, 3]]]), REFERENCE)
    assert r.max_settlement_mm[0] > 5.0
    assert r.max_bending_strain_ue[0] < 1e-6
    assert max(abs(r.max_axial_strain_ue[0]), abs(r.min_axial_strain_ue[0])) < 1e-6
    assert r.status[0] == WITHIN


def test_joint_rotation_is_the_change_of_slope_over_one_pipe_length():
    # The check: a joint at s rotates by the change of ground slope between s - Lp/2 and s + Lp/2 (the
    # middles of the pipes either side), here read directly from the movements for a pipe along +y.
    lp = 3.66
    r = assess_utilities(pipes([[[100, -20], [100, 20]]], segment=lp), REFERENCE)
    p = r.profiles
    inside = np.flatnonzero((p.chainage_m > lp / 2) & (p.chainage_m < 40 - lp / 2))[::7]
    y = p.y_m[inside]
    behind = REFERENCE(np.full(y.size, 100.0), y - lp / 2, np.ones(y.size))
    ahead = REFERENCE(np.full(y.size, 100.0), y + lp / 2, np.ones(y.size))
    np.testing.assert_allclose(p.joint_rotation_deg[inside], np.degrees(-(ahead.slope_y - behind.slope_y)), atol=1e-12)
    np.testing.assert_allclose(p.joint_axial_opening_mm[inside], ahead.uy_mm - behind.uy_mm, atol=1e-12)
    # At the extreme fibre the rotation adds |theta| OD/2 (OD 300 mm) to the axial part.
    np.testing.assert_allclose(p.joint_rotation_opening_mm[inside],
                               np.radians(np.abs(p.joint_rotation_deg[inside])) * 150.0, rtol=1e-12)
    np.testing.assert_allclose(p.joint_opening_mm[inside],
                               p.joint_axial_opening_mm[inside] + p.joint_rotation_opening_mm[inside], rtol=1e-12)
    # Bounded by the forms of methods.md 6.1 (max|kappa| Lp, max(eps) Lp), which give 0.309 deg and 3.44 mm here.
    kappa_lp = np.degrees(np.abs(p.curvature_per_m).max() * lp)
    eps_lp = r.max_axial_strain_ue[0] * 1e-6 * lp * 1e3
    assert kappa_lp == pytest.approx(0.309, abs=5e-4) and eps_lp == pytest.approx(3.44, abs=5e-3)
    assert 0.5 * kappa_lp < r.max_joint_rotation_deg[0] <= kappa_lp
    assert 0.5 * eps_lp < np.nanmax(p.joint_axial_opening_mm) <= eps_lp
    assert np.nanmax(p.joint_axial_opening_mm) < r.max_joint_opening_mm[0] <= eps_lp + np.radians(kappa_lp) * 150.0
    assert r.status[0] == EXCEEDS and "joint opening" in r.not_checked[0]  # cast iron: no opening limit (6.2)


def test_short_pipes_tend_to_kappa_and_strain_times_length():
    # As Lp -> 0 the change of slope over Lp tends to kappa Lp (methods.md 6.1 form); the error is about
    # Lp^2 |kappa''| / (24 kappa).
    lp = 0.2
    r = assess_utilities(pipes([[[100, -20], [100, 20]]], segment=lp), REFERENCE)
    kappa = np.abs(r.profiles.curvature_per_m).max()
    assert r.max_joint_rotation_deg[0] == pytest.approx(np.degrees(kappa * lp), rel=1e-3)
    assert np.nanmax(r.profiles.joint_axial_opening_mm) == pytest.approx(r.max_axial_strain_ue[0] * 1e-6 * lp * 1e3,
                                                                        rel=2e-3)


def test_pipe_below_the_crown_crosses_the_tunnel_and_gets_no_numbers():
    # Crown at 6 - 1.5 = 4.5 m depth: a main at 5 m crossing the drive is inside the tunnel's zone, where the
    # subsurface relations do not hold. The same main 60 m beside the drive is out of its reach and is assessed.
    u = pipes([[[100, -20], [100, 20]], [[60, 60], [140, 60]]], depth=5.0, ids=["D1", "D2"])
    r = assess_utilities(u, REFERENCE)
    assert r.status == (CROSSES, WITHIN)
    assert np.isnan(r.max_bending_strain_ue[0]) and np.isnan(r.utilisation[0]) and r.governing_check[0] == ""
    assert any('utility "D1" crosses the tunnel' in w for w in r.warnings)
    assert not any('"D2"' in w for w in r.warnings)
    lo, hi = r.crossing_chainage_m[0]
    assert lo < 20 < hi
    rows = critical_point_rows(u, r)
    cross = [row for row in rows if row["id"] == "D1"]
    assert len(cross) == 1 and cross[0]["check"] == CROSSES and cross[0]["geometry"].x == pytest.approx(100.0)


def test_bending_reduction_factor_scales_bending_only():
    # Interaction (Vorster et al. 2005): the user's ratio of pipe to greenfield curvature; off (1) by default.
    full = assess_utilities(pipes([[[100, -20], [100, 20]]], material="pe"), REFERENCE)
    half = assess_utilities(pipes([[[100, -20], [100, 20]]], material="pe", bending_reduction_factor=[0.5]),
                            REFERENCE)
    assert half.max_bending_strain_ue[0] == pytest.approx(0.5 * full.max_bending_strain_ue[0], rel=1e-12)
    assert half.max_axial_strain_ue[0] == full.max_axial_strain_ue[0]
    assert utility_rows(pipes([[[0, 0], [1, 0]]], bending_reduction_factor=[0.5]), half)[0][
        "bending_reduction_factor"] == 0.5


# ----------------------------------------------------------------------------------- geometry, with exact fields
def test_a_rigid_tilt_bends_no_pipe_even_round_bends():
    # Identity: a plane tilt of the ground moves every pipe as a rigid body. Along a pipe that turns in plan, the
    # profile of settlement against chainage has a kink at each turn; the tangent-line curvature does not.
    tilt = synthetic(lambda x, y: 1e-3 * x + 2e-3 * y, lambda x, y: (np.full_like(x, 1e-3), np.full_like(x, 2e-3)))
    arc = b.arc(15.0, 120.0, 25)
    u = pipes([[[0, 0], [10, 0], [10, 10], [0, 12]], arc], segment=[2.0, np.nan])
    r = assess_utilities(u, tilt)
    assert np.abs(r.profiles.curvature_per_m).max() < 1e-9
    assert r.max_bending_strain_ue.max() < 1e-6 and r.max_joint_rotation_deg[0] < 1e-9


def test_uniform_curvature_field_on_lines_in_any_direction():
    # S = -(c/2) x^2: curvature c along x, c cos^2(a) along a line at angle a, 0 across; joint rotation c cos^2(a) Lp.
    c = 2e-4
    field = synthetic(lambda x, y: -0.5 * c * x**2, lambda x, y: (-c * x, np.zeros_like(x)))
    angles = np.radians([0.0, 30.0, 90.0])
    lines = [[[0.0, 0.0], [20 * np.cos(a), 20 * np.sin(a)]] for a in angles]
    r = assess_utilities(pipes(lines, segment=2.0, od=500.0), field)
    for k, a in enumerate(angles):
        sel = r.profiles.pipe == k
        np.testing.assert_allclose(r.profiles.curvature_per_m[sel], c * np.cos(a) ** 2, atol=1e-12)
        mid = sel & (r.profiles.chainage_m > 1.0) & (r.profiles.chainage_m < 19.0)
        np.testing.assert_allclose(r.profiles.joint_rotation_deg[mid], np.degrees(c * np.cos(a) ** 2 * 2.0), atol=1e-12)
    np.testing.assert_allclose(r.max_bending_strain_ue, 0.25 * c * np.cos(angles) ** 2 * 1e6, atol=1e-9)


def test_uniform_ground_strain_opens_every_joint_by_strain_times_length():
    e = 4e-4
    field = synthetic(ux_m=lambda x, y: e * x, strain=lambda x, y: (np.full_like(x, e), 0 * x, 0 * x))
    r = assess_utilities(pipes([[[0, 0], [30, 0]], [[0, 5], [0, 35]]], segment=2.5, od=150.0), field)
    p = r.profiles
    mid = (p.pipe == 0) & (p.chainage_m > 1.25) & (p.chainage_m < 28.75)
    np.testing.assert_allclose(p.joint_opening_mm[mid], e * 2500.0, rtol=1e-12)
    assert r.max_axial_strain_ue[0] == pytest.approx(400.0) and r.max_axial_strain_ue[1] == pytest.approx(0.0)
    assert r.max_joint_opening_mm[1] == 0.0


@pytest.mark.parametrize("strain, largest_mm", [(1e-4, 0.3), (-2.5e-5, 0.05), (-1e-4, -0.05)])
def test_uniform_curvature_and_strain_open_the_extreme_fibre_by_the_sum(strain, largest_mm):
    # S = -(c/2) x^2 and u_x = e x along a pipe along x (OD 500 mm, Lp = 2 m): inside, every joint turns by c Lp =
    # 4e-4 rad and opens e Lp at the axis, so the extreme fibre opens by e Lp + c Lp OD/2 (0.1 mm from the rotation).
    # At the ends the pipe either side is clipped to the line, Lp/2 = 1 m long: half of each part.
    c, lp = 2e-4, 2.0
    field = synthetic(lambda x, y: -0.5 * c * x**2, lambda x, y: (-c * x, np.zeros_like(x)), lambda x, y: strain * x,
                      lambda x, y: (np.full_like(x, strain), 0 * x, 0 * x))
    u = pipes([[[0, 0], [20, 0]]], material="pe", segment=lp, od=500.0,
              overrides={"allowable_joint_opening_mm": [0.25]})
    r = assess_utilities(u, field)
    p = r.profiles
    mid = (p.chainage_m > lp / 2) & (p.chainage_m < 20 - lp / 2)
    np.testing.assert_allclose(p.joint_axial_opening_mm[mid], strain * lp * 1e3, rtol=1e-9)
    np.testing.assert_allclose(p.joint_rotation_opening_mm[mid], 0.1, rtol=1e-9)
    np.testing.assert_allclose(p.joint_opening_mm[mid], strain * lp * 1e3 + 0.1, rtol=1e-9)
    assert np.nanmax(p.joint_opening_mm) == pytest.approx(largest_mm, rel=1e-9)
    # The two parts are those where the total is largest, and the check uses the total (opening positive only).
    assert r.max_joint_axial_opening_mm[0] + r.max_joint_rotation_opening_mm[0] == pytest.approx(largest_mm, rel=1e-9)
    assert r.max_joint_opening_mm[0] == pytest.approx(max(largest_mm, 0.0), abs=1e-12)
    assert r.check_utilisation["joint_opening"][0] == pytest.approx(max(largest_mm, 0.0) / 0.25, abs=1e-12)
    # A pull-out of 0.2 mm alone is within 0.25 mm; with the rotation's 0.1 mm the joint exceeds it.
    if strain > 0:
        assert r.status[0] == EXCEEDS and r.governing_check[0] == "joint opening"


@pytest.mark.parametrize("allowable, status", [(120.0, WITHIN), (60.0, NEAR), (50.0, EXCEEDS)])
def test_status_from_the_utilisation(allowable, status):
    # Uniform curvature 2e-4 on a 0.5 m pipe: 50 microstrain of bending and no axial strain, so utilisation 50/A.
    field = synthetic(lambda x, y: -1e-4 * x**2, lambda x, y: (-2e-4 * x, np.zeros_like(x)))
    u = pipes([[[0, 0], [10, 0]]], od=500.0, overrides={"allowable_bending_strain_ue": [allowable]})
    r = assess_utilities(u, field)
    assert r.utilisation[0] == pytest.approx(50.0 / allowable, rel=1e-9)
    assert r.status[0] == status and r.governing_check[0] == "bending strain"


def test_material_without_limits_is_not_checked_and_said_so():
    # methods.md 6.2 has no values for concrete: the demands are computed, the verdict says "not checked".
    u = pipes([[[100, -20], [100, 20]]], material="concrete", od=600.0, segment=2.5, ids=["C1"])
    r = assess_utilities(u, REFERENCE)
    assert r.status[0] == NOT_CHECKED and np.isnan(r.utilisation[0]) and r.max_bending_strain_ue[0] > 0
    assert r.not_checked[0] == "bending strain, axial strain, fibre strain, joint rotation, joint opening"
    assert any("no allowable joint rotation" in w and '"C1"' in w and "allowable_joint_rotation_deg" in w
               for w in r.warnings)
    own = pipes([[[100, -20], [100, 20]]], material="concrete", od=600.0, segment=2.5,
                overrides={"allowable_joint_rotation_deg": [1.0]})
    r = assess_utilities(own, REFERENCE)
    assert r.governing_check[0] == "joint rotation" and r.status[0] == WITHIN
    assert r.not_checked[0] == "bending strain, axial strain, fibre strain, joint opening"


def test_compression_counts_where_the_material_limit_holds_both_ways():
    # methods.md 6.2 wording: cast iron has a tensile limit; PVC a strain limit (both ways, our reading).
    line = [[[100, -20], [100, 20]]]
    limit = {"allowable_axial_strain_ue": [3000.0], "allowable_bending_strain_ue": [3000.0]}
    ci = assess_utilities(pipes(line, overrides=limit), REFERENCE)
    pvc = assess_utilities(pipes(line, material="pvc", overrides=limit), REFERENCE)
    assert ci.check_utilisation["axial"][0] == pytest.approx(941.0 / 3000, abs=2e-4)
    assert pvc.check_utilisation["axial"][0] == pytest.approx(2108.4 / 3000, abs=2e-4)
    assert pvc.check_utilisation["fibre"][0] == pytest.approx((2108.4 + 221.0) / 3000, abs=2e-4)


# ------------------------------------------------------------------------------------------- sampling, symmetry
def test_maxima_do_not_depend_on_the_sampling():
    u = pipes([[[97.3, -18.1], [101.2, 23.4]]], segment=3.0)
    coarse = assess_utilities(u, REFERENCE, UtilityOptions(sample_spacing_m=0.5))
    fine = assess_utilities(u, REFERENCE, UtilityOptions(sample_spacing_m=0.07))
    for name in ("max_bending_strain_ue", "max_axial_strain_ue", "min_axial_strain_ue", "max_joint_rotation_deg",
                 "max_joint_opening_mm"):
        assert getattr(coarse, name)[0] == pytest.approx(getattr(fine, name)[0], rel=5e-4), name


@settings(max_examples=5, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(angle=st.floats(0, 360), x0=st.floats(-1e4, 1e4), y0=st.floats(-1e4, 1e4), reverse=st.booleans())
def test_same_demands_wherever_the_scene_is_and_whichever_way_the_pipe_is_drawn(angle, x0, y0, reverse):
    # Symmetry: rotating and moving the drive and the pipe together changes nothing; nor does drawing the pipe the
    # other way round (chainage then runs the other way).
    a = np.radians(angle)
    rot = np.array([[np.cos(a), -np.sin(a)], [np.sin(a), np.cos(a)]])
    place = lambda p: np.asarray(p, float) @ rot.T + [x0, y0]  # noqa: E731
    line = np.array([[38.0, -15.0], [40.0, 0.0], [43.0, 16.0]])
    ref = assess_utilities(pipes([line], segment=3.0), engine(b.drive([[0, 0], [80, 0]], 4.0)))
    moved = place(line)[::-1] if reverse else place(line)
    got = assess_utilities(pipes([moved], segment=3.0), engine(b.drive(place([[0, 0], [80, 0]]), 4.0)))
    for name in ("max_settlement_mm", "max_bending_strain_ue", "max_axial_strain_ue", "min_axial_strain_ue",
                 "max_joint_rotation_deg", "max_joint_opening_mm"):
        assert getattr(got, name)[0] == pytest.approx(getattr(ref, name)[0], rel=1e-3, abs=1e-9), name


# -------------------------------------------------------------------------------------------------- output rows
def test_rows_for_the_layers_the_table_and_the_summary():
    u = pipes([[[100, -20], [100, 20]], [[60, 3], [140, 3]], [[100, -20], [100, 20]]], segment=[3.66, np.nan, 2.0],
              ids=["W1", "W2", "W3"])
    u = make_utilities(u.ids, ["cast_iron", "pe", "concrete"], u.lines_xy, u.depths_m, u.outer_diameter_mm,
                       u.segment_length_m)
    r = assess_utilities(u, REFERENCE)
    rows = utility_rows(u, r)
    assert [tuple(k for k in row if k != "geometry") for row in rows] == [UTILITY_FIELDS] * 3
    assert rows[0]["geometry"].equals(shapely.LineString([(100, -20), (100, 20)]))
    assert [row["status"] for row in rows] == [EXCEEDS, WITHIN, NOT_CHECKED]
    assert "geometry" not in utility_rows(u, r, geometry=False)[0]
    points = critical_point_rows(u, r)
    assert all(tuple(k for k in p if k != "geometry") == CRITICAL_POINT_FIELDS for p in points)
    assert sum(p["governs"] for p in points) == 2  # one per checked pipe
    assert {p["check"] for p in points if p["id"] == "W1"} == {"bending strain", "axial strain", "fibre strain",
                                                                "joint rotation", "joint opening"}
    # The joint opening: at the extreme fibre, with its axial and rotation parts where it is largest.
    assert UTILITY_FIELDS.index("max_joint_axial_opening_mm") > UTILITY_FIELDS.index("not_checked")
    w1 = rows[0]
    assert w1["max_joint_rotation_opening_mm"] > 0
    assert w1["max_joint_opening_mm"] == pytest.approx(w1["max_joint_axial_opening_mm"]
                                                       + w1["max_joint_rotation_opening_mm"], rel=1e-12)
    assert np.isnan(rows[1]["max_joint_axial_opening_mm"]) and np.isnan(rows[1]["max_joint_rotation_opening_mm"])
    opening = [p for p in points if p["id"] == "W1" and p["check"] == "joint opening"][0]
    assert opening["joint_opening_mm"] == pytest.approx(w1["max_joint_opening_mm"], rel=1e-12)
    assert opening["joint_axial_opening_mm"] == pytest.approx(w1["max_joint_axial_opening_mm"], rel=1e-12)
    assert opening["joint_rotation_opening_mm"] == pytest.approx(
        np.radians(abs(opening["joint_rotation_deg"])) * 150.0, rel=1e-12)
    gov = [p for p in points if p["id"] == "W1" and p["governs"]][0]
    assert gov["check"] == rows[0]["governing_check"] and gov["chainage_m"] == rows[0]["governing_chainage_m"]
    counts = status_counts(r)
    assert tuple(counts) == STATUSES and sum(counts.values()) == 3 and counts[EXCEEDS] == 1


@pytest.mark.parametrize("kw, message", [
    (dict(sample_spacing_m=0.6), r"\[utilities\] sample_spacing_m must be more than 0 and at most 0.5 m; got 0.6"),
    (dict(curvature_step_m=0.0), r"\[utilities\] curvature_step_m must be more than 0 and at most 0.25 m; got 0.0"),
    (dict(near_limit_fraction=1.0), r"\[utilities\] near_limit_fraction must be more than 0 and less than 1; got 1.0"),
])
def test_bad_options(kw, message):
    with pytest.raises(InputError, match=message):
        UtilityOptions(**kw)
