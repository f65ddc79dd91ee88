"""The forecast for what lies ahead of the face, after the back-analysis.

The buildings and utilities ahead of the face are assessed again with the fitted volume loss and K, both runs with
every drive complete (the final state the engineer must approve), and each is marked where its damage category or
status changed. "Ahead of the face": the foot of the perpendicular from the item (the footprint's inner point, or the
pipe's middle) to its nearest drive lies beyond that drive's latest face in the readings.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import shapely

from ..inputs.model import Project
from ..inputs.readings import Readings
from ..monitoring.fitting import BackAnalysis, apply_fits, point_chainage_m
from .orchestrator import Assessment

FORECAST_FIELDS = ("kind", "id", "drive", "chainage_m", "design", "forecast", "changed")


def forecast_ahead(project: Project, readings: Readings, analysis: BackAnalysis) -> list[dict]:
    """Buildings and utilities ahead of the face, assessed with the design and the fitted values (drives complete).

    Returns one row per item ahead of the face: kind ("building" | "utility"), id, drive, chainage_m (of the foot of
    the perpendicular), design and forecast category (buildings) or status (utilities), and whether it changed.
    """
    if project.buildings is None and project.utilities is None:
        return []
    complete = replace(project, drives=tuple(replace(d, face_chainage_m=None) for d in project.drives),
                       strengths=())
    runs = [Assessment(p).route().buildings().utilities() for p in (complete, apply_fits(complete, analysis.fits))]
    design, forecast = runs
    latest_face = {}
    for d, name in enumerate(project.drives):
        faces = readings.face_chainage_m[readings.drive == d]
        if len(faces):
            latest_face[d] = float(faces[np.argmax(readings.date[readings.drive == d])])
    items = []
    if project.buildings is not None:
        inner = shapely.point_on_surface(np.asarray(project.buildings.polygons, dtype=object))
        items.append(("building", project.buildings.ids, shapely.get_x(inner), shapely.get_y(inner),
                      [str(c) for c in design.building_results.category],
                      [str(c) for c in forecast.building_results.category]))
    if project.utilities is not None:
        middle = shapely.line_interpolate_point(
            np.array([shapely.LineString(line) for line in project.utilities.lines_xy], dtype=object), 0.5,
            normalized=True)
        items.append(("utility", project.utilities.ids, shapely.get_x(middle), shapely.get_y(middle),
                      list(design.utility_results.status), list(forecast.utility_results.status)))
    rows = []
    drives = runs[0].drives
    for kind, ids, x, y, before, after in items:
        chains = np.array([point_chainage_m(g, x, y) for g in drives])
        distance = np.array([_distance_to_axis(g, x, y) for g in drives])
        nearest = np.argmin(distance, axis=0)
        for k, pid in enumerate(ids):
            d = int(nearest[k])
            if d not in latest_face or chains[d, k] <= latest_face[d]:
                continue
            rows.append({"kind": kind, "id": pid, "drive": project.drives[d].name,
                         "chainage_m": round(float(chains[d, k]), 2), "design": before[k], "forecast": after[k],
                         "changed": before[k] != after[k]})
    return rows


def _distance_to_axis(geometry, x, y) -> np.ndarray:
    """Plan distance from places to a drive's axis. [m]"""
    line = shapely.LineString(geometry.axis_xyz_m[:, :2])
    return shapely.distance(line, shapely.points(np.asarray(x), np.asarray(y)))
