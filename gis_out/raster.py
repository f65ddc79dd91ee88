"""Optional settlement GeoTIFF, for users who want a continuous surface (needs the `raster` extra: rasterio).

The GeoPackage stays vector-only (grid points, bands, lines); the raster is an extra file beside it.
"""
from __future__ import annotations

import os
import uuid
from pathlib import Path

import numpy as np

from settle.engine.movements import SettlementTiles

INSTALL_HINT = 'the settlement GeoTIFF needs rasterio: pip install -e ".[raster]"'


def settlement_array(tiles: SettlementTiles) -> tuple[np.ndarray, float, float]:
    """The tiles laid into one array over their bounding box, north row first. [mm]

    Returns (array, x of the west edge, y of the north edge): each cell is centred on a grid node. Nodes in no tile
    are 0 (their settlement is below the run's precision).
    """
    if not tiles.settlement_mm:
        return np.zeros((1, 1), dtype=np.float32), tiles.origin_x_m, tiles.origin_y_m
    n, h = tiles.size, tiles.spacing_m
    keys = np.array(list(tiles.settlement_mm))
    r0, c0 = keys.min(axis=0)
    r1, c1 = keys.max(axis=0)
    grid = np.zeros(((r1 - r0 + 1) * n, (c1 - c0 + 1) * n), dtype=np.float32)
    for (tr, tc), block in tiles.settlement_mm.items():
        grid[(tr - r0) * n:(tr - r0 + 1) * n, (tc - c0) * n:(tc - c0 + 1) * n] = block
    west = tiles.origin_x_m + c0 * n * h - h / 2
    north = tiles.origin_y_m + (r1 + 1) * n * h - h / 2
    return grid[::-1], west, north


def write_settlement_geotiff(tiles: SettlementTiles, crs: str, path) -> Path:
    """Surface settlement [mm] as a tiled, compressed Float32 GeoTIFF in the project CRS, written safely."""
    try:
        import rasterio
        from rasterio.transform import Affine
    except ImportError:
        raise RuntimeError(INSTALL_HINT) from None
    grid, west, north = settlement_array(tiles)
    path = Path(path)
    tmp = path.with_name(f".{path.name}.{uuid.uuid4().hex}.tmp.tif")
    profile = dict(driver="GTiff", height=grid.shape[0], width=grid.shape[1], count=1, dtype="float32", crs=crs,
                   transform=Affine(tiles.spacing_m, 0.0, west, 0.0, -tiles.spacing_m, north), compress="deflate",
                   predictor=3, tiled=True, blockxsize=256, blockysize=256)
    try:
        with rasterio.open(tmp, "w", **profile) as dst:
            dst.write(grid, 1)
            dst.set_band_description(1, "settlement_mm (positive downward)")
            dst.update_tags(units="mm", sign="settlement positive downward")
        os.replace(tmp, path)
    except BaseException:
        if tmp.exists():
            tmp.unlink()
        raise
    return path
