"""The face check along a drive: hand-checkable stations, river reaches, the window, bad input, outputs.

Reference case of ../shared/methods.md section 7 (values "computed there"): sand, gamma = 20 kN/m3 (total, above and
below the water table), gamma_w = 9.81, phi' = 32 deg, c' = 0, D = 2 m, cover 4 m (axis 5 m below a flat surface at
10 m), water table at the surface. The factors used there (1.5 on s', 1.05 on u, 1.1 on blow-out, gamma_slurry = 11)
are the FaceOptions defaults; methods.md marks them from memory or common practice.
"""
import csv
import io

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from gis_out.tables import operator_csv_text
from settle.assessments import face_methods as face
from settle.assessments.face_stations import STATUSES, face_stations, station_chainages
from settle.assessments.face_tables import FACE_STATION_FIELDS, OPERATOR_COLUMNS, face_station_fields, face_summary
from settle.errors import InputError
from settle.inputs.face_settings import (FaceOptions, LayerStrength, River, SupportReach, check_face_options,
                                         check_layer_strengths, check_rivers)
from settle.inputs.ground import GroundModel
from settle.inputs.model import Ground, Layer, Reach, Surface
from settle.inputs.route import build_drive

from . import builders as b

SAND = Layer("sand", 10.0, 20.0, 0.35, "granular")
SAND_S = LayerStrength(32.0, 0.0, None, 10.0)


def model(layers=(SAND,), water=10.0, level=10.0):
    return GroundModel(Ground(Surface(level_m=level), water, tuple(layers)))


def geometry(ground, axis=5.0, xy=((0, 0), (100, 0)), d=2.0, name="A"):
    return build_drive(b.drive(xy, axis, name=name, diameter=d), ground)[0]


def run(ground=None, strengths=(SAND_S,), rivers=(), options=None, reaches=(), **kw):
    ground = ground or model()
    return face_stations(geometry(ground, **kw), ground, list(strengths), list(rivers), options, list(reaches),
                         where="p.toml")


def at(stations, chainage):
    k = int(np.argmin(np.abs(stations.chainage_m - chainage)))
    assert stations.chainage_m[k] == pytest.approx(chainage, abs=1e-6)
    return k


# ------------------------------------------------------------------------------------------- hand-checked stations
def test_flat_one_layer_station_by_hand():
    s = run()
    k = at(s, 0.0)
    assert s.cover_m[k] == pytest.approx(4.0)
    # Geostatic stresses by hand: 20 x 4 = 80 and 20 x 5 = 100 kPa total; u = 9.81 x 4 and 9.81 x 5.
    assert s.total_stress_crown_kpa[k] == pytest.approx(80.0, abs=1e-9)
    assert s.effective_stress_crown_kpa[k] == pytest.approx(80.0 - 39.24, abs=1e-9)
    assert s.total_stress_axis_kpa[k] == pytest.approx(100.0, abs=1e-9)
    assert s.effective_stress_axis_kpa[k] == pytest.approx(50.95, abs=1e-9)  # methods.md s.7.1
    assert s.water_pressure_kpa[k] == pytest.approx(39.24, abs=1e-9)
    assert s.water_pressure_axis_kpa[k] == pytest.approx(49.05, abs=1e-9)  # methods.md s.7.1
    # methods.md s.7.1 c (computed there): s' = 3.50 kPa at 63.2 deg; crown minimum 1.05 u + 1.5 s'.
    assert s.wedge_support_kpa[k] == pytest.approx(3.50, abs=5e-3)
    assert s.wedge_angle_deg[k] == pytest.approx(63.2, abs=0.05)
    assert s.support_min_kpa[k] == pytest.approx(1.05 * 39.24 + 1.5 * 3.50, abs=5e-3)
    # methods.md s.7.2 (computed there): 80.0 kPa total at the crown, 72.73 kPa after the factor 1.1.
    assert s.blowout_kpa[k] == pytest.approx(80.0, abs=1e-9)
    assert s.support_max_kpa[k] == pytest.approx(72.73, abs=5e-3)
    assert s.max_limited_by[k] == "blowout"
    assert s.at_axis(s.support_max_kpa)[k] == pytest.approx(83.73, abs=5e-3)  # methods.md s.7.2
    # Window: max - min - 2 x tolerance (plain slurry, 20 kPa by default).
    assert s.window_kpa[k] == pytest.approx(72.727 - 46.452 - 40.0, abs=5e-3)
    assert s.status[k] == "closed"
    # The same ground all along: every station alike.
    np.testing.assert_allclose(s.support_min_kpa, s.support_min_kpa[0])
    assert not s.in_river.any() and not s.low_cover.any()


def _delft_sand(sigma0, u, phi=32.0, g=10000.0, cover=4.0):
    # Delft (Luger & Hergarden 1988), methods.md s.7.3 formula with c' = 0, written out here: R_o = D/2 = 1.0 m,
    # R_p,max = 2/3 of the cover.
    sin = np.sin(np.radians(phi))
    x = (1.0 / (2 * cover / 3)) ** 2 + sigma0 * sin / g
    return u + sigma0 * (1 + sin) * x ** (-sin / (1 + sin))


