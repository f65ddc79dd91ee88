"""The orchestrator: the engineer's procedure, step by step.

    result = Assessment(project).greenfield().buildings().utilities().envelope().probability().face().result

Each step can be run and tested alone; the numbers come from the model functions of `settle.engine.troughs`,
superposed by `settle.engine.field`, on the route of `settle.inputs.route`, and from the assessments of
`settle.assessments`.

The heavy steps are cut into tasks by drive and by tiles along the route (`settle.procedure.chunks`): the grid by
batches of tunnel elements, the buildings (their damage, envelope and probabilities) by tiles of the route they lie
beside, the percentiles by runs of grid nodes, the face by drive. `workers` (`settle.procedure.workers.Workers`)
runs them here or on a Dask cluster; the tasks and the order their results are added in are the same in every
mode, so the numbers are too. Utilities and report points are few and stay in this process.
"""
from __future__ import annotations

import time
from pathlib import Path
from typing import Callable

import numpy as np

from ..engine.elements import Elements, tunnel_elements
from ..engine.field import grid_batches, grid_from_blocks, movements_at_points
from ..inputs.ground import GroundModel
from ..inputs.model import Project
from ..inputs.route import build_drive
from . import tasks
from .chunks import asset_groups, gather_building_results, gather_rows
from .resources import check_run_size
from .results import Result
from .workers import Workers

#: Grid nodes of one percentile task.
NODES_PER_TASK = 20_000


