"""The project file: a TOML file read into a validated `settle.model.Project`.

Every path in the file is relative to the folder of the project file. Every mistake is an `InputError` of one line
naming the file, the table (and item) and the key or row, what is wrong and the value given. A key the loader does not
know is an error too, with the closest known key suggested: a typo never falls back silently to a default.

Hostile input is refused the same way: every file read (the project file first) must be a regular file, not a named
pipe, a device or a folder, and no larger than `[output] input_size_limit_mb` (the project file itself against the
default, 512 MB, before it is parsed); tables and arrays may nest at most `MAX_TOML_DEPTH` (32) levels; and every
number must be finite and plausible (the bounds are `settle.inputs.tables.COORDINATE_LIMIT_M`, `LEVEL_LIMIT_M` and
`DEPTH_LIMIT_M`, our choice): x, y and chainages (start_chainage_m, face_chainage_m, the chainages of reaches,
rivers, support reaches and sections) within +/-10 000 000 m; levels (surface_level_m, groundwater_level_m,
top_level_m, bed_level_m, water_level_m, and z, invert_z and survey z in the files) within +/-10 000 m; depths below
the surface and building heights at most 1000 m. `Project.input_files` lists the files read, in order.

Keys (units are in the names: _m metres, _mm millimetres, _pct per cent, _kn_m3 kN/m3; levels are elevations in
the project's vertical datum, up positive)

[project]
    name                text, required.
    crs                 text "EPSG:nnnn", required: a projected CRS whose axes are in metres (a geographic CRS or
                        one in feet is an error). Every coordinate of the project is in it.
[ground]
    surface_level_m     number, flat ground surface level. Give exactly one of surface_level_m, surface_points
                        and surface_raster.
    surface_points      path to a CSV with columns x, y, z [m]: at least 3 points not on one line; the surface is
                        triangulated through them.
    surface_raster      path to a single-band GeoTIFF DEM of ground levels [m], with its CRS (transformed to the
                        project's when it differs); sampled bilinearly between cell centres; nodata along a route,
                        or a route off the raster, is an error naming the chainages.
    groundwater_level_m number, required.
[[ground.layers]]       at least one, listed from the top down; each runs down to the next layer's top.
    name                text, required.
    top_level_m         number, required; strictly decreasing down the list.
    unit_weight_kn_m3   number from 5 to 30, required.
    trough_width_k      number from 0.1 to 1.5, required: trough width factor K (i = K z0).
    behaviour           "cohesive" | "granular", required.
[[drives]]              at least one shaft-to-shaft drive.
    name                text, required, unique among the drives.
    alignment           path, required: a CSV (columns x, y and exactly one of z = axis level, invert_z = invert
                        level of the bore, depth_m = depth of the axis below the surface), or a GIS line layer with
                        Z (.gpkg, .geojson, .json, .shp), vertices from the launch shaft to the reception shaft; or
                        a LandXML 1.2 alignment (.xml) in the project CRS: lines, arcs and clothoids with its
                        profile, sampled so that no chord departs from the curve by more than 5 mm.
    outer_diameter_m    number from 0.1 to 10, required: excavated diameter.
    volume_loss_pct     number more than 0 and at most 20, required.
    face_chainage_m     number, optional: chainage of the face, at least start_chainage_m; absent = drive complete.
    inner_diameter_m    number, optional, more than 0 and less than outer_diameter_m; required when the
                        alignment gives invert levels.
    trough_width_k      number from 0.1 to 1.5, optional: overrides the layers' K for this drive.
    start_chainage_m    number, default 0 (a LandXML alignment: its staStart): chainage of the first vertex.
    alignment_layer     text, optional (GIS only): layer to read; needed when the file has several layers.
    alignment_feature   text, optional (GIS only): value of the `name` attribute of the line to use; needed when
                        the layer holds several lines.
    alignment_z         "axis" (default) | "invert" | "depth", optional (GIS and LandXML; LandXML "axis" or
                        "invert"): what the line's Z, or the LandXML profile's level, is.
    alignment_name      text, optional (LandXML only): the `name` of the <Alignment> to read; needed when the file
                        holds several.
    alignment_profile   text, optional (LandXML only): the `name` of the <ProfAlign> to use; needed when the
                        alignment has several design profiles.
[[drives.reaches]]      optional, per drive: parts of the drive with their own volume loss; must not overlap.
    from_chainage_m     number, required.
    to_chainage_m       number, required, more than from_chainage_m.
    volume_loss_pct     number more than 0 and at most 20, required.
    trough_width_k      number from 0.1 to 1.5, optional.
[points]                optional.
    file                path, required: a CSV with columns id, x, y and optional depth_m (>= 0 below the
                        surface; the surface when absent). ids unique.
[output]                required.
    grid_spacing_m      number more than 0, required.
    contour_levels_mm   list of numbers more than 0, strictly increasing, at least one, required.
    grid_threshold_mm   number more than 0, default 0.1: the grid keeps nodes whose settlement reaches this.
    precision_mm        number more than 0 and less than grid_threshold_mm, default 0.001.
    input_size_limit_mb number more than 0 and at most 10 000 000, default 512: the largest input file read [MB];
                        every file the project names (a shapefile with its .shx, .dbf, .prj, .cpg) must be no larger.
    memory_limit_mb     number more than 0 and at most 10 000 000, optional: the largest memory a run may plan to use
                        [MB]; default: half of this machine's available memory.
    settlement_geotiff  true / false, default false: also write <stem>-settlement.tif.
    dxf                 true / false, default false: also write <stem>.dxf, the drawing for CAD (DXF R2013).

[construction]          optional: the construction envelope (settle.procedure.envelope).
    sequence            list of drive names in driving order, each drive once; default: the order of [[drives]].
    stage_step_m        number more than 0 and at most 50: the face step between two stages of the envelope;
                        default (our choice): a quarter of the drive's smallest trough width i = K z0.

[uncertainty]           optional: samples, seed, drives_correlated of a probabilistic run; per drive
                        [drives.volume_loss_distribution] and [drives.trough_width_distribution]
                        (settle.inputs.uncertainty_settings).
[report]                optional: document control of the report (settle.inputs.report_settings): document_number,
                        revision, title, client, prepared_by, checked_by, approved_by, paper ("A4" | "A3", default
                        "A4"), and [[report.revisions]] with revision, date and description each, oldest first.

Example
-------
    [project]
    name = "Mill Lane sewer"
    crs = "EPSG:27700"

    [ground]
    surface_level_m = 12.0
    groundwater_level_m = 9.5

    [[ground.layers]]
    name = "Made ground"
    top_level_m = 12.0
    unit_weight_kn_m3 = 18
    trough_width_k = 0.5
    behaviour = "granular"

    [[drives]]
    name = "S1-S2"
    alignment = "s1_s2.csv"
    outer_diameter_m = 1.8
    volume_loss_pct = 1.0

    [output]
    grid_spacing_m = 1.0
    contour_levels_mm = [1, 5, 10]
"""
from __future__ import annotations

