"""Face support and blow-out bounds: one plain vectorised function per published method.

Conventions (stated once): pressures and stresses in kPa, compression positive; unit weights in kN/m^3; lengths and
levels in m (levels are elevations, up positive; depths and covers are measured down from the ground surface, or
from the river bed under a river); angles in degrees; forces on the face in kN. "Effective" means total minus pore
water pressure. Unit weights passed here are the weights that act: the total unit weight of a layer above the water
table, the buoyant weight (total minus water) below it. Every function takes scalars or arrays and broadcasts them.

References
----------
[Jan1895] Janssen, H. A. (1895). Versuche ueber Getreidedruck in Silozellen. Z. Verein Deutscher Ingenieure 39,
          1045-1049 (silo stress).
[Ter43]   Terzaghi, K. (1943). Theoretical soil mechanics. Wiley, New York (silo with cohesion, trapdoor).
[Hor61]   Horn, N. (1961). Horizontaler Erddruck auf senkrechte Abschlussflaechen von Tunnelroehren. Landeskonferenz
          der ungarischen Tiefbauindustrie, 7-16 (wedge-and-silo model).
[AK94]    Anagnostou, G. & Kovari, K. (1994). The face stability of slurry-shield-driven tunnels. Tunnelling and
          Underground Space Technology 9(2), 165-174.
[DAUB16]  DAUB (2016). Recommendations for face support pressure calculations for shield tunnelling in soft ground.
[BB67]    Broms, B. B. & Bennermark, H. (1967). Stability of clay at vertical openings. J. Soil Mech. Found. Div.,
          ASCE 93(SM1), 71-94.
[LH88]    Luger, H. J. & Hergarden, H. J. A. M. (1988). Directional drilling in soft soil: influence of mud pressures.
          Proc. Int. Symp. No-Dig '88, Washington DC.
[Rank1857] Rankine, W. J. M. (1857). On the stability of loose earth. Phil. Trans. R. Soc. London 147, 9-27.
[Jaky44]  Jaky, J. (1944). The coefficient of earth pressure at rest. J. Soc. Hungarian Architects and Engineers
          78(22), 355-358 (K0 = 1 - sin phi').
[Davis80] Davis, E. H., Gunn, M. J., Mair, R. J. & Seneviratne, H. N. (1980). The stability of shallow tunnels and
          underground openings in cohesive material. Geotechnique 30(4), 397-416.
[KM81]    Kimura, T. & Mair, R. J. (1981). Centrifugal testing of model tunnels in soft clay. Proc. 10th ICSMFE,
          Stockholm, 1, 319-322.
[Mair79]  Mair, R. J. (1979). Centrifugal modelling of tunnel construction in soft clay. PhD thesis, Cambridge.
[OR88]    O'Reilly, M. P. (1988). Evaluating and predicting ground settlements caused by tunnelling in London Clay.
          Tunnelling '88, IMM, London, 231-241.
[Mac99]   Macklin, S. R. (1999). The prediction of volume loss due to tunnelling in overconsolidated clay based on
          heading geometry and stability number. Ground Engineering 32(4), 30-33.

Bibliographic details beyond those given in ../shared/methods.md section 7 (journals, pages) are from memory.
Equation forms as collected in ../shared/methods.md section 7 (7.1 minimum support, 7.2 blow-out, 7.3 fracture).
methods.md marks the wedge-silo, Broms & Bennermark, blow-out and Delft formulas as written "from memory": they are
marked so below, and their tests check them against values computed from those formulas, not against the papers.
"""
from __future__ import annotations

import numpy as np

from ..inputs.published_defaults import (  # noqa: F401  (the method's own constants, named here too)
    ANAGNOSTOU_KOVARI_SILO_RATIO, ANAGNOSTOU_KOVARI_WEDGE_RATIO, BROMS_BENNERMARK_CRITICAL_N, GAMMA_W)

