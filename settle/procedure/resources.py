"""The size guard: what a run will hold, estimated before any heavy step, checked against what it may use.

`check_run_size(project, drives, elements)` runs after the route (the drives and their tunnel elements, a light
step) and before the grid, the buildings, the utilities and the face stations. It estimates, in milliseconds and
without building anything:

- the grid nodes the engine evaluates: the nodes within the reach radius of the tunnel elements
  (`Elements.reach_radius_m`, the rectangles of `engine.field.influence_corners`), and the 128 x 128 tiles that
  hold them; with the settlement GeoTIFF, the cells of the tiles' bounding box;
- the sample places of the buildings (walls at most `MAX_SAMPLE_SPACING_M` apart, an interior grid at
  `interior_spacing_m`), of which one batch is held at a time, and of the utilities (every `sample_spacing_m`
  along every pipe, with the stencil and joint places around each sample);
- the face stations of every drive (its length / `face_station_spacing_m`, plus its fixed stations);
- the peak memory of the run, from the bytes each of these costs (measured; see the constants).

Every count is an upper bound: a node or a place is counted when it may be evaluated (lattice points of a region
counted by the area of the region grown by half a cell diagonal, `_lattice_points`), so the estimate is never
below what the run holds, and on the projects of the tests within `GRID_NODE_FACTOR` of it.

Limits. Memory: `[output] memory_limit_mb`, or half of this machine's available memory. Contour levels: at most
`MAX_CONTOUR_LEVELS`. Face stations: at most `MAX_FACE_STATIONS` per drive. Going over any of them is an InputError
of one line naming the key to change, the estimate, the limit and a value that fits.
"""
from __future__ import annotations

import math
import os
from dataclasses import dataclass, field, replace

import numpy as np
import shapely

from ..assessments.buildings import MAX_SAMPLE_SPACING_M, MIN_SAMPLE_INTERVALS, POINTS_PER_BATCH
from ..assessments.utilities import REFINE_FACTOR, REFINE_PEAKS
from ..engine.elements import Elements
from ..engine.field import PAIRS_PER_BATCH, TILE_SIZE, influence_corners
from ..errors import InputError
from ..inputs.building_settings import AssessmentOptions
from ..inputs.face_settings import FaceOptions
from ..inputs.model import Project
from ..inputs.utility_settings import UtilityOptions

MB = 1e6  # bytes in a megabyte, as the limit and the messages count them