import dataclasses
import difflib
import importlib.util
import math
import re
import tomllib
from pathlib import Path

import pyproj

from ..errors import InputError
from .construction_settings import CONSTRUCTION_KEYS, MAX_STAGE_STEP_M, Construction, check_sequence
from .report_settings import read_document_control
from .uncertainty_settings import DRIVE_DISTRIBUTION_KEYS, project_uncertainty, read_drive_uncertainty
from .building_settings import STIFFNESS_METHODS, AssessmentOptions
from .footprints import DEFAULT_E_OVER_G, MODIFICATION_ATTRIBUTES, BuildingDefaults, read_buildings
from .utility_lines import VERTICALS as UTILITY_VERTICALS
from .utility_lines import UtilityReadOptions, read_utilities
from .utility_settings import UtilityOptions
from .face_settings import (K0_RANGE, SUPPORT_MODES, FaceOptions, LayerStrength, River, SupportReach,
                            check_face_options, check_layer_strengths, check_rivers, check_support_reaches)
from .model import (BEHAVIOURS, DEFAULT_INPUT_SIZE_LIMIT_MB, VERTICAL_REFERENCES, Drive, Ground, Layer, Output,
                    Project, Reach, Surface)
from .tables import (COORDINATE_RANGE, DEPTH_LIMIT_M, GIS_SUFFIXES, LEVEL_RANGE, Alignment, bounds_text,
                     check_input_file, printable, read_alignment_csv, read_alignment_gis, read_points,
                     read_surface_points, shapefile_sidecars, shown)

TOP_KEYS = ("project", "ground", "drives", "points", "output", "rivers", "face", "utilities", "buildings",
            "monitoring", "construction", "report", "uncertainty")
PROJECT_KEYS = ("name", "crs")
GROUND_KEYS = ("surface_level_m", "surface_points", "surface_raster", "groundwater_level_m", "layers")
SURFACE_KEYS = ("surface_level_m", "surface_points", "surface_raster")
LAYER_KEYS = ("name", "top_level_m", "unit_weight_kn_m3", "trough_width_k", "behaviour")
STRENGTH_KEYS = ("friction_angle_deg", "cohesion_kpa", "undrained_strength_kpa", "shear_modulus_mpa", "k0")
DRIVE_KEYS = ("name", "alignment", "outer_diameter_m", "volume_loss_pct", "face_chainage_m", "inner_diameter_m",
              "trough_width_k", "start_chainage_m", "alignment_layer", "alignment_feature", "alignment_z",
              "alignment_name", "alignment_profile", "reaches",
              "face_support", *DRIVE_DISTRIBUTION_KEYS)
GIS_ONLY_KEYS = ("alignment_layer", "alignment_feature", "alignment_z")
LANDXML_KEYS = ("alignment_name", "alignment_profile", "alignment_z")
LANDXML_SUFFIXES = (".xml",)
#: The keys that apply to one kind of alignment file only, and that kind, for messages.
ALIGNMENT_FILE_KEYS = {"alignment_layer": "a GIS alignment", "alignment_feature": "a GIS alignment",
                       "alignment_z": "a GIS or LandXML alignment", "alignment_name": "a LandXML alignment",
                       "alignment_profile": "a LandXML alignment"}
START_MATCH_M = 0.001  # a start_chainage_m given beside a LandXML alignment must be its staStart to this [m]
REACH_KEYS = ("from_chainage_m", "to_chainage_m", "volume_loss_pct", "trough_width_k")
SUPPORT_KEYS = ("from_chainage_m", "to_chainage_m", "mode")
RIVER_KEYS = ("name", "drive", "from_chainage_m", "to_chainage_m", "bed_level_m", "water_level_m")
FACE_KEYS = tuple(f.name for f in dataclasses.fields(FaceOptions))
BUILDING_READ_KEYS = ("layer", "id_attribute", "height_attribute", "foundation_depth_attribute", "structure_attribute",
                      "default_height_m", "default_foundation_depth_m", "default_structure", "e_over_g")
BUILDING_KEYS = ("file",) + BUILDING_READ_KEYS + (
    "poisson_ratio", "screening_slope_limit", "screening_settlement_limit_mm", "interior_spacing_m",
    "stiffness_correction") + MODIFICATION_ATTRIBUTES
