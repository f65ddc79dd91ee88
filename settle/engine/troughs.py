"""Greenfield ground-movement models: one plain vectorised function per published method.

Conventions (the project's, stated once): y or v = horizontal offset from the tunnel axis [m]; x or u = distance along
the drive [m]; z = depth below the ground surface [m]; z0 = depth of the tunnel axis [m]; settlement positive
downward; horizontal displacement positive in +x / +y; horizontal strain tensile positive. Volume loss is a fraction
here (0.01 = 1 %); the project file gives it in per cent.

References
----------
[Peck69]  Peck, R. B. (1969). Deep excavations and tunnelling in soft ground. Proc. 7th ICSMFE, Mexico City,
          State-of-the-art volume, 225-290.
[ORN82]   O'Reilly, M. P. & New, B. M. (1982). Settlements above tunnels in the United Kingdom - their magnitude and
          prediction. Tunnelling '82, IMM, London, 173-181.
[AW82]    Attewell, P. B. & Woodman, J. P. (1982). Predicting the dynamics of ground settlement and its derivatives
          caused by tunnelling in soil. Ground Engineering 15(8), 13-22.
[AYS86]   Attewell, P. B., Yeates, J. & Selby, A. R. (1986). Soil movements induced by tunnelling and their effects on
          pipelines and structures. Blackie, Glasgow.
[NOR91]   New, B. M. & O'Reilly, M. P. (1991). Tunnelling induced ground movements: predicting their magnitude and
          effects. 4th Int. Conf. on Ground Movements and Structures, Cardiff, Pentech, 671-697.
[MTB93]   Mair, R. J., Taylor, R. N. & Bracegirdle, A. (1993). Subsurface settlement profiles above tunnels in clays.
          Geotechnique 43(2), 315-320.
[MJH96]   Moh, Z. C., Ju, D. H. & Hwang, R. N. (1996). Ground movements around tunnels in soft ground. Proc. Int. Symp.
          on Geotechnical Aspects of Underground Construction in Soft Ground, London, Balkema, 725-730.
Equation forms as collected in ../shared/methods.md sections 1-4 (some coefficients there are marked from memory).
"""
from __future__ import annotations

import numpy as np
from scipy.special import ndtr

SQRT_2PI = np.sqrt(2.0 * np.pi)

#: Exponent m of Moh et al. (1996) for the narrowing of the trough with depth in silty sands (from memory, [MJH96]).
MOH_EXPONENT_SAND = 0.4
#: Mair et al. (1993): i(z) = 0.175 z0 + 0.325 (z0 - z), i.e. i(z)/i(0) = 1 - 0.65 z/z0 for K = 0.5 at the surface.
MAIR_DEPTH_COEFFICIENT = 0.65


def excavated_area(diameter):
    """Excavated cross-section pi D^2 / 4. [m^2]"""
    return np.pi * np.asarray(diameter, dtype=float) ** 2 / 4.0


def trough_width_oreilly_new(axis_depth, k):
    """Trough width parameter i = K z0 (O'Reilly & New 1982).

    Parameters
    ----------
    axis_depth : array_like  Depth of the tunnel axis below the surface, z0. [m]
    k : array_like           Trough width factor K. [-]

    Returns
    -------
    ndarray  Horizontal distance from the axis to the inflection point of the trough, i. [m]

    References
    ----------
    [ORN82] i = K z0; methods.md section 1.
    """
    return np.asarray(k, dtype=float) * np.asarray(axis_depth, dtype=float)


def peck_max_settlement(volume_loss, diameter, trough_width):
    """Largest settlement of a plane-strain Gaussian trough, Smax = VL (pi D^2/4) / (sqrt(2 pi) i) (Peck 1969).

    Parameters
    ----------
    volume_loss : array_like   Lost ground as a fraction of the excavated area. [-]
    diameter : array_like      Excavated (outer) diameter D. [m]
    trough_width : array_like  i. [m]

    Returns
    -------
    ndarray  Smax, positive downward. [m]

    References
    ----------
    [Peck69]; Vs = sqrt(2 pi) i Smax, methods.md section 1.
    """
    return np.asarray(volume_loss, dtype=float) * excavated_area(diameter) / (SQRT_2PI * np.asarray(trough_width))


