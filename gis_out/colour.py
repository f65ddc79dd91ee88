"""Colour science for the palettes: sRGB, CIELAB, colour differences and colour-vision-deficiency simulation.

References
----------
[M09]  Machado, G. M., Oliveira, M. M. & Fernandes, L. A. F. (2009). A physiologically-based model for simulation of
       color vision deficiency. IEEE Transactions on Visualization and Computer Graphics 15(6), 1291-1298.
[IEC]  IEC 61966-2-1:1999. Multimedia systems and equipment - Colour measurement and management - Part 2-1: Default
       RGB colour space - sRGB.
[CIE]  CIE 15:2004. Colorimetry, 3rd edition (CIE 1976 L*a*b* and the colour difference Delta E*ab).
"""
from __future__ import annotations

import numpy as np

#: sRGB (linear) to CIE XYZ, D65 white, IEC 61966-2-1 (values from memory; their row sums give the D65 white point
#: 0.9505, 1.0000, 1.0890, checked in the tests).
SRGB_TO_XYZ = np.array([[0.4124, 0.3576, 0.1805],
                        [0.2126, 0.7152, 0.0722],
                        [0.0193, 0.1192, 0.9505]])
D65_WHITE_XYZ = SRGB_TO_XYZ.sum(axis=1)

#: Machado et al. (2009) simulation matrices for linear RGB at severity 1.0 (dichromacy), from the paper's table of
#: matrices (values from memory). Checked in the tests: every row sums to 1 (greys stay grey), and the protanopia
#: and deuteranopia matrices are singular (a dichromat's colour space is two-dimensional).
MACHADO_MATRICES = {
    "protanopia": np.array([[0.152286, 1.052583, -0.204868],
                            [0.114503, 0.786281, 0.099216],
                            [-0.003882, -0.048116, 1.051998]]),
    "deuteranopia": np.array([[0.367322, 0.860646, -0.227968],
                              [0.280085, 0.672501, 0.047413],
                              [-0.011820, 0.042940, 0.968881]]),
    "tritanopia": np.array([[1.255528, -0.076749, -0.178779],
                            [-0.078411, 0.930809, 0.147602],
                            [0.004733, 0.691367, 0.303900]]),
}



def hex_to_srgb(colours) -> np.ndarray:
    """"#rrggbb" strings to sRGB components. [0-1], shape (n, 3)"""
    return np.array([[int(c[i:i + 2], 16) for i in (1, 3, 5)] for c in colours], dtype=float).reshape(-1, 3) / 255.0


def srgb_to_hex(rgb) -> list[str]:
    """sRGB components [0-1] (clipped) to "#rrggbb" strings."""
    values = np.round(np.clip(np.asarray(rgb, dtype=float).reshape(-1, 3), 0.0, 1.0) * 255.0).astype(int)
    return ["#%02x%02x%02x" % tuple(v) for v in values]


def srgb_to_linear(rgb):
    """sRGB transfer function removed (IEC 61966-2-1).

    Parameters
    ----------
    rgb : array_like  Gamma-encoded sRGB components. [0-1]

    Returns
    -------
    ndarray  Linear RGB components. [0-1]

    References
    ----------
    IEC 61966-2-1:1999, the sRGB decoding function.
    """
    c = np.asarray(rgb, dtype=float)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def linear_to_srgb(linear):
    """Linear RGB [0-1] to gamma-encoded sRGB [0-1] (IEC 61966-2-1); values outside 0-1 are clipped first."""
    c = np.clip(np.asarray(linear, dtype=float), 0.0, 1.0)
    return np.where(c <= 0.0031308, 12.92 * c, 1.055 * c ** (1.0 / 2.4) - 0.055)