#: Macklin (1999) fit for overconsolidated clay, VL = 0.23 exp(4.4 LF) [%], valid for LF >= 0.2 (from memory;
#: methods.md section 1).
MACKLIN_COEFFICIENT_PCT = 0.23
MACKLIN_EXPONENT = 4.4
MACKLIN_LOWEST_LOAD_FACTOR = 0.2

_ANGLE_GRID_DEG = np.linspace(1.0, 89.0, 89)  # first search of the wedge angle, every degree
_REFINE_ROUNDS = 4  # each round narrows the bracket tenfold: 1 deg -> 1e-4 deg


def _arr(x):
    return np.asarray(x, dtype=float)


def _layers(x):
    """Values per layer with the layers on the last axis; a scalar is one layer."""
    a = _arr(x)
    return a[None] if a.ndim == 0 else a


def vertical_stress(level, surface_level, water_level, layer_tops, unit_weights, gamma_w=GAMMA_W):
    """Total, pore and effective vertical stress at a level in layered ground, with free water above the surface.

    Parameters
    ----------
    level : array_like          Level where the stress is wanted, at or below the surface. [m]
    surface_level : array_like  Ground surface, or river bed under a river. [m]
    water_level : array_like    Phreatic level (groundwater level, or the river's water level). Where it stands
                                above the surface, the water above is free water: it adds gamma_w h_w to the total
                                stress as well as to the pore pressure. [m]
    layer_tops : array_like     Top level of each layer, (L,), strictly decreasing; each layer runs down to the next
                                top, the first extends up to the surface wherever the surface stands above it, the
                                last has no base. [m]
    unit_weights : array_like   Total unit weight of each layer, (L,), taken alike above and below the water table.
                                [kN/m^3]
    gamma_w : float             Unit weight of water. [kN/m^3]

    Returns
    -------
    (total, pore, effective) : tuple of ndarray
        sigma_v = gamma_w max(h_w, 0) + sum(gamma_j t_j); u = gamma_w max(water_level - level, 0) (hydrostatic, no
        suction above the water table); sigma'_v = sigma_v - u. NaN where the level is above the surface. [kPa]

    References
    ----------
    Geostatic stress, sigma_v = sum(gamma_j t_j) + gamma_w h_w: methods.md section 7.2 (and Terzaghi's effective
    stress, sigma' = sigma - u).
    """
    level, surface, water = np.broadcast_arrays(_arr(level), _arr(surface_level), _arr(water_level))
    tops = _arr(layer_tops)
    tops_open = np.concatenate([[np.inf], tops[1:]])
    bottoms = np.append(tops[1:], -np.inf)
    t = np.clip(np.minimum(surface[..., None], tops_open) - np.maximum(level[..., None], bottoms), 0.0, None)
    free = gamma_w * np.clip(water - surface, 0.0, None)
    total = free + t @ _arr(unit_weights)
    pore = gamma_w * np.clip(water - level, 0.0, None)
    above = level > surface
    total = np.where(above, np.nan, total)
    return total, np.where(above, np.nan, pore), total - pore


def rankine_active_coefficient(friction_angle_deg):
    """Rankine active earth pressure coefficient K_a = tan^2(45 - phi'/2).

    Parameters
    ----------
    friction_angle_deg : array_like  Effective friction angle phi'. [deg]

    Returns
    -------
    ndarray  K_a. [-]

    References
    ----------
    [Rank1857]; methods.md section 7.1 b.
    """
    return np.tan(np.radians(45.0 - 0.5 * _arr(friction_angle_deg))) ** 2