class Assessment:
    """Runs the assessment of one project. `progress(stage, fraction)` is told how far a long step has got;
    `workers` runs the tasks of the heavy steps (default: this process)."""

    def __init__(self, project: Project, progress: Callable[[str, float], None] | None = None,
                 workers: Workers | None = None):
        self.project = project
        self.ground = GroundModel(project.ground)
        self.progress = progress or (lambda stage, fraction: None)
        self.workers = workers or Workers()
        self._groups = None
        self._items = None
        self._building_parts: list = []
        self.warnings: list[str] = list(project.warnings)
        self.timings: dict[str, float] = {}
        self.drives = []
        self.elements: Elements | None = None
        self._result: Result | None = None
        self._face: list = []
        self._utilities = None
        self._buildings = None
        self._building_envelope = None
        self._utility_envelope = None

    def _timed(self, name, started):
        self.timings[name] = time.perf_counter() - started

    def route(self) -> "Assessment":
        """Axis, chainage, depth and cover of every drive, cut into tunnel elements over the excavated length."""
        t = time.perf_counter()
        self.drives, self.elements = drives_and_elements(self.project, self.ground, self.warnings)
        self._timed("route", t)
        return self

    def greenfield(self) -> "Assessment":
        """Greenfield movements on the grid and at the requested places, at the construction stage given."""
        if self.elements is None:
            self.route()
        out = self.project.output
        t = time.perf_counter()
        precision_m = out.precision_mm / 1e3
        frame, batches = grid_batches(self.elements, out.grid_spacing_m, precision_m)
        shared = self.workers.share((self.elements, frame, precision_m))
        blocks = self.workers.imap(tasks.grid_task, batches, shared=shared,
                                   progress=lambda f: self.progress("grid", f))
        grid, tiles, volume = grid_from_blocks(frame, blocks, out.grid_threshold_mm)
        if frame is None:
            tiles.spacing_m = float(out.grid_spacing_m)
        self._timed("grid", t)
        t = time.perf_counter()
        points, ids = point_movements(self.project.points, self.movements_at, self.warnings)
        self._timed("points", t)
        self._result = Result(project=self.project, drives=self.drives, grid=grid, tiles=tiles, points=points,
                              point_ids=ids, settlement_volume_m3=volume, warnings=self.warnings,
                              timings_s=self.timings, face=self._face, utilities=self._utilities,
                              buildings=self._buildings, building_envelope=self._building_envelope,
                              utility_envelope=self._utility_envelope)
        return self

    def buildings(self) -> "Assessment":
        """Stage 1 screening and stage 2 deep-beam damage categories of every building in [buildings]."""
        if self.project.buildings is None:
            return self
        t = time.perf_counter()
        if self.elements is None:
            self.route()
        field = self.workers.share(tasks.Field(tasks.without_assets(self.project), self.ground, self.elements))
        self._building_parts = self._over_building_groups("buildings", tasks.building_task, [self._building_items()],
                                                          field)
        self._buildings = gather_building_results(self._building_parts, self.building_groups,
                                                  len(self.project.buildings))
        self._timed("buildings", t)
        if self._result is not None:
            self._result.buildings = self._buildings
        return self

    @property
    def building_groups(self) -> list:
        """The rows of the buildings of each task: by nearest drive and tile along it (`chunks.asset_groups`)."""
        if self._groups is None:
            if self.elements is None:
                self.route()
            self._groups = asset_groups(self.project.buildings.polygons, self.drives)
        return self._groups

    def _building_items(self) -> list:
        """The buildings of each task, placed on the workers once for the buildings, envelope and probability."""
        if self._items is None:
            from .envelope import subset_table

            self._items = self.workers.place([subset_table(self.project.buildings, rows)
                                              for rows in self.building_groups])
        return self._items

    def _over_building_groups(self, stage: str, task, columns: list, shared) -> list:
        self.progress(stage, 0.0)
        return self.workers.map(task, *columns, shared=shared, progress=lambda f: self.progress(stage, f))

    def utilities(self) -> "Assessment":
        """Strains, joint rotations and openings of every buried pipe in [utilities], and their verdicts."""
        from ..assessments.utilities import assess_utilities

        if self.project.utilities is not None:
            self._utilities = self._assets("utilities", assess_utilities, self.project.utilities,
                                           self.project.utility_options)
        return self

    def _assets(self, stage: str, assess, assets, options):
        """One asset assessment with its progress, warnings and timing; its results, also in the run's result."""
        t = time.perf_counter()
        self.progress(stage, 0.0)
        results = assess(assets, self.movements_at, options)
        self.progress(stage, 1.0)
        self.warnings.extend(getattr(results, "warnings", ()))
        self._timed(stage, t)
        if self._result is not None:
            setattr(self._result, stage, results)
        return results

    def envelope(self) -> "Assessment":
        """The worst each building and utility sees over the whole construction sequence (`envelope`)."""
        p = self.project
        if p.buildings is None and p.utilities is None:
            return self
        from .envelope import Sequence, utility_envelope

        t = time.perf_counter()
        self.progress("envelope", 0.0)
        sequence = Sequence(tasks.without_assets(p), self.ground)
        if p.buildings is not None:
            # With no face given the run's stage is completion: its building results serve the envelope as they are.
            at_completion = all(d.face_chainage_m is None for d in p.drives) and self._building_parts
            completion = ([tasks.AtCompletion.of(r) for r in self._building_parts] if at_completion
                          else [None] * len(self.building_groups))
            found = self._over_building_groups("envelope", tasks.building_envelope_task,
                                               [self._building_items(), completion], self.workers.share(sequence))
            self._building_envelope = gather_rows(found, self.building_groups, len(p.buildings))
        if p.utilities is not None:
            self._utility_envelope = utility_envelope(sequence, p.utilities, p.utility_options)
        self.progress("envelope", 1.0)
        self._timed("envelope", t)
        if self._result is not None:
            self._result.building_envelope = self._building_envelope
            self._result.utility_envelope = self._utility_envelope
        return self

    def probability(self) -> "Assessment":
        """Probabilities of damage categories and utility statuses, and settlement percentiles on the grid, over the
        distributions of volume loss and K the project gives (`probability`); nothing without distributions."""
        if getattr(self.project, "uncertainty", None) is None or self._result is None:
            return self
        from .probability import ProbabilisticRun, SettlementPercentiles

        t = time.perf_counter()
        self.progress("probability", 0.0)
        run = ProbabilisticRun(self.project)
        light = self.workers.share(run.with_assets())
        buildings = None
        if self.project.buildings is not None:
            found = self._over_building_groups("probability", tasks.building_probability_task,
                                               [self._building_items()], light)
            buildings = gather_rows(found, self.building_groups, len(self.project.buildings))
        utilities = run.utilities() if self.project.utilities is not None else None
        grid = self._result.grid
        levels = self.project.output.contour_levels_mm
        grid_percentiles = self._percentiles(light, grid.x_m, grid.y_m, (50.0, 95.0))
        self._result.probability = {
            "buildings": buildings, "utilities": utilities,
            "grid": SettlementPercentiles(grid.x_m, grid.y_m, np.zeros_like(grid.x_m), (50.0, 95.0),
                                          grid_percentiles),
            "tiles_p95": run.percentile_tiles(self._result.tiles, 95.0, lowest_mm=min(levels),
                                              percentile_at=lambda x, y: self._percentiles(light, x, y, (95.0,))[:, 0]),
            "summary": run.summary(buildings, utilities)}
        self.progress("probability", 1.0)
        self._timed("probability", t)
        return self

    def _percentiles(self, run, x, y, percentiles: tuple) -> np.ndarray:
        """Settlement percentiles at surface places (n, len(percentiles)), in tasks of `NODES_PER_TASK` places. [mm]"""
        xy = np.column_stack([x, y])
        items = [xy[a:a + NODES_PER_TASK] for a in range(0, len(xy), NODES_PER_TASK)]
        found = self.workers.map(tasks.percentile_task, items, shared=(run, tuple(percentiles)))
        return np.concatenate(found) if found else np.empty((0, len(percentiles)))

    def face(self) -> "Assessment":
        """Face support pressure window along every drive (runs when the layers carry their strengths)."""
        if self.elements is None:
            self.route()
        if self.project.strengths:
            t = time.perf_counter()
            self._face.extend(face_checks(self.project, self.ground, self.drives, self.progress, self.warnings,
                                          self.workers))
            self._timed("face", t)
            if self._result is not None:
                self._result.face = self._face
        return self

    def movements_at(self, x, y, depth_m):
        """Movements of every drive, at the run's face positions, at places and their depths below ground."""
        if self.elements is None:
            self.route()
        return movements_at_points(self.elements, self.ground, x, y, depth_m,
                                   precision_m=self.project.output.precision_mm / 1e3)

    @property
    def building_results(self):
        """The buildings step's results (settle.assessments.buildings.BuildingResults), without computing the grid."""
        return self._buildings

    @property
    def utility_results(self):
        """The utilities step's results (settle.assessments.utilities.UtilityResults), without computing the grid."""
        return self._utilities

    @property
    def result(self) -> Result:
        if self._result is None:
            self.greenfield()
        return self._result


