"""The probabilistic run: distributions and their readers, the sampling, the arithmetic of damage probability, and
the fast path against the plain loop (the ordinary assessment at every sample).

The small case: two short straight drives, "A" along y = 0 (x 0 to 80 m, axis 6 m deep, D 3 m) and "B" along y = 12 m
(x 40 to 120 m, axis 5 m deep, D 2 m), design volume loss 1 % each, K 0.5 from the clay layer; five houses (one over A
only, two that A and B both reach, one beside A, one that nothing reaches) and two PVC pipes (one across A only, one
across both).
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats
from shapely.geometry import box

from settle.assessments.building_damage import CATEGORY_LIMITS_PCT, damage_category
from settle.assessments.buildings import assess_buildings
from settle.assessments.damage_probability import (CATEGORY_LEVELS, binomial_standard_error, categories_at_ratio,
                                                   exceedance_probabilities, rank_correlations, statuses_at_ratio,
                                                   strongest_input)
from settle.assessments.utilities import assess_utilities
from settle.errors import InputError
from settle.inputs.footprints import BuildingDefaults, buildings_from_table
from settle.inputs.ground import GroundModel
from settle.inputs.model import Reach
from settle.inputs.uncertainty_settings import (DriveUncertainty, ProjectUncertainty, TroughWidthDistribution,
                                                UncertaintySettings, VolumeLossDistribution, project_uncertainty,
                                                read_drive_uncertainty, read_trough_width_distribution,
                                                read_uncertainty_settings, read_volume_loss_distribution)
from settle.inputs.utility_lines import make_utilities
from settle.procedure.orchestrator import drives_and_elements
from settle.procedure.probability import (ProbabilisticRun, draw_samples, plain_loop, scaled_elements,
                                          sobol_uniforms, status_codes)

from . import builders as b

WHERE = "ostrey.toml [[drives]] #1 [drives.volume_loss_distribution]"


# ----------------------------------------------------------------------------------------------- the small case
def houses(*polys, height=3.0):
    frame = pd.DataFrame({"id": [f"H{k}" for k in range(len(polys))], "height_m": height, "foundation_depth_m": 0.0,
                          "structure": "masonry"})
    return buildings_from_table(list(polys), frame, BuildingDefaults())


def small_project():
    drive_a = b.drive([[0, 0], [80, 0]], 4.0, vl_pct=1.0, name="A")
    drive_b = b.drive([[40, 12], [120, 12]], 5.0, vl_pct=1.0, name="B", diameter=2.0)
    buildings = houses(box(10, 2, 20, 8), box(30, -4, 38, 4), box(20, -14, 30, -7), box(55, 3, 63, 9),
                       box(100, 40, 110, 50))
    utilities = make_utilities(["P0", "P1"], ["pvc", "pvc"], [np.array([[20.0, -20], [20, 20]]),
                                                              np.array([[50.0, -20], [70, 35]])],
                               [1.5, 1.0], [300.0, 150.0], [np.nan, 3.0])
    return replace(b.project([drive_a, drive_b]), buildings=buildings, utilities=utilities)


VL_A = VolumeLossDistribution("lognormal", median_pct=2.0, cov=0.35)
VL_B = VolumeLossDistribution("triangular", min_pct=0.5, mode_pct=1.0, max_pct=2.5)
K_A = TroughWidthDistribution("normal", mean=0.5, sd=0.06)


def uncertainty(samples, k_a=None, seed=3, correlated=False, vl_a=VL_A, vl_b=VL_B):
    return ProjectUncertainty(UncertaintySettings(samples=samples, seed=seed, drives_correlated=correlated),
                              (DriveUncertainty("A", vl_a, k_a), DriveUncertainty("B", vl_b)))


@pytest.fixture(scope="module")
def volume_loss_only():
    """The small case with only the volume losses uncertain: the fast path, and the plain loop on every sample."""
    run = ProbabilisticRun(small_project(), uncertainty(128))
    places = (np.array([10.0, 30.0, 60.0, 60.0, 90.0]), np.array([0.0, 3.0, 6.0, 12.0, -3.0]))
    return run, plain_loop(run, places=places), places


@pytest.fixture(scope="module")
def with_k():
    """The small case with A's K uncertain too, 256 samples."""
    run = ProbabilisticRun(small_project(), uncertainty(256, k_a=K_A))
    return run, plain_loop(run)


