"""Buried utility lines: reading them from a GIS file, and the allowable values per pipe material.

Sign conventions and units: plan coordinates x (east), y (north) in the project CRS [m]; depth of the pipe axis below
the ground surface, positive downward [m]; diameters in millimetres; allowable strains in microstrain (1e-6), tensile
positive; joint rotation in degrees; joint opening in millimetres.

The line file (`[utilities] file`): a GeoPackage (.gpkg) or GeoJSON (.geojson / .json) layer, one LineString (or a
one-part MultiLineString) per pipe, 2-D or 3-D. (Not a shapefile: it cuts attribute names to 10 characters.)
Attributes:

    id                            text, required, unique: names the pipe in every message and output.
    material                      required, one of `MATERIALS` (exact spelling).
    outer_diameter_mm             number from 10 to 5000, required.
    depth_m                       number more than 0: depth of the pipe axis below the ground surface; required when
                                  the levels come from the attribute (vertical = "depth"), one value per pipe; any Z
                                  of the line is then not used.
    segment_length_m              number more than 0: length of one pipe between joints; empty (NULL) or absent for
                                  continuous (welded, fused) pipe.
    allowable_bending_strain_ue, allowable_axial_strain_ue, allowable_joint_rotation_deg, allowable_joint_opening_mm
                                  numbers more than 0, optional: override the material's default for this pipe.
    bending_reduction_factor      number more than 0 and at most 1, optional, continuous pipes only: ratio of pipe to
                                  greenfield curvature from a pipe-soil interaction assessment the user has made
                                  (e.g. the relative-stiffness charts of Vorster et al. 2005). Empty = 1: the pipe
                                  follows the ground.

With vertical = "axis" the lines must be 3-D and Z is the level of the pipe axis [m]; the depth at each vertex is the
ground surface level there minus Z.

Plausible values (our choice; beyond them a value is a mistake, an error naming the pipe): x, y finite and within
+/-`COORDINATE_LIMIT_M`, Z within +/-`LEVEL_LIMIT_M`, depths at most `DEPTH_LIMIT_M`, a plan length of at most
`PIPE_LENGTH_LIMIT_M` and a segment length of at most `SEGMENT_LENGTH_LIMIT_M`.

No other attribute of the layer is carried to the output: the `utilities` layer holds the pipe's id, material and
results only.

The defaults table (`MATERIAL_LIMITS`) holds, per material, the indicative values of ../shared/methods.md section 6.2.
None of them was confirmed in a published source: each row says whether it is "common practice, no source" or
"from memory", and where the sheet gives a range the lower (more cautious) end is taken. Where the sheet gives no number
the value is empty (NaN) and that check is not made unless the pipe carries its own allowable value. Agree the real
values with each asset owner.
"""
from __future__ import annotations

import difflib
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import shapely

from ..errors import InputError
from .tables import (DEPTH_LIMIT_M, GIS_SUFFIXES, LEVEL_RANGE, PLAN_TOLERANCE_M, bounds_text, check_coordinates,
                     listing, project_transformer, read_gis_layer, shown, single_line, within)

VERTICALS = ("depth", "axis")  # depth_m attribute | Z is the pipe axis level
SUFFIXES = tuple(s for s in GIS_SUFFIXES if s != ".shp")  # shapefiles cut attribute names to 10 characters
DIAMETER_RANGE_MM = (10.0, 5000.0)  # outside this the value is almost surely in the wrong unit
LEVEL_TOLERANCE_M = 0.001  # two levels closer than this are the same [m]
PIPE_LENGTH_LIMIT_M = 50_000.0  # plan length of one pipe (our choice: a trunk main as one feature fits) [m]
SEGMENT_LENGTH_LIMIT_M = 1000.0  # pipe length between joints (our choice: pipes are made in lengths of metres) [m]
ALLOWABLE_KEYS = ("allowable_bending_strain_ue", "allowable_axial_strain_ue", "allowable_joint_rotation_deg",
                  "allowable_joint_opening_mm")
REQUIRED_ATTRIBUTES = ("id", "material", "outer_diameter_mm")


