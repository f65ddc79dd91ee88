"""Reading the files a project points to: CSV tables and GIS line layers, with errors that name the file and the row.

CSV files
    UTF-8 text (a byte-order mark written by a spreadsheet is fine), comma separated, one header line of column names.
    A row is named by its line number in the file, header = line 1: the same number a spreadsheet shows beside the
    row. Extra columns are ignored, rows whose cells are all empty are skipped, and an empty or non-numeric cell in a
    column that is used is an error naming the row and the column (never a silent default).

GIS line layers (.gpkg, .geojson / .json, .shp)
    Read with pyogrio. The line must be a LineString, or a MultiLineString of one part, WITH Z. x, y are reprojected
    to the project CRS when the layer has another CRS; a layer with no CRS is taken to be in the project CRS (the
    reader returns a warning saying so). Z is never changed.

Files
    Every file read must be a regular file (a named pipe, a device or a folder is refused before it is opened) no
    larger than the project's `[output] input_size_limit_mb` (`check_input_file`).

Plausible values (`COORDINATE_LIMIT_M`, `LEVEL_LIMIT_M`, `DEPTH_LIMIT_M`: our choice)
    x, y and chainages within +/-10 000 km, levels within +/-10 km of the datum, depths below the surface at most
    1 km. A value beyond is a mistake (a wrong unit or CRS, a corrupt cell), and an error naming the row.

Alignment checks (both sources)
    at least 2 vertices; no two consecutive vertices at the same plan position (closer than `PLAN_TOLERANCE_M`): the
    same level too means a repeated vertex, a different level a vertical step, and both are errors; no vertex where
    the plan turning angle between the segments either side is 90 degrees or more (the route doubles back); depths
    below the surface (depth_m / alignment_z = "depth") more than 0.
"""
from __future__ import annotations

import csv
import io
import os
import stat
import warnings as python_warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyogrio
import pyproj
import shapely

from ..errors import InputError, where
from .model import Points, Surface

GIS_SUFFIXES = (".gpkg", ".geojson", ".json", ".shp")
CSV_VERTICAL_COLUMNS = {"z": "axis", "invert_z": "invert", "depth_m": "depth"}  # column -> Drive.vertical
PLAN_TOLERANCE_M = 0.001  # vertices closer than this in plan are at the same plan position [m]
LEVEL_TOLERANCE_M = 0.001  # vertical values closer than this are the same [m]
MAX_TURN_DEG = 90.0  # a plan turn of this or more means the route doubles back [deg]
ANGLE_TOLERANCE_DEG = 1e-9  # turns this close to MAX_TURN_DEG count as reaching it (rounding of cos 90) [deg]