def peck_settlement(offset, volume_loss, diameter, trough_width):
    """Transverse greenfield settlement of a Gaussian trough (Peck 1969).

    Parameters
    ----------
    offset : array_like        Horizontal distance from the tunnel axis, y. [m]
    volume_loss : float        Lost ground as a fraction of the excavated area (0.01 = 1 %). [-]
    diameter : float           Excavated (outer) diameter. [m]
    trough_width : array_like  Distance from the axis to the inflection point, i. [m]

    Returns
    -------
    ndarray  Settlement S = Smax exp(-y^2 / 2 i^2), positive downward. [m]

    References
    ----------
    [Peck69]; methods.md section 1.
    """
    i = np.asarray(trough_width, dtype=float)
    return peck_max_settlement(volume_loss, diameter, i) * np.exp(-np.asarray(offset) ** 2 / (2.0 * i**2))


def oreilly_new_horizontal(offset, settlement, axis_depth):
    """Transverse horizontal displacement for radial flow toward the axis (O'Reilly & New 1982).

    Parameters
    ----------
    offset : array_like      Signed horizontal offset from the axis, y. [m]
    settlement : array_like  Settlement at that offset. [m]
    axis_depth : array_like  Vertical distance from the point to the tunnel axis (z0 - z). [m]

    Returns
    -------
    ndarray  Sh = -(y / (z0 - z)) S: positive in +y, so it points toward the axis. [m]

    References
    ----------
    [ORN82]; methods.md section 3.
    """
    return -np.asarray(offset) / np.asarray(axis_depth) * np.asarray(settlement)


def oreilly_new_transverse_strain(offset, settlement, axis_depth, trough_width):
    """Transverse horizontal strain d(Sh)/dy of the O'Reilly & New (1982) field over a Gaussian trough.

    Returns
    -------
    ndarray  eps = -(S/(z0 - z)) (1 - y^2/i^2): compressive within |y| < i, zero at |y| = i, greatest tension at
             |y| = sqrt(3) i. Tensile positive. [-]

    References
    ----------
    [ORN82]; methods.md section 3.
    """
    y = np.asarray(offset)
    return -np.asarray(settlement) / np.asarray(axis_depth) * (1.0 - y**2 / np.asarray(trough_width) ** 2)


def attewell_woodman_longitudinal(distance, start, face, trough_width):
    """Fraction of the full transverse trough reached over a tunnel excavated from `start` to `face`.

    Cumulative-normal longitudinal profile of Attewell & Woodman (1982): the settlement above the axis is
    Smax [Phi((x - x_s)/i) - Phi((x - x_f)/i)], which is one half of Smax above the face and above the launch shaft.

    Parameters
    ----------
    distance : array_like      Position along the drive, x. [m]
    start, face : float        Positions of the launch end and of the face, x_s < x_f. [m]
    trough_width : array_like  Longitudinal trough width, taken equal to the transverse i. [m]

    Returns
    -------
    ndarray  Fraction in [0, 1]. [-]

    References
    ----------
    [AW82]; [AYS86]; methods.md section 2.
    """
    i = np.asarray(trough_width, dtype=float)
    x = np.asarray(distance, dtype=float)
    return ndtr((x - start) / i) - ndtr((x - face) / i)