# ------------------------------------------------------------------------------------------------ distributions
def test_a_lognormal_volume_loss_has_the_median_and_coefficient_of_variation_given():
    # Lognormal identities (from memory): median m, sd/mean = c when s^2 = ln(1 + c^2); mean = m exp(s^2 / 2).
    dist = read_volume_loss_distribution({"kind": "lognormal", "median_pct": 1.5, "cov": 0.4}, WHERE)
    frozen = dist.frozen()
    assert dist.median() == pytest.approx(1.5, rel=1e-12)
    assert frozen.std() / frozen.mean() == pytest.approx(0.4, rel=1e-12)
    assert frozen.mean() == pytest.approx(1.5 * np.exp(np.log1p(0.4**2) / 2), rel=1e-12)


def test_a_triangular_volume_loss_spans_min_to_max_with_its_mode():
    # Triangular CDF at the mode = (mode - min) / (max - min) (textbook, from memory).
    dist = read_volume_loss_distribution({"kind": "triangular", "min_pct": 0.5, "mode_pct": 1.0, "max_pct": 2.5},
                                         WHERE)
    np.testing.assert_allclose(dist.ppf([0.0, 1.0]), [0.5, 2.5], rtol=1e-12)
    assert dist.frozen().cdf(1.0) == pytest.approx(0.25, rel=1e-12)
    assert dist.ppf(0.25) == pytest.approx(1.0, rel=1e-9)


def test_a_uniform_volume_loss_and_k_are_linear_in_probability():
    vl = read_volume_loss_distribution({"kind": "uniform", "min_pct": 0.5, "max_pct": 1.5}, WHERE)
    k = read_trough_width_distribution({"kind": "uniform", "min": 0.3, "max": 0.7}, "t")
    np.testing.assert_allclose(vl.ppf([0.0, 0.25, 1.0]), [0.5, 0.75, 1.5], rtol=1e-12)
    np.testing.assert_allclose(k.ppf([0.0, 0.5, 1.0]), [0.3, 0.5, 0.7], rtol=1e-12)


def test_a_normal_k_is_truncated_to_the_range_the_loader_allows():
    dist = read_trough_width_distribution({"kind": "normal", "mean": 0.8, "sd": 0.5}, "t")
    values = dist.ppf(np.linspace(0.0, 1.0, 101))
    assert values.min() == pytest.approx(0.1) and values.max() == pytest.approx(1.5)
    assert dist.median() == pytest.approx(0.8, rel=1e-9)  # truncation symmetric about 0.8
    # Away from the bounds a narrow normal is the plain normal: the 84.13 % point is mean + sd (standard normal).
    narrow = read_trough_width_distribution({"kind": "normal", "mean": 0.5, "sd": 0.05}, "t")
    assert narrow.ppf(stats.norm.cdf(1.0)) == pytest.approx(0.55, rel=1e-6)