# Bytes of the run. Measured as the peak resident memory (VmHWM of /proc/self/status) of a fresh process that runs
# `settle.run` then `gis_out.run_folder.write_run` (all that `settle run` does), on a straight 100 m drive built like
# tests/builders.py (axis 10 m deep, 3 m bore, 1 % volume loss, K = 0.5) with one asset added, and on the 2 km curved
# drive of tests/benchmarks/long_drive.py: each figure is the rise of VmHWM between two sizes over the rise of its
# count, rounded up so that every measured run stays below its estimate.
#: The interpreter with numpy, shapely, pandas, geopandas, pyogrio and matplotlib, and the run's small outputs:
#: `settle run` on the demo peaks at 237 MB, and at 487 MB with --report (the PDF's figures). [MB]
BASE_MB = 500.0
#: One tile of the grid: eight fields of 128 x 128 float64 accumulated while the grid is computed, and the tile's
#: settlement kept for the contours (9 x 128 x 128 x 8 bytes; counted). [bytes]
TILE_BYTES = 9 * TILE_SIZE * TILE_SIZE * 8
#: One element-node pair of a batch of the grid step, while it is evaluated and added into the tiles. Measured with
#: tracemalloc around `settlement_grid` on one straight element (every pair in one batch): (peak - tiles x
#: TILE_BYTES) / pairs = 258 bytes at both a 0.2 m and a 0.1 m grid (147 000 and 588 000 pairs). [bytes]
PAIR_BYTES = 260.0
#: One evaluated grid node, beyond its tile: its movements when kept (11 float64), the point layer of the
#: GeoPackage and its writing. Measured on the 2 km drive at a 0.25 m and a 0.125 m grid (1.25 and 4.99 million
#: nodes, two thirds kept): 254 bytes; 340 taken, for a grid_threshold_mm that keeps every node. [bytes]
GRID_NODE_BYTES = 340.0
#: One cell of the optional settlement GeoTIFF: float32 over the tiles' bounding box, and its compressed copy
#: (counted). [bytes]
RASTER_CELL_BYTES = 8.0
#: One sample place of the buildings held at once (wall and interior places, their movements, stage 1 and 2
#: arrays). Measured with one 40 m x 40 m building at interior_spacing_m = 0.05 and 0.025 (0.64 and 2.6 million
#: places): 307 to 414 bytes. [bytes]
BUILDING_PLACE_BYTES = 450.0
#: One sample of a pipe: its profile (14 arrays, kept for the tables and figures) and the movements at the sample,
#: its two curvature stencil places and, on a jointed pipe, two joint places. Measured on one 200 m jointed pipe
#: across the drive at sample_spacing_m = 0.005 and 0.0025 (40 000 and 80 000 samples): 1 150 bytes; 675 bytes on
#: a continuous pipe. [bytes]
UTILITY_SAMPLE_BYTES = 1300.0
#: One face station: its pressures and the wedge-silo search over wedge angles, its row of the face layer and of the
#: operator table. Measured at face_station_spacing_m = 0.005 and 0.001 (20 000 and 100 000 stations): 8 900
#: bytes. [bytes]
FACE_STATION_BYTES = 10_000.0
#: Placing the regular face stations compares each with every fixed station (vertex, crossing, reach end): two
#: float64 matrices of regular x fixed stations (counted). [bytes]
FACE_PAIR_BYTES = 16.0
#: One report point of [points]: its movements, its id, its row of the points layer. Measured with 200 000 and
#: 400 000 points: 570 bytes. [bytes]
POINT_BYTES = 700.0

#: Most contour levels a run draws. Each level is contoured on every tile and its pieces merged across tiles, so the
#: contour step costs levels x tiles; 200 levels are more than a plan or its legend can tell apart (0.1 mm steps
#: over 20 mm of settlement) and keep that step to seconds on a 2 km drive (our choice).
MAX_CONTOUR_LEVELS = 200
#: Most face stations on one drive (a station every 2 mm along 2 km; our choice). [-]
MAX_FACE_STATIONS = 1_000_000
#: The estimate of grid nodes is at most this many times the nodes the engine evaluates on the projects of
#: tests/test_resources.py (1.02 to 1.21 there, the most on coarse grids, as the bound grows the reach by half a cell
#: diagonal). [-]
GRID_NODE_FACTOR = 1.5
#: Share of the available memory a run may use when [output] memory_limit_mb is not given. [-]
DEFAULT_MEMORY_SHARE = 0.5
#: Limit when the machine's available memory cannot be read. [MB]
UNKNOWN_MACHINE_LIMIT_MB = 4000.0
#: Element count above which the area within reach is the sum of the elements' rectangles instead of their union
#: (a looser bound, kept fast). [-]
UNION_ELEMENTS = 20_000
#: Tiles over the reach's bounding box up to which the tiles met are counted one by one (else bounded). [-]
COUNTED_TILES = 20_000


@dataclass
class SizeEstimate:
    """What a run will hold, estimated before it runs (counts are upper bounds, floats as they may be huge)."""

    grid_nodes: float  # nodes within reach of the tunnel elements [-]
    grid_tiles: float  # 128 x 128 tiles holding them [-]
    grid_batch_pairs: float  # element-node pairs evaluated at once [-]
    raster_cells: float  # cells of the settlement GeoTIFF (0 without it) [-]
    building_places: float  # sample places of all buildings [-]
    building_batch_places: float  # most sample places held at once [-]
    utility_samples: float  # samples along all pipes, first pass and refinement [-]
    face_stations: dict[str, float]  # per drive name [-]
    face_pairs: float  # regular x fixed stations compared on the largest drive [-]
    points: float  # report points of [points] [-]
    contour_levels: int
    # Peak memory of each part: "base", "grid", "buildings", "utilities", "face", "points". [MB]
    memory_mb: dict[str, float] = field(default_factory=dict)

    @property
    def total_mb(self) -> float:
        """Peak memory of the run, all parts added (they are held together at the end of the run). [MB]"""
        return float(sum(self.memory_mb.values()))


