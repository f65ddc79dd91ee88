"""The face support model functions against the check values of ../shared/methods.md section 7.

Those values were computed there ("computed here" in methods.md) from formulas that methods.md marks "from memory"
for the wedge-silo model, Broms & Bennermark, the blow-out limits and the Delft method: the tests below check that the
code computes those formulas as written, not that the formulas match the papers (no published worked example of
these papers was available). Reference case of methods.md section 7.1: sand, gamma_sat = 20 kN/m3, gamma_w = 9.81,
gamma' = 10.19, phi' = 32 deg, c' = 0, D = 2.0 m (B = H = 2 m), cover C = 4 m, axis 5 m deep, water table at the
ground, no surcharge.
"""
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from settle.assessments import face_methods as face

G_SAT, G_W = 20.0, 9.81
G_EFF = G_SAT - G_W
PHI, D, C = 32.0, 2.0, 4.0


# ------------------------------------------------------------------------------------------ vertical stress
def test_stress_at_axis_reference_case():
    # methods.md s.7.1 check values (computed there): sigma'_v,axis = 50.95 kPa, u_axis = 49.05 kPa.
    total, pore, eff = face.vertical_stress(5.0, 10.0, 10.0, [10.0], [G_SAT])
    assert float(total) == pytest.approx(100.0, abs=1e-9)
    assert float(pore) == pytest.approx(49.05, abs=1e-9)
    assert float(eff) == pytest.approx(50.95, abs=1e-9)


def test_stress_at_crown_under_three_metres_of_river_water():
    # methods.md s.7.2 (computed there): sigma_v,crown = 80.0 kPa dry of free water, 109.43 kPa under 3 m of water;
    # s.7.1: u at the crown 68.67 kPa, u at the axis 78.48 kPa.
    total, pore, eff = face.vertical_stress([6.0, 5.0], 10.0, 13.0, [10.0], [G_SAT])
    np.testing.assert_allclose(total, [109.43, 129.43], atol=1e-9)
    np.testing.assert_allclose(pore, [68.67, 78.48], atol=1e-9)
    np.testing.assert_allclose(eff, [40.76, 50.95], atol=1e-9)  # free water leaves the effective stress alone
    assert float(face.vertical_stress(6.0, 10.0, 10.0, [10.0], [G_SAT])[0]) == pytest.approx(80.0)


def test_layered_stress_by_hand():
    # Hand calculation: 2 m of 18 over 3 m of 19.5 over 20 kN/m3, water table 1.5 m down, level 7 m down.
    # total = 2*18 + 3*19.5 + 2*20 = 134.5; u = 9.81 * 5.5 = 53.955.
    tops, gam = [100.0, 98.0, 95.0], [18.0, 19.5, 20.0]
    total, pore, eff = face.vertical_stress(93.0, 100.0, 98.5, tops, gam)
    assert float(total) == pytest.approx(134.5, abs=1e-9)
    assert float(pore) == pytest.approx(53.955, abs=1e-9)
    assert float(eff) == pytest.approx(134.5 - 53.955, abs=1e-9)


def test_surface_below_the_top_layer_and_level_above_the_water_table():
    # A bed cut into the second layer: only that layer counts; above the water table u = 0 (no suction).
    total, pore, _ = face.vertical_stress(94.0, 96.0, 90.0, [100.0, 98.0, 95.0], [18.0, 19.5, 20.0])
    assert float(total) == pytest.approx(19.5 + 20.0)
    assert float(pore) == 0.0


def test_level_above_surface_is_nan():
    total, pore, eff = face.vertical_stress([11.0, 9.0], 10.0, 10.0, [10.0], [G_SAT])
    assert np.isnan(total[0]) and np.isnan(pore[0]) and np.isnan(eff[0])
    assert np.isfinite(total[1])


# ---------------------------------------------------------------------------------------------------- Rankine
def test_rankine_reference_case():
    # methods.md s.7.1 b (computed there): K_a = 0.30726; active 15.65 kPa; with u_axis, 64.70 kPa.
    assert float(face.rankine_active_coefficient(PHI)) == pytest.approx(0.30726, abs=1e-5)
    active = float(face.rankine_active_pressure(50.95, PHI, 0.0))
    assert active == pytest.approx(15.65, abs=5e-3)
    assert active + 49.05 == pytest.approx(64.70, abs=5e-3)


def test_rankine_cohesion_term():
    # K_a sigma' - 2 c sqrt(K_a) (Rankine; methods.md s.7.1 b): phi = 0 gives sigma' - 2c.
    assert float(face.rankine_active_pressure(50.0, 0.0, 10.0)) == pytest.approx(30.0)