def rankine_active_pressure(effective_vertical, friction_angle_deg, cohesion):
    """Rankine active effective horizontal pressure, K_a sigma'_v - 2 c' sqrt(K_a).

    Parameters
    ----------
    effective_vertical : array_like  Effective vertical stress sigma'_v. [kPa]
    friction_angle_deg : array_like  phi'. [deg]
    cohesion : array_like            c'. [kPa]

    Returns
    -------
    ndarray  Active effective pressure; negative where cohesion alone holds the ground (no clipping). Add the pore
             pressure for the total support. [kPa]

    References
    ----------
    [Rank1857]; methods.md section 7.1 b, the lower estimate s = K_a sigma'_v - 2 c' sqrt(K_a) + u.
    """
    ka = rankine_active_coefficient(friction_angle_deg)
    return ka * _arr(effective_vertical) - 2.0 * _arr(cohesion) * np.sqrt(ka)


def terzaghi_silo_stress(thickness, unit_weight, friction_angle_deg, cohesion, lateral_ratio, radius, surcharge=0.0):
    """Effective vertical stress at the base of a homogeneous silo (Janssen 1895; Terzaghi 1943).

    Parameters
    ----------
    thickness : array_like           Height of the silo, C. [m]
    unit_weight : array_like         Effective unit weight gamma' (total above the water table, buoyant below).
                                     [kN/m^3]
    friction_angle_deg : array_like  phi'. [deg]
    cohesion : array_like            c'. [kPa]
    lateral_ratio : array_like       Ratio of horizontal to vertical effective stress on the silo walls, K_s. [-]
    radius : array_like              Hydraulic radius of the silo plan, R = area / perimeter, > 0. [m]
    surcharge : array_like           Effective vertical stress on top of the silo, q. [kPa]

    Returns
    -------
    ndarray  sigma'_v = [(gamma' R - c')/(K_s tan phi')] [1 - exp(-K_s tan phi' C/R)] + q exp(-K_s tan phi' C/R),
             written with expm1 so that it tends to (gamma' - c'/R) C + q as K_s tan phi' -> 0. May be negative
             where cohesion exceeds gamma' R (the caller decides what that means). [kPa]

    References
    ----------
    [Jan1895], [Ter43]; the form of methods.md section 7.1 c (from memory).
    """
    a = _arr(lateral_ratio) * np.tan(np.radians(_arr(friction_angle_deg))) * _arr(thickness) / _arr(radius)
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(a > 1e-12, -np.expm1(-a) / np.where(a > 1e-12, a, 1.0), 1.0 - 0.5 * a)
    gamma_r_c = _arr(unit_weight) * _arr(radius) - _arr(cohesion)
    return gamma_r_c / _arr(radius) * _arr(thickness) * share + _arr(surcharge) * np.exp(-a)


def silo_stress_layered(thickness, unit_weight, friction_angle_deg, cohesion, lateral_ratio, radius, surcharge=0.0):
    """Effective vertical stress at the base of a silo through layers, each with its own parameters.

    The silo equation of `terzaghi_silo_stress` is applied layer by layer from the top down, the stress at the base
    of one layer being the surcharge on the next; a stress that comes out negative (cohesion carrying more than the
    weight) is taken as zero at that layer's base: a silo of soil cannot hang from its walls in tension (the tool's
    choice).

    Parameters
    ----------
    thickness, unit_weight, friction_angle_deg, cohesion : array_like
        Per layer, the last axis running over the layers from the top down, (..., m); units as in
        `terzaghi_silo_stress`. Layers of zero thickness are allowed. [m, kN/m^3, deg, kPa]
    lateral_ratio : float or array_like   K_s, broadcast like one layer's values. [-]
    radius : array_like                   R, broadcast against one layer's values (shape (...)). [m]
    surcharge : array_like                Effective stress on top of the silo. [kPa]

    Returns
    -------
    ndarray  sigma'_v at the base of the last layer, >= 0, shape of the broadcast (...). [kPa]

    References
    ----------
    [Jan1895], [Ter43]; methods.md section 7.1 c. The layer-by-layer integration is exact for the silo equation
    with piecewise constant parameters.
    """
    t, g, f, c = np.broadcast_arrays(*(_layers(v) for v in (thickness, unit_weight, friction_angle_deg, cohesion)))
    stress = np.clip(_arr(surcharge), 0.0, None)
    for j in range(t.shape[-1]):
        stress = np.clip(terzaghi_silo_stress(t[..., j], g[..., j], f[..., j], c[..., j], lateral_ratio, radius,
                                              stress), 0.0, None)
    return stress