# ------------------------------------------------------------------------------------------------------ the limit
def available_memory_mb() -> float | None:
    """MemAvailable of /proc/meminfo, else the free physical pages the OS reports; None when neither is known. [MB]"""
    try:
        with open("/proc/meminfo", encoding="ascii") as meminfo:
            for line in meminfo:
                if line.startswith("MemAvailable:"):
                    return float(line.split()[1]) * 1024 / MB
    except (OSError, ValueError, IndexError):
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE") / MB
    except (AttributeError, ValueError, OSError):
        return None


def memory_limit(project: Project) -> tuple[float, str]:
    """The memory a run may use [MB], and where that limit comes from, for messages."""
    given = project.output.memory_limit_mb
    if given is not None:
        return float(given), "[output] memory_limit_mb"
    available = available_memory_mb()
    if available is None:
        return UNKNOWN_MACHINE_LIMIT_MB, ("[output] memory_limit_mb, default "
                                          f"{UNKNOWN_MACHINE_LIMIT_MB:,.0f} MB where the machine's memory is unknown")
    return DEFAULT_MEMORY_SHARE * available, "[output] memory_limit_mb, default half of this machine's available memory"


# ------------------------------------------------------------------------------------------------------ the grid
def _lattice_points(region, spacing_m: float):
    """Upper bound of the nodes of a square grid of the given spacing inside `region` (a geometry or an array of
    them): each node owns the square cell around it, which lies within half a cell diagonal of the region (mitred
    buffer, never inside the round one). [-]"""
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        grown = np.maximum(shapely.area(shapely.buffer(region, spacing_m / math.sqrt(2.0), join_style="mitre")),
                           shapely.area(region))
        count = np.asarray(grown, dtype=float) / np.float64(spacing_m) ** 2
    return np.where(np.isnan(count), np.inf, count)  # 0 / 0 at a spacing whose square is 0: beyond counting


def reach_region(elements: Elements, precision_m: float):
    """The ground within the reach radius of every tunnel element: the union of their rectangles. [m]"""
    if not len(elements):
        return shapely.Polygon()
    rectangles = shapely.polygons(influence_corners(elements, precision_m))
    if len(elements) > UNION_ELEMENTS:
        return shapely.MultiPolygon(list(rectangles))
    return shapely.union_all(rectangles)


def batch_pairs(elements: Elements, precision_m: float, spacing_m: float) -> float:
    """Most element-node pairs the grid step evaluates at once: a batch of `PAIRS_PER_BATCH` pairs and at most one
    element more (its rectangle's nodes), or all pairs when fewer. [-]"""
    if not len(elements):
        return 0.0
    corners = influence_corners(elements, precision_m)
    side_a, side_b = corners[:, 1] - corners[:, 0], corners[:, 3] - corners[:, 0]
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        long_side = np.maximum(np.hypot(*side_a.T), np.hypot(*side_b.T))
        rows = np.abs(side_a[:, 0] * side_b[:, 1] - side_a[:, 1] * side_b[:, 0]) / np.float64(spacing_m) ** 2
        pairs = rows + 2.0 * long_side / spacing_m + 1.0  # nodes on each row's ends
    return float(min(pairs.sum(), PAIRS_PER_BATCH + pairs.max()))