# ------------------------------------------------------------------------------------------------ wedge-silo
def _ak(**kw):
    args = dict(width=D, height=D, wedge_unit_weight=G_EFF, wedge_friction_angle_deg=PHI, wedge_cohesion=0.0,
                cover_thickness=C, cover_unit_weight=G_EFF, cover_friction_angle_deg=PHI, cover_cohesion=0.0)
    args.update(kw)
    return face.anagnostou_kovari_support(**args)


def test_wedge_silo_reference_case():
    # methods.md s.7.1 c (computed there), K_s = 0.8, K_w = 0.4: max S = 14.00 kN at omega = 63.2 deg, L = 1.009 m,
    # silo sigma'_v,top = 6.82 kPa, s' = 3.50 kPa. Formulas from memory (methods.md).
    s, angle, top = _ak()
    assert float(s[0]) * D * D == pytest.approx(14.00, abs=5e-3)
    assert float(s[0]) == pytest.approx(3.50, abs=5e-3)
    assert float(angle[0]) == pytest.approx(63.2, abs=0.05)
    assert D / np.tan(np.radians(float(angle[0]))) == pytest.approx(1.009, abs=5e-4)
    assert float(top[0]) == pytest.approx(6.82, abs=5e-3)


def test_wedge_silo_variants():
    # methods.md s.7.1 c (computed there): without side shear s' = 5.51 kPa at 55.9 deg; with K_s = 1.0, 3.26 kPa.
    s, angle, _ = _ak(wedge_ratio=0.0)
    assert float(s[0]) == pytest.approx(5.51, abs=5e-3)
    assert float(angle[0]) == pytest.approx(55.9, abs=0.05)
    assert float(_ak(silo_ratio=1.0)[0][0]) == pytest.approx(3.26, abs=5e-3)


def test_wedge_silo_partial_factors():
    # methods.md s.7.1 c (computed there): unfactored axis 52.55 kPa, DAUB-style 1.5 s' + 1.05 u = 56.75 kPa
    # (factors from memory); with 3 m of river water, 81.98 / 87.65 at the axis and 72.17 / 77.35 at the crown.
    s = float(_ak()[0][0])
    assert s + 49.05 == pytest.approx(52.55, abs=5e-3)
    assert 1.5 * s + 1.05 * 49.05 == pytest.approx(56.75, abs=5e-3)
    assert s + 78.48 == pytest.approx(81.98, abs=5e-3)
    assert 1.5 * s + 1.05 * 78.48 == pytest.approx(87.65, abs=5e-3)
    assert s + 68.67 == pytest.approx(72.17, abs=5e-3)
    assert 1.5 * s + 1.05 * 68.67 == pytest.approx(77.35, abs=5e-3)


def test_rankine_exceeds_wedge_silo_in_shallow_sand():
    # methods.md s.7.1: "Expect the Rankine value to exceed the wedge-silo value in shallow sand".
    assert float(face.rankine_active_pressure(50.95, PHI, 0.0)) > float(_ak()[0][0])


def test_wedge_force_at_the_critical_angle():
    # The wedge alone, fed the silo stress and angle of the reference case, gives S = 14.00 kN (methods.md s.7.1 c).
    s = face.wedge_face_force(63.2177, D, D, G_EFF, PHI, 0.0, 6.82002, 0.4)
    assert float(s) == pytest.approx(14.00, abs=5e-3)


def test_angle_search_finds_the_maximum_of_a_fine_brute_force_grid():
    # The grid-then-refine search against S evaluated every 0.005 deg, for a few faces at once.
    widths = np.array([1.0, 2.0, 3.5])
    covers = np.array([[1.5], [4.0], [9.0]])
    s, angle, _ = face.anagnostou_kovari_support(widths, widths, 9.0, 28.0, 2.0, covers, 9.0, 28.0, 2.0)
    fine = np.arange(0.5, 89.5, 0.005)
    for k in range(3):
        length = widths[k] / np.tan(np.radians(fine))
        radius = widths[k] * length / (2 * (widths[k] + length))
        top = face.silo_stress_layered(covers[k], 9.0, 28.0, 2.0, 0.8, radius)
        brute = face.wedge_face_force(fine, widths[k], widths[k], 9.0, 28.0, 2.0, top, 0.4) / widths[k] ** 2
        assert s[k] >= brute.max() - 1e-9
        assert s[k] == pytest.approx(brute.max(), abs=1e-6)


