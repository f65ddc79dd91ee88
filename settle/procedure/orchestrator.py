"""The orchestrator: the engineer's procedure, step by step.

    result = Assessment(project).greenfield().buildings().utilities().face().result

Each step can be run and tested alone; the numbers come from the model functions in `troughs`, superposed by
`field`, on the geometry of `route`.
"""
from __future__ import annotations

import time
from pathlib import Path
from typing import Callable

import numpy as np

from ..engine.elements import Elements, tunnel_elements
from ..engine.field import movements_at_points, settlement_grid
from ..inputs.ground import GroundModel
from ..inputs.model import Project
from ..inputs.route import build_drive
from .results import Result


class Assessment:
    """Runs the assessment of one project. `progress(stage, fraction)` is told how far a long step has got."""

    def __init__(self, project: Project, progress: Callable[[str, float], None] | None = None):
        self.project = project
        self.ground = GroundModel(project.ground)
        self.progress = progress or (lambda stage, fraction: None)
        self.warnings: list[str] = list(project.warnings)
        self.timings: dict[str, float] = {}
        self.drives = []
        self.elements: Elements | None = None
        self._result: Result | None = None
        self._face: list = []
        self._utilities = None
        self._buildings = None

    def _timed(self, name, started):
        self.timings[name] = time.perf_counter() - started

    def route(self) -> "Assessment":
        """Axis, chainage, depth and cover of every drive, cut into tunnel elements over the excavated length."""
        t = time.perf_counter()
        where = self.project.path.name if self.project.path else "project"
        parts = []
        for index, drive in enumerate(self.project.drives):
            geometry, warnings = build_drive(drive, self.ground, where)
            parts.append(tunnel_elements(drive, geometry, self.ground, index))
            self.drives.append(geometry)
            self.warnings.extend(warnings)
        self.elements = Elements.concatenate(parts)
        self._timed("route", t)
        return self

    def greenfield(self) -> "Assessment":
        """Greenfield movements on the grid and at the requested places, at the construction stage given."""
        if self.elements is None:
            self.route()
        out = self.project.output
        t = time.perf_counter()
        grid, tiles, volume = settlement_grid(
            self.elements,
            out.grid_spacing_m,
            out.precision_mm / 1e3,
            out.grid_threshold_mm,
            progress=lambda f: self.progress("grid", f),
        )
        self._timed("grid", t)
        t = time.perf_counter()
        points, ids = None, ()
        if self.project.points is not None:
            pts = self.project.points
            points = self.movements_at(pts.x_m, pts.y_m, pts.depth_m)
            ids = pts.ids
            deep = [pid for pid, s in zip(ids, points.settlement_mm) if np.isnan(s)]
            if deep:
                shown = ", ".join(deep[:10]) + (" ..." if len(deep) > 10 else "")
                self.warnings.append(
                    f"{len(deep)} point(s) lie at or below the crown of a drive that reaches them, where the "
                    f"subsurface trough is not defined; their movements are left empty: {shown}"
                )
        self._timed("points", t)
        self._result = Result(
            project=self.project,
            drives=self.drives,
            grid=grid,
            tiles=tiles,
            points=points,
            point_ids=ids,
            settlement_volume_m3=volume,
            warnings=self.warnings,
            timings_s=self.timings,
            face=self._face,
            utilities=self._utilities,
            buildings=self._buildings,
        )
        return self

    def buildings(self) -> "Assessment":
        """Stage 1 screening and stage 2 deep-beam damage categories of every building in [buildings]."""
        p = self.project
        if p.buildings is None:
            return self
        from ..assessments.buildings import assess_buildings

        t = time.perf_counter()
        self.progress("buildings", 0.0)
        self._buildings = assess_buildings(p.buildings, self.movements_at, p.building_options)
        self.progress("buildings", 1.0)
        self._timed("buildings", t)
        if self._result is not None:
            self._result.buildings = self._buildings
        return self

    def utilities(self) -> "Assessment":
        """Strains, joint rotations and openings of every buried pipe in [utilities], and their verdicts."""
        p = self.project
        if p.utilities is None:
            return self
        from ..assessments.utilities import assess_utilities

        t = time.perf_counter()
        self.progress("utilities", 0.0)
        self._utilities = assess_utilities(p.utilities, self.movements_at, p.utility_options)
        self.progress("utilities", 1.0)
        self.warnings.extend(self._utilities.warnings)
        self._timed("utilities", t)
        if self._result is not None:
            self._result.utilities = self._utilities
        return self

    def face(self) -> "Assessment":
        """Face support pressure window along every drive (runs when the layers carry their strengths)."""
        if self.elements is None:
            self.route()
        p = self.project
        if not p.strengths:
            return self
        from ..assessments.face_stations import face_stations

        t = time.perf_counter()
        where = p.path.name if p.path else "project"
        for k, (drive, geometry) in enumerate(zip(p.drives, self.drives)):
            self.progress("face support", k / len(p.drives))
            stations = face_stations(geometry, self.ground, p.strengths, p.rivers, p.face, drive.face_support, where)
            self._face.append(stations)
            self.warnings.extend(stations.warnings)
        self._timed("face", t)
        if self._result is not None:
            self._result.face = self._face
        return self

    def movements_at(self, x, y, depth_m):
        """Movements of every drive, at the run's face positions, at places and their depths below ground."""
        if self.elements is None:
            self.route()
        return movements_at_points(
            self.elements, self.ground, x, y, depth_m, precision_m=self.project.output.precision_mm / 1e3
        )

    @property
    def building_results(self):
        """The buildings step's results (settle.buildings.BuildingResults), without computing the grid."""
        return self._buildings

    @property
    def utility_results(self):
        """The utilities step's results (settle.pipelines.UtilityResults), without computing the grid."""
        return self._utilities

    @property
    def result(self) -> Result:
        if self._result is None:
            self.greenfield()
        return self._result


def run(project: Project | str | Path, progress=None) -> Result:
    """Load (if given a path) and assess a project; one call for scripts and notebooks."""
    if not isinstance(project, Project):
        from ..inputs.project_file import load_project

        project = load_project(project)
    return Assessment(project, progress).greenfield().buildings().utilities().face().result
