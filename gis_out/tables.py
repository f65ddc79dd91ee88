"""CSV tables of a run: comment lines first (the caution), then a header and one row per item.

Every table is written through `write_text_atomic`, so a reader never sees half a file.
"""
from __future__ import annotations

import csv
import io
from pathlib import Path

from settle.assessments.face_stations import CAUTION as FACE_CAUTION
from settle.assessments.face_stations import FaceStations
from settle.assessments.face_tables import OPERATOR_COLUMNS, operator_rows
from settle.procedure.summary import CAUTION

from .geopackage import write_text_atomic

#: The second comment line of the operator's table: how its band is made.
OPERATOR_NOTE = ("Hold the face pressure between hold_from and hold_to (kPa, at the crown; at the axis through the "
                 "slurry column); the band allows for the operating tolerance. Empty where the window is closed.")


def csv_text(comments, fieldnames, rows) -> str:
    """A CSV text: each comment on a line of its own after "# ", then (when there are fields) the header and rows."""
    out = io.StringIO()
    for comment in comments:
        out.write(f"# {comment}\n")
    if fieldnames:
        writer = csv.DictWriter(out, fieldnames=list(fieldnames), lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)
    return out.getvalue()


def rows_csv_text(rows: list[dict]) -> str:
    """A table of result rows with the caution on line one; NaN is written as an empty cell."""
    return csv_text([CAUTION], list(rows[0]) if rows else (),
                    ({k: ("" if isinstance(v, float) and v != v else v) for k, v in r.items()} for r in rows))


def write_rows_csv(path: Path, rows: list[dict]) -> str:
    """Write a table of result rows (`rows_csv_text`) safely; returns the file's name."""
    write_text_atomic(path, rows_csv_text(rows))
    return Path(path).name


def operator_csv_text(all_stations) -> str:
    """The operator's CSV for one or more drives: two comment lines (starting "#") with the caution of the trade and
    how the band is made, then a header and one row per station (`operator_rows`)."""
    drives = [all_stations] if isinstance(all_stations, FaceStations) else all_stations
    return csv_text([FACE_CAUTION, OPERATOR_NOTE], OPERATOR_COLUMNS,
                    (row for stations in drives for row in operator_rows(stations)))
