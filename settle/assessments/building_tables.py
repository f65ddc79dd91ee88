"""Building results as tables: the columns of the `buildings` and `building_walls` layers, the rows of
buildings.csv and the counts of summary.json."""
from __future__ import annotations

import datetime

import numpy as np
import pandas as pd
import shapely

from ..inputs.building_settings import STIFFNESS_METHODS
from ..inputs.footprints import Buildings
from .building_damage import CATEGORY_LABELS, NOT_ASSESSED, category_label
from .buildings import BuildingResults


BUILDING_FIELDS = ("id", "height_m", "foundation_depth_m", "structure", "e_over_g", "defaults_used",
                   "max_settlement_mm", "max_tilt", "screened_out", "deflection_ratio", "horizontal_strain_pct",
                   "tensile_strain_pct", "category", "category_label", "governing_wall", "governing_mode",
                   "stiffness_correction", "note", "worst_category", "worst_drive", "worst_face_chainage_m")
WALL_FIELDS = ("building_id", "wall", "part", "length_m", "parts", "governing_from_m", "governing_to_m",
               "governing_mode", "length_to_height", "greenfield_deflection_ratio",
               "greenfield_horizontal_strain_pct", "deflection_ratio", "horizontal_strain_pct", "bending_strain_pct",
               "diagonal_strain_pct", "combined_bending_strain_pct", "combined_diagonal_strain_pct",
               "tensile_strain_pct", "governing_strain", "category", "category_label")


def _nullable(values, missing) -> pd.api.extensions.ExtensionArray:
    """Integers with NULL where `missing` (pandas Int64, written as INTEGER with NULLs)."""
    out = pd.array(np.asarray(values, dtype=np.int64), dtype="Int64")
    out[np.asarray(missing, dtype=bool)] = pd.NA
    return out


def _input_columns(buildings: Buildings) -> dict:
    """The input attributes to carry. An attribute an output field was read from under the same name (e.g. the
    input height_m) gives way to that field, which holds the value used; any other input name that an output field
    or an input attribute before it uses, in any letter case (a GeoPackage cannot hold "use" and "USE"), is renamed
    "input_<name>" until it is unique. Dates and times are carried as ISO 8601 text."""
    ours = {f.lower() for f in BUILDING_FIELDS} | {"geometry", "geom", "fid", "x_m", "y_m"}
    out = {}
    for name in buildings.attributes.columns:
        key = str(name)
        if buildings.sources.get(key) == key:
            continue
        while key.lower() in ours:
            key = f"input_{key}"
        ours.add(key.lower())
        out[key] = _carried(buildings.attributes[name])
    return out


def _carried(column: pd.Series) -> np.ndarray:
    """An input attribute's values as carried: dates, date-times and times as ISO 8601 text (a date-time at
    midnight without a zone as its date alone), NULL kept as None; any other values as read."""
    if pd.api.types.is_datetime64_any_dtype(column):
        moments = column.dropna()
        date_only = column.dt.tz is None and bool((moments == moments.dt.normalize()).all())
        return np.array([None if pd.isna(v) else v.date().isoformat() if date_only else v.isoformat()
                         for v in column], dtype=object)
    values = column.to_numpy()
    if values.dtype == object:
        timed = [isinstance(v, (datetime.date, datetime.time)) for v in values]
        if any(timed):
            return np.array([v.isoformat() if t else v for v, t in zip(values, timed)], dtype=object)
    return values


def building_columns(buildings: Buildings, results: BuildingResults, envelope=None) -> dict:
    """Columns of the `buildings` GIS layer: the input attributes, then BUILDING_FIELDS, then `geometry`
    (MultiPolygon for every row, so the layer has one geometry type).

    Integers that may be NULL (category, governing_wall, worst_category) are pandas Int64 arrays; floats use NaN
    for NULL. The worst_ fields come from the construction envelope (`settle.procedure.envelope.BuildingEnvelope`):
    empty without one; worst_drive and worst_face_chainage_m empty where the completion of the sequence governs.
    """
    cols = _input_columns(buildings)
    not_assessed = results.category == NOT_ASSESSED
    cols.update({
        "id": np.array(buildings.ids, dtype=object),
        "height_m": buildings.height_m,
        "foundation_depth_m": buildings.foundation_depth_m,
        "structure": np.array(buildings.structure, dtype=object),
        "e_over_g": buildings.e_over_g,
        "defaults_used": np.array(buildings.defaults_used, dtype=object),
        "max_settlement_mm": results.max_settlement_mm,
        "max_tilt": results.max_tilt,
        "screened_out": results.screened_out.astype(bool),
        "deflection_ratio": results.deflection_ratio,
        "horizontal_strain_pct": results.horizontal_strain_pct,
        "tensile_strain_pct": results.tensile_strain_pct,
        "category": _nullable(results.category, not_assessed),
        "category_label": results.category_label,
        "governing_wall": _nullable(results.governing_wall, results.governing_wall < 0),
        "governing_mode": results.governing_mode,
        "stiffness_correction": results.stiffness_correction,
        "note": results.note,
    })
    cols.update(_worst_columns(len(buildings), envelope))
    polys = np.asarray(buildings.polygons, dtype=object)
    single = np.flatnonzero(shapely.get_type_id(polys) == 3)
    geometry = polys.copy()
    if len(single):
        geometry[single] = shapely.multipolygons(polys[single], indices=np.arange(len(single)))
    cols["geometry"] = geometry
    return cols