@pytest.mark.parametrize("table, message", [
    ({"kind": "lognormal", "median_pct": -1, "cov": 0.3},
     r"^ostrey.toml \[\[drives\]\] #1 \[drives.volume_loss_distribution\]: median_pct must be more than 0 %; got -1$"),
    ({"kind": "lognormal", "median_pct": 25, "cov": 0.3}, r"median_pct must be at most 20 % \(the largest volume loss"),
    ({"kind": "lognormal", "median_pct": 1.0, "cov": 0}, r"cov must be more than 0 and at most 2; got 0$"),
    ({"kind": "lognormal", "median_pct": "1,5", "cov": 0.3}, r'median_pct must be a number of per cent; got "1,5"'),
    ({"kind": "lognormal", "median_pct": 1.0}, r"missing required key cov$"),
    ({"median_pct": 1.0, "cov": 0.3}, r'missing required key kind \("lognormal", "triangular", "uniform"\)'),
    ({"kind": "lognormall", "median_pct": 1.0}, r'kind must be one of .*; got "lognormall"; did you mean "lognormal"'),
    ({"kind": ["uniform"]}, r'kind must be one of "lognormal", "triangular", "uniform"; got \[\'uniform\'\]$'),
    ({"kind": "lognormal", "median_pc": 1.0, "cov": 0.3}, r'unknown key "median_pc"; did you mean "median_pct"\?'),
    ({"kind": "lognormal", "median_pct": 1.0, "cov": 0.3, "max_pct": 3},
     r'max_pct does not apply to kind = "lognormal", whose keys are median_pct, cov'),
    ({"kind": "triangular", "min_pct": 1.0, "mode_pct": 0.5, "max_pct": 2.0},
     r"mode_pct must be from 1 to 2 % \(min_pct to max_pct\); got 0.5"),
    ({"kind": "triangular", "min_pct": 1.0, "mode_pct": 1.0, "max_pct": 1.0},
     r"max_pct must be more than min_pct \(1 %\): a distribution of zero width is the deterministic run; got 1$"),
    ({"kind": "uniform", "min_pct": 2.0, "max_pct": 1.0}, r"max_pct must be more than min_pct \(2 %\)"),
    ({"kind": "uniform", "min_pct": -0.5, "max_pct": 1.0}, r"min_pct must be at least 0 and less than 20 %; got -0.5"),
])
def test_volume_loss_distribution_mistakes_are_one_clear_line(table, message):
    with pytest.raises(InputError, match=message):
        read_volume_loss_distribution(table, WHERE)


@pytest.mark.parametrize("table, message", [
    ({"kind": "normal", "mean": 1.6, "sd": 0.1}, r"^K: mean must be from 0.1 to 1.5; got 1.6$"),
    ({"kind": "normal", "mean": 0.5, "sd": 0}, r"sd must be more than 0 and at most 1.4; got 0$"),
    ({"kind": "normal", "mean": 0.5, "sd": True}, r"sd must be a number; got true"),
    ({"kind": "uniform", "min": 0.05, "max": 0.5}, r"min must be at least 0.1 and less than 1.5; got 0.05"),
    ({"kind": "uniform", "min": 0.5, "max": 0.5}, r"max must be more than min \(0.5\): a distribution of zero width"),
    ({"kind": "uniform", "min": 0.3, "max": 0.6, "mean": 0.4}, r'mean does not apply to kind = "uniform"'),
    ({"kind": "lognormal", "mean": 0.5, "sd": 0.1}, r'kind must be one of "normal", "uniform"; got "lognormal"$'),
])
def test_trough_width_distribution_mistakes_are_one_clear_line(table, message):
    with pytest.raises(InputError, match=message):
        read_trough_width_distribution(table, "K")


def test_the_uncertainty_table_has_defaults_and_checks_each_key():
    assert read_uncertainty_settings({}, "u") == UncertaintySettings(samples=1000, seed=0, drives_correlated=False)
    assert read_uncertainty_settings({"samples": 64, "seed": 7, "drives_correlated": True}, "u") == \
        UncertaintySettings(64, 7, True)
    for table, message in [({"samples": 10}, r"^u: samples must be a whole number from 32 to 100000; got 10$"),
                           ({"samples": 500.0}, r"samples must be a whole number .*; got 500.0"),
                           ({"seed": -1}, r"seed must be a whole number from 0 to \d+; got -1"),
                           ({"seed": True}, r"seed must be a whole number .*; got true"),
                           ({"drives_correlated": "yes"}, r'drives_correlated must be true or false; got "yes"'),
                           ({"sample": 100}, r'unknown key "sample"; did you mean "samples"\?')]:
        with pytest.raises(InputError, match=message):
            read_uncertainty_settings(table, "u")


