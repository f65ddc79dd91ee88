"""Safe writing of the GeoPackage and of small text files next to it.

A reader (a GIS with the file open, a colleague's copy) never sees a half-written file: everything is written to a
temporary file in the same folder, checked, flushed to disk and then renamed over the final name in one step.
An interrupted run leaves the previous file as it was, plus at worst a hidden temporary file that the next write
removes once it is older than ten minutes.

Files are written through GDAL (pyogrio engine) as GeoPackage 1.2 (`VERSION=1.2`): GDAL 3.12 would otherwise label
them 1.4, which older GDAL (3.6, in the QGIS 3.22 era) reads with a "partially supported" warning. Date-times, if a
layer has any, are written in UTC as the standard asks.
"""
from __future__ import annotations

import contextlib
import glob
import os
import re
import sqlite3
import time
import uuid
from pathlib import Path
from typing import Callable

import geopandas as gpd
import pandas as pd
import pyogrio

DATASET_OPTIONS = {"VERSION": "1.2", "DATETIME_FORMAT": "UTC"}
SIDE_SUFFIXES = ("-journal", "-wal", "-shm")  # SQLite files beside a database that is open or was left mid-write
STALE_AFTER_S = 600.0  # temporary files older than this are left over from a killed run
APPLICATION_ID_GPKG = 0x47504B47  # "GPKG", OGC 12-128 requirement 2
GEOMETRY_COLUMN = "geom"  # GDAL's default for GeoPackage
_GDAL_TYPES = {"Point": "Point", "LineString": "LineString", "Polygon": "Polygon", "MultiPoint": "MultiPoint",
               "MultiLineString": "MultiLineString", "MultiPolygon": "MultiPolygon",
               "GeometryCollection": "GeometryCollection"}


class OutputError(RuntimeError):
    """An output file cannot be written where asked (folder missing, wrong name, check failed)."""


class OutputBusyError(OutputError):
    """The output file is open in another program, or an earlier write to it was interrupted."""


def read_only_uri(path) -> str:
    """SQLite URI opening `path` read-only; safe for names with spaces, '#', '?' or '%'."""
    return Path(os.path.abspath(os.fspath(path))).as_uri() + "?mode=ro"


def _side_files(path: str) -> list[str]:
    """The SQLite journal / WAL / shared-memory files present beside `path`."""
    return [path + s for s in SIDE_SUFFIXES if os.path.exists(path + s)]


def _refuse_if_busy(final: str) -> None:
    """Raise OutputBusyError when SQLite files beside `final` show it is in use or holds a hot journal."""
    side = _side_files(final)
    if side:
        raise OutputBusyError(
            f"{final}: not replaced because {os.path.basename(side[0])} exists beside it (the file is open in another "
            f"program, or an earlier write to it was interrupted); close the program using it, or move the file and "
            f"its {', '.join(s[len(final):] for s in side)} file(s) away, then run again")


def _final_path(path, suffix: str | None) -> str:
    """Absolute path of an output file, checked: its folder exists, it is not a folder, it has `suffix`."""
    final = os.path.abspath(os.fspath(path))
    folder = os.path.dirname(final)
    if suffix is not None and not final.lower().endswith(suffix):
        raise OutputError(f"{final}: output file name must end in {suffix}; got {os.path.basename(final)!r}")
    if not os.path.isdir(folder):
        raise OutputError(f"{final}: output folder {folder} does not exist")
    if os.path.isdir(final):
        raise OutputError(f"{final}: a folder has this name; give a file name")
    return final


def _plain(name: str) -> str:
    """A file name with every character but letters, digits, "." and "-" made "_": temporary files get such names,
    because GDAL reads some characters of a path (";", for one) as options. The final name is given by a rename."""
    return re.sub(r"[^\w.-]", "_", name, flags=re.ASCII)


def sweep_stale_temporaries(final, max_age_s: float = STALE_AFTER_S) -> list[str]:
    """Remove temporary files of earlier, interrupted writes of `final` that are older than `max_age_s`. [s]

    Matches `.<name>.*.tmp.gpkg*` and `.<name>.*.tmp` in the folder of `final`. Younger ones may belong to a write
    running now and are kept. Returns the paths removed.
    """
    folder, base = os.path.split(os.path.abspath(os.fspath(final)))
    stem = os.path.join(glob.escape(folder), "." + glob.escape(_plain(base)) + ".")
    now, removed = time.time(), []
    for p in sorted(set(glob.glob(stem + "*.tmp.gpkg*") + glob.glob(stem + "*.tmp"))):
        with contextlib.suppress(FileNotFoundError):
            if now - os.path.getmtime(p) > max_age_s:
                os.remove(p)
                removed.append(p)
    return removed