@dataclass(frozen=True)
class MaterialLimits:
    """Default allowable values of one pipe material (NaN = none known; that check then needs the pipe's own value)."""

    material: str
    description: str
    allowable_bending_strain_ue: float
    allowable_axial_strain_ue: float
    allowable_joint_rotation_deg: float
    allowable_joint_opening_mm: float
    checks_compression: bool  # True: the strain limit holds for shortening too; False: tension only
    status: str  # "common practice, no source" | "from memory" | "no values"
    source: str  # what methods.md section 6.2 says and what was taken from it


_NAN = math.nan
#: Defaults per material, from ../shared/methods.md section 6.2 (status of every row given in `source`).
MATERIAL_LIMITS: dict[str, MaterialLimits] = {
    m.material: m
    for m in (
        MaterialLimits(
            "cast_iron", "grey (pit or spun) cast iron", 100.0, 100.0, 1.0, _NAN, False, "common practice, no source",
            "methods.md 6.2: added tensile strain 100 to 300 microstrain, lower end "
            "taken; lead-run joints rotate up to about 1 deg; pull-out 'a few mm' is not a number, so none",
        ),
        MaterialLimits(
            "ductile_iron", "ductile iron (EN 545)", 1000.0, 1000.0, 1.5, _NAN, True, "from memory",
            "methods.md 6.2: pipe strain 0.1 % or more; push-in joints 1.5 to 3.5 deg falling with "
            "DN, lower end taken; no joint opening given",
        ),
        MaterialLimits(
            "steel", "welded steel", 1000.0, 1000.0, _NAN, _NAN, True, "common practice, no source",
            "methods.md 6.2: 0.1 to 0.2 % longitudinal strain, lower end taken; "
            "welded, no joints",
        ),
        MaterialLimits(
            "pe", "polyethylene PE80 / PE100", 10000.0, 10000.0, _NAN, _NAN, True, "common practice, no source",
            "methods.md 6.2: 1 to 2.5 % long term, lower end taken; fused, no joints",
        ),
        MaterialLimits(
            "pvc", "unplasticised PVC (PVC-U)", 5000.0, 5000.0, 1.0, _NAN, True, "common practice, no source",
            "methods.md 6.2: 0.5 to 1 % strain, lower end taken; socket joints 1 to 2 "
            "deg, lower end taken; no joint opening given",
        ),
        MaterialLimits(
            "vitrified_clay", "vitrified clay (EN 295)", _NAN, _NAN, math.degrees(math.atan(0.010)), _NAN, False,
            "from memory",
            "methods.md 6.2: joint deflection 80 mm/m (small DN) to 10 mm/m (large DN); 10 mm/m = "
            "0.573 deg taken; no strain or joint opening given",
        ),
        MaterialLimits(
            "concrete", "concrete (EN 1916)", _NAN, _NAN, _NAN, _NAN, False, "no values",
            "methods.md 6.2 gives no number (joints 'similar in form to clay pipes', barrel brittle in "
            "tension); give the allowable values on each pipe",
        ),
        MaterialLimits(
            "brick", "brick sewer", _NAN, _NAN, _NAN, _NAN, False, "no values",
            "methods.md 6.2 has no values for brick sewers; give the allowable values on each pipe",
        ),
    )
}
MATERIALS = tuple(MATERIAL_LIMITS)


