"""Tests of the back-analysis from monitoring (settle.fitting).

Synthetic readings are made with the same forward model (settle.fitting.predicted_settlement_mm on the project with
known values); noise is Gaussian with a fixed seed, stated in each test. Recovery is checked against the fit's own
standard errors (within 3 standard errors), and the standard errors are checked to be small enough to mean something.
The standard errors are clustered by monitoring point; their coverage is tested in tests/test_fit_uncertainty.py.
"""
from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from settle.errors import InputError
from settle.monitoring.fitted_file import fitted_project_toml
from settle.monitoring.fitting import (STATUS_AMBER, STATUS_CLEAR, STATUS_RED, FitResult, apply_fits, back_analysis,
                                       comparison, fit_report, point_chainage_m, predicted_settlement_mm,
                                       trigger_status)
from settle.engine.troughs import excavated_area
from settle.inputs.model import Reach
from settle.inputs.project_file import load_project
from settle.inputs.readings import Readings, read_readings

from . import builders as b

DATA = Path(__file__).parent / "data"
T0 = np.datetime64("2024-03-01T07:00:00")


def readings_for(project, xy, faces, drive=0, depth=0.0, ids=None):
    """Every point read once at every face, a day apart, settlement 0 (filled in by the caller)."""
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    ids = np.array(ids if ids is not None else [f"P{k}" for k in range(len(xy))], dtype=object)
    faces = np.asarray(faces, dtype=float)
    n = len(xy) * len(faces)
    point = np.tile(np.arange(len(xy)), len(faces))
    face = np.repeat(faces, len(xy))
    day = np.repeat(np.arange(len(faces)), len(xy))
    return Readings(ids[point], xy[point, 0], xy[point, 1], np.full(n, float(depth)),
                    T0 + day.astype("timedelta64[D]"), np.zeros(n), face, np.full(n, drive, dtype=int),
                    np.arange(2, n + 2), tuple(d.name for d in project.drives), source="synthetic.csv")


def truth(project, values):
    """The project with known values: {(drive name, key): (volume_loss_pct, K)}."""
    return apply_fits(project, {k: FitResult(vl, kk, 0.0, 0.0, 0, 0.0) for k, (vl, kk) in values.items()})


# ------------------------------------------------------------------ methods.md section 8: the synthetic section
# methods.md section 8, computed there: D = 2.4 m, z0 = 6 m, K = 0.5, VL = 1.5 %; points y = -9 ... 9 m and the
# measured values (exact plus the listed noise). The 2-parameter fit (y0 = 0) gives Smax 8.9787 mm, i 3.0371 m,
# VL 1.5109 %, K 0.5062. Exact data return Smax 9.0239 mm, i 3.0000 m.
SECTION_Y = [-9, -6, -4, -2, 0, 2, 4, 6, 9]
SECTION_MEASURED = [0.300, 0.921, 4.110, 7.026, 9.324, 6.826, 3.810, 1.521, -0.100]


def far_section(offsets_m, settlement_mm, diameter_m=2.4, axis_depth_m=6.0):
    """A transverse section at chainage 1000 of a complete 2000 m straight drive: the longitudinal factor
    Phi(1000/i) - Phi(-1000/i) is 1 to machine precision, so the forward model is Peck's Gaussian there."""
    project = b.project([b.drive([[0, 0], [2000, 0]], 10.0 - axis_depth_m, diameter=diameter_m)])
    y = np.asarray(offsets_m, dtype=float)
    r = readings_for(project, np.column_stack([np.full(len(y), 1000.0), y]), [2000.0])
    r.settlement_mm = np.asarray(settlement_mm, dtype=float)
    return project, r


def test_methods_section_8_two_parameter_fit():
    project, r = far_section(SECTION_Y, SECTION_MEASURED)
    fit = back_analysis(project, r).fits[("A", None)]
    # Tolerance 2e-4: the table gives 4 decimals; the forward model equals the Gaussian here (see far_section).
    assert fit.volume_loss_pct == pytest.approx(1.5109, abs=2e-4)
    assert fit.trough_width_k == pytest.approx(0.5062, abs=2e-4)
    i = fit.trough_width_k * 6.0
    smax = fit.volume_loss_pct / 100 * excavated_area(2.4) / (math.sqrt(2 * math.pi) * i) * 1e3
    assert i == pytest.approx(3.0371, abs=1e-3)
    assert smax == pytest.approx(8.9787, abs=1e-3)
    assert fit.readings_used == 9 and fit.outliers == []
    # The RMS is that of the residuals listed in methods.md (noise of +/-0.1 to 0.4 mm).
    assert 0.1 < fit.rms_mm < 0.4