MONITORING_KEYS = ("amber_mm", "red_mm")
UTILITY_KEYS = ("file", "layer", "vertical", "sample_spacing_m", "curvature_step_m", "near_limit_fraction")
POINTS_KEYS = ("file",)
OUTPUT_KEYS = ("grid_spacing_m", "contour_levels_mm", "grid_threshold_mm", "precision_mm", "settlement_geotiff",
               "sections_chainage_m", "input_size_limit_mb", "memory_limit_mb", "dxf")
#: Tables and arrays nested deeper than this are refused (a project file needs four levels at most).
MAX_TOML_DEPTH = 32

K_RANGE = dict(ge=0.1, le=1.5)  # trough width factor K [-]
VOLUME_LOSS_RANGE = dict(gt=0.0, le=20.0)  # [%]

# key suffix -> (words for "a number of ...", symbol after a bound)
_UNITS = (("_kn_m3", "kN/m3", " kN/m3"), ("_mm", "millimetres", " mm"), ("_pct", "per cent", " %"),
          ("_deg", "degrees", " deg"), ("_kpa", "kPa", " kPa"), ("_mpa", "MPa", " MPa"), ("_m", "metres", " m"))


def load_project(path) -> Project:
    """Read and check a project file.

    Parameters
    ----------
    path : str or Path   The TOML project file; the paths inside it are relative to its folder.

    Returns
    -------
    Project  Validated inputs, with `path` set and `warnings` for the user (e.g. a GIS layer without a CRS).

    Raises
    ------
    InputError  For any mistake in the file or the files it names, with file, key or row in the message.
    """
    path = Path(path)
    doc = _read_toml(path)
    name = str(path)
    _check_keys(doc, TOP_KEYS, name)
    warnings: list[str] = []
    files = _Files(folder=path.parent, limit_mb=_size_limit(doc, name), read=[path.resolve()])

    head = _table(doc, "project", name)
    where = f"{name} [project]"
    _check_keys(head, PROJECT_KEYS, where)
    title = _text(head, "name", where)
    crs = _crs(head, where, warnings)

    ground = _ground(_table(doc, "ground", name), name, files, crs)
    drives = _drives(doc, name, files, crs, warnings)
    points = None
    if "points" in doc:
        where = f"{name} [points]"
        table = _table(doc, "points", name)
        _check_keys(table, POINTS_KEYS, where)
        points = read_points(_path(table, "file", where, files))
    output = _output(_table(doc, "output", name), f"{name} [output]", files.limit_mb)
    strengths, rivers, face = _face_inputs(doc, name, ground, drives)
    utilities, utility_options = _utilities(doc, name, files, crs, ground, warnings)
    buildings, building_options = _buildings(doc, name, files, crs, warnings)
    monitoring = None
    if "monitoring" in doc:
        where = f"{name} [monitoring]"
        table = _table(doc, "monitoring", name)
        _check_keys(table, MONITORING_KEYS, where)
        amber = _number(table, "amber_mm", where, gt=0.0)
        monitoring = (amber, _number(table, "red_mm", where, gt=amber))
    return Project(name=title, crs=crs, ground=ground, drives=drives, output=output, points=points, path=path,
                   warnings=tuple(warnings), strengths=strengths, rivers=rivers, face=face, utilities=utilities,
                   utility_options=utility_options, buildings=buildings, building_options=building_options,
                   monitoring=monitoring, input_files=tuple(files.read), construction=_construction(doc, name, drives),
                   report=read_document_control(_table(doc, "report", name, required=False), f"{name} [report]",
                                                _check_keys),
                   uncertainty=_uncertainty(doc, name))


def _uncertainty(doc: dict, file: str):
    """[uncertainty] and each drive's distributions (settle.inputs.uncertainty_settings); None without any."""
    per_drive = [read_drive_uncertainty(item, _named(item, f"{file} [[drives]] #{i}"), item["name"])
                 for i, item in enumerate(doc["drives"], start=1)]
    table = _table(doc, "uncertainty", file) if "uncertainty" in doc else None
    return project_uncertainty(table, per_drive, f"{file} [uncertainty]")


def _construction(doc: dict, file: str, drives) -> Construction | None:
    """[construction]: the drives' driving order and the face step of the envelope's stages (both optional)."""
    if "construction" not in doc:
        return None
    where = f"{file} [construction]"
    table = _table(doc, "construction", file)
    _check_keys(table, CONSTRUCTION_KEYS, where)
    sequence = check_sequence(table.get("sequence"), [d.name for d in drives], where)
    step = _number(table, "stage_step_m", where, required=False, gt=0.0, le=MAX_STAGE_STEP_M)
    return Construction(sequence=sequence, stage_step_m=step)


# ------------------------------------------------------------------------------------------------ generic helpers
def _read_toml(path: Path) -> dict:
    """The parsed TOML document; a missing file, one that is not a regular file or is larger than the default
    input size limit, a syntax error or nesting deeper than `MAX_TOML_DEPTH` is an InputError naming the file."""
    if path.exists() and not path.is_dir():
        check_input_file(path, DEFAULT_INPUT_SIZE_LIMIT_MB, "project file")
    try:
        with open(path, "rb") as stream:
            doc = tomllib.load(stream)
    except RecursionError:
        raise InputError(f"{path}: tables or arrays are nested too deeply (more than {MAX_TOML_DEPTH} levels); "
                         "a project file needs only a few") from None
    except FileNotFoundError:
        raise InputError(f"{path}: project file not found (looked for {path.resolve()})") from None
    except IsADirectoryError:
        raise InputError(f"{path}: is a folder; give the project file (.toml)") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot be read: {exc.strerror}") from None
    except UnicodeDecodeError:
        raise InputError(f"{path}: not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML: {exc}") from None
    except ValueError as exc:  # e.g. a NUL character in the file name
        raise InputError(f"{printable(path)}: cannot be read: {exc}") from None
    depth = _nesting_depth(doc)
    if depth > MAX_TOML_DEPTH:
        raise InputError(f"{path}: tables or arrays are nested {depth} levels deep, more than {MAX_TOML_DEPTH}; "
                         "a project file needs only a few")
    return doc


