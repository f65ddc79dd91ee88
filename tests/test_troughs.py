"""The model functions against published closed forms and worked values.

Check values are from ../shared/methods.md, which computed them from the formulas of the papers named (marked
"computed here" there): "computed from <formula, source>" below. Reference tunnel of methods.md section 1:
D = 3.0 m, z0 = 6.0 m, K = 0.5, VL = 1 %, so i = 3.0 m and Smax = 9.3999 mm.
"""
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad

from settle.engine import troughs

D, Z0, K, VL = 3.0, 6.0, 0.5, 0.01
I = K * Z0
VS = VL * troughs.excavated_area(D)
SMAX = troughs.peck_max_settlement(VL, D, I)


def test_reference_tunnel_smax():
    # Computed from Smax = VL (pi D^2/4) / (sqrt(2 pi) i), Peck (1969); methods.md section 1: 9.3999 mm.
    assert troughs.trough_width_oreilly_new(Z0, K) == pytest.approx(3.0)
    assert SMAX * 1e3 == pytest.approx(9.3999, abs=1e-4)


@pytest.mark.parametrize("y_over_i, expected_mm", [(1.0, 5.7013), (2.0, 1.2721), (2.5, 0.4130), (3.0, 0.1044)])
def test_peck_profile(y_over_i, expected_mm):
    # Computed from the Gaussian of Peck (1969); methods.md section 1 check values.
    assert troughs.peck_settlement(y_over_i * I, VL, D, I) * 1e3 == pytest.approx(expected_mm, abs=1e-4)


@given(
    vl=st.floats(0.001, 0.05), d=st.floats(0.5, 4.0), i=st.floats(0.5, 15.0),
)
def test_peck_volume_equals_volume_loss(vl, d, i):
    # Identity: the trough volume per metre, sqrt(2 pi) i Smax, equals VL pi D^2/4 (Peck 1969; methods.md s.1).
    volume, _ = quad(lambda y: troughs.peck_settlement(y, vl, d, i), -12 * i, 12 * i, epsabs=0, epsrel=1e-12)
    assert volume == pytest.approx(vl * np.pi * d * d / 4, rel=1e-7)


@pytest.mark.parametrize(
    "x_minus_face_over_i, fraction", [(-2, 0.97725), (-1, 0.84134), (0, 0.5), (1, 0.15866), (2, 0.02275)]
)
def test_cumulative_normal_longitudinal_profile(x_minus_face_over_i, fraction):
    # Attewell & Woodman (1982) cumulative normal; methods.md section 2 check values (computed there).
    f = troughs.attewell_woodman_longitudinal(x_minus_face_over_i * I, -1e6, 0.0, I)
    assert f == pytest.approx(fraction, abs=1e-5)


def test_half_settlement_above_launch_shaft_and_face():
    # Attewell & Woodman (1982): half the full value above the face, and by symmetry above the start.
    f = troughs.attewell_woodman_longitudinal(np.array([0.0, 500.0]), 0.0, 500.0, I)
    assert f == pytest.approx([0.5, 0.5], abs=1e-12)


@pytest.mark.parametrize(
    "x, y, sv_mm, sx_mm",
    [(30, 0, 4.69993, -1.87500), (33, 0, 1.49134, -1.13724), (27, 2, 6.33265, -0.91063), (15, 0, 9.39985, 0.0),
     (33, 3, 0.90454, -0.68977)],
)
def test_finite_drive_closed_form(x, y, sv_mm, sx_mm):
    # Drive from x_s = 0 to x_f = 30 m: methods.md section 2 table, where the closed form was checked against
    # numerical integration of 300 001 point sinks (Attewell & Woodman 1982; Attewell, Yeates & Selby 1986).
    m = troughs.straight_tunnel_movements(x, y, 30.0, VS, I, Z0)
    assert m["settlement"] * 1e3 == pytest.approx(sv_mm, abs=1e-5)
    assert m["du"] * 1e3 == pytest.approx(sx_mm, abs=1e-5)


def test_longitudinal_extremes_near_the_face():
    # methods.md section 2 (computed there): Sx,max = Vs/(2 pi z0) = 1.8750 mm and eps_x,max = 0.24197 Smax/z0
    # = 0.0379 % at |x - x_f| = i, tensile ahead of the face, compressive behind. The sheet's text places Sx,max at
    # |x - x_f| = i too, but its own table (Sx = -1.875 mm at x = x_f) and the closed form put it at the face.
    x = np.linspace(-200, 30, 230001) + 1000.0
    m = troughs.straight_tunnel_movements(x, 0.0, 1000.0, VS, I, Z0)
    assert np.abs(m["du"]).max() * 1e3 == pytest.approx(1.8750, abs=1e-4)
    assert x[np.argmax(np.abs(m["du"]))] - 1000.0 == pytest.approx(0.0, abs=1e-3)
    assert m["strain_uu"].max() == pytest.approx(0.24197 * SMAX / Z0, rel=1e-4)
    assert m["strain_uu"].max() * 100 == pytest.approx(0.0379, abs=1e-4)
    assert x[np.argmax(m["strain_uu"])] - 1000.0 == pytest.approx(I, abs=1e-3)
    assert x[np.argmin(m["strain_uu"])] - 1000.0 == pytest.approx(-I, abs=1e-3)