def test_fracture_at_the_crown_by_hand():
    # At the crown: sigma'_v = 80 - 39.24 = 40.76 kPa, K0 = 1 - sin 32 (Jaky 1944, from memory), initial stress the
    # mean of vertical and horizontal, 40.76 (1 + K0) / 2; u = 39.24; G = 10 MPa.
    s = run()
    k0 = 1.0 - np.sin(np.radians(32.0))
    assert s.fracture_kpa[0] == pytest.approx(_delft_sand(40.76 * (1 + k0) / 2, 39.24), rel=1e-12)
    # For reference, the axis value as before: sigma'_0 = sigma'_v,axis = 50.95, u = 49.05 (methods.md s.7.3),
    # brought to the crown with gamma_slurry = 11 (11 kPa over D/2 = 1 m).
    assert s.fracture_axis_kpa[0] == pytest.approx(_delft_sand(50.95, 49.05) - 11.0, rel=1e-12)
    # Less confinement at the crown: its limit is the lower one here, and the one the maximum takes.
    assert (s.fracture_kpa < s.fracture_axis_kpa).all()


def test_a_layer_k0_sets_the_initial_stress_and_the_side_shear():
    # k0 = 1: the initial stress is sigma'_v itself; the block's side shear takes k0 in place of 1 - sin phi'.
    s = run(strengths=(LayerStrength(32.0, 0.0, None, 10.0, k0=1.0),))
    assert s.fracture_kpa[0] == pytest.approx(_delft_sand(40.76, 39.24), rel=1e-12)
    jaky, one = run(), run(strengths=(LayerStrength(32.0, 0.0, None, 10.0, k0=1.0),))
    extra = one.uplift_with_shear_kpa[0] - 80.0  # (2/D) K gamma' C^2 tan phi' / 2, methods.md s.7.2
    assert extra == pytest.approx((jaky.uplift_with_shear_kpa[0] - 80.0) / (1 - np.sin(np.radians(32.0))))


def test_river_reach_adds_the_water_column():
    # 3 m of river water over the bed (at the former surface): methods.md s.7.1-7.2 (computed there):
    # u_crown = 68.67, sigma_v,crown = 109.43, minimum 77.35 (factored), maximum 99.48 kPa at the crown.
    s = run(rivers=[River("A", 40.0, 60.0, 10.0, 13.0)])
    for c in (40.0, 50.0, 60.0):
        k = at(s, c)
        assert s.in_river[k]
        assert s.water_pressure_kpa[k] == pytest.approx(68.67, abs=1e-9)
        assert s.total_stress_crown_kpa[k] == pytest.approx(109.43, abs=1e-9)
        assert s.support_min_kpa[k] == pytest.approx(77.35, abs=5e-3)
        assert s.support_max_kpa[k] == pytest.approx(99.48, abs=5e-3)
        assert s.at_axis(s.support_max_kpa)[k] == pytest.approx(110.48, abs=5e-3)
    for c in (35.0, 39.99, 60.01):  # a station 10 mm outside each end shows the step at the bank
        k = at(s, c)
        assert not s.in_river[k] and s.total_stress_crown_kpa[k] == pytest.approx(80.0)


def test_river_bed_below_the_ground_sets_the_cover():
    # Bed 1.5 m below the ground, water 2 m above the bed: cover 2.5 m; sigma_v = 20 x 2.5 + 9.81 x 2.
    s = run(rivers=[River("A", 30.0, 50.0, 8.5, 10.5)])
    k = at(s, 45.0)
    assert s.surface_level_m[k] == 8.5 and s.ground_level_m[k] == 10.0
    assert s.cover_m[k] == pytest.approx(2.5)
    assert s.blowout_kpa[k] == pytest.approx(20 * 2.5 + 9.81 * 2.0)
    assert s.water_pressure_kpa[k] == pytest.approx(9.81 * 4.5)
    assert s.low_cover[k] and not s.low_cover[at(s, 70.0)]  # 2.5 m < 2 D = 4 m


def test_side_shear_option_uses_the_block_limit():
    # methods.md s.7.2 (computed there): the block limit under 3 m of water is 133.38 kPa before the factor 1.1.
    s = run(rivers=[River("A", 40.0, 60.0, 10.0, 13.0)], options=FaceOptions(blowout_side_shear=True),
            strengths=(LayerStrength(32.0, 0.0),))  # no G: no fracture limit below it
    k = at(s, 50.0)
    assert s.uplift_with_shear_kpa[k] == pytest.approx(133.38, abs=5e-3)
    assert s.support_max_kpa[k] == pytest.approx(133.38 / 1.1, abs=5e-3)
    assert s.max_limited_by[k] == "uplift_shear"


