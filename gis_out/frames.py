"""A run's results as GeoDataFrames, one per GIS layer, all in the project CRS.

Layers and fields (the names are part of the output format; GIS projects refer to them):

- `route`             LineString Z per drive: drive, start_chainage_m, end_chainage_m, length_m, outer_diameter_m,
                      face_chainage_m (NULL when the drive is complete), excavated_to_m, min_cover_m,
                      min_axis_depth_m, lost_volume_m3.
- `route_reaches`     LineString Z per reach of each drive (REACH_FIELDS): cut where volume loss or K, the face
                      support mode, a river or the face changes, with the face check's results within each reach.
- `route_profile`     Point every metre of chainage along each drive's axis: drive, chainage_m, ground_level_m,
                      axis_level_m, cover_m (the ground surface model; river beds are in face_stations).
- `grid`              Point per grid node kept by the run: settlement_mm, ux_mm, uy_mm, strain_max_ue, strain_min_ue,
                      tilt, horizontal_mm, strain_max_azimuth_deg.
- `points`            Point per reporting point: id, depth_m, then the fields of `grid`. Absent when the run had no
                      reporting points.
- `settlement_bands`  MultiPolygon per band: band, lower_mm, upper_mm (see `gis_out.contours.settlement_bands`).
- `settlement_lines`  MultiLineString per level: level_mm.
- `buildings`         MultiPolygon per building (settle.buildings.building_columns): its input attributes, then
                      max_settlement_mm, max_tilt, screened_out, deflection_ratio, horizontal_strain_pct,
                      tensile_strain_pct, category, category_label, governing_wall, and more.
- `building_walls`    LineString per wall assessed at stage 2 (settle.buildings.wall_columns).
- `utilities`         LineString per buried pipe (settle.pipelines.UTILITY_FIELDS): demands, allowables, verdict;
                      `status_class` is the status as an integer (0 within limits, 1 near limit, 2 exceeds,
                      3 not checked, 4 crosses the tunnel).
- `utility_critical_points`  Point per pipe and check where its demand is greatest (CRITICAL_POINT_FIELDS).
- `face_stations`     Point per face-check station (settle.face_stations): drive, chainage_m, cover_m,
                      water_pressure_kpa, support_min_kpa, blowout_kpa, support_max_kpa, window_kpa, status, and more.
                      `status_class`: 0 open, 1 narrow, 2 closed. With it the `route` layer gains
                      face_min_window_kpa, face_min_window_chainage_m, face_closed_stations, face_narrow_stations,
                      face_low_cover_stations.

Values are float64 as computed; nothing is rounded but the minimum cover (`min_cover_m` of `route` and
`route_reaches`), given to 0.01 m as every output shows it (`settle.inputs.route.rounded_cover_m`). Each frame
declares its layer geometry type in `frame.attrs["geometry_type"]`, which `write_geopackage` uses so that a layer
with no rows keeps its type.
"""
from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from settle.errors import where
from settle.inputs.route import rounded_cover_m
from settle.procedure.results import DriveResult, Movements, Result

from .contours import settlement_bands, settlement_lines

GEOMETRY_TYPES = {
    "route": "LineString Z",
    "grid": "Point",
    "points": "Point",
    "settlement_bands": "MultiPolygon",
    "settlement_bands_p95": "MultiPolygon",
    "settlement_lines": "MultiLineString",
    "face_stations": "Point",
    "buildings": "MultiPolygon",
    "building_walls": "LineString",
    "readings": "Point",
    "route_reaches": "LineString Z",
    "route_profile": "Point",
    "utilities": "LineString",
    "utility_critical_points": "Point",
}

ROUTE_FIELDS = ("drive", "start_chainage_m", "end_chainage_m", "length_m", "outer_diameter_m", "face_chainage_m",
                "excavated_to_m", "min_cover_m", "min_axis_depth_m", "lost_volume_m3")
MOVEMENT_FIELDS = ("settlement_mm", "ux_mm", "uy_mm", "strain_max_ue", "strain_min_ue", "tilt", "horizontal_mm",
                   "strain_max_azimuth_deg")
POINT_FIELDS = ("id", "depth_m") + MOVEMENT_FIELDS
BAND_FIELDS = ("band", "lower_mm", "upper_mm")
LINE_FIELDS = ("level_mm",)