def _fsync_file(path: str) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_folder(folder: str) -> None:
    """Make a rename in `folder` durable (POSIX; Windows cannot open folders and commits renames itself)."""
    if os.name == "posix":
        _fsync_file(folder)


def _remove_quietly(paths) -> None:
    for p in paths:
        with contextlib.suppress(FileNotFoundError):
            os.remove(p)


def _replace(tmp: str, final: str, database: bool) -> None:
    """Rename `tmp` over `final` atomically, then make the rename durable.

    For a database, refuse first if `final` became busy since the write started. When the system will not replace
    a file that another program holds open (Windows), the new file is kept under a dated name beside it and
    OutputBusyError says where.
    """
    if database:
        _refuse_if_busy(final)
    try:
        os.replace(tmp, final)
    except PermissionError:
        root, ext = os.path.splitext(final)
        kept = f"{root}.{time.strftime('%Y%m%d-%H%M%S')}{ext}"
        os.replace(tmp, kept)
        raise OutputBusyError(f"{final}: could not be replaced (another program has it open); the new file is "
                              f"{kept}") from None
    _fsync_folder(os.path.dirname(final))


def _geometry_type(name: str, gdf: gpd.GeoDataFrame) -> str:
    """Layer geometry type for GDAL: the frame's declared `attrs['geometry_type']`, else the one type in its rows.

    Raises ValueError when the rows mix geometry types or 2-D and 3-D (either breaks OGC 12-128 R27/R32 readers),
    or disagree with the declared type. A frame with no rows and no declared type is written as "Unknown"
    (GeoPackage GEOMETRY).
    """
    geoms = gdf.geometry[~(gdf.geometry.isna() | gdf.geometry.is_empty)]
    kinds = set(geoms.geom_type)
    zs = set(geoms.has_z)
    if len(kinds) > 1 or len(zs) > 1:
        raise ValueError(f"layer {name!r}: rows mix geometry types {sorted(kinds)} / 2-D and 3-D; "
                         f"make them uniform (use Multi* types for all rows)")
    found = None
    if kinds:
        kind = kinds.pop()
        if kind not in _GDAL_TYPES:
            raise ValueError(f"layer {name!r}: geometry type {kind!r} cannot be written to a GeoPackage layer")
        found = f"{_GDAL_TYPES[kind]}{' Z' if zs.pop() else ''}"
    declared = gdf.attrs.get("geometry_type")
    if declared and found and declared != found:
        raise ValueError(f"layer {name!r}: declared geometry type {declared!r} but the rows are {found!r}")
    return declared or found or "Unknown"


def _check_frame(name, gdf) -> None:
    """Raise ValueError for a frame GDAL would write wrongly or not at all (see gis-notes pitfalls 5, 6, 8)."""
    if not isinstance(name, str) or not name:
        raise ValueError(f"layer names must be non-empty text; got {name!r}")
    if not isinstance(gdf, gpd.GeoDataFrame):
        raise ValueError(f"layer {name!r}: expected a GeoDataFrame; got {type(gdf).__name__}")
    if gdf.crs is None:
        raise ValueError(f"layer {name!r} has no CRS; set the project CRS before writing")
    fields = [c for c in gdf.columns if c != gdf.geometry.name]
    lowered = [str(c).lower() for c in fields]
    clash = sorted({c for c in fields if lowered.count(str(c).lower()) > 1}
                   | {c for c in fields if str(c).lower() in ("fid", GEOMETRY_COLUMN)})
    if clash:
        raise ValueError(f"layer {name!r}: field names {clash} clash (same name up to case, or 'fid'/'geom')")
    for c in fields:
        if pd.api.types.is_datetime64_any_dtype(gdf[c]) and getattr(gdf[c].dt, "tz", None) is None:
            raise ValueError(f"layer {name!r}: date-time field {c!r} has no time zone; GeoPackage stores UTC")


def _check_layers(layers: dict) -> None:
    if not layers:
        raise ValueError("no layers to write")
    lowered = [str(n).lower() for n in layers]
    same = sorted(n for n in layers if lowered.count(str(n).lower()) > 1)
    if same:
        raise ValueError(f"layer names {same} differ only by case; GeoPackage cannot hold both")
    for name, gdf in layers.items():
        _check_frame(name, gdf)