def _nesting_depth(doc: dict) -> int:
    """How deep tables and arrays nest in a parsed document (the document itself = 0), without recursion."""
    deepest, stack = 0, [(doc, 0)]
    while stack:
        item, depth = stack.pop()
        deepest = max(deepest, depth)
        children = item.values() if isinstance(item, dict) else item
        stack.extend((child, depth + 1) for child in children if isinstance(child, (dict, list)))
    return deepest


@dataclasses.dataclass
class _Files:
    """The files the loader reads: the folder their names are relative to, the size limit [MB], and the files read
    so far (resolved, in the order read)."""

    folder: Path
    limit_mb: float
    read: list

    def add(self, path: Path, label: str) -> None:
        """Check `path` (and a shapefile's sidecars) with `check_input_file` and record them."""
        for part in [path] + (shapefile_sidecars(path) if path.suffix.lower() == ".shp" else []):
            resolved = check_input_file(part, self.limit_mb, label)
            if resolved not in self.read:
                self.read.append(resolved)


#: The largest input size or memory limit a project may set (10 TB): beyond it a limit would limit nothing. [MB]
MAX_LIMIT_MB = 1e7


def _size_limit(doc: dict, file: str) -> float:
    """[output] input_size_limit_mb, read before any other file is. [MB]"""
    table = doc.get("output")
    if not isinstance(table, dict):
        return DEFAULT_INPUT_SIZE_LIMIT_MB
    return _number(table, "input_size_limit_mb", f"{file} [output]", required=False,
                   default=DEFAULT_INPUT_SIZE_LIMIT_MB, gt=0.0, le=MAX_LIMIT_MB)


def _named(table: dict, where: str) -> str:
    """`where` followed by the item's name when it has a usable one, e.g. `... [[drives]] #2 "East"`."""
    name = table.get("name")
    return f"{where} {shown(name)}" if isinstance(name, str) and name.strip() else where


def _check_keys(table: dict, allowed, where: str) -> None:
    """Raise InputError for the first key of `table` not in `allowed`, suggesting the closest known key."""
    for key in table:
        if key not in allowed:
            close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
            hint = f'did you mean "{close[0]}"?' if close else f"known keys: {', '.join(allowed)}"
            raise InputError(f"{where}: unknown key {shown(key)}; {hint}")


def _table(doc: dict, key: str, where: str, required: bool = True) -> dict:
    """The sub-table `[key]` of `doc`; missing (when required) or not a table is an InputError."""
    if key not in doc:
        if required:
            raise InputError(f"{where}: missing table [{key}]")
        return {}
    if not isinstance(doc[key], dict):
        raise InputError(f"{where}: [{key}] must be a table (a [{key}] header with keys under it); "
                         f"got {shown(doc[key])}")
    return doc[key]


def _tables(doc: dict, key: str, label: str, where: str) -> list[dict]:
    """The array of tables `[[label]]` under `key`: at least one, each a table."""
    if key not in doc:
        raise InputError(f"{where}: missing [[{label}]]; give at least one")
    items = doc[key]
    if not isinstance(items, list) or not items or not all(isinstance(item, dict) for item in items):
        got = "a single table" if isinstance(items, dict) else shown(items)
        raise InputError(f"{where}: {key} must be one or more tables, each under a [[{label}]] header; got {got}")
    return items


def _unit(key: str) -> tuple[str, str]:
    """(words, symbol) of the unit a key's suffix names; ("", "") for a dimensionless key."""
    name = key.split(" ")[0]  # "contour_levels_mm item 2" -> "contour_levels_mm"
    for suffix, words, symbol in _UNITS:
        if name.endswith(suffix):
            return words, symbol
    return "", ""


def _number(table: dict, key: str, where: str, *, required: bool = True, default: float | None = None,
            gt: float | None = None, ge: float | None = None, le: float | None = None,
            lt: float | None = None) -> float | None:
    """Value of `key` as a float, checked against the bounds (gt: >, ge: >=, le: <=, lt: <).

    A missing key gives `default` unless `required`; a bool, text or non-finite value is an InputError naming the
    key and the value given.
    """
    if key not in table:
        if required:
            raise InputError(f"{where}: missing required key {key}")
        return default
    value = table[key]
    words, symbol = _unit(key)
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        positive = "positive " if (gt is not None and gt >= 0) or (ge is not None and ge > 0) else ""
        kind = f"a {positive}number" + (f" of {words}" if words else "")
        raise InputError(f"{where}: {key} must be {kind}; got {shown(value)}")
    if ((gt is not None and not value > gt) or (ge is not None and not value >= ge)
            or (le is not None and not value <= le) or (lt is not None and not value < lt)):
        raise InputError(f"{where}: {key} must be {bounds_text(gt, ge, le, lt, symbol)}; got {shown(value)}")
    return float(value)


def _text(table: dict, key: str, where: str, *, required: bool = True, choices=None,
          default: str | None = None) -> str | None:
    """Value of `key` as non-empty text, one of `choices` when given."""
    if key not in table:
        if required:
            raise InputError(f"{where}: missing required key {key}")
        return default
    value = table[key]
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"{where}: {key} must be non-empty text in quotes; got {shown(value)}")
    if choices is not None and value not in choices:
        raise InputError(f"{where}: {key} must be one of {', '.join(map(shown, choices))}; got {shown(value)}")
    return value


