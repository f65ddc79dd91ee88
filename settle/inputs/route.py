"""The route of each drive: its 3-D tunnel axis from the alignment and the ground, chainage, depth and cover, and the
checks an engineer makes of them before anything is computed.

The axis is the polyline through the given vertices (straight in 3-D between vertices). Chainage is measured along
the 3-D axis from the launch shaft (the first vertex), starting at the drive's `start_chainage_m`.

Cover is measured from the surface the tunnel passes under down to the crown: the ground surface model, or the
river's bed level in a river reach when the drive is built with its rivers. A drive's minimum cover is one number,
`DriveResult.min_cover_m`: the least cover over the route profile (every metre of chainage, every vertex and both
ends of every river reach), shown everywhere to one rounding, `rounded_cover_m` (0.01 m).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .ground import GroundModel
from .model import Drive
from .published_defaults import MIN_COVER_DIAMETERS

COVER_DECIMALS = 2  # cover is shown to 0.01 m everywhere
PROFILE_SPACING_M = 1.0  # the route profile: every metre of chainage, and every vertex and river end


def rounded_cover_m(value) -> float:
    """A cover as every output shows it: rounded to 0.01 m (NaN stays NaN). [m]"""
    return round(float(value), COVER_DECIMALS)


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
    # The profile along the axis, every metre of chainage, at every vertex and at both ends of every river reach
    # (for the minimum cover, sections and figures).
    profile_chainage_m: np.ndarray = field(default_factory=lambda: np.empty(0))
    profile_ground_m: np.ndarray = field(default_factory=lambda: np.empty(0))  # ground surface level
    profile_axis_m: np.ndarray = field(default_factory=lambda: np.empty(0))  # axis level
    # What the tunnel passes under: the ground, or the river's bed level in a river reach. Empty = the ground.
    profile_surface_m: np.ndarray = field(default_factory=lambda: np.empty(0))

    @property
    def start_chainage_m(self) -> float:
        return float(self.chainage_m[0])

    @property
    def end_chainage_m(self) -> float:
        return float(self.chainage_m[-1])

    @property
    def profile_cover_m(self) -> np.ndarray:
        """Cover along the route profile: surface (river bed in a river reach) to crown. [m]"""
        surface = self.profile_surface_m if len(self.profile_surface_m) else self.profile_ground_m
        return surface - self.profile_axis_m - self.outer_diameter_m / 2.0

    def least_cover_m(self, from_m: float, to_m: float, river: bool = True) -> float:
        """Least cover over the route profile between two chainages, both included (NaN where none lies there);
        river=False measures it from the ground surface model all through, for a reach outside a river that ends
        at its bank. [m]"""
        c = self.profile_chainage_m
        inside = (c >= from_m) & (c <= to_m)
        if not inside.any():
            return float("nan")
        ground = self.profile_ground_m - self.profile_axis_m - self.outer_diameter_m / 2.0
        cover = self.profile_cover_m if river else ground
        return float(np.min(cover[inside]))

    def _least_cover(self) -> tuple[float, float]:
        if len(self.profile_chainage_m):
            cover, chain = self.profile_cover_m, self.profile_chainage_m
        else:  # a drive made without its profile: the vertices
            cover, chain = np.asarray(self.cover_m, dtype=float), self.chainage_m
        k = int(np.nanargmin(cover))
        return float(cover[k]), float(chain[k])

    @property
    def min_cover_m(self) -> float:
        """The drive's minimum cover: the least over the route profile (every metre, every vertex, the river ends),
        from the ground surface or, in a river reach, the river bed, to the crown. Not rounded: show it with
        `rounded_cover_m`. [m]"""
        return self._least_cover()[0]

    @property
    def min_cover_chainage_m(self) -> float:
        """Chainage of `min_cover_m` (the first, where several places share it). [m]"""
        return self._least_cover()[1]



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


def _rivers_of(name: str, rivers) -> list:
    return [r for r in rivers if r.drive == name]


def _surface_under(mine, stations: np.ndarray, ground_level: np.ndarray) -> np.ndarray:
    """The surface the tunnel passes under at the stations: the river's bed level in a river reach (both ends
    included, as the face check takes it), the ground elsewhere. [m]"""
    surface = np.array(ground_level, dtype=float)
    for r in mine:
        surface[(stations >= r.from_chainage_m - 1e-9) & (stations <= r.to_chainage_m + 1e-9)] = r.bed_level_m
    return surface


def build_drive(drive: Drive, ground: GroundModel, project_file="", rivers=()) -> tuple[DriveResult, list[str]]:
    """Axis, chainage, depth and cover of one drive, with the checks an engineer expects; returns warnings.

    `rivers` (the project's [[rivers]], `face_settings.River`; those of other drives are ignored) make the river
    bed the surface of the cover within their reaches, as in the face check; without them the cover is measured
    from the ground surface model everywhere. (The face check refuses a bed above the ground or below the crown.)"""
    label = f'{project_file} [[drives]] "{drive.name}"'
    xyz = np.column_stack([drive.alignment_xy, axis_levels(drive, ground)])
    surface = ground.surface_level(xyz[:, 0], xyz[:, 1])
    chain = chainage(xyz, drive.start_chainage_m)
    if np.isnan(surface).any() or np.isnan(xyz[:, 2]).any():
        k = int(np.flatnonzero(np.isnan(surface) | np.isnan(xyz[:, 2]))[0])
        raise InputError(
            f"{label}: the alignment leaves {_surface_words(ground)} at chainage {chain[k]:.1f} m (vertex {k + 1}, "
            f"x={xyz[k, 0]:.1f}, y={xyz[k, 1]:.1f}); {_surface_hint(ground)}"
        )

    # Check cover at regular stations too: a triangulated surface may dip between vertices.
    mine = _rivers_of(drive.name, rivers)
    river_ends = np.array([c for r in mine for c in (r.from_chainage_m, r.to_chainage_m)], dtype=float)
    stations = stations_along(chain, river_ends[(river_ends >= chain[0]) & (river_ends <= chain[-1])],
                              PROFILE_SPACING_M)
    at = position_at(xyz, chain, stations)
    s_level = ground.surface_level(at[:, 0], at[:, 1])
    if np.isnan(s_level).any():
        runs = _runs(stations, np.isnan(s_level))
        where = ", ".join(f"{a:.1f}-{b:.1f} m" if b > a else f"{a:.1f} m" for a, b in runs[:6])
        raise InputError(f"{label}: {_surface_words(ground)} has no level under the route at chainage {where}"
                         f"{' ...' if len(runs) > 6 else ''}; {_surface_hint(ground)}")
    cover = s_level - at[:, 2] - drive.outer_diameter_m / 2.0
    if np.nanmin(cover) <= 0.0:
        k = int(np.nanargmin(cover))
        raise InputError(
            f"{label}: the crown is above the ground surface at chainage {stations[k]:.1f} m "
            f"(cover {cover[k]:.2f} m; axis level {at[k, 2]:.2f} m, surface {s_level[k]:.2f} m); check the "
            f"alignment's vertical values ({drive.vertical}) and the ground surface"
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
        profile_surface_m=_surface_under(mine, stations, s_level),
    )
    return result, _cover_warnings(result)


def _surface_words(ground: GroundModel) -> str:
    """The ground surface model in words, with where it came from, for messages."""
    surface = ground.ground.surface
    kind = "the DEM" if surface.raster is not None else "the triangulated ground surface"
    return f"{kind} ({surface.source})"


def _surface_hint(ground: GroundModel) -> str:
    if ground.ground.surface.raster is not None:
        return "the DEM ends or has nodata there; give a DEM that covers the whole route with valid levels"
    return "extend surface_points to cover the whole route"


def _cover_warnings(d: DriveResult) -> list[str]:
    """A warning where the cover along the route profile is under MIN_COVER_DIAMETERS x D, with its minimum."""
    shallow = d.profile_cover_m < MIN_COVER_DIAMETERS * d.outer_diameter_m
    if not shallow.any():
        return []
    runs = _runs(d.profile_chainage_m, shallow)
    where = ", ".join(f"{a:.0f}-{b:.0f} m" for a, b in runs[:6]) + (" ..." if len(runs) > 6 else "")
    return [f'drive "{d.name}": cover is less than {MIN_COVER_DIAMETERS:g} x the outer diameter '
            f"({MIN_COVER_DIAMETERS * d.outer_diameter_m:.2f} m; a rule of thumb of the trade) at chainage "
            f"{where}; smallest {rounded_cover_m(d.min_cover_m):.2f} m"]


def _runs(x: np.ndarray, flag: np.ndarray) -> list[tuple[float, float]]:
    """Ranges of x where flag is set."""
    edges = np.diff(np.concatenate([[0], flag.astype(int), [0]]))
    starts, stops = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1
    return [(float(x[a]), float(x[b])) for a, b in zip(starts, stops)]