@dataclass(frozen=True)
class Utilities:
    """Buried pipes as the assessment sees them (one entry per pipe; arrays of one length).

    `lines_xy[k]` holds the plan vertices of pipe k (n_k x 2) [m] in the project CRS and `depths_m[k]` the depth of
    its axis below the ground surface at each vertex [m]. Allowable values are the pipe's own where it gives them,
    else its material's default; NaN = no value, that check is not made. `limits_source[k]` says which.
    """

    ids: tuple[str, ...]
    materials: tuple[str, ...]
    lines_xy: tuple[np.ndarray, ...]
    depths_m: tuple[np.ndarray, ...]
    outer_diameter_mm: np.ndarray
    segment_length_m: np.ndarray  # NaN = continuous pipe
    allowable_bending_strain_ue: np.ndarray
    allowable_axial_strain_ue: np.ndarray
    allowable_joint_rotation_deg: np.ndarray
    allowable_joint_opening_mm: np.ndarray
    checks_compression: np.ndarray  # bool: the axial strain limit holds for shortening too
    bending_reduction_factor: np.ndarray  # 1 = the pipe follows the ground
    limits_source: tuple[str, ...]
    source: str = ""
    warnings: tuple[str, ...] = ()

    def __len__(self) -> int:
        return len(self.ids)

    def __post_init__(self):
        n = len(self.ids)
        for name in ("materials", "lines_xy", "depths_m", "outer_diameter_mm", "segment_length_m",
                     "allowable_bending_strain_ue", "allowable_axial_strain_ue", "allowable_joint_rotation_deg",
                     "allowable_joint_opening_mm", "checks_compression", "bending_reduction_factor",
                     "limits_source"):
            if len(getattr(self, name)) != n:
                raise ValueError(f"Utilities.{name} has {len(getattr(self, name))} entries for {n} pipes")
        for k, (xy, depth) in enumerate(zip(self.lines_xy, self.depths_m)):
            if xy.ndim != 2 or xy.shape[1] != 2 or len(xy) < 2 or depth.shape != (len(xy),):
                raise ValueError(f"pipe {self.ids[k]!r}: lines_xy must be (n >= 2) x 2 with one depth per vertex")
            if np.any(np.hypot(*np.diff(xy, axis=0).T) < PLAN_TOLERANCE_M):
                raise ValueError(f"pipe {self.ids[k]!r}: two consecutive vertices at the same plan position")

    @property
    def length_m(self) -> np.ndarray:
        """Plan length of each pipe. [m]"""
        return np.array([np.hypot(*np.diff(xy, axis=0).T).sum() for xy in self.lines_xy])

    @property
    def jointed(self) -> np.ndarray:
        """True for pipes with joints (a segment length given). [-]"""
        return np.isfinite(self.segment_length_m)


def _closest(name: str) -> str:
    close = difflib.get_close_matches(name.lower().replace(" ", "_").replace("-", "_"), MATERIALS, n=1, cutoff=0.5)
    return f"; did you mean {shown(close[0])}?" if close else ""


def _check_unique_ids(ids: tuple[str, ...], labels: list[str]) -> None:
    """An InputError when two pipes share an id."""
    seen: dict[str, int] = {}
    for k, name in enumerate(ids):
        if name in seen:
            raise InputError(f"{labels[k]}: id {shown(name)} is already used by another pipe; ids must be unique")
        seen[name] = k


def _check_materials(materials: tuple, labels: list[str]) -> None:
    """An InputError naming the pipe when a material is not one of `MATERIALS`."""
    for k, m in enumerate(materials):
        if m not in MATERIAL_LIMITS:
            raise InputError(f"{labels[k]}: material {shown(m)} is not known; known materials: "
                             f"{listing(MATERIALS)}{_closest(str(m))}")


def _outer_diameters(outer_diameter_mm, n: int, labels: list[str]) -> np.ndarray:
    """Outer diameters checked against `DIAMETER_RANGE_MM`. [mm]"""
    od = np.asarray(outer_diameter_mm, dtype=float).reshape(n)
    lo, hi = DIAMETER_RANGE_MM
    bad = ~((od >= lo) & (od <= hi))
    if bad.any():
        k = int(np.argmax(bad))
        hint = " (a diameter in metres?)" if 0 < od[k] < lo else ""
        raise InputError(f"{labels[k]}: outer_diameter_mm must be a number from {lo:g} to {hi:g} mm; got "
                         f"{od[k]:g}{hint}")
    return od


def _segment_lengths(segment_length_m, n: int, labels: list[str]) -> np.ndarray:
    """Pipe lengths between joints, more than 0 or NaN for a continuous pipe. [m]"""
    seg = np.full(n, np.nan) if segment_length_m is None else np.asarray(segment_length_m, dtype=float).reshape(n)
    bad = np.isfinite(seg) & ~(seg > 0) | np.isinf(seg)
    if bad.any():
        k = int(np.argmax(bad))
        raise InputError(f"{labels[k]}: segment_length_m must be more than 0 m (or empty for a continuous pipe); "
                         f"got {seg[k]:g}")
    bad = seg > SEGMENT_LENGTH_LIMIT_M
    if bad.any():
        k = int(np.argmax(bad))
        raise InputError(f"{labels[k]}: segment_length_m must be at most {SEGMENT_LENGTH_LIMIT_M:g} m; got {seg[k]:g}")
    return seg