def drives_and_elements(project: Project, ground: GroundModel, warnings: list[str]):
    """The route of every drive (with its checks; warnings added to `warnings`) and all their tunnel elements."""
    where = project.path.name if project.path else "project"
    drives, parts = [], []
    for index, drive in enumerate(project.drives):
        geometry, found = build_drive(drive, ground, where, rivers=project.rivers)
        parts.append(tunnel_elements(drive, geometry, ground, index))
        drives.append(geometry)
        warnings.extend(found)
    return drives, Elements.concatenate(parts)


def point_movements(points, movements_at, warnings: list[str]):
    """Movements at the places of [points] and their ids ((None, ()) without them); warns of points below a crown."""
    if points is None:
        return None, ()
    moved = movements_at(points.x_m, points.y_m, points.depth_m)
    deep = [pid for pid, s in zip(points.ids, moved.settlement_mm) if np.isnan(s)]
    if deep:
        shown = ", ".join(deep[:10]) + (" ..." if len(deep) > 10 else "")
        warnings.append(f"{len(deep)} point(s) lie at or below the crown of a drive that reaches them, where the "
                        f"subsurface trough is not defined; their movements are left empty: {shown}")
    return moved, points.ids


def face_checks(project: Project, ground: GroundModel, drives, progress, warnings: list[str],
                workers: Workers | None = None) -> list:
    """The face support window along every drive (`face_stations`), one task per drive, in drive order; warnings
    added to `warnings`."""
    workers = workers or Workers()
    where = project.path.name if project.path else "project"
    shared = workers.share((tasks.without_assets(project), ground, where))
    progress("face support", 0.0)
    checks = workers.map(tasks.face_task, drives, project.drives, shared=shared,
                         progress=lambda f: progress("face support", f))
    for stations in checks:
        warnings.extend(stations.warnings)
    return checks


def run(project: Project | str | Path, progress=None, workers: Workers | None = None) -> Result:
    """Load (if given a path) and assess a project; one call for scripts and notebooks. After the route and before
    any heavy step, the size guard (`resources.check_run_size`) refuses a run too large for its memory limit.
    `workers` (entered, `with Workers(...) as workers`) runs the heavy steps' tasks; default this process."""
    if not isinstance(project, Project):
        from ..inputs.project_file import load_project

        project = load_project(project)
    assessment = Assessment(project, progress, workers).route()
    check_run_size(project, assessment.drives, assessment.elements)
    return assessment.greenfield().buildings().utilities().envelope().probability().face().result