def test_wedge_silo_vectorised_equals_one_by_one():
    covers = np.array([[2.0, 1.0], [0.5, 4.0]])
    gam = np.array([[18.0, 10.0], [10.0, 10.0]])
    s, a, t = face.anagnostou_kovari_support([1.5, 2.5], [1.5, 2.5], [10.0, 9.0], [30.0, 35.0], [0.0, 3.0],
                                             covers, gam, 30.0, 0.0)
    for k in range(2):
        s1, a1, t1 = face.anagnostou_kovari_support([1.5, 2.5][k], [1.5, 2.5][k], [10.0, 9.0][k], [30.0, 35.0][k],
                                                    [0.0, 3.0][k], covers[k][None], gam[k][None], 30.0, 0.0)
        assert s1[0] == pytest.approx(s[k]) and a1[0] == pytest.approx(a[k]) and t1[0] == pytest.approx(t[k])


def test_cohesive_face_stands_alone():
    # With enough cohesion the wedge needs no support: S < 0 (the caller takes s' as 0).
    assert float(_ak(wedge_cohesion=30.0, cover_cohesion=30.0)[0][0]) < 0.0


# ------------------------------------------------------------------------------------------------------ silo
def test_silo_without_friction_is_the_weight_less_wall_cohesion():
    # Janssen / Terzaghi silo with K tan phi = 0: sigma = (gamma - c/R) C + q (limit of methods.md s.7.1 c formula).
    assert float(face.terzaghi_silo_stress(4.0, 10.0, 0.0, 2.0, 0.8, 0.5, 7.0)) == pytest.approx(4 * (10 - 4) + 7)


def test_deep_silo_reaches_its_asymptote():
    # Janssen (1895): sigma -> (gamma R - c) / (K tan phi) as C / R grows.
    r, k, phi = 0.5, 0.8, 30.0
    deep = float(face.terzaghi_silo_stress(200.0, 10.0, phi, 1.0, k, r))
    assert deep == pytest.approx((10.0 * r - 1.0) / (k * np.tan(np.radians(phi))), rel=1e-12)


@settings(max_examples=40, deadline=None)
@given(c=st.floats(0.1, 20.0), split=st.floats(0.05, 0.95), g=st.floats(5.0, 12.0), phi=st.floats(0.0, 45.0),
       coh=st.floats(0.0, 3.0), r=st.floats(0.1, 2.0), q=st.floats(0.0, 50.0))
def test_silo_split_into_layers_equals_one_layer(c, split, g, phi, coh, r, q):
    # Identity: the silo equation integrated in two pieces of the same ground equals it in one piece, wherever the
    # stress stays positive (the layered form clips at zero at layer bases only).
    one = face.terzaghi_silo_stress(c, g, phi, coh, 0.8, r, q)
    two = face.silo_stress_layered([split * c, (1 - split) * c], g, phi, coh, 0.8, r, q)
    if one > 1e-9 and face.terzaghi_silo_stress(split * c, g, phi, coh, 0.8, r, q) > 0:
        assert float(two) == pytest.approx(float(one), rel=1e-9, abs=1e-9)


# ----------------------------------------------------------------------------------------- Broms & Bennermark
def test_broms_bennermark_check_values():
    # methods.md s.7.1 a (computed there; formula from memory): c_u = 40, gamma = 19, z0 = 5, sigma_s = 10, no
    # support: N = 2.625. Support for N = 6 with c_u = 15: 15 kPa.
    assert float(face.broms_bennermark_stability_ratio(19.0 * 5.0, 40.0, 0.0, 10.0)) == pytest.approx(2.625)
    assert float(face.broms_bennermark_support(19.0 * 5.0, 15.0, 6.0, 10.0)) == pytest.approx(15.0)
    assert face.BROMS_BENNERMARK_CRITICAL_N == 6.0  # from memory, methods.md s.7.1 a


def test_broms_bennermark_support_gives_the_critical_ratio():
    sup = face.broms_bennermark_support([95.0, 200.0], [15.0, 20.0], 6.0, 0.0)
    np.testing.assert_allclose(face.broms_bennermark_stability_ratio([95.0, 200.0], [15.0, 20.0], sup), 6.0)


