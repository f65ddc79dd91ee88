"""The tasks a run is cut into, as plain functions of (item, shared) that a worker process can run.

Each takes its own share of the work as `item` and what every task of its kind needs as `shared` (sent to each
worker once; `settle.procedure.workers.Workers.share`), and returns only its results. The orchestrator makes the
items (`settle.procedure.chunks`) and puts the results back together.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..engine.elements import Elements
from ..engine.field import GridFrame, grid_batch_blocks, movements_at_points
from ..inputs.ground import GroundModel
from ..inputs.model import Project


def without_assets(project: Project) -> Project:
    """The project without its buildings, utilities and points: what every task needs of it, light to send."""
    return replace(project, buildings=None, utilities=None, points=None)


@dataclass
class Field:
    """What a task needs to evaluate the run's movements: the project (without assets), ground and elements."""

    project: Project
    ground: GroundModel
    elements: Elements

    def movements_at(self, x, y, depth_m):
        return movements_at_points(self.elements, self.ground, x, y, depth_m,
                                   precision_m=self.project.output.precision_mm / 1e3)


def grid_task(batch: np.ndarray, shared: tuple[Elements, GridFrame, float]) -> dict:
    """The grid's tile blocks of one batch of elements (`engine.field.grid_batch_blocks`)."""
    elements, frame, precision_m = shared
    return grid_batch_blocks(elements, batch, frame, precision_m)


def building_task(buildings, shared: Field):
    """The building assessment of the buildings of one task (`assessments.buildings.assess_buildings`)."""
    from ..assessments.buildings import assess_buildings

    return assess_buildings(buildings, shared.movements_at, shared.project.building_options)


@dataclass
class AtCompletion:
    """What the envelope reads of the building results at completion (`BuildingResults` fields of one name)."""

    category: np.ndarray
    max_settlement_mm: np.ndarray

    @classmethod
    def of(cls, results) -> "AtCompletion":
        return cls(results.category, results.max_settlement_mm)


def building_envelope_task(buildings, completion: AtCompletion | None, sequence):
    """The envelope of the buildings of one task over the construction sequence, with their results at
    completion when the run has them."""
    from .envelope import building_envelope

    return building_envelope(sequence, buildings, sequence.project.building_options, completion=completion)


def building_probability_task(buildings, run):
    """P(category >= k) of the buildings of one task (`probability.ProbabilisticRun.buildings`)."""
    return run.with_assets(buildings=buildings).buildings()


def percentile_task(xy: np.ndarray, shared) -> np.ndarray:
    """Settlement percentiles over the samples at the surface at places xy (n, 2); shared = (run, percentiles).
    [mm]"""
    run, percentiles = shared
    return run.settlement_percentiles(xy[:, 0], xy[:, 1], percentiles=percentiles).settlement_mm


def face_task(geometry, drive, shared):
    """The face support window along one drive, from its geometry and its design drive; shared = (project, ground,
    file name for messages)."""
    from ..assessments.face_stations import face_stations

    project, ground, where = shared
    return face_stations(geometry, ground, project.strengths, project.rivers, project.face, drive.face_support,
                         where, design_drive=drive)