def grid_size(region, spacing_m: float) -> tuple[float, float, float]:
    """Grid nodes within `region`, the tiles that can hold them and the cells of their bounding box. [-]

    A tile is held when one of its nodes is in the region. When the region's bounding box spans at most
    `COUNTED_TILES` tiles, they are counted (tiles laid from the engine's origin that meet the region); else a
    bound: every held tile lies within a tile diagonal of the region, so they are at most the area of the region
    grown by that much over a tile's area.
    """
    if region.is_empty:
        return 0.0, 0.0, 0.0
    nodes = float(_lattice_points(region, spacing_m))
    tile_m = TILE_SIZE * spacing_m
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        x0, y0, x1, y1 = shapely.bounds(region)
        x0, y0 = np.floor(x0 / spacing_m) * spacing_m, np.floor(y0 / spacing_m) * spacing_m
        across, up = np.floor((x1 - x0) / tile_m) + 1, np.floor((y1 - y0) / tile_m) + 1
        cells = float(across * up * TILE_SIZE**2)
        if across * up <= COUNTED_TILES:
            tc, tr = np.meshgrid(np.arange(across), np.arange(up))
            boxes = shapely.box(x0 + tc * tile_m, y0 + tr * tile_m, x0 + (tc + 1) * tile_m, y0 + (tr + 1) * tile_m)
            shapely.prepare(region)
            tiles = float(np.count_nonzero(shapely.intersects(region, boxes)))
        else:
            grown = shapely.buffer(region, tile_m * math.sqrt(2.0), join_style="mitre")
            tiles = float(max(shapely.area(grown), shapely.area(region)) / np.float64(tile_m) ** 2)
    return nodes, (np.inf if math.isnan(tiles) else tiles), (np.inf if math.isnan(cells) else cells)


def grid_memory_mb(nodes: float, tiles: float, pairs: float, cells: float) -> float:
    """Memory of the grid step and of what it leaves for the contours, the point layer and the raster. [MB]"""
    return (nodes * GRID_NODE_BYTES + tiles * TILE_BYTES + pairs * PAIR_BYTES + cells * RASTER_CELL_BYTES) / MB


# ------------------------------------------------------------------------------------------------------ the assets
def building_places(buildings, interior_spacing_m: float) -> tuple[float, float]:
    """Sample places of all buildings, and the most held at once (a batch). [-]

    Walls: at most max(MIN_SAMPLE_INTERVALS, ceil(L / MAX_SAMPLE_SPACING_M)) + 1 <= L / MAX_SAMPLE_SPACING_M +
    MIN_SAMPLE_INTERVALS + 2 samples each, counted over every vertex of every ring (merged walls are fewer).
    Interior: the nodes of the interior grid inside each footprint. A batch holds `POINTS_PER_BATCH` places and at
    most one building more.
    """
    if buildings is None or not len(buildings):
        return 0.0, 0.0
    polygons = np.asarray(buildings.polygons, dtype=object)
    walls = shapely.length(polygons) / MAX_SAMPLE_SPACING_M + (MIN_SAMPLE_INTERVALS + 2) * shapely.get_num_coordinates(
        polygons)
    per_building = walls + _lattice_points(polygons, interior_spacing_m)
    total = float(per_building.sum())
    return total, float(min(total, POINTS_PER_BATCH + per_building.max()))


def utility_samples(utilities, sample_spacing_m: float) -> float:
    """Samples along all pipes: every `sample_spacing_m` with both ends, and the refinement around the peaks. [-]"""
    if utilities is None or not len(utilities):
        return 0.0
    lengths = np.array([np.hypot(*np.diff(np.asarray(xy, dtype=float), axis=0).T).sum() for xy in utilities.lines_xy])
    with np.errstate(over="ignore", divide="ignore"):
        first = np.ceil(lengths / sample_spacing_m) + 2
    refined = np.minimum(first, 9 * REFINE_PEAKS) * 2 * (REFINE_FACTOR - 1)  # nine demands, both sides of a peak
    return float(np.sum(first + refined))


# ------------------------------------------------------------------------------------------------------ the face
def fixed_stations(project: Project, drive_index: int, geometry) -> int:
    """Stations of a drive that the spacing does not set: vertices, crossings of layer tops and the water table by
    crown, axis and invert, and the ends of its river and support reaches (each with its step station). [-]"""
    chain_levels = geometry.axis_xyz_m[:, 2]
    tops = [layer.top_level_m for layer in project.ground.layers][1:] + [project.ground.groundwater_level_m]
    half = geometry.outer_diameter_m / 2.0
    crossings = 0
    for level in (chain_levels + half, chain_levels, chain_levels - half):
        above = level[:, None] > np.asarray(tops)[None, :]
        crossings += int(np.count_nonzero(above[1:] != above[:-1]))
    drive = project.drives[drive_index]
    rivers = sum(1 for r in project.rivers if getattr(r, "drive", None) == drive.name)
    return len(chain_levels) + crossings + 4 * rivers + 4 * len(drive.face_support)