# ---------------------------------------------------------------------------------------------- uplift, blow-out
def test_blowout_check_values():
    # methods.md s.7.2 (computed there; factor 1.1 and gamma_slurry = 11 from memory / common practice):
    # 80.0 / 1.1 = 72.73 kPa (83.73 at the axis); 109.43 / 1.1 = 99.48 (110.48 at the axis).
    for total, crown, axis in [(80.0, 72.73, 83.73), (109.43, 99.48, 110.48)]:
        assert total / 1.1 == pytest.approx(crown, abs=5e-3)
        assert float(face.crown_to_axis(total / 1.1, 11.0, D)) == pytest.approx(axis, abs=5e-3)


def test_uplift_with_side_shear_check_value():
    # methods.md s.7.2 (computed there; form from memory): the shear term with K0 = 0.470 adds 23.95 kPa, so the
    # block limit under 3 m of river water is 133.38 kPa before any factor.
    limit = float(face.uplift_resistance_with_shear(109.43, D, C, G_EFF, PHI, 0.0))
    assert limit - 109.43 == pytest.approx(23.95, abs=5e-3)
    assert limit == pytest.approx(133.38, abs=5e-3)


def test_uplift_shear_layered_equals_homogeneous_and_cohesion_term():
    # Same ground cut in three layers gives the same side shear; cohesion adds 2 c C / D.
    one = face.uplift_resistance_with_shear(80.0, D, C, G_EFF, PHI, 5.0)
    three = face.uplift_resistance_with_shear(80.0, D, [1.0, 2.5, 0.5], G_EFF, PHI, 5.0)
    assert float(three) == pytest.approx(float(one), rel=1e-12)
    no_c = face.uplift_resistance_with_shear(80.0, D, C, G_EFF, PHI, 0.0)
    assert float(one - no_c) == pytest.approx(2 * 5.0 * C / D)


# ----------------------------------------------------------------------------------------------------- Delft
def test_delft_sand_check_values():
    # methods.md s.7.3 (computed there; formula from memory): R_o = 1.05 m, C = 4 m, sigma'_0 = 50.95, u = 49.05,
    # phi' = 32, c' = 0, R_p,max = 2/3 C = 2.667 m: X = 0.15774 and p_max = 196.8 kPa; with G = 20 MPa, 197.3 kPa.
    x = (1.05 / (2 * C / 3)) ** 2 + 50.95 * np.sin(np.radians(PHI)) / 10000.0
    assert x == pytest.approx(0.15774, abs=1e-5)
    p = face.delft_fracture_pressure(50.95, 49.05, PHI, 0.0, [10000.0, 20000.0], 1.05, 2 * C / 3)
    np.testing.assert_allclose(p, [196.8, 197.3], atol=0.05)


def test_delft_clay_check_values():
    # methods.md s.7.3 (computed there; from memory): sigma_0 = 95, c_u = 40, G = 6 MPa, R_p,max = 2.0 m:
    # X = 0.28229, p_max = 185.6 kPa; the phi' = 0.001 deg run of the general formula gives 185.6 kPa too.
    assert (1.05 / 2.0) ** 2 + 40 / 6000 == pytest.approx(0.28229, abs=1e-5)
    assert float(face.delft_fracture_pressure_undrained(95.0, 40.0, 6000.0, 1.05, 2.0)) == pytest.approx(185.6,
                                                                                                         abs=0.05)
    general = face.delft_fracture_pressure(95.0 - 30.0, 30.0, 0.001, 40.0, 6000.0, 1.05, 2.0)
    assert float(general) == pytest.approx(185.6, abs=0.05)


def test_delft_at_zero_friction_returns_the_undrained_form():
    p0 = face.delft_fracture_pressure(60.0, 35.0, 0.0, 40.0, 6000.0, 1.05, 2.0)
    assert float(p0) == pytest.approx(float(face.delft_fracture_pressure_undrained(95.0, 40.0, 6000.0, 1.05, 2.0)))


@settings(max_examples=60, deadline=None)
@given(s0=st.floats(5.0, 300.0), u=st.floats(0.0, 200.0), cu=st.floats(5.0, 150.0), g_mpa=st.floats(2.0, 100.0),
       ro=st.floats(0.3, 2.0), rp_over_ro=st.floats(1.0, 8.0))
def test_delft_undrained_is_the_zero_friction_limit(s0, u, cu, g_mpa, ro, rp_over_ro):
    # Identity (methods.md Appendix A.2): the undrained Delft formula is the phi -> 0 limit of the general one,
    # with c' = c_u and sigma_0 = sigma'_0 + u. The difference is O(phi): checked at phi = 1e-5 deg.
    general = face.delft_fracture_pressure(s0, u, 1e-5, cu, g_mpa * 1e3, ro, ro * rp_over_ro)
    limit = face.delft_fracture_pressure_undrained(s0 + u, cu, g_mpa * 1e3, ro, ro * rp_over_ro)
    assert float(general) == pytest.approx(float(limit), rel=1e-5, abs=1e-4)


