"""The ground surface from a DEM ([ground] surface_raster): bilinear sampling, reprojection, nodata and a route off
the raster as errors naming chainages, and the project file's checks of the key.

Every raster is written by the test with rasterio."""
from __future__ import annotations

import numpy as np
import pyproj
import pytest
import rasterio
from hypothesis import given, settings
from hypothesis import strategies as st
from rasterio.transform import Affine

from settle.errors import InputError
from settle.inputs.dem_surface import read_dem
from settle.inputs.project_file import load_project
from settle.procedure.orchestrator import Assessment

from .test_project import edit, fails, site  # noqa: F401  (site is a fixture)

CRS = "EPSG:27700"  # the test project's CRS (tests/test_project.py BASE)
X0, Y0 = 499_900.0, 180_200.0  # upper left corner of the test DEM: it covers both of the test project's drives
CELL = 5.0


def plane(x, y):
    """A sloping plane of ground levels, 20 m at the DEM's corner. [m]"""
    return 20.0 + 0.01 * (x - X0) - 0.004 * (y - Y0)


def write_dem(path, values=None, crs=CRS, transform=None, nodata=-9999.0, count=1, dtype="float32"):
    """A GeoTIFF of `values` (rows from the north), or of `plane` at the cell centres of a 100 x 80 grid."""
    transform = transform or Affine(CELL, 0.0, X0, 0.0, -CELL, Y0)
    if values is None:
        rows, cols = np.mgrid[0:80, 0:100]
        x, y = transform @ (cols + 0.5, rows + 0.5)
        values = plane(np.asarray(x), np.asarray(y))
    values = np.asarray(values, dtype=dtype)
    with rasterio.open(path, "w", driver="GTiff", width=values.shape[1], height=values.shape[0], count=count,
                       dtype=dtype, crs=crs, transform=transform, nodata=nodata) as dem:
        for band in range(1, count + 1):
            dem.write(values, band)
    return path


def test_bilinear_sampling_is_exact_on_a_plane_and_matches_cells_at_their_centres(tmp_path):
    """A bilinear interpolant reproduces any plane exactly (it holds every linear function), and returns a cell's own
    value at the cell's centre."""
    dem = read_dem(write_dem(tmp_path / "dem.tif"), CRS, "test")
    rng = np.random.default_rng(4)
    x = rng.uniform(X0 + CELL / 2, X0 + 99.5 * CELL, 500)
    y = rng.uniform(Y0 - 79.5 * CELL, Y0 - CELL / 2, 500)
    np.testing.assert_allclose(dem.level_at(x, y), plane(x, y), atol=2e-5)  # float32 storage: ~1e-6 of 20 m
    values = np.arange(12.0).reshape(3, 4)
    dem = read_dem(write_dem(tmp_path / "small.tif", values, dtype="float64"), CRS, "test")
    centres_x = X0 + (np.arange(4) + 0.5) * CELL
    centres_y = Y0 - (np.arange(3) + 0.5) * CELL
    cx, cy = np.meshgrid(centres_x, centres_y)
    np.testing.assert_array_equal(dem.level_at(cx, cy), values)
    # halfway between four centres: their mean
    assert dem.level_at(X0 + CELL, Y0 - CELL) == pytest.approx(np.mean([0, 1, 4, 5]))


@settings(max_examples=50, deadline=None)
@given(st.floats(0.0, 1.0), st.floats(0.0, 1.0), st.integers(0, 2**31 - 1))
def test_bilinear_value_lies_within_its_four_cells(u, v, seed):
    values = np.random.default_rng(seed).uniform(-5, 50, (4, 5))
    dem = read_dem(write_dem_mem(values), CRS, "test")
    x = X0 + (1.5 + u) * CELL
    y = Y0 - (1.5 + v) * CELL
    four = values[1:3, 1:3]
    level = float(dem.level_at(x, y))
    assert four.min() - 1e-9 <= level <= four.max() + 1e-9


def write_dem_mem(values):
    import tempfile

    folder = tempfile.mkdtemp(prefix="settle-dem-")
    return write_dem(f"{folder}/dem.tif", values, dtype="float64")


def test_nodata_and_places_off_the_raster_have_no_level(tmp_path):
    values = np.full((3, 4), 10.0)
    values[1, 2] = -9999.0
    dem = read_dem(write_dem(tmp_path / "holes.tif", values, dtype="float64"), CRS, "test")
    beside_hole = dem.level_at(X0 + 2.0 * CELL, Y0 - 1.0 * CELL)  # among the four cells around it: the hole
    assert np.isnan(beside_hole)
    assert dem.level_at(X0 + 1.0 * CELL, Y0 - 2.5 * CELL) == 10.0  # four valid cells
    assert np.isnan(dem.level_at(X0 - 1.0, Y0 - CELL))  # west of the first centre
    assert np.isnan(dem.level_at(X0 + CELL, Y0 + 10.0))  # north of the raster