def linear_rgb_to_cielab(linear):
    """CIE 1976 L*a*b* of linear sRGB colours, D65 white.

    Parameters
    ----------
    linear : array_like  Linear RGB components, shape (..., 3). [0-1]

    Returns
    -------
    ndarray  L* [0-100], a*, b* [-], shape (..., 3).

    References
    ----------
    CIE 15:2004, CIE 1976 (L*a*b*) colour space; IEC 61966-2-1:1999 for RGB to XYZ.
    """
    xyz = np.asarray(linear, dtype=float) @ SRGB_TO_XYZ.T / D65_WHITE_XYZ
    d = 6.0 / 29.0
    f = np.where(xyz > d**3, np.cbrt(xyz), xyz / (3.0 * d * d) + 4.0 / 29.0)
    return np.stack([116.0 * f[..., 1] - 16.0, 500.0 * (f[..., 0] - f[..., 1]), 200.0 * (f[..., 1] - f[..., 2])],
                    axis=-1)


def cielab_to_linear_rgb(lab):
    """Linear sRGB [0-1, not clipped] of CIE 1976 L*a*b* colours, D65 white (inverse of `linear_rgb_to_cielab`)."""
    lab = np.asarray(lab, dtype=float)
    fy = (lab[..., 0] + 16.0) / 116.0
    f = np.stack([fy + lab[..., 1] / 500.0, fy, fy - lab[..., 2] / 200.0], axis=-1)
    d = 6.0 / 29.0
    xyz = np.where(f > d, f**3, 3.0 * d * d * (f - 4.0 / 29.0)) * D65_WHITE_XYZ
    return xyz @ np.linalg.inv(SRGB_TO_XYZ).T


def delta_e_cie76(lab_1, lab_2):
    """CIE 1976 colour difference Delta E*ab, the Euclidean distance in L*a*b*.

    Parameters
    ----------
    lab_1, lab_2 : array_like  L*a*b* colours, shape (..., 3).

    Returns
    -------
    ndarray  Delta E*ab. [-]

    References
    ----------
    CIE 15:2004, colour difference formula CIE 1976 (L*a*b*).
    """
    return np.linalg.norm(np.asarray(lab_1, dtype=float) - np.asarray(lab_2, dtype=float), axis=-1)


def machado_cvd_simulation(linear, deficiency: str):
    """How a person with a dichromacy sees colours: Machado et al. (2009), severity 1.0.

    Parameters
    ----------
    linear : array_like  Linear RGB components, shape (..., 3). [0-1]
    deficiency : str     "protanopia", "deuteranopia" or "tritanopia".

    Returns
    -------
    ndarray  The simulated linear RGB, clipped to 0-1. [0-1]

    Notes
    -----
    rgb_sim = M rgb, one 3 x 3 matrix per deficiency and severity; `MACHADO_MATRICES` holds those for full severity.

    References
    ----------
    Machado, Oliveira & Fernandes (2009), IEEE TVCG 15(6), 1291-1298, the matrices for severity 1.0.
    """
    if deficiency not in MACHADO_MATRICES:
        raise ValueError(f"deficiency must be one of {sorted(MACHADO_MATRICES)}; got {deficiency!r}")
    return np.clip(np.asarray(linear, dtype=float) @ MACHADO_MATRICES[deficiency].T, 0.0, 1.0)


def perceived_cielab(colours, deficiency: str | None = None) -> np.ndarray:
    """CIELAB of "#rrggbb" colours as seen with normal vision (None) or a simulated dichromacy. Shape (n, 3)."""
    linear = srgb_to_linear(hex_to_srgb(colours))
    if deficiency is not None:
        linear = machado_cvd_simulation(linear, deficiency)
    return linear_rgb_to_cielab(linear)


def cielab_ramp(anchors, n: int) -> list[str]:
    """`n` colours evenly spaced along a path through the anchor colours in CIELAB (equal Delta E*ab steps).

    Parameters
    ----------
    anchors : sequence of str  "#rrggbb" colours, first to last.
    n : int                    Number of colours; 1 gives the middle of the path.

    Returns
    -------
    list of str  "#rrggbb", first anchor to last anchor (out-of-gamut values clipped).
    """
    lab = perceived_cielab(anchors)
    path = np.concatenate([[0.0], np.cumsum(delta_e_cie76(lab[1:], lab[:-1]))])
    at = np.linspace(0.0, path[-1], n) if n > 1 else np.array([path[-1] / 2.0])
    samples = np.stack([np.interp(at, path, lab[:, k]) for k in range(3)], axis=-1)
    return srgb_to_hex(linear_to_srgb(cielab_to_linear_rgb(samples)))
