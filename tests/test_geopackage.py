"""Tests of gis_out.frames and gis_out.geopackage: layers, fields, CRS, GeoPackage conformance, safe writes."""
from __future__ import annotations

import contextlib
import os
import shutil
import sqlite3
import time

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
import shapely

from gis_out import frames, write_geopackage, write_text_atomic
from gis_out import geopackage as gp
from gis_out.geopackage import OutputBusyError, OutputError
from settle.errors import InputError
from settle.inputs.model import Drive, Ground, Layer, Output, Points, Project, Surface
from settle.procedure.results import DriveResult, Movements, Result, SettlementTiles
from tests.gpkg_conformance import assert_conformant, problems

CRS = "EPSG:27700"
X0, Y0 = 530_000.0, 180_000.0
LEVELS_MM = (1.0, 5.0, 10.0)

ROUTE_FIELDS = ["drive", "start_chainage_m", "end_chainage_m", "length_m", "outer_diameter_m", "face_chainage_m",
                "excavated_to_m", "min_cover_m", "min_axis_depth_m", "lost_volume_m3"]
MOVEMENT_FIELDS = ["settlement_mm", "ux_mm", "uy_mm", "strain_max_ue", "strain_min_ue", "tilt", "horizontal_mm",
                   "strain_max_azimuth_deg"]


def drive_result(name, xyz, face_chainage_m, diameter_m=1.8, surface_m=50.0, volume_loss=0.01):
    """A DriveResult consistent with its axis: chainage along the 3-D axis, depth and cover from a flat surface."""
    xyz = np.asarray(xyz, dtype=float)
    chainage = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(xyz, axis=0), axis=1))])
    depth = surface_m - xyz[:, 2]
    excavated = chainage[-1] if face_chainage_m is None else face_chainage_m
    return DriveResult(name=name, outer_diameter_m=diameter_m, axis_xyz_m=xyz, chainage_m=chainage,
                       surface_level_m=np.full(len(xyz), surface_m), axis_depth_m=depth, cover_m=depth - diameter_m / 2,
                       face_chainage_m=face_chainage_m, excavated_to_m=excavated,
                       lost_volume_m3=volume_loss * np.pi * diameter_m**2 / 4 * excavated, element_count=10)


def movements(n, rng, depth_m=None):
    """Movements at n random places with arbitrary (random) values: the writer must carry them unchanged."""
    v = lambda scale: rng.normal(0.0, scale, n)  # noqa: E731
    return Movements(x_m=X0 + rng.uniform(0, 120, n), y_m=Y0 + rng.uniform(0, 120, n),
                     depth_m=np.zeros(n) if depth_m is None else depth_m, settlement_mm=np.abs(v(5.0)),
                     ux_mm=v(2.0), uy_mm=v(2.0), strain_xx_ue=v(300.0), strain_yy_ue=v(300.0),
                     strain_xy_ue=v(100.0), slope_x=v(1e-3), slope_y=v(1e-3))


def bowl_tiles(smax_mm=20.0, i_m=10.0, size=16):
    """Gaussian settlement bowl on 16-node tiles, centred near a tile corner, zero tiles dropped."""
    tiles = {}
    for tr in range(8):
        for tc in range(8):
            x = np.arange(tc * size, tc * size + size)
            y = np.arange(tr * size, tr * size + size)
            z = smax_mm * np.exp(-((x[None, :] - 64.3) ** 2 + (y[:, None] - 63.8) ** 2) / (2 * i_m**2))
            z[z < 1e-3] = 0.0
            if z.any():
                tiles[(tr, tc)] = z
    return SettlementTiles(1.0, X0, Y0, size, tiles)


