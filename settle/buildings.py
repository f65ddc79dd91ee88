"""Building damage assessment: stage 1 screening and stage 2 deep-beam damage categories, wall by wall.

Procedure (`assess_buildings`), after Mair, Taylor & Burland (1996):

1. Stage 1 (Rankin 1988): the greenfield settlement and slope at foundation level, at points along every wall and
   on a grid inside the footprint. A building whose largest slope is below 1/500 and largest settlement below
   10 mm has negligible risk and is screened out (category 0).
2. Stage 2, for the others: every wall (`settle.footprints.footprint_walls`) is a weightless elastic deep beam that
   follows the greenfield settlement profile along it (Burland & Wroth 1974; Burland 1995). The profile is split at
   its inflection points into sagging and hogging parts. For each part: the deflection ratio Delta/L, the bending and
   diagonal strains of the beam (neutral axis at mid-height when sagging, at the base when hogging), the average
   horizontal strain along the part, their combination into a tensile strain (Burland 1995), and the damage
   category from the limiting tensile strain (Boscardin & Cording 1989; Burland 1995). A wall takes its worst part,
   a building its worst wall.
3. Optionally, the deflection ratios and horizontal strains are multiplied by relative-stiffness modification
   factors M that the user reads from the published design charts (Potts & Addenbrooke 1997; Franzius et al.
   2006). The charts are not reproduced here, so M are inputs; off by default, and named in the output when used.

Category 5. The published table gives the same limiting strain, more than 0.3 %, for category 4 (severe) and
category 5 (very severe); no strain criterion tells them apart. A strain above 0.3 % is therefore reported as
category 4 with the label "severe to very severe", and category 5 is never assigned by this method: telling 4 from
5 is a stage 3 judgement (crack widths, stability) for the engineer.

Sign conventions (the project's, `settle.results`): settlement positive downward; horizontal strain tensile positive;
slope dimensionless (1/500 = 0.002). Deflection ratios are reported as positive magnitudes with the mode beside
them: sagging where the middle of the part settles more than the chord between its ends, hogging where it settles
less. Strains are in per cent in every `_pct` field. The average horizontal strain is reported as computed (signed);
compressive values enter the combination as zero, not as a benefit (common practice, no source; methods.md
section 5.4).

References
----------
[BW74]   Burland, J. B. & Wroth, C. P. (1974). Settlement of buildings and associated damage. Proc. Conf. Settlement
         of Structures, Cambridge, Pentech Press, 611-654.
[BBM77]  Burland, J. B., Broms, B. B. & de Mello, V. F. B. (1977). Behaviour of foundations and structures. Proc.
         9th ICSMFE, Tokyo, 2, 495-546.
[BC89]   Boscardin, M. D. & Cording, E. J. (1989). Building response to excavation-induced settlement. J. Geotech.
         Eng. ASCE 115(1), 1-21.
[B95]    Burland, J. B. (1995). Assessment of risk of damage to buildings due to tunnelling and excavation. Proc. 1st
         Int. Conf. on Earthquake Geotechnical Engineering, Tokyo.
[R88]    Rankin, W. J. (1988). Ground movements resulting from urban tunnelling: predictions and effects. Geological
         Society, London, Engineering Geology Special Publication 5, 79-92.
[MTB96]  Mair, R. J., Taylor, R. N. & Burland, J. B. (1996). Prediction of ground movements and assessment of risk
         of building damage due to bored tunnelling. Geotechnical Aspects of Underground Construction in Soft
         Ground, London, Balkema.
[PA97]   Potts, D. M. & Addenbrooke, T. I. (1997). A structure's influence on tunnelling-induced ground movements
         (journal details from memory in methods.md section 5.5; verify).
[FPB06]  Franzius, J. N., Potts, D. M. & Burland, J. B. (2006). The response of surface structures to tunnel
         construction. Proc. ICE Geotechnical Engineering 159(1), 3-17.
Equation forms and check values as collected in ../shared/methods.md section 5 (with their status there).
"""
from __future__ import annotations

from dataclasses import dataclass, field, fields
from typing import Callable

import numpy as np
import pandas as pd
import shapely

from .errors import InputError
from .footprints import MODIFICATION_ATTRIBUTES, Buildings, Walls, footprint_walls
from .results import Movements
from .tables import shown

#: Lower bounds of damage categories 1 to 4 as limiting tensile strain (Boscardin & Cording 1989; Burland 1995;
#: methods.md section 5.2 [S]). A strain exactly on a bound takes the higher category. [%]
CATEGORY_LIMITS_PCT = (0.05, 0.075, 0.15, 0.3)
#: Degree of damage for the categories this method assigns (methods.md section 5.2 [S]); see the module docstring
#: for 4 and 5.
CATEGORY_LABELS = ("negligible", "very slight", "slight", "moderate", "severe to very severe")
NOT_ASSESSED = -1
NOT_ASSESSED_LABEL = "not assessed"

#: Rankin (1988) stage 1 limits as used by Mair et al. (1996): slope 1/500 and settlement 10 mm (methods.md section
#: 5.3, threshold values from memory there; they are also the product owner's stated values).
RANKIN_SLOPE_LIMIT = 1.0 / 500.0
RANKIN_SETTLEMENT_LIMIT_MM = 10.0
#: Poisson's ratio of the beam in the Burland (1995) combination (methods.md section 5.4: 0.3, from memory there).
POISSON_RATIO = 0.3

#: Walls are sampled at spacing <= min(MAX_SAMPLE_SPACING_M, L / MIN_SAMPLE_INTERVALS) (our choice).
MAX_SAMPLE_SPACING_M = 0.5
MIN_SAMPLE_INTERVALS = 40
#: Sagging/hogging parts shorter than this, or of fewer than MIN_PART_SAMPLES samples, join their neighbours (our
#: choice). [m]
MIN_PART_M = 1.0
MIN_PART_SAMPLES = 3
#: Spacing of the grid of stage 1 points inside a footprint (our choice; the walls are sampled more finely). [m]
INTERIOR_SPACING_M = 1.0
#: Second differences of settlement smaller than this share of the wall's largest settlement are taken as zero
#: curvature (rounding noise, not an inflection). [-]
CURVATURE_NOISE = 1e-9
#: Buildings are assessed in batches of about this many sample points, each one call of the movements callable
#: (bounds memory). [-]
POINTS_PER_BATCH = 500_000

