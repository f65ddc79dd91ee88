"""Probability of damage: the pure arithmetic of a probabilistic run, one plain vectorised function each.

The greenfield movements are linear in volume loss for a given trough width: settlement, slope, curvature and
horizontal strain all scale with the ratio r = VL / VL_design (methods.md sections 1 to 3: Smax is proportional to VL,
and every movement is Smax times a function of the offsets and i). The assessments that read them keep this:

- Buildings (methods.md section 5): stage 1 screens on the largest settlement and slope, both times r. Stage 2 splits
  each wall's profile at its inflection points, which a positive scale factor does not move; the deflection ratio and
  the average horizontal strain of every part are times r; the Burland & Wroth strains are linear in the deflection
  ratio, and the Burland (1995) combination eps_br = eps_b + eps_h, eps_dr = eps_h (1 - nu)/2 +
  sqrt((eps_h (1 + nu)/2)^2 + eps_d^2) is homogeneous of degree 1, with compressive eps_h counted as 0 (still 0 times
  r); the user's modification factors M multiply the deflection ratio and eps_h by a factor chosen by their sign
  (sagging or hogging, tension or compression), which a positive r keeps. So the governing
  tensile strain at r is r times its value at r = 1, and the category at r follows from the values at r = 1
  (`categories_at_ratio`).
- Utilities (methods.md section 6.1): bending strain, axial strain, the fibre interaction, joint rotation and joint
  opening (axial part + |theta| OD/2) are each linear in r, and so is their largest ratio to the allowable values,
  the utilisation (`statuses_at_ratio`).

Conventions: strains in per cent where the name says `_pct`; settlement in mm; slope dimensionless. Categories are the
integers 0-4 of `building_damage.damage_category`, -1 = not assessed. Utility status codes: 0 within limits, 1 near
limit, 2 exceeds, -1 not available (crosses the tunnel, or no allowable value).

References
----------
methods.md sections 1-3 (linearity of the greenfield movements in VL), 5.2-5.4 (categories, screening, combination) and
6.1 (utility demands). Spearman's rank correlation and the binomial standard error are textbook statistics (from
memory).
"""
from __future__ import annotations

import numpy as np
from scipy.stats import rankdata

from .building_damage import NOT_ASSESSED, damage_category, rankin_screening

#: Utility status codes of `statuses_at_ratio`.
WITHIN_CODE, NEAR_CODE, EXCEEDS_CODE, UNAVAILABLE_CODE = 0, 1, 2, -1
#: The category levels whose exceedance probabilities a run reports: P(category >= k).
CATEGORY_LEVELS = (1, 2, 3, 4)


def categories_at_ratio(ratio, max_settlement_mm, max_tilt, tensile_strain_pct, slope_limit, settlement_limit_mm):
    """Damage category of buildings at a volume-loss ratio r, from their values at r = 1 (arrays broadcast).

    Category 0 where stage 1 screens the building out at r (r max_tilt < slope_limit and r max_settlement_mm <
    settlement_limit_mm, Rankin 1988); otherwise the category of the limiting tensile strain r tensile_strain_pct
    (Boscardin & Cording 1989; Burland 1995).

    Parameters
    ----------
    ratio : array_like               r = VL / VL_design, at least 0. [-]
    max_settlement_mm : array_like   Largest greenfield settlement over the footprint at r = 1. [mm]
    max_tilt : array_like            Largest greenfield slope over the footprint at r = 1. [-]
    tensile_strain_pct : array_like  Tensile strain of the governing part at r = 1, computed whatever stage 1 says
                                     (0 where the building does not move). [%]
    slope_limit, settlement_limit_mm : float  The stage 1 limits. [-], [mm]

    Returns
    -------
    ndarray of int  0 to 4; -1 (NOT_ASSESSED) where an input is NaN (movements undefined).

    References
    ----------
    methods.md 5.2 (categories), 5.3 (screening), 5.4 (combination); linearity in r: module docstring.
    """
    r = np.asarray(ratio, dtype=float)
    settlement = r * np.asarray(max_settlement_mm, dtype=float)
    tilt = r * np.asarray(max_tilt, dtype=float)
    strain = r * np.asarray(tensile_strain_pct, dtype=float)
    undefined = np.isnan(settlement) | np.isnan(tilt) | np.isnan(strain)
    screened = rankin_screening(tilt, settlement, slope_limit, settlement_limit_mm)
    category = np.where(screened, 0, damage_category(np.where(undefined, 0.0, strain)))
    return np.where(undefined, NOT_ASSESSED, category).astype(int)


