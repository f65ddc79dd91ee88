"""Tunnel elements: the excavated length of each drive cut into straight, level lengths.

`troughs.straight_tunnel_movements` is evaluated and superposed on each element. They are cut wherever the alignment
bends, the volume loss or trough width changes (a reach), at the face, and wherever the depth below the ground
changes by more than `DEPTH_TOLERANCE` of itself; long straight lengths stay one element. Each element carries the
lost volume of its 3-D length spread over its plan length, so the settlement volume of the superposed troughs equals
the volume lost along the excavated length.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..inputs.ground import GroundModel
from ..inputs.model import Drive
from ..inputs.route import DriveResult, position_at, stations_along
from .troughs import excavated_area

#: An element's axis depth may vary by at most this share of itself (its trough width varies alike).
DEPTH_TOLERANCE = 0.02
#: An element's chord may depart from the axis in plan by at most this share of its trough width.
PLAN_TOLERANCE = 0.002


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

    def take(self, rows) -> "Elements":
        """The elements at `rows` (indices or a mask), in that order."""
        return Elements(**{k: getattr(self, k)[rows] for k in Elements.__dataclass_fields__})

    @staticmethod
    def concatenate(parts: list["Elements"]) -> "Elements":
        return Elements(**{k: np.concatenate([getattr(p, k) for p in parts]) for k in Elements.__dataclass_fields__})



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
    st = stations_along(np.array([chain[0], face]), hard, spacing)
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