def make_result(with_points=True, tiles=None, levels=LEVELS_MM, seed=0, path=None):
    """A small Result built by hand: two drives (one complete, one part-built), grid, points and tiles."""
    rng = np.random.default_rng(seed)
    ground = Ground(Surface(level_m=50.0), 48.0, (Layer("London Clay", 50.0, 20.0, 0.5, "cohesive"),))
    axis_a = [(X0 + 10, Y0 + 64, 42.0), (X0 + 60, Y0 + 64, 41.5), (X0 + 110, Y0 + 70, 41.0)]
    axis_b = [(X0 + 64, Y0 + 5, 44.0), (X0 + 64, Y0 + 115, 43.0)]
    drives = tuple(Drive(n, np.asarray(a)[:, :2], np.asarray(a)[:, 2], "axis", 1.8, 1.0)
                   for n, a in (("North Main", axis_a), ("Spur B", axis_b)))
    points = Points(("P1", "P2", "BH-3"), np.array([X0 + 20, X0 + 64, X0 + 90]), np.array([Y0 + 60, Y0 + 64, Y0 + 9]),
                    np.array([0.0, 2.0, 5.5]))
    project = Project("test site", CRS, ground, drives, Output(1.0, tuple(levels)), points=points, path=path)
    pts = movements(3, rng, depth_m=points.depth_m) if with_points else None
    return Result(project=project,
                  drives=[drive_result("North Main", axis_a, None), drive_result("Spur B", axis_b, 40.0)],
                  grid=movements(50, rng), tiles=bowl_tiles() if tiles is None else tiles, points=pts,
                  point_ids=points.ids if with_points else (), settlement_volume_m3=12.5, warnings=[])


def listing(folder):
    return sorted(os.listdir(folder))


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    result = make_result()
    path = write_geopackage(tmp_path_factory.mktemp("out") / "result.gpkg", frames(result))
    return result, path


# --- layers and fields --------------------------------------------------------------------------------------------
def test_frames_layers_and_geometry(written):
    result, _ = written
    layers = frames(result)
    assert list(layers) == ["route", "route_reaches", "route_profile", "grid", "points", "settlement_bands",
                            "settlement_lines"]
    assert all(g.crs == CRS for g in layers.values())
    assert list(layers["route"].geom_type) == ["LineString", "LineString"] and layers["route"].has_z.all()
    assert (layers["grid"].geom_type == "Point").all() and not layers["grid"].has_z.any()
    assert (layers["settlement_bands"].geom_type == "MultiPolygon").all()
    assert (layers["settlement_lines"].geom_type == "MultiLineString").all()
    assert "points" not in frames(make_result(with_points=False))


def test_route_fields(written):
    result, _ = written
    route = frames(result)["route"]
    assert list(route.columns) == ROUTE_FIELDS + ["geometry"]
    a, b = result.drives
    length_a = np.linalg.norm(np.diff(a.axis_xyz_m, axis=0), axis=1).sum()  # 3-D length of the axis polyline
    assert route.loc[0, "length_m"] == pytest.approx(length_a, rel=1e-12)
    assert np.isnan(route.loc[0, "face_chainage_m"]) and route.loc[1, "face_chainage_m"] == 40.0
    assert route.loc[1, "excavated_to_m"] == 40.0
    assert route.loc[0, "min_cover_m"] == pytest.approx(50.0 - 42.0 - 0.9)  # surface - highest axis - D/2
    assert route.loc[0, "min_axis_depth_m"] == pytest.approx(50.0 - 42.0)
    assert route.loc[1, "lost_volume_m3"] == b.lost_volume_m3
    np.testing.assert_array_equal(shapely.get_coordinates(route.geometry[0], include_z=True), a.axis_xyz_m)


def test_grid_and_points_fields(written):
    result, _ = written
    layers = frames(result)
    grid, points = layers["grid"], layers["points"]
    assert list(grid.columns) == MOVEMENT_FIELDS + ["geometry"]
    assert list(points.columns) == ["id", "depth_m"] + MOVEMENT_FIELDS + ["geometry"]
    for name in MOVEMENT_FIELDS:  # carried unrounded from the Movements properties
        np.testing.assert_array_equal(grid[name].to_numpy(), getattr(result.grid, name))
        assert grid[name].dtype == np.float64
    np.testing.assert_array_equal(grid.geometry.x, result.grid.x_m)
    assert list(points["id"]) == ["P1", "P2", "BH-3"]
    np.testing.assert_array_equal(points["depth_m"], [0.0, 2.0, 5.5])


def test_bad_contour_levels_reach_the_user_as_input_error(tmp_path):
    result = make_result(levels=(5.0, 1.0), path=tmp_path / "project.toml")
    with pytest.raises(InputError, match=r"project.toml \[output\] contour_levels_mm: .*strictly increasing; "
                                         r"got \[5.0, 1.0\]"):
        frames(result)