def test_layered_ground_with_water_table_between_layers():
    # Made ground 18 kN/m3 from 10 to 8.5 m, sand 20 below; water table at 9 m; crown 6, axis 5 (D = 2).
    made = Layer("made", 10.0, 18.0, 0.45, "granular")
    sand = Layer("sand", 8.5, 20.0, 0.35, "granular")
    g = model((made, sand), water=9.0)
    s = run(g, strengths=(LayerStrength(28.0, 0.0), LayerStrength(34.0, 0.0)))
    k = at(s, 50.0)
    assert s.total_stress_crown_kpa[k] == pytest.approx(1.5 * 18 + 2.5 * 20)
    assert s.water_pressure_kpa[k] == pytest.approx(9.81 * 3.0)
    assert s.effective_stress_axis_kpa[k] == pytest.approx(1.5 * 18 + 3.5 * 20 - 9.81 * 4.0)
    # The wedge-silo inputs, by hand: cover layers 1 m of made ground dry (18), 0.5 m wet (18 - 9.81), 2.5 m of
    # sand wet; the face (6 to 4 m) is all sand.
    expect = face.anagnostou_kovari_support(2.0, 2.0, 20 - 9.81, 34.0, 0.0, [[1.0, 0.5, 2.5]],
                                            [[18.0, 18 - 9.81, 20 - 9.81]], [[28.0, 28.0, 34.0]], [[0.0, 0, 0]])
    assert s.wedge_support_kpa[k] == pytest.approx(expect[0][0], rel=1e-12)


def test_mixed_face_takes_the_weaker_strength_and_mean_weight():
    # Face from 6 to 4 m cut at 5.5 m: 0.5 m of sand (phi 36) over 1.5 m of silt (phi 26, c' 2); water at 10 m.
    sand, silt = Layer("sand", 10.0, 20.0, 0.35, "granular"), Layer("silt", 5.5, 19.0, 0.4, "granular")
    s = run(model((sand, silt)), strengths=(LayerStrength(36.0, 0.0), LayerStrength(26.0, 2.0)))
    g_face = (0.5 * (20 - 9.81) + 1.5 * (19 - 9.81)) / 2.0
    expect = face.anagnostou_kovari_support(2.0, 2.0, g_face, 26.0, 0.0, 4.0, 20 - 9.81, 36.0, 0.0)
    assert s.wedge_support_kpa[0] == pytest.approx(expect[0][0], rel=1e-12)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(cuts=st.lists(st.floats(-3.0, 9.5), min_size=1, max_size=3, unique=True), water=st.floats(3.0, 10.0))
def test_identical_layers_change_nothing(cuts, water):
    # Identity: cutting a ground into layers of the same properties changes no stress or pressure.
    tops = [10.0] + sorted({round(c, 3) for c in cuts if c < 9.99}, reverse=True)
    layers = [Layer(f"l{j}", t, 20.0, 0.35, "granular") for j, t in enumerate(tops)]
    one = run(model(water=water))
    many = run(model(layers, water=water), strengths=[SAND_S] * len(layers))
    for c in (0.0, 50.0, 100.0):
        i, j = at(one, c), at(many, c)
        for name in ("total_stress_crown_kpa", "support_min_kpa", "support_max_kpa", "fracture_kpa",
                     "wedge_support_kpa", "uplift_with_shear_kpa"):
            assert getattr(many, name)[j] == pytest.approx(getattr(one, name)[i], rel=1e-9, abs=1e-9), name


# --------------------------------------------------------------------------------------------------- clay
def _clay(cu):
    clay = Layer("clay", 10.0, 19.0, 0.5, "cohesive")
    return run(model((clay,), water=8.0), strengths=(LayerStrength(25.0, 5.0, cu, 6.0),))


def test_broms_bennermark_governs_soft_clay_and_is_flagged():
    # Broms & Bennermark (1967), methods.md s.7.1 a: N = 19 x 5 / c_u; critical 6 (from memory).
    soft = _clay(10.0)
    assert soft.stability_ratio_n[0] == pytest.approx(9.5)
    assert soft.n_above_critical.all()
    # Support that holds N at the working level 3 (Mair 1979; O'Reilly 1988; from memory) at the axis:
    # 95 - 3 x 10 = 65 kPa; at the crown 65 - 11 x 1 = 54 kPa.
    assert soft.support_min_kpa[0] == pytest.approx(54.0)
    assert soft.min_governed_by[0] == "broms_bennermark"
    assert soft.stability_ratio_at_min_n[0] == pytest.approx(3.0)
    # At collapse instead (allowable = critical = 6): 95 - 60 = 35 kPa at the axis, 24 kPa at the crown.
    clay = Layer("clay", 10.0, 19.0, 0.5, "cohesive")
    at_collapse = run(model((clay,), water=8.0), strengths=(LayerStrength(25.0, 5.0, 10.0, 6.0),),
                      options=FaceOptions(allowable_stability_ratio=6.0))
    assert at_collapse.support_min_kpa[0] == pytest.approx(24.0)
    firm = _clay(40.0)
    assert firm.stability_ratio_n[0] == pytest.approx(2.375)
    assert not firm.n_above_critical.any() and firm.min_governed_by[0] == "wedge_silo"
    # The drained minimum with a self-supporting wedge is the factored water pressure: 1.05 x 9.81 x 2 at the crown.
    assert firm.wedge_support_kpa[0] < 0
    assert firm.support_min_kpa[0] == pytest.approx(1.05 * 9.81 * 2.0)