def test_a_drive_table_gives_its_distributions_and_the_project_needs_one_for_uncertainty():
    where = 'p.toml [[drives]] #2 "East"'
    assert read_drive_uncertainty({"name": "East"}, where, "East") is None
    item = read_drive_uncertainty({"volume_loss_distribution": {"kind": "uniform", "min_pct": 1, "max_pct": 2}},
                                  where, "East")
    assert item == DriveUncertainty("East", VolumeLossDistribution("uniform", min_pct=1.0, max_pct=2.0), None)
    with pytest.raises(InputError, match=r'^p.toml \[\[drives\]\] #2 "East" \[drives.trough_width_distribution\]: '
                                         r"must be a table .*; got 0.5$"):
        read_drive_uncertainty({"trough_width_distribution": 0.5}, where, "East")
    assert project_uncertainty(None, [None, None], "p.toml") is None
    assert project_uncertainty(None, [item], "p.toml").settings.samples == 1000
    with pytest.raises(InputError, match=r"^p.toml \[uncertainty\]: no drive has a \[drives.volume_loss_distribution\] "
                                         r"or \[drives.trough_width_distribution\], so there is nothing to sample"):
        project_uncertainty({"samples": 100}, [None], "p.toml [uncertainty]")


# ----------------------------------------------------------------------------------------------------- sampling
def test_the_same_seed_gives_the_same_samples_and_another_seed_others():
    project = small_project()
    one, two = draw_samples(project, uncertainty(64, k_a=K_A)), draw_samples(project, uncertainty(64, k_a=K_A))
    other = draw_samples(project, uncertainty(64, k_a=K_A, seed=4))
    np.testing.assert_array_equal(one.uniforms, two.uniforms)
    assert not np.array_equal(one.uniforms, other.uniforms)
    assert one.uniforms.shape == (64, 3) and np.all((one.uniforms >= 0) & (one.uniforms < 1))
    assert [i.label for i in one.inputs] == ["volume loss of A", "K of A", "volume loss of B"]


def test_the_ratios_are_the_samples_over_the_design_values():
    project = small_project()
    s = draw_samples(project, uncertainty(64, k_a=K_A))
    np.testing.assert_allclose(s.volume_loss_ratio, s.volume_loss_pct / 1.0, rtol=1e-12)  # design VL 1 % each
    np.testing.assert_allclose(s.volume_loss_pct[0], VL_A.ppf(s.uniforms[:, 0]), rtol=1e-12)
    # A has no trough_width_k of its own: K_design is the median of its distribution, 0.5.
    assert s.design_k[0] == pytest.approx(0.5) and s.design_k_source[0] == "median of its distribution"
    np.testing.assert_allclose(s.trough_width_ratio[0], s.trough_width_k[0] / s.design_k[0], rtol=1e-12)
    np.testing.assert_array_equal(s.trough_width_ratio[1], 1.0)  # B's K is not sampled
    own_k = replace(project, drives=(replace(project.drives[0], trough_width_k=0.4), project.drives[1]))
    s = draw_samples(own_k, uncertainty(64, k_a=K_A))
    assert s.design_k[0] == 0.4 and s.design_k_source[0] == "trough_width_k of the drive"
    np.testing.assert_allclose(s.trough_width_ratio[0], s.trough_width_k[0] / 0.4, rtol=1e-12)


def test_correlated_drives_share_their_uniforms():
    same = uncertainty(64, correlated=True, vl_b=VL_A)
    s = draw_samples(small_project(), same)
    assert [i.label for i in s.inputs] == ["volume loss of A, B (one draw for all)"]
    np.testing.assert_array_equal(s.volume_loss_ratio[0], s.volume_loss_ratio[1])
    s = draw_samples(small_project(), uncertainty(64))
    assert stats.spearmanr(s.volume_loss_ratio[0], s.volume_loss_ratio[1])[0] < 0.5


def test_sobol_points_are_balanced_over_a_power_of_two():
    # A scrambled Sobol net of 2^m points has exactly 2^(m-k) points in each of the 2^k equal intervals of any one
    # dimension (the (t, m, s)-net property of Sobol sequences, from memory).
    u = sobol_uniforms(3, 256, seed=11)
    for column in u.T:
        np.testing.assert_array_equal(np.bincount((column * 16).astype(int), minlength=16), 16)