def statuses_at_ratio(ratio, utilisation, near_limit_fraction):
    """Status code of utilities at a volume-loss ratio r, from their utilisation at r = 1 (arrays broadcast).

    Exceeds where r u > 1; near limit where near_limit_fraction <= r u <= 1; within limits below (the rule of
    `settle.assessments.utilities`).

    Parameters
    ----------
    ratio : array_like        r = VL / VL_design. [-]
    utilisation : array_like  Largest demand / allowable at r = 1; NaN where unavailable. [-]
    near_limit_fraction : float  [-]

    Returns
    -------
    ndarray of int  EXCEEDS_CODE (2), NEAR_CODE (1), WITHIN_CODE (0); UNAVAILABLE_CODE (-1) where NaN.
    """
    u = np.asarray(ratio, dtype=float) * np.asarray(utilisation, dtype=float)
    with np.errstate(invalid="ignore"):
        code = np.where(u > 1.0, EXCEEDS_CODE, np.where(u >= near_limit_fraction, NEAR_CODE, WITHIN_CODE))
    return np.where(np.isnan(u), UNAVAILABLE_CODE, code).astype(int)


def exceedance_probabilities(levels, thresholds) -> np.ndarray:
    """Share of samples at or above each threshold, per asset.

    Parameters
    ----------
    levels : (assets, samples) int  A category or status code per sample; a negative value marks a sample where the
                                    asset could not be assessed.
    thresholds : sequence of int    k of P(level >= k).

    Returns
    -------
    (assets, len(thresholds)) float  In [0, 1]; NaN for an asset with any unassessed sample.
    """
    levels = np.asarray(levels)
    out = np.stack([(levels >= k).mean(axis=1) for k in thresholds], axis=1) if levels.shape[1] else \
        np.full((levels.shape[0], len(thresholds)), np.nan)
    out[(levels < 0).any(axis=1)] = np.nan
    return out


def binomial_standard_error(probability, samples: int) -> np.ndarray:
    """Standard error of a probability estimated from independent samples: sqrt(p (1 - p) / n).

    For scrambled Sobol points the variance of a sample mean of any square-integrable function is o(1/n) (Owen 1997,
    from memory), so for large n this plain Monte Carlo value is a conservative estimate; for an indicator (a
    category threshold) the gain over plain Monte Carlo is small, and this is the value we report. It is 0 where
    p is 0 or 1: no sample fell on the other side, which does not make the estimate exact.

    Returns
    -------
    ndarray  [same unit as probability]; NaN where p is NaN.
    """
    p = np.asarray(probability, dtype=float)
    return np.sqrt(p * (1.0 - p) / float(samples))


def rank_correlations(values, inputs) -> np.ndarray:
    """Spearman rank correlation of each asset's values over the samples with each input.

    Ranks are averaged over ties (scipy.stats.rankdata); the correlation is Pearson's of the ranks.

    Parameters
    ----------
    values : (assets, samples)  e.g. the governing tensile strain of each building in each sample.
    inputs : (k, samples)       the sampled inputs (or their uniforms: ranks are the same).

    Returns
    -------
    (assets, k)  rho in [-1, 1]; NaN for an asset whose values are constant or hold a NaN.
    """
    values = np.asarray(values, dtype=float)
    inputs = np.asarray(inputs, dtype=float)
    bad = np.isnan(values).any(axis=1)
    ranks = rankdata(np.where(bad[:, None], 0.0, values), axis=1)
    ranks -= ranks.mean(axis=1, keepdims=True)
    input_ranks = rankdata(inputs, axis=1)
    input_ranks -= input_ranks.mean(axis=1, keepdims=True)
    norm = np.linalg.norm(ranks, axis=1)[:, None] * np.linalg.norm(input_ranks, axis=1)[None, :]
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = (ranks @ input_ranks.T) / norm
    rho[bad] = np.nan  # a constant row gives 0 / 0 = NaN above
    return np.clip(rho, -1.0, 1.0)


def strongest_input(rho, candidates=None):
    """Index of the input with the largest |rho| per asset, among its candidates.

    Parameters
    ----------
    rho : (assets, k)            From `rank_correlations`.
    candidates : (assets, k) bool, optional  Inputs that can act on each asset (e.g. those of the drives that reach
                                 it); all when None.

    Returns
    -------
    (index, value)  (assets,) int, -1 where no candidate has a finite rho; and that rho (NaN there).
    """
    rho = np.asarray(rho, dtype=float)
    allowed = np.isfinite(rho) if candidates is None else np.isfinite(rho) & np.asarray(candidates, dtype=bool)
    score = np.where(allowed, np.abs(rho), -1.0)
    if score.shape[1] == 0:
        return np.full(score.shape[0], -1), np.full(score.shape[0], np.nan)
    best = np.argmax(score, axis=1)
    has = score[np.arange(len(best)), best] >= 0.0
    return np.where(has, best, -1), np.where(has, rho[np.arange(len(best)), best], np.nan)