def _frame(columns: dict, geometry, crs: str, layer: str) -> gpd.GeoDataFrame:
    """GeoDataFrame with the columns in the order given and its layer geometry type declared."""
    gdf = gpd.GeoDataFrame(pd.DataFrame(columns), geometry=gpd.GeoSeries(geometry, crs=crs), crs=crs)
    gdf.attrs["geometry_type"] = GEOMETRY_TYPES[layer]
    return gdf


def route_frame(drives: list[DriveResult], crs: str) -> gpd.GeoDataFrame:
    """One LineString Z per drive along its tunnel axis, launch shaft first.

    Parameters
    ----------
    drives : list of DriveResult   The drives as computed.
    crs : str                      Project CRS, e.g. "EPSG:27700".

    Returns
    -------
    GeoDataFrame  Fields of ROUTE_FIELDS. Chainages, lengths, cover and depth in [m], lost volume in [m3].
                  length_m is end minus start chainage (chainage runs along the 3-D axis); min_cover_m is the
                  drive's minimum cover (`DriveResult.min_cover_m`: route profile, river beds in river reaches) to
                  0.01 m, the value every output shows; min_axis_depth_m the least at the axis vertices;
                  face_chainage_m is NaN (NULL in files) when the drive is complete.
    """
    geoms, cols = [], {k: [] for k in ROUTE_FIELDS}
    for d in drives:
        xyz = np.asarray(d.axis_xyz_m, dtype=float)
        if xyz.ndim != 2 or xyz.shape[1] != 3 or len(xyz) < 2:
            raise ValueError(f"drive {d.name!r}: axis_xyz_m must be an (n >= 2) x 3 array; got shape {xyz.shape}")
        geoms.append(shapely.linestrings(xyz))
        cols["drive"].append(d.name)
        cols["start_chainage_m"].append(d.start_chainage_m)
        cols["end_chainage_m"].append(d.end_chainage_m)
        cols["length_m"].append(d.end_chainage_m - d.start_chainage_m)
        cols["outer_diameter_m"].append(d.outer_diameter_m)
        cols["face_chainage_m"].append(np.nan if d.face_chainage_m is None else d.face_chainage_m)
        cols["excavated_to_m"].append(d.excavated_to_m)
        cols["min_cover_m"].append(rounded_cover_m(d.min_cover_m))
        cols["min_axis_depth_m"].append(np.min(d.axis_depth_m))
        cols["lost_volume_m3"].append(d.lost_volume_m3)
    columns = {"drive": pd.Series(cols["drive"], dtype=str)}
    columns.update({k: np.asarray(cols[k], dtype=np.float64) for k in ROUTE_FIELDS[1:]})
    return _frame(columns, geoms, crs, "route")


def movement_columns(m: Movements) -> dict[str, np.ndarray]:
    """The movement fields of the grid and points layers, float64, in MOVEMENT_FIELDS order.

    Returns
    -------
    dict  settlement_mm, ux_mm, uy_mm, horizontal_mm [mm]; strain_max_ue, strain_min_ue [microstrain, tensile
          positive]; tilt [-]; strain_max_azimuth_deg [deg clockwise from grid north, 0 to 180].
    """
    return {k: np.asarray(getattr(m, k), dtype=np.float64) for k in MOVEMENT_FIELDS}


def grid_frame(grid: Movements, crs: str) -> gpd.GeoDataFrame:
    """One 2-D point per grid node of the run, with its movements (fields of MOVEMENT_FIELDS)."""
    return _frame(movement_columns(grid), shapely.points(grid.x_m, grid.y_m), crs, "grid")


def points_frame(points: Movements, ids, crs: str) -> gpd.GeoDataFrame:
    """One 2-D point per reporting point: `id` (text), `depth_m` below the surface [m], then the movement fields."""
    if len(ids) != len(points):
        raise ValueError(f"result has {len(points)} reporting points but {len(ids)} point ids")
    columns = {"id": pd.Series([str(i) for i in ids], dtype=str),
               "depth_m": np.asarray(points.depth_m, dtype=np.float64)}
    columns.update(movement_columns(points))
    return _frame(columns, shapely.points(points.x_m, points.y_m), crs, "points")


