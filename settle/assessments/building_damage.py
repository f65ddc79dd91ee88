"""Building damage: the published methods, one plain vectorised function each.

Deep-beam strains (Burland & Wroth 1974), their combination with horizontal strain (Burland 1995), damage categories
from the limiting tensile strain (Boscardin & Cording 1989; Burland 1995), stage 1 screening (Rankin 1988) and the
relative-stiffness modification factors (Potts & Addenbrooke 1997; Franzius et al. 2006). The procedure that applies
them wall by wall is `settle.assessments.buildings`.

Sign conventions (the project's): settlement positive downward; horizontal strain tensile positive; strains in per
cent in every `_pct` parameter.

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

import numpy as np

from ..inputs.published_defaults import POISSON_RATIO, RANKIN_SETTLEMENT_LIMIT_MM, RANKIN_SLOPE_LIMIT  # noqa: F401

#: Lower bounds of damage categories 1 to 4 as limiting tensile strain (Boscardin & Cording 1989; Burland 1995;
#: methods.md section 5.2 [S]). A strain exactly on a bound takes the higher category. [%]
CATEGORY_LIMITS_PCT = (0.05, 0.075, 0.15, 0.3)
#: Degree of damage for the categories this method assigns (methods.md section 5.2 [S]); see the module docstring
#: for 4 and 5.
CATEGORY_LABELS = ("negligible", "very slight", "slight", "moderate", "severe to very severe")
NOT_ASSESSED = -1
NOT_ASSESSED_LABEL = "not assessed"


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