def _axis_depths(lines_xy, depths_m, od: np.ndarray, labels: list[str]) -> tuple[list, list]:
    """Plan vertices [m] and the depth of the axis at each vertex [m], checked to be given, positive and at least the
    pipe's radius (od [mm])."""
    lines, depths = [], []
    for k in range(len(od)):
        xy = np.asarray(lines_xy[k], dtype=float)
        d = np.broadcast_to(np.asarray(depths_m[k], dtype=float), (len(xy),)).copy()
        if not np.all(np.isfinite(d)):
            raise InputError(f"{labels[k]}: depth_m is missing; give the depth of the pipe axis below the ground "
                             "surface [m]")
        if not np.all(d > 0):
            raise InputError(f"{labels[k]}: depth_m must be more than 0 m (depth of the pipe axis below the "
                             f"surface); got {d[np.argmin(d > 0)]:g}")
        if not np.all(d <= DEPTH_LIMIT_M):
            raise InputError(f"{labels[k]}: depth_m must be at most {DEPTH_LIMIT_M:g} m (depth of the pipe axis below "
                             f"the surface); got {d.max():g}")
        check_coordinates(xy, [f"vertex {j}" for j in range(1, len(xy) + 1)], labels[k])
        length = np.hypot(*np.diff(xy, axis=0).T).sum()
        if length > PIPE_LENGTH_LIMIT_M:
            raise InputError(f"{labels[k]}: the pipe is {length:.0f} m long in plan, more than "
                             f"{PIPE_LENGTH_LIMIT_M:.0f} m; split it, or check the layer's CRS and units")
        if np.any(d < od[k] / 2000.0):
            raise InputError(f"{labels[k]}: the pipe axis lies {d.min():g} m below the surface, less than its radius "
                             f"({od[k] / 2000.0:g} m): the pipe would stand out of the ground (depth_m is to the axis)")
        lines.append(xy)
        depths.append(d)
    return lines, depths


def _allowable_values(materials: tuple, overrides: dict | None, n: int, labels: list[str]) -> tuple[dict, dict]:
    """Per `ALLOWABLE_KEYS`, the pipes' allowable values (their own where given, else the material default) and
    which pipes gave their own."""
    limits = {key: np.array([getattr(MATERIAL_LIMITS[m], key) for m in materials], dtype=float)
              for key in ALLOWABLE_KEYS}
    given = {key: np.zeros(n, dtype=bool) for key in ALLOWABLE_KEYS}
    for key, values in (overrides or {}).items():
        if key not in ALLOWABLE_KEYS:
            raise ValueError(f"unknown allowable {key!r}; known: {ALLOWABLE_KEYS}")
        values = np.asarray(values, dtype=float).reshape(n)
        bad = np.isinf(values) | (np.isfinite(values) & ~(values > 0))
        if bad.any():
            k = int(np.argmax(bad))
            raise InputError(f"{labels[k]}: {key} must be more than 0 (or empty for the material default); got "
                             f"{values[k]:g}")
        given[key] = np.isfinite(values)
        limits[key] = np.where(given[key], values, limits[key])
    return limits, given


def _reduction_factors(bending_reduction_factor, seg: np.ndarray, n: int, labels: list[str]) -> np.ndarray:
    """Bending reduction factors in (0, 1], NaN where not given, on continuous pipes only. [-]"""
    factor = (np.full(n, np.nan) if bending_reduction_factor is None
              else np.asarray(bending_reduction_factor, dtype=float).reshape(n))
    bad = np.isfinite(factor) & ~((factor > 0) & (factor <= 1)) | np.isinf(factor)
    if bad.any():
        k = int(np.argmax(bad))
        raise InputError(f"{labels[k]}: bending_reduction_factor must be more than 0 and at most 1; got {factor[k]:g}")
    bad = np.isfinite(factor) & np.isfinite(seg)
    if bad.any():
        k = int(np.argmax(bad))
        raise InputError(f"{labels[k]}: bending_reduction_factor applies to continuous pipes only, and this pipe has "
                         f"joints (segment_length_m = {seg[k]:g})")
    return factor


def _limits_sources(materials: tuple, given: dict) -> tuple[str, ...]:
    """Per pipe, where its allowable values come from: its attributes, its material's defaults (with their status),
    or both."""
    sources = []
    for k, m in enumerate(materials):
        own = [key for key in ALLOWABLE_KEYS if given[key][k]]
        default = f"{m} defaults ({MATERIAL_LIMITS[m].status})"
        if not own:
            sources.append(default)
        elif len(own) == len(ALLOWABLE_KEYS):
            sources.append("pipe attributes")
        else:
            sources.append(f"pipe attributes for {', '.join(own)}; {default} for the rest")
    return tuple(sources)


