"""Building footprints: reading them from a GIS polygon layer, and cutting them into the walls the damage assessment
treats as deep beams.

Input
    Any polygon layer pyogrio reads (GeoPackage, GeoJSON, Shapefile). x, y are reprojected to the project CRS when
    the layer has another CRS; a layer with no CRS is taken to be in the project CRS (with a warning). Z is dropped.
    One feature is one building. Its attributes, with the names set in `BuildingDefaults` (documented names by
    default):

    id                  text or integer, required, unique: names the building in every message and output row.
    height_m            number more than 0: height H of the building, the depth of the deep beam. [m]
    foundation_depth_m  number at least 0: depth of the foundation below the ground surface, where the greenfield
                        movements are taken. [m]
    structure           text: structure type, looked up (case-insensitively) in the E/G table.
    m_dr_sag, m_dr_hog, m_eps_ht, m_eps_hc
                        numbers at least 0, optional: relative-stiffness modification factors read by the user from
                        the published design charts (see `settle.buildings`); used only when the correction is on.

    Heights and foundation depths are at most `DEPTH_LIMIT_M` (1000 m).

    An attribute that is absent, NULL or empty takes the project-level default when one is given, and is otherwise
    an InputError naming the building and the field. A value that is there but wrong (text that is not a number, a
    negative height, an unknown structure type) is always an InputError: a default never replaces a wrong value.

Geometry
    Every vertex must be finite and within +/-`COORDINATE_LIMIT_M` in the project CRS, and a footprint must span no
    more than `FOOTPRINT_EXTENT_LIMIT_M` in plan: otherwise an InputError naming the building. Empty or missing
    geometries and features that are not polygons are skipped; invalid polygons (self-intersecting,
    ...) are repaired with `shapely.make_valid` and their polygonal part kept, or skipped when none is left. Both are
    reported by id with the reason (`Buildings.skipped`, `Buildings.repaired`, `Buildings.notes()`).
    A MultiPolygon of several parts stays one building: its walls are the edges of all its parts, and the worst wall
    governs, which is the same as assessing the parts separately and keeping the worst.

Walls
    The edges of every ring (outer boundary and courtyards) of the normalised footprint, with consecutive edges that
    run on in nearly the same direction merged into one straight wall from corner to corner (see `footprint_walls`).
    Walls are numbered from 1 in each building, in an order that depends only on the shape (not on the order or
    direction of the vertices in the file).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj
import shapely

from ..errors import InputError
from .tables import (COORDINATE_LIMIT_M, DEPTH_LIMIT_M, GIS_SUFFIXES, check_coordinates, listing,
                     project_transformer, read_gis_layer, shown, within)

#: E/G for each structure type, used when the project file gives no table of its own.
#: masonry 2.6: Burland & Wroth (1974) for masonry bearing walls (methods.md section 5.1, from memory there); it is
#:   the isotropic elastic value E/G = 2 (1 + nu) for nu = 0.3.
#: frame 12.5: a value used in the literature for framed buildings (methods.md section 5.1, from memory there; check
#:   it against Burland & Wroth 1974 before relying on it).
DEFAULT_E_OVER_G = {"masonry": 2.6, "frame": 12.5}
#: Optional per-building stiffness modification factors (see `settle.buildings.apply_modification_factors`).
MODIFICATION_ATTRIBUTES = ("m_dr_sag", "m_dr_hog", "m_eps_ht", "m_eps_hc")

#: Consecutive edges whose directions differ by no more than this are one wall (our choice). [deg]
COLLINEAR_TOLERANCE_DEG = 2.0
#: ... provided no vertex of the merged wall lies further than this from its chord (our choice). [m]
STRAIGHTNESS_TOLERANCE_M = 0.1
#: Vertices closer than this to the next one are the same vertex. [m]
DUPLICATE_TOLERANCE_M = 0.001
#: Largest plan extent (width or depth of its bounding box) of one footprint (our choice: twice the longest buildings
#: standing; a larger one is a layer in the wrong CRS or units, and would fill memory with interior points). [m]
FOOTPRINT_EXTENT_LIMIT_M = 2000.0

_POLYGON, _MULTIPOLYGON, _COLLECTION = 3, 6, 7  # shapely type ids


@dataclass(frozen=True)
class BuildingDefaults:
    """How to read the building layer: attribute names, project-level defaults and the E/G table.

    A default of None means "no default": a building without the attribute is an InputError.
    """

    layer: str | None = None  # None: the file's only layer with geometry
    id_attribute: str = "id"
    height_attribute: str = "height_m"
    foundation_depth_attribute: str = "foundation_depth_m"
    structure_attribute: str = "structure"
    default_height_m: float | None = None
    default_foundation_depth_m: float | None = None
    default_structure: str | None = None
    e_over_g: dict = field(default_factory=lambda: dict(DEFAULT_E_OVER_G))  # structure type -> E/G [-]


@dataclass
class Buildings:
    """The buildings kept for the assessment (arrays of one length, n) and what happened to the others."""

    ids: tuple[str, ...]
    polygons: np.ndarray  # shapely Polygon or MultiPolygon per building, project CRS, 2-D
    height_m: np.ndarray  # H [m]
    foundation_depth_m: np.ndarray  # below the ground surface [m]
    structure: tuple[str, ...]  # key of the E/G table
    e_over_g: np.ndarray  # E/G [-]
    modification: dict[str, np.ndarray]  # MODIFICATION_ATTRIBUTES -> factor [-], NaN where not given
    defaults_used: tuple[str, ...]  # per building: the fields filled from project defaults, e.g. "height_m"
    attributes: pd.DataFrame  # the input attributes of the kept features, input order, index 0..n-1
    skipped: list[tuple[str, str]] = field(default_factory=list)  # ('building "B7"', reason)
    repaired: list[tuple[str, str]] = field(default_factory=list)  # ('building "B7"', what was wrong and kept)
    warnings: list[str] = field(default_factory=list)
    source: str = ""
    sources: dict[str, str] = field(default_factory=dict)  # field -> input attribute it was read from, e.g. "id"

    def __len__(self) -> int:
        return len(self.ids)

    def notes(self) -> list[str]:
        """Messages for the run's warnings: the layer's own warnings, then how many footprints were skipped and
        repaired, with the first few ids and reasons."""
        out = list(self.warnings)
        for verb, items in (("skipped", self.skipped), ("repaired", self.repaired)):
            if items:
                shown_items = "; ".join(f"{name}: {why}" for name, why in items[:10])
                more = f"; ... ({len(items) - 10} more)" if len(items) > 10 else ""
                out.append(f"{self.source}: {len(items)} footprint(s) {verb}: {shown_items}{more}")
        return out


# ------------------------------------------------------------------------------------------------------- reading
def read_buildings(path, project_crs: str, defaults: BuildingDefaults | None = None,
                   key_prefix: str = "[buildings]") -> Buildings:
    """Building footprints from a GIS polygon layer, in the project CRS, with their attributes checked.

    Parameters
    ----------
    path : path                    .gpkg, .geojson, .json or .shp file.
    project_crs : str              e.g. "EPSG:27700"; footprints are returned in it. [m]
    defaults : BuildingDefaults    Attribute names, project-level defaults, E/G table.
    key_prefix : str               Where the project keys live, for messages, e.g. 'project.toml [buildings]'.

    Returns
    -------
    Buildings  One entry per usable feature, in the layer's order; skipped and repaired footprints listed by id.

    Raises
    ------
    InputError  Naming the file, layer, building id and attribute (or project key) for any mistake.
    """
    defaults = defaults or BuildingDefaults()
    path = Path(path)
    if path.suffix.lower() not in GIS_SUFFIXES:
        raise InputError(f"{path}: building footprints must be a GIS polygon layer ({', '.join(GIS_SUFFIXES)}); "
                         f"got a {path.suffix or 'file without suffix'}")
    frame, source = read_gis_layer(path, defaults.layer, f"{key_prefix} layer")
    geoms = np.asarray(frame.geometry.values, dtype=object)
    transformer, notes = project_transformer(frame.crs, project_crs, source)
    if transformer is not None:
        _check_vertices(geoms, [f"feature {j}" for j in range(1, len(geoms) + 1)], source)

        def move(xy):
            x, y = transformer.transform(xy[:, 0], xy[:, 1])
            return np.column_stack([x, y])

        try:
            geoms = shapely.transform(geoms, move)
        except pyproj.exceptions.ProjError as exc:
            raise InputError(f"{source}: cannot be transformed from the layer's CRS ({frame.crs.to_string()}) "
                             f"to the project CRS {project_crs}: {exc}") from None
    attributes = pd.DataFrame(frame.drop(columns=frame.geometry.name))
    return buildings_from_table(geoms, attributes, defaults, source, key_prefix, notes,
                                transformed=transformer is not None)


def buildings_from_table(geometries, attributes: pd.DataFrame, defaults: BuildingDefaults | None = None,
                         source: str = "buildings", key_prefix: str = "[buildings]",
                         warnings: list[str] | None = None, transformed: bool = False) -> Buildings:
    """Buildings from footprints already in the project CRS and a table of their attributes (one row each).

    `read_buildings` reads a file and calls this; tests and notebooks can call it with shapely polygons and a
    DataFrame. Same checks, same messages.
    """
    defaults = defaults or BuildingDefaults()
    geoms = shapely.force_2d(np.asarray(geometries, dtype=object))
    attributes = attributes.reset_index(drop=True)
    if len(attributes) != len(geoms):
        raise ValueError(f"{len(geoms)} geometries but {len(attributes)} attribute rows")
    labels = _ids(attributes, defaults, source, key_prefix)
    _check_footprint_places(geoms, labels, source, transformed)

    keep, polygons, skipped, repaired = _usable_polygons(geoms, labels, source)
    k = np.flatnonzero(keep)
    table = attributes.iloc[k].reset_index(drop=True)
    ids = tuple(labels[j] for j in k)
    used = [[] for _ in k]
    height = _numbers(table, ids, defaults.height_attribute, defaults.default_height_m, "default_height_m",
                      source, key_prefix, used, gt=0.0, le=DEPTH_LIMIT_M)
    depth = _numbers(table, ids, defaults.foundation_depth_attribute, defaults.default_foundation_depth_m,
                     "default_foundation_depth_m", source, key_prefix, used, ge=0.0, le=DEPTH_LIMIT_M)
    structure, e_over_g = _structures(table, ids, defaults, source, key_prefix, used)
    modification = {}
    for name in MODIFICATION_ATTRIBUTES:
        modification[name] = (_numbers(table, ids, name, None, None, source, key_prefix, None, ge=0.0,
                                       optional=True) if name in table.columns else np.full(len(ids), np.nan))
    return Buildings(ids=ids, polygons=polygons[k], height_m=height, foundation_depth_m=depth, structure=structure,
                     e_over_g=e_over_g, modification=modification, defaults_used=tuple(", ".join(u) for u in used),
                     attributes=table, skipped=skipped, repaired=repaired, warnings=list(warnings or []),
                     source=source, sources={"id": defaults.id_attribute, "height_m": defaults.height_attribute,
                                             "foundation_depth_m": defaults.foundation_depth_attribute,
                                             "structure": defaults.structure_attribute})


def _ids(table: pd.DataFrame, defaults: BuildingDefaults, source: str, key_prefix: str) -> list[str]:
    """The id of every feature as text; missing column, empty value or a repeat is an InputError."""
    name = defaults.id_attribute
    if name not in table.columns:
        raise InputError(f"{source}: no attribute {shown(name)} ({key_prefix} id_attribute) to name the "
                         f"buildings; attributes found: {listing(table.columns) or 'none'}")
    ids, seen = [], {}
    for row, value in enumerate(table[name].tolist(), start=1):
        text = _as_text(value)
        if text is None:
            raise InputError(f"{source} feature {row}: attribute {shown(name)} is empty; every building needs an id")
        if text in seen:
            raise InputError(f"{source} feature {row}: id {shown(text)} is already used by feature {seen[text]}; "
                             "ids must be unique")
        seen[text] = row
        ids.append(text)
    return ids


def _check_vertices(geoms: np.ndarray, names: list[str], source: str, transformed: bool = False) -> None:
    """An InputError naming the first feature (`names`, one per geometry) with a vertex that is not finite or lies
    beyond +/-`COORDINATE_LIMIT_M`. [m]"""
    xy, owner = shapely.get_coordinates(geoms, return_index=True)
    bad = ~within(xy, ge=-COORDINATE_LIMIT_M, le=COORDINATE_LIMIT_M).all(axis=1)
    if bad.any():
        k = int(np.argmax(bad))
        check_coordinates(xy[k], [names[owner[k]]], source, transformed)


def _check_footprint_places(geoms: np.ndarray, labels: list[str], source: str, transformed: bool) -> None:
    """An InputError naming the first building with a vertex that is not finite or lies beyond
    +/-`COORDINATE_LIMIT_M`, or whose footprint spans more than `FOOTPRINT_EXTENT_LIMIT_M` in plan. [m]"""
    _check_vertices(geoms, [f"building {shown(label)}" for label in labels], source, transformed)
    box = shapely.bounds(geoms)
    with np.errstate(invalid="ignore"):
        extent = np.fmax(box[:, 2] - box[:, 0], box[:, 3] - box[:, 1])
    large = extent > FOOTPRINT_EXTENT_LIMIT_M
    if large.any():
        j = int(np.argmax(large))
        raise InputError(f"{source} building {shown(labels[j])}: the footprint spans {extent[j]:.0f} m in plan, more "
                         f"than {FOOTPRINT_EXTENT_LIMIT_M:.0f} m; is the layer in the CRS and units it declares?")


def _as_text(value) -> str | None:
    """An attribute value as text; None for NULL, NaN or blank. Whole floats lose their '.0' (12.0 -> "12")."""
    if _missing(value):
        return None
    if isinstance(value, (float, np.floating)) and float(value).is_integer():
        return str(int(value))
    return str(value).strip()


def _missing(value) -> bool:
    if value is None or value is pd.NA or value is pd.NaT:
        return True
    if isinstance(value, (float, np.floating)) and np.isnan(value):
        return True
    return isinstance(value, str) and not value.strip()


def _usable_polygons(geoms: np.ndarray, labels: list[str], source: str):
    """Which features are kept, their polygonal geometry (repaired where invalid), and the skipped/repaired lists."""
    n = len(geoms)
    polygons = np.empty(n, dtype=object)
    keep = np.zeros(n, dtype=bool)
    skipped, repaired = [], []
    types = shapely.get_type_id(geoms)
    empty = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    valid = shapely.is_valid(geoms)
    seen_types = set()
    for j in range(n):
        name = f"building {shown(labels[j])}"
        if empty[j]:
            skipped.append((name, "no geometry"))
            continue
        if types[j] not in (_POLYGON, _MULTIPOLYGON):
            seen_types.add(geoms[j].geom_type)
            if types[j] != _COLLECTION:
                skipped.append((name, f"a {geoms[j].geom_type}, not a polygon"))
                continue
        if valid[j] and types[j] != _COLLECTION:
            polygons[j], keep[j] = geoms[j], True
            continue
        reason = shapely.is_valid_reason(geoms[j]) if not valid[j] else "a GeometryCollection"
        area_before = geoms[j].area
        fixed = _polygonal(shapely.make_valid(geoms[j]) if not valid[j] else geoms[j])
        if fixed is None or fixed.area <= 0.0:
            skipped.append((name, f"invalid ({reason}) and no polygon is left after repair"))
            continue
        parts = len(shapely.get_parts(fixed))
        repaired.append((name, f"{reason}; repaired into {parts} polygon part(s) of {fixed.area:.1f} m2 "
                               f"(area given {area_before:.1f} m2)"))
        polygons[j], keep[j] = fixed, True
    if not keep.any():
        found = f"; geometry types found: {', '.join(sorted(seen_types))}" if seen_types else ""
        raise InputError(f"{source}: none of the {n} features is a usable polygon footprint{found}; "
                         f"first: {skipped[0][0]}: {skipped[0][1]}")
    return keep, polygons, skipped, repaired


def _polygonal(geometry):
    """The polygonal part of a geometry as a Polygon or MultiPolygon; None when there is none."""
    parts = [p for p in shapely.get_parts(geometry) if p.geom_type in ("Polygon", "MultiPolygon")]
    polys = [q for p in parts for q in shapely.get_parts(p)]
    polys = [p for p in polys if p.area > 0.0]
    if not polys:
        return None
    return polys[0] if len(polys) == 1 else shapely.MultiPolygon(polys)


def _numbers(table, ids, name, default, default_key, source, key_prefix, used, gt=None, ge=None, le=None,
             optional=False) -> np.ndarray:
    """Attribute `name` as floats, the default filling missing values; NaN left where `optional`. A value not
    `> gt` / `>= ge`, or not `<= le`, is an InputError naming the building."""
    n = len(ids)
    if name in table.columns:
        values = table[name].tolist()
    else:
        values = [None] * n
        if default is None and not optional and n:
            raise InputError(f"{source}: no attribute {shown(name)} and no {key_prefix} {default_key}; give "
                             f"the attribute or the default; attributes found: {listing(table.columns) or 'none'}")
    out = np.empty(n)
    for r, value in enumerate(values):
        if _missing(value):
            if default is None:
                if optional:
                    out[r] = np.nan
                    continue
                raise InputError(f"{source} building {shown(ids[r])}: {name} is empty and {key_prefix} "
                                 f"{default_key} is not set; give the attribute or the default")
            out[r] = default
            used[r].append(name)
            continue
        number = None
        if not isinstance(value, (bool, np.bool_)):
            try:
                number = float(value)
            except (TypeError, ValueError):
                number = None
        bound = f"more than {gt:g}" if gt is not None else f"at least {ge:g}" if ge is not None else "finite"
        if number is None or not np.isfinite(number) or (gt is not None and not number > gt) or (
                ge is not None and not number >= ge):
            raise InputError(f"{source} building {shown(ids[r])}: {name} must be a number {bound}; "
                             f"got {shown(value)}")
        if le is not None and not number <= le:
            raise InputError(f"{source} building {shown(ids[r])}: {name} must be a number at most {le:g}; "
                             f"got {shown(value)}")
        out[r] = number
    return out


def _structures(table, ids, defaults: BuildingDefaults, source, key_prefix, used):
    """Structure type per building (the E/G table's key) and its E/G."""
    known = {str(k).strip().lower(): k for k in defaults.e_over_g}
    for k, value in defaults.e_over_g.items():
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not value > 0:
            raise InputError(f"{key_prefix} e_over_g: {shown(k)} must be a number more than 0; got {shown(value)}")
    name = defaults.structure_attribute
    if defaults.default_structure is not None and defaults.default_structure.strip().lower() not in known:
        raise InputError(f"{key_prefix} default_structure must be one of the E/G table's types "
                         f"({listing(defaults.e_over_g)}); got {shown(defaults.default_structure)}")
    if name in table.columns:
        values = table[name].tolist()
    else:
        values = [None] * len(ids)
        if defaults.default_structure is None and ids:
            raise InputError(f"{source}: no attribute {shown(name)} and no {key_prefix} default_structure; give "
                             f"the attribute or the default; attributes found: {listing(table.columns) or 'none'}")
    structure, ratio = [], np.empty(len(ids))
    for r, value in enumerate(values):
        if _missing(value):
            if defaults.default_structure is None:
                raise InputError(f"{source} building {shown(ids[r])}: {name} is empty and {key_prefix} "
                                 "default_structure is not set; give the attribute or the default")
            value = defaults.default_structure
            used[r].append(name)
        key = known.get(str(value).strip().lower())
        if key is None:
            raise InputError(f"{source} building {shown(ids[r])}: {name} {shown(value)} is not in the E/G table; "
                             f"known types: {listing(defaults.e_over_g)} (add it under {key_prefix} e_over_g)")
        structure.append(str(key))
        ratio[r] = float(defaults.e_over_g[key])
    return tuple(structure), ratio


# --------------------------------------------------------------------------------------------------------- walls
@dataclass
class Walls:
    """Straight walls of the footprints (arrays of one length, w), in the order building, part, ring, position."""

    building: np.ndarray  # index into Buildings
    number: np.ndarray  # 1, 2, ... within the building
    part: np.ndarray  # 1, 2, ... polygon part of a MultiPolygon footprint (1 for a Polygon)
    start_xy: np.ndarray  # (w, 2) [m]
    end_xy: np.ndarray  # (w, 2) [m]

    def __len__(self) -> int:
        return len(self.building)

    @property
    def length_m(self) -> np.ndarray:
        return np.hypot(*(self.end_xy - self.start_xy).T)

    @property
    def direction(self) -> np.ndarray:
        """Unit vector from start to end (w, 2). [-]"""
        return (self.end_xy - self.start_xy) / self.length_m[:, None]


def footprint_walls(polygons, collinear_deg: float = COLLINEAR_TOLERANCE_DEG,
                    straightness_m: float = STRAIGHTNESS_TOLERANCE_M) -> Walls:
    """The straight walls of each footprint: ring edges, collinear pieces merged.

    A vertex where the ring turns by no more than `collinear_deg` joins the edges either side into one wall, unless
    a vertex of the merged wall lies more than `straightness_m` from the chord (then that run keeps its edges). A
    ring with fewer than three corners left keeps every edge. Footprints are normalised first
    (`shapely.normalize`), so the walls, their numbers and directions depend on the shape only.

    Parameters
    ----------
    polygons : array of Polygon or MultiPolygon   In a projected CRS. [m]

    Returns
    -------
    Walls
    """
    geoms = shapely.normalize(np.asarray(polygons, dtype=object))
    parts, owner = shapely.get_parts(geoms, return_index=True)
    first_part = np.r_[True, owner[1:] != owner[:-1]]
    part_no = np.arange(len(parts)) - np.maximum.accumulate(np.where(first_part, np.arange(len(parts)), 0)) + 1
    rings, ring_part = shapely.get_rings(parts, return_index=True)
    xy, ring = shapely.get_coordinates(rings, return_index=True)

    # Drop each ring's closing vertex, then vertices that repeat the next one (cyclically).
    count = np.bincount(ring, minlength=len(rings))
    keep = np.ones(len(xy), dtype=bool)
    keep[np.cumsum(count) - 1] = False
    xy, ring = xy[keep], ring[keep]
    for _ in range(2):  # a second pass catches a repeat across the wrap-around
        nxt = _cyclic_next(ring)
        same = np.hypot(*(xy[nxt] - xy).T) < DUPLICATE_TOLERANCE_M
        xy, ring = xy[~same], ring[~same]
    count = np.bincount(ring, minlength=len(rings))
    usable = count[ring] >= 3
    xy, ring = xy[usable], ring[usable]

    nxt, prv = _cyclic_next(ring), _cyclic_prev(ring)
    e_in, e_out = xy - xy[prv], xy[nxt] - xy
    cross = e_in[:, 0] * e_out[:, 1] - e_in[:, 1] * e_out[:, 0]
    turn = np.degrees(np.arctan2(np.abs(cross), np.einsum("ij,ij->i", e_in, e_out)))
    corner = turn > collinear_deg
    few = np.bincount(ring, weights=corner, minlength=len(rings)) < 3
    corner |= few[ring]
    wall = _wall_of_vertex(ring, corner)
    start, end = _wall_ends(ring, corner, wall, len(xy))
    # A merged run that bends away from its chord keeps its edges.
    a, b = xy[start[wall]], xy[end[wall]]
    chord = b - a
    off = np.abs(chord[:, 0] * (xy - a)[:, 1] - chord[:, 1] * (xy - a)[:, 0]) / np.hypot(*chord.T)
    bent = np.bincount(wall, weights=(off > straightness_m), minlength=len(start)) > 0
    if bent.any():
        corner |= bent[wall]
        wall = _wall_of_vertex(ring, corner)
        start, end = _wall_ends(ring, corner, wall, len(xy))

    building = owner[ring_part[ring[start]]]
    first_wall = np.r_[True, building[1:] != building[:-1]]
    number = np.arange(len(start)) - np.maximum.accumulate(np.where(first_wall, np.arange(len(start)), 0)) + 1
    return Walls(building=building, number=number, part=part_no[ring_part[ring[start]]],
                 start_xy=xy[start], end_xy=xy[end])


def _cyclic_next(ring: np.ndarray) -> np.ndarray:
    """Index of the next vertex of the same ring (the last wraps to the first); `ring` is sorted."""
    idx = np.arange(len(ring))
    last = np.r_[ring[1:] != ring[:-1], True]
    first_of = np.maximum.accumulate(np.where(np.r_[True, ring[1:] != ring[:-1]], idx, 0))
    return np.where(last, first_of, idx + 1)


def _cyclic_prev(ring: np.ndarray) -> np.ndarray:
    idx = np.arange(len(ring))
    first = np.r_[True, ring[1:] != ring[:-1]]
    last_of = np.minimum.accumulate(np.where(np.r_[ring[1:] != ring[:-1], True], idx, len(ring))[::-1])[::-1]
    return np.where(first, last_of, idx - 1)


def _wall_of_vertex(ring: np.ndarray, corner: np.ndarray) -> np.ndarray:
    """Global wall index of each vertex: walls start at corners; vertices before a ring's first corner belong to
    that ring's last wall (the one that wraps round)."""
    corners_before = np.cumsum(corner)  # inclusive, over all rings
    ring_start = np.r_[True, ring[1:] != ring[:-1]]
    base = np.maximum.accumulate(np.where(ring_start, np.arange(len(ring)), 0))
    offset = corners_before[base] - corner[base]  # corners of earlier rings
    local = corners_before - offset - 1  # -1 before the ring's first corner
    per_ring = np.bincount(ring, weights=corner).astype(int)
    local = np.where(local < 0, per_ring[ring] - 1, local)
    return offset + local


def _wall_ends(ring, corner, wall, n):
    """Start and end vertex (indices into the ring vertices) of every wall."""
    start = np.flatnonzero(corner)
    nxt_corner = np.empty(len(start), dtype=int)
    same_ring_next = np.r_[ring[start[1:]] == ring[start[:-1]], False]
    nxt_corner[:-1] = start[1:]
    # the last corner of a ring closes on the ring's first corner
    first_in_ring = np.r_[True, ~same_ring_next[:-1]]
    first_idx = np.maximum.accumulate(np.where(first_in_ring, np.arange(len(start)), 0))
    nxt_corner = np.where(same_ring_next, nxt_corner, start[first_idx])
    return start, nxt_corner