def bands_frame(rows: list[dict], crs: str, layer: str = "settlement_bands") -> gpd.GeoDataFrame:
    """Settlement bands (rows of `settlement_bands`, or of `settlement_bands_p95`) as a frame; empty rows give an
    empty layer with the schema."""
    columns = {"band": np.array([r["band"] for r in rows], dtype=np.int64),
               "lower_mm": np.array([r["lower_mm"] for r in rows], dtype=np.float64),
               "upper_mm": np.array([r["upper_mm"] for r in rows], dtype=np.float64)}
    return _frame(columns, [r["geometry"] for r in rows], crs, layer)


def lines_frame(rows: list[dict], crs: str) -> gpd.GeoDataFrame:
    """Contour lines (rows of `settlement_lines`) as a frame; empty rows give an empty layer with the schema."""
    columns = {"level_mm": np.array([r["level_mm"] for r in rows], dtype=np.float64)}
    return _frame(columns, [r["geometry"] for r in rows], crs, "settlement_lines")


def face_frame(all_stations, crs: str) -> gpd.GeoDataFrame:
    """The face stations of every drive: points on the axis in plan, fields of `face_station_fields`."""
    from settle.assessments.face_tables import face_station_fields

    from settle.assessments.face_stations import STATUSES

    parts = [pd.DataFrame({**face_station_fields(st), "axis_level_m": st.axis_level_m,
                           "ground_level_m": st.ground_level_m, "surface_level_m": st.surface_level_m,
                           "water_level_m": st.water_level_m}) for st in all_stations]
    columns = pd.concat(parts, ignore_index=True)
    columns["status_class"] = _status_class(columns["status"], STATUSES)
    xy = np.concatenate([np.column_stack([st.x_m, st.y_m]) for st in all_stations])
    return _frame({k: columns[k].to_numpy() for k in columns}, shapely.points(xy), crs, "face_stations")


def _status_class(status, vocabulary) -> np.ndarray:
    """Integer class of each status word: its place in the vocabulary (0 = best), for exact styling."""
    index = {word: k for k, word in enumerate(vocabulary)}
    return np.array([index[s] for s in status], dtype=np.int64)


def _with_face_summary(route: gpd.GeoDataFrame, all_stations) -> gpd.GeoDataFrame:
    """The route layer with each drive's face-window attributes (`face_summary`) added."""
    from settle.assessments.face_tables import face_summary

    summaries = pd.DataFrame([face_summary(st) for st in all_stations])
    for name in summaries:
        route[name] = summaries[name].to_numpy()
    return route


def profile_frame(drives: list[DriveResult], crs: str) -> gpd.GeoDataFrame:
    """Points along every drive's axis in plan, every metre and at every vertex: drive, chainage_m, ground_level_m
    (the ground surface model; not the river bed), axis_level_m, cover_m. For longitudinal sections."""
    from settle.inputs.route import position_at

    parts = []
    for d in drives:
        xyz = position_at(d.axis_xyz_m, d.chainage_m, d.profile_chainage_m)
        parts.append(pd.DataFrame({"drive": d.name, "chainage_m": d.profile_chainage_m,
                                   "ground_level_m": d.profile_ground_m, "axis_level_m": d.profile_axis_m,
                                   "cover_m": d.profile_ground_m - d.profile_axis_m - d.outer_diameter_m / 2.0,
                                   "x": xyz[:, 0], "y": xyz[:, 1]}))
    table = pd.concat(parts, ignore_index=True)
    points = shapely.points(table.pop("x").to_numpy(), table.pop("y").to_numpy())
    table["drive"] = table["drive"].astype(str)
    return _frame({k: table[k].to_numpy() for k in table}, points, crs, "route_profile")


REACH_FIELDS = ("drive", "reach", "from_chainage_m", "to_chainage_m", "length_m", "volume_loss_pct",
                "trough_width_k", "excavated", "river", "support_mode", "min_cover_m", "face_min_window_kpa",
                "face_status", "face_low_cover")


SLIVER_M = 0.01  # reach ends closer than this are one [m]