def test_scaled_elements_are_those_of_the_project_with_the_sample_s_volume_loss_and_k():
    ground = b.ground()
    reaches = (Reach(10.0, 30.0, 2.0, 0.6), Reach(30.0, 50.0, 1.5))
    design = b.project([b.drive([[0, 0], [80, 0]], 4.0, vl_pct=1.0, trough_width_k=0.45, reaches=reaches)])
    _, elements = drives_and_elements(design, GroundModel(ground), [])
    r, q = 1.7, 1.2
    sample = replace(design, drives=(replace(design.drives[0], volume_loss_pct=1.7, trough_width_k=0.45 * q,
                                             reaches=(Reach(10.0, 30.0, 2.0 * r, 0.6 * q),
                                                      Reach(30.0, 50.0, 1.5 * r))),))
    _, rebuilt = drives_and_elements(sample, GroundModel(ground), [])
    scaled = scaled_elements(elements, [r], [q])
    for name in ("volume_per_m", "trough_width_m", "trough_width_k", "volume_loss", "plan_length_m"):
        np.testing.assert_allclose(getattr(scaled, name), getattr(rebuilt, name), rtol=1e-12, err_msg=name)
    unchanged = scaled_elements(elements, [1.0], [1.0])
    for name in ("volume_per_m", "trough_width_m", "trough_width_k"):
        np.testing.assert_array_equal(getattr(unchanged, name), getattr(elements, name))
    clipped = scaled_elements(elements, [1.0], [4.0])  # K 0.45 x 4 = 1.8 > 1.5
    assert clipped.trough_width_k.max() == 1.5


# ----------------------------------------------------------------------------------------------- the arithmetic
def test_the_category_at_a_ratio_is_the_category_of_the_scaled_strain_unless_screened():
    # Boscardin & Cording (1989), Burland (1995): category bounds 0.05, 0.075, 0.15, 0.3 % (methods.md 5.2).
    # Rankin (1988) screening: slope < 1/500 and settlement < 10 mm (methods.md 5.3).
    strain = np.array([0.04, 0.04, 0.04])
    cat = categories_at_ratio(np.array([1.0, 2.0, 8.0]), 12.0, 0.001, strain, 1 / 500, 10.0)
    np.testing.assert_array_equal(cat, [0, 2, 4])  # 0.04 %, 0.08 %, 0.32 %
    assert categories_at_ratio(0.5, 12.0, 0.001, 0.2, 1 / 500, 10.0) == 0  # 6 mm, 1/2000: screened
    assert categories_at_ratio(0.5, 12.0, 0.005, 0.2, 1 / 500, 10.0) == 2  # slope 1/400: not screened, 0.1 %
    assert categories_at_ratio(1.0, np.nan, 0.001, 0.2, 1 / 500, 10.0) == -1


def test_the_status_at_a_ratio_follows_the_near_limit_rule():
    np.testing.assert_array_equal(statuses_at_ratio([0.5, 1.0, 1.5, 2.5], 0.6, 0.8), [0, 0, 1, 2])
    assert statuses_at_ratio(2.0, 0.5, 0.8) == 1  # exactly 1.0 is near limit, not exceeds
    assert statuses_at_ratio(1.0, np.nan, 0.8) == -1


def test_binomial_standard_error_and_spearman_agree_with_their_textbook_values():
    assert binomial_standard_error(0.5, 100) == pytest.approx(0.05)  # sqrt(0.25 / 100)
    rng = np.random.default_rng(5)
    values, inputs = rng.normal(size=(4, 50)), rng.normal(size=(2, 50))
    values[1] = inputs[0] ** 3  # monotone in input 0: rho = 1
    rho = rank_correlations(values, inputs)
    for a in range(4):
        for k in range(2):  # scipy.stats.spearmanr as the outside implementation
            assert rho[a, k] == pytest.approx(stats.spearmanr(values[a], inputs[k])[0], abs=1e-12)
    assert rho[1, 0] == pytest.approx(1.0)
    flat = rank_correlations(np.ones((1, 50)), inputs)
    assert np.isnan(flat).all()
    best, value = strongest_input(rho, np.array([[True, True], [False, True], [True, True], [False, False]]))
    assert best[1] == 1 and best[3] == -1 and np.isnan(value[3])


levels = st.integers(min_value=1, max_value=30)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(ratios=st.lists(st.floats(0.0, 6.0), min_size=5, max_size=40),
       settlement=st.floats(0.0, 40.0), tilt=st.floats(0.0, 0.01), strain=st.floats(0.0, 0.5))