def test_a_dem_in_another_crs_is_sampled_at_the_places_transformed_into_it(tmp_path):
    """The same plane written in WGS 84 (cells of 1e-5 degrees) gives, at a project place, the level of the plane
    at that place to within the plane's change across a fraction of a cell (bilinear between slightly rotated cells
    is not exact: within 0.01 m here)."""
    to_wgs = pyproj.Transformer.from_crs(CRS, "EPSG:4326", always_xy=True)
    lon0, lat0 = to_wgs.transform(X0, Y0)
    d = 1e-5
    rows, cols = np.mgrid[0:600, 0:900]
    lon, lat = lon0 + (cols + 0.5) * d, lat0 - (rows + 0.5) * d
    back = pyproj.Transformer.from_crs("EPSG:4326", CRS, always_xy=True)
    x, y = back.transform(lon, lat)
    path = write_dem(tmp_path / "wgs.tif", plane(x, y), crs="EPSG:4326",
                     transform=Affine(d, 0.0, lon0, 0.0, -d, lat0), dtype="float64")
    dem = read_dem(path, CRS, "test")
    assert "own CRS" in dem.crs_note
    px, py = X0 + np.array([60.0, 200.0, 350.0]), Y0 - np.array([30.0, 150.0, 250.0])
    np.testing.assert_allclose(dem.level_at(px, py), plane(px, py), atol=0.01)


RASTER_GROUND = ('surface_level_m = 20.0', 'surface_raster = "dem.tif"')


def test_a_project_on_a_dem_takes_its_levels_for_the_route_cover_and_elements(site):  # noqa: F811
    write_dem(site / "dem.tif")
    project = load_project(edit(site, *RASTER_GROUND))
    assessment = Assessment(project).route()
    west = assessment.drives[0]
    xy = west.axis_xyz_m[:, :2]
    np.testing.assert_allclose(west.surface_level_m, plane(xy[:, 0], xy[:, 1]), atol=2e-5)
    np.testing.assert_allclose(west.cover_m, west.surface_level_m - west.axis_xyz_m[:, 2] - 0.75, atol=1e-9)
    e = assessment.elements
    mid = e.start_xy + e.direction * (e.plan_length_m / 2)[:, None]
    np.testing.assert_allclose(e.surface_level_m, plane(mid[:, 0], mid[:, 1]), atol=0.05)  # element means


def test_nodata_under_a_route_is_an_error_naming_its_chainages(site):  # noqa: F811
    rows, cols = np.mgrid[0:80, 0:100]
    x, y = X0 + (cols + 0.5) * CELL, Y0 - (rows + 0.5) * CELL
    values = plane(x, y)
    values[(x > 500_020) & (x < 500_035) & (np.abs(y - 180_000) < 8)] = -9999.0  # a hole across West
    write_dem(site / "dem.tif", values)
    pattern = (r'"West": the DEM \(.*dem\.tif\) has no level under the route at chainage 1[0-9]\.0-[34][0-9]\.0 m; '
               r"the DEM ends or has nodata")
    message = route_fails(edit(site, *RASTER_GROUND), pattern)
    assert "\n" not in message


def test_a_route_off_the_dem_is_an_error_naming_the_chainage(site):  # noqa: F811
    # the raster starts 150 m east of West's launch shaft
    write_dem(site / "dem.tif", transform=Affine(CELL, 0.0, X0 + 150.0, 0.0, -CELL, Y0))
    route_fails(edit(site, *RASTER_GROUND), r'"West": the alignment leaves the DEM \(.*\) at chainage 0\.0 m '
                                            r"\(vertex 1")


def route_fails(path, pattern) -> str:
    """The route of the project at `path` (built when a run starts) fails with a message matching `pattern`."""
    with pytest.raises(InputError, match=pattern) as caught:
        Assessment(load_project(path)).route()
    return str(caught.value)


@pytest.mark.parametrize("make, pattern", [
    (lambda p: write_dem(p, count=2), "has 2 bands; give a single-band DEM"),
    (lambda p: write_dem(p, crs=None), "has no coordinate reference system"),
    (lambda p: write_dem(p, np.full((3, 3), -9999.0)), "holds no valid level"),
    (lambda p: write_dem(p, np.full((3, 3), 1e30), nodata=None), "outside -12000 to 9000 m"),
    (lambda p: write_dem(p, np.full((1, 5), 10.0)), "a DEM needs at least 2 x 2"),
    (lambda p: p.write_bytes(b""), "cannot be read as a raster"),
    (lambda p: p.write_text("x,y,z\n1,2,3\n"), "cannot be read as a raster"),
])
def test_a_file_that_is_no_usable_dem_is_one_line_naming_the_key(site, make, pattern):  # noqa: F811
    make(site / "dem.tif")
    message = fails(edit(site, *RASTER_GROUND), r"project\.toml \[ground\] surface_raster: .*dem\.tif.*" + pattern)
    assert "\n" not in message


def test_exactly_one_surface_is_given(site):  # noqa: F811
    write_dem(site / "dem.tif")
    both = edit(site, "groundwater_level_m = 17.5", 'surface_raster = "dem.tif"\ngroundwater_level_m = 17.5')
    fails(both, r"\[ground\]: give exactly one of .* got surface_level_m and surface_raster")
    fails(edit(site, 'surface_level_m = 20.0\nsurface_raster = "dem.tif"\n', ""), r"give exactly one of .* got none")


@pytest.mark.parametrize("value, pattern", [
    ("1e308", "must be non-empty text in quotes; got 1e"), ("nan", "must be non-empty text in quotes; got nan"),
    ('""', "must be non-empty text"), ('"missing.tif"', "file not found"),
])
def test_surface_raster_must_name_a_file(site, value, pattern):  # noqa: F811
    with pytest.raises(InputError, match=pattern):
        load_project(edit(site, "surface_level_m = 20.0", f"surface_raster = {value}"))
