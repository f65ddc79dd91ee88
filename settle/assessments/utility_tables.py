"""Utility results as tables: the rows of the `utilities` and `utility_critical_points` layers and of utilities.csv,
and the counts of summary.json."""
from __future__ import annotations

import numpy as np
import shapely

from ..inputs.utility_lines import Utilities
from .utilities import CHECKS, CROSSES, STATUSES, UtilityResults

UTILITY_FIELDS = (
    "id", "material", "outer_diameter_mm", "segment_length_m", "length_m", "min_depth_m", "max_depth_m",
    "max_settlement_mm", "max_ground_slope", "max_bending_strain_ue", "max_axial_strain_ue", "min_axial_strain_ue",
    "max_fibre_strain_ue", "min_fibre_strain_ue", "max_joint_rotation_deg", "max_joint_opening_mm",
    "allowable_bending_strain_ue", "allowable_axial_strain_ue", "allowable_joint_rotation_deg",
    "allowable_joint_opening_mm", "axial_limit_in", "limits_source", "bending_reduction_factor",
    "bending_utilisation", "axial_utilisation", "fibre_utilisation", "joint_rotation_utilisation",
    "joint_opening_utilisation", "utilisation", "governing_check", "governing_chainage_m", "status", "not_checked",
    "max_joint_axial_opening_mm", "max_joint_rotation_opening_mm",
    "worst_status", "worst_status_class", "worst_utilisation", "worst_drive", "worst_face_chainage_m",
)
CRITICAL_POINT_FIELDS = (
    "id", "check", "governs", "utilisation", "chainage_m", "depth_m", "settlement_mm", "curvature_per_m",
    "bending_strain_ue", "axial_strain_ue", "joint_rotation_deg", "joint_opening_mm",
    "joint_axial_opening_mm", "joint_rotation_opening_mm",
)


def utility_rows(utilities: Utilities, results: UtilityResults, geometry: bool = True, envelope=None) -> list[dict]:
    """One dict per pipe with the fields of `UTILITY_FIELDS` (and a shapely "geometry", the plan line, unless
    `geometry` is False: the CSV table). Lengths [m], strains [microstrain], rotations [deg], openings [mm].

    The worst_ fields come from the construction envelope (`settle.procedure.envelope.UtilityEnvelope`): None
    without one; worst_drive and worst_face_chainage_m None where the completion of the sequence governs.

    `max_joint_opening_mm` is the largest joint opening at the extreme fibre (the one checked);
    `max_joint_axial_opening_mm` and `max_joint_rotation_opening_mm` are its axial and rotation parts at that place."""
    u, r = utilities, results
    lengths = u.length_m
    rows = []
    for p in range(len(u)):
        row = {
            "id": u.ids[p], "material": u.materials[p], "outer_diameter_mm": float(u.outer_diameter_mm[p]),
            "segment_length_m": float(u.segment_length_m[p]), "length_m": float(lengths[p]),
            "min_depth_m": float(u.depths_m[p].min()), "max_depth_m": float(u.depths_m[p].max()),
            "max_settlement_mm": r.max_settlement_mm[p], "max_ground_slope": r.max_ground_slope[p],
            "max_bending_strain_ue": r.max_bending_strain_ue[p], "max_axial_strain_ue": r.max_axial_strain_ue[p],
            "min_axial_strain_ue": r.min_axial_strain_ue[p], "max_fibre_strain_ue": r.max_fibre_strain_ue[p],
            "min_fibre_strain_ue": r.min_fibre_strain_ue[p], "max_joint_rotation_deg": r.max_joint_rotation_deg[p],
            "max_joint_opening_mm": r.max_joint_opening_mm[p],
            "allowable_bending_strain_ue": u.allowable_bending_strain_ue[p],
            "allowable_axial_strain_ue": u.allowable_axial_strain_ue[p],
            "allowable_joint_rotation_deg": u.allowable_joint_rotation_deg[p],
            "allowable_joint_opening_mm": u.allowable_joint_opening_mm[p],
            "axial_limit_in": "tension and shortening" if u.checks_compression[p] else "tension",
            "limits_source": u.limits_source[p], "bending_reduction_factor": float(u.bending_reduction_factor[p]),
        }
        for c, _ in CHECKS:
            row[f"{c}_utilisation"] = r.check_utilisation[c][p]
        row.update({"utilisation": r.utilisation[p], "governing_check": r.governing_check[p],
                    "governing_chainage_m": r.governing_chainage_m[p], "status": r.status[p],
                    "not_checked": r.not_checked[p],
                    "max_joint_axial_opening_mm": r.max_joint_axial_opening_mm[p],
                    "max_joint_rotation_opening_mm": r.max_joint_rotation_opening_mm[p]})
        row.update(_worst(envelope, p))
        row = {k: (float(v) if isinstance(v, np.floating) else v) for k, v in row.items()}
        if geometry:
            row["geometry"] = shapely.LineString(u.lines_xy[p])
        rows.append(row)
    return rows