# --- the written file ---------------------------------------------------------------------------------------------
def test_written_file_is_conformant(written):
    _, path = written
    assert_conformant(path)
    with contextlib.closing(sqlite3.connect(f"file:{path}?mode=ro", uri=True)) as con:
        assert con.execute("PRAGMA user_version").fetchone()[0] == 10200  # pinned VERSION=1.2 (gis-notes pitfall 1)
        types = dict(con.execute("SELECT table_name, geometry_type_name || ':' || z FROM gpkg_geometry_columns"))
        faces = con.execute("SELECT drive, face_chainage_m FROM route ORDER BY fid").fetchall()
    assert faces == [("North Main", None), ("Spur B", 40.0)]  # NULL for the complete drive
    assert types == {"route": "LINESTRING:1", "route_reaches": "LINESTRING:1", "route_profile": "POINT:0", "grid": "POINT:0", "points": "POINT:0",
                     "settlement_bands": "MULTIPOLYGON:0", "settlement_lines": "MULTILINESTRING:0"}


def test_layers_read_back_with_exact_fields_and_crs(written):
    result, path = written
    expected = frames(result)
    assert [n for n, _ in pyogrio.list_layers(path)] == list(expected)
    for name, gdf in expected.items():
        back = gpd.read_file(path, layer=name)
        assert list(back.columns) == list(gdf.columns), name
        assert back.crs.to_epsg() == 27700, name
        assert len(back) == len(gdf), name
        for col in gdf.columns.drop("geometry"):
            if gdf[col].dtype == np.float64:  # REAL round-trips float64 exactly; NULL reads back as NaN
                np.testing.assert_array_equal(back[col].to_numpy(), gdf[col].to_numpy(), err_msg=f"{name}.{col}")
            else:
                assert list(back[col]) == list(gdf[col]), f"{name}.{col}"
        assert back.geometry.geom_equals_exact(gdf.geometry, tolerance=0.0).all(), name


def test_empty_layers_keep_their_schema(tmp_path):
    """No settlement above the first level and no grid node kept: every layer exists with its fields and type."""
    result = make_result(tiles=SettlementTiles(1.0, X0, Y0, 16, {}))
    result.grid = result.grid.subset(np.zeros(len(result.grid), dtype=bool))
    layers = frames(result)
    assert len(layers["settlement_bands"]) == 0 and len(layers["settlement_lines"]) == 0 and len(layers["grid"]) == 0
    path = write_geopackage(tmp_path / "empty.gpkg", layers)
    assert_conformant(path)
    bands = gpd.read_file(path, layer="settlement_bands")
    assert list(bands.columns) == ["band", "lower_mm", "upper_mm", "geometry"] and len(bands) == 0
    assert list(gpd.read_file(path, layer="settlement_lines").columns) == ["level_mm", "geometry"]
    with contextlib.closing(sqlite3.connect(f"file:{path}?mode=ro", uri=True)) as con:
        types = dict(con.execute("SELECT table_name, geometry_type_name FROM gpkg_geometry_columns"))
        columns = {r[1]: r[2] for r in con.execute("PRAGMA table_info(settlement_bands)")}
    assert types["settlement_bands"] == "MULTIPOLYGON" and types["settlement_lines"] == "MULTILINESTRING"
    assert types["grid"] == "POINT"
    assert list(gpd.read_file(path, layer="grid").columns) == MOVEMENT_FIELDS + ["geometry"]
    assert columns == {"fid": "INTEGER", "geom": "MULTIPOLYGON", "band": "INTEGER", "lower_mm": "REAL",
                       "upper_mm": "REAL"}


# --- the checker catches what it should ---------------------------------------------------------------------------
def broken_copy(written, tmp_path, sql: str):
    """A copy of the written GeoPackage with one SQL statement run on it."""
    copy = tmp_path / "copy.gpkg"
    shutil.copy(written[1], copy)
    with contextlib.closing(sqlite3.connect(copy)) as con:
        con.execute(sql)
        con.commit()
    return copy


def test_checker_catches_a_wrong_application_id(written, tmp_path):
    copy = broken_copy(written, tmp_path, "PRAGMA application_id = 0")
    assert any(p.startswith("R2:") for p in problems(copy))


def test_checker_catches_a_missing_geometry_columns_row(written, tmp_path):
    copy = broken_copy(written, tmp_path, "DELETE FROM gpkg_geometry_columns WHERE table_name = 'grid'")
    assert any(p.startswith("R22:") and "'grid'" in p for p in problems(copy))