def _path(table: dict, key: str, where: str, files: _Files) -> Path:
    """The file `key` names, relative to the project folder: it must exist and be a regular file within the size
    limit; it is recorded among the files read."""
    value = _text(table, key, where)
    path = files.folder / value
    named = f"{where}: {key} = {shown(value)}"
    try:
        exists, folder, full = path.exists(), path.is_dir(), path.resolve()
    except (OSError, ValueError) as exc:
        raise InputError(f"{named}: not a usable file name: {getattr(exc, 'strerror', None) or exc}") from None
    if not exists:
        raise InputError(f"{named}: file not found: {printable(full)}")
    if folder:
        raise InputError(f"{named}: a folder, not a file: {printable(full)}")
    files.add(path, named)
    return path


# ------------------------------------------------------------------------------------------------------- sections
def _crs(table: dict, where: str, warnings: list[str]) -> str:
    """The project CRS as "EPSG:nnnn": projected, with axes in metres."""
    value = _text(table, "crs", where)
    if not re.fullmatch(r"EPSG:\d+", value.strip(), flags=re.IGNORECASE):
        raise InputError(f'{where}: crs must be an EPSG code written "EPSG:nnnn" (e.g. "EPSG:27700"); '
                         f"got {shown(value)}")
    code = value.strip().upper()
    try:
        crs = pyproj.CRS.from_user_input(code)
    except pyproj.exceptions.CRSError:
        raise InputError(f"{where}: crs {shown(value)} is not a known EPSG coordinate reference system") from None
    plan = crs.sub_crs_list[0] if crs.is_compound else crs
    if not plan.is_projected:
        raise InputError(f"{where}: crs {shown(value)} ({crs.name}) is not projected (its coordinates are "
                         f"angles); give a projected CRS in metres")
    units = {axis.unit_name for axis in plan.axis_info}
    if units != {"metre"}:
        raise InputError(f"{where}: crs {shown(value)} ({crs.name}) has axes in {', '.join(sorted(units))}; "
                         f"give a projected CRS in metres")
    method = plan.coordinate_operation.method_name if plan.coordinate_operation else ""
    if "Pseudo Mercator" in method:
        warnings.append(f"{where}: crs {code} is Web Mercator, whose metres are not ground metres away from the "
                        "equator; lengths, offsets and volumes will be wrong; prefer a national grid or UTM zone")
    return code


def _ground(table: dict, file: str, files: _Files, crs: str) -> Ground:
    """[ground] and its [[ground.layers]]."""
    where = f"{file} [ground]"
    _check_keys(table, GROUND_KEYS, where)
    given = [k for k in SURFACE_KEYS if k in table]
    if len(given) != 1:
        raise InputError(f"{where}: give exactly one of surface_level_m (flat ground), surface_points (CSV of x, y, "
                         f"z) or surface_raster (a GeoTIFF DEM); got {' and '.join(given) if given else 'none'}")
    if "surface_level_m" in table:
        surface = Surface(level_m=_number(table, "surface_level_m", where, **LEVEL_RANGE),
                          source=f"{where} surface_level_m")
    elif "surface_raster" in table:
        from .dem_surface import read_dem

        path = _path(table, "surface_raster", where, files)
        surface = Surface(raster=read_dem(path, crs, f"{where} surface_raster"), source=str(path))
    else:
        surface = read_surface_points(_path(table, "surface_points", where, files))
    water = _number(table, "groundwater_level_m", where, **LEVEL_RANGE)
    layers = []
    for i, item in enumerate(_tables(table, "layers", "ground.layers", where), start=1):
        layers.append(_layer(item, f"{file} [[ground.layers]] #{i}", layers[-1] if layers else None))
    return Ground(surface=surface, groundwater_level_m=water, layers=tuple(layers))


def _layer(table: dict, where: str, above: Layer | None) -> Layer:
    """One [[ground.layers]] item; its top must lie below the top of the layer `above`."""
    where = _named(table, where)
    _check_keys(table, LAYER_KEYS + STRENGTH_KEYS, where)
    name = _text(table, "name", where)
    top = _number(table, "top_level_m", where, **LEVEL_RANGE)
    if above is not None and not top < above.top_level_m:
        raise InputError(f'{where}: top_level_m must be below the top of the layer above ("{above.name}", '
                         f"{above.top_level_m:g} m): layers go from the top down; got {shown(table['top_level_m'])}")
    return Layer(name=name, top_level_m=top,
                 unit_weight_kn_m3=_number(table, "unit_weight_kn_m3", where, ge=5.0, le=30.0),
                 trough_width_k=_number(table, "trough_width_k", where, **K_RANGE),
                 behaviour=_text(table, "behaviour", where, choices=BEHAVIOURS))


def _drives(doc: dict, file: str, files: _Files, crs: str, warnings: list[str]) -> tuple[Drive, ...]:
    """Every [[drives]] item; names unique."""
    drives: list[Drive] = []
    for i, item in enumerate(_tables(doc, "drives", "drives", file), start=1):
        drive = _drive(item, f"{file} [[drives]] #{i}", files, crs, warnings)
        for j, other in enumerate(drives, start=1):
            if other.name == drive.name:
                raise InputError(f"{file} [[drives]] #{i} {shown(drive.name)}: name is already used by "
                                 f"[[drives]] #{j}; drive names must be unique")
        drives.append(drive)
    return tuple(drives)