STIFFNESS_METHODS = {
    "none": "none",
    "potts_addenbrooke_1997": "Potts & Addenbrooke (1997)",
    "franzius_2006": "Franzius, Potts & Burland (2006)",
}


# ------------------------------------------------------------------------------------------- published methods
def burland_wroth_coefficients(length_to_height, e_over_g, hogging):
    """Coefficients c of the deep-beam relations Delta/L = c eps, for bending and for shear (Burland & Wroth 1974).

    Bending (extreme-fibre strain eps_b):  Delta/L = [L/(12 t) + 3 I E / (2 t L H G)] eps_b
    Shear (diagonal strain eps_d):         Delta/L = [1 + H L^2 G / (18 I E)] eps_d
    Sagging: neutral axis at mid-height, I = H^3/12, t = H/2.  Hogging: neutral axis at the base, I = H^3/3, t = H.
    Per unit thickness of the beam, so they depend on L/H and E/G only.

    Parameters
    ----------
    length_to_height : array_like  L/H of the beam. [-]
    e_over_g : array_like          Ratio of Young's to shear modulus of the beam, E/G. [-]
    hogging : array_like of bool   True: neutral axis at the base; False: at mid-height (sagging).

    Returns
    -------
    (ndarray, ndarray)  c_bending, c_shear. [-]

    References
    ----------
    [BW74]; [BBM77]; methods.md section 5.1 [S] (equations and the I, t of each mode).
    """
    r = np.asarray(length_to_height, dtype=float)
    eg = np.asarray(e_over_g, dtype=float)
    hog = np.asarray(hogging, dtype=bool)
    i_over_h3 = np.where(hog, 1.0 / 3.0, 1.0 / 12.0)  # I / H^3
    t_over_h = np.where(hog, 1.0, 0.5)  # t / H
    bending = r / (12.0 * t_over_h) + 3.0 * i_over_h3 * eg / (2.0 * t_over_h * r)
    shear = 1.0 + r * r / (18.0 * i_over_h3 * eg)
    return bending, shear


def burland_wroth_strains(deflection_ratio, length_to_height, e_over_g, hogging):
    """Bending and diagonal strain of a deep beam for a deflection ratio (Burland & Wroth 1974).

    Parameters
    ----------
    deflection_ratio : array_like  Delta/L, magnitude. [-]
    length_to_height, e_over_g, hogging : see `burland_wroth_coefficients`.

    Returns
    -------
    (ndarray, ndarray)  eps_b (extreme-fibre bending strain), eps_d (diagonal strain). [-]

    References
    ----------
    [BW74]; methods.md section 5.1 [S].
    """
    c_b, c_d = burland_wroth_coefficients(length_to_height, e_over_g, hogging)
    dr = np.abs(np.asarray(deflection_ratio, dtype=float))
    return dr / c_b, dr / c_d


def burland_combined_strains(bending_strain, diagonal_strain, horizontal_strain, poisson_ratio=POISSON_RATIO):
    """Bending and diagonal strains combined with a horizontal strain (Burland 1995).

        eps_br = eps_b + eps_h
        eps_dr = eps_h (1 - nu)/2 + sqrt( (eps_h (1 + nu)/2)^2 + eps_d^2 )

    Parameters
    ----------
    bending_strain, diagonal_strain : array_like  eps_b, eps_d. [-]
    horizontal_strain : array_like                eps_h, tensile positive (the caller decides whether a
                                                  compressive value is kept or set to zero). [-]
    poisson_ratio : float                         nu of the beam. [-]

    Returns
    -------
    (ndarray, ndarray)  eps_br, eps_dr, tensile positive. [-]

    References
    ----------
    [B95]; [MTB96]; methods.md section 5.4 (formulas from memory there; its worked example is the test oracle).
    """
    eh = np.asarray(horizontal_strain, dtype=float)
    nu = float(poisson_ratio)
    eps_br = np.asarray(bending_strain, dtype=float) + eh
    eps_dr = eh * (1.0 - nu) / 2.0 + np.sqrt((eh * (1.0 + nu) / 2.0) ** 2 + np.asarray(diagonal_strain) ** 2)
    return eps_br, eps_dr


def damage_category(tensile_strain_pct):
    """Damage category from the limiting tensile strain (Boscardin & Cording 1989; Burland 1995).

    0: < 0.05 %; 1: 0.05 to < 0.075 %; 2: 0.075 to < 0.15 %; 3: 0.15 to < 0.3 %; 4: >= 0.3 % (severe to very
    severe: the table gives no strain bound between categories 4 and 5). A strain on a bound takes the higher
    category.

    Parameters
    ----------
    tensile_strain_pct : array_like  Limiting tensile strain. [%]

    Returns
    -------
    ndarray of int  0 to 4; NOT_ASSESSED (-1) where the strain is NaN.

    References
    ----------
    [BC89]; [B95]; methods.md section 5.2 [S].
    """
    eps = np.asarray(tensile_strain_pct, dtype=float)
    cat = np.searchsorted(np.asarray(CATEGORY_LIMITS_PCT), eps, side="right")
    return np.where(np.isnan(eps), NOT_ASSESSED, cat).astype(int)


def category_label(category):
    """Words for categories from `damage_category` ("not assessed" for -1)."""
    labels = np.array(CATEGORY_LABELS + (NOT_ASSESSED_LABEL,), dtype=object)
    return labels[np.asarray(category, dtype=int)]  # -1 picks the last entry


def rankin_screening(max_slope, max_settlement_mm, slope_limit=RANKIN_SLOPE_LIMIT,
                     settlement_limit_mm=RANKIN_SETTLEMENT_LIMIT_MM):
    """Stage 1: negligible risk where the greenfield slope and settlement are both below the limits (Rankin 1988).

    Parameters
    ----------
    max_slope : array_like          Largest greenfield ground slope over the building. [-]
    max_settlement_mm : array_like  Largest greenfield settlement over the building. [mm]
    slope_limit : float             1/500 in [R88] as used by [MTB96]. [-]
    settlement_limit_mm : float     10 mm in [R88] as used by [MTB96]. [mm]

    Returns
    -------
    ndarray of bool  True: negligible risk, screened out (False where an input is NaN).

    References
    ----------
    [R88]; [MTB96]; methods.md section 5.3 (limits from memory there).
    """
    return (np.asarray(max_slope) < slope_limit) & (np.asarray(max_settlement_mm) < settlement_limit_mm)


