"""What a run returns: plain arrays with units in every name.

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

from .model import Project


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


@dataclass
class DriveResult:
    """A drive's geometry as computed, with its checks."""

    name: str
    outer_diameter_m: float
    axis_xyz_m: np.ndarray  # vertices of the tunnel axis (n x 3), launch shaft first
    chainage_m: np.ndarray  # at each vertex, along the 3-D axis, from start_chainage_m
    surface_level_m: np.ndarray  # ground surface above each vertex
    axis_depth_m: np.ndarray  # depth of the axis below the surface
    cover_m: np.ndarray  # surface to crown
    face_chainage_m: float | None  # None = complete
    excavated_to_m: float  # chainage of the face used in the run (end of drive when complete)
    lost_volume_m3: float  # sum over the excavated length of VL x pi D^2/4
    element_count: int
    # The profile along the axis, every metre of chainage and at every vertex (for sections and figures).
    profile_chainage_m: np.ndarray = field(default_factory=lambda: np.empty(0))
    profile_ground_m: np.ndarray = field(default_factory=lambda: np.empty(0))  # ground surface level
    profile_axis_m: np.ndarray = field(default_factory=lambda: np.empty(0))  # axis level

    @property
    def start_chainage_m(self) -> float:
        return float(self.chainage_m[0])

    @property
    def end_chainage_m(self) -> float:
        return float(self.chainage_m[-1])


@dataclass
class Result:
    """Everything a run computed. Arrays, no files."""

    project: Project
    drives: list[DriveResult]
    grid: Movements  # every grid node with settlement >= Output.grid_threshold_mm
    tiles: SettlementTiles
    points: Movements | None
    point_ids: tuple[str, ...]
    settlement_volume_m3: float  # volume of the surface trough, summed over the grid
    warnings: list[str]
    timings_s: dict[str, float] = field(default_factory=dict)
    face: list = field(default_factory=list)  # settle.face_stations.FaceStations per drive, when the check ran
    utilities: object | None = None  # settle.pipelines.UtilityResults, when the project has [utilities]
    buildings: object | None = None  # settle.buildings.BuildingResults, when the project has [buildings]

    @property
    def lost_volume_m3(self) -> float:
        return float(sum(d.lost_volume_m3 for d in self.drives))