def mair_subsurface_width_ratio(depth, axis_depth):
    """Subsurface trough width in clay relative to the surface width: i(z)/i(0) = 1 - 0.65 z/z0.

    Mair, Taylor & Bracegirdle (1993) give i(z) = 0.175 z0 + 0.325 (z0 - z) for a surface K of 0.5; this ratio
    keeps their shape and scales it to the surface width used for the drive (our generalisation to K != 0.5).

    Parameters
    ----------
    depth : array_like       Depth of the point below the surface, z (0 <= z < z0). [m]
    axis_depth : array_like  Depth of the tunnel axis, z0. [m]

    Returns
    -------
    ndarray  i(z)/i(0). [-]

    References
    ----------
    [MTB93] eq. for K(z); methods.md section 4 (coefficients from memory there).
    """
    return 1.0 - MAIR_DEPTH_COEFFICIENT * np.asarray(depth) / np.asarray(axis_depth)


def moh_subsurface_width_ratio(depth, axis_depth, exponent=MOH_EXPONENT_SAND):
    """Subsurface trough width in sand relative to the surface width: i(z)/i(0) = ((z0 - z)/z0)^m (Moh et al. 1996).

    Parameters
    ----------
    depth : array_like       Depth of the point below the surface, z. [m]
    axis_depth : array_like  Depth of the tunnel axis, z0. [m]
    exponent : float         m; 0.4 for silty sands, 0.8 for silty clays (from memory). [-]

    Returns
    -------
    ndarray  i(z)/i(0). [-]

    References
    ----------
    [MJH96]; methods.md section 4 (from memory there).
    """
    z0 = np.asarray(axis_depth, dtype=float)
    return np.clip((z0 - np.asarray(depth)) / z0, 0.0, None) ** exponent


def subsurface_width_ratio(depth, axis_depth, cohesive_fraction):
    """i(z)/i(0) for mixed ground: the clay and sand relations weighted by the share of cohesive ground.

    `cohesive_fraction` is the thickness share of cohesive layers between the point and the tunnel axis (1 = all
    clay: Mair et al. 1993; 0 = all sand: Moh et al. 1996). The weighting is our choice, documented in the README.
    """
    f = np.asarray(cohesive_fraction, dtype=float)
    return f * mair_subsurface_width_ratio(depth, axis_depth) + (1.0 - f) * moh_subsurface_width_ratio(
        depth, axis_depth
    )


