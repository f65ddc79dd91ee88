"""Monitoring readings: the settlement readings CSV, read with checks row by row.

Sign conventions (the project's): settlement positive downward (heave negative) [mm]; chainage along the 3-D axis of
the drive [m]; depth below the ground surface [m]; dates in UTC.

The file
    UTF-8 CSV with one header line (see `settle.tables`; a row is named by its line number, header = line 1).

    point_id         text, required: the monitoring point.
    date             required: ISO 8601 in the extended form, a date (2024-03-01) or a date and time
                     (2024-03-01T08:30 or 2024-03-01T08:30:15, a fraction of a second allowed, an offset such as
                     +01:00 or Z optional), dated from `EARLIEST_DATE` to `LATEST_DATE`. A time with an offset is
                     converted to UTC; a time without one is taken as UTC as written. Kept to the second. A date in
                     any other form (01/03/2024, 2024-03-01 08:30, 20240301) or out of that span is an InputError for
                     the whole file naming the row: a date is never guessed, and a file whose dates are in another
                     form must not lose its rows quietly.
    settlement_mm    number, required: the reading, positive downward, as the user refers it to its base reading.
                     Readings are used as given: nothing is re-zeroed. At most `SETTLEMENT_LIMIT_MM` either way.
    face_chainage_m  number, required: chainage of the face of the drive when the reading was taken; within the
                     drive (its start to its end chainage).
    drive            text: the name of the drive the reading is attributed to. Required (the column and every cell)
                     when the project has several drives; optional with one (an empty cell then means that drive).
    x, y             numbers [m, project CRS] within +/-`COORDINATE_LIMIT_M`, optional: where the point is. A row with
                     both cells empty takes the point's place from the project's [points] table (matched on point_id =
                     id), or else from an earlier row of the same point. A row with x, y gives its own place, which must
                     agree with the [points] table (when the point is there) and with the point's earlier rows within
                     `SAME_PLACE_M`. Without x, y columns the project needs a [points] table.
    depth_m          number from 0 to `DEPTH_LIMIT_M`, optional: depth of the point below the surface. An empty
                     cell or no column takes the [points] table's depth, else the depth of the point's earlier rows,
                     else 0 (a surface point); a depth that differs from the point's earlier rows by more than
                     `SAME_PLACE_M` is left out.

Rows left out (each reported by line number with the reason, and counted; never silently)
    an empty point_id; an unknown or empty drive (several drives); a settlement_mm, face_chainage_m, x, y or depth_m
    that is not a finite number or lies beyond its bounds above (depth_m also when negative); an empty date; a
    face_chainage_m outside the drive; an unknown point (not in [points] and placed by no earlier row); only one of x,
    y; a place or depth that disagrees with the [points] table or with the point's earlier rows; a second reading of a
    point at the same date and time (duplicate); a reading dated before an earlier row of the same point (the file must
    list each point's readings in date order; of two rows out of order, the later one in the file is left out); a face
    behind the face of an earlier reading of the same point and drive (a face only advances).

A file that is not a regular file or is larger than `[output] input_size_limit_mb`, a missing required column, a
missing drive column with several drives, no x, y and no [points] table, a date not in the form above or out of its
span, or a file in which every row is left out, is an InputError for the whole file.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from ..errors import InputError, where
from .ground import GroundModel
from .model import Project
from .route import build_drive
from .tables import (COORDINATE_LIMIT_M, DEPTH_LIMIT_M, bounds_text, check_input_file, read_csv, read_csv_text,
                     shown)

#: A point keeps its place: rows of one point (and the [points] table) must agree within this in plan. Our choice:
#: larger than the horizontal movement of a monitored point, smaller than the spacing of points in an array. [m]
SAME_PLACE_M = 0.1
#: A face chainage this close outside the drive is taken as its end (rounding of the chainage written). [m]
CHAINAGE_TOLERANCE_M = 1e-6
REQUIRED = ("point_id", "date", "settlement_mm", "face_chainage_m")
#: The span of dates a reading may carry, as written (our choice: a year 1 or 9999 is a typing or export mistake).
EARLIEST_DATE, LATEST_DATE = "1900-01-01", "2200-12-31"
#: A settlement or heave larger than this is a mistake (a value in micrometres, a corrupt cell); our choice. [mm]
SETTLEMENT_LIMIT_MM = 10_000.0
DATE_FORM = ("YYYY-MM-DD, optionally with a time THH:MM or THH:MM:SS (a space may stand for the T) and an offset "
             "such as +01:00 or Z")
_ISO_DATE = re.compile(r"\d{4}-\d{2}-\d{2}([T ]\d{2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:\d{2})?)?", re.ASCII)


@dataclass(frozen=True)
class LeftOut:
    """A row of the readings file that was left out, and why."""

    line: int  # line number in the file, header = line 1
    reason: str


@dataclass
class Readings:
    """Monitoring readings as read (arrays of one length, in the order of the file), and the rows left out."""

    point_id: np.ndarray  # str objects
    x_m: np.ndarray
    y_m: np.ndarray
    depth_m: np.ndarray  # below the ground surface
    date: np.ndarray  # numpy datetime64[s], UTC
    settlement_mm: np.ndarray  # positive downward
    face_chainage_m: np.ndarray
    drive: np.ndarray  # index into Project.drives
    line: np.ndarray  # line number in the file (header = line 1)
    drive_names: tuple[str, ...]  # the project's drive names, in project order
    source: str = ""
    left_out: tuple[LeftOut, ...] = ()

    def __len__(self) -> int:
        return len(self.point_id)

    @property
    def left_out_count(self) -> int:
        return len(self.left_out)

    def left_out_messages(self) -> list[str]:
        """One line per row left out: `file row N: reason`."""
        return [f"{where(self.source, row=r.line)}: {r.reason}" for r in self.left_out]

    def subset(self, keep) -> "Readings":
        """The readings selected by a boolean mask or index array (rows left out are kept as they are)."""
        arrays = {k: getattr(self, k)[keep] for k in
                  ("point_id", "x_m", "y_m", "depth_m", "date", "settlement_mm", "face_chainage_m", "drive", "line")}
        return Readings(**arrays, drive_names=self.drive_names, source=self.source, left_out=self.left_out)


def parse_date(text: str) -> np.datetime64:
    """An ISO 8601 date or date and time in the extended form (`DATE_FORM`), dated from `EARLIEST_DATE` to
    `LATEST_DATE`, as numpy datetime64[s] in UTC; a ValueError saying why ("is not ...") when it is not one.

    A time with a UTC offset is converted to UTC; one without is taken as UTC as written.

    >>> str(parse_date("2024-03-01T09:30+01:00"))
    '2024-03-01T08:30:00'
    """
    if _ISO_DATE.fullmatch(text) is None:
        raise ValueError(f"is not an ISO 8601 date ({DATE_FORM})")
    if not EARLIEST_DATE <= text[:10] <= LATEST_DATE:
        raise ValueError(f"is outside the dates a reading may carry ({EARLIEST_DATE} to {LATEST_DATE})")
    try:
        moment = datetime.fromisoformat(text)
    except ValueError:
        raise ValueError(f"is not a calendar date and time ({DATE_FORM})") from None
    if moment.tzinfo is not None:
        moment = moment.astimezone(timezone.utc).replace(tzinfo=None)
    return np.datetime64(moment.replace(microsecond=0), "s")


def _number(cell: str, column: str, limit: float | None = None) -> tuple[float | None, str | None]:
    """(value, None) for a finite number within +/-`limit`, else (None, reason)."""
    try:
        value = float(cell)
    except ValueError:
        return None, f"{column} is not a number; got {shown(cell)}"
    if not np.isfinite(value):
        return None, f"{column} must be a finite number; got {shown(cell)}"
    if limit is not None and not abs(value) <= limit:
        return None, f"{column} must be a number {bounds_text(ge=-limit, le=limit)}; got {shown(cell)}"
    return value, None


def read_readings(path, project: Project) -> Readings:
    """Read a monitoring readings CSV against a project (see the module docstring for the columns and checks).

    Parameters
    ----------
    path : str or Path   The readings CSV.
    project : Project    The project the readings belong to: its drives (names, chainage) and [points] table.

    Returns
    -------
    Readings  The rows kept, in file order, with `left_out` listing every row left out and why.

    Raises
    ------
    InputError  For a problem with the whole file: a missing column, no way to place the points, no row kept.
    """
    path = Path(path)
    check_input_file(path, project.output.input_size_limit_mb, "readings file")
    return _readings_of_table(read_csv(path), project, path)


def read_readings_text(text: str, project: Project, source: str) -> Readings:
    """As `read_readings`, from the text of a readings file (an upload); `source` names it in messages."""
    return _readings_of_table(read_csv_text(text, source), project, source)


def _readings_of_table(table, project: Project, path) -> Readings:
    table.require(*REQUIRED)
    names = tuple(d.name for d in project.drives)
    _check_columns(path, table, names, project.points)
    dates = _dates(table, path)
    span = _chainage_spans(project)
    kept, left_out = _check_rows(table, dates, names, span, project.points)
    return _build_readings(kept, left_out, names, path)


def _check_columns(path: Path, table, names: tuple[str, ...], points) -> None:
    """Raise an InputError when the columns (or the [points] table) cannot give each reading a drive and a place."""
    if len(names) > 1 and not table.has("drive"):
        raise InputError(f"{path}: missing column \"drive\"; the project has {len(names)} drives "
                         f"({', '.join(map(shown, names))}), so each reading must name its drive")
    has_xy = table.has("x") or table.has("y")
    if has_xy:
        table.require("x", "y")
    if not has_xy and points is None:
        raise InputError(f"{path}: no x, y columns and the project has no [points] table to find the points in; "
                         "give x and y (and depth_m for points below the surface)")
    if len(table) == 0:
        raise InputError(f"{path}: no readings below the header")


def _dates(table, path: Path) -> list:
    """The date of every row in UTC (None for an empty cell, a row to leave out); a date in another form or out of
    its span is an InputError naming the row: the whole file is refused, since its dates cannot be trusted."""
    column = table.header.index("date")
    dates = []
    for line, cells in zip(table.lines, table.cells):
        text = cells[column]
        try:
            dates.append(parse_date(text) if text else None)
        except ValueError as why:
            raise InputError(f"{where(path, row=int(line))}: date {shown(text)} {why}; a date is never guessed, so "
                             "the whole file is refused") from None
    return dates


def _chainage_spans(project: Project) -> list[tuple[float, float]]:
    """Each drive's start and end chainage [m], in project order."""
    ground = GroundModel(project.ground)
    label = project.path.name if project.path else "project"
    span = []
    for drive in project.drives:
        geometry, _ = build_drive(drive, ground, label)
        span.append((geometry.start_chainage_m, geometry.end_chainage_m))
    return span