def test_checker_catches_mixed_2d_and_3d(tmp_path):
    """gis-notes pitfall 3: pyogrio declares z=1 but stores 2-D blobs for the 2-D rows."""
    path = tmp_path / "mixed.gpkg"
    gdf = gpd.GeoDataFrame({"a": [1, 2]}, geometry=[shapely.Point(X0, Y0, 1.0), shapely.Point(X0, Y0)], crs=CRS)
    pyogrio.write_dataframe(gdf, path, layer="mixed", driver="GPKG")
    assert any(p.startswith("R27:") for p in problems(path))
    with pytest.raises(ValueError, match="layer 'mixed': rows mix geometry types"):
        write_geopackage(tmp_path / "refused.gpkg", {"mixed": gdf})


# --- safe writing -------------------------------------------------------------------------------------------------
def failing_on_layer(n, real=pyogrio.write_dataframe):
    """A stand-in for pyogrio.write_dataframe that raises while writing the n-th layer (after starting it)."""
    calls = []

    def write(df, path, **kw):
        calls.append(kw["layer"])
        if len(calls) == n:
            raise RuntimeError(f"simulated failure writing layer {kw['layer']}")
        return real(df, path, **kw)
    return write


def test_failure_mid_write_leaves_the_old_file_untouched(tmp_path, monkeypatch):
    old = write_geopackage(tmp_path / "result.gpkg", frames(make_result(seed=1)))
    before = old.read_bytes()
    monkeypatch.setattr(pyogrio, "write_dataframe", failing_on_layer(2))
    with pytest.raises(RuntimeError, match="simulated failure writing layer route_reaches"):
        write_geopackage(tmp_path / "result.gpkg", frames(make_result(seed=2)))
    assert old.read_bytes() == before
    assert listing(tmp_path) == ["result.gpkg"]  # no temporary file or journal left


def test_a_new_write_replaces_the_file(tmp_path):
    path = tmp_path / "result.gpkg"
    write_geopackage(path, frames(make_result(seed=1)))
    new = make_result(seed=2, with_points=False)
    write_geopackage(path, frames(new))
    assert [n for n, _ in pyogrio.list_layers(path)] == ["route", "route_reaches", "route_profile", "grid",
                                                         "settlement_bands", "settlement_lines"]
    np.testing.assert_array_equal(gpd.read_file(path, layer="grid")["ux_mm"], new.grid.ux_mm)
    assert listing(tmp_path) == ["result.gpkg"]


def test_extra_tables_are_written_inside_the_same_safe_write(tmp_path):
    """The `extra` hook adds a table (here a non-spatial one) to the temporary file; a failure in it aborts all."""
    def add_run_info(tmp):
        pyogrio.write_dataframe(pd.DataFrame({"key": ["engine"], "value": ["settle"]}), tmp, layer="run_info",
                                driver="GPKG")
    path = write_geopackage(tmp_path / "result.gpkg", frames(make_result()), extra=add_run_info)
    assert_conformant(path)
    assert gpd.read_file(path, layer="run_info")["value"].tolist() == ["settle"]
    before = path.read_bytes()

    def broken(tmp):
        raise KeyError("style table")
    with pytest.raises(KeyError, match="style table"):
        write_geopackage(path, frames(make_result(seed=5)), extra=broken)
    assert path.read_bytes() == before and listing(tmp_path) == ["result.gpkg"]


@pytest.mark.parametrize("side", ["-journal", "-wal", "-shm"])
def test_busy_output_is_refused(tmp_path, side):
    path = write_geopackage(tmp_path / "result.gpkg", frames(make_result()))
    before = path.read_bytes()
    (tmp_path / f"result.gpkg{side}").write_bytes(b"\x00" * 512)
    with pytest.raises(OutputBusyError, match=rf"result.gpkg: not replaced because result.gpkg{side} exists"):
        write_geopackage(path, frames(make_result(seed=3)))
    assert path.read_bytes() == before
    assert listing(tmp_path) == sorted(["result.gpkg", f"result.gpkg{side}"])