def wedge_face_force(angle_deg, width, height, unit_weight, friction_angle_deg, cohesion, silo_stress,
                     lateral_ratio):
    """Horizontal effective force the support must give to hold a sliding wedge in front of the face (Horn 1961).

    The wedge has a rectangular face `width` B by `height` H; its slip plane rises from the invert at `angle_deg`
    omega to the horizontal, so it reaches L = H / tan(omega) into the ground at crown level.

    Parameters
    ----------
    angle_deg : array_like           omega, 0 < omega < 90. [deg]
    width : array_like               B. [m]
    height : array_like              H. [m]
    unit_weight : array_like         Effective unit weight in the wedge, gamma'. [kN/m^3]
    friction_angle_deg : array_like  phi' on the slip plane and the sides. [deg]
    cohesion : array_like            c' on the slip plane and the sides. [kPa]
    silo_stress : array_like         Effective vertical stress of the silo on the wedge's top, sigma'_v,top. [kPa]
    lateral_ratio : array_like       K_w, horizontal to vertical effective stress on the triangular sides; 0 drops
                                     the frictional part of the side shear. [-]

    Returns
    -------
    ndarray  S(omega) = [(G + V)(sin w - cos w tan phi') - c' B H / sin w - 2 T] / (cos w + sin w tan phi'), with
             G = gamma' B H L / 2, V = sigma'_v,top B L and, on each side, T = c' L H / 2
             + K_w tan phi' L (sigma'_v,top H / 2 + gamma' H^2 / 6). Negative where the wedge stands unsupported.
             [kN]

    References
    ----------
    [Hor61], [AK94]; the form of methods.md section 7.1 c (from memory).
    """
    w = np.radians(_arr(angle_deg))
    b, h, g, c, top = (_arr(v) for v in (width, height, unit_weight, cohesion, silo_stress))
    tan_phi = np.tan(np.radians(_arr(friction_angle_deg)))
    length = h / np.tan(w)
    weight = g * b * h * length / 2.0
    load = top * b * length
    side = c * length * h / 2.0 + _arr(lateral_ratio) * tan_phi * length * (top * h / 2.0 + g * h * h / 6.0)
    drive = (weight + load) * (np.sin(w) - np.cos(w) * tan_phi) - c * b * h / np.sin(w) - 2.0 * side
    return drive / (np.cos(w) + np.sin(w) * tan_phi)


