"""Greenfield movements as the engine returns them: plain arrays with units in every name.

Sign conventions, kept throughout the project:
- settlement positive downward;
- horizontal displacement `ux_mm` east (+x), `uy_mm` north (+y) of the project CRS;
- horizontal strain tensile positive, in microstrain (1e-6); the tensor is the symmetric small-strain tensor
  (`strain_xy_ue` is the tensor component, half the engineering shear strain);
- slope (tilt) is the magnitude of the gradient of settlement, dimensionless (1/500 = 0.002).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np



@dataclass
class Movements:
    """Greenfield movements at a set of places (all arrays of one length)."""

    x_m: np.ndarray
    y_m: np.ndarray
    depth_m: np.ndarray  # below the ground surface
    settlement_mm: np.ndarray
    ux_mm: np.ndarray
    uy_mm: np.ndarray
    strain_xx_ue: np.ndarray
    strain_yy_ue: np.ndarray
    strain_xy_ue: np.ndarray
    slope_x: np.ndarray  # d(settlement)/dx [-]
    slope_y: np.ndarray  # d(settlement)/dy [-]

    def __len__(self) -> int:
        return len(self.x_m)

    @property
    def strain_max_ue(self) -> np.ndarray:
        """Major principal horizontal strain, tensile positive. [microstrain]"""
        return principal_strains(self.strain_xx_ue, self.strain_yy_ue, self.strain_xy_ue)[0]

    @property
    def strain_min_ue(self) -> np.ndarray:
        """Minor principal horizontal strain, tensile positive. [microstrain]"""
        return principal_strains(self.strain_xx_ue, self.strain_yy_ue, self.strain_xy_ue)[1]

    @property
    def strain_max_azimuth_deg(self) -> np.ndarray:
        """Direction of the major principal strain, degrees clockwise from grid north, 0 to 180. [deg]"""
        theta = 0.5 * np.arctan2(2.0 * self.strain_xy_ue, self.strain_xx_ue - self.strain_yy_ue)  # from +x, ccw
        return np.mod(90.0 - np.degrees(theta), 180.0)

    @property
    def tilt(self) -> np.ndarray:
        """Ground slope: magnitude of the settlement gradient. [-]"""
        return np.hypot(self.slope_x, self.slope_y)

    @property
    def horizontal_mm(self) -> np.ndarray:
        """Magnitude of the horizontal displacement. [mm]"""
        return np.hypot(self.ux_mm, self.uy_mm)

    def subset(self, keep: np.ndarray) -> "Movements":
        return Movements(**{k: v[keep] for k, v in self.__dict__.items()})


def principal_strains(exx, eyy, exy):
    """Principal values of a 2-D symmetric strain tensor, (major, minor), in the units given."""
    centre = 0.5 * (np.asarray(exx) + np.asarray(eyy))
    radius = np.hypot(0.5 * (np.asarray(exx) - np.asarray(eyy)), np.asarray(exy))
    return centre + radius, centre - radius


@dataclass
class SettlementTiles:
    """Surface settlement on the project grid, stored only where the ground moves.

    Node (row r, column c) of the whole grid lies at x = origin_x_m + c * spacing_m, y = origin_y_m + r * spacing_m.
    Tile (tr, tc) holds rows tr*size .. tr*size+size-1 and columns tc*size .. tc*size+size-1 as a (size, size)
    array of settlement in mm, row index first. A node in no tile, or not reached by any tunnel element, has a
    settlement below the run's precision (`Output.precision_mm`), taken as zero.
    """

    spacing_m: float
    origin_x_m: float
    origin_y_m: float
    size: int
    settlement_mm: dict[tuple[int, int], np.ndarray] = field(default_factory=dict)