def test_methods_section_8_exact_data_return_the_values():
    # methods.md section 8: exact data return (9.0239, 3.0000, 0): VL 1.5 %, K 0.5.
    exact = [0.100, 1.221, 3.710, 7.226, 9.024, 7.226, 3.710, 1.221, 0.100]  # rounded to 0.001 mm there
    project, r = far_section(SECTION_Y, exact)
    fit = back_analysis(project, r).fits[("A", None)]
    assert fit.volume_loss_pct == pytest.approx(1.5, abs=2e-4)
    assert fit.trough_width_k == pytest.approx(0.5, abs=2e-4)
    assert fit.rms_mm < 0.001


@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(vl=st.floats(0.2, 4.0), k=st.floats(0.25, 1.0))
def test_noise_free_readings_give_back_the_values(vl, k):
    # Identity: readings made by the forward model with no noise are fitted exactly, from any start.
    project = b.project([b.drive([[0, 0], [60, 0], [120, 20]], 4.0, diameter=1.8)])
    xy = [(x, y) for x in (20, 50, 90) for y in (-6, -3, -1, 0, 2, 4, 7)]
    r = readings_for(project, xy, [10, 40, 80, 120])
    r.settlement_mm = predicted_settlement_mm(truth(project, {("A", None): (vl, k)}), r)
    fit = back_analysis(project, r).fits[("A", None)]
    assert fit.volume_loss_pct == pytest.approx(vl, rel=1e-4)
    assert fit.trough_width_k == pytest.approx(k, rel=1e-4)


@settings(max_examples=10, deadline=None)
@given(scale=st.floats(0.1, 10.0))
def test_settlement_is_linear_in_volume_loss(scale):
    # The identity the fit relies on: at fixed K the forward model is exactly proportional to the volume loss, up to
    # the contributions below the precision that are not evaluated (1e-6 mm here; the fit uses 1e-6 mm too).
    project = b.project([b.drive([[0, 0], [50, 0], [90, 30]], 4.0, diameter=1.5)], precision_mm=1e-6)
    r = readings_for(project, [(30, 1), (60, 5), (85, 20), (10, -3)], [20, 70, 100])
    one = predicted_settlement_mm(truth(project, {("A", None): (1.0, 0.45)}), r)
    many = predicted_settlement_mm(truth(project, {("A", None): (scale, 0.45)}), r)
    np.testing.assert_allclose(many, scale * one, rtol=1e-12, atol=1e-9)


# ---------------------------------------------------------------- synthetic drives with noise and outliers
TRUE_VL, TRUE_K, NOISE_MM, SEED = 1.2, 0.4, 0.3, 20240301


def noisy_drive():
    """A 150 m drive with a bend; transverse arrays at 4 chainages; the face read every 10 m from 0 to 150.

    Layers give K = 0.5 (the fit's start); truth is VL 1.2 %, K 0.4; noise N(0, 0.3 mm), seed 20240301.
    """
    project = b.project([b.drive([[0, 0], [80, 0], [150, 25]], 4.0, diameter=1.8)])
    xy = [(x, y) for x in (30, 60, 100, 130) for y in np.arange(-10, 10.1, 2.5)]
    xy = [(x, y + (0.357 * (x - 80) if x > 80 else 0.0)) for x, y in xy]  # arrays follow the bend
    r = readings_for(project, xy, np.arange(0, 151, 10))
    r.settlement_mm = predicted_settlement_mm(truth(project, {("A", None): (TRUE_VL, TRUE_K)}), r)
    r.settlement_mm += np.random.default_rng(SEED).normal(0.0, NOISE_MM, len(r))
    return project, r


