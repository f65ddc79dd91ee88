"""Buried pipes: the published methods of pipe strain and joint movement, one plain vectorised function each.

Ground curvature along a pipe and its bending strain, axial strain along the pipe axis, extreme-fibre strains, joint
rotation, joint opening at the pipe axis and at the extreme fibre (Attewell, Yeates & Selby 1986; Bracegirdle et al.
1996). Conventions and references:
`settle.assessments.utilities`, the procedure that applies them along every pipe.
"""
from __future__ import annotations

import numpy as np


def ground_curvature(settlement_behind, settlement_here, settlement_ahead, step):
    """Curvature of the settlement profile by the central second difference, sagging positive.

    Parameters
    ----------
    settlement_behind, settlement_here, settlement_ahead : array_like
        Settlement at s - h, s, s + h along a straight line, positive downward. [m]
    step : float  h. [m]

    Returns
    -------
    ndarray  kappa = -(S(s+h) - 2 S(s) + S(s-h)) / h^2; Smax/i^2 at the centre of a Gaussian trough (methods.md 1).
             The error is h^2/12 |S''''|, a relative 3 h^2 / (12 i^2) at the trough centre. [1/m]

    References
    ----------
    methods.md 6.1: kappa = d2Sv/dy2 along a pipe across the tunnel; [AYS86].
    """
    h = float(step)
    return -(np.asarray(settlement_ahead) - 2.0 * np.asarray(settlement_here) + np.asarray(settlement_behind)) / (h * h)


def bending_strain(curvature, outer_diameter):
    """Bending strain at the extreme fibre of a pipe that follows the ground: eps_b = (D/2) kappa.

    Parameters
    ----------
    curvature : array_like       Ground curvature along the pipe at its axis depth, sagging positive. [1/m]
    outer_diameter : array_like  Outer diameter of the pipe, D. [m]

    Returns
    -------
    ndarray  Bending strain, positive when the bottom fibre stretches (sagging); the opposite fibre has the same
             value with the other sign. [-]

    References
    ----------
    [AYS86]; [BMNT96] step (c); methods.md 6.1.
    """
    return 0.5 * np.asarray(outer_diameter, dtype=float) * np.asarray(curvature, dtype=float)


def axial_strain(strain_xx, strain_yy, strain_xy, tangent_x, tangent_y):
    """Ground horizontal strain along the pipe axis, t.E.t: the axial strain of a pipe that follows the ground.

    Parameters
    ----------
    strain_xx, strain_yy, strain_xy : array_like  Horizontal strain tensor at the pipe (tensor components; tensile
                                                  positive). [any strain unit]
    tangent_x, tangent_y : array_like             Unit tangent of the pipe in plan. [-]

    Returns
    -------
    ndarray  eps_a = tx^2 exx + 2 tx ty exy + ty^2 eyy, in the unit of the strains given, tensile positive.

    References
    ----------
    [AYS86]; methods.md 6.1 ("axial strain = ground horizontal strain at pipe level") and 3.
    """
    tx, ty = np.asarray(tangent_x, dtype=float), np.asarray(tangent_y, dtype=float)
    return tx * tx * np.asarray(strain_xx) + 2.0 * tx * ty * np.asarray(strain_xy) + ty * ty * np.asarray(strain_yy)


def extreme_fibre_strains(axial, bending):
    """Strains at the two extreme fibres of a pipe under axial strain and bending.

    Parameters
    ----------
    axial : array_like    Axial strain, tensile positive.
    bending : array_like  Bending strain (either sign). [same unit]

    Returns
    -------
    (ndarray, ndarray)  (axial + |bending|, axial - |bending|): the most tensile and the most compressive fibre.

    References
    ----------
    [BMNT96] step (c); methods.md 6.1.
    """
    a, b = np.asarray(axial, dtype=float), np.abs(np.asarray(bending, dtype=float))
    return a + b, a - b