def test_probabilities_fall_with_the_category_and_rise_with_the_volume_loss(ratios, settlement, tilt, strain):
    r = np.array(ratios)[None, :]
    cat = categories_at_ratio(r, settlement, tilt, strain, 1 / 500, 10.0)
    doubled = categories_at_ratio(2.0 * r, settlement, tilt, strain, 1 / 500, 10.0)
    p, p2 = exceedance_probabilities(cat, CATEGORY_LEVELS)[0], exceedance_probabilities(doubled, CATEGORY_LEVELS)[0]
    assert np.all((p >= 0) & (p <= 1))
    assert np.all(np.diff(p) <= 0)  # P(cat >= k) non-increasing in k
    assert np.all(doubled >= cat) and np.all(p2 >= p)  # doubling every VL ratio can only raise them
    codes, codes2 = statuses_at_ratio(r, strain, 0.8), statuses_at_ratio(2.0 * r, strain, 0.8)
    q, q2 = (exceedance_probabilities(c, (1, 2))[0] for c in (codes, codes2))
    assert q[0] >= q[1] and np.all(q2 >= q)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), power=st.floats(0.2, 5.0))
def test_spearman_is_unchanged_by_a_monotone_transform_of_the_values(seed, power):
    rng = np.random.default_rng(seed)
    values, inputs = rng.uniform(0.1, 2.0, size=(3, 40)), rng.uniform(size=(2, 40))
    np.testing.assert_allclose(rank_correlations(values**power, inputs), rank_correlations(values, inputs),
                               atol=1e-12)


# ------------------------------------------------------------------------------- fast path against the plain loop
def test_with_only_volume_loss_uncertain_the_fast_path_is_the_plain_loop_sample_by_sample(volume_loss_only):
    run, plain, _ = volume_loss_only
    categories, codes = run.building_categories(), run.utility_status_codes()
    assert len(np.unique(categories)) >= 4 and len(np.unique(codes)) == 3  # the case spans the thresholds
    np.testing.assert_array_equal(categories, plain.categories)
    np.testing.assert_array_equal(codes, plain.statuses)


def test_the_small_case_exercises_both_paths(volume_loss_only):
    run, _, _ = volume_loss_only
    probs, pipes = run.buildings(), run.utilities()
    assert list(probs.evaluation) == ["scaled", "per sample", "scaled", "per sample", "not reached"]
    assert list(probs.reached_by) == ["A", "A, B", "A", "A, B", ""]
    assert list(pipes.evaluation) == ["scaled", "per sample"]


def test_the_probabilities_are_the_shares_of_samples_with_their_standard_errors(volume_loss_only):
    run, plain, _ = volume_loss_only
    probs, pipes = run.buildings(), run.utilities()
    counted = np.stack([(plain.categories >= k).mean(axis=1) for k in CATEGORY_LEVELS], axis=1)
    for j, k in enumerate(CATEGORY_LEVELS):
        np.testing.assert_array_equal(probs.prob_category_ge(k), counted[:, j])
        np.testing.assert_allclose(probs.columns()[f"prob_category_ge_{k}_se"],
                                   np.sqrt(counted[:, j] * (1 - counted[:, j]) / 128), rtol=1e-12)
    np.testing.assert_array_equal(pipes.prob_near_or_exceeds, (plain.statuses >= 1).mean(axis=1))
    np.testing.assert_array_equal(pipes.prob_exceeds, (plain.statuses == 2).mean(axis=1))
    assert 0 < pipes.prob_exceeds[0] < pipes.prob_near_or_exceeds[0] < 1


def test_with_only_volume_loss_uncertain_the_driver_is_a_volume_loss_with_rank_correlation_one(volume_loss_only):
    run, _, _ = volume_loss_only
    probs = run.buildings()
    assert probs.driven_by[0] == "volume loss of A" and probs.driven_by_rho[0] == pytest.approx(1.0)
    assert probs.driven_by[4] == "" and np.isnan(probs.driven_by_rho[4])  # nothing reaches it
    # A house that both drives reach is driven by one of their volume losses.
    assert probs.driven_by[3] in ("volume loss of A", "volume loss of B")