def test_undrained_fracture_in_clay_by_hand():
    # Delft undrained (methods.md s.7.3): c_u = 40, G = 6 MPa, R_o = 1.0, R_p,max = cover / 2 = 2.0 m.
    s = _clay(40.0)
    x = (1.0 / 2.0) ** 2 + 40.0 / 6000.0
    # At the crown (6 m, water at 8 m): sigma_v = 19 x 4 = 76, u = 9.81 x 2, K0 = 1 - sin 25 (Jaky, from memory);
    # sigma_0 = (76 - 19.62)(1 + K0) / 2 + 19.62.
    k0 = 1.0 - np.sin(np.radians(25.0))
    sigma0 = (76.0 - 19.62) * (1 + k0) / 2 + 19.62
    assert s.fracture_kpa[0] == pytest.approx(sigma0 + 40.0 * (1 + np.log(1 / x)))
    # At the axis, for reference: sigma_0 = 95 total; to the crown, minus 11 kPa.
    assert s.fracture_axis_kpa[0] == pytest.approx(95.0 + 40.0 * (1 + np.log(1 / x)) - 11.0)


def test_granular_ground_has_no_stability_ratio():
    s = run()
    assert np.isnan(s.stability_ratio_n).all() and not s.n_above_critical.any()


# ------------------------------------------------------------------------------------------------ stations
def test_stations_at_spacing_vertices_crossings_and_river_ends():
    sand, silt = Layer("sand", 10.0, 20.0, 0.35, "granular"), Layer("silt", 4.2, 19.0, 0.4, "granular")
    g = model((sand, silt))
    xy = ((0, 0), (37.3, 0), (100, 0))
    drive = build_drive(b.drive(xy, [6.0, 5.2, 3.0], diameter=2.0), g)[0]
    river = River("A", 61.2, 71.9, 9.5, 11.0)
    chain = station_chainages(drive, g, [river], 10.0)
    assert chain[0] == drive.start_chainage_m and chain[-1] == drive.end_chainage_m
    assert np.all(np.diff(chain) > 1e-3)
    for c in list(drive.chainage_m) + [61.2, 71.9]:
        assert np.min(np.abs(chain - c)) < 1e-9
    s = face_stations(drive, g, [SAND_S, SAND_S], [river], FaceOptions(face_station_spacing_m=10.0))
    assert np.any(np.isclose(s.axis_level_m, 4.2, atol=1e-9))  # axis crosses the silt's top
    assert np.any(np.isclose(s.crown_level_m, 4.2, atol=1e-9))  # crown crosses it
    assert np.any(np.isclose(s.invert_level_m, 4.2, atol=1e-9))  # invert crosses it
    regular = np.arange(0.0, drive.end_chainage_m, 10.0)
    assert all(np.min(np.abs(s.chainage_m - r)) < 1e-9 for r in regular)


def test_surface_from_the_ground_model_between_vertices():
    # A triangulated surface sloping 1 in 20: the cover follows it at every station.
    pts = np.array([[-10, -10, 10.5], [110, -10, 4.5], [110, 10, 4.5], [-10, 10, 10.5]], dtype=float)
    g = GroundModel(Ground(Surface(points_xyz=pts), 3.0, (SAND,)))
    s = face_stations(geometry(g, axis=1.0), g, [SAND_S])
    np.testing.assert_allclose(s.surface_level_m, 10.0 - 0.05 * s.chainage_m, atol=1e-9)
    np.testing.assert_allclose(s.cover_m, 10.0 - 0.05 * s.chainage_m - 2.0, atol=1e-9)


# -------------------------------------------------------------------------------------------------- window
def test_window_status_and_support_reaches():
    opts = FaceOptions(tolerance_slurry_kpa=20.0, tolerance_air_cushion_kpa=5.0, window_margin_kpa=10.0)
    s = run(options=opts, reaches=[SupportReach(20.0, 40.0, "air_cushion"), SupportReach(80.0, 100.0, "slurry")])
    np.testing.assert_allclose(s.window_kpa, s.support_max_kpa - s.support_min_kpa - 2 * s.tolerance_kpa)
    assert s.support_mode[at(s, 19.99)] == "slurry" and s.support_mode[at(s, 39.99)] == "air_cushion"
    assert s.support_mode[at(s, 20.0)] == "air_cushion" and s.support_mode[at(s, 35.0)] == "air_cushion"
    assert s.support_mode[at(s, 40.0)] == "slurry"  # a reach ends before its to_chainage_m
    assert s.support_mode[at(s, 100.0)] == "slurry"
    # 72.73 - 46.45 = 26.28 kPa: closed with +/-20, narrow? no: 26.28 - 10 = 16.3 >= 10, open with +/-5.
    assert s.status[at(s, 30.0)] == "open" and s.status[at(s, 60.0)] == "closed"
    narrow = run(options=FaceOptions(tolerance_slurry_kpa=9.0, window_margin_kpa=10.0))
    assert narrow.window_kpa[0] == pytest.approx(26.275 - 18.0, abs=5e-3) and narrow.status[0] == "narrow"
    assert set(s.status) | set(narrow.status) <= set(STATUSES)


def test_margin_and_surcharge():
    base = run()
    more = run(options=FaceOptions(support_margin_kpa=7.5, surcharge_kpa=10.0))
    assert more.blowout_kpa[0] == base.blowout_kpa[0]  # a surcharge is not counted against blow-out
    assert more.wedge_silo_stress_kpa[0] > base.wedge_silo_stress_kpa[0]
    assert more.support_min_kpa[0] >= base.support_min_kpa[0] + 7.5


