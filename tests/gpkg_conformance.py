"""A GeoPackage conformance checker that needs only sqlite3 (read-only) and shapely.

Requirement numbers (R1, R2, ...) are those of OGC 12-128r19, GeoPackage 1.4.0 (spec source: the
opengeospatial/geopackage repository, spec/core/1_base.adoc, 2a_features.adoc, 2e_extensions-mechanism.adoc,
annexes/extension_spatialindex.adoc), as collected in /work/shared/gis-notes.md §B. The checks accept the versions
1.2 to 1.4 (user_version 10200..10499), whose requirements used here agree except for the RTree update triggers.

`problems(path)` returns every breach found, each message starting with its requirement number;
`assert_conformant(path)` raises AssertionError listing them all.
"""
from __future__ import annotations

import contextlib
import os
import re
import sqlite3
import struct
from pathlib import Path

import shapely

GPKG_APPLICATION_ID = 0x47504B47  # "GPKG"
GEOMETRY_TYPES = ("GEOMETRY", "POINT", "LINESTRING", "POLYGON", "MULTIPOINT", "MULTILINESTRING", "MULTIPOLYGON",
                  "GEOMETRYCOLLECTION")  # index == ISO WKB base type code
COLUMN_TYPE = re.compile(r"^(BOOLEAN|TINYINT|SMALLINT|MEDIUMINT|INT|INTEGER|FLOAT|DOUBLE|REAL|DATE|DATETIME"
                         r"|TEXT(\(\d+\))?|BLOB(\(\d+\))?)$")
DATETIME = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d{1,3})?Z$")
DATE = re.compile(r"^\d{4}-\d\d-\d\d$")
RTREE_SQL = re.compile(r"USING\s+rtree\s*\(\s*id\s*,\s*minx\s*,\s*maxx\s*,\s*miny\s*,\s*maxy\s*\)", re.IGNORECASE)


def geometry_header(blob: bytes):
    """Parse a GeoPackageBinary blob (gis-notes §B reader, with checks returned instead of asserted).

    Returns
    -------
    tuple  (header_ok, flags, srs_id, envelope, wkb_base_type, wkb_dimension, wkb_bytes); dimension 0=XY 1=Z 2=M 3=ZM.
    """
    header_ok = blob[:2] == b"GP" and blob[2] == 0 and blob[3] & 0xC0 == 0  # magic 'GP', version 0, reserved bits 0
    flags = blob[3]
    env = (flags >> 1) & 7
    order = "<" if flags & 1 else ">"
    if env > 4:
        return False, flags, None, (), None, None, b""
    n = (0, 4, 6, 6, 8)[env]
    srs = struct.unpack(order + "i", blob[4:8])[0]
    envelope = struct.unpack(f"{order}{n}d", blob[8:8 + 8 * n])
    wkb = blob[8 + 8 * n:]
    code = struct.unpack("<I" if wkb[0] else ">I", wkb[1:5])[0]
    return header_ok, flags, srs, envelope, code % 1000, code // 1000, wkb


def _columns(con, table):
    """[(name, declared type upper, notnull, pk)] of a table."""
    return [(r[1], (r[2] or "").upper(), r[3], r[5]) for r in con.execute(f'PRAGMA table_info("{table}")')]


def problems(path, require_rtree: bool = True) -> list[str]:
    """Every conformance breach found in the GeoPackage at `path`, each message prefixed by its requirement."""
    out: list[str] = []
    path = os.fspath(path)
    with open(path, "rb") as f:
        if f.read(16) != b"SQLite format 3\x00":  # R1: an SQLite 3 database file
            return ["R1: not an SQLite 3 file"]
    if not path.lower().endswith(".gpkg"):  # R3: the extension is .gpkg
        out.append("R3: file name does not end in .gpkg")
    with contextlib.closing(sqlite3.connect(Path(os.path.abspath(path)).as_uri() + "?mode=ro", uri=True)) as con:
        out += _base_checks(con)
        srs_ids = {r[0] for r in con.execute("SELECT srs_id FROM gpkg_spatial_ref_sys")}
        contents = {r[0]: r for r in con.execute(
            "SELECT table_name, data_type, srs_id, last_change FROM gpkg_contents")}
        out += _contents_checks(con, contents, srs_ids)
        version = con.execute("PRAGMA user_version").fetchone()[0]
        geometry_columns = con.execute(
            "SELECT table_name, column_name, geometry_type_name, srs_id, z, m FROM gpkg_geometry_columns").fetchall()
        features = [t for t, r in contents.items() if r[1] == "features"]
        listed = [r[0] for r in geometry_columns]
        for t in features:  # R22: one gpkg_geometry_columns row per features table
            if listed.count(t) != 1:
                out.append(f"R22: features table {t!r} has {listed.count(t)} rows in gpkg_geometry_columns")
        for t in listed:  # R23: table_name references a 'features' row of gpkg_contents
            if t not in features:
                out.append(f"R23: gpkg_geometry_columns row {t!r} is not a features table in gpkg_contents")
        for row in geometry_columns:
            out += _feature_table_checks(con, row, contents, srs_ids, version, require_rtree)
        out += _extension_checks(con)
    return out


