"""The validated inputs of a project, as the engine sees them.

`settle.project.load_project` builds these from a project file; tests and notebooks may build them directly.
Every length is in metres, levels are elevations in the project's vertical datum (up positive), volume loss is in
per cent as the engineer writes it. Nothing here reads files or knows about TOML.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

BEHAVIOURS = ("cohesive", "granular")
#: The default of `[output] input_size_limit_mb`: the largest input file read (1 MB = 2**20 bytes). [MB]
DEFAULT_INPUT_SIZE_LIMIT_MB = 512.0
VERTICAL_REFERENCES = ("axis", "invert", "depth")


@dataclass(frozen=True)
class Layer:
    """One ground layer; it runs down from `top_level_m` to the next layer's top (the last one has no base)."""

    name: str
    top_level_m: float
    unit_weight_kn_m3: float
    trough_width_k: float
    behaviour: str  # "cohesive" | "granular"


@dataclass(frozen=True)
class Surface:
    """Ground surface: flat at `level_m`, triangulated through `points_xyz` (n x 3, m), or a DEM `raster`
    (settle.inputs.dem_surface.DemSurface)."""

    level_m: float | None = None
    points_xyz: np.ndarray | None = None
    source: str = ""  # where it came from, for messages
    raster: object | None = None

    def __post_init__(self):
        if sum(v is not None for v in (self.level_m, self.points_xyz, self.raster)) != 1:
            raise ValueError("Surface needs exactly one of level_m, points_xyz or raster")


@dataclass(frozen=True)
class Ground:
    surface: Surface
    groundwater_level_m: float
    layers: tuple[Layer, ...]


@dataclass(frozen=True)
class Reach:
    """Part of a drive with its own volume loss (and optionally trough width factor)."""

    from_chainage_m: float
    to_chainage_m: float
    volume_loss_pct: float
    trough_width_k: float | None = None


@dataclass(frozen=True)
class Drive:
    """One shaft-to-shaft drive.

    `alignment_xy` holds the plan vertices from the launch shaft to the reception shaft (n x 2, m).
    `alignment_v` holds one vertical value per vertex, whose meaning `vertical` gives:
    "axis" = level of the tunnel axis, "invert" = invert level of the pipe bore (axis = invert + inner_diameter_m/2),
    "depth" = depth of the axis below the ground surface. `settle.route` turns them into axis levels.
    """

    name: str
    alignment_xy: np.ndarray
    alignment_v: np.ndarray
    vertical: str
    outer_diameter_m: float
    volume_loss_pct: float
    inner_diameter_m: float | None = None
    trough_width_k: float | None = None
    face_chainage_m: float | None = None  # None = drive complete
    start_chainage_m: float = 0.0
    reaches: tuple[Reach, ...] = ()
    source: str = ""  # alignment file (and layer), for messages
    face_support: tuple = ()  # settle.face_stations.SupportReach items: support mode per reach


@dataclass(frozen=True)
class Points:
    """Places to report movements at. depth_m is below the ground surface (0 = at the surface)."""

    ids: tuple[str, ...]
    x_m: np.ndarray
    y_m: np.ndarray
    depth_m: np.ndarray
    source: str = ""


@dataclass(frozen=True)
class Output:
    grid_spacing_m: float
    contour_levels_mm: tuple[float, ...]
    grid_threshold_mm: float = 0.1  # grid keeps every node whose settlement reaches this
    precision_mm: float = 0.001  # contributions smaller than this are not evaluated (see DEVELOPERS.md)
    settlement_geotiff: bool = False  # also write <stem>-settlement.tif
    dxf: bool = False  # also write <stem>.dxf, the drawing for CAD (gis_out.dxf_drawing)
    sections_chainage_m: tuple[float, ...] = ()  # transverse sections of the report; () = where settlement peaks
    input_size_limit_mb: float = DEFAULT_INPUT_SIZE_LIMIT_MB  # largest input file read [MB]
    memory_limit_mb: float | None = None  # largest memory a run may plan to use [MB]; None = from this machine


@dataclass(frozen=True)
class Project:
    name: str
    crs: str  # "EPSG:nnnn", projected, metres
    ground: Ground
    drives: tuple[Drive, ...]
    output: Output
    points: Points | None = None
    path: Path | None = None  # the project file, when read from one
    # Face support check (settle.assessments.face_stations): runs when strengths are given, one per layer.
    strengths: tuple = ()
    rivers: tuple = ()  # settle.inputs.face_settings.River items
    face: object | None = None  # settle.inputs.face_settings.FaceOptions; None = the documented defaults
    # Buildings (settle.assessments.buildings): footprints read from [buildings] file, and the assessment's settings.
    buildings: object | None = None  # settle.inputs.footprints.Buildings
    building_options: object | None = None  # settle.inputs.building_settings.AssessmentOptions
    # Trigger levels for monitoring readings, (amber_mm, red_mm): [monitoring] amber_mm, red_mm.
    monitoring: tuple[float, float] | None = None
    # Buried utilities (settle.assessments.utilities): the lines read from [utilities] file, and the settings.
    utilities: object | None = None  # settle.inputs.utility_lines.Utilities
    utility_options: object | None = None  # settle.inputs.utility_settings.UtilityOptions
    warnings: tuple[str, ...] = field(default_factory=tuple)
    # Every file the loader read, the project file first, resolved, in the order read (a shapefile with its sidecars).
    input_files: tuple = ()
    # The construction sequence of the envelope ([construction]): settle.inputs.construction_settings.Construction;
    # None = the documented defaults.
    construction: object | None = None
    # Document control of the report ([report]): settle.inputs.report_settings.DocumentControl (all defaults when
    # the file has no [report]).
    report: object | None = None
    # Distributions of volume loss and K ([uncertainty], [drives.*_distribution]):
    # settle.inputs.uncertainty_settings.ProjectUncertainty; None = the deterministic run only.
    uncertainty: object | None = None