def test_noisy_readings_recover_the_values_within_their_standard_errors():
    project, r = noisy_drive()
    analysis = back_analysis(project, r)
    fit = analysis.fits[("A", None)]
    assert abs(fit.volume_loss_pct - TRUE_VL) < 3 * fit.volume_loss_pct_se
    assert abs(fit.trough_width_k - TRUE_K) < 3 * fit.trough_width_k_se
    assert fit.volume_loss_pct_se < 0.02 and fit.trough_width_k_se < 0.01  # informative, not vacuous
    # The RMS estimates the noise (576 readings: within 10 %).
    assert fit.rms_mm == pytest.approx(NOISE_MM, rel=0.1)
    assert fit.readings_used + len(fit.outliers) == len(r)
    assert len(fit.outliers) <= 5  # about 0.3 % of normal scatter lies beyond 3 sigma
    np.testing.assert_array_equal(analysis.in_fit, ~analysis.outlier)


def test_gross_outliers_are_reported_and_do_not_move_the_fit():
    project, r = noisy_drive()
    rng = np.random.default_rng(SEED + 1)
    bad = rng.choice(np.flatnonzero(r.face_chainage_m >= 60), 6, replace=False)
    r.settlement_mm[bad] += np.array([12.0, -9.0, 15.0, 8.0, -20.0, 10.0])  # gross errors: 27 to 67 sigma
    fit = back_analysis(project, r).fits[("A", None)]
    assert abs(fit.volume_loss_pct - TRUE_VL) < 3 * fit.volume_loss_pct_se
    assert abs(fit.trough_width_k - TRUE_K) < 3 * fit.trough_width_k_se
    reported = {(o["point_id"], o["date"]) for o in fit.outliers}
    assert {(r.point_id[k], str(r.date[k])) for k in bad} <= reported
    assert len(reported) <= len(bad) + 5
    big = [o for o in fit.outliers if o["line"] in set(r.line[bad])]
    assert all(abs(o["standardised_residual"]) > 20 for o in big)
    assert all(o["residual_mm"] == pytest.approx(o["reading_mm"] - o["fitted_mm"]) for o in fit.outliers)


def test_readings_near_the_face_can_be_left_out_of_the_fit():
    # Readings taken with the face less than 3 z0 = 18 m past the point made to lag the model (50 % of it), as
    # field records near the face may (methods.md section 2); the rest as the model. Noise N(0, 0.3 mm), seed 5.
    project, r = noisy_drive()
    clean = predicted_settlement_mm(truth(project, {("A", None): (TRUE_VL, TRUE_K)}), r)
    geometry = fitting_geometry(project)
    past = r.face_chainage_m - point_chainage_m(geometry, r.x_m, r.y_m)
    near = past < 18.0
    r.settlement_mm = np.where(near, 0.5, 1.0) * clean + np.random.default_rng(5).normal(0.0, 0.3, len(r))
    biased = back_analysis(project, r).fits[("A", None)]
    assert abs(biased.volume_loss_pct - TRUE_VL) > 3 * biased.volume_loss_pct_se
    analysis = back_analysis(project, r, min_face_past_m=18.0)
    fit = analysis.fits[("A", None)]
    assert abs(fit.volume_loss_pct - TRUE_VL) < 3 * fit.volume_loss_pct_se
    assert abs(fit.trough_width_k - TRUE_K) < 3 * fit.trough_width_k_se
    assert fit.readings_used + len(fit.outliers) == int((~near).sum())
    assert not analysis.in_fit[near].any() and not np.isnan(analysis.fitted_mm).any()
    assert any(f"{int(near.sum())} reading(s) taken with the face less than 18 m past the point" in w
               for w in analysis.warnings)


def test_point_chainage_on_a_bent_axis():
    project = b.project([b.drive([[0, 0], [30, 0], [30, 40]], 4.0)])
    geometry = fitting_geometry(project)
    # Feet of the perpendiculars: (10, 0) at 10 m; (30, 10) at 40 m; beyond the ends: 0 and 70 m.
    np.testing.assert_allclose(point_chainage_m(geometry, [10, 35, -5, 31], [2, 10, -1, 60]), [10, 40, 0, 70])


def fitting_geometry(project):
    from settle.inputs.ground import GroundModel
    from settle.inputs.route import build_drive
    return build_drive(project.drives[0], GroundModel(project.ground))[0]