def test_fracture_can_limit_the_maximum():
    # A very soft ground (G = 0.2 MPa) and a large factor: the fracture limit falls below the uplift limit.
    s = run(strengths=(LayerStrength(32.0, 0.0, None, 0.2),), options=FaceOptions(fracture_factor=3.0))
    assert s.max_limited_by[0] == "fracture"
    assert s.support_max_kpa[0] == pytest.approx(s.fracture_kpa[0] / 3.0)


def test_no_shear_modulus_leaves_the_uplift_limit_and_warns():
    s = run(strengths=(LayerStrength(32.0, 0.0),))
    assert np.isnan(s.fracture_kpa).all()
    assert s.support_max_kpa[0] == pytest.approx(80.0 / 1.1)
    assert any("shear_modulus_mpa" in w for w in s.warnings)


def test_groundwater_above_the_surface_outside_a_river_is_capped_and_warned():
    s = run(model(water=11.0))
    assert s.water_level_m[0] == 10.0 and s.water_pressure_kpa[0] == pytest.approx(9.81 * 4.0)
    assert any("above the ground surface" in w and "[[rivers]]" in w for w in s.warnings)


def test_closed_window_is_warned():
    s = run()
    assert any("closed" in w for w in s.warnings)


# ------------------------------------------------------------------------------------------------ bad input
@pytest.mark.parametrize("river, message", [
    (River("A", 80.0, 120.0, 9.0, 10.0), r"\[\[rivers\]\] #1.*outside the drive \"A\""),
    (River("A", 40.0, 60.0, 10.5, 11.0), r"\[\[rivers\]\] #1: bed_level_m must not be above the ground surface"),
    (River("A", 40.0, 60.0, 9.0, 8.0), r"\[\[rivers\]\] #1: water_level_m must not be below the bed"),
    (River("A", 40.0, 60.0, 5.5, 8.0), r"bed_level_m must be above the tunnel crown"),
    (River("A", 60.0, 40.0, 9.0, 10.0), r"to_chainage_m must be more than from_chainage_m"),
])
def test_bad_rivers(river, message):
    with pytest.raises(InputError, match=message):
        run(rivers=[river])


def test_overlapping_rivers_and_unknown_drive():
    with pytest.raises(InputError, match=r"#2.*overlaps \[\[rivers\]\] #1"):
        run(rivers=[River("A", 10.0, 30.0, 9.0, 10.0), River("A", 25.0, 40.0, 9.0, 10.0)])
    with pytest.raises(InputError, match=r'\[\[rivers\]\] #1 "Brook": drive "B" is not a drive of the project'):
        check_rivers([River("B", 0.0, 1.0, 9.0, 10.0, "Brook")], ["A"], "p.toml")
    # A river of another drive is not this drive's business.
    assert not run(rivers=[River("other", 500.0, 600.0, 0.0, 1.0)]).in_river.any()


@pytest.mark.parametrize("strength, message", [
    (LayerStrength(55.0, 0.0), r'#1 "sand": friction_angle_deg must be a number of degrees from 0 to 50; got 55'),
    (LayerStrength(-1.0, 0.0), r"friction_angle_deg must be .*got -1"),
    (LayerStrength(30.0, -2.0), r"cohesion_kpa must be a number of kPa at least 0; got -2"),
    (LayerStrength(30.0, 0.0, 40.0), r"undrained_strength_kpa applies only to a cohesive layer"),
    (LayerStrength(30.0, 0.0, None, 0.0), r"shear_modulus_mpa must be a number of MPa more than 0; got 0"),
    (LayerStrength(float("nan"), 0.0), r"friction_angle_deg must be"),
])
def test_bad_strengths(strength, message):
    with pytest.raises(InputError, match=message):
        run(strengths=(strength,))


def test_cohesive_layer_needs_undrained_strength_and_counts_must_match():
    clay = Layer("clay", 10.0, 19.0, 0.5, "cohesive")
    with pytest.raises(InputError, match=r'#1 "clay": undrained_strength_kpa is required for a cohesive layer'):
        check_layer_strengths([LayerStrength(25.0, 5.0)], (clay,), "p.toml")
    with pytest.raises(InputError, match=r"1 layers but strengths for 2"):
        check_layer_strengths([SAND_S, SAND_S], (SAND,), "p.toml")


@pytest.mark.parametrize("options, message", [
    (FaceOptions(slurry_unit_weight_kn_m3=9.0), r"\[face\]: slurry_unit_weight_kn_m3 must be .*got 9"),
    (FaceOptions(face_station_spacing_m=0.0), r"face_station_spacing_m must be a number of metres more than 0"),
    (FaceOptions(blowout_factor=0.9), r"blowout_factor must be a factor of at least 1; got 0.9"),
    (FaceOptions(support_mode="air"), r'support_mode must be one of "slurry", "air_cushion"; got "air"'),
    (FaceOptions(tolerance_slurry_kpa=-1.0), r"tolerance_slurry_kpa must be"),
])
def test_bad_options(options, message):
    with pytest.raises(InputError, match=message):
        check_face_options(options, "p.toml")