def face_size(project: Project, drives) -> tuple[dict[str, float], float]:
    """Face stations of every drive, and the most regular x fixed station pairs compared on one drive. [-]"""
    if not project.strengths:
        return {}, 0.0
    spacing = face_spacing(project)
    stations, pairs = {}, 0.0
    for k, geometry in enumerate(drives):
        length = float(geometry.chainage_m[-1] - geometry.chainage_m[0])
        with np.errstate(over="ignore", divide="ignore"):
            regular = float(np.ceil(np.float64(length) / np.float64(spacing)))
        fixed = fixed_stations(project, k, geometry)
        stations[project.drives[k].name] = regular + fixed
        pairs = max(pairs, regular * fixed)
    return stations, pairs


def face_memory_mb(stations: dict[str, float], pairs: float) -> float:
    """Memory of the face stations of every drive and of placing them. [MB]"""
    return (sum(stations.values()) * FACE_STATION_BYTES + pairs * FACE_PAIR_BYTES) / MB


def face_spacing(project: Project) -> float:
    """[face] face_station_spacing_m of the project, or its default. [m]"""
    return float((project.face or FaceOptions()).face_station_spacing_m)


# ------------------------------------------------------------------------------------------------------ estimate
def estimate_run_size(project: Project, drives, elements: Elements, region=None) -> SizeEstimate:
    """Counts and peak memory of the run of `project`, whose route gave `drives` and `elements`; `region` is the
    ground within reach (`reach_region`), when already known."""
    out = project.output
    precision_m = out.precision_mm / 1e3
    region = reach_region(elements, precision_m) if region is None else region
    nodes, tiles, cells = grid_size(region, out.grid_spacing_m)
    cells = cells if out.settlement_geotiff else 0.0
    pairs = batch_pairs(elements, precision_m, out.grid_spacing_m)
    places, batch = building_places(project.buildings,
                                    (project.building_options or AssessmentOptions()).interior_spacing_m)
    samples = utility_samples(project.utilities, (project.utility_options or UtilityOptions()).sample_spacing_m)
    stations, face_pairs = face_size(project, drives)
    points = float(len(project.points.ids)) if project.points is not None else 0.0
    memory = {
        "base": BASE_MB,
        "grid": grid_memory_mb(nodes, tiles, pairs, cells),
        "buildings": batch * BUILDING_PLACE_BYTES / MB,
        "utilities": samples * UTILITY_SAMPLE_BYTES / MB,
        "face": face_memory_mb(stations, face_pairs),
        "points": points * POINT_BYTES / MB,
    }
    return SizeEstimate(grid_nodes=nodes, grid_tiles=tiles, grid_batch_pairs=pairs, raster_cells=cells,
                        building_places=places, building_batch_places=batch, utility_samples=samples,
                        face_stations=stations, face_pairs=face_pairs, points=points,
                        contour_levels=len(out.contour_levels_mm), memory_mb=memory)


# ------------------------------------------------------------------------------------------------------ the check
def check_run_size(project: Project, drives, elements: Elements) -> SizeEstimate:
    """Refuse a run that would draw too many contour levels, place too many face stations on a drive, or need more
    memory than its limit (InputError, one line naming the key to change and a value that fits); else its
    estimate. `drives` and `elements` are the route's (`orchestrator.drives_and_elements`)."""
    where = project.path.name if project.path else "project"
    _check_contour_levels(project, where)
    region = reach_region(elements, project.output.precision_mm / 1e3)
    estimate = estimate_run_size(project, drives, elements, region)
    _check_face_stations(project, drives, estimate, where)
    limit, source = memory_limit(project)
    if not estimate.total_mb <= limit:
        raise InputError(_memory_message(project, drives, elements, region, estimate, limit, source, where))
    return estimate