def _worst(envelope, p: int) -> dict:
    """The construction envelope's worst_ fields of pipe p (empty without an envelope; drive and face empty where
    completion governs)."""
    if envelope is None:
        return {"worst_status": None, "worst_status_class": None, "worst_utilisation": np.nan, "worst_drive": None,
                "worst_face_chainage_m": np.nan}
    return {"worst_status": str(envelope.worst_status[p]), "worst_status_class": int(envelope.worst_status_class[p]),
            "worst_utilisation": float(envelope.worst_utilisation[p]), "worst_drive": envelope.worst_drive[p] or None,
            "worst_face_chainage_m": float(envelope.worst_face_chainage_m[p])}


def critical_point_rows(utilities: Utilities, results: UtilityResults) -> list[dict]:
    """Points where each check's demand is greatest on each pipe (layer `utility_critical_points`).

    One row per pipe and check that has a place (joint checks only on jointed pipes), with the fields of
    `CRITICAL_POINT_FIELDS` and a shapely Point "geometry"; `governs` is True on the row of the pipe's governing
    check. A pipe that crosses the tunnel has one row, check "crosses the tunnel", at the middle of the stretch below
    the crown. The demands are those at that place (the joint values for a joint there; `joint_opening_mm` at the
    extreme fibre, the sum of `joint_axial_opening_mm` and `joint_rotation_opening_mm`).
    """
    prof, rows = results.profiles, []

    def row(p, check, k, governs, utilisation):
        return {"id": utilities.ids[p], "check": check, "governs": bool(governs), "utilisation": float(utilisation),
                "chainage_m": float(prof.chainage_m[k]), "depth_m": float(prof.depth_m[k]),
                "settlement_mm": float(prof.settlement_mm[k]), "curvature_per_m": float(prof.curvature_per_m[k]),
                "bending_strain_ue": float(prof.bending_strain_ue[k]),
                "axial_strain_ue": float(prof.axial_strain_ue[k]),
                "joint_rotation_deg": float(prof.joint_rotation_deg[k]),
                "joint_opening_mm": float(prof.joint_opening_mm[k]),
                "joint_axial_opening_mm": float(prof.joint_axial_opening_mm[k]),
                "joint_rotation_opening_mm": float(prof.joint_rotation_opening_mm[k]),
                "geometry": shapely.Point(prof.x_m[k], prof.y_m[k])}

    for p in range(len(utilities)):
        if results.status[p] == CROSSES:
            mid = results.crossing_chainage_m[p].mean()
            cand = np.flatnonzero((prof.pipe == p) & prof.undefined)
            k = cand[np.argmin(np.abs(prof.chainage_m[cand] - mid))]
            rows.append(row(p, CROSSES, k, True, np.nan))
            continue
        for c, words in CHECKS:
            k = results.check_place[c][p]
            if k >= 0:
                rows.append(row(p, words, k, results.governing_check[p] == words, results.check_utilisation[c][p]))
    return rows


def status_counts(results: UtilityResults) -> dict[str, int]:
    """Number of pipes in each status, every status listed (for summary.json)."""
    return {s: int(sum(1 for t in results.status if t == s)) for s in STATUSES}