def test_replace_refused_by_the_system_keeps_the_new_file(tmp_path, monkeypatch):
    """Windows refuses to replace a file another program holds open: the new file is kept under a dated name."""
    path = write_geopackage(tmp_path / "result.gpkg", frames(make_result(seed=1)))
    before = path.read_bytes()
    real_replace = os.replace

    def replace(src, dst):
        if os.fspath(dst) == os.fspath(path):
            raise PermissionError(13, "The process cannot access the file")
        return real_replace(src, dst)
    monkeypatch.setattr(gp.os, "replace", replace)
    with pytest.raises(OutputBusyError, match=r"result.gpkg: could not be replaced .* the new file is .*result\.\d{8}"):
        write_geopackage(path, frames(make_result(seed=2)))
    assert path.read_bytes() == before
    (kept,) = [n for n in listing(tmp_path) if n != "result.gpkg"]
    assert kept.startswith("result.") and kept.endswith(".gpkg")
    assert_conformant(tmp_path / kept)


def test_stale_temporaries_are_swept_and_fresh_ones_kept(tmp_path):
    stale = [tmp_path / ".result.gpkg.0a1b.tmp.gpkg", tmp_path / ".result.gpkg.0a1b.tmp.gpkg-journal"]
    fresh = tmp_path / ".result.gpkg.9f9f.tmp.gpkg"  # may belong to a run writing right now
    other = tmp_path / ".other.gpkg.0a1b.tmp.gpkg"  # belongs to another output
    old = time.time() - 11 * 60
    for p in stale + [fresh, other]:
        p.write_bytes(b"x")
    for p in stale + [other]:
        os.utime(p, (old, old))
    write_geopackage(tmp_path / "result.gpkg", frames(make_result()))
    assert listing(tmp_path) == sorted([fresh.name, other.name, "result.gpkg"])


def test_awkward_folder_and_file_names(tmp_path):
    folder = tmp_path / "run #2 100% ?final"
    folder.mkdir()
    path = write_geopackage(folder / "résultat v2.gpkg", frames(make_result()))
    assert_conformant(path)
    assert listing(folder) == ["résultat v2.gpkg"]


@pytest.mark.parametrize("name, match", [
    ("missing/result.gpkg", r"output folder .*missing does not exist"),
    ("result.sqlite", r"output file name must end in .gpkg; got 'result.sqlite'"),
])
def test_bad_output_paths(tmp_path, name, match):
    with pytest.raises(OutputError, match=match):
        write_geopackage(tmp_path / name, frames(make_result()))
    assert not any(n.endswith(".tmp.gpkg") for n in listing(tmp_path))


def test_frames_that_would_be_written_wrongly_are_refused(tmp_path):
    grid = frames(make_result())["grid"]
    with pytest.raises(ValueError, match="layer 'grid' has no CRS"):
        write_geopackage(tmp_path / "a.gpkg", {"grid": grid.set_crs(None, allow_override=True)})
    with pytest.raises(ValueError, match=r"layer names \['Grid', 'grid'\] differ only by case"):
        write_geopackage(tmp_path / "a.gpkg", {"grid": grid, "Grid": grid})
    with pytest.raises(ValueError, match=r"field names \['TILT', 'tilt'\] clash"):
        write_geopackage(tmp_path / "a.gpkg", {"grid": grid.assign(TILT=1.0)})
    with pytest.raises(ValueError, match=r"date-time field 'when' has no time zone"):
        write_geopackage(tmp_path / "a.gpkg", {"grid": grid.assign(when=pd.Timestamp("2024-01-01"))})
    assert listing(tmp_path) == []


# --- text files ---------------------------------------------------------------------------------------------------
def test_write_text_atomic(tmp_path, monkeypatch):
    path = write_text_atomic(tmp_path / "summary.json", '{"settlement_max_mm": 12.5}\n')
    assert path.read_text() == '{"settlement_max_mm": 12.5}\n'
    write_text_atomic(path, '{"settlement_max_mm": 13.0}\n')
    assert path.read_text() == '{"settlement_max_mm": 13.0}\n'

    def fail(src, dst):
        raise OSError(28, "No space left on device")
    monkeypatch.setattr(gp.os, "replace", fail)
    with pytest.raises(OSError, match="No space left"):
        write_text_atomic(path, "half")
    assert path.read_text() == '{"settlement_max_mm": 13.0}\n'
    assert listing(tmp_path) == ["summary.json"]