def test_bad_support_reaches():
    with pytest.raises(InputError, match=r'face_support\]\] #1: mode must be one of .*got "epb"'):
        run(reaches=[SupportReach(0.0, 10.0, "epb")])
    with pytest.raises(InputError, match=r"#1: chainage 90-130 m is outside the drive"):
        run(reaches=[SupportReach(90.0, 130.0, "slurry")])
    with pytest.raises(InputError, match=r"#2: chainage 5-20 m overlaps #1"):
        run(reaches=[SupportReach(0.0, 10.0, "slurry"), SupportReach(5.0, 20.0, "air_cushion")])


# -------------------------------------------------------------------------------------------------- outputs
def test_gis_fields():
    s = run(rivers=[River("A", 40.0, 60.0, 10.0, 13.0)])
    cols = face_station_fields(s)
    assert tuple(cols)[: len(FACE_STATION_FIELDS)] == FACE_STATION_FIELDS
    assert all(len(v) == len(s) for v in cols.values())
    assert set(cols["drive"]) == {"A"} and set(cols["status"]) <= set(STATUSES)
    assert cols["in_river"].sum() == np.sum((s.chainage_m >= 40) & (s.chainage_m <= 60))


def test_operator_csv():
    opts = FaceOptions(tolerance_slurry_kpa=20.0, tolerance_air_cushion_kpa=5.0)
    s = run(options=opts, reaches=[SupportReach(20.0, 40.0, "air_cushion")])
    text = operator_csv_text([s, s])
    lines = text.splitlines()
    assert lines[0].startswith("# Planning bounds only") and "responsible engineer" in lines[0]
    rows = list(csv.DictReader(io.StringIO("\n".join(line for line in lines if not line.startswith("#")))))
    assert tuple(rows[0]) == OPERATOR_COLUMNS and len(rows) == 2 * len(s)
    k = at(s, 30.0)
    row = rows[k]
    assert row["status"] == "open" and row["support_mode"] == "air_cushion"
    assert float(row["hold_from_crown_kpa"]) == pytest.approx(s.support_min_kpa[k] + 5.0, abs=0.05)
    assert float(row["hold_to_crown_kpa"]) == pytest.approx(s.support_max_kpa[k] - 5.0, abs=0.05)
    assert float(row["hold_to_axis_kpa"]) - float(row["hold_to_crown_kpa"]) == pytest.approx(11.0, abs=0.06)
    closed = rows[at(s, 60.0)]
    assert closed["status"] == "closed" and closed["hold_from_crown_kpa"] == "" and closed["hold_to_axis_kpa"] == ""


def test_summary():
    s = run(rivers=[River("A", 40.0, 60.0, 10.0, 13.0)])
    out = face_summary(s)
    assert out["face_min_window_kpa"] == pytest.approx(s.window_kpa.min())
    assert 40.0 <= out["face_min_window_chainage_m"] <= 60.0
    assert out["face_closed_stations"] == len(s)


def test_section_png_is_written_and_not_blank(tmp_path):
    pytest.importorskip("matplotlib")
    from gis_out.face_section import face_section_png

    sand, clay = Layer("sand", 10.0, 20.0, 0.35, "granular"), Layer("clay", 4.0, 19.0, 0.5, "cohesive")
    g = model((sand, clay), water=9.0)
    drive = geometry(g, axis=[5.0, 4.0], xy=((0, 0), (60, 0)))
    s = face_stations(drive, g, [SAND_S, LayerStrength(24.0, 5.0, 50.0, 8.0)], [River("A", 20.0, 35.0, 8.5, 10.5)])
    path = face_section_png(s, drive, tmp_path / "section.png", layers=(sand, clay))
    assert path.exists() and path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    import matplotlib.image

    pixels = matplotlib.image.imread(path)
    assert pixels.shape[0] > 500 and pixels.shape[1] > 800
    assert pixels[..., :3].std() > 0.05  # not a blank image
    assert not list(tmp_path.glob(".*.tmp"))  # no temporary left


def test_stations_where_the_tunnel_crosses_the_water_table():
    # Groundwater at 5.5 m; the axis falls from 7 to 3 m: the crown, axis and invert each cross it once.
    g = model(water=5.5)
    s = face_stations(geometry(g, axis=[7.0, 3.0]), g, [SAND_S], options=FaceOptions(face_station_spacing_m=50.0))
    for level in (s.crown_level_m, s.axis_level_m, s.invert_level_m):
        assert np.any(np.isclose(level, 5.5, atol=1e-9))


# ------------------------------------------------------------------------------- working level in clay (issue 13)
def _design(vl_pct=1.0, reaches=()):
    return b.drive(((0, 0), (100, 0)), 5.0, diameter=2.0, vl_pct=vl_pct, reaches=tuple(reaches))


def _clay_run(cu, design=None, **kw):
    clay = Layer("clay", 10.0, 19.0, 0.5, "cohesive")
    g = model((clay,), water=8.0)
    return face_stations(geometry(g), g, [LayerStrength(25.0, 5.0, cu, 6.0)], design_drive=design, **kw)