def test_the_settlement_percentiles_are_those_of_the_plain_loop(volume_loss_only):
    run, plain, places = volume_loss_only
    found = run.settlement_percentiles(*places)
    expected = np.percentile(plain.settlement_mm, [50, 95], axis=1).T
    # Exact in r; equal within the run's precision (0.001 mm), which the fast path evaluates below.
    np.testing.assert_allclose(found.settlement_mm, expected, rtol=1e-9, atol=1e-3)
    assert np.all(found.at(95) >= found.at(50))
    np.testing.assert_array_equal(found.columns()["settlement_p95_mm"], found.at(95))


def test_with_k_uncertain_the_fast_path_agrees_with_the_plain_loop_within_the_monte_carlo_error(with_k):
    run, plain = with_k
    n = run.samples.count
    for fast, slow in ((np.column_stack([run.buildings().prob_category_ge(k) for k in CATEGORY_LEVELS]),
                        plain.building_probabilities()),
                       (np.column_stack([run.utilities().prob_near_or_exceeds, run.utilities().prob_exceeds]),
                        plain.utility_probabilities())):
        allowed = 3.0 * np.maximum(binomial_standard_error(slow, n), 1.0 / n)
        assert np.all(np.abs(fast - slow) <= allowed), (fast, slow)
    # Sample by sample: the assets two drives reach are assessed at every sample with K as sampled, exactly as the
    # plain loop does; elsewhere K between nodes changes a few categories only.
    categories = run.building_categories()
    several = run.buildings().evaluation == "per sample"
    np.testing.assert_array_equal(categories[several], plain.categories[several])
    assert np.mean(categories != plain.categories) < 0.02
    np.testing.assert_array_equal(run.utility_status_codes(), plain.statuses)


def test_with_k_uncertain_a_house_beside_the_drive_is_driven_by_k(with_k):
    run, _ = with_k
    probs = run.buildings()
    # H2 lies beside drive A, 7 to 14 m off its axis (about 2 to 5 i): a wider trough reaches it, so K governs.
    assert probs.driven_by[2] == "K of A" and probs.driven_by_rho[2] > 0.5


def test_narrow_distributions_give_the_deterministic_categories_and_statuses():
    project = small_project()
    narrow = ProjectUncertainty(UncertaintySettings(samples=32), (
        DriveUncertainty("A", VolumeLossDistribution("uniform", min_pct=1.8 - 1e-9, max_pct=1.8 + 1e-9),
                         TroughWidthDistribution("uniform", min=0.5 - 1e-9, max=0.5 + 1e-9)),
        DriveUncertainty("B", VolumeLossDistribution("uniform", min_pct=1.3 - 1e-9, max_pct=1.3 + 1e-9))))
    run = ProbabilisticRun(project, narrow)
    design = replace(project, drives=(replace(project.drives[0], volume_loss_pct=1.8),
                                      replace(project.drives[1], volume_loss_pct=1.3)))
    _, elements = drives_and_elements(design, GroundModel(design.ground), [])
    movements = run.movements(elements, run.precision_m)
    category = assess_buildings(design.buildings, movements).category
    status = status_codes(assess_utilities(design.utilities, movements).status)
    assert len(np.unique(category)) >= 3
    probs, pipes = run.buildings(), run.utilities()
    for k in CATEGORY_LEVELS:
        np.testing.assert_array_equal(probs.prob_category_ge(k), (category >= k).astype(float))
    np.testing.assert_array_equal(pipes.prob_near_or_exceeds, (status >= 1).astype(float))
    np.testing.assert_array_equal(pipes.prob_exceeds, (status == 2).astype(float))