def test_per_reach_fit_separates_the_reaches():
    # Truth: VL 0.8 % / K 0.45 outside the reach, 2.0 % / 0.35 in the reach 60-100 m. Noise N(0, 0.2 mm), seed 7.
    drive = b.drive([[0, 0], [160, 0]], 4.0, diameter=1.8, reaches=(Reach(60.0, 100.0, 1.0),))
    project = b.project([drive])
    xy = [(x, y) for x in (25, 45, 75, 85, 120, 140) for y in (-8, -5, -3, -1.5, 0, 1.5, 3, 5, 8)]
    r = readings_for(project, xy, np.arange(0, 161, 10))
    r.settlement_mm = predicted_settlement_mm(truth(project, {("A", 0): (0.8, 0.45), ("A", 1): (2.0, 0.35)}), r)
    r.settlement_mm += np.random.default_rng(7).normal(0.0, 0.2, len(r))
    analysis = back_analysis(project, r, per_reach=True)
    assert set(analysis.fits) == {("A", 0), ("A", 1)}
    for key, (vl, k) in {("A", 0): (0.8, 0.45), ("A", 1): (2.0, 0.35)}.items():
        fit = analysis.fits[key]
        assert abs(fit.volume_loss_pct - vl) < 3 * fit.volume_loss_pct_se, key
        assert abs(fit.trough_width_k - k) < 3 * fit.trough_width_k_se, key
    assert len(analysis.fits[("A", 0)].outliers) <= 5
    # One value for the whole drive cannot match both: the robust fit follows the majority outside the reach and
    # throws out the readings over the reach as outliers (more than 10 % of them).
    whole = back_analysis(project, r).fits[("A", None)]
    assert len(whole.outliers) > 0.1 * len(r)
    assert abs(whole.volume_loss_pct - 2.0) > 1.0


def test_a_reach_no_reading_sees_keeps_the_project_values():
    drive = b.drive([[0, 0], [160, 0]], 4.0, diameter=1.8, reaches=(Reach(120.0, 160.0, 1.7, 0.6),))
    project = b.project([drive])
    r = readings_for(project, [(x, y) for x in (30, 60) for y in (-4, -2, 0, 2, 4)], [20, 50, 80, 100])
    r.settlement_mm = predicted_settlement_mm(truth(project, {("A", 0): (1.1, 0.45)}), r)
    analysis = back_analysis(project, r, per_reach=True)
    assert set(analysis.fits) == {("A", 0)}
    assert analysis.fits[("A", 0)].volume_loss_pct == pytest.approx(1.1, rel=1e-4)
    assert any('reach 1 (120 to 160 m): not fitted, 0 reading(s) see it' in w for w in analysis.warnings)
    fitted = apply_fits(project, analysis.fits).drives[0]
    assert fitted.reaches[0] == Reach(120.0, 160.0, 1.7, 0.6)


def test_points_below_the_crown_are_left_out_with_a_warning():
    project = b.project([b.drive([[0, 0], [100, 0]], 4.0, diameter=1.8)])  # axis 6 m deep, crown 5.1 m
    xy = [(50, y) for y in (-6, -3, -1, 0, 1, 3, 6)]
    r = readings_for(project, xy + [(50, 0.5)], [100.0], ids=[f"S{k}" for k in range(7)] + ["DEEP"])
    r.depth_m[-1] = 5.5
    r.settlement_mm = np.nan_to_num(predicted_settlement_mm(truth(project, {("A", None): (1.0, 0.5)}), r))
    analysis = back_analysis(project, r)
    assert analysis.fits[("A", None)].readings_used == 7
    assert any("1 reading(s) at points at or below the crown left out" in w and "DEEP" in w
               for w in analysis.warnings)


def test_nothing_to_fit_is_an_input_error():
    project = b.project([b.drive([[0, 0], [100, 0]], 4.0, diameter=1.8)])
    r = readings_for(project, [(90, 0), (90, 2), (95, 0)], [0.0, 10.0])  # the face never comes near
    with pytest.raises(InputError, match=r"synthetic.csv: no drive could be fitted: no part of any drive is seen"):
        back_analysis(project, r)


def test_readings_of_another_project_are_refused():
    project = b.project([b.drive([[0, 0], [100, 0]], 4.0)])
    r = readings_for(project, [(50, 0)], [50.0])
    r.drive_names = ("B",)
    with pytest.raises(InputError, match=r"the readings were read against drives \('B',\)"):
        back_analysis(project, r)