def straight_tunnel_movements(u, v, length, volume_per_m, trough_width, axis_depth, strains=True):
    """Ground movements over a straight, level length of tunnel excavated from u = 0 to u = length.

    The closed form of Attewell & Woodman (1982) / Attewell, Yeates & Selby (1986) for a finite length of tunnel:
    point sinks of strength Vs per metre spread along the axis, each with a Gaussian settlement bowl of width i and a
    horizontal movement toward the sink of S r / (z0 - z) (O'Reilly & New 1982), integrated exactly over the length.

        S   = A g P,          A = Vs / (sqrt(2 pi) i),   g = exp(-v^2/2i^2),   P = Phi(u/i) - Phi((u - L)/i)
        Su  = B g E,          B = Vs / (2 pi zr),        E = exp(-u^2/2i^2) - exp(-(u - L)^2/2i^2)
        Sv  = -(v / zr) S

    with zr the vertical distance from the point to the axis. The derivatives below are exact; the field is
    irrotational, so d(Su)/dv = d(Sv)/du and the strain tensor is symmetric. Its volume is Vs L for any i: the
    superposition of such lengths conserves the lost volume exactly.

    Parameters
    ----------
    u : array_like             Distance along the tunnel from its start, in the direction of excavation. [m]
    v : array_like             Offset to the left of the tunnel axis. [m]
    length : array_like        Length excavated, L. [m]
    volume_per_m : array_like  Volume of the trough per metre of tunnel, Vs = VL pi D^2/4. [m^3/m]
    trough_width : array_like  i at the depth of the point. [m]
    axis_depth : array_like    zr = z0 - z, vertical distance from the point to the axis. [m]
    strains : bool             False leaves the strains out (for callers that need only settlement, displacement
                               and slope).

    Returns
    -------
    dict of ndarray, all at the points:
        settlement [m] (down positive), du, dv [m] (horizontal displacement along u and v),
        slope_u, slope_v [-] (gradient of settlement), strain_uu, strain_vv, strain_uv [-] (tensile positive,
        tensor components; only with `strains`).

    References
    ----------
    [AW82]; [AYS86]; [ORN82]; methods.md section 2 (closed forms checked there against numerical integration of
    point sinks) and section 3.
    """
    u = np.asarray(u, dtype=float)
    v = np.asarray(v, dtype=float)
    i = np.asarray(trough_width, dtype=float)
    zr = np.asarray(axis_depth, dtype=float)
    vs = np.asarray(volume_per_m, dtype=float)
    ub = u - np.asarray(length, dtype=float)

    g = np.exp(-(v * v) / (2.0 * i * i))
    p = ndtr(u / i) - ndtr(ub / i)
    ea = np.exp(-(u * u) / (2.0 * i * i))
    eb = np.exp(-(ub * ub) / (2.0 * i * i))
    a = vs / (SQRT_2PI * i)
    b = vs / (2.0 * np.pi * zr)

    settlement = a * g * p
    du = b * g * (ea - eb)
    out = {
        "settlement": settlement,
        "du": du,
        "dv": -(v / zr) * settlement,
        "slope_u": a * g * (ea - eb) / (SQRT_2PI * i),
        "slope_v": -(v / (i * i)) * settlement,
    }
    if strains:
        out["strain_uu"] = b * g * (ub * eb - u * ea) / (i * i)
        out["strain_vv"] = -(settlement / zr) * (1.0 - v * v / (i * i))
        out["strain_uv"] = -(v / (i * i)) * du
    return out


def straight_tunnel_movements_to_faces(u, v, volume_per_m, trough_width, axis_depth, pair, length):
    """`straight_tunnel_movements` (no strains) of one length of tunnel at several excavated lengths: point `pair[r]`
    with the tunnel excavated from u = 0 to u = length[r].

    The closed form is the difference of the terms of its two ends: the launch end's (at u) is the same for every
    excavated length and is evaluated once per point, the face's (at u - L) once per length. The same equations, in
    another order; results agree with `straight_tunnel_movements` to rounding.

    Parameters
    ----------
    u, v, volume_per_m, trough_width, axis_depth : array_like, one value per point, as `straight_tunnel_movements`.
    pair : (r,) int              The point of each row.
    length : (r,) array_like     Length excavated in each row, L. [m]

    Returns
    -------
    dict of ndarray, per row: settlement, du, dv [m], slope_u, slope_v [-].

    References
    ----------
    [AW82]; [AYS86]; [ORN82]; methods.md sections 2 and 3.
    """
    u = np.asarray(u, dtype=float)
    v = np.asarray(v, dtype=float)
    i = np.asarray(trough_width, dtype=float)
    zr = np.asarray(axis_depth, dtype=float)
    vs = np.asarray(volume_per_m, dtype=float)
    two_i2 = 2.0 * i * i
    g = np.exp(-(v * v) / two_i2)
    ag = vs / (SQRT_2PI * i) * g
    bg = vs / (2.0 * np.pi * zr) * g
    launch_p, launch_e = ndtr(u / i), np.exp(-(u * u) / two_i2)
    ub = u[pair] - np.asarray(length, dtype=float)
    p = launch_p[pair] - ndtr(ub / i[pair])
    e = launch_e[pair] - np.exp(-(ub * ub) / two_i2[pair])
    settlement = ag[pair] * p
    return {
        "settlement": settlement,
        "du": bg[pair] * e,
        "dv": -(v / zr)[pair] * settlement,
        "slope_u": (ag / (SQRT_2PI * i))[pair] * e,
        "slope_v": -(v / (i * i))[pair] * settlement,
    }