def test_implied_volume_loss_by_hand_and_its_warning():
    # Soft clay, c_u = 10 kPa: the minimum holds N = 3 (95 - 65 = 30 kPa over c_u at the axis). Cover 4 m, D = 2 m:
    # N_TC = 4 ln(2 x 2 + 1) (Davis et al. 1980, from memory); LF = 3 / N_TC; VL = 0.23 exp(4.4 LF) % (Macklin
    # 1999, from memory; methods.md s.1).
    reach = Reach(40.0, 60.0, 2.0)
    s = _clay_run(10.0, _design(1.0, [reach]))
    n_tc = 4.0 * np.log(5.0)
    lf = 3.0 / n_tc
    np.testing.assert_allclose(s.stability_ratio_at_min_n, 3.0, rtol=1e-12)
    np.testing.assert_allclose(s.critical_stability_ratio_tc, n_tc, rtol=1e-12)
    np.testing.assert_allclose(s.load_factor, lf, rtol=1e-12)
    np.testing.assert_allclose(s.implied_volume_loss_pct, 0.23 * np.exp(4.4 * lf), rtol=1e-12)
    assert s.implied_volume_loss_pct[0] == pytest.approx(1.787, abs=5e-4)
    # The design volume loss of each station's reach: 2 % from 40 up to 60 m, 1 % elsewhere.
    inside = (s.chainage_m >= 40.0) & (s.chainage_m < 60.0)
    np.testing.assert_array_equal(s.design_volume_loss_pct, np.where(inside, 2.0, 1.0))
    np.testing.assert_array_equal(s.implied_above_design, ~inside)
    warning = [w for w in s.warnings if "volume loss implied" in w]
    assert len(warning) == 1 and "chainage 0-35 m, 60-100 m;" in warning[0] and "1.79 % against 1.00 %" in warning[0]


def test_load_factor_below_the_fit_takes_its_lowest_value():
    # Stiff clay, c_u = 100: the drained minimum governs (1.05 x 9.81 x 2 at the crown, + 11 at the axis):
    # N = (95 - 31.6) / 100 = 0.634, LF = 0.098 < 0.2: VL is taken at LF = 0.2, 0.23 exp(0.88) = 0.555 %.
    s = _clay_run(100.0, _design(0.5))
    assert s.min_governed_by[0] == "wedge_silo"
    assert s.load_factor[0] == pytest.approx((95.0 - 1.05 * 9.81 * 2 - 11.0) / 100.0 / (4.0 * np.log(5.0)))
    np.testing.assert_allclose(s.implied_volume_loss_pct, 0.23 * np.exp(0.88), rtol=1e-12)
    assert s.implied_above_design.all()  # 0.555 % > 0.5 %


def test_no_volume_loss_comparison_without_clay_or_design():
    sand = run()
    assert np.isnan(sand.implied_volume_loss_pct).all() and np.isnan(sand.load_factor).all()
    assert not sand.implied_above_design.any()
    alone = _clay_run(10.0)
    assert np.isfinite(alone.implied_volume_loss_pct).all() and np.isnan(alone.design_volume_loss_pct).all()
    assert not alone.implied_above_design.any() and not any("volume loss implied" in w for w in alone.warnings)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(cu=st.floats(5.0, 80.0), margin=st.floats(0.0, 40.0))
def test_more_support_lowers_the_load_factor_by_margin_over_cu(cu, margin):
    # Identity: a margin m on the minimum lowers N by m / c_u, the load factor by m / (c_u N_TC), and the implied
    # volume loss never rises.
    base = _clay_run(cu)
    more = _clay_run(cu, options=FaceOptions(support_margin_kpa=margin))
    n_tc = 4.0 * np.log(5.0)
    np.testing.assert_allclose(more.load_factor, base.load_factor - margin / (cu * n_tc), rtol=1e-9, atol=1e-12)
    assert np.all(more.implied_volume_loss_pct <= base.implied_volume_loss_pct + 1e-12)


@pytest.mark.parametrize("options, message", [
    (FaceOptions(allowable_stability_ratio=7.0), r"allowable_stability_ratio must be a number more than 0 and at "
                                                 r"most critical_stability_ratio \(6\); got 7"),
    (FaceOptions(allowable_stability_ratio=0.0), r"allowable_stability_ratio must be .*got 0"),
])
def test_bad_allowable_stability_ratio(options, message):
    with pytest.raises(InputError, match=message):
        check_face_options(options, "p.toml")


@pytest.mark.parametrize("k0", [0.1, 3.5, float("nan")])
def test_bad_k0(k0):
    with pytest.raises(InputError, match=r'#1 "sand": k0 must be a number from 0.2 to 3; got'):
        run(strengths=(LayerStrength(32.0, 0.0, None, 10.0, k0=k0),))


# ----------------------------------------------------------------------------- stations: merged, printed once
def _printed_once(stations):
    rows = operator_csv_text([stations]).splitlines()[3:]
    chainages = [row.split(",")[1] for row in rows]
    return len(chainages) == len(set(chainages)) == len(stations)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(jitter=st.lists(st.floats(-0.012, 0.012), min_size=3, max_size=12), spacing=st.sampled_from([2.5, 5.0]),
       river_at=st.floats(10.0, 40.0), reach_at=st.floats(55.0, 85.0), start=st.floats(0.0, 3.0))
