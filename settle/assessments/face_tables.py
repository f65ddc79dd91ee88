"""Face check results as tables: the fields of the `face_stations` layer, the operator's rows and the summary of a
drive's window."""
from __future__ import annotations

import numpy as np

from .face_stations import FaceStations


#: Fields of the GIS point layer `face_stations`, in order: the nine of the issue, then what an engineer filters on.
FACE_STATION_FIELDS = ("drive", "chainage_m", "cover_m", "water_pressure_kpa", "support_min_kpa", "blowout_kpa",
                       "support_max_kpa", "window_kpa", "status")
FACE_STATION_EXTRA_FIELDS = ("support_mode", "in_river", "low_cover", "stability_ratio_n", "n_above_critical",
                             "fracture_kpa", "max_limited_by", "min_governed_by", "total_stress_crown_kpa",
                             "effective_stress_crown_kpa", "total_stress_axis_kpa", "effective_stress_axis_kpa",
                             "water_pressure_axis_kpa", "tolerance_kpa", "fracture_axis_kpa",
                             "stability_ratio_at_min_n", "critical_stability_ratio_tc", "load_factor",
                             "implied_volume_loss_pct", "design_volume_loss_pct", "implied_above_design")
OPERATOR_COLUMNS = ("drive", "chainage_m", "status", "support_mode", "tolerance_kpa", "hold_from_crown_kpa",
                    "hold_to_crown_kpa", "hold_from_axis_kpa", "hold_to_axis_kpa")


def face_station_fields(stations: FaceStations) -> dict[str, np.ndarray]:
    """Columns of the `face_stations` point layer (the points are at `stations.x_m`, `stations.y_m`, on the axis in
    plan). Values as computed, not rounded."""
    n = len(stations)
    columns = {"drive": np.full(n, stations.drive, dtype=object)}
    for name in FACE_STATION_FIELDS[1:] + FACE_STATION_EXTRA_FIELDS:
        columns[name] = getattr(stations, name)
    return columns


def operator_rows(stations: FaceStations) -> list[dict[str, str]]:
    """The operator's table for one drive: per station, the band of crown (and axis) pressure to hold.

    The band runs from support_min + tolerance to support_max - tolerance, so that swings of +/- the tolerance stay
    inside the window. Where the window is closed the band is left empty. Pressures to 0.1 kPa, chainage to 0.01 m.
    """
    lo, hi = stations.hold_from_kpa, stations.hold_to_kpa
    lo_axis, hi_axis = stations.at_axis(lo), stations.at_axis(hi)
    rows = []
    for k in range(len(stations)):
        closed = stations.status[k] == "closed"
        cell = (lambda v: "" if closed else f"{v:.1f}")
        rows.append({
            "drive": stations.drive, "chainage_m": f"{stations.chainage_m[k]:.2f}", "status": str(stations.status[k]),
            "support_mode": str(stations.support_mode[k]), "tolerance_kpa": f"{stations.tolerance_kpa[k]:.1f}",
            "hold_from_crown_kpa": cell(lo[k]), "hold_to_crown_kpa": cell(hi[k]),
            "hold_from_axis_kpa": cell(lo_axis[k]), "hold_to_axis_kpa": cell(hi_axis[k]),
        })
    return rows


def face_summary(stations: FaceStations) -> dict[str, float | int]:
    """Attributes for the drive's `route` feature: the smallest window and where, and station counts by status."""
    k = int(np.nanargmin(stations.window_kpa))
    return {
        "face_min_window_kpa": float(stations.window_kpa[k]),
        "face_min_window_chainage_m": float(stations.chainage_m[k]),
        "face_closed_stations": int(np.sum(stations.status == "closed")),
        "face_narrow_stations": int(np.sum(stations.status == "narrow")),
        "face_low_cover_stations": int(np.sum(stations.low_cover)),
    }