def _drive(table: dict, where: str, files: _Files, crs: str, warnings: list[str]) -> Drive:
    """One [[drives]] item, with its alignment read and checked."""
    where = _named(table, where)
    _check_keys(table, DRIVE_KEYS, where)
    name = _text(table, "name", where)
    outer = _number(table, "outer_diameter_m", where, ge=0.1, le=10.0)
    inner = _number(table, "inner_diameter_m", where, required=False, gt=0.0, lt=outer)
    given_start = _number(table, "start_chainage_m", where, required=False, **COORDINATE_RANGE)
    alignment, start = _alignment(table, where, files, crs, given_start)
    face = _chainage_after(table, "face_chainage_m", where, ge=start, required=False)
    volume_loss = _number(table, "volume_loss_pct", where, **VOLUME_LOSS_RANGE)
    k = _number(table, "trough_width_k", where, required=False, **K_RANGE)
    reaches = _reaches(table, where)
    support = _face_support(table, where, name)
    warnings.extend(alignment.warnings)
    if alignment.vertical == "invert" and inner is None:
        raise InputError(f"{where}: the alignment gives invert levels ({alignment.source}); inner_diameter_m is "
                         "needed to find the axis")
    return Drive(name=name, alignment_xy=alignment.xy, alignment_v=alignment.v, vertical=alignment.vertical,
                 outer_diameter_m=outer, volume_loss_pct=volume_loss, inner_diameter_m=inner, trough_width_k=k,
                 face_chainage_m=face, start_chainage_m=start, reaches=reaches, source=alignment.source,
                 face_support=support)


def _chainage_after(table: dict, key: str, where: str, *, required: bool = True, gt: float | None = None,
                    ge: float | None = None) -> float | None:
    """A chainage [m] after another (`> gt` or `>= ge`), within +/-`COORDINATE_LIMIT_M`; each bound has its own
    message."""
    value = _number(table, key, where, required=required, gt=gt, ge=ge)
    return value if value is None else _number(table, key, where, **COORDINATE_RANGE)


def _alignment(table: dict, where: str, files: _Files, crs: str, given_start: float | None) -> tuple[Alignment, float]:
    """The drive's alignment file, CSV, GIS or LandXML by its suffix, and the chainage of its first vertex
    (start_chainage_m, default 0; a LandXML alignment's staStart). Keys of another kind of file are an error."""
    path = _path(table, "alignment", where, files)
    suffix = path.suffix.lower()
    kind = ("csv" if suffix == ".csv" else "gis" if suffix in GIS_SUFFIXES else
            "landxml" if suffix in LANDXML_SUFFIXES else None)
    if kind is None:
        raise InputError(f"{where}: alignment must be a .csv file, a GIS line layer ({', '.join(GIS_SUFFIXES)}) or "
                         f"a LandXML file (.xml); got {shown(table['alignment'])}")
    allowed = {"csv": (), "gis": GIS_ONLY_KEYS, "landxml": LANDXML_KEYS}[kind]
    for key in ALIGNMENT_FILE_KEYS:
        if key in table and key not in allowed:
            what = {"csv": "a CSV, whose vertical column (z, invert_z or depth_m) says what its values are",
                    "gis": "a GIS layer", "landxml": "a LandXML file"}[kind]
            raise InputError(f"{where}: {key} applies only to {ALIGNMENT_FILE_KEYS[key]}; {path.name} is {what}")
    if kind == "landxml":
        from .landxml import read_alignment_landxml

        alignment, sta_start = read_alignment_landxml(
            path, name=_text(table, "alignment_name", where, required=False),
            z_means=_text(table, "alignment_z", where, required=False, choices=("axis", "invert"), default="axis"),
            profile=_text(table, "alignment_profile", where, required=False))
        if given_start is not None and abs(given_start - sta_start) > START_MATCH_M:
            raise InputError(f"{where}: start_chainage_m = {given_start:g} but the LandXML alignment starts at "
                             f"station {sta_start:.3f} ({alignment.source}); leave start_chainage_m out to take "
                             "the alignment's")
        return alignment, sta_start
    start = 0.0 if given_start is None else given_start
    if kind == "csv":
        return read_alignment_csv(path), start
    return read_alignment_gis(path, crs, z_means=_text(table, "alignment_z", where, required=False,
                                                        choices=VERTICAL_REFERENCES, default="axis"),
                              layer=_text(table, "alignment_layer", where, required=False),
                              feature=_text(table, "alignment_feature", where, required=False)), start


def _drive_items(drive: dict, key: str, allowed, where: str):
    """(number, table, label) for each item of a drive's [[drives.<key>]] in turn, its keys checked; none if absent."""
    if key not in drive:
        return
    for i, table in enumerate(_tables(drive, key, f"drives.{key}", where), start=1):
        at = f"{where} [[drives.{key}]] #{i}"
        _check_keys(table, allowed, at)
        yield i, table, at


def _reaches(drive: dict, where: str) -> tuple[Reach, ...]:
    """The drive's [[drives.reaches]], sorted by from_chainage_m; overlapping reaches are an error naming both."""
    items = []
    for i, table, at in _drive_items(drive, "reaches", REACH_KEYS, where):
        start = _number(table, "from_chainage_m", at, **COORDINATE_RANGE)
        reach = Reach(from_chainage_m=start, to_chainage_m=_chainage_after(table, "to_chainage_m", at, gt=start),
                      volume_loss_pct=_number(table, "volume_loss_pct", at, **VOLUME_LOSS_RANGE),
                      trough_width_k=_number(table, "trough_width_k", at, required=False, **K_RANGE))
        items.append((i, reach))
    items.sort(key=lambda item: item[1].from_chainage_m)
    for (i, a), (j, b) in zip(items[:-1], items[1:]):
        if b.from_chainage_m < a.to_chainage_m:
            raise InputError(f"{where}: [[drives.reaches]] #{i} ({a.from_chainage_m:g} to {a.to_chainage_m:g} m) "
                             f"and #{j} ({b.from_chainage_m:g} to {b.to_chainage_m:g} m) overlap")
    return tuple(reach for _, reach in items)