# ------------------------------------------------------------------------------- the fitted project file
PROJECT = """\
# Fitting test site: a sewer with a soft reach.
[project]
name = "Fit test"
crs = "EPSG:27700"

[ground]
surface_level_m = 10.0
groundwater_level_m = 8.0

[[ground.layers]]
name = "Clay"            # firm clay
top_level_m = 10.0
unit_weight_kn_m3 = 19.0
trough_width_k = 0.5
behaviour = "cohesive"

[[drives]]
name = "S1-S2"
alignment = "inputs/s1_s2.csv"
outer_diameter_m = 1.8
volume_loss_pct = 1.0     # design value
face_chainage_m = 90.0

[[drives.reaches]]
from_chainage_m = 110.0
to_chainage_m = 150.0
volume_loss_pct = 1.6
trough_width_k = 0.6

[[drives.reaches]]        # listed out of chainage order on purpose
from_chainage_m = 40.0
to_chainage_m = 80.0
volume_loss_pct = 1.3

[points]
file = "inputs/points.csv"

[output]
grid_spacing_m = 1.0
contour_levels_mm = [1, 5]
"""


def site(tmp_path):
    (tmp_path / "inputs").mkdir()
    (tmp_path / "inputs" / "s1_s2.csv").write_text("x,y,z\n0,0,4\n70,0,4\n150,20,4.5\n")
    (tmp_path / "inputs" / "points.csv").write_text("id,x,y\nREF,200,200\n")
    (tmp_path / "project.toml").write_text(PROJECT)
    return tmp_path / "project.toml"


def write_readings(path, project, r):
    with open(path, "w", newline="") as stream:
        out = csv.writer(stream)
        out.writerow(["point_id", "x", "y", "date", "settlement_mm", "face_chainage_m"])
        for k in range(len(r)):
            out.writerow([r.point_id[k], r.x_m[k], r.y_m[k], str(r.date[k]), f"{r.settlement_mm[k]:.2f}",
                          r.face_chainage_m[k]])


def test_rerun_with_the_fitted_project_file_reproduces_the_readings(tmp_path):
    # Truth: 0.9 % / K 0.42 outside the reaches, 1.8 % / 0.38 in 40-80 m; noise N(0, 0.25 mm), seed 11; readings
    # written to 0.01 mm as a surveyor would.
    path = site(tmp_path)
    project = load_project(path)
    xy = [(x, y) for x in (20, 55, 65, 90) for y in (-7, -4, -2, 0, 2, 4, 7)]
    r = readings_for(project, xy, np.arange(0, 101, 10))
    r.settlement_mm = predicted_settlement_mm(truth(project, {("S1-S2", 0): (0.9, 0.42), ("S1-S2", 1): (1.8, 0.38)}),
                                              r)
    r.settlement_mm += np.random.default_rng(11).normal(0.0, 0.25, len(r))
    write_readings(tmp_path / "readings.csv", project, r)
    readings = read_readings(tmp_path / "readings.csv", project)
    assert len(readings) == len(r)
    analysis = back_analysis(project, readings, per_reach=True)
    assert set(analysis.fits) == {("S1-S2", 0), ("S1-S2", 1)}  # reach 2 (110-150 m) is not excavated

    out = tmp_path / "out"
    out.mkdir()
    text = fitted_project_toml(path, analysis.fits, out_dir=out)
    (out / "project-fitted.toml").write_text(text)
    fitted = load_project(out / "project-fitted.toml")
    again = predicted_settlement_mm(fitted, readings)
    used = analysis.in_fit
    rms = float(np.sqrt(np.mean((readings.settlement_mm[used] - again[used]) ** 2)))
    fit = analysis.fits[("S1-S2", 0)]
    # The file holds 6 significant digits: the re-run gives the reported RMS to 1e-3 mm.
    assert rms == pytest.approx(fit.rms_mm, abs=1e-3)
    np.testing.assert_allclose(again, analysis.fitted_mm, atol=1e-3)
    # Values where they belong: reach 1 in chainage order (40-80 m) is the second [[drives.reaches]] of the file.
    drive = fitted.drives[0]
    assert drive.volume_loss_pct == pytest.approx(fit.volume_loss_pct, rel=1e-5)
    assert drive.reaches[0].volume_loss_pct == pytest.approx(analysis.fits[("S1-S2", 1)].volume_loss_pct, rel=1e-5)
    # and near the truth (within 3 standard errors).
    for key, (vl, k) in {("S1-S2", 0): (0.9, 0.42), ("S1-S2", 1): (1.8, 0.38)}.items():
        assert abs(analysis.fits[key].volume_loss_pct - vl) < 3 * analysis.fits[key].volume_loss_pct_se, key
        assert abs(analysis.fits[key].trough_width_k - k) < 3 * analysis.fits[key].trough_width_k_se, key
    assert drive.reaches[1] == Reach(110.0, 150.0, 1.6, 0.6)  # not fitted: as designed
    assert drive.face_chainage_m == 90.0