def anagnostou_kovari_support(width, height, wedge_unit_weight, wedge_friction_angle_deg, wedge_cohesion,
                              cover_thickness, cover_unit_weight, cover_friction_angle_deg, cover_cohesion,
                              silo_ratio=ANAGNOSTOU_KOVARI_SILO_RATIO, wedge_ratio=ANAGNOSTOU_KOVARI_WEDGE_RATIO,
                              surcharge=0.0):
    """Effective face support from the wedge-and-silo model, maximised over the wedge angle (Anagnostou & Kovari
    1994).

    For each wedge angle omega the silo above the wedge (plan B x L, L = H / tan omega, R = B L / (2 (B + L)))
    gives the load on the wedge through the cover layers (`silo_stress_layered`); the wedge then needs the force
    S(omega) (`wedge_face_force`). The required support is the largest S over omega, spread over the face B H.
    The search evaluates omega every degree from 1 to 89, then narrows tenfold around the best angle four times
    (vectorised over all faces at once), to 1e-4 deg.

    Parameters
    ----------
    width, height : array_like          Face B and H, shape (n,) or scalar. [m]
    wedge_unit_weight : array_like      Effective unit weight over the face height. [kN/m^3]
    wedge_friction_angle_deg : array_like   phi' of the wedge. [deg]
    wedge_cohesion : array_like         c' of the wedge. [kPa]
    cover_thickness, cover_unit_weight, cover_friction_angle_deg, cover_cohesion : array_like
        The ground above the crown as layers from the surface down, (n, m) (a homogeneous cover is m = 1);
        effective unit weight per layer. [m, kN/m^3, deg, kPa]
    silo_ratio : float   K_s in the silo. [-]
    wedge_ratio : float  K_w on the wedge's sides (0 = no frictional side shear). [-]
    surcharge : array_like  Effective surcharge on the surface. [kPa]

    Returns
    -------
    (support, angle_deg, silo_stress) : tuple of ndarray, shape (n,)
        support: max S / (B H), the effective support pressure needed, averaged over the face; negative where the
        face stands unsupported [kPa]. angle_deg: the critical wedge angle [deg]. silo_stress: sigma'_v on the
        wedge at that angle [kPa].

    References
    ----------
    [Hor61], [AK94]; [DAUB16] for the procedure; methods.md section 7.1 c (formulas from memory there).
    """
    b, h, g, f, c = np.broadcast_arrays(*(np.atleast_1d(_arr(v)) for v in (
        width, height, wedge_unit_weight, wedge_friction_angle_deg, wedge_cohesion)))
    n = b.shape[0]
    layers = [np.broadcast_to(np.atleast_2d(_arr(v)), (n, np.atleast_2d(_arr(cover_thickness)).shape[-1]))
              for v in (cover_thickness, cover_unit_weight, cover_friction_angle_deg, cover_cohesion)]
    q = np.broadcast_to(np.atleast_1d(_arr(surcharge)), (n,))

    def force(angles):  # angles (n, k) -> S (n, k), sigma_top (n, k)
        length = h[:, None] / np.tan(np.radians(angles))
        radius = b[:, None] * length / (2.0 * (b[:, None] + length))
        top = silo_stress_layered(*(v[:, None, :] for v in layers), silo_ratio, radius, q[:, None])
        s = wedge_face_force(angles, b[:, None], h[:, None], g[:, None], f[:, None], c[:, None], top, wedge_ratio)
        return s, top

    angles = np.broadcast_to(_ANGLE_GRID_DEG, (n, _ANGLE_GRID_DEG.size))
    step = _ANGLE_GRID_DEG[1] - _ANGLE_GRID_DEG[0]
    s, top = force(angles)
    best = angles[np.arange(n), np.argmax(s, axis=1)]
    for _ in range(_REFINE_ROUNDS):
        angles = np.clip(best[:, None] + np.linspace(-step, step, 21)[None, :], 1e-3, 90.0 - 1e-3)
        s, top = force(angles)
        k = np.argmax(s, axis=1)
        best = angles[np.arange(n), k]
        step /= 10.0
    rows = np.arange(n)
    return s[rows, k] / (b * h), best, top[rows, k]


def broms_bennermark_stability_ratio(overburden, undrained_strength, support_pressure=0.0, surcharge=0.0):
    """Stability ratio of a face in undrained clay, N = (sigma_s + gamma z0 - sigma_T) / c_u (Broms & Bennermark
    1967).

    Parameters
    ----------
    overburden : array_like          Total vertical stress at the axis from the ground (and any free water), gamma z0.
                                     [kPa]
    undrained_strength : array_like  c_u, > 0. [kPa]
    support_pressure : array_like    Face support sigma_T at the axis. [kPa]
    surcharge : array_like           Surface surcharge sigma_s. [kPa]

    Returns
    -------
    ndarray  N. The face is taken as stable for N <= `BROMS_BENNERMARK_CRITICAL_N` (about 6); its movements stay
             small for N below about 2 to 4 (Mair 1979; O'Reilly 1988; from memory). [-]

    References
    ----------
    [BB67]; methods.md section 7.1 a (formula and critical value from memory).
    """
    return (_arr(surcharge) + _arr(overburden) - _arr(support_pressure)) / _arr(undrained_strength)