def _base_checks(con) -> list[str]:
    out = []
    if con.execute("PRAGMA application_id").fetchone()[0] != GPKG_APPLICATION_ID:  # R2: application_id 'GPKG'
        out.append("R2: application_id is not 0x47504B47 ('GPKG')")
    version = con.execute("PRAGMA user_version").fetchone()[0]
    if not 10200 <= version < 10500:  # R2: user_version of GeoPackage 1.2 .. 1.4 (MMmmpp)
        out.append(f"R2: user_version {version} is not a GeoPackage 1.2-1.4 version")
    integrity = con.execute("PRAGMA integrity_check").fetchall()
    if integrity != [("ok",)]:  # R6: integrity_check returns 'ok'
        out.append(f"R6: integrity_check returned {integrity[:3]}")
    fk = con.execute("PRAGMA foreign_key_check").fetchall()
    if fk:  # R7: foreign_key_check returns no rows
        out.append(f"R7: foreign_key_check returned {fk[:3]}")
    # R6 on SQLite < 3.44: integrity_check does not look inside RTREE tables; rtreecheck does.
    for (name,) in con.execute("SELECT name FROM sqlite_master WHERE type='table' AND sql LIKE '%USING rtree%'"):
        check = con.execute("SELECT rtreecheck(?)", (name,)).fetchone()[0]
        if check != "ok":
            out.append(f"R6: rtreecheck({name}) returned {check!r}")
    cols = {c[0] for c in _columns(con, "gpkg_spatial_ref_sys")}
    need = {"srs_name", "srs_id", "organization", "organization_coordsys_id", "definition", "description"}
    if not need <= cols:  # R10: gpkg_spatial_ref_sys columns
        out.append(f"R10: gpkg_spatial_ref_sys lacks columns {sorted(need - cols)}")
        return out
    rows = {r[0]: r for r in con.execute(
        "SELECT srs_id, upper(organization), organization_coordsys_id, definition FROM gpkg_spatial_ref_sys")}
    expected = {4326: ("EPSG", 4326, None), -1: ("NONE", -1, "undefined"), 0: ("NONE", 0, "undefined")}
    for srs, (org, code, definition) in expected.items():  # R11: the three required spatial reference systems
        r = rows.get(srs)
        if r is None or r[1] != org or r[2] != code or (definition is not None and r[3] != definition):
            out.append(f"R11: gpkg_spatial_ref_sys row for srs_id {srs} missing or wrong: {r}")
    return out


def _contents_checks(con, contents, srs_ids) -> list[str]:
    out = []
    cols = {c[0] for c in _columns(con, "gpkg_contents")}
    need = {"table_name", "data_type", "identifier", "description", "last_change", "min_x", "min_y", "max_x",
            "max_y", "srs_id"}
    if not need <= cols:  # R13: gpkg_contents columns
        out.append(f"R13: gpkg_contents lacks columns {sorted(need - cols)}")
    objects = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type IN ('table', 'view')")}
    for t, (_, data_type, srs, last_change) in contents.items():
        if t not in objects:  # R14: table_name names an existing table or view
            out.append(f"R14: gpkg_contents names {t!r}, which does not exist")
        if not (isinstance(last_change, str) and DATETIME.match(last_change)):  # R15: last_change is a DATETIME
            out.append(f"R15: last_change of {t!r} is {last_change!r}")
        if srs is not None and srs not in srs_ids:  # R12: srs_id references gpkg_spatial_ref_sys
            out.append(f"R12: gpkg_contents srs_id {srs} of {t!r} is not in gpkg_spatial_ref_sys")
        if data_type.lower() == "features" and data_type != "features":  # R18: data_type is lowercase 'features'
            out.append(f"R18: data_type of {t!r} is {data_type!r}")
        out += _column_type_checks(con, t)
    return out