def test_fitted_file_keeps_every_other_line(tmp_path):
    path = site(tmp_path)
    fits = {("S1-S2", None): FitResult(1.23456789, 0.4321, 0.0123, 0.004, 50, 0.3)}
    text = fitted_project_toml(path, fits)
    new = text.splitlines()
    old = PROJECT.splitlines()
    changed = [line for line in old if line.startswith(("volume_loss_pct", "trough_width_k =", "alignment", "file"))]
    for line in old:
        if line not in changed:
            assert line in new, line
    # A whole-drive fit sets the drive and both reaches; K is added where it was missing.
    assert new.count("volume_loss_pct = 1.23457  # fitted to monitoring, standard error 0.012; was 1.0 "
                     "(design value)") == 1
    assert sum(line.startswith("volume_loss_pct = 1.23457") for line in new) == 3
    assert sum(line.startswith("trough_width_k = 0.4321") for line in new) == 3
    assert "trough_width_k = 0.4321  # fitted to monitoring, standard error 0.004; was 0.6" in new
    # Without an output folder, paths become absolute.
    assert f'alignment = "{(tmp_path / "inputs" / "s1_s2.csv").resolve().as_posix()}"' in new
    # It loads from anywhere.
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (elsewhere / "fitted.toml").write_text(text)
    project = load_project(elsewhere / "fitted.toml")
    assert {r.volume_loss_pct for r in project.drives[0].reaches} == {1.23457}


def test_a_layout_the_rewrite_cannot_follow_is_an_input_error(tmp_path):
    path = site(tmp_path)
    text = PROJECT.split("[[drives.reaches]]")[0].replace(
        'face_chainage_m = 90.0', 'face_chainage_m = 90.0\nreaches = [{from_chainage_m = 40.0, to_chainage_m = 80.0, '
        'volume_loss_pct = 1.3}]') + "[points]" + PROJECT.split("[points]")[1]
    path.write_text(text)
    fits = {("S1-S2", None): FitResult(1.2, 0.43, 0.01, 0.004, 50, 0.3)}
    with pytest.raises(InputError, match=r"project.toml: cannot write the fitted values into a copy of this file: "
                                         r"\[\[drives\]\] #1 \[\[drives.reaches\]\] #1 volume_loss_pct was not found"
                                         r".*by hand: .*volume_loss_pct = 1.2, trough_width_k = 0.43"):
        fitted_project_toml(path, fits)


def test_fits_for_an_unknown_drive_are_refused(tmp_path):
    path = site(tmp_path)
    with pytest.raises(InputError, match=r'project.toml: no \[\[drives\]\] item is named "North"'):
        fitted_project_toml(path, {("North", None): FitResult(1.0, 0.5, 0.1, 0.1, 5, 0.1)})


# ------------------------------------------------------------------------------------------- comparison
def test_comparison_takes_each_points_latest_reading():
    project, r = noisy_drive()
    analysis = back_analysis(project, r)
    c = comparison(project, r, amber_mm=5.0, red_mm=8.0, fits=analysis.fits)
    assert len(c.point_id) == len(set(r.point_id))
    for k, pid in enumerate(c.point_id):
        mine = np.flatnonzero(r.point_id == pid)
        last = mine[np.argmax(r.date[mine])]
        assert c.date[k] == r.date[last] and c.reading_mm[k] == r.settlement_mm[last]
        assert c.face_chainage_m[k] == r.face_chainage_m[last]
    # Prediction at the reading's face with the design values (VL 1 %, K of the layers 0.5).
    design = predicted_settlement_mm(project, r)
    latest = [np.flatnonzero(r.point_id == pid)[-1] for pid in c.point_id]
    np.testing.assert_allclose(c.predicted_mm, design[latest])
    np.testing.assert_allclose(c.difference_mm, c.reading_mm - c.predicted_mm)
    np.testing.assert_allclose(c.fitted_mm, analysis.fitted_mm[latest], atol=1e-9)
    assert set(c.trigger_status) <= {STATUS_CLEAR, STATUS_AMBER, STATUS_RED}
    assert list(c.drive) == ["A"] * len(c.point_id)


