"""The run's summary (summary.json): the numbers an engineer looks at first, and the checks behind them.

Reproducible: the same project gives the same summary (no timestamps, no timings).
"""
from __future__ import annotations

import numpy as np

from ..inputs.route import rounded_cover_m
from ..version import __version__
from .results import Movements, Result

CAUTION = (
    "Greenfield estimates for planning. They support, and do not replace, the judgement of a qualified engineer "
    "and local codes; where a result approaches a limit, a detailed assessment is needed."
)


def _r(value, digits=3):
    """Round for the summary; NaN becomes null."""
    value = float(value)
    return None if np.isnan(value) else round(value, digits)


def _peak(m: Movements, values: np.ndarray, name: str, unit_digits=3) -> dict | None:
    if len(m) == 0 or np.all(np.isnan(values)):
        return None
    k = int(np.nanargmax(values))
    return {name: _r(values[k], unit_digits), "x_m": _r(m.x_m[k], 2), "y_m": _r(m.y_m[k], 2)}


def summarise(result: Result, outputs: dict[str, str] | None = None) -> dict:
    """A JSON-ready dict of the run."""
    p = result.project
    grid = result.grid
    drives = []
    for d in result.drives:
        k = int(np.argmin(d.cover_m))
        drives.append(
            {
                "name": d.name,
                "start_chainage_m": _r(d.start_chainage_m, 2),
                "end_chainage_m": _r(d.end_chainage_m, 2),
                "face_chainage_m": None if d.face_chainage_m is None else _r(d.face_chainage_m, 2),
                "excavated_to_m": _r(d.excavated_to_m, 2),
                "outer_diameter_m": d.outer_diameter_m,
                "min_cover_m": rounded_cover_m(d.min_cover_m),
                "min_cover_at_vertex_chainage_m": _r(d.chainage_m[k], 2),
                "min_cover_chainage_m": _r(d.min_cover_chainage_m, 2),
                "axis_depth_range_m": [_r(d.axis_depth_m.min(), 2), _r(d.axis_depth_m.max(), 2)],
                "lost_volume_m3": _r(d.lost_volume_m3, 4),
                "tunnel_elements": d.element_count,
            }
        )
    lost = result.lost_volume_m3
    summary = {
        "project": p.name,
        "crs": p.crs,
        "settle_version": __version__,
        "caution": CAUTION,
        "sign_conventions": "settlement positive downward; ux east, uy north; strain tensile positive (microstrain)",
        "drives": drives,
        "grid": {
            "spacing_m": p.output.grid_spacing_m,
            "nodes_reported": len(grid),
            "threshold_mm": p.output.grid_threshold_mm,
            "precision_mm": p.output.precision_mm,
            "contour_levels_mm": list(p.output.contour_levels_mm),
        },
        "max_settlement": _peak(grid, grid.settlement_mm, "settlement_mm"),
        "max_tilt": _peak(grid, grid.tilt, "tilt", 6),
        "max_tensile_strain": _peak(grid, grid.strain_max_ue, "strain_ue", 1),
        "max_compressive_strain": _peak(grid, -grid.strain_min_ue, "strain_ue", 1),
        "volume_check": {
            "lost_volume_m3": _r(lost, 4),
            "surface_trough_volume_m3": _r(result.settlement_volume_m3, 4),
            "difference_pct": _r(100.0 * (result.settlement_volume_m3 - lost) / lost, 4) if lost > 0 else None,
        },
        "warnings": list(result.warnings),
    }
    if result.points is not None:
        pts = result.points
        summary["points"] = {
            "count": len(pts),
            "max_settlement": None
            if np.all(np.isnan(pts.settlement_mm))
            else {
                "id": result.point_ids[int(np.nanargmax(pts.settlement_mm))],
                "settlement_mm": _r(np.nanmax(pts.settlement_mm)),
            },
        }
    if summary["max_compressive_strain"]:  # reported as a signed (negative) strain
        summary["max_compressive_strain"]["strain_ue"] *= -1
    if result.buildings is not None:
        from ..assessments.building_tables import category_counts

        summary["buildings"] = category_counts(p.buildings, result.buildings)
        if result.building_envelope is not None:
            summary["buildings"]["envelope"] = _building_envelope(result.building_envelope, result)
    if result.utilities is not None:
        from ..assessments.utility_tables import status_counts

        summary["utilities"] = {"pipes": len(result.utilities), "by_status": status_counts(result.utilities)}
        if result.utility_envelope is not None:
            summary["utilities"]["envelope"] = _utility_envelope(result.utility_envelope)
    if result.face:
        from ..assessments.face_tables import face_summary

        least = {d.name: rounded_cover_m(d.min_cover_m) for d in result.drives}
        summary["face_support"] = [
            {"drive": st.drive, **{k: (_r(v, 2) if isinstance(v, float) else v) for k, v in face_summary(st).items()},
             "stations": len(st), "open_stations": int((st.status == "open").sum()),
             "min_cover_m": least.get(st.drive)}
            for st in result.face
        ]
    if result.probability is not None:
        summary["probabilistic"] = result.probability["summary"]
    if outputs:
        summary["outputs"] = outputs
    return summary


def _sequence(result: Result) -> list[str]:
    from .envelope import sequence_order

    return [result.project.drives[d].name for d in sequence_order(result.project)]


def _building_envelope(envelope, result: Result) -> dict:
    """Buildings by their worst category over the construction sequence, and how many are worse during the drive
    than at the stage of the run's faces."""
    worst = np.asarray(envelope.worst_category)
    return {"sequence": _sequence(result),
            "by_worst_category": {str(c): int(np.sum(worst == c)) for c in range(6)},
            "not_assessed": int(np.sum(worst < 0)),
            "worse_than_stage": int(np.sum(worst > np.asarray(result.buildings.category))),
            "governed_during_a_drive": int(np.sum(np.asarray(envelope.worst_drive) != "")),
            "note": "worst damage category of each building over every stage of the sequence (each drive driven in "
                    "turn, its face advancing from launch to reception) and its completion"}


def _utility_envelope(envelope) -> dict:
    """Pipes by their worst status over the construction sequence."""
    from ..assessments.utilities import STATUSES

    worst = list(envelope.worst_status)
    return {"by_worst_status": {s: worst.count(s) for s in STATUSES},
            "governed_during_a_drive": int(np.sum(np.asarray(envelope.worst_drive) != ""))}