# ---------------------------------------------------------------------------------------------- crown <-> axis
@given(p=st.floats(-100.0, 1000.0), gs=st.floats(9.81, 16.0), d=st.floats(0.5, 4.0))
def test_crown_axis_round_trip(p, gs, d):
    assert float(face.axis_to_crown(face.crown_to_axis(p, gs, d), gs, d)) == pytest.approx(p, abs=1e-9)
    assert float(face.crown_to_axis(p, gs, d)) - p == pytest.approx(gs * d / 2)


@pytest.mark.parametrize("kind", [float, list, np.array])
def test_functions_take_scalars_lists_and_arrays(kind):
    def conv(v):
        return kind([v]) if kind is not float else v

    out = face.delft_fracture_pressure(conv(50.95), conv(49.05), conv(PHI), conv(0.0), conv(1e4), conv(1.05),
                                       conv(2 * C / 3))
    assert np.ravel(out)[0] == pytest.approx(196.8, abs=0.05)
    assert np.ravel(face.rankine_active_coefficient(conv(PHI)))[0] == pytest.approx(0.30726, abs=1e-5)
    assert np.ravel(face.broms_bennermark_stability_ratio(conv(95.0), conv(40.0), 0.0, conv(10.0)))[0] == 2.625


# ------------------------------------------------------------------------- K0, cavity stress, N_TC, Macklin
def test_jaky_k0():
    # methods.md s.7.2 (computed there): K0 = 1 - sin 32 = 0.470 (Jaky 1944, from memory).
    assert float(face.jaky_k0(32.0)) == pytest.approx(0.470, abs=5e-4)
    assert float(face.jaky_k0(0.0)) == 1.0


@given(sv=st.floats(0.0, 500.0), k0=st.floats(0.2, 3.0))
def test_cavity_initial_stress_is_the_mean_of_vertical_and_horizontal(sv, k0):
    # Identity: sigma'_0 = (sigma'_v + K0 sigma'_v) / 2, between the two; K0 = 1 gives sigma'_v (the methods.md s.7.3
    # check values take sigma'_0 = sigma'_v).
    s0 = float(face.cavity_initial_effective_stress(sv, k0))
    assert s0 == pytest.approx((sv + k0 * sv) / 2.0, rel=1e-12, abs=1e-12)
    assert min(sv, k0 * sv) - 1e-9 <= s0 <= max(sv, k0 * sv) + 1e-9
    assert float(face.cavity_initial_effective_stress(sv, 1.0)) == pytest.approx(sv)


def test_davis_heading_stability_ratio():
    # Davis et al. (1980) spherical lower bound, N_TC = 4 ln(2 C/D + 1) (from memory): 4 ln 3 at C/D = 1,
    # 4 ln 5 at C/D = 2, 0 at zero cover.
    np.testing.assert_allclose(face.davis_heading_stability_ratio([2.0, 4.0, 0.0], 2.0),
                               [4 * np.log(3.0), 4 * np.log(5.0), 0.0], rtol=1e-12)
    assert float(face.davis_heading_stability_ratio(2.0, 2.0)) == pytest.approx(4.394, abs=5e-4)


@given(c=st.floats(0.1, 30.0), d=st.floats(0.5, 4.0), k=st.floats(1.01, 5.0))
def test_davis_heading_stability_ratio_grows_with_cover_and_scales(c, d, k):
    # Property: more cover, higher N_TC; only C/D counts.
    assert face.davis_heading_stability_ratio(k * c, d) > face.davis_heading_stability_ratio(c, d)
    assert float(face.davis_heading_stability_ratio(k * c, k * d)) == pytest.approx(
        float(face.davis_heading_stability_ratio(c, d)), rel=1e-12)


def test_macklin_volume_loss_check_values():
    # methods.md s.1 (computed there from Macklin 1999, the fit from memory): LF 0.2 -> 0.55 %, 0.3 -> 0.86 %,
    # 0.5 -> 2.08 %, 0.7 -> 5.0 %.
    np.testing.assert_allclose(face.macklin_volume_loss_pct([0.2, 0.3, 0.5, 0.7]), [0.55, 0.86, 2.08, 5.0],
                               atol=0.006)
    assert face.MACKLIN_LOWEST_LOAD_FACTOR == 0.2