def test_no_two_stations_closer_than_5_mm_nor_printed_alike(jitter, spacing, river_at, reach_at, start):
    # Vertices a few millimetres from the regular stations (as on the demo, whose chainage runs along the 3-D axis),
    # a river and a support reach: the stations keep 5 mm apart, print once each to 0.01 m, and keep the drive's
    # ends, every reach end and the step station 10 mm beyond it.
    xs = np.concatenate([[0.0], np.arange(1, len(jitter) + 1) * 100.0 / (len(jitter) + 1) + np.array(jitter), [100.0]])
    g = model()
    drive = build_drive(b.drive(np.column_stack([xs, np.zeros_like(xs)]), 5.0, diameter=2.0,
                                start_chainage_m=start), g)[0]
    river = River("A", start + river_at, start + river_at + 7.3, 9.5, 10.5)
    reach = SupportReach(start + reach_at, start + reach_at + 6.1, "air_cushion")
    s = face_stations(drive, g, [SAND_S], [river], FaceOptions(face_station_spacing_m=spacing), [reach])
    c = s.chainage_m
    assert np.all(np.diff(c) >= 0.005 - 1e-12)
    assert _printed_once(s)
    assert c[0] == drive.start_chainage_m and c[-1] == drive.end_chainage_m
    for must in (river.from_chainage_m - 0.01, river.from_chainage_m, river.to_chainage_m, river.to_chainage_m + 0.01,
                 reach.from_chainage_m - 0.01, reach.from_chainage_m, reach.to_chainage_m - 0.01, reach.to_chainage_m):
        assert np.min(np.abs(c - must)) < 1e-9


def test_demo_face_pressures_print_each_chainage_once():
    # The demo (issue 13: 34 stations lay 1-5 mm from another and printed as duplicate rows): no two rows of
    # face_pressures.csv share a drive and chainage, and its minimum cover is one number.
    from gis_out.frames import route_frame
    from settle.inputs.project_file import load_project
    from settle.inputs.route import rounded_cover_m

    p = load_project(b.DEMO / "ostrey.toml")
    g = GroundModel(p.ground)
    all_stations, drives = [], []
    for d in p.drives:
        geometry, warnings = build_drive(d, g, "ostrey.toml", rivers=p.rivers)
        drives.append(geometry)
        s = face_stations(geometry, g, list(p.strengths), list(p.rivers), p.face, list(d.face_support),
                          "ostrey.toml", design_drive=d)
        all_stations.append(s)
        assert np.all(np.diff(s.chainage_m) >= 0.005 - 1e-12) and _printed_once(s)
        # The face stations' least cover, to the river bed under the brook, is the drive's.
        assert rounded_cover_m(s.cover_m.min()) == rounded_cover_m(geometry.min_cover_m)
        for w in warnings:
            assert f"smallest {rounded_cover_m(geometry.min_cover_m):.2f} m" in w
    rows = operator_csv_text(all_stations).splitlines()[3:]
    keys = [tuple(row.split(",")[:2]) for row in rows]
    assert len(keys) == len(set(keys))
    main = drives[0]
    assert rounded_cover_m(main.min_cover_m) == 3.10 and main.min_cover_chainage_m == pytest.approx(289.0)
    route = route_frame(drives, p.crs)
    assert list(route["min_cover_m"]) == [rounded_cover_m(d.min_cover_m) for d in drives]


def test_minimum_cover_is_one_number_everywhere():
    # A valley between the two vertices of a straight drive: the least cover (3.1049 m at 50 m) lies between them,
    # where the vertices alone would say 4.68 m. The cover warning, summary.json (drive and face summary), the route
    # layer and the closing table all show 3.10 m.
    import dataclasses

    from gis_out.frames import route_frame
    from settle import run as run_project
    from settle.procedure.summary import summarise
    from settle.terminal import summary_table

    pts = np.array([[-10, -10, 10], [-10, 10, 10], [50, -10, 8.1049], [50, 10, 8.1049], [110, -10, 10],
                    [110, 10, 10]], dtype=float)
    g = Ground(Surface(points_xyz=pts), 3.0, (SAND,))
    project = dataclasses.replace(b.project([b.drive(((0, 0), (100, 0)), 4.0, diameter=2.0)], spacing=2.0,
                                            ground_=g), strengths=(SAND_S,))
    result = run_project(project)
    drive = result.drives[0]
    assert drive.min_cover_m == pytest.approx(3.1049, abs=1e-9) and drive.min_cover_chainage_m == 50.0
    assert np.min(drive.cover_m) > 4.6  # at the vertices
    summary = summarise(result)
    assert summary["drives"][0]["min_cover_m"] == 3.1 and summary["drives"][0]["min_cover_chainage_m"] == 50.0
    assert summary["face_support"][0]["min_cover_m"] == 3.1
    assert route_frame(result.drives, project.crs)["min_cover_m"][0] == 3.1
    assert any("smallest 3.10 m" in w for w in result.warnings)
    assert "least cover 3.10 m" in summary_table(summary, "out")
