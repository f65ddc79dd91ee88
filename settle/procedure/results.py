"""What a run returns: `Result`, plain arrays with units in every name.

Sign conventions: those stated once in `settle.engine.movements` (settlement positive downward, ux east and uy north,
strain tensile positive in microstrain, tilt as the slope's magnitude). `Movements` and `SettlementTiles` come from
the engine (`settle.engine.movements`) and `DriveResult` from the route (`settle.inputs.route`); they are named here
too, as the types a `Result` holds.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from ..engine.movements import Movements, SettlementTiles, principal_strains
from ..inputs.model import Project
from ..inputs.route import DriveResult

__all__ = ["DriveResult", "Movements", "Result", "SettlementTiles", "principal_strains"]


@dataclass
class Result:
    """Everything a run computed. Arrays, no files."""

    project: Project
    drives: list[DriveResult]
    grid: Movements  # every grid node with settlement >= Output.grid_threshold_mm
    tiles: SettlementTiles
    points: Movements | None
    point_ids: tuple[str, ...]
    settlement_volume_m3: float  # volume of the surface trough, summed over the grid
    warnings: list[str]
    timings_s: dict[str, float] = field(default_factory=dict)
    face: list = field(default_factory=list)  # settle.face_stations.FaceStations per drive, when the check ran
    utilities: object | None = None  # settle.pipelines.UtilityResults, when the project has [utilities]
    buildings: object | None = None  # settle.buildings.BuildingResults, when the project has [buildings]
    # The worst over the construction sequence (settle.procedure.envelope), when there are buildings or utilities.
    building_envelope: object | None = None  # BuildingEnvelope
    utility_envelope: object | None = None  # UtilityEnvelope
    # The probabilistic run (settle.procedure.probability), when the project gives distributions: a dict with
    # "buildings" (BuildingProbabilities), "utilities" (UtilityProbabilities), "grid" (SettlementPercentiles at the
    # grid nodes) and "summary" (summary.json's "probabilistic").
    probability: dict | None = None

    @property
    def lost_volume_m3(self) -> float:
        return float(sum(d.lost_volume_m3 for d in self.drives))
