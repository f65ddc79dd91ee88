"""The optional settlement GeoTIFF (raster extra)."""
import numpy as np
import pytest

from gis_out.raster import settlement_array, write_settlement_geotiff
from settle.assessment import Assessment

from . import builders as b

rasterio = pytest.importorskip("rasterio")


def test_geotiff_holds_the_grid_values_at_the_node_positions(tmp_path):
    # Two tiles' worth of a straight drive; every cell is centred on a grid node and equals the engine's value there.
    r = Assessment(b.project([b.drive([[0, 0], [300, 0]], 4.0)], spacing=1.0)).result
    path = write_settlement_geotiff(r.tiles, "EPSG:25832", tmp_path / "s.tif")
    with rasterio.open(path) as src:
        assert src.crs.to_epsg() == 25832 and src.res == (1.0, 1.0)
        band = src.read(1)
        west, north = src.transform.c, src.transform.f
        cols = np.floor(r.grid.x_m - west).astype(int)
        rows = np.floor(north - r.grid.y_m).astype(int)
        np.testing.assert_allclose(band[rows, cols], r.grid.settlement_mm, rtol=1e-6, atol=1e-6)
        assert band.sum() * 1.0 * 1e-3 == pytest.approx(r.settlement_volume_m3, rel=1e-5)  # same trough volume
    assert not list(tmp_path.glob(".*tmp*"))


def test_empty_tiles_give_a_single_zero_cell():
    from settle.engine.movements import SettlementTiles

    grid, _, _ = settlement_array(SettlementTiles(1.0, 0.0, 0.0, 8))
    assert grid.shape == (1, 1) and grid[0, 0] == 0