def _cuts(drive, geometry, rivers) -> np.ndarray:
    """Chainages where a drive's reach attributes change: its ends, its reaches, support reaches, rivers, the face."""
    cuts = [geometry.start_chainage_m, geometry.end_chainage_m, geometry.excavated_to_m]
    cuts += [c for r in drive.reaches for c in (r.from_chainage_m, r.to_chainage_m)]
    cuts += [c for r in drive.face_support for c in (r.from_chainage_m, r.to_chainage_m)]
    cuts += [c for r in rivers if r.drive == drive.name for c in (r.from_chainage_m, r.to_chainage_m)]
    kept = [geometry.start_chainage_m]
    for c in np.unique(np.clip(cuts, geometry.start_chainage_m, geometry.end_chainage_m))[1:]:
        if c - kept[-1] > SLIVER_M:
            kept.append(float(c))
    kept[-1] = geometry.end_chainage_m  # a cut within a centimetre of the end is the end
    return np.array(kept)


def reaches_frame(result: Result) -> gpd.GeoDataFrame:
    """One LineString Z per reach of every drive: the drive cut wherever its volume loss or K, its face support mode,
    a river, or the face (excavated or not) changes, with the face check's results within it when the check ran.

    `trough_width_k` is NaN where K comes from the layers (thickness-weighted at each tunnel element); `face_status`
    is the worst status of the face stations within the reach ("" without a face check).
    """
    from settle.assessments.face_stations import STATUSES
    from settle.engine.elements import reach_values
    from settle.inputs.route import position_at

    project = result.project
    face = {st.drive: st for st in result.face}
    default_mode = (project.face.support_mode if project.face is not None else "slurry") if result.face else ""
    rows, geoms = {k: [] for k in REACH_FIELDS}, []
    for drive, geometry in zip(project.drives, result.drives):
        cuts = _cuts(drive, geometry, project.rivers)
        stations = face.get(drive.name)
        for n, (a, b) in enumerate(zip(cuts[:-1], cuts[1:]), 1):
            mid = 0.5 * (a + b)
            vl, k = reach_values(drive, np.array([mid]))
            inside = (geometry.chainage_m > a) & (geometry.chainage_m < b)
            chain = np.concatenate([[a], geometry.chainage_m[inside], [b]])
            geoms.append(shapely.linestrings(position_at(geometry.axis_xyz_m, geometry.chainage_m, chain)))
            river = [r.name or "river" for r in project.rivers
                     if r.drive == drive.name and r.from_chainage_m <= mid <= r.to_chainage_m]
            mode = [r.mode for r in drive.face_support if r.from_chainage_m <= mid < r.to_chainage_m]
            # Stations on a cut are left out (the check puts a station a centimetre on each side of a reach end to
            # show the values there); the drive's own ends belong to its first and last reach.
            first, last = n == 1, n == len(cuts) - 1
            c = stations.chainage_m if stations is not None else None
            at = (((c > a) | (first & (c >= a))) & ((c < b) | (last & (c <= b)))) if c is not None else None
            some = at is not None and at.any()
            worst = max((STATUSES.index(s) for s in stations.status[at]), default=None) if some else None
            for key, value in (("drive", drive.name), ("reach", n), ("from_chainage_m", a), ("to_chainage_m", b),
                               ("length_m", b - a), ("volume_loss_pct", 100.0 * vl[0]), ("trough_width_k", k[0]),
                               ("excavated", bool(b <= geometry.excavated_to_m + 1e-9)),
                               ("river", river[0] if river else ""),
                               ("support_mode", (mode[0] if mode else default_mode) if result.face else ""),
                               ("min_cover_m", rounded_cover_m(geometry.least_cover_m(a, b, river=bool(river)))),
                               ("face_min_window_kpa", float(np.min(stations.window_kpa[at])) if some else np.nan),
                               ("face_status", STATUSES[worst] if worst is not None else ""),
                               ("face_low_cover", bool(stations.low_cover[at].any()) if some else False)):
                rows[key].append(value)
    columns = {k: (pd.Series(v, dtype=str) if k in ("drive", "river", "support_mode", "face_status")
                   else np.asarray(v)) for k, v in rows.items()}
    return _frame(columns, geoms, project.crs, "route_reaches")