def potts_addenbrooke_relative_stiffness(bending_stiffness_knm2_per_m, axial_stiffness_kn_per_m, soil_modulus_kpa,
                                         width_m):
    """Relative bending and axial stiffness of a building in plane strain (Potts & Addenbrooke 1997).

        rho* = EI / (E_s (B/2)^4)     alpha* = EA / (E_s B/2)

    Parameters
    ----------
    bending_stiffness_knm2_per_m : array_like  EI per metre run of building. [kN m^2/m]
    axial_stiffness_kn_per_m : array_like      EA per metre run. [kN/m]
    soil_modulus_kpa : array_like              E_s, secant modulus at 0.01 % axial strain at depth z0/2. [kPa]
    width_m : array_like                       B, width of the building across the tunnel. [m]

    Returns
    -------
    (ndarray, ndarray)  rho* [1/m], alpha* [-]. The paper's design curves of M against these are not reproduced
                        here (not available to us); read M from them and give them as inputs.

    References
    ----------
    [PA97]; methods.md section 5.5 (definitions from memory there).
    """
    half = np.asarray(width_m, dtype=float) / 2.0
    es = np.asarray(soil_modulus_kpa, dtype=float)
    return (np.asarray(bending_stiffness_knm2_per_m, dtype=float) / (es * half**4),
            np.asarray(axial_stiffness_kn_per_m, dtype=float) / (es * half))


def franzius_relative_stiffness(bending_stiffness_knm2, axial_stiffness_kn, soil_modulus_kpa, axis_depth_m, width_m,
                                length_m):
    """Modified relative stiffness of a building (Franzius, Potts & Burland 2006).

        rho*_mod = EI / (E_s z0 B^2 L)     alpha*_mod = EA / (E_s B L)

    Parameters
    ----------
    bending_stiffness_knm2 : array_like  EI of the whole building. [kN m^2]
    axial_stiffness_kn : array_like      EA of the whole building. [kN]
    soil_modulus_kpa : array_like        E_s. [kPa]
    axis_depth_m : array_like            z0, depth of the tunnel axis. [m]
    width_m : array_like                 B, across the tunnel. [m]
    length_m : array_like                L, along the tunnel. [m]

    Returns
    -------
    (ndarray, ndarray)  rho*_mod [-], alpha*_mod [-]. The updated M envelopes are charts not reproduced here.

    References
    ----------
    [FPB06]; methods.md section 5.5 (definitions from memory there).
    """
    es = np.asarray(soil_modulus_kpa, dtype=float)
    b = np.asarray(width_m, dtype=float)
    ln = np.asarray(length_m, dtype=float)
    return (np.asarray(bending_stiffness_knm2, dtype=float) / (es * np.asarray(axis_depth_m) * b * b * ln),
            np.asarray(axial_stiffness_kn, dtype=float) / (es * b * ln))


def apply_modification_factors(deflection_ratio, horizontal_strain, sagging, m_dr_sag, m_dr_hog, m_eps_ht, m_eps_hc):
    """Greenfield deflection ratio and horizontal strain times the modification factors M (Potts & Addenbrooke 1997).

    DR = M_DRsag DR_gf (sagging) or M_DRhog DR_gf (hogging); eps_h = M_eps_ht eps_h,gf (tensile) or
    M_eps_hc eps_h,gf (compressive). M are the user's readings of the published design charts.

    Returns
    -------
    (ndarray, ndarray)  Modified deflection ratio [-] and horizontal strain [-].

    References
    ----------
    [PA97]; [FPB06]; methods.md section 5.5.
    """
    dr = np.asarray(deflection_ratio, dtype=float)
    eh = np.asarray(horizontal_strain, dtype=float)
    return (dr * np.where(sagging, m_dr_sag, m_dr_hog), eh * np.where(eh > 0, m_eps_ht, m_eps_hc))


def deep_beam_strains(deflection_ratio, horizontal_strain, length_to_height, e_over_g, hogging,
                      poisson_ratio=POISSON_RATIO) -> dict:
    """The stage 2 chain for beams: Burland & Wroth strains, Burland (1995) combination, limiting tensile strain.

    Compressive horizontal strain is set to zero in the combination (not counted as a benefit; common practice,
    methods.md section 5.4).

    Returns
    -------
    dict of ndarray  bending, diagonal, combined_bending, combined_diagonal, tensile [-] (tensile = the larger
                     combined strain), bending_governs (bool), category (int).
    """
    eps_b, eps_d = burland_wroth_strains(deflection_ratio, length_to_height, e_over_g, hogging)
    eh = np.maximum(np.asarray(horizontal_strain, dtype=float), 0.0)
    eps_br, eps_dr = burland_combined_strains(eps_b, eps_d, eh, poisson_ratio)
    tensile = np.maximum(eps_br, eps_dr)
    return {"bending": eps_b, "diagonal": eps_d, "combined_bending": eps_br, "combined_diagonal": eps_dr,
            "tensile": tensile, "bending_governs": eps_br >= eps_dr, "category": damage_category(tensile * 100.0)}


# ------------------------------------------------------------------------------------------ sampling and profiles
def wall_samples(walls: Walls):
    """Points along every wall at spacing <= min(MAX_SAMPLE_SPACING_M, L / MIN_SAMPLE_INTERVALS), ends included.

    Returns
    -------
    (wall, s, x, y)  Wall index of each sample, distance from the wall's start [m], position [m]; walls in order,
                     samples in order along each wall.
    """
    length = walls.length_m
    intervals = np.maximum(MIN_SAMPLE_INTERVALS, np.ceil(length / MAX_SAMPLE_SPACING_M - 1e-9)).astype(np.int64)
    count = intervals + 1
    wall = np.repeat(np.arange(len(walls)), count)
    k = np.arange(wall.size) - np.repeat(np.cumsum(count) - count, count)
    s = k * (length / intervals)[wall]
    xy = walls.start_xy[wall] + s[:, None] * walls.direction[wall]
    return wall, s, xy[:, 0], xy[:, 1]