def broms_bennermark_support(overburden, undrained_strength, critical_n=BROMS_BENNERMARK_CRITICAL_N, surcharge=0.0):
    """Total face support at the axis that brings the stability ratio down to a chosen value (Broms & Bennermark
    1967): the critical value by default, or a working value such as `BROMS_BENNERMARK_ALLOWABLE_N`.

    Parameters
    ----------
    overburden, undrained_strength, surcharge : array_like  As in `broms_bennermark_stability_ratio`. [kPa]
    critical_n : float                                      The N to hold. [-]

    Returns
    -------
    ndarray  sigma_T = sigma_s + gamma z0 - N c_u; negative where the clay face stands without support. [kPa]

    References
    ----------
    [BB67]; methods.md section 7.1 a (from memory); [Mair79], [OR88] for the working range of N (from memory).
    """
    return _arr(surcharge) + _arr(overburden) - critical_n * _arr(undrained_strength)


def jaky_k0(friction_angle_deg):
    """Coefficient of earth pressure at rest of a normally consolidated soil, K0 = 1 - sin phi' (Jaky 1944).

    Parameters
    ----------
    friction_angle_deg : array_like  Effective friction angle phi'. [deg]

    Returns
    -------
    ndarray  K0 = 1 - sin phi'. [-]

    References
    ----------
    [Jaky44] (from memory); methods.md section 7.2 uses it for the side shear of the lifted block.
    """
    return 1.0 - np.sin(np.radians(_arr(friction_angle_deg)))


def cavity_initial_effective_stress(effective_vertical, k0):
    """Initial effective stress around a bore for the cylindrical cavity-expansion limit: the mean of the two
    principal stresses in the plane normal to the bore, sigma'_0 = sigma'_v (1 + K0) / 2.

    The cavity-expansion solution of methods.md section 7.3 assumes the same initial stress all round the bore; in
    the ground the vertical stress is sigma'_v and the horizontal stress K0 sigma'_v. Their mean is the isotropic
    stress that stands for both (the tool's choice; K0 = 1 gives back sigma'_v, the value of the check values of
    methods.md section 7.3).

    Parameters
    ----------
    effective_vertical : array_like  Effective vertical stress sigma'_v at the place. [kPa]
    k0 : array_like                  Earth pressure coefficient at rest K0 = sigma'_h / sigma'_v. [-]

    Returns
    -------
    ndarray  sigma'_0 = sigma'_v (1 + K0) / 2. [kPa]

    References
    ----------
    [LH88] for the cavity-expansion limit that takes sigma'_0; [Jaky44] for K0 (from memory).
    """
    return _arr(effective_vertical) * (1.0 + _arr(k0)) / 2.0


def davis_heading_stability_ratio(cover, diameter):
    """Stability ratio at collapse of a tunnel heading supported up to the face, N_TC = 4 ln(2 C/D + 1): the lower
    bound for a spherical cavity in undrained ground (Davis et al. 1980).

    Parameters
    ----------
    cover : array_like     Cover from the surface (or river bed) to the crown, C, >= 0. [m]
    diameter : array_like  Outer diameter D, > 0. [m]

    Returns
    -------
    ndarray  N_TC. 0 at zero cover; 4 ln 3 = 4.39 at C/D = 1; 4 ln 5 = 6.44 at C/D = 2. [-]

    Notes
    -----
    A closed face held up to the face is the heading with no unsupported length (P = 0). The centrifuge collapses of
    Kimura & Mair (1981) for P/D = 0 lie close to or above this lower bound (from memory), so the load factor
    N / N_TC it gives is on the high side.

    References
    ----------
    [Davis80], the thick-sphere lower bound, weightless ground (from memory); [KM81] for the centrifuge values;
    methods.md section 1 names Kimura & Mair (1981) as the source of N_TC for Macklin's load factor.
    """
    return 4.0 * np.log(2.0 * _arr(cover) / _arr(diameter) + 1.0)


