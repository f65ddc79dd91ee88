"""CSV tables of a run: comment lines first (the caution), then a header and one row per item.

Every table is written through `write_text_atomic`, so a reader never sees half a file.
"""
from __future__ import annotations

import csv
import io
import re
from pathlib import Path

from settle.assessments.face_stations import CAUTION as FACE_CAUTION
from settle.assessments.face_stations import FaceStations
from settle.assessments.face_tables import OPERATOR_COLUMNS, operator_rows
from settle.procedure.summary import CAUTION

from .geopackage import write_text_atomic

#: The second comment line of the operator's table: how its band is made.
OPERATOR_NOTE = ("Hold the face pressure between hold_from and hold_to (kPa, at the crown; at the axis through the "
                 "slurry column); the band allows for the operating tolerance. Empty where the window is closed.")

#: The first characters that make a spreadsheet read a cell as a formula (or shift it into one).
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
#: A number written as text the way the tables format numbers: "-5.00", "12", "1.5e-05".
PLAIN_NUMBER = re.compile(r"-?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?")


def safe_cell(value):
    """A cell as a spreadsheet should show it: text starting with a formula character (=, +, -, @, tab, carriage
    return) gets a leading apostrophe so it is read as text; numbers, and text that is a plain number such as
    "-5.00", are left as they are."""
    if isinstance(value, str) and value.startswith(FORMULA_STARTS) and not PLAIN_NUMBER.fullmatch(value):
        return "'" + value
    return value


def csv_text(comments, fieldnames, rows) -> str:
    """A CSV text: each comment on a line of its own after "# ", then (when there are fields) the header and rows,
    every cell through `safe_cell`. Lines end in "\n"; a cell holding a line break ("\r" too) is quoted."""
    out = io.StringIO()
    for comment in comments:
        out.write(f"# {comment}\n")
    if fieldnames:
        fields = list(fieldnames)
        line = _csv_line_writer()
        out.write(line(fields))
        for row in rows:
            extra = [k for k in row if k not in fields]
            if extra:
                raise ValueError(f"row has fields {extra} beyond the table's {fields}")
            out.write(line([safe_cell(row.get(k, "")) for k in fields]))
    return out.getvalue()


def _csv_line_writer():
    """A function turning a list of cells into one CSV line ending in "\n", quoting every cell that holds "\r" or
    "\n" (the csv module quotes only the characters of its line terminator, so it writes with "\r\n")."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")

    def line(cells) -> str:
        buffer.seek(0)
        buffer.truncate()
        writer.writerow(cells)
        return buffer.getvalue()[:-2] + "\n"

    return line


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
