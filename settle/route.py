"""Route geometry: the 3-D tunnel axis of each drive, its chainage, depth and cover, and its tunnel elements.

The axis is the polyline through the given vertices (straight in 3-D between vertices). Chainage is measured along
the 3-D axis from the launch shaft (the first vertex), starting at the drive's `start_chainage_m`.

Tunnel elements are straight, level lengths of the excavated tunnel on which `troughs.straight_tunnel_movements`
is evaluated and superposed. They are cut wherever the alignment bends, the volume loss or trough width changes (a
reach), at the face, and wherever the depth below the ground changes by more than `DEPTH_TOLERANCE` of itself; long
straight lengths stay one element. Each element carries the lost volume of its 3-D length spread over its plan
length, so the settlement volume of the superposed troughs equals the volume lost along the excavated length.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .ground import GroundModel
from .model import Drive
from .results import DriveResult
from .troughs import excavated_area

#: An element's axis depth may vary by at most this share of itself (its trough width varies alike).
DEPTH_TOLERANCE = 0.02
#: An element's chord may depart from the axis in plan by at most this share of its trough width.
PLAN_TOLERANCE = 0.002
#: Cover below this multiple of the outer diameter is warned about (a rule of thumb of the trade, common practice).
MIN_COVER_DIAMETERS = 2.0


@dataclass
class Elements:
    """Straight level lengths of excavated tunnel (arrays of one length, n)."""

    drive: np.ndarray  # index of the drive
    start_xy: np.ndarray  # (n, 2) plan position of the element's start [m]
    direction: np.ndarray  # (n, 2) unit vector of excavation in plan [-]
    plan_length_m: np.ndarray
    chainage_from_m: np.ndarray
    chainage_to_m: np.ndarray
    axis_level_m: np.ndarray
    surface_level_m: np.ndarray
    axis_depth_m: np.ndarray  # z0
    trough_width_k: np.ndarray
    trough_width_m: np.ndarray  # i at the surface
    volume_loss: np.ndarray  # fraction
    volume_per_m: np.ndarray  # lost volume per metre of plan length [m^3/m]
    outer_diameter_m: np.ndarray

    def __len__(self) -> int:
        return len(self.plan_length_m)

    @property
    def max_settlement_m(self) -> np.ndarray:
        """Settlement of the full plane-strain trough of each element. [m]"""
        return self.volume_per_m / (np.sqrt(2.0 * np.pi) * self.trough_width_m)

    def reach_radius_m(self, precision_m: float) -> np.ndarray:
        """Distance from the element beyond which its settlement is below `precision_m`. [m]"""
        ratio = np.maximum(self.max_settlement_m / precision_m, np.e)
        return self.trough_width_m * np.sqrt(2.0 * np.log(ratio))

    @staticmethod
    def concatenate(parts: list["Elements"]) -> "Elements":
        return Elements(**{k: np.concatenate([getattr(p, k) for p in parts]) for k in Elements.__dataclass_fields__})


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


def _station_chainages(chain: np.ndarray, breaks: np.ndarray, spacing_m: float) -> np.ndarray:
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
    stations = _station_chainages(chain, np.empty(0), 1.0)
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


def reach_values(drive: Drive, chain_mid: np.ndarray):
    """Volume loss (fraction) and trough width factor override (NaN = from the layers) at chainages."""
    vl = np.full(chain_mid.shape, drive.volume_loss_pct / 100.0)
    k = np.full(chain_mid.shape, np.nan if drive.trough_width_k is None else drive.trough_width_k)
    for reach in drive.reaches:
        inside = (chain_mid >= reach.from_chainage_m) & (chain_mid < reach.to_chainage_m)
        vl[inside] = reach.volume_loss_pct / 100.0
        if reach.trough_width_k is not None:
            k[inside] = reach.trough_width_k
    return vl, k


def tunnel_elements(drive: Drive, geometry: DriveResult, ground: GroundModel, index: int) -> Elements:
    """Cut the excavated length of a drive into straight level elements (see the module docstring)."""
    chain, xyz = geometry.chainage_m, geometry.axis_xyz_m
    face = geometry.excavated_to_m
    reach_breaks = [b for r in drive.reaches for b in (r.from_chainage_m, r.to_chainage_m)]
    hard = np.unique(np.concatenate([chain, reach_breaks, [face]]))
    hard = hard[(hard >= chain[0]) & (hard <= face)]
    if face <= chain[0]:
        return _empty_elements()

    # Stations: every hard break and regular points between, close enough to follow the ground surface.
    spacing = float(np.clip(np.min(geometry.axis_depth_m) / 4.0, 0.5, 2.0))
    st = _station_chainages(np.array([chain[0], face]), hard, spacing)
    p = position_at(xyz, chain, st)
    s_level = ground.surface_level(p[:, 0], p[:, 1])
    z0 = s_level - p[:, 2]
    vl, k_override = reach_values(drive, 0.5 * (st[1:] + st[:-1]))
    k_layers = ground.trough_width_k(s_level, p[:, 2])
    i_min = float(np.min(np.where(np.isnan(k_override), k_layers[:-1], k_override) * z0[:-1]))

    # A station is a forced cut if the volume loss or K changes there, or at the face.
    seg_key = np.column_stack([vl, np.nan_to_num(k_override, nan=-1.0)])
    forced = np.zeros(len(st), dtype=bool)
    forced[1:-1] = np.any(seg_key[1:] != seg_key[:-1], axis=1)
    # So is every vertex where the alignment bends in plan by more than the plan tolerance over its shorter
    # neighbouring segment: the elements are then the user's own chords, whichever end the drive starts from.
    forced[np.isin(st, chain[1:-1][_bends(xyz[:, :2], PLAN_TOLERANCE * i_min)])] = True

    cuts = [0]
    a = 0
    n = len(st)
    while a < n - 1:
        b = _longest_element(p, z0, forced, a, PLAN_TOLERANCE * i_min)
        cuts.append(b)
        a = b
    cuts = np.array(cuts)

    start, end = p[cuts[:-1]], p[cuts[1:]]
    plan_vec = end[:, :2] - start[:, :2]
    plan_length = np.linalg.norm(plan_vec, axis=1)
    length_3d = st[cuts[1:]] - st[cuts[:-1]]
    surface_mid = np.array([s_level[a : b + 1].mean() for a, b in zip(cuts[:-1], cuts[1:])])
    axis_mid = 0.5 * (start[:, 2] + end[:, 2])
    mid_chain = 0.5 * (st[cuts[1:]] + st[cuts[:-1]])
    vl_e, k_e = reach_values(drive, mid_chain)
    k_e = np.where(np.isnan(k_e), ground.trough_width_k(surface_mid, axis_mid), k_e)
    z0_e = surface_mid - axis_mid
    area = excavated_area(drive.outer_diameter_m)
    keep = plan_length > 1e-9
    m = int(keep.sum())
    elements = Elements(
        drive=np.full(m, index),
        start_xy=start[keep, :2],
        direction=plan_vec[keep] / plan_length[keep, None],
        plan_length_m=plan_length[keep],
        chainage_from_m=st[cuts[:-1]][keep],
        chainage_to_m=st[cuts[1:]][keep],
        axis_level_m=axis_mid[keep],
        surface_level_m=surface_mid[keep],
        axis_depth_m=z0_e[keep],
        trough_width_k=k_e[keep],
        trough_width_m=(k_e * z0_e)[keep],
        volume_loss=vl_e[keep],
        volume_per_m=(vl_e * area * length_3d / np.where(keep, plan_length, 1.0))[keep],
        outer_diameter_m=np.full(m, drive.outer_diameter_m),
    )
    geometry.lost_volume_m3 = float(np.sum(vl_e * area * length_3d))
    geometry.element_count = m
    return elements


def _bends(xy: np.ndarray, tolerance_m: float) -> np.ndarray:
    """Which inner vertices turn the plan alignment enough to shift it by more than `tolerance_m`."""
    seg = np.diff(xy, axis=0)
    length = np.hypot(seg[:, 0], seg[:, 1])
    cross = seg[:-1, 0] * seg[1:, 1] - seg[:-1, 1] * seg[1:, 0]
    dot = (seg[:-1] * seg[1:]).sum(axis=1)
    angle = np.abs(np.arctan2(cross, dot))
    return angle * np.minimum(length[:-1], length[1:]) > tolerance_m


def _longest_element(p, z0, forced, a, plan_tol):
    """Largest b > a such that stations a..b make one element (galloping then bisection)."""
    n = len(p)

    def ok(b):
        if forced[a + 1 : b].any():
            return False
        zs = z0[a : b + 1]
        if zs.max() - zs.min() > DEPTH_TOLERANCE * zs.mean():
            return False
        chord = p[b, :2] - p[a, :2]
        length = np.hypot(*chord)
        if length == 0.0:
            return b == a + 1
        rel = p[a + 1 : b, :2] - p[a, :2]
        off = np.abs(rel[:, 0] * chord[1] - rel[:, 1] * chord[0]) / length
        return off.size == 0 or off.max() <= plan_tol

    good, step = a + 1, 1
    while good + step < n and ok(good + step):
        good += step
        step *= 2
    bad = min(good + step, n)  # first index known to fail (or n)
    while bad - good > 1:
        mid = (good + bad) // 2
        if ok(mid):
            good = mid
        else:
            bad = mid
    return good


def _empty_elements() -> Elements:
    z = np.empty(0)
    return Elements(
        drive=np.empty(0, dtype=int), start_xy=np.empty((0, 2)), direction=np.empty((0, 2)), plan_length_m=z,
        chainage_from_m=z, chainage_to_m=z, axis_level_m=z, surface_level_m=z, axis_depth_m=z, trough_width_k=z,
        trough_width_m=z, volume_loss=z, volume_per_m=z, outer_diameter_m=z,
    )