def _places_in_table(points) -> dict[str, tuple[float, float, float]]:
    """Point id -> x, y [m, project CRS] and depth [m] from the project's [points] table (empty without one)."""
    if points is None:
        return {}
    return {pid: (float(x), float(y), float(z))
            for pid, x, y, z in zip(points.ids, points.x_m, points.y_m, points.depth_m)}


class _PointHistory:
    """What the rows kept so far say about each point: its place, its latest date, its dates and its faces."""

    def __init__(self) -> None:
        self.place_of: dict[str, tuple] = {}  # point -> x, y, line of the row that placed it, depth
        self.last_of: dict[str, tuple[np.datetime64, int]] = {}  # point -> latest date, its line
        self.seen: dict[tuple[str, np.datetime64], int] = {}  # (point, date) -> line
        self.face_of: dict[tuple[str, int], tuple[float, int]] = {}  # (point, drive) -> face, line

    def record(self, pid: str, x: float, y: float, depth: float, date: np.datetime64, face: float, d: int,
               line: int) -> None:
        """Note a kept reading: place [m] and depth [m] (first row only), date, and face chainage [m] on drive d."""
        self.place_of.setdefault(pid, (x, y, line, depth))
        self.last_of[pid] = (date, line)
        self.seen[(pid, date)] = line
        self.face_of[(pid, d)] = (face, line)