def make_utilities(ids, materials, lines_xy, depths_m, outer_diameter_mm, segment_length_m=None,
                   overrides: dict[str, np.ndarray] | None = None, bending_reduction_factor=None,
                   labels=None, source: str = "", warnings=()) -> Utilities:
    """Build `Utilities`, checking every value and filling allowable values from `MATERIAL_LIMITS`.

    Parameters
    ----------
    ids, materials : sequences of str       One per pipe; materials from `MATERIALS`.
    lines_xy : sequence of (n_k, 2) arrays  Plan vertices per pipe, project CRS. [m]
    depths_m : sequence of arrays or floats Depth of the axis below the surface, per vertex or one per pipe. [m]
    outer_diameter_mm : array_like          [mm]
    segment_length_m : array_like or None   Pipe length between joints; NaN (or None for all) = continuous. [m]
    overrides : dict or None                `ALLOWABLE_KEYS` -> per-pipe values; NaN = use the material default.
    bending_reduction_factor : array_like   In (0, 1], continuous pipes only; NaN or None = 1. [-]
    labels : sequence of str or None        How messages name each pipe (default: source and id).
    source : str                            The file the pipes came from, for messages.

    Raises
    ------
    InputError  naming the pipe and the attribute: unknown material, missing or non-positive depth, diameter out of
                range, non-positive segment length or allowable value, a reduction factor out of range or on a jointed
                pipe, a repeated id, the pipe axis less than its radius below the surface.
    """
    n = len(ids)
    ids = tuple(str(i) for i in ids)
    labels = list(labels) if labels is not None else [f"{source} pipe {shown(i)}".strip() for i in ids]
    _check_unique_ids(ids, labels)
    materials = tuple(materials)
    _check_materials(materials, labels)
    od = _outer_diameters(outer_diameter_mm, n, labels)
    seg = _segment_lengths(segment_length_m, n, labels)
    lines, depths = _axis_depths(lines_xy, depths_m, od, labels)
    limits, given = _allowable_values(materials, overrides, n, labels)
    factor = _reduction_factors(bending_reduction_factor, seg, n, labels)
    sources = _limits_sources(materials, given)
    return Utilities(
        ids=ids, materials=materials, lines_xy=tuple(lines), depths_m=tuple(depths), outer_diameter_mm=od,
        segment_length_m=seg, checks_compression=np.array([MATERIAL_LIMITS[m].checks_compression for m in materials],
                                                          dtype=bool),
        bending_reduction_factor=np.where(np.isfinite(factor), factor, 1.0), limits_source=sources,
        source=source, warnings=tuple(warnings), **limits,
    )


# ------------------------------------------------------------------------------------------------------- the file
@dataclass(frozen=True)
class UtilityReadOptions:
    """How to read the utility file (the `[utilities]` keys other than `file`).

    layer          layer to read; None = the file's only layer with geometry.
    vertical       "depth": the depth_m attribute gives the axis depth; "axis": the lines' Z is the axis level.
    surface_level  callable (x, y) -> ground surface level [m]; needed when vertical = "axis".
    key            how messages name the table, e.g. "ostrey.toml [utilities]".
    """

    layer: str | None = None
    vertical: str = "depth"
    surface_level: Callable | None = None
    key: str = "[utilities]"