def _output(table: dict, where: str, size_limit_mb: float) -> Output:
    """[output]: grid spacing, contour levels, grid threshold and precision, the limits of a run (the size limit of
    input files [MB] is read before any file, by `_size_limit`)."""
    _check_keys(table, OUTPUT_KEYS, where)
    spacing = _number(table, "grid_spacing_m", where, gt=0.0)
    levels = _levels(table, "contour_levels_mm", where)
    threshold = _number(table, "grid_threshold_mm", where, required=False, default=0.1, gt=0.0)
    precision = _number(table, "precision_mm", where, required=False, default=0.001, gt=0.0)
    if not precision < threshold:
        raise InputError(f"{where}: precision_mm must be less than grid_threshold_mm ({threshold:g} mm); "
                         f"got {precision:g}")
    geotiff = table.get("settlement_geotiff", False)
    if not isinstance(geotiff, bool):
        raise InputError(f"{where}: settlement_geotiff must be true or false; got {shown(geotiff)}")
    if geotiff and importlib.util.find_spec("rasterio") is None:
        raise InputError(f"{where}: settlement_geotiff = true needs rasterio; install it with "
                         'pip install -e ".[raster]" or set settlement_geotiff = false')
    dxf = table.get("dxf", False)
    if not isinstance(dxf, bool):
        raise InputError(f"{where}: dxf must be true or false; got {shown(dxf)}")
    sections = ()
    if "sections_chainage_m" in table:
        value = table["sections_chainage_m"]
        if not isinstance(value, list) or not value:
            raise InputError(f"{where}: sections_chainage_m must be a non-empty list of chainages in metres, "
                             f"e.g. [120, 295]; got {shown(value)}")
        sections = tuple(_number({f"sections_chainage_m item {j}": v}, f"sections_chainage_m item {j}", where,
                                 **COORDINATE_RANGE) for j, v in enumerate(value, start=1))
    return Output(grid_spacing_m=spacing, contour_levels_mm=levels, grid_threshold_mm=threshold,
                  precision_mm=precision, settlement_geotiff=geotiff, dxf=dxf, sections_chainage_m=sections,
                  input_size_limit_mb=size_limit_mb,
                  memory_limit_mb=_number(table, "memory_limit_mb", where, required=False, gt=0.0,
                                                 le=MAX_LIMIT_MB))


def _levels(table: dict, key: str, where: str) -> tuple[float, ...]:
    """A non-empty, strictly increasing list of positive numbers. [mm]"""
    if key not in table:
        raise InputError(f"{where}: missing required key {key}")
    value = table[key]
    if not isinstance(value, list) or not value:
        raise InputError(f"{where}: {key} must be a non-empty list of millimetres, e.g. [1, 5, 10]; "
                         f"got {shown(value)}")
    levels = tuple(_number({f"{key} item {j}": v}, f"{key} item {j}", where, gt=0.0)
                   for j, v in enumerate(value, start=1))
    for j in range(1, len(levels)):
        if not levels[j] > levels[j - 1]:
            raise InputError(f"{where}: {key} must increase strictly; item {j + 1} ({levels[j]:g}) follows "
                             f"{levels[j - 1]:g}")
    return levels


# ----------------------------------------------------------------------------------------------- face support
def _face_support(drive: dict, where: str, name: str) -> tuple[SupportReach, ...]:
    """The drive's [[drives.face_support]]: support mode ("slurry" | "air_cushion") per reach."""
    if "face_support" not in drive:
        return ()
    reaches = []
    for _, table, at in _drive_items(drive, "face_support", SUPPORT_KEYS, where):
        reaches.append(SupportReach(from_chainage_m=_number(table, "from_chainage_m", at, **COORDINATE_RANGE),
                                    to_chainage_m=_number(table, "to_chainage_m", at, **COORDINATE_RANGE),
                                    mode=_text(table, "mode", at, choices=SUPPORT_MODES)))
    check_support_reaches(reaches, name, where.split(" [[")[0])
    return tuple(reaches)