def _column_type_checks(con, table) -> list[str]:
    """R5: declared column types from the allowed list; DATETIME and DATE values in ISO-8601 form."""
    out = []
    for name, decl, _, _ in _columns(con, table):
        if not (COLUMN_TYPE.match(decl) or decl in GEOMETRY_TYPES):  # R5: allowed data types
            out.append(f"R5: column {table}.{name} has type {decl!r}")
        if decl in ("DATETIME", "DATE"):
            pattern = DATETIME if decl == "DATETIME" else DATE
            for (v,) in con.execute(f'SELECT "{name}" FROM "{table}" WHERE "{name}" IS NOT NULL'):
                if not (isinstance(v, str) and pattern.match(v)):  # R5: DATE/DATETIME in ISO-8601 UTC form
                    out.append(f"R5: {table}.{name} holds {v!r}, not a {decl}")
                    break
    return out


def _feature_table_checks(con, row, contents, srs_ids, version, require_rtree) -> list[str]:
    t, c, gtype, srs, z, m = row
    out = []
    if srs not in srs_ids:  # R26 (and R16): srs_id references gpkg_spatial_ref_sys
        out.append(f"R26: {t}.{c} srs_id {srs} is not in gpkg_spatial_ref_sys")
    if t in contents and contents[t][2] != srs:  # R146: same srs_id as gpkg_contents
        out.append(f"R146: {t}.{c} srs_id {srs} differs from gpkg_contents srs_id {contents[t][2]}")
    if gtype not in GEOMETRY_TYPES:  # R25: an uppercase geometry type name
        out.append(f"R25: {t}.{c} geometry_type_name {gtype!r}")
    if z not in (0, 1, 2):  # R27: z is 0, 1 or 2
        out.append(f"R27: {t}.{c} z = {z!r}")
    if m not in (0, 1, 2):  # R28: m is 0, 1 or 2
        out.append(f"R28: {t}.{c} m = {m!r}")
    cols = _columns(con, t)
    names = {n: decl for n, decl, _, _ in cols}
    if c not in names:  # R24: column_name is a column of the table
        return out + [f"R24: {t} has no column {c!r}"]
    pks = [(n, decl) for n, decl, _, pk in cols if pk]
    if len(pks) != 1 or pks[0][1] != "INTEGER":  # R29: exactly one INTEGER PRIMARY KEY
        out.append(f"R29: {t} primary key is {pks}")
    geom_cols = [n for n, decl in names.items() if decl in GEOMETRY_TYPES]
    if geom_cols != [c]:  # R30: exactly one geometry column
        out.append(f"R30: {t} has geometry columns {geom_cols}")
    if names[c] != gtype:  # R31: declared column type equals geometry_type_name
        out.append(f"R31: {t}.{c} declared {names[c]!r}, gpkg_geometry_columns says {gtype!r}")
    out += _blob_checks(con, t, c, gtype, srs, z, m)
    out += _rtree_checks(con, t, c, version, require_rtree)
    return out


def _blob_checks(con, t, c, gtype, srs, z, m) -> list[str]:
    """R19, R27, R28, R32, R33, R152 on every geometry blob; one message per requirement with a count."""
    bad: dict[str, list] = {}
    for fid, blob in con.execute(f'SELECT rowid, "{c}" FROM "{t}" WHERE "{c}" IS NOT NULL'):
        ok, flags, blob_srs, envelope, base, dim, _ = geometry_header(blob)
        if not ok:  # R19: GeoPackageBinary header (magic 'GP', version 0, valid envelope code)
            bad.setdefault("R19: bad GeoPackageBinary header", []).append(fid)
            continue
        if blob_srs != srs:  # R33: header srs_id equals the column's srs_id
            bad.setdefault(f"R33: blob srs_id {blob_srs} != column srs_id {srs}", []).append(fid)
        if gtype == "GEOMETRYCOLLECTION":
            allowed = {4, 5, 6, 7}
        elif gtype == "GEOMETRY":
            allowed = set(range(8))
        else:
            allowed = {GEOMETRY_TYPES.index(gtype)}
        if base not in allowed:  # R32: WKB type matches geometry_type_name
            bad.setdefault(f"R32: WKB type {base} in a {gtype} column", []).append(fid)
        has_z, has_m = dim in (1, 3), dim in (2, 3)
        if (z == 0 and has_z) or (z == 1 and not has_z):  # R27: z flag agrees with the geometries
            bad.setdefault(f"R27: z={z} but the WKB {'has' if has_z else 'lacks'} Z", []).append(fid)
        if (m == 0 and has_m) or (m == 1 and not has_m):  # R28: m flag agrees with the geometries
            bad.setdefault(f"R28: m={m} but the WKB {'has' if has_m else 'lacks'} M", []).append(fid)
        if flags & 0x10 and (flags >> 1) & 7:  # R152: an empty geometry has no envelope
            bad.setdefault("R152: empty geometry with an envelope", []).append(fid)
    return [f"{msg.split(':')[0]}: {t}.{c}: {len(fids)} geometries:{msg.split(':', 1)[1]} (first fid {fids[0]})"
            for msg, fids in bad.items()]