# Bounds of a plausible value (our choice, not a standard). Beyond them a value is a mistake (a wrong unit, a wrong
# CRS, a corrupt cell), never a real place; within them a double resolves far below a millimetre (about 2 nm at
# 1e7 m), while at 1e16 m it no longer resolves a metre.
#: |x|, |y| of any place in the project CRS, and |chainage| along a drive. [m]
COORDINATE_LIMIT_M = 1.0e7
#: |level| in the project's vertical datum: axis and invert levels, ground surface, groundwater, layer tops, river bed
#: and water; the deepest mine and the highest mountain lie well within. [m]
LEVEL_LIMIT_M = 1.0e4
#: Depth below the ground surface of an axis, a point, a pipe or a foundation, and the height of a building. [m]
DEPTH_LIMIT_M = 1.0e3
#: Files beside a shapefile that GDAL reads with it (index, attributes, CRS, code page).
SHAPEFILE_SIDECARS = (".shx", ".dbf", ".prj", ".cpg")
COORDINATE_RANGE = dict(ge=-COORDINATE_LIMIT_M, le=COORDINATE_LIMIT_M)  # also chainages [m]
LEVEL_RANGE = dict(ge=-LEVEL_LIMIT_M, le=LEVEL_LIMIT_M)  # [m]
_FILE_KINDS = ((stat.S_ISDIR, "a folder"), (stat.S_ISFIFO, "a named pipe (FIFO)"), (stat.S_ISCHR, "a character device"),
               (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket"))


def shown(value) -> str:
    """A value as a message shows it: text in double quotes (a line break or other control character escaped, so a
    message stays one line), TOML's true/false, "a table" for a table."""
    if isinstance(value, str):
        return f'"{printable(value)}"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, dict):
        return "a table"
    return str(value)


def printable(text) -> str:
    """Text (or a path) with line breaks and other characters that do not print escaped, e.g. "\\n", so a message
    that shows it stays one line."""
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in str(text))


def number_text(value: float) -> str:
    """A bound as a message shows it: whole numbers in full (10000000, not 1e+07), others as `:g`."""
    value = float(value)
    return str(int(value)) if value.is_integer() and abs(value) < 1e15 else f"{value:g}"


def bounds_text(gt=None, ge=None, le=None, lt=None, symbol: str = "") -> str:
    """An allowed range as words, e.g. "from 0.1 to 10 m" or "more than 0 and at most 1000 m"."""
    if ge is not None and le is not None:
        return f"from {number_text(ge)} to {number_text(le)}{symbol}"
    parts = [f"{word} {number_text(bound)}" for word, bound in
             (("more than", gt), ("at least", ge), ("at most", le), ("less than", lt)) if bound is not None]
    return " and ".join(parts) + symbol


def within(values, gt=None, ge=None, le=None, lt=None) -> np.ndarray:
    """True where a value is finite and inside the bounds (gt: >, ge: >=, le: <=, lt: <). [-]"""
    values = np.asarray(values, dtype=float)
    ok = np.isfinite(values)
    for bound, test in ((gt, np.greater), (ge, np.greater_equal), (le, np.less_equal), (lt, np.less)):
        if bound is not None:
            ok &= test(values, bound)
    return ok


def check_input_file(path, limit_mb: float | None = None, label: str | None = None) -> Path:
    """Refuse an input file that is not a regular file, or is larger than `limit_mb`, before anything opens it.

    A named pipe would block the read and a device (/dev/zero) never end; `os.stat` tells both without opening.

    Parameters
    ----------
    path : path            The file.
    limit_mb : float       Largest size allowed; None = no size check (the kind is always checked). [MB]
    label : str or None    Who names the file, for messages, e.g. 'project.toml [points] file = "p.csv"'.

    Returns
    -------
    Path  The file, resolved (absolute, symbolic links followed).
    """
    path = Path(path)
    named = f"{label}: {printable(path)}" if label else printable(path)
    try:
        info = os.stat(path)
    except FileNotFoundError:
        raise InputError(f"{named}: file not found") from None
    except (OSError, ValueError) as exc:
        raise InputError(f"{named}: cannot be read: {getattr(exc, 'strerror', None) or exc}") from None
    if not stat.S_ISREG(info.st_mode):
        kind = next((words for test, words in _FILE_KINDS if test(info.st_mode)), "not a regular file")
        raise InputError(f"{named} is {kind}, not a regular file; give a file")
    size_mb = info.st_size / 2**20
    if limit_mb is not None and size_mb > limit_mb:
        raise InputError(f"{named} is {size_mb:.1f} MB, more than the limit of {number_text(limit_mb)} MB "
                         "([output] input_size_limit_mb)")
    return path.resolve()


def refuse_special_file(path) -> None:
    """`check_input_file` without a size limit, for a reader called on its own; a missing file is left to the
    reader's own message."""
    if os.path.lexists(path):
        check_input_file(path)


def shapefile_sidecars(path) -> list[Path]:
    """The files GDAL reads with a shapefile (`SHAPEFILE_SIDECARS`, either letter case) that exist beside it."""
    path = Path(path)
    found = []
    for suffix in SHAPEFILE_SIDECARS:
        for candidate in (path.with_suffix(suffix), path.with_suffix(suffix.upper())):
            if os.path.lexists(candidate) and candidate not in found:
                found.append(candidate)
    return found


def check_coordinates(xy, labels, source: str, transformed: bool = False) -> None:
    """An InputError naming the first place (row, vertex or feature) whose x or y is not finite or lies outside
    +/-`COORDINATE_LIMIT_M`.

    Parameters
    ----------
    xy : (n, 2) array         Plan positions in the project CRS. [m]
    labels : sequence of str  One per position, e.g. 'building "B7"' or "vertex 3".
    source : str              File (and layer) for messages.
    transformed : bool        The positions were transformed from the layer's CRS (said in the message).
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    bad = ~within(xy, ge=-COORDINATE_LIMIT_M, le=COORDINATE_LIMIT_M).all(axis=1)
    if bad.any():
        k = int(np.argmax(bad))
        after = " after transformation to the project CRS" if transformed else ""
        raise InputError(f"{source} {labels[k]}: x, y ({xy[k, 0]:g}, {xy[k, 1]:g}){after} must be finite numbers "
                         f"{bounds_text(ge=-COORDINATE_LIMIT_M, le=COORDINATE_LIMIT_M, symbol=' m')}")


def listing(names, limit: int = 20) -> str:
    """Comma-separated quoted names, cut after `limit`."""
    names = [shown(str(n)) for n in names]
    more = f", ... ({len(names) - limit} more)" if len(names) > limit else ""
    return ", ".join(names[:limit]) + more


# --------------------------------------------------------------------------------------------------------- CSV tables
@dataclass(frozen=True)
class CsvTable:
    """The cells of a CSV file, as text, with the line number of each row.

    `cells[r][c]` is the stripped text of row r, column c (rows padded with "" to the header's width);
    `lines[r]` is the line in the file where row r ends (header = line 1).
    """

    path: Path
    header: tuple[str, ...]
    cells: tuple[tuple[str, ...], ...]
    lines: np.ndarray

    def __len__(self) -> int:
        return len(self.cells)

    def has(self, name: str) -> bool:
        """True when the header holds column `name`."""
        return name in self.header

    def require(self, *names: str) -> None:
        """Raise InputError naming the first missing column and listing the columns found."""
        for name in names:
            if name not in self.header:
                hint = ""
                if len(self.header) == 1 and ";" in self.header[0]:
                    hint = " (the header seems to use ';' between columns; the file must use ',')"
                raise InputError(f"{self.path}: missing column {shown(name)}; columns found: "
                                 f"{listing(self.header) or 'none'}{hint}")

    def texts(self, name: str) -> tuple[str, ...]:
        """Column `name` as text; an empty cell is an error naming the row."""
        self.require(name)
        col = self.header.index(name)
        for line, row in zip(self.lines, self.cells):
            if row[col] == "":
                raise InputError(f"{where(self.path, row=int(line))}: column {shown(name)} is empty")
        return tuple(row[col] for row in self.cells)

    def numbers(self, name: str, gt: float | None = None, ge: float | None = None,
                le: float | None = None) -> np.ndarray:
        """Column `name` as floats; an empty, non-numeric or non-finite cell, or one not `> gt` / `>= ge`, or one
        not `<= le`, is an error naming the row, the column and the bound. [units of the column]"""
        text = self.texts(name)
        values = np.empty(len(text))
        for r, cell in enumerate(text):
            try:
                values[r] = float(cell)
            except ValueError:
                raise InputError(f"{where(self.path, row=int(self.lines[r]))}: column {shown(name)} is not a "
                                 f"number; got {shown(cell)}") from None
        for bounds in (dict(gt=gt, ge=ge), dict(le=le)):
            bad = ~within(values, **bounds)
            if bad.any():
                r = int(np.argmax(bad))
                bound = bounds_text(**bounds)
                kind = f"number {bound}" if bound else "finite number"
                raise InputError(f"{where(self.path, row=int(self.lines[r]))}: column {shown(name)} must be a "
                                 f"{kind}; got {shown(text[r])}")
        return values


def read_csv(path) -> CsvTable:
    """Read a CSV file with one header line into a `CsvTable` (text cells; nothing converted yet)."""
    path = Path(path)
    refuse_special_file(path)
    try:
        with open(path, newline="", encoding="utf-8-sig") as stream:
            return _csv_table(stream, path)
    except UnicodeDecodeError:
        raise InputError(f"{path}: not UTF-8 text; save the table as CSV UTF-8") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot be read: {exc.strerror}") from None


def read_csv_text(text: str, source) -> CsvTable:
    """A CSV table from text (say the body of an upload), with the checks of `read_csv`; `source` names it in
    messages."""
    return _csv_table(io.StringIO(text.removeprefix("\ufeff"), newline=""), source)


def _csv_table(stream, path) -> CsvTable:
    rows, lines = [], []
    try:
        reader = csv.reader(stream)
        for row in reader:
            rows.append([cell.strip() for cell in row])
            lines.append(reader.line_num)
    except csv.Error as exc:
        raise InputError(f"{where(path, row=len(lines) + 1)}: not valid CSV: {exc}") from None
    if not rows or not any(rows[0]):
        raise InputError(f"{path}: no header line; the first line must name the columns")
    header = tuple(rows[0])
    named = [h for h in header if h]
    repeated = sorted({h for h in named if named.count(h) > 1})
    if repeated:
        raise InputError(f"{where(path, row=1)}: column {shown(repeated[0])} appears more than once in the header")
    width = len(header)
    cells, kept = [], []
    for row, line in zip(rows[1:], lines[1:]):
        if not any(row):
            continue  # blank line, or a row of empty cells from a spreadsheet
        if any(row[width:]):
            raise InputError(f"{where(path, row=line)}: {len(row)} cells but the header names {width} columns "
                             f"(a decimal comma, or a stray ','?)")
        cells.append(tuple(row[:width]) + ("",) * (width - len(row)))
        kept.append(line)
    return CsvTable(path, header, tuple(cells), np.asarray(kept, dtype=int))


# ------------------------------------------------------------------------------------------------- surface, points
def read_surface_points(path) -> Surface:
    """Ground surface points from a CSV with columns x, y, z [m] in the project CRS: at least 3, not all on one line,
    no plan position given twice (to the millimetre)."""
    table = read_csv(path)
    table.require("x", "y", "z")
    xyz = np.column_stack([table.numbers("x"), table.numbers("y"), table.numbers("z", **LEVEL_RANGE)])
    check_coordinates(xyz[:, :2], [f"row {line}" for line in table.lines], str(path))
    if len(xyz) < 3:
        raise InputError(f"{path}: {len(xyz)} surface point(s); need at least 3 not on one line")
    centred = xyz[:, :2] - xyz[:, :2].mean(axis=0)
    normal = np.linalg.svd(centred, full_matrices=False)[2][-1]  # plan direction across the best-fit line
    if np.abs(centred @ normal).max() < PLAN_TOLERANCE_M:
        raise InputError(f"{path}: all {len(xyz)} surface points lie on one line in plan; "
                         "a surface needs points spread in two directions")
    key = np.round(xyz[:, :2] / PLAN_TOLERANCE_M)
    order = np.lexsort((key[:, 1], key[:, 0]))
    same = np.all(key[order[1:]] == key[order[:-1]], axis=1)
    if same.any():
        a, b = sorted(order[np.argmax(same):][:2])
        raise InputError(f"{path}: rows {table.lines[a]} and {table.lines[b]} give the same plan position "
                         f"({xyz[a, 0]:.3f}, {xyz[a, 1]:.3f}); keep one")
    return Surface(points_xyz=xyz, source=str(path))


def read_points(path) -> Points:
    """Report points from a CSV with columns id, x, y [m] and optional depth_m [m below the surface, >= 0; 0 when
    the column is absent]. ids must be unique."""
    table = read_csv(path)
    table.require("id", "x", "y")
    if len(table) == 0:
        raise InputError(f"{path}: no points below the header")
    ids = table.texts("id")
    seen: dict[str, int] = {}
    for line, name in zip(table.lines, ids):
        if name in seen:
            raise InputError(f"{where(path, row=int(line))}: id {shown(name)} is already used on row {seen[name]}")
        seen[name] = int(line)
    depth = table.numbers("depth_m", ge=0.0, le=DEPTH_LIMIT_M) if table.has("depth_m") else np.zeros(len(table))
    x, y = table.numbers("x"), table.numbers("y")
    check_coordinates(np.column_stack([x, y]), [f"row {line}" for line in table.lines], str(path))
    return Points(ids=ids, x_m=x, y_m=y, depth_m=depth, source=str(path))


# ---------------------------------------------------------------------------------------------------- alignments
@dataclass(frozen=True)
class Alignment:
    """A drive's vertices as read: plan xy (n x 2) [m] in the project CRS, one vertical value per vertex [m] whose
    meaning `vertical` gives ("axis" | "invert" | "depth", see `settle.model.Drive`), where it came from, and
    warnings for the user."""

    xy: np.ndarray
    v: np.ndarray
    vertical: str
    source: str
    warnings: tuple[str, ...] = ()


def check_alignment(xy, v, vertical: str, source: str, labels) -> None:
    """Raise InputError for a polyline a drive cannot follow.

    Parameters
    ----------
    xy : (n, 2) array        Plan vertices. [m]
    v : (n,) array           Vertical value per vertex. [m]
    vertical : str           What v means; "depth" values must be more than 0.
    source : str             File (and layer, feature) for messages.
    labels : sequence of str One per vertex, e.g. "row 5" or "vertex 3".
    """
    n = len(xy)
    if n < 2:
        raise InputError(f"{source}: the alignment has {n} {'vertex' if n == 1 else 'vertices'}; a drive needs at "
                         "least 2")
    check_coordinates(xy, labels, source)
    if vertical == "depth" and not np.all(v > 0):
        k = int(np.argmin(v > 0))
        raise InputError(f"{source} {labels[k]}: depth of the axis below the surface must be more than 0; "
                         f"got {v[k]:g}")
    _check_vertical_values(v, vertical, source, labels)
    seg = np.diff(xy, axis=0)
    plan = np.hypot(seg[:, 0], seg[:, 1])
    short = plan < PLAN_TOLERANCE_M
    if short.any():
        k = int(np.argmax(short))
        first, second = labels[k], labels[k + 1]
        if abs(v[k + 1] - v[k]) < LEVEL_TOLERANCE_M:
            raise InputError(f"{source} {second}: repeats the vertex of {first} (same plan position and level); "
                             "remove one")
        raise InputError(f"{source} {second}: same plan position as {first} but another level "
                         f"({v[k]:g} then {v[k + 1]:g}); a drive cannot step vertically")
    cross = seg[:-1, 0] * seg[1:, 1] - seg[:-1, 1] * seg[1:, 0]
    dot = np.einsum("ij,ij->i", seg[:-1], seg[1:])
    turn_deg = np.degrees(np.arctan2(np.abs(cross), dot))
    back = turn_deg >= MAX_TURN_DEG - ANGLE_TOLERANCE_DEG
    if back.any():
        k = int(np.argmax(back)) + 1
        raise InputError(f"{source} {labels[k]}: the alignment turns {turn_deg[k - 1]:.1f} degrees in plan here "
                         f"({MAX_TURN_DEG:g} or more: it doubles back)")


def _check_vertical_values(v, vertical: str, source: str, labels) -> None:
    """An InputError naming the first vertex whose level (axis, invert) lies beyond +/-`LEVEL_LIMIT_M` or whose depth
    lies deeper than `DEPTH_LIMIT_M`. [m]"""
    what, bounds = (("depth of the axis below the surface", dict(gt=0.0, le=DEPTH_LIMIT_M)) if vertical == "depth"
                    else (f"{vertical} level", LEVEL_RANGE))
    bad = ~within(v, **bounds)
    if bad.any():
        k = int(np.argmax(bad))
        raise InputError(f"{source} {labels[k]}: {what} must be {bounds_text(**bounds, symbol=' m')}; got {v[k]:g}")


def read_alignment_csv(path) -> Alignment:
    """A drive alignment from a CSV with columns x, y [m, project CRS] and exactly one of z (axis level), invert_z
    (invert level of the bore) or depth_m (depth of the axis below the surface). [m]"""
    table = read_csv(path)
    table.require("x", "y")
    given = [c for c in CSV_VERTICAL_COLUMNS if table.has(c)]
    if len(given) != 1:
        problem = "none of" if not given else f"{len(given)} of"
        raise InputError(f"{path}: needs exactly one vertical column, z (axis level), invert_z (invert level) or "
                         f"depth_m (axis depth below the surface); found {problem} them; columns found: "
                         f"{listing(table.header)}")
    xy = np.column_stack([table.numbers("x"), table.numbers("y")])
    v = table.numbers(given[0])
    vertical = CSV_VERTICAL_COLUMNS[given[0]]
    check_alignment(xy, v, vertical, str(path), [f"row {line}" for line in table.lines])
    return Alignment(xy=xy, v=v, vertical=vertical, source=str(path))


def choose_layer(path: Path, layer: str | None, layer_key: str) -> str:
    """The layer to read: the one named, or the only layer with geometry."""
    try:
        listed = pyogrio.list_layers(path)
    except (pyogrio.errors.DataSourceError, OSError) as exc:
        raise InputError(f"{path}: cannot be read as a GIS file: {exc}") from None
    names = [str(name) for name, _ in listed]
    if layer is not None:
        if layer not in names:
            raise InputError(f"{path}: no layer {shown(layer)} ({layer_key}); layers found: {listing(names)}")
        return layer
    spatial = [str(name) for name, geometry in listed if geometry is not None]
    if len(spatial) != 1:
        raise InputError(f"{path}: holds {len(spatial)} layers with geometry ({listing(spatial)}); "
                         f"choose one with {layer_key}")
    return spatial[0]


def _choose_feature(frame, source: str, feature: str | None, feature_key: str):
    """The one line of the layer: the feature whose `name` attribute equals `feature`, or the only feature."""
    names = [str(n) for n in frame["name"]] if "name" in frame.columns else None
    if feature is None:
        if len(frame) != 1:
            found = f"names found: {listing(names)}" if names else "the layer has no name attribute"
            raise InputError(f"{source}: holds {len(frame)} features; choose one with {feature_key} "
                             f"(the value of its name attribute); {found}")
        return frame.geometry.iloc[0]
    if names is None:
        raise InputError(f"{source}: {feature_key} = {shown(feature)} but the layer has no name attribute; "
                         f"attributes found: {listing(c for c in frame.columns if c != 'geometry') or 'none'}")
    hits = [i for i, n in enumerate(names) if n == feature]
    if len(hits) != 1:
        problem = "no feature is" if not hits else f"{len(hits)} features are"
        raise InputError(f"{source}: {problem} named {shown(feature)} ({feature_key}); names found: "
                         f"{listing(names)}")
    return frame.geometry.iloc[hits[0]]


def single_line(geometry, source: str, parts_hint: str, kind_hint: str):
    """The LineString of a feature that is one, or a one-part MultiLineString; anything else is an InputError.

    `parts_hint` follows "a MultiLineString of N parts; " and `kind_hint` follows "a <type>; " in the messages.
    """
    if geometry is None or geometry.is_empty:
        raise InputError(f"{source}: the feature has no geometry")
    if geometry.geom_type == "MultiLineString":
        if len(geometry.geoms) != 1:
            raise InputError(f"{source}: a MultiLineString of {len(geometry.geoms)} parts; {parts_hint}")
        geometry = geometry.geoms[0]
    if geometry.geom_type != "LineString":
        raise InputError(f"{source}: a {geometry.geom_type}; {kind_hint}")
    return geometry


def _line_coordinates(geometry, source: str) -> np.ndarray:
    """Vertices (n x 3) of a LineString Z or a one-part MultiLineString Z. [m]"""
    geometry = single_line(geometry, source, "a drive needs one continuous line (merge the parts)",
                           "a drive alignment must be a LineString with Z")
    if not geometry.has_z:
        raise InputError(f"{source}: the line has no Z; a drive alignment needs a 3-D line (LineString Z)")
    return shapely.get_coordinates(geometry, include_z=True)


def transformation_notes(source_crs, target_crs, source: str) -> list[str]:
    """A warning when PROJ lacks the best transformation between the CRSs (e.g. a missing datum grid), with the
    accuracy of the one it will use [m] as PROJ's database states it."""
    with python_warnings.catch_warnings():
        python_warnings.simplefilter("ignore")  # pyproj warns about the missing grid; we say it in our own words
        group = pyproj.transformer.TransformerGroup(source_crs, target_crs, always_xy=True)
    if group.best_available or not group.transformers:
        return []
    accuracy = group.transformers[0].accuracy
    stated = f"about {accuracy:g} m" if accuracy is not None and accuracy >= 0 else "unknown"
    return [f"{source}: the best transformation to the project CRS is not installed (a datum grid is missing); "
            f"x, y were transformed with one of accuracy {stated}. Give the alignment in the project CRS, or "
            "install the PROJ grids, if that matters here"]


def read_gis_layer(path: Path, layer: str | None, layer_key: str, fid_as_index: bool = False):
    """The chosen layer of a GIS file, read with pyogrio: (GeoDataFrame, source label for messages).

    With `fid_as_index` the frame is indexed by the features' ids in the file (what a GIS shows), else 0..n-1.
    An unreadable or empty layer is an InputError naming the file and layer.
    """
    refuse_special_file(path)
    chosen = choose_layer(path, layer, layer_key)
    source = f"{path} layer {shown(chosen)}"
    try:
        with python_warnings.catch_warnings():
            # a NaN coordinate makes shapely warn; the readers' own checks name the feature instead
            python_warnings.filterwarnings("ignore", "invalid value encountered", RuntimeWarning)
            frame = pyogrio.read_dataframe(path, layer=chosen, fid_as_index=fid_as_index)
    except (pyogrio.errors.DataSourceError, pyogrio.errors.DataLayerError, OSError) as exc:
        raise InputError(f"{source}: cannot be read: {exc}") from None
    if len(frame) == 0:
        raise InputError(f"{source}: the layer has no features")
    return frame, source


def project_transformer(layer_crs, project_crs: str, source: str):
    """(transformer from the layer's CRS to the project CRS, notes for the user).

    The transformer is None when the layer is in the project CRS already, or has no CRS (then taken to be in it, with
    a note). A transformation PROJ cannot set up is an InputError.
    """
    target = pyproj.CRS.from_user_input(project_crs)
    if layer_crs is None:
        return None, [f"{source} has no CRS; its coordinates are taken to be in the project CRS {project_crs}"]
    if layer_crs.equals(target, ignore_axis_order=True):
        return None, []
    notes = transformation_notes(layer_crs, target, source)
    try:
        with python_warnings.catch_warnings():
            python_warnings.simplefilter("ignore")
            return pyproj.Transformer.from_crs(layer_crs, target, always_xy=True), notes
    except pyproj.exceptions.ProjError as exc:
        raise InputError(f"{source}: cannot be transformed from the layer's CRS ({layer_crs.to_string()}) to the "
                         f"project CRS {project_crs}: {exc}") from None


def read_alignment_gis(path, project_crs: str, z_means: str = "axis", layer: str | None = None,
                       feature: str | None = None, layer_key: str = "alignment_layer",
                       feature_key: str = "alignment_feature") -> Alignment:
    """A drive alignment from a GIS line layer with Z, x and y reprojected to `project_crs`.

    Parameters
    ----------
    path : path             .gpkg, .geojson, .json or .shp file.
    project_crs : str       CRS of the project, e.g. "EPSG:27700"; x, y are returned in it. [m]
    z_means : str           What Z is: "axis" level, "invert" level or "depth" of the axis below the surface. [m]
    layer : str or None     Layer name; None = the file's only layer with geometry.
    feature : str or None   Value of the `name` attribute of the line to use; None = the layer's only feature.
    layer_key, feature_key : str  Project-file keys named in messages.
    """
    frame, source = read_gis_layer(Path(path), layer, layer_key)
    geometry = _choose_feature(frame, source, feature, feature_key)
    if feature is not None:
        source += f" feature {shown(feature)}"
    xyz = _line_coordinates(geometry, source)
    labels = [f"vertex {k}" for k in range(1, len(xyz) + 1)]
    bad = ~np.isfinite(xyz).all(axis=1)
    if bad.any():
        raise InputError(f"{source} {labels[int(np.argmax(bad))]}: a coordinate is not a number")
    transformer, notes = project_transformer(frame.crs, project_crs, source)
    if transformer is not None:
        try:
            x, y = transformer.transform(xyz[:, 0], xyz[:, 1])
        except pyproj.exceptions.ProjError as exc:
            raise InputError(f"{source}: cannot be transformed from the layer's CRS ({frame.crs.to_string()}) to "
                             f"the project CRS {project_crs}: {exc}") from None
        xyz = np.column_stack([x, y, xyz[:, 2]])
        bad = ~np.isfinite(xyz).all(axis=1)
        if bad.any():
            raise InputError(f"{source} {labels[int(np.argmax(bad))]}: cannot be transformed from the layer's "
                             f"CRS ({frame.crs.to_string()}) to the project CRS {project_crs}")
    check_alignment(xyz[:, :2], xyz[:, 2], z_means, source, labels)
    return Alignment(xy=np.ascontiguousarray(xyz[:, :2]), v=xyz[:, 2].copy(), vertical=z_means, source=source,
                     warnings=tuple(notes))