def macklin_volume_loss_pct(load_factor):
    """Volume loss of a tunnel in overconsolidated clay from its load factor, VL = 0.23 exp(4.4 LF) % (Macklin
    1999).

    Parameters
    ----------
    load_factor : array_like  LF = N / N_TC, the stability ratio over its value at collapse. The fit holds for
                              LF >= 0.2 (`MACKLIN_LOWEST_LOAD_FACTOR`); the formula is returned as it is, the
                              caller decides what to do outside that range. [-]

    Returns
    -------
    ndarray  VL. [%] (methods.md section 1, computed there: LF 0.2 -> 0.55 %, 0.3 -> 0.86 %, 0.5 -> 2.08 %,
             0.7 -> 5.0 %.)

    References
    ----------
    [Mac99]; methods.md section 1 (the fit from memory; the definition LF = N / N_TC confirmed there).
    """
    return MACKLIN_COEFFICIENT_PCT * np.exp(MACKLIN_EXPONENT * _arr(load_factor))


def uplift_resistance_with_shear(total_stress_crown, width, thickness, unit_weight, friction_angle_deg, cohesion,
                                 lateral_ratio=None):
    """Crown pressure that lifts the block of ground above the tunnel against its weight and the shear on its two
    vertical sides (plane strain).

    Parameters
    ----------
    total_stress_crown : array_like  Total vertical stress at the crown (soil and free water), (n,). [kPa]
    width : array_like               Width of the lifted block, the outer diameter D. [m]
    thickness, unit_weight, friction_angle_deg, cohesion : array_like
        The cover as layers from the surface (bed) down, (n, m); effective unit weight per layer. [m, kN/m^3, deg,
        kPa]
    lateral_ratio : array_like, optional
        K on the sides, per layer; default K0 = 1 - sin phi' of each layer (Jaky, from memory). [-]

    Returns
    -------
    ndarray  sigma_v,crown + (2/D) sum over the layers of [c'_j t_j + K_j tan phi'_j (sigma'_top,j t_j
             + gamma'_j t_j^2 / 2)], which for one layer is sigma_v,crown + (2/D)[c' C + K gamma' C^2 tan phi' / 2].
             [kPa]

    References
    ----------
    Published in several forms; the form of methods.md section 7.2 (from memory; use with caution at very low
    cover). The layered sum integrates the same side shear through each layer.
    """
    t, g, f, c = np.broadcast_arrays(*(_layers(v) for v in (thickness, unit_weight, friction_angle_deg, cohesion)))
    k = jaky_k0(f) if lateral_ratio is None else np.broadcast_to(_arr(lateral_ratio), t.shape)
    top = np.concatenate([np.zeros(t.shape[:-1] + (1,)), np.cumsum(g * t, axis=-1)[..., :-1]], axis=-1)
    shear = c * t + k * np.tan(np.radians(f)) * (top * t + g * t * t / 2.0)
    return _arr(total_stress_crown) + 2.0 / _arr(width) * shear.sum(axis=-1)