def joint_rotation(slope_x_behind, slope_y_behind, slope_x_ahead, slope_y_ahead, tangent_x, tangent_y):
    """Rotation of a joint between two rigid pipes that follow the ground: the change of slope across the joint.

    Parameters
    ----------
    slope_x_behind, slope_y_behind : array_like  Gradient of settlement at the middle of the pipe behind the joint. [-]
    slope_x_ahead, slope_y_ahead : array_like    The same at the middle of the pipe ahead. [-]
    tangent_x, tangent_y : array_like            Unit tangent of the line at the joint. [-]

    Returns
    -------
    ndarray  theta = -(grad S_ahead - grad S_behind).t, sagging positive. With the middles one pipe length Lp apart
             and a uniform curvature kappa between them, theta = kappa Lp. [rad]

    References
    ----------
    [AYS86]; [BMNT96] step (b); methods.md 6.1 ("joint rotation ~ kappa Lp").
    """
    dx = np.asarray(slope_x_ahead) - np.asarray(slope_x_behind)
    dy = np.asarray(slope_y_ahead) - np.asarray(slope_y_behind)
    return -(dx * np.asarray(tangent_x) + dy * np.asarray(tangent_y))


def joint_opening(ux_behind, uy_behind, ux_ahead, uy_ahead, tangent_x, tangent_y):
    """Opening (pull-out) of a joint between two rigid pipes that follow the ground.

    Parameters
    ----------
    ux_behind, uy_behind : array_like  Horizontal ground displacement at the middle of the pipe behind the joint.
    ux_ahead, uy_ahead : array_like    The same at the middle of the pipe ahead. [any length unit]
    tangent_x, tangent_y : array_like  Unit tangent of the line at the joint. [-]

    Returns
    -------
    ndarray  delta = (u_ahead - u_behind).t, positive when the joint opens, in the unit of the displacements. With the
             middles Lp apart and a uniform axial ground strain eps between them, delta = eps Lp.

    References
    ----------
    [AYS86]; [BMNT96] step (b); methods.md 6.1 ("pull-out ~ eps_h,tensile Lp").
    """
    dx = np.asarray(ux_ahead) - np.asarray(ux_behind)
    dy = np.asarray(uy_ahead) - np.asarray(uy_behind)
    return dx * np.asarray(tangent_x) + dy * np.asarray(tangent_y)


def joint_extreme_fibre_opening(axial_opening, rotation, outer_diameter):
    """Opening of a joint at the extreme fibre on its opening side: delta_f = delta_a + |theta| OD/2.

    The pipe ends either side of a joint move apart by delta_a along the pipe axis and turn by theta relative to each
    other about a line through the axis, across the plane of bending. Turning moves the fibres on the two sides of
    the joint apart and together by theta OD/2 each (small angles): one side opens whichever way the joint turns,
    the invert for a sagging rotation, the crown for a hogging one. So the opening side opens by the axial opening
    plus |theta| OD/2; the other side opens by delta_a - |theta| OD/2.

    Parameters
    ----------
    axial_opening : array_like   delta_a, the joint opening at the pipe axis (`joint_opening`), positive when the joint
                                 opens, negative when it closes. [any length unit]
    rotation : array_like        theta, the joint rotation (`joint_rotation`), either sign. [rad]
    outer_diameter : array_like  OD, the outer diameter of the pipe. [the unit of axial_opening]

    Returns
    -------
    ndarray  delta_f = delta_a + |theta| OD / 2, positive when the joint opens, in the unit of axial_opening. It is
             never less than delta_a and grows linearly with OD. When the axial part is a closing (delta_a < 0) the
             opening side still opens by |theta| OD/2 + delta_a, which is smaller than |theta| OD/2 and negative (the
             whole joint closes) when the closing exceeds it. With theta = 0 it is delta_a; with delta_a = 0 it is
             |theta| OD / 2.

    References
    ----------
    [AYS86] (from memory): a jointed pipe that follows the ground, its joints checked for rotation and pull-out;
    [BMNT96] step (b); methods.md 6.1 (joint rotation ~ kappa Lp, pull-out ~ eps_h,tensile Lp, the two parts here).
    Their sum at the extreme fibre is the geometry of two rigid pipe ends turned about their axis (small angles).
    """
    return (np.asarray(axial_opening, dtype=float)
            + 0.5 * np.abs(np.asarray(rotation, dtype=float)) * np.asarray(outer_diameter, dtype=float))