def test_trigger_status_on_the_size_of_the_movement():
    status = trigger_status([0.0, 4.99, 5.0, -6.0, 7.99, 8.0, -12.0], 5.0, 8.0)
    assert list(status) == [STATUS_CLEAR, STATUS_CLEAR, STATUS_AMBER, STATUS_AMBER, STATUS_AMBER, STATUS_RED,
                            STATUS_RED]


@pytest.mark.parametrize("amber, red, message", [
    (0.0, 5.0, r"\[monitoring\] amber_mm must be a number more than 0 mm; got 0.0"),
    (5.0, 5.0, r"\[monitoring\] red_mm must be a number more than amber_mm \(5 mm\); got 5.0"),
    (5.0, float("nan"), r"\[monitoring\] red_mm must be a number more than amber_mm \(5 mm\); got nan"),
])
def test_bad_trigger_levels(amber, red, message):
    with pytest.raises(InputError, match=message):
        trigger_status([1.0], amber, red)


def test_fit_report_is_plain_json():
    project, r = far_section(SECTION_Y, SECTION_MEASURED)
    report = fit_report(project, r, back_analysis(project, r))
    text = json.dumps(report, allow_nan=False)
    back = json.loads(text)
    (fit,) = back["fits"]
    assert fit["drive"] == "A" and fit["part"] == "whole drive"
    assert set(fit) >= {"volume_loss_pct", "trough_width_k", "volume_loss_pct_se", "trough_width_k_se",
                        "readings_used", "rms_mm", "outliers", "volume_loss_pct_ci95", "trough_width_k_ci95",
                        "points_used", "volume_loss_pct_se_independent", "trough_width_k_se_independent"}
    assert back["readings"]["used"] == 9 and back["method"]["outlier_limit_sigma"] == 3.0


# ------------------------------------------------------------------------------------ case histories
# A published case history's measured transverse trough, dropped into tests/data/ as case_history_<name>.csv:
#
#   # source: authors (year), title, journal volume(issue), pages; Table N or Figure N (values read off it)
#   # outer_diameter_m: 2.1
#   # axis_depth_m: 5.6
#   # volume_loss_pct: 1.2            (the value the paper gives)
#   # trough_width_k: 0.45            (the value the paper gives)
#   # tolerance_volume_loss_pct: 0.2  (how near the fit must land, with the reason in the source line if needed)
#   # tolerance_trough_width_k: 0.05
#   offset_m,settlement_mm
#   -8.0,0.4
#   ...
#
# The section is fitted as one far behind the face (it must be a final, transverse trough).
CASES = [pytest.param(p, id=p.stem) for p in sorted(DATA.glob("case_history_*.csv"))] if DATA.is_dir() else []
BLOCKED = ("blocked on a published source: no small-diameter case history with measured transverse settlements is "
           "in tests/data/ yet (methods.md section 9)")


def read_case(path):
    head, rows = {}, []
    for line in path.read_text(encoding="utf-8").splitlines():
        if line.startswith("#"):
            key, _, value = line[1:].partition(":")
            head[key.strip()] = value.split("(")[0].strip() if key.strip() != "source" else value.strip()
        elif line.strip():
            rows.append(line)
    table = list(csv.DictReader(rows))
    return head, [float(t["offset_m"]) for t in table], [float(t["settlement_mm"]) for t in table]


@pytest.mark.parametrize("path", CASES or [pytest.param(None, marks=pytest.mark.skip(reason=BLOCKED))])
def test_published_case_history(path):
    head, offsets, settlement = read_case(path)
    assert head.get("source"), f"{path.name}: the header must name its source"
    project, r = far_section(offsets, settlement, float(head["outer_diameter_m"]), float(head["axis_depth_m"]))
    fit = back_analysis(project, r).fits[("A", None)]
    assert fit.volume_loss_pct == pytest.approx(float(head["volume_loss_pct"]),
                                                abs=float(head["tolerance_volume_loss_pct"])), head["source"]
    assert fit.trough_width_k == pytest.approx(float(head["trough_width_k"]),
                                               abs=float(head["tolerance_trough_width_k"])), head["source"]