def _check_rows(table, dates: list, names: tuple[str, ...], span: list[tuple[float, float]],
                points) -> tuple[dict, list]:
    """Check the file row by row, with each row's date in UTC (None when empty): the values of the rows kept (by
    column) and the rows left out, in file order."""
    table_place = _places_in_table(points)
    column = {name: table.header.index(name) for name in table.header if name}
    has_drive = table.has("drive")
    kept: dict[str, list] = {k: [] for k in ("point_id", "x", "y", "depth", "date", "s", "face", "drive", "line")}
    left_out: list[LeftOut] = []
    history = _PointHistory()
    for line, cells, date in zip(table.lines, table.cells, dates):
        line = int(line)
        cell = {name: cells[c] for name, c in column.items()}
        reading, reason = _reading_of_row(cell, date, line, has_drive, names, span, table_place, points, history)
        if reason:
            left_out.append(LeftOut(line, reason))
            continue
        pid, x, y, depth, date, s, face, d, _ = reading
        history.record(pid, x, y, depth, date, face, d, line)
        for key, value in zip(kept, reading):
            kept[key].append(value)
    return kept, left_out


def _reading_of_row(cell: dict[str, str], date: np.datetime64 | None, line: int, has_drive: bool,
                    names: tuple[str, ...],
                    span: list[tuple[float, float]], table_place: dict, points,
                    history: _PointHistory) -> tuple[tuple | None, str | None]:
    """(the row's point, x, y, depth, date, settlement, face, drive, line; None), or (None, why it is left out)."""
    pid = cell["point_id"]
    if pid == "":
        return None, "point_id is empty"
    d, problem = _drive_of_row(cell, has_drive, names)
    if problem:
        return None, problem
    s, face, problem = _numbers_of_row(cell, names[d], span[d])
    if problem:
        return None, problem
    if date is None:
        return None, "date is empty"
    listed = table_place.get(pid)
    placed = history.place_of.get(pid)
    x, y, problem = _place_of_point(pid, cell, listed, placed, points)
    if problem:
        return None, problem
    depth, problem = _depth_of_point(pid, cell.get("depth_m", ""), listed, placed)
    if problem:
        return None, problem
    problem = _check_order_and_face(pid, date, face, d, history)
    if problem:
        return None, problem
    return (pid, x, y, depth, date, s, face, d, line), None