def interior_points(polygons, spacing_m: float = INTERIOR_SPACING_M):
    """Nodes of a grid of the given spacing (aligned on multiples of it) that fall inside each footprint.

    Returns
    -------
    (owner, x, y)  Index of the polygon of each point, and its position [m]; grouped by polygon.
    """
    polygons = np.asarray(polygons, dtype=object)
    bounds = shapely.bounds(polygons)
    c0 = np.ceil(bounds[:, 0] / spacing_m).astype(np.int64)
    c1 = np.floor(bounds[:, 2] / spacing_m).astype(np.int64)
    r0 = np.ceil(bounds[:, 1] / spacing_m).astype(np.int64)
    r1 = np.floor(bounds[:, 3] / spacing_m).astype(np.int64)
    nx, ny = np.maximum(c1 - c0 + 1, 0), np.maximum(r1 - r0 + 1, 0)
    count = nx * ny
    owner = np.repeat(np.arange(len(polygons)), count)
    k = np.arange(owner.size) - np.repeat(np.cumsum(count) - count, count)
    x = (c0[owner] + k % nx[owner]) * spacing_m
    y = (r0[owner] + k // np.maximum(nx[owner], 1)) * spacing_m
    shapely.prepare(polygons)
    inside = shapely.contains_xy(polygons[owner], x, y)
    return owner[inside], x[inside], y[inside]


def _segment_fill(values: np.ndarray, group: np.ndarray) -> np.ndarray:
    """Zeros replaced by the previous non-zero value of the same group, then leading zeros by the next one."""
    def forward(v, g):
        pos = np.arange(len(v))
        start = np.r_[True, g[1:] != g[:-1]]
        src = np.maximum.accumulate(np.where((v != 0) | start, pos, 0))
        return v[src]

    out = forward(values, group)
    return forward(out[::-1], group[::-1])[::-1]


def _runs(values: np.ndarray, group: np.ndarray):
    """Runs of equal values within groups: (first, last) positions of each run."""
    change = np.r_[True, (group[1:] != group[:-1]) | (values[1:] != values[:-1])]
    first = np.flatnonzero(change)
    last = np.r_[first[1:] - 1, len(values) - 1]
    return first, last


def profile_parts(wall: np.ndarray, s: np.ndarray, settlement: np.ndarray, min_part_m: float = MIN_PART_M):
    """Split the settlement profile along every wall into sagging and hogging parts at its inflection points.

    The curvature sign comes from second differences of settlement at the interior samples (negative: sagging, the
    settlement is concave; positive: hogging); differences below CURVATURE_NOISE of the wall's largest settlement
    count as zero and take the sign of their neighbours. Runs of one sign shorter than `min_part_m` or of fewer
    than MIN_PART_SAMPLES samples join their neighbours. A part ends at the sample of the two either side of a sign
    change with the smaller second difference (the one nearer the inflection); neighbouring parts share it.

    Parameters
    ----------
    wall : (n,) int      Wall index of each sample, grouped and in order along each wall (`wall_samples`).
    s : (n,) float       Distance along the wall. [m]
    settlement : (n,)    Settlement at the samples, finite. [any length unit]

    Returns
    -------
    (part_wall, first, last)  Wall of each part and its first and last sample (indices into the samples); parts
                              in order along each wall.
    """
    n = len(wall)
    wall_first = np.r_[True, wall[1:] != wall[:-1]]
    wall_last = np.r_[wall[1:] != wall[:-1], True]
    wall_id = wall[wall_first]
    dense = np.cumsum(wall_first) - 1  # 0, 1, ... over the walls given
    d2 = np.zeros(n)
    d2[1:-1] = settlement[:-2] - 2.0 * settlement[1:-1] + settlement[2:]
    interior = np.flatnonzero(~wall_first & ~wall_last)
    g = dense[interior]
    scale = np.zeros(len(wall_id))
    np.maximum.at(scale, dense, np.abs(settlement))
    curv = d2[interior]
    sign = np.where(np.abs(curv) > CURVATURE_NOISE * scale[g], np.sign(curv), 0.0)
    sign = _segment_fill(sign, g)

    wall_start = np.flatnonzero(wall_first)
    wall_end = np.flatnonzero(wall_last)
    spacing = s[wall_start + 1] - s[wall_start]  # per wall (samples are evenly spaced)
    first, last = _runs(sign, g)
    nodes = last - first + 1
    h = spacing[g[first]]
    runs_in_wall = np.bincount(g[first], minlength=len(scale))
    short = ((nodes < MIN_PART_SAMPLES) | (nodes * h < min_part_m)) & (runs_in_wall[g[first]] > 1)
    if short.any():
        kill = np.repeat(short, nodes)
        sign = _segment_fill(np.where(kill, 0.0, sign), g)
        first, last = _runs(sign, g)

    run_wall = g[first]
    first_run = np.r_[True, run_wall[1:] != run_wall[:-1]]
    last_run = np.r_[run_wall[1:] != run_wall[:-1], True]
    # boundary after each run (not the last of its wall): the sample nearer the inflection
    j = interior[last]
    j_next = interior[np.minimum(last + 1, len(interior) - 1)]
    boundary = np.where(np.abs(d2[j]) <= np.abs(d2[j_next]), j, j_next)
    p_first = np.where(first_run, wall_start[run_wall], np.r_[0, boundary[:-1]])
    p_last = np.where(last_run, wall_end[run_wall], boundary)
    return wall_id[run_wall], p_first, p_last


def part_deflection(first: np.ndarray, last: np.ndarray, s: np.ndarray, settlement: np.ndarray) -> np.ndarray:
    """Relative deflection Delta of each part: the largest deviation of the settlement from the chord joining the
    part's ends, signed (positive: the part settles more than the chord, sagging; negative: hogging).

    Returns
    -------
    ndarray  Delta, in the unit of `settlement`.
    """
    count = last - first + 1
    part = np.repeat(np.arange(len(first)), count)
    idx = first[part] + np.arange(part.size) - np.repeat(np.cumsum(count) - count, count)
    a, b = first[part], last[part]
    chord = settlement[a] + (settlement[b] - settlement[a]) * (s[idx] - s[a]) / (s[b] - s[a])
    dev = settlement[idx] - chord
    starts = np.cumsum(count) - count
    high = np.maximum.reduceat(dev, starts)
    low = np.minimum.reduceat(dev, starts)
    return np.where(high >= -low, high, low)


# ---------------------------------------------------------------------------------------------------- procedure
@dataclass(frozen=True)
class AssessmentOptions:
    """Project-level settings of the building assessment (the `[buildings]` keys the engine uses)."""

    poisson_ratio: float = POISSON_RATIO
    screening_slope_limit: float = RANKIN_SLOPE_LIMIT
    screening_settlement_limit_mm: float = RANKIN_SETTLEMENT_LIMIT_MM
    interior_spacing_m: float = INTERIOR_SPACING_M
    stiffness_correction: str = "none"  # a key of STIFFNESS_METHODS
    modification_factors: dict = field(default_factory=dict)  # MODIFICATION_ATTRIBUTES -> project-level M [-]
    key_prefix: str = "[buildings]"  # where these keys live, for messages

    def check(self) -> None:
        """InputError naming the key for a value out of range."""
        def bad(key, rule, value):
            raise InputError(f"{self.key_prefix}: {key} must be {rule}; got {shown(value)}")

        if not 0.0 <= self.poisson_ratio < 0.5:
            bad("poisson_ratio", "from 0 to less than 0.5", self.poisson_ratio)
        if not self.screening_slope_limit > 0:
            bad("screening_slope_limit", "more than 0", self.screening_slope_limit)
        if not self.screening_settlement_limit_mm > 0:
            bad("screening_settlement_limit_mm", "more than 0 mm", self.screening_settlement_limit_mm)
        if not self.interior_spacing_m > 0:
            bad("interior_spacing_m", "more than 0 m", self.interior_spacing_m)
        if self.stiffness_correction not in STIFFNESS_METHODS:
            bad("stiffness_correction", f"one of {', '.join(map(shown, STIFFNESS_METHODS))}",
                self.stiffness_correction)
        for key, value in self.modification_factors.items():
            if key not in MODIFICATION_ATTRIBUTES:
                bad("a modification factor key", f"one of {', '.join(MODIFICATION_ATTRIBUTES)}", key)
            if value is not None and not (np.isfinite(value) and value >= 0):
                bad(key, "a number at least 0", value)


@dataclass
class PartResults:
    """Sagging and hogging parts of the assessed walls (arrays of one length)."""

    wall: np.ndarray  # index into Walls
    from_m: np.ndarray  # along the wall from its start [m]
    to_m: np.ndarray
    sagging: np.ndarray  # bool; False = hogging
    length_to_height: np.ndarray  # [-]
    greenfield_deflection_ratio: np.ndarray  # magnitude [-]
    greenfield_horizontal_strain_pct: np.ndarray  # average along the part, tensile positive [%]
    deflection_ratio: np.ndarray  # after modification factors (= greenfield when off) [-]
    horizontal_strain_pct: np.ndarray  # [%]
    bending_strain_pct: np.ndarray
    diagonal_strain_pct: np.ndarray
    combined_bending_strain_pct: np.ndarray
    combined_diagonal_strain_pct: np.ndarray
    tensile_strain_pct: np.ndarray
    bending_governs: np.ndarray  # bool
    category: np.ndarray  # int 0-4


@dataclass
class BuildingResults:
    """What the building assessment found. Per building arrays follow `Buildings`; walls follow `walls`."""

    max_settlement_mm: np.ndarray  # greenfield, at foundation level, over the footprint
    max_tilt: np.ndarray  # greenfield slope [-]
    screened_out: np.ndarray  # bool: stage 1 negligible risk
    deflection_ratio: np.ndarray  # of the governing part [-]; NaN when not assessed at stage 2
    horizontal_strain_pct: np.ndarray  # of the governing part, tensile positive [%]
    tensile_strain_pct: np.ndarray  # limiting tensile strain of the governing part [%]
    category: np.ndarray  # int 0-4; NOT_ASSESSED (-1) where movements are undefined
    category_label: np.ndarray  # text
    governing_wall: np.ndarray  # wall number within the building; -1 when none
    governing_mode: np.ndarray  # "sagging" | "hogging" | ""
    stiffness_correction: np.ndarray  # text per building: "none" or the method and the M used
    note: np.ndarray  # text per building
    walls: Walls
    wall_governing_part: np.ndarray  # index into parts; -1 for walls not assessed at stage 2
    wall_part_count: np.ndarray  # parts of each assessed wall (0 when not assessed)
    parts: PartResults
    options: AssessmentOptions


def _modification_factors(buildings: Buildings, options: AssessmentOptions) -> dict[str, np.ndarray]:
    """M per building: the building's attribute, else the project value; missing both is an InputError."""
    out = {}
    for name in MODIFICATION_ATTRIBUTES:
        own = buildings.modification.get(name, np.full(len(buildings), np.nan))
        project = options.modification_factors.get(name)
        m = np.where(np.isnan(own), np.nan if project is None else float(project), own)
        if np.isnan(m).any():
            k = int(np.argmax(np.isnan(m)))
            raise InputError(f"{buildings.source} building {shown(buildings.ids[k])}: {name} is empty and "
                             f"{options.key_prefix} {name} is not set; stiffness_correction = "
                             f"{shown(options.stiffness_correction)} needs every modification factor")
        out[name] = m
    return out


@dataclass
class _Samples:
    """Stage 1 and 2 points of a batch of buildings: the wall samples first, then the interior grid. Building and
    wall indices are those of the whole run."""

    owner: np.ndarray  # building of each point
    x: np.ndarray
    y: np.ndarray
    wall: np.ndarray  # wall of each wall sample (the first len(wall) points)
    along_m: np.ndarray  # distance of each wall sample from its wall's start [m]

    @classmethod
    def of(cls, buildings: Buildings, walls: Walls, first: int, end: int, w_first: int, w_end: int,
           interior_spacing_m: float) -> "_Samples":
        """Points of buildings first..end-1, whose walls are w_first..w_end-1."""
        sub = Walls(*(a[w_first:w_end] for a in (walls.building, walls.number, walls.part, walls.start_xy,
                                                  walls.end_xy)))
        wall, along, wx, wy = wall_samples(sub)
        owner, ix, iy = interior_points(buildings.polygons[first:end], interior_spacing_m)
        return cls(np.concatenate([sub.building[wall], owner + first]), np.concatenate([wx, ix]),
                   np.concatenate([wy, iy]), wall + w_first, along)


def _batches(buildings: Buildings, walls: Walls, interior_spacing_m: float):
    """(first, end, w_first, w_end) of batches of buildings of about POINTS_PER_BATCH points each."""
    n = len(buildings)
    wall_range = np.searchsorted(walls.building, np.arange(n + 1))
    area = shapely.area(buildings.polygons) / interior_spacing_m**2
    per_wall = np.maximum(MIN_SAMPLE_INTERVALS, walls.length_m / MAX_SAMPLE_SPACING_M) + 1
    points = np.cumsum(area + np.bincount(walls.building, weights=per_wall, minlength=n))
    cuts = np.searchsorted(points, np.arange(POINTS_PER_BATCH, points[-1] if n else 0, POINTS_PER_BATCH))
    edges = np.unique(np.r_[0, cuts, n])
    return [(a, b, wall_range[a], wall_range[b]) for a, b in zip(edges[:-1], edges[1:])]


def _evaluate(movements, x, y, depth) -> dict[str, np.ndarray]:
    """Settlement [mm], tilt [-] and horizontal displacement ux, uy [mm] at the points."""
    m: Movements = movements(x, y, depth)
    return {"settlement_mm": np.asarray(m.settlement_mm, dtype=float), "tilt": np.hypot(m.slope_x, m.slope_y),
            "ux_mm": np.asarray(m.ux_mm, dtype=float), "uy_mm": np.asarray(m.uy_mm, dtype=float)}


def _footprint_maxima(owner: np.ndarray, field_: dict, n: int):
    """Largest settlement [mm] and tilt [-] of each building, NaN (and `undefined` True) where any point is NaN."""
    undefined = np.bincount(owner, weights=np.isnan(field_["settlement_mm"]), minlength=n) > 0
    maxima = []
    for key in ("settlement_mm", "tilt"):
        m = np.full(n, -np.inf)
        np.maximum.at(m, owner, np.nan_to_num(field_[key], nan=-np.inf))
        m[undefined] = np.nan
        maxima.append(m)
    return maxima[0], maxima[1], undefined


def _governing(parts: PartResults, walls: Walls, assessed: np.ndarray):
    """Worst part of each wall (index into parts, -1 for walls not assessed) and worst wall of each building
    (index into walls, -1 where none); ties go to the first part along the wall and the lowest wall number."""
    w_count = len(walls)
    wall_part = np.full(w_count, -1)
    if len(parts.wall):
        order = np.lexsort((-parts.tensile_strain_pct, parts.wall))
        head = order[np.r_[True, parts.wall[order][1:] != parts.wall[order][:-1]]]
        wall_part[parts.wall[head]] = head
    strain = np.full(w_count, -np.inf)
    strain[wall_part >= 0] = parts.tensile_strain_pct[wall_part[wall_part >= 0]]
    worst_wall = np.full(len(assessed), -1)
    if w_count:
        order = np.lexsort((walls.number, -strain, walls.building))
        head = order[np.r_[True, walls.building[order][1:] != walls.building[order][:-1]]]
        worst_wall[walls.building[head]] = head
    worst_wall[~assessed] = -1
    return wall_part, worst_wall


def assess_buildings(buildings: Buildings, movements: Callable[..., Movements],
                     options: AssessmentOptions | None = None) -> BuildingResults:
    """Stage 1 screening and stage 2 deep-beam damage categories of every building.

    Parameters
    ----------
    buildings : Buildings        From `settle.footprints.read_buildings`.
    movements : callable         movements(x_m, y_m, depth_m) -> settle.results.Movements: the greenfield
                                 movements of every drive at the construction stage of the run, at points at a
                                 depth below the ground surface. NaN where undefined (below a tunnel crown).
    options : AssessmentOptions

    Returns
    -------
    BuildingResults  A building with any undefined movement at its foundation level is not assessed
                     (category -1, with a note).
    """
    options = options or AssessmentOptions()
    options.check()
    factors = _modification_factors(buildings, options) if options.stiffness_correction != "none" else None
    walls = footprint_walls(buildings.polygons)
    n = len(buildings)
    max_settlement, max_tilt = np.full(n, np.nan), np.full(n, np.nan)
    undefined, screened = np.zeros(n, dtype=bool), np.zeros(n, dtype=bool)
    found = []
    for first, end, w_first, w_end in _batches(buildings, walls, options.interior_spacing_m):
        samples = _Samples.of(buildings, walls, first, end, w_first, w_end, options.interior_spacing_m)
        field_ = _evaluate(movements, samples.x, samples.y, buildings.foundation_depth_m[samples.owner])
        # stage 1
        s, t, u = _footprint_maxima(samples.owner - first, field_, end - first)
        max_settlement[first:end], max_tilt[first:end], undefined[first:end] = s, t, u
        screened[first:end] = rankin_screening(t, s, options.screening_slope_limit,
                                               options.screening_settlement_limit_mm) & ~u
        # stage 2
        found.append(_assess_parts(samples, field_, walls, ~screened & ~undefined, buildings, factors, options))
    parts = _concatenate(found)
    wall_part, worst_wall = _governing(parts, walls, ~screened & ~undefined)
    return _results(buildings, walls, parts, wall_part, worst_wall, max_settlement, max_tilt, screened, undefined,
                    factors, options)


def _concatenate(found: list[PartResults]) -> PartResults:
    if not found:
        return _no_parts()
    return PartResults(**{f.name: np.concatenate([getattr(p, f.name) for p in found]) for f in fields(PartResults)})


def _no_parts() -> PartResults:
    empty_f, empty_i = np.empty(0), np.empty(0, dtype=int)
    return PartResults(empty_i, *(empty_f,) * 2, np.empty(0, bool), *(empty_f,) * 10, np.empty(0, bool), empty_i)


def _results(buildings, walls, parts, wall_part, worst_wall, max_settlement, max_tilt, screened, undefined,
             factors, options) -> BuildingResults:
    """Per building values of the governing part, with a note saying where each result comes from."""
    n = len(buildings)
    part = np.where(worst_wall >= 0, wall_part[np.maximum(worst_wall, 0)], -1)
    has = part >= 0

    def pick(values, empty):
        out = np.full(n, empty, dtype=np.asarray(values).dtype if len(values) else type(empty))
        out[has] = values[part[has]]
        return out

    category = np.where(undefined, NOT_ASSESSED, pick(parts.category, 0)).astype(int)
    mode = np.where(has, np.where(pick(parts.sagging, False), "sagging", "hogging"), "").astype(object)
    note = np.full(n, "", dtype=object)
    for k in np.flatnonzero(has):
        q = part[k]
        note[k] = (f"stage 2: wall {walls.number[worst_wall[k]]}, {mode[k]} part {parts.from_m[q]:.1f}-"
                   f"{parts.to_m[q]:.1f} m along it, {'bending' if parts.bending_governs[q] else 'diagonal'} "
                   "strain governs")
    note[screened] = (f"stage 1: greenfield slope below {options.screening_slope_limit:g} and settlement below "
                      f"{options.screening_settlement_limit_mm:g} mm; negligible risk")
    note[undefined] = ("not assessed: the foundation level is at or below the crown of a drive that reaches the "
                       "building, where the greenfield relations do not hold")
    return BuildingResults(
        max_settlement_mm=max_settlement,
        max_tilt=max_tilt,
        screened_out=screened,
        deflection_ratio=pick(parts.deflection_ratio, np.nan),
        horizontal_strain_pct=pick(parts.horizontal_strain_pct, np.nan),
        tensile_strain_pct=pick(parts.tensile_strain_pct, np.nan),
        category=category,
        category_label=category_label(category),
        governing_wall=np.where(has, walls.number[np.maximum(worst_wall, 0)] if len(walls) else -1, -1),
        governing_mode=mode,
        stiffness_correction=_correction_text(factors, options, n),
        note=note,
        walls=walls,
        wall_governing_part=wall_part,
        wall_part_count=np.bincount(parts.wall, minlength=len(walls)),
        parts=parts,
        options=options,
    )


def _assess_parts(samples: _Samples, field_: dict, walls: Walls, assessed: np.ndarray, buildings: Buildings,
                  factors, options: AssessmentOptions) -> PartResults:
    """Stage 2: the sagging and hogging parts of the walls of the assessed buildings, with their deflection ratio,
    average horizontal strain, beam strains and category."""
    n_wall_samples = len(samples.wall)
    keep = assessed[walls.building][samples.wall]
    w_of = samples.wall[keep]
    s_along = samples.along_m[keep]
    prof = field_["settlement_mm"][:n_wall_samples][keep]
    t = walls.direction[w_of]
    along = field_["ux_mm"][:n_wall_samples][keep] * t[:, 0] + field_["uy_mm"][:n_wall_samples][keep] * t[:, 1]
    if len(w_of) == 0:
        return _no_parts()
    p_wall, first, last = profile_parts(w_of, s_along, prof)
    length = s_along[last] - s_along[first]
    delta_mm = part_deflection(first, last, s_along, prof)
    sagging = delta_mm > 0
    dr_gf = np.abs(delta_mm) * 1e-3 / length
    eh_gf = (along[last] - along[first]) * 1e-3 / length
    b = walls.building[p_wall]
    if factors is not None:
        dr, eh = apply_modification_factors(dr_gf, eh_gf, sagging, *(factors[k][b] for k in MODIFICATION_ATTRIBUTES))
    else:
        dr, eh = dr_gf, eh_gf
    ratio = length / buildings.height_m[b]
    beam = deep_beam_strains(dr, eh, ratio, buildings.e_over_g[b], ~sagging, options.poisson_ratio)
    pct = 100.0
    return PartResults(
        wall=p_wall, from_m=s_along[first], to_m=s_along[last], sagging=sagging, length_to_height=ratio,
        greenfield_deflection_ratio=dr_gf, greenfield_horizontal_strain_pct=eh_gf * pct, deflection_ratio=dr,
        horizontal_strain_pct=eh * pct, bending_strain_pct=beam["bending"] * pct,
        diagonal_strain_pct=beam["diagonal"] * pct, combined_bending_strain_pct=beam["combined_bending"] * pct,
        combined_diagonal_strain_pct=beam["combined_diagonal"] * pct, tensile_strain_pct=beam["tensile"] * pct,
        bending_governs=beam["bending_governs"], category=beam["category"],
    )


def _correction_text(factors, options: AssessmentOptions, n: int) -> np.ndarray:
    if factors is None:
        return np.full(n, "none", dtype=object)
    name = STIFFNESS_METHODS[options.stiffness_correction]
    m = [factors[k] for k in MODIFICATION_ATTRIBUTES]
    return np.array([f"{name}: modification factors from the user, M_DRsag {a:g}, M_DRhog {b:g}, M_eps_ht {c:g}, "
                     f"M_eps_hc {d:g}" for a, b, c, d in zip(*m)], dtype=object)


# ------------------------------------------------------------------------------------------------------- output
BUILDING_FIELDS = ("id", "height_m", "foundation_depth_m", "structure", "e_over_g", "defaults_used",
                   "max_settlement_mm", "max_tilt", "screened_out", "deflection_ratio", "horizontal_strain_pct",
                   "tensile_strain_pct", "category", "category_label", "governing_wall", "governing_mode",
                   "stiffness_correction", "note")
WALL_FIELDS = ("building_id", "wall", "part", "length_m", "parts", "governing_from_m", "governing_to_m",
               "governing_mode", "length_to_height", "greenfield_deflection_ratio",
               "greenfield_horizontal_strain_pct", "deflection_ratio", "horizontal_strain_pct", "bending_strain_pct",
               "diagonal_strain_pct", "combined_bending_strain_pct", "combined_diagonal_strain_pct",
               "tensile_strain_pct", "governing_strain", "category", "category_label")


def _nullable(values, missing) -> pd.api.extensions.ExtensionArray:
    """Integers with NULL where `missing` (pandas Int64, written as INTEGER with NULLs)."""
    out = pd.array(np.asarray(values, dtype=np.int64), dtype="Int64")
    out[np.asarray(missing, dtype=bool)] = pd.NA
    return out


def _input_columns(buildings: Buildings) -> dict:
    """The input attributes to carry. An attribute an output field was read from under the same name (e.g. the
    input height_m) gives way to that field, which holds the value used; any other input name that an output field
    uses, in any letter case, is renamed "input_<name>"."""
    ours = {f.lower() for f in BUILDING_FIELDS} | {"geometry", "geom", "fid", "x_m", "y_m"}
    out = {}
    for name in buildings.attributes.columns:
        key = str(name)
        if buildings.sources.get(key) == key:
            continue
        while key.lower() in ours or key in out:
            key = f"input_{key}"
        out[key] = buildings.attributes[name].to_numpy()
    return out


def building_columns(buildings: Buildings, results: BuildingResults) -> dict:
    """Columns of the `buildings` GIS layer: the input attributes, then BUILDING_FIELDS, then `geometry`
    (MultiPolygon for every row, so the layer has one geometry type).

    Integers that may be NULL (category, governing_wall) are pandas Int64 arrays; floats use NaN for NULL.
    """
    cols = _input_columns(buildings)
    not_assessed = results.category == NOT_ASSESSED
    cols.update({
        "id": np.array(buildings.ids, dtype=object),
        "height_m": buildings.height_m,
        "foundation_depth_m": buildings.foundation_depth_m,
        "structure": np.array(buildings.structure, dtype=object),
        "e_over_g": buildings.e_over_g,
        "defaults_used": np.array(buildings.defaults_used, dtype=object),
        "max_settlement_mm": results.max_settlement_mm,
        "max_tilt": results.max_tilt,
        "screened_out": results.screened_out.astype(bool),
        "deflection_ratio": results.deflection_ratio,
        "horizontal_strain_pct": results.horizontal_strain_pct,
        "tensile_strain_pct": results.tensile_strain_pct,
        "category": _nullable(results.category, not_assessed),
        "category_label": results.category_label,
        "governing_wall": _nullable(results.governing_wall, results.governing_wall < 0),
        "governing_mode": results.governing_mode,
        "stiffness_correction": results.stiffness_correction,
        "note": results.note,
    })
    polys = np.asarray(buildings.polygons, dtype=object)
    single = np.flatnonzero(shapely.get_type_id(polys) == 3)
    geometry = polys.copy()
    if len(single):
        geometry[single] = shapely.multipolygons(polys[single], indices=np.arange(len(single)))
    cols["geometry"] = geometry
    return cols


def _parts_text(results: BuildingResults, wall_index: np.ndarray) -> np.ndarray:
    """E.g. "hogging 0.0-3.1 m; sagging 3.1-9.0 m" for each wall."""
    p = results.parts
    texts = {w: [] for w in wall_index.tolist()}
    for w, a, b, sag in zip(p.wall.tolist(), p.from_m.tolist(), p.to_m.tolist(), p.sagging.tolist()):
        if w in texts:
            texts[w].append(f"{'sagging' if sag else 'hogging'} {a:.1f}-{b:.1f} m")
    return np.array(["; ".join(texts[w]) for w in wall_index.tolist()], dtype=object)


def wall_columns(buildings: Buildings, results: BuildingResults) -> dict:
    """Columns of the `building_walls` GIS layer: one row per wall assessed at stage 2 (WALL_FIELDS), the values of
    the wall's governing part, and `geometry` (the wall as a LineString from its start to its end)."""
    walls, p = results.walls, results.parts
    w = np.flatnonzero(results.wall_governing_part >= 0)
    k = results.wall_governing_part[w]
    ids = np.array(buildings.ids, dtype=object)
    cols = {
        "building_id": ids[walls.building[w]] if len(w) else np.array([], dtype=object),
        "wall": walls.number[w],
        "part": walls.part[w],
        "length_m": walls.length_m[w],
        "parts": _parts_text(results, w),
        "governing_from_m": p.from_m[k],
        "governing_to_m": p.to_m[k],
        "governing_mode": np.where(p.sagging[k], "sagging", "hogging").astype(object),
        "length_to_height": p.length_to_height[k],
        "greenfield_deflection_ratio": p.greenfield_deflection_ratio[k],
        "greenfield_horizontal_strain_pct": p.greenfield_horizontal_strain_pct[k],
        "deflection_ratio": p.deflection_ratio[k],
        "horizontal_strain_pct": p.horizontal_strain_pct[k],
        "bending_strain_pct": p.bending_strain_pct[k],
        "diagonal_strain_pct": p.diagonal_strain_pct[k],
        "combined_bending_strain_pct": p.combined_bending_strain_pct[k],
        "combined_diagonal_strain_pct": p.combined_diagonal_strain_pct[k],
        "tensile_strain_pct": p.tensile_strain_pct[k],
        "governing_strain": np.where(p.bending_governs[k], "bending", "diagonal").astype(object),
        "category": p.category[k].astype(np.int64),
        "category_label": category_label(p.category[k]),
        "geometry": shapely.linestrings(np.stack([walls.start_xy[w], walls.end_xy[w]], axis=1))
        if len(w) else np.array([], dtype=object),
    }
    return cols


def report_rows(buildings: Buildings, results: BuildingResults) -> list[dict]:
    """Rows of the CSV table for the assessment report: BUILDING_FIELDS per building, plus `x_m`, `y_m` of a point
    inside the footprint; empty text for values that do not exist (NaN, or no category)."""
    cols = building_columns(buildings, results)
    where = shapely.point_on_surface(np.asarray(buildings.polygons, dtype=object))
    cols["x_m"], cols["y_m"] = shapely.get_x(where), shapely.get_y(where)
    names = BUILDING_FIELDS + ("x_m", "y_m")
    rows = []
    for r in range(len(buildings)):
        row = {}
        for name in names:
            value = cols[name][r]
            if value is pd.NA or (isinstance(value, float) and np.isnan(value)):
                value = ""
            elif isinstance(value, (np.bool_, bool)):
                value = bool(value)
            elif isinstance(value, np.integer):
                value = int(value)
            elif isinstance(value, np.floating):
                value = float(value)
            row[name] = value
        rows.append(row)
    return rows


def category_counts(buildings: Buildings, results: BuildingResults) -> dict:
    """For summary.json: buildings per damage category, how many stage 1 screened out, and what was not assessed."""
    cat = results.category
    by = {str(c): int(np.sum(cat == c)) for c in range(6)}  # 0 to 5, as the damage table has; 5 is never assigned
    return {
        "buildings": len(buildings),
        "screened_out_stage_1": int(results.screened_out.sum()),
        "assessed_stage_2": int(np.sum(~results.screened_out & (cat != NOT_ASSESSED))),
        "by_category": by,
        "category_labels": {str(c): label for c, label in enumerate(CATEGORY_LABELS)},
        "not_assessed": int(np.sum(cat == NOT_ASSESSED)),
        "footprints_skipped": len(buildings.skipped),
        "footprints_repaired": len(buildings.repaired),
        "stiffness_correction": STIFFNESS_METHODS[results.options.stiffness_correction],
        "category_5_note": "category 5 (very severe) is not assigned from strain: the published limiting tensile "
                           "strain is more than 0.3 % for both 4 and 5; category 4 here means severe to very severe",
    }