def _rtree_checks(con, t, c, version, require_rtree) -> list[str]:
    """R75-R77: the RTree spatial index extension, its table, triggers and contents."""
    out = []
    rtree = f"rtree_{t}_{c}"
    sql = con.execute("SELECT sql FROM sqlite_master WHERE type='table' AND name=?", (rtree,)).fetchone()
    if sql is None:
        return [f"R75: {t}.{c} has no spatial index {rtree}"] if require_rtree else []
    ext = con.execute("SELECT scope FROM gpkg_extensions WHERE table_name=? AND column_name=? "
                      "AND extension_name='gpkg_rtree_index'", (t, c)).fetchall()
    if ext != [("write-only",)]:  # R75: gpkg_extensions row (t, c, 'gpkg_rtree_index', 'write-only')
        out.append(f"R75: gpkg_extensions rows for {rtree}: {ext}")
    if not RTREE_SQL.search(sql[0]):  # R76: USING rtree(id, minx, maxx, miny, maxy)
        out.append(f"R76: {rtree} is defined as {sql[0]!r}")
    triggers = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='trigger' AND tbl_name=?", (t,))}
    # R77: the maintenance triggers; 1.4 files carry update5-7, 1.2/1.3 files update1 and update3.
    version_set = ("update5", "update6", "update7") if version >= 10400 else ("update1", "update3")
    need = {f"{rtree}_{s}" for s in ("insert", "update2", "update4", "delete") + version_set}
    if not need <= triggers:
        out.append(f"R77: {t} lacks triggers {sorted(need - triggers)}")
    index = {r[0]: r[1:] for r in con.execute(f'SELECT id, minx, maxx, miny, maxy FROM "{rtree}"')}
    indexed, first_bad = 0, None
    for fid, blob in con.execute(f'SELECT rowid, "{c}" FROM "{t}" WHERE "{c}" IS NOT NULL'):
        _, flags, *_rest, wkb = geometry_header(blob)
        if flags & 0x10:
            continue
        indexed += 1
        box = index.get(fid)
        minx, miny, maxx, maxy = shapely.from_wkb(wkb).bounds
        # R75-R77: RTree bounds are float32 rounded outward, so they enclose the geometry within float32 precision.
        tol = lambda v: 1e-6 * abs(v) + 1e-6  # noqa: E731  float32 relative precision is 6e-8
        if first_bad is None and (box is None or not (
                box[0] <= minx and box[1] >= maxx and box[2] <= miny and box[3] >= maxy
                and minx - box[0] < tol(minx) and box[1] - maxx < tol(maxx)
                and miny - box[2] < tol(miny) and box[3] - maxy < tol(maxy))):
            first_bad = f"R75-R77: {rtree} entry for fid {fid} is {box}, geometry bounds {(minx, maxx, miny, maxy)}"
    if first_bad:
        out.append(first_bad)
    if indexed != len(index):  # R75-R77: one entry per non-NULL, non-empty geometry
        out.append(f"R75-R77: {rtree} has {len(index)} entries for {indexed} non-empty geometries")
    return out


def _extension_checks(con) -> list[str]:
    """R58-R64: rows of gpkg_extensions are well formed."""
    out = []
    if not con.execute("SELECT 1 FROM sqlite_master WHERE name='gpkg_extensions'").fetchone():
        return out
    for t, c, name, scope in con.execute("SELECT table_name, column_name, extension_name, scope FROM gpkg_extensions"):
        if not re.match(r"^[A-Za-z0-9]+_[A-Za-z0-9_]+$", name or ""):  # R62: <author>_<extension name>
            out.append(f"R62: extension name {name!r}")
        if scope not in ("read-write", "write-only"):  # R64: scope
            out.append(f"R64: extension {name!r} scope {scope!r}")
        if c is not None and t is not None and c not in {x[0] for x in _columns(con, t)}:  # R61: column exists
            out.append(f"R61: extension {name!r} names missing column {t}.{c}")
    return out


def assert_conformant(path, require_rtree: bool = True) -> None:
    """Raise AssertionError listing every breach `problems` finds."""
    found = problems(path, require_rtree)
    assert not found, f"{path} is not a conformant GeoPackage:\n" + "\n".join(found)