def _face_inputs(doc: dict, file: str, ground: Ground, drives) -> tuple[tuple, tuple, FaceOptions | None]:
    """Layer strengths, [[rivers]] and [face]. The face check runs when the layers carry strengths; rivers or a
    [face] table without them is an error, as is a layer without them when another has them."""
    tables = [item for item in doc["ground"]["layers"]]
    given = [any(k in t for k in STRENGTH_KEYS) for t in tables]
    strengths: tuple = ()
    if any(given):
        items = []
        for i, (table, layer) in enumerate(zip(tables, ground.layers), start=1):
            where = f'{file} [[ground.layers]] #{i} "{layer.name}"'
            if not given[i - 1]:
                raise InputError(f"{where}: friction_angle_deg and cohesion_kpa are missing; the face support check "
                                 "needs the strength of every layer once one layer has it")
            items.append(LayerStrength(
                friction_angle_deg=_number(table, "friction_angle_deg", where, ge=0.0, le=50.0),
                cohesion_kpa=_number(table, "cohesion_kpa", where, ge=0.0),
                undrained_strength_kpa=_number(table, "undrained_strength_kpa", where, required=False, gt=0.0),
                shear_modulus_mpa=_number(table, "shear_modulus_mpa", where, required=False, gt=0.0),
                k0=_number(table, "k0", where, required=False, ge=K0_RANGE[0], le=K0_RANGE[1])))
        strengths = tuple(items)
        check_layer_strengths(strengths, ground.layers, file)

    rivers = []
    if "rivers" in doc:
        for i, table in enumerate(_tables(doc, "rivers", "rivers", file), start=1):
            at = _named(table, f"{file} [[rivers]] #{i}")
            _check_keys(table, RIVER_KEYS, at)
            rivers.append(River(drive=_text(table, "drive", at), name=_text(table, "name", at, required=False,
                                                                                default=""),
                                from_chainage_m=_number(table, "from_chainage_m", at, **COORDINATE_RANGE),
                                to_chainage_m=_number(table, "to_chainage_m", at, **COORDINATE_RANGE),
                                bed_level_m=_number(table, "bed_level_m", at, **LEVEL_RANGE),
                                water_level_m=_number(table, "water_level_m", at, **LEVEL_RANGE)))
        check_rivers(rivers, [d.name for d in drives], file)

    face = None
    if "face" in doc:
        where = f"{file} [face]"
        table = _table(doc, "face", file)
        _check_keys(table, FACE_KEYS, where)
        values = {}
        for f in dataclasses.fields(FaceOptions):
            if f.name not in table:
                continue
            if f.name == "support_mode":
                values[f.name] = _text(table, f.name, where, choices=SUPPORT_MODES)
            elif f.name == "blowout_side_shear":
                if not isinstance(table[f.name], bool):
                    raise InputError(f"{where}: blowout_side_shear must be true or false; got {shown(table[f.name])}")
                values[f.name] = table[f.name]
            else:
                values[f.name] = _number(table, f.name, where)
        face = FaceOptions(**values)
        check_face_options(face, file)
    if (rivers or face is not None) and not strengths:
        raise InputError(f"{file}: [[rivers]] and [face] are for the face support check, which needs "
                         "friction_angle_deg and cohesion_kpa (and undrained_strength_kpa for cohesive layers) on "
                         "every [[ground.layers]] item")
    return strengths, tuple(rivers), face


# ----------------------------------------------------------------------------------------------------- utilities
def _utilities(doc: dict, file: str, files: _Files, crs: str, ground: Ground, warnings: list[str]):
    """[utilities]: the buried pipes to assess, and the assessment's settings; (None, None) when absent."""
    if "utilities" not in doc:
        return None, None
    where = f"{file} [utilities]"
    table = _table(doc, "utilities", file)
    _check_keys(table, UTILITY_KEYS, where)
    from .ground import GroundModel

    read = UtilityReadOptions(layer=_text(table, "layer", where, required=False),
                              vertical=_text(table, "vertical", where, required=False, choices=UTILITY_VERTICALS,
                                             default="depth"),
                              surface_level=GroundModel(ground).surface_level, key=where)
    utilities = read_utilities(_path(table, "file", where, files), crs, read)
    warnings.extend(utilities.warnings)
    defaults = UtilityOptions()
    options = UtilityOptions(
        sample_spacing_m=_number(table, "sample_spacing_m", where, required=False,
                                 default=defaults.sample_spacing_m, gt=0.0, le=0.5),
        curvature_step_m=_number(table, "curvature_step_m", where, required=False,
                                 default=defaults.curvature_step_m, gt=0.0, le=0.25),
        near_limit_fraction=_number(table, "near_limit_fraction", where, required=False,
                                    default=defaults.near_limit_fraction, gt=0.0, lt=1.0),
        key=where)
    return utilities, options


# ----------------------------------------------------------------------------------------------------- buildings
def _buildings(doc: dict, file: str, files: _Files, crs: str, warnings: list[str]):
    """[buildings]: the footprints to assess and the assessment's settings; (None, None) when absent."""
    if "buildings" not in doc:
        return None, None
    where = f"{file} [buildings]"
    table = _table(doc, "buildings", file)
    _check_keys(table, BUILDING_KEYS, where)
    e_over_g = dict(DEFAULT_E_OVER_G)
    if "e_over_g" in table:
        types = _table(table, "e_over_g", where)
        for name in types:
            e_over_g[name.lower()] = _number(types, name, f"{where} e_over_g", gt=0.0)
    text = {k: _text(table, k, where, required=False) for k in ("layer", "id_attribute", "height_attribute",
                                                                "foundation_depth_attribute", "structure_attribute")}
    defaults = BuildingDefaults(
        **{k: v for k, v in text.items() if v is not None},
        default_height_m=_number(table, "default_height_m", where, required=False, gt=0.0, le=DEPTH_LIMIT_M),
        default_foundation_depth_m=_number(table, "default_foundation_depth_m", where, required=False, ge=0.0,
                                           le=DEPTH_LIMIT_M),
        default_structure=_text(table, "default_structure", where, required=False),
        e_over_g=e_over_g)
    base = AssessmentOptions()
    options = AssessmentOptions(
        poisson_ratio=_number(table, "poisson_ratio", where, required=False, default=base.poisson_ratio,
                              ge=0.0, lt=0.5),
        screening_slope_limit=_number(table, "screening_slope_limit", where, required=False,
                                      default=base.screening_slope_limit, gt=0.0),
        screening_settlement_limit_mm=_number(table, "screening_settlement_limit_mm", where, required=False,
                                              default=base.screening_settlement_limit_mm, gt=0.0),
        interior_spacing_m=_number(table, "interior_spacing_m", where, required=False,
                                   default=base.interior_spacing_m, gt=0.0),
        stiffness_correction=_text(table, "stiffness_correction", where, required=False, default="none",
                                   choices=tuple(STIFFNESS_METHODS)),
        modification_factors={k: _number(table, k, where, ge=0.0) for k in MODIFICATION_ATTRIBUTES if k in table},
        key_prefix=where)
    options.check()
    buildings = read_buildings(_path(table, "file", where, files), crs, defaults, where)
    warnings.extend(buildings.notes())
    return buildings, options