def _check_contour_levels(project: Project, where: str) -> None:
    count = len(project.output.contour_levels_mm)
    if count > MAX_CONTOUR_LEVELS:
        raise InputError(f"{where} [output] contour_levels_mm has {count:,} levels, more than the "
                         f"{MAX_CONTOUR_LEVELS} a run contours (each level is contoured on every tile of the grid); "
                         f"give {MAX_CONTOUR_LEVELS} levels or fewer")


def _check_face_stations(project: Project, drives, estimate: SizeEstimate, where: str) -> None:
    spacing = face_spacing(project)
    for k, (name, count) in enumerate(estimate.face_stations.items()):
        if count > MAX_FACE_STATIONS:
            geometry = drives[k]
            length = float(geometry.chainage_m[-1] - geometry.chainage_m[0])
            room = max(MAX_FACE_STATIONS - fixed_stations(project, k, geometry), 1)
            raise InputError(f'{where} [face] face_station_spacing_m = {spacing:g}: drive "{name}" would have '
                             f"{_about(count)} face stations, more than the {MAX_FACE_STATIONS:,} a drive may have; "
                             f"a face_station_spacing_m of {_nice_at_least(length / room):g} or more fits")


@dataclass
class _Part:
    """A part of the run's memory and the key that sets it: `memory_at(value)` is the part's memory with that value."""

    key: str  # "[output] grid_spacing_m"
    value: float
    largest: float  # largest value worth trying
    power: int  # the part's memory falls at least as fast as value^-power (2 for a grid of places, 1 along lines)
    held: str  # what the part holds, for the message
    memory_at: object  # callable(float) -> MB


def _parts(project: Project, drives, elements: Elements, region, estimate: SizeEstimate) -> dict[str, _Part]:
    """The parts of the run a key can shrink, by the name of their memory in `SizeEstimate.memory_mb`."""
    out = project.output
    b_options = project.building_options or AssessmentOptions()
    u_options = project.utility_options or UtilityOptions()

    def grid_at(h):
        nodes, tiles, cells = grid_size(region, h)
        pairs = batch_pairs(elements, out.precision_mm / 1e3, h)
        return grid_memory_mb(nodes, tiles, pairs, cells if out.settlement_geotiff else 0.0)

    def buildings_at(s):
        return building_places(project.buildings, s)[1] * BUILDING_PLACE_BYTES / MB

    def utilities_at(s):
        return utility_samples(project.utilities, s) * UTILITY_SAMPLE_BYTES / MB

    def face_at(s):
        return face_memory_mb(*face_size(_with_face_spacing(project, s), drives))

    most_stations = max(estimate.face_stations.values(), default=0.0)
    return {
        "grid": _Part("[output] grid_spacing_m", out.grid_spacing_m, 1e4, 2,
                      f"a grid of {_about(estimate.grid_nodes)} nodes", grid_at),
        "buildings": _Part("[buildings] interior_spacing_m", b_options.interior_spacing_m, 1e3, 2,
                           f"{_about(estimate.building_batch_places)} sample places of buildings at once",
                           buildings_at),
        "utilities": _Part("[utilities] sample_spacing_m", u_options.sample_spacing_m, 0.5, 1,
                           f"{_about(estimate.utility_samples)} samples along the pipes", utilities_at),
        "face": _Part("[face] face_station_spacing_m", face_spacing(project), 1e3, 1,
                      f"{_about(most_stations)} face stations on a drive", face_at),
    }


def _with_face_spacing(project: Project, spacing_m: float) -> Project:
    """The project with another [face] face_station_spacing_m (for trying values). [m]"""
    return replace(project, face=replace(project.face or FaceOptions(), face_station_spacing_m=spacing_m))