def _text_cell(value) -> str | None:
    """An attribute as text; None when empty."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return None
    if isinstance(value, (float, np.floating)) and float(value).is_integer():
        value = int(value)
    text = str(value).strip()
    return text or None


def _number_cell(value, label: str, name: str) -> float:
    """An attribute as a float; NaN when empty; an InputError naming the pipe and attribute when not a number."""
    if value is None:
        return math.nan
    if isinstance(value, str):
        if not value.strip():
            return math.nan
        try:
            return float(value)
        except ValueError:
            raise InputError(f"{label}: {name} is not a number; got {shown(value)}") from None
    try:
        return float(value)
    except (TypeError, ValueError):
        raise InputError(f"{label}: {name} is not a number; got {shown(str(value))}") from None


def _plan_vertices(xyz: np.ndarray, vertical: str, label: str) -> tuple[np.ndarray, np.ndarray]:
    """Drop repeated vertices (same plan position and level); a vertical step is an error. Returns the (n, 3)
    vertices kept and their numbers in the file (from 1)."""
    keep = [0]
    for j in range(1, len(xyz)):
        a = xyz[keep[-1]]
        if np.hypot(*(xyz[j, :2] - a[:2])) >= PLAN_TOLERANCE_M:
            keep.append(j)
        elif vertical == "axis" and abs(xyz[j, 2] - a[2]) >= LEVEL_TOLERANCE_M:
            raise InputError(f"{label} vertex {j + 1}: same plan position as vertex {keep[-1] + 1} but another level "
                             f"({a[2]:g} then {xyz[j, 2]:g}); split the pipe at a vertical drop")
    if len(keep) < 2:
        raise InputError(f"{label}: the line has no length in plan (all its vertices at one place)")
    return xyz[keep], np.asarray(keep) + 1


def _check_file(path: Path, options: UtilityReadOptions) -> None:
    """An InputError when the vertical option is unknown or the file is a shapefile, of another kind or missing."""
    key = options.key
    if options.vertical not in VERTICALS:
        raise InputError(f"{key} vertical must be one of {listing(VERTICALS)}; got {shown(options.vertical)}")
    if path.suffix.lower() == ".shp":
        raise InputError(f"{key} file: {path} is a shapefile, which cuts attribute names such as outer_diameter_mm "
                         f"to 10 characters; save the layer as GeoPackage (.gpkg) or GeoJSON")
    if path.suffix.lower() not in SUFFIXES:
        raise InputError(f"{key} file: {path} is not a GIS line file; give one of {', '.join(SUFFIXES)}")
    if not path.exists():
        raise InputError(f"{key} file: {path} does not exist")


def _read_layer(path: Path, options: UtilityReadOptions):
    """The layer as a frame and its name for messages, checked to have every required attribute."""
    key = options.key
    frame, source = read_gis_layer(path, options.layer, f"{key} layer", fid_as_index=True)
    columns = [c for c in frame.columns if c != frame.geometry.name]
    required = REQUIRED_ATTRIBUTES + (("depth_m",) if options.vertical == "depth" else ())
    for name in required:
        if name not in columns:
            hint = ""
            if name == "depth_m" and frame.geometry.has_z.any():
                hint = f' (the lines have Z: if Z is the level of the pipe axis, set {key} vertical = "axis")'
            raise InputError(f"{source}: missing attribute {shown(name)}; attributes found: "
                             f"{listing(columns) or 'none'}{hint}")
    if options.vertical == "axis" and options.surface_level is None:
        raise ValueError("read_utilities: vertical = 'axis' needs options.surface_level")
    return frame, source


def _pipe_attributes(cells: dict, fid, source: str, numbers: dict[str, list]) -> tuple[str, str, str]:
    """The id, message label and material of one feature; its numeric attributes appended to `numbers` (NaN when
    empty or absent)."""
    pid = _text_cell(cells["id"])
    if pid is None:
        raise InputError(f"{source} feature {fid}: id is empty; every pipe needs an id")
    label = f"{source} pipe {shown(pid)}"
    material = _text_cell(cells["material"])
    if material is None:
        raise InputError(f"{label}: material is empty; known materials: {listing(MATERIALS)}")
    for name in numbers:
        value = _number_cell(cells.get(name), label, name) if name in cells else math.nan
        if name == "outer_diameter_mm" and math.isnan(value):
            raise InputError(f"{label}: outer_diameter_mm is empty")
        numbers[name].append(value)
    return pid, label, material


def _line_vertices(geometry_cell, label: str, transformer, options: UtilityReadOptions):
    """The (n, 3) vertices of one pipe's line in the project CRS [m], repeated ones dropped, and their numbers in the
    file (from 1)."""
    geometry = single_line(geometry_cell, label,
                           "give each continuous pipe as one line (merge the parts, or split them into pipes "
                           "with their own ids)", "a utility must be a line (LineString)")
    if options.vertical == "axis" and not geometry.has_z:
        raise InputError(f'{label}: the line has no Z, but {options.key} vertical = "axis" reads the pipe axis level '
                         "from Z; give 3-D lines or a depth_m attribute")
    xyz = shapely.get_coordinates(geometry, include_z=True)
    if transformer is not None:
        x, y = transformer.transform(xyz[:, 0], xyz[:, 1])
        xyz = np.column_stack([x, y, xyz[:, 2]])
    needed = xyz if options.vertical == "axis" else xyz[:, :2]
    bad = ~np.isfinite(needed).all(axis=1)
    if bad.any():
        raise InputError(f"{label} vertex {int(np.argmax(bad)) + 1}: a coordinate is not a number"
                         + (" (or cannot be transformed to the project CRS)" if transformer is not None else ""))
    check_coordinates(xyz[:, :2], [f"vertex {j}" for j in range(1, len(xyz) + 1)], label, transformer is not None)
    bad = ~within(xyz[:, 2], **LEVEL_RANGE) if options.vertical == "axis" else np.zeros(len(xyz), dtype=bool)
    if bad.any():
        j = int(np.argmax(bad))
        raise InputError(f"{label} vertex {j + 1}: the pipe axis level (Z) must be "
                         f"{bounds_text(**LEVEL_RANGE, symbol=' m')}; got {xyz[j, 2]:g}")
    return _plan_vertices(xyz, options.vertical, label)


def _vertex_depths(xyz: np.ndarray, number: np.ndarray, depth_cell, label: str,
                   options: UtilityReadOptions) -> np.ndarray:
    """Depth of the pipe axis below the ground surface at each vertex [m]: the surface level less Z when vertical =
    "axis", else the depth_m attribute."""
    if options.vertical == "axis":
        surface = np.asarray(options.surface_level(xyz[:, 0], xyz[:, 1]), dtype=float)
        outside = ~np.isfinite(surface)
        if outside.any():
            raise InputError(f"{label} vertex {number[np.argmax(outside)]}: outside the ground surface survey, "
                             "so its depth is not known")
        depth = surface - xyz[:, 2]
        if not np.all(depth > 0):
            j = int(np.argmin(depth > 0))
            raise InputError(f"{label} vertex {number[j]}: the pipe axis level {xyz[j, 2]:g} m is not below the "
                             f"ground surface ({surface[j]:g} m)")
        return depth
    return np.full(len(xyz), _number_cell(depth_cell, label, "depth_m"))


def read_utilities(path, project_crs: str, options: UtilityReadOptions = UtilityReadOptions()) -> Utilities:
    """Read buried utility lines (see the module docstring for the attributes) into `Utilities`.

    Parameters
    ----------
    path : path                   .gpkg, .geojson or .json file.
    project_crs : str             CRS of the project; x, y are transformed to it when the layer has another. [m]
    options : UtilityReadOptions  Layer, meaning of the levels, ground surface, key for messages.

    Returns
    -------
    Utilities  With warnings (e.g. a layer with no CRS, taken to be in the project CRS).

    Raises
    ------
    InputError  naming the file, layer and pipe (by id, or by feature number when the id is missing) and the
                attribute: every mistake in the file is one.
    """
    path = Path(path)
    _check_file(path, options)
    frame, source = _read_layer(path, options)
    transformer, notes = project_transformer(frame.crs, project_crs, source)

    ids, materials, lines, depths, labels = [], [], [], [], []
    numbers = {name: [] for name in ("outer_diameter_mm", "segment_length_m", "bending_reduction_factor")
               + ALLOWABLE_KEYS}
    for fid, row in zip(frame.index, frame.itertuples(index=False)):
        cells = dict(zip(frame.columns, row))
        pid, label, material = _pipe_attributes(cells, fid, source, numbers)
        xyz, number = _line_vertices(cells[frame.geometry.name], label, transformer, options)
        depth = _vertex_depths(xyz, number, cells.get("depth_m"), label, options)
        ids.append(pid)
        materials.append(material)
        lines.append(np.ascontiguousarray(xyz[:, :2]))
        depths.append(depth)
        labels.append(label)
    return make_utilities(
        ids, materials, lines, depths, numbers["outer_diameter_mm"], numbers["segment_length_m"],
        overrides={name: numbers[name] for name in ALLOWABLE_KEYS},
        bending_reduction_factor=numbers["bending_reduction_factor"], labels=labels, source=source,
        warnings=notes,
    )