def delft_fracture_pressure(effective_stress, pore_pressure, friction_angle_deg, cohesion, shear_modulus,
                            bore_radius, plastic_radius):
    """Largest mud pressure in a bore before the plastic zone around it reaches the allowed radius: the Delft
    cavity-expansion method (Luger & Hergarden 1988), drained.

    Parameters
    ----------
    effective_stress : array_like    Initial effective stress around the bore, sigma'_0 (methods.md section 7.3
                                     takes sigma'_v; `cavity_initial_effective_stress` gives the mean in-plane
                                     stress from K0). [kPa]
    pore_pressure : array_like       Pore water pressure at the bore, u. [kPa]
    friction_angle_deg : array_like  phi', 0 to 90; where it is 0 the undrained limit is returned, with `cohesion`
                                     as c_u and sigma'_0 + u as the total stress. [deg]
    cohesion : array_like            c'. [kPa]
    shear_modulus : array_like       G, > 0. [kPa]
    bore_radius : array_like         R_o. [m]
    plastic_radius : array_like      R_p,max, the largest acceptable plastic radius. [m]

    Returns
    -------
    ndarray  p_max = u + (p'_f + c' cot phi') [(R_o/R_p,max)^2 + Q]^(-sin phi'/(1 + sin phi')) - c' cot phi',
             with p'_f = sigma'_0 (1 + sin phi') + c' cos phi' and Q = (sigma'_0 sin phi' + c' cos phi') / G. [kPa]

    References
    ----------
    [LH88], as used by Bennett & Staheli (1998) for the US Army Corps of Engineers; the form of methods.md section
    7.3 (from memory).
    """
    s0, u, c, g = (_arr(v) for v in (effective_stress, pore_pressure, cohesion, shear_modulus))
    phi = np.radians(_arr(friction_angle_deg))
    sin, cos = np.sin(phi), np.cos(phi)
    drained = phi > 0.0
    with np.errstate(invalid="ignore", divide="ignore"):
        cot = np.where(drained, cos / np.where(drained, sin, 1.0), 0.0)
        q = (s0 * sin + c * cos) / g
        x = (_arr(bore_radius) / _arr(plastic_radius)) ** 2 + q
        pf = s0 * (1.0 + sin) + c * cos
        p = u + (pf + c * cot) * x ** (-sin / (1.0 + sin)) - c * cot
    undrained = delft_fracture_pressure_undrained(s0 + u, c, g, bore_radius, plastic_radius)
    return np.where(drained, p, undrained)


def delft_fracture_pressure_undrained(total_stress, undrained_strength, shear_modulus, bore_radius, plastic_radius):
    """Delft cavity-expansion fracture pressure in undrained clay (phi = 0; Luger & Hergarden 1988).

    Parameters
    ----------
    total_stress : array_like        Initial total stress around the bore, sigma_0. [kPa]
    undrained_strength : array_like  c_u. [kPa]
    shear_modulus : array_like       G, > 0. [kPa]
    bore_radius : array_like         R_o. [m]
    plastic_radius : array_like      R_p,max. [m]

    Returns
    -------
    ndarray  p_max = sigma_0 + c_u [1 + ln(1 / ((R_o/R_p,max)^2 + c_u/G))]: the phi' -> 0 limit of
             `delft_fracture_pressure` with c' = c_u. [kPa]

    References
    ----------
    [LH88]; methods.md section 7.3 (from memory).
    """
    cu = _arr(undrained_strength)
    x = (_arr(bore_radius) / _arr(plastic_radius)) ** 2 + cu / _arr(shear_modulus)
    return _arr(total_stress) + cu * (1.0 - np.log(x))


def crown_to_axis(pressure_crown, slurry_unit_weight, diameter):
    """Support pressure at the axis from the pressure at the crown, through a slurry column of D/2.

    Parameters
    ----------
    pressure_crown : array_like      [kPa]
    slurry_unit_weight : float       gamma_slurry. [kN/m^3]
    diameter : array_like            Outer diameter D. [m]

    Returns
    -------
    ndarray  p_axis = p_crown + gamma_slurry D / 2. [kPa]

    References
    ----------
    Hydrostatics of the slurry in the excavation chamber; methods.md section 7.2.
    """
    return _arr(pressure_crown) + _arr(slurry_unit_weight) * _arr(diameter) / 2.0


def axis_to_crown(pressure_axis, slurry_unit_weight, diameter):
    """Support pressure at the crown from the pressure at the axis: p_crown = p_axis - gamma_slurry D / 2. [kPa]

    References
    ----------
    Inverse of `crown_to_axis`; methods.md section 7.2.
    """
    return _arr(pressure_axis) - _arr(slurry_unit_weight) * _arr(diameter) / 2.0