def check_written(path, layer_names) -> None:
    """Check a freshly written GeoPackage with SQLite, read-only; raise OutputError when it is not sound.

    Checks: the GeoPackage application id (OGC 12-128 R2), `PRAGMA integrity_check` (R6), rollback journal mode
    (a WAL file cannot be moved without its -wal), every layer listed in gpkg_contents, and no -journal/-wal left.
    """
    path = os.fspath(path)
    problems = []
    with contextlib.closing(sqlite3.connect(read_only_uri(path), uri=True)) as con:
        if con.execute("PRAGMA application_id").fetchone()[0] != APPLICATION_ID_GPKG:
            problems.append("application_id is not GPKG")
        integrity = con.execute("PRAGMA integrity_check").fetchall()
        if integrity != [("ok",)]:
            problems.append(f"integrity_check says {integrity[:3]}")
        if con.execute("PRAGMA journal_mode").fetchone()[0].lower() == "wal":
            problems.append("journal mode is WAL")
        present = {r[0] for r in con.execute("SELECT table_name FROM gpkg_contents")}
    missing = [n for n in layer_names if n not in present]
    if missing:
        problems.append(f"layers {missing} are missing")
    side = _side_files(path)
    if side:
        problems.append(f"{[os.path.basename(s) for s in side]} left beside it")
    if problems:
        raise OutputError(f"{path}: written GeoPackage failed its check: {'; '.join(problems)}")


def write_geopackage(path, layers: dict[str, gpd.GeoDataFrame], *,
                     extra: Callable[[str], None] | None = None, last_change: str | None = None) -> Path:
    """Write layers to a GeoPackage, replacing any earlier file at `path` in one atomic step.

    Parameters
    ----------
    path : str or Path        The .gpkg file to write; its folder must exist.
    layers : dict             Layer name -> GeoDataFrame, written in this order. Each frame needs a CRS; a frame
                              with no rows is written as an empty layer with its fields and its declared
                              `attrs['geometry_type']`.
    extra : callable, optional
                              Called with the temporary file's path after the layers are written and before the
                              checks, to add more tables (e.g. styles) inside the same atomic write.
    last_change : str, optional
                              The time every layer's gpkg_contents.last_change holds, "YYYY-MM-DDTHH:MM:SS.SSSZ"
                              (UTC). Default: the time of writing. A fixed value makes the file reproducible byte
                              for byte.

    Returns
    -------
    Path  The absolute path written.

    Raises
    ------
    OutputBusyError  When a -journal, -wal or -shm file lies beside the existing file (it is open in another
                     program, or holds a hot journal that SQLite would roll into the new file); nothing is written.
    OutputError      When the folder is missing, the name does not end in .gpkg, or the written file fails its check.
    ValueError       When a frame cannot be written faithfully (no CRS, mixed geometry types, clashing names).
    """
    final = _final_path(path, ".gpkg")
    _check_layers(layers)
    _refuse_if_busy(final)
    sweep_stale_temporaries(final)
    folder, base = os.path.split(final)
    # Same folder (same file system, so the rename is atomic) and a .gpkg suffix (GDAL picks the driver from it).
    tmp = os.path.join(folder, f".{_plain(base)}.{uuid.uuid4().hex}.tmp.gpkg")
    try:
        with _gdal_current_date(last_change):
            for name, gdf in layers.items():
                pyogrio.write_dataframe(gdf, tmp, layer=name, driver="GPKG", geometry_type=_geometry_type(name, gdf),
                                        promote_to_multi=False, dataset_options=DATASET_OPTIONS)
            if extra is not None:
                extra(tmp)
        check_written(tmp, list(layers))
        _fsync_file(tmp)
        _replace(tmp, final, database=True)
    except BaseException:
        _remove_quietly([tmp, *(tmp + s for s in SIDE_SUFFIXES)])
        raise
    return Path(final)


@contextlib.contextmanager
def _gdal_current_date(when: str | None):
    """GDAL's OGR_CURRENT_DATE (the gpkg_contents.last_change it writes) set to `when` inside the block."""
    if when is None:
        yield
        return
    before = pyogrio.get_gdal_config_option("OGR_CURRENT_DATE")
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": when})
    try:
        yield
    finally:
        pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": before})


def write_text_atomic(path, text: str, encoding: str = "utf-8") -> Path:
    """Write a text file (e.g. summary.json) through a temporary file, fsync and an atomic rename.

    Parameters
    ----------
    path : str or Path   The file to write; its folder must exist.
    text : str           The whole content.

    Returns
    -------
    Path  The absolute path written.
    """
    final = _final_path(path, None)
    sweep_stale_temporaries(final)
    folder, base = os.path.split(final)
    tmp = os.path.join(folder, f".{_plain(base)}.{uuid.uuid4().hex}.tmp")
    try:
        # O_EXCL: never follow or reuse an existing file; mode 0o666 so the umask applies as for any new file.
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0), 0o666)
        with os.fdopen(fd, "wb") as f:
            f.write(text.encode(encoding))
            f.flush()
            os.fsync(f.fileno())
        _replace(tmp, final, database=False)
    except BaseException:
        _remove_quietly([tmp])
        raise
    return Path(final)