def _memory_message(project: Project, drives, elements: Elements, region, estimate: SizeEstimate, limit: float,
                    source: str, where: str) -> str:
    """One line: the key of the largest part, the estimate, the limit, and a value of that key that fits (or the
    memory limit that would)."""
    parts = _parts(project, drives, elements, region, estimate)
    name = max(parts, key=lambda n: estimate.memory_mb[n])
    part = parts[name]
    others_mb = sum(mb for other, mb in estimate.memory_mb.items() if other != name)
    fit = _fitting_value(part, estimate.memory_mb[name], limit - others_mb)
    short = part.key.split(" ")[1]

    def said(setting: str) -> str:
        return (f"{where} {setting}: the run would need {_megabytes(estimate.total_mb)} MB ({part.held}), more than "
                f"the {limit:,.0f} MB limit ({source})")

    if fit is not None:
        return f"{said(f'{part.key} = {part.value:g}')}; {_article(short)} {short} of {fit:g} or more fits"
    if not math.isfinite(estimate.total_mb):
        return (f"{said(f'{part.key} = {part.value:g}')}; no {short} fits within it, as the rest of the run needs "
                f"{_megabytes(others_mb)} MB")
    needed = f"{_round_up(estimate.total_mb):.0f}"
    if project.output.memory_limit_mb is not None:
        return f"{said(f'[output] memory_limit_mb = {limit:.15g}')}; a memory_limit_mb of {needed} or more fits"
    return (f"{said(f'{part.key} = {part.value:g}')}; no {short} fits within it: set [output] memory_limit_mb = "
            f"{needed} or more on a machine that has that much")


#: Largest memory of a part taken as a number to start the search for a value that fits from (else the search
#: first steps the value up by 10^10 at a time). [MB]
_COUNTABLE_MB = 1e30


def _fitting_value(part: _Part, part_mb: float, room_mb: float) -> float | None:
    """The smallest round value (1, 2, 2.5 or 5 x 10^k) of the part's key above its own, up to its largest, with which
    the part's memory `part_mb` comes down to `room_mb`.

    Above a value v with memory m, no value below v (m / room)^(1/power) can fit (the part falls no faster than
    value^-power), so the search starts there; from a value whose memory is beyond counting, it first steps up.
    """
    if not room_mb > 0:
        return None
    low, value, mb = part.value, part.value, part_mb
    while not mb < _COUNTABLE_MB and value < part.largest:
        low, value = value, min(value * 1e10, part.largest)
        mb = part.memory_at(value)
    start = value * (mb / room_mb) ** (1.0 / part.power) if mb > room_mb else low
    candidate = _nice_at_least(max(start, part.value))
    while candidate <= part.largest:
        if candidate > part.value and part.memory_at(candidate) <= room_mb:
            return candidate
        candidate = _nice_at_least(candidate * 1.001)
    return None


def _nice_at_least(x: float) -> float:
    """The smallest of 1, 2, 2.5 and 5 x 10^k that is at least x (x > 0)."""
    x = max(float(x), 1e-300)
    decade = 10.0 ** math.floor(math.log10(x))
    for mantissa in (1.0, 2.0, 2.5, 5.0, 10.0):
        if mantissa * decade >= x * (1 - 1e-12):
            return float(f"{mantissa * decade:.3g}")
    return 10.0 * decade


def _round_up(x: float) -> float:
    """x rounded up to two significant figures (531 -> 540). [any]"""
    if not math.isfinite(x) or x <= 0:
        return x
    step = 10.0 ** (math.floor(math.log10(x)) - 1)
    return math.ceil(x / step - 1e-9) * step


def _article(word: str) -> str:
    return "an" if word[0] in "aeiou" else "a"


def _about(count: float) -> str:
    """A count in words, to two significant figures: 12,000, 800 million, 1.2 billion. [-]"""
    if not math.isfinite(count):
        return "more than 10^300"
    if count < 1e6:
        return f"about {float(f'{count:.2g}'):,.0f}"
    for size, word in ((1e12, "trillion"), (1e9, "billion"), (1e6, "million")):
        if count >= size:
            return f"about {float(f'{count / size:.2g}'):g} {word}" if count < 1e15 else f"about {count:.1e}"
    return f"about {count:,.0f}"


def _megabytes(mb: float) -> str:
    """Megabytes in words, to two significant figures with thousands separators: about 6,400. [MB]"""
    if not math.isfinite(mb):
        return "more than 10^300"
    return f"about {float(f'{mb:.2g}'):,.0f}" if mb < 1e15 else f"about {mb:.1e}"