def test_the_summary_counts_buildings_by_their_probability_of_category_two(with_k):
    run, _ = with_k
    probs = run.buildings()
    summary = run.summary(probs, run.utilities())
    p2 = probs.prob_category_ge_2
    assert summary["samples"] == 256 and summary["seed"] == 3 and summary["drives_correlated"] is False
    assert summary["buildings"]["prob_category_ge_2_above_1pct"] == int(np.sum(p2 > 0.01))
    assert summary["buildings"]["prob_category_ge_2_above_50pct"] == int(np.sum(p2 > 0.5))
    assert summary["buildings"]["assessed_per_sample"] == 2
    assert [d["trough_width_k_design_from"] for d in summary["drives"]] == ["median of its distribution",
                                                                            "not sampled"]
    assert summary["inputs"][1] == {"input": "K of A", "distribution": K_A.describe()}


def test_category_limits_used_are_the_published_ones():
    # Guard: the fast path relies on damage_category; its bounds are those of methods.md 5.2 [S].
    assert CATEGORY_LIMITS_PCT == (0.05, 0.075, 0.15, 0.3)
    np.testing.assert_array_equal(damage_category([0.049, 0.05, 0.1, 0.2, 0.31]), [0, 1, 2, 3, 4])


def test_doubling_every_volume_loss_can_only_raise_the_probabilities():
    # Same seed, so the same uniforms: a lognormal's inverse CDF scales with its median, a triangular's with its
    # bounds, so every r doubles, K unchanged; every demand then doubles, over one drive or two.
    double_a = VolumeLossDistribution("lognormal", median_pct=4.0, cov=0.35)
    double_b = VolumeLossDistribution("triangular", min_pct=1.0, mode_pct=2.0, max_pct=5.0)
    one = ProbabilisticRun(small_project(), uncertainty(64, k_a=K_A))
    two = ProbabilisticRun(small_project(), uncertainty(64, k_a=K_A, vl_a=double_a, vl_b=double_b))
    np.testing.assert_allclose(two.samples.volume_loss_ratio, 2.0 * one.samples.volume_loss_ratio, rtol=1e-12)
    assert np.all(two.building_categories() >= one.building_categories())
    assert np.all(two.utility_status_codes() >= one.utility_status_codes())
    low, high = one.buildings(), two.buildings()
    for k in CATEGORY_LEVELS:
        assert np.all(high.prob_category_ge(k) >= low.prob_category_ge(k))
    assert np.any(high.prob_category_ge(3) > low.prob_category_ge(3))


def test_batches_of_any_size_give_the_same_results(monkeypatch, volume_loss_only):
    import settle.procedure.probability as probability

    run, _, places = volume_loss_only
    whole = (run.buildings().columns(), run.utilities().columns(), run.settlement_percentiles(*places).settlement_mm)
    monkeypatch.setattr(probability, "CELLS_PER_BATCH", 200)  # one or two assets (or places) a batch
    fresh = ProbabilisticRun(run.project, run.uncertainty)
    small = (fresh.buildings().columns(), fresh.utilities().columns(),
             fresh.settlement_percentiles(*places).settlement_mm)
    for first, second in zip(whole[:2], small[:2]):
        for name in first:
            assert np.array_equal(first[name], second[name], equal_nan=first[name].dtype != object), name
    np.testing.assert_array_equal(whole[2], small[2])


def test_a_building_below_a_crown_is_not_assessed_and_a_drive_not_started_reaches_nothing():
    frame = pd.DataFrame({"id": ["deep", "shallow"], "height_m": 3.0, "foundation_depth_m": [5.5, 0.0],
                          "structure": "masonry"})
    project = small_project()
    project = replace(project, buildings=buildings_from_table([box(10, -3, 20, 3), box(30, 2, 40, 8)], frame,
                                                              BuildingDefaults()),
                      drives=(project.drives[0], replace(project.drives[1], face_chainage_m=0.0)))
    run = ProbabilisticRun(project, uncertainty(32, k_a=K_A))
    probs = run.buildings()
    # "deep": its foundation (5.5 m) is below A's crown (6 - 1.5 m), where the greenfield relations do not hold.
    assert np.isnan(probs.prob_category_ge_1[0]) and probs.evaluation[0] == "not assessed"
    assert probs.driven_by[0] == "" and probs.evaluation[1] == "scaled" and probs.reached_by[1] == "A"
    assert list(run.utilities().reached_by) == ["A", "A"]  # B is not started
    assert run.summary(probs)["buildings"]["not_assessed"] == 1