def test_oreilly_new_horizontal_movement_and_strain():
    # O'Reilly & New (1982); methods.md section 3 check values (computed there): Sh,max = 2.8507 mm at y = i;
    # strain -0.15666 % at y = 0; greatest tension +0.06991 % at y = sqrt(3) i = 5.1962 m; zero at y = i.
    y = np.linspace(0.0, 12.0, 120001)
    s = troughs.peck_settlement(y, VL, D, I)
    sh = troughs.oreilly_new_horizontal(y, s, Z0)
    eps = troughs.oreilly_new_transverse_strain(y, s, Z0, I)
    assert np.abs(sh).max() * 1e3 == pytest.approx(2.8507, abs=1e-4)
    assert y[np.argmax(np.abs(sh))] == pytest.approx(I, abs=1e-3)
    assert np.all(sh[1:] < 0)  # positive y: movement toward the axis is negative
    assert eps[0] * 100 == pytest.approx(-0.15666, abs=1e-5)
    assert eps.max() * 100 == pytest.approx(0.06991, abs=1e-5)
    assert y[np.argmax(eps)] == pytest.approx(np.sqrt(3) * I, abs=1e-3)
    assert troughs.oreilly_new_transverse_strain(I, SMAX, Z0, I) == pytest.approx(0.0, abs=1e-15)


def test_full_trough_far_behind_face_matches_peck_and_oreilly_new():
    # The 3-D closed form far behind the face is the plane-strain trough (Peck 1969; O'Reilly & New 1982).
    y = np.linspace(-12, 12, 97)
    m = troughs.straight_tunnel_movements(500.0, y, 1000.0, VS, I, Z0)
    s = troughs.peck_settlement(y, VL, D, I)
    np.testing.assert_allclose(m["settlement"], s, rtol=1e-12)
    np.testing.assert_allclose(m["dv"], troughs.oreilly_new_horizontal(y, s, Z0), rtol=1e-12, atol=1e-18)
    np.testing.assert_allclose(m["strain_vv"], troughs.oreilly_new_transverse_strain(y, s, Z0, I), rtol=1e-12,
                               atol=1e-18)
    # Curvature at the centreline Smax/i^2 = 1.0444e-3 1/m (methods.md section 1, computed there).
    h = 1e-3
    curv = (troughs.peck_settlement(h, VL, D, I) - 2 * SMAX + troughs.peck_settlement(-h, VL, D, I)) / h**2
    assert -curv == pytest.approx(1.0444e-3, rel=1e-4)


@pytest.mark.parametrize("z, i_expected", [(0.0, 10.0), (5.0, 8.375), (10.0, 6.75), (15.0, 5.125)])
def test_mair_subsurface_width(z, i_expected):
    # Mair, Taylor & Bracegirdle (1993): i(z) = 0.175 z0 + 0.325 (z0 - z) for K = 0.5 at the surface; z0 = 20 m.
    # methods.md section 4 check values (formula from memory there).
    assert 0.5 * 20.0 * troughs.mair_subsurface_width_ratio(z, 20.0) == pytest.approx(i_expected, abs=1e-9)


def test_mair_subsurface_smax_reference_tunnel():
    # methods.md section 4: the section 1 tunnel at z = 3 m in clay: i = 2.025 m, Smax = 13.926 mm (constant volume).
    i3 = I * troughs.mair_subsurface_width_ratio(3.0, Z0)
    assert i3 == pytest.approx(2.025, abs=1e-9)
    assert troughs.peck_max_settlement(VL, D, i3) * 1e3 == pytest.approx(13.926, abs=1e-3)


@pytest.mark.parametrize("m, i_expected", [(0.4, 1.9793), (0.8, 1.5000)])
def test_moh_subsurface_width(m, i_expected):
    # Moh, Ju & Hwang (1996), R = 1.5 m, z0 = 6 m: i(0) = R (z0/2R)^0.8 = 2.6117 m; at z = 3 m i = 1.9793 m (m = 0.4)
    # and 1.5000 m (m = 0.8). methods.md section 4 check values (formula from memory there).
    i0 = 1.5 * (6.0 / 3.0) ** 0.8
    assert i0 == pytest.approx(2.6117, abs=1e-4)
    assert i0 * troughs.moh_subsurface_width_ratio(3.0, 6.0, m) == pytest.approx(i_expected, abs=1e-4)


def test_mixed_ground_width_is_between_clay_and_sand():
    clay = troughs.subsurface_width_ratio(3.0, 6.0, 1.0)
    sand = troughs.subsurface_width_ratio(3.0, 6.0, 0.0)
    half = troughs.subsurface_width_ratio(3.0, 6.0, 0.5)
    assert clay == pytest.approx(troughs.mair_subsurface_width_ratio(3.0, 6.0))
    assert sand == pytest.approx(troughs.moh_subsurface_width_ratio(3.0, 6.0))
    assert half == pytest.approx(0.5 * (clay + sand))


@settings(max_examples=60)
@given(
    u=st.floats(-20, 60), v=st.floats(-15, 15), length=st.floats(0.5, 40), i=st.floats(0.8, 8), zr=st.floats(1, 20),
)
def test_derivatives_are_exact(u, v, length, i, zr):
    # The slopes and strains returned are the derivatives of the displacements (central differences).
    f = lambda uu, vv: troughs.straight_tunnel_movements(uu, vv, length, VS, i, zr)  # noqa: E731
    m, h = f(u, v), 1e-5
    du = lambda key: (f(u + h, v)[key] - f(u - h, v)[key]) / (2 * h)  # noqa: E731
    dv = lambda key: (f(u, v + h)[key] - f(u, v - h)[key]) / (2 * h)  # noqa: E731
    scale = VS / i**2
    for got, want in [(m["slope_u"], du("settlement")), (m["slope_v"], dv("settlement")),
                      (m["strain_uu"], du("du")), (m["strain_vv"], dv("dv")),
                      (m["strain_uv"], dv("du")), (m["strain_uv"], du("dv"))]:
        assert got == pytest.approx(want, abs=1e-7 * scale)