def _drive_of_row(cell: dict[str, str], has_drive: bool, names: tuple[str, ...]) -> tuple[int | None, str | None]:
    """(index of the row's drive in the project, None), or (None, why it is left out)."""
    if has_drive and cell["drive"] != "":
        if cell["drive"] not in names:
            return None, (f"drive {shown(cell['drive'])} is not a drive of the project; drives: "
                          f"{', '.join(map(shown, names))}")
        return names.index(cell["drive"]), None
    if len(names) > 1:
        return None, f"drive is empty; the project has {len(names)} drives, so each reading must name its drive"
    return 0, None


def _numbers_of_row(cell: dict[str, str], drive_name: str,
                    span: tuple[float, float]) -> tuple[float | None, float | None, str | None]:
    """(settlement [mm], face chainage [m] within the drive's span [m], None), or (None, None, why it is left out)."""
    s, problem = _number(cell["settlement_mm"], "settlement_mm", SETTLEMENT_LIMIT_MM)
    if problem:
        return None, None, problem
    face, problem = _number(cell["face_chainage_m"], "face_chainage_m")
    if problem:
        return None, None, problem
    lo, hi = span
    if not lo - CHAINAGE_TOLERANCE_M <= face <= hi + CHAINAGE_TOLERANCE_M:
        return None, None, (f"face_chainage_m {face:g} is outside drive {shown(drive_name)} "
                            f"(chainage {lo:.2f} to {hi:.2f} m)")
    return s, min(max(face, lo), hi), None