def _worst_columns(n: int, envelope) -> dict:
    """worst_category, worst_drive, worst_face_chainage_m of the construction envelope (empty without one)."""
    if envelope is None:
        return {"worst_category": _nullable(np.zeros(n), np.ones(n, dtype=bool)),
                "worst_drive": np.full(n, None, dtype=object), "worst_face_chainage_m": np.full(n, np.nan)}
    worst = np.asarray(envelope.worst_category)
    drive = np.array([d if d else None for d in envelope.worst_drive], dtype=object)
    return {"worst_category": _nullable(worst, worst == NOT_ASSESSED), "worst_drive": drive,
            "worst_face_chainage_m": np.asarray(envelope.worst_face_chainage_m, dtype=float)}


def _parts_text(results: BuildingResults, wall_index: np.ndarray) -> np.ndarray:
    """E.g. "hogging 0.0-3.1 m; sagging 3.1-9.0 m" for each wall."""
    p = results.parts
    texts = {w: [] for w in wall_index.tolist()}
    for w, a, b, sag in zip(p.wall.tolist(), p.from_m.tolist(), p.to_m.tolist(), p.sagging.tolist()):
        if w in texts:
            texts[w].append(f"{'sagging' if sag else 'hogging'} {a:.1f}-{b:.1f} m")
    return np.array(["; ".join(texts[w]) for w in wall_index.tolist()], dtype=object)


def wall_columns(buildings: Buildings, results: BuildingResults) -> dict:
    """Columns of the `building_walls` GIS layer: one row per wall assessed at stage 2 (WALL_FIELDS), the values of
    the wall's governing part, and `geometry` (the wall as a LineString from its start to its end)."""
    walls, p = results.walls, results.parts
    w = np.flatnonzero(results.wall_governing_part >= 0)
    k = results.wall_governing_part[w]
    ids = np.array(buildings.ids, dtype=object)
    cols = {
        "building_id": ids[walls.building[w]] if len(w) else np.array([], dtype=object),
        "wall": walls.number[w],
        "part": walls.part[w],
        "length_m": walls.length_m[w],
        "parts": _parts_text(results, w),
        "governing_from_m": p.from_m[k],
        "governing_to_m": p.to_m[k],
        "governing_mode": np.where(p.sagging[k], "sagging", "hogging").astype(object),
        "length_to_height": p.length_to_height[k],
        "greenfield_deflection_ratio": p.greenfield_deflection_ratio[k],
        "greenfield_horizontal_strain_pct": p.greenfield_horizontal_strain_pct[k],
        "deflection_ratio": p.deflection_ratio[k],
        "horizontal_strain_pct": p.horizontal_strain_pct[k],
        "bending_strain_pct": p.bending_strain_pct[k],
        "diagonal_strain_pct": p.diagonal_strain_pct[k],
        "combined_bending_strain_pct": p.combined_bending_strain_pct[k],
        "combined_diagonal_strain_pct": p.combined_diagonal_strain_pct[k],
        "tensile_strain_pct": p.tensile_strain_pct[k],
        "governing_strain": np.where(p.bending_governs[k], "bending", "diagonal").astype(object),
        "category": p.category[k].astype(np.int64),
        "category_label": category_label(p.category[k]),
        "geometry": shapely.linestrings(np.stack([walls.start_xy[w], walls.end_xy[w]], axis=1))
        if len(w) else np.array([], dtype=object),
    }
    return cols


def report_rows(buildings: Buildings, results: BuildingResults, envelope=None) -> list[dict]:
    """Rows of the CSV table for the assessment report: BUILDING_FIELDS per building, plus `x_m`, `y_m` of a point
    inside the footprint; empty text for values that do not exist (NaN, or no category)."""
    cols = building_columns(buildings, results, envelope)
    where = shapely.point_on_surface(np.asarray(buildings.polygons, dtype=object))
    cols["x_m"], cols["y_m"] = shapely.get_x(where), shapely.get_y(where)
    names = BUILDING_FIELDS + ("x_m", "y_m")
    rows = []
    for r in range(len(buildings)):
        row = {}
        for name in names:
            value = cols[name][r]
            if value is pd.NA or (isinstance(value, float) and np.isnan(value)):
                value = ""
            elif isinstance(value, (np.bool_, bool)):
                value = bool(value)
            elif isinstance(value, np.integer):
                value = int(value)
            elif isinstance(value, np.floating):
                value = float(value)
            row[name] = value
        rows.append(row)
    return rows


def category_counts(buildings: Buildings, results: BuildingResults) -> dict:
    """For summary.json: buildings per damage category, how many stage 1 screened out, and what was not assessed."""
    cat = results.category
    by = {str(c): int(np.sum(cat == c)) for c in range(6)}  # 0 to 5, as the damage table has; 5 is never assigned
    return {
        "buildings": len(buildings),
        "screened_out_stage_1": int(results.screened_out.sum()),
        "assessed_stage_2": int(np.sum(~results.screened_out & (cat != NOT_ASSESSED))),
        "by_category": by,
        "category_labels": {str(c): label for c, label in enumerate(CATEGORY_LABELS)},
        "not_assessed": int(np.sum(cat == NOT_ASSESSED)),
        "footprints_skipped": len(buildings.skipped),
        "footprints_repaired": len(buildings.repaired),
        "stiffness_correction": STIFFNESS_METHODS[results.options.stiffness_correction],
        "category_5_note": "category 5 (very severe) is not assigned from strain: the published limiting tensile "
                           "strain is more than 0.3 % for both 4 and 5; category 4 here means severe to very severe",
    }