def readings_frame(comparison, crs: str) -> gpd.GeoDataFrame:
    """Each monitored point's latest reading against the prediction (settle.fitting.Comparison)."""
    from settle.monitoring.fitting import STATUS_AMBER, STATUS_CLEAR, STATUS_RED

    dates = pd.to_datetime(comparison.date).tz_localize("UTC")
    columns = {"point_id": pd.Series(comparison.point_id, dtype=str), "drive": pd.Series(comparison.drive, dtype=str),
               "date": dates, "face_chainage_m": comparison.face_chainage_m, "depth_m": comparison.depth_m,
               "reading_mm": comparison.reading_mm, "predicted_mm": comparison.predicted_mm,
               "difference_mm": comparison.difference_mm, "fitted_mm": comparison.fitted_mm,
               "trigger_status": pd.Series(comparison.trigger_status, dtype=str)}
    columns["status_class"] = _status_class(comparison.trigger_status, (STATUS_CLEAR, STATUS_AMBER, STATUS_RED))
    return _frame(columns, shapely.points(comparison.x_m, comparison.y_m), crs, "readings")


def rows_frame(rows: list[dict], fields, crs: str, layer: str) -> gpd.GeoDataFrame:
    """A layer from rows of dicts (each with the `fields` and a shapely "geometry"), columns in `fields` order.

    With no rows the layer keeps its fields (as float) and geometry type, so it is still written with its schema.
    """
    if rows:
        columns = {k: [r[k] for r in rows] for k in fields}
    else:
        columns = {k: np.empty(0) for k in fields}
    return _frame(columns, [r["geometry"] for r in rows], crs, layer)


def _add_probability_columns(layers: dict, probability: dict) -> None:
    """The probabilistic run's fields appended to the buildings, utilities and grid layers (rows follow them)."""
    for layer, key in (("buildings", "buildings"), ("utilities", "utilities"), ("grid", "grid")):
        found = probability.get(key)
        if found is not None and layer in layers:
            for name, values in found.columns().items():
                if name not in ("id", "x_m", "y_m"):  # the layer has them (ids) or its geometry (positions)
                    layers[layer][name] = values


def frames(result: Result) -> dict[str, gpd.GeoDataFrame]:
    """All GIS layers of a run, keyed by layer name, in the project CRS.

    Parameters
    ----------
    result : settle.results.Result   A finished run.

    Returns
    -------
    dict  `route`, `grid`, `points` (only when the run has reporting points), `settlement_bands`,
          `settlement_lines`, `face_stations` (when the face check ran; the route then carries its summary);
          see the module docstring for the fields.
    """
    project = result.project
    crs = project.crs
    levels_where = where(project.path, "[output] contour_levels_mm")
    layers = {"route": route_frame(result.drives, crs), "route_reaches": reaches_frame(result),
              "route_profile": profile_frame(result.drives, crs),
              "grid": grid_frame(result.grid, crs)}
    if result.points is not None:
        layers["points"] = points_frame(result.points, result.point_ids, crs)
    levels = project.output.contour_levels_mm
    layers["settlement_bands"] = bands_frame(settlement_bands(result.tiles, levels, levels_where), crs)
    layers["settlement_lines"] = lines_frame(settlement_lines(result.tiles, levels, levels_where), crs)
    if result.buildings is not None:
        from settle.assessments.building_tables import building_columns, wall_columns

        for name, columns in (("buildings", building_columns(project.buildings, result.buildings,
                                                             result.building_envelope)),
                              ("building_walls", wall_columns(project.buildings, result.buildings))):
            geometry = columns.pop("geometry")
            layers[name] = _frame(columns, geometry, crs, name)
    if result.utilities is not None:
        from settle.assessments.utility_tables import (CRITICAL_POINT_FIELDS, UTILITY_FIELDS, critical_point_rows,
                                                       utility_rows)

        from settle.assessments.utilities import STATUSES as PIPE_STATUSES

        pipes = project.utilities
        rows = utility_rows(pipes, result.utilities, envelope=result.utility_envelope)
        layers["utilities"] = rows_frame(rows, UTILITY_FIELDS, crs, "utilities")
        layers["utilities"]["status_class"] = _status_class(layers["utilities"]["status"], PIPE_STATUSES)
        layers["utility_critical_points"] = rows_frame(critical_point_rows(pipes, result.utilities),
                                                       CRITICAL_POINT_FIELDS, crs, "utility_critical_points")
    if result.probability is not None:
        _add_probability_columns(layers, result.probability)
        if result.probability.get("tiles_p95") is not None:
            layers["settlement_bands_p95"] = bands_frame(
                settlement_bands(result.probability["tiles_p95"], levels, levels_where), crs, "settlement_bands_p95")
    if result.face:
        layers["route"] = _with_face_summary(layers["route"], result.face)
        layers["face_stations"] = face_frame(result.face, crs)
    return layers