def _place_of_point(pid: str, cell: dict[str, str], listed: tuple | None, placed: tuple | None,
                    points) -> tuple[float | None, float | None, str | None]:
    """(x, y [m, project CRS] of the point, None), or (None, None, why the row is left out).

    From the row's x, y cells, else the [points] table (`listed`), else the point's first kept row (`placed`).
    """
    xy_cells = (cell.get("x", ""), cell.get("y", ""))
    if xy_cells == ("", "") and listed is None and placed is not None:
        x, y = placed[0], placed[1]  # placed by an earlier row of the file
    elif xy_cells == ("", ""):
        if listed is None:
            known = "the project has no [points] table" if points is None else \
                f"it is not in the [points] table ({points.source})"
            return None, None, f"point {shown(pid)}: the row gives no x, y and {known}"
        x, y = listed[0], listed[1]
    elif "" in xy_cells:
        return None, None, (f"point {shown(pid)}: give both x and y, or neither (to take them from the [points] "
                            "table)")
    else:
        x, problem = _number(xy_cells[0], "x", COORDINATE_LIMIT_M)
        y, problem_y = _number(xy_cells[1], "y", COORDINATE_LIMIT_M)
        if problem or problem_y:
            return None, None, problem or problem_y
        if listed is not None and np.hypot(x - listed[0], y - listed[1]) > SAME_PLACE_M:
            return None, None, (f"point {shown(pid)}: x, y are {np.hypot(x - listed[0], y - listed[1]):.3f} m from "
                                f"its place in the [points] table ({points.source}); a point keeps its place "
                                f"(within {SAME_PLACE_M:g} m)")
    if placed is not None and np.hypot(x - placed[0], y - placed[1]) > SAME_PLACE_M:
        return None, None, (f"point {shown(pid)}: x, y are {np.hypot(x - placed[0], y - placed[1]):.3f} m from its "
                            f"place on row {placed[2]}; a point keeps its place (within {SAME_PLACE_M:g} m)")
    return x, y, None


def _depth_of_point(pid: str, depth_cell: str, listed: tuple | None,
                    placed: tuple | None) -> tuple[float | None, str | None]:
    """(depth of the point below the surface [m], None), or (None, why the row is left out).

    From the row's depth_m cell, else the [points] table (`listed`), else the point's first kept row (`placed`),
    else 0 (a surface point).
    """
    if depth_cell != "":
        depth, problem = _number(depth_cell, "depth_m")
        if problem or depth < 0.0:
            return None, problem or f"depth_m must be at least 0 (below the ground surface); got {shown(depth_cell)}"
        if depth > DEPTH_LIMIT_M:
            return None, f"depth_m must be at most {DEPTH_LIMIT_M:g} (below the surface); got {shown(depth_cell)}"
    else:
        depth = listed[2] if listed is not None else placed[3] if placed is not None else 0.0
    if placed is not None and abs(depth - placed[3]) > SAME_PLACE_M:
        return None, (f"point {shown(pid)}: depth_m {depth:g} differs from its depth on row {placed[2]} "
                      f"({placed[3]:g} m); a point keeps its place (within {SAME_PLACE_M:g} m)")
    return depth, None


def _check_order_and_face(pid: str, date: np.datetime64, face: float, d: int,
                          history: _PointHistory) -> str | None:
    """Why the reading is left out as a duplicate, out of date order or with its face [m] behind; None when kept."""
    if (pid, date) in history.seen:
        return f"point {shown(pid)} already has a reading dated {date} (row {history.seen[(pid, date)]}); duplicate"
    last = history.last_of.get(pid)
    if last is not None and date < last[0]:
        return (f"date {date} is before the reading of point {shown(pid)} on row {last[1]} ({last[0]}); a point's "
                "readings must be listed in date order")
    before = history.face_of.get((pid, d))
    if before is not None and face < before[0] - CHAINAGE_TOLERANCE_M:
        return (f"face_chainage_m {face:g} is behind the face of the earlier reading of point {shown(pid)} on row "
                f"{before[1]} ({before[0]:g} m); the face of a drive only advances")
    return None


def _build_readings(kept: dict[str, list], left_out: list[LeftOut], names: tuple[str, ...], path: Path) -> Readings:
    """The Readings of the rows kept; an InputError when every row was left out."""
    if not kept["line"]:
        first = f"; first: {where(path, row=left_out[0].line)}: {left_out[0].reason}" if left_out else ""
        raise InputError(f"{path}: all {len(left_out)} readings were left out{first}")
    return Readings(
        point_id=np.array(kept["point_id"], dtype=object),
        x_m=np.array(kept["x"], dtype=float),
        y_m=np.array(kept["y"], dtype=float),
        depth_m=np.array(kept["depth"], dtype=float),
        date=np.array(kept["date"], dtype="datetime64[s]"),
        settlement_mm=np.array(kept["s"], dtype=float),
        face_chainage_m=np.array(kept["face"], dtype=float),
        drive=np.array(kept["drive"], dtype=int),
        line=np.array(kept["line"], dtype=int),
        drive_names=names,
        source=str(path),
        left_out=tuple(left_out),
    )
