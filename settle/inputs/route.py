"""The route of each drive: its 3-D tunnel axis from the alignment and the ground, chainage, depth and cover, and the
checks an engineer makes of them before anything is computed.

The axis is the polyline through the given vertices (straight in 3-D between vertices). Chainage is measured along
the 3-D axis from the launch shaft (the first vertex), starting at the drive's `start_chainage_m`.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .ground import GroundModel
from .model import Drive
from .published_defaults import MIN_COVER_DIAMETERS

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



def axis_levels(drive: Drive, ground: GroundModel) -> np.ndarray:
    """Level of the tunnel axis at each vertex, from axis levels, invert levels or depths below ground. [m]"""
    v = np.asarray(drive.alignment_v, dtype=float)
    if drive.vertical == "axis":
        return v
    if drive.vertical == "invert":
        return v + drive.inner_diameter_m / 2.0
    surface = ground.surface_level(drive.alignment_xy[:, 0], drive.alignment_xy[:, 1])
    return surface - v


def chainage(axis_xyz: np.ndarray, start_m: float = 0.0) -> np.ndarray:
    """Chainage of each vertex along the 3-D axis. [m]"""
    steps = np.linalg.norm(np.diff(axis_xyz, axis=0), axis=1)
    return start_m + np.concatenate([[0.0], np.cumsum(steps)])


def position_at(axis_xyz: np.ndarray, chain: np.ndarray, at_m) -> np.ndarray:
    """Points on the 3-D axis at the given chainages, (n, 3). [m]"""
    at_m = np.asarray(at_m, dtype=float)
    return np.column_stack([np.interp(at_m, chain, axis_xyz[:, k]) for k in range(3)])


def stations_along(chain: np.ndarray, breaks: np.ndarray, spacing_m: float) -> np.ndarray:
    """Vertices, breaks and regular stations between them, sorted and unique."""
    regular = np.arange(chain[0], chain[-1], spacing_m)
    return np.unique(np.concatenate([chain, breaks, regular]))


def build_drive(drive: Drive, ground: GroundModel, project_file="") -> tuple[DriveResult, list[str]]:
    """Axis, chainage, depth and cover of one drive, with the checks an engineer expects; returns warnings."""
    label = f'{project_file} [[drives]] "{drive.name}"'
    xyz = np.column_stack([drive.alignment_xy, axis_levels(drive, ground)])
    surface = ground.surface_level(xyz[:, 0], xyz[:, 1])
    chain = chainage(xyz, drive.start_chainage_m)
    if np.isnan(surface).any() or np.isnan(xyz[:, 2]).any():
        k = int(np.flatnonzero(np.isnan(surface) | np.isnan(xyz[:, 2]))[0])
        raise InputError(
            f"{label}: the alignment leaves the triangulated ground surface ({ground.ground.surface.source}) "
            f"at chainage {chain[k]:.1f} m (vertex {k + 1}, x={xyz[k, 0]:.1f}, y={xyz[k, 1]:.1f}); "
            "extend surface_points to cover the whole route"
        )

    # Check cover at regular stations too: a triangulated surface may dip between vertices.
    stations = stations_along(chain, np.empty(0), 1.0)
    at = position_at(xyz, chain, stations)
    s_level = ground.surface_level(at[:, 0], at[:, 1])
    cover = s_level - at[:, 2] - drive.outer_diameter_m / 2.0
    if np.nanmin(cover) <= 0.0:
        k = int(np.nanargmin(cover))
        raise InputError(
            f"{label}: the crown is above the ground surface at chainage {stations[k]:.1f} m "
            f"(cover {cover[k]:.2f} m; axis level {at[k, 2]:.2f} m, surface {s_level[k]:.2f} m); check the "
            f"alignment's vertical values ({drive.vertical}) and the ground surface"
        )

    warnings = []
    shallow = cover < MIN_COVER_DIAMETERS * drive.outer_diameter_m
    if shallow.any():
        runs = _runs(stations, shallow)
        where = ", ".join(f"{a:.0f}-{b:.0f} m" for a, b in runs[:6]) + (" ..." if len(runs) > 6 else "")
        warnings.append(
            f'drive "{drive.name}": cover is less than {MIN_COVER_DIAMETERS:g} x the outer diameter '
            f"({MIN_COVER_DIAMETERS * drive.outer_diameter_m:.2f} m; a rule of thumb of the trade) at chainage "
            f"{where}; smallest {np.min(cover):.2f} m"
        )

    if drive.face_chainage_m is not None and not chain[0] <= drive.face_chainage_m <= chain[-1]:
        raise InputError(
            f"{label}: face_chainage_m = {drive.face_chainage_m:g} is outside the drive "
            f"(chainage {chain[0]:.2f} to {chain[-1]:.2f} m)"
        )
    for n, reach in enumerate(drive.reaches, 1):
        if reach.from_chainage_m < chain[0] - 1e-6 or reach.to_chainage_m > chain[-1] + 1e-6:
            raise InputError(
                f"{label} [[drives.reaches]] #{n}: chainage {reach.from_chainage_m:g}-{reach.to_chainage_m:g} m "
                f"is outside the drive (chainage {chain[0]:.2f} to {chain[-1]:.2f} m)"
            )

    face = chain[-1] if drive.face_chainage_m is None else float(drive.face_chainage_m)
    result = DriveResult(
        name=drive.name,
        outer_diameter_m=drive.outer_diameter_m,
        axis_xyz_m=xyz,
        chainage_m=chain,
        surface_level_m=surface,
        axis_depth_m=surface - xyz[:, 2],
        cover_m=surface - xyz[:, 2] - drive.outer_diameter_m / 2.0,
        face_chainage_m=drive.face_chainage_m,
        excavated_to_m=face,
        lost_volume_m3=0.0,
        element_count=0,
        profile_chainage_m=stations,
        profile_ground_m=s_level,
        profile_axis_m=at[:, 2],
    )
    return result, warnings


def _runs(x: np.ndarray, flag: np.ndarray) -> list[tuple[float, float]]:
    """Ranges of x where flag is set."""
    edges = np.diff(np.concatenate([[0], flag.astype(int), [0]]))
    starts, stops = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1
    return [(float(x[a]), float(x[b])) for a, b in zip(starts, stops)]
