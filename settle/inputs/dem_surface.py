"""The ground surface from a DEM: a single-band GeoTIFF of levels in metres, sampled bilinearly.

`[ground] surface_raster = "dem.tif"`. The raster is read once with rasterio. Places are given in the project CRS;
when the raster is in another CRS the places are transformed into it (pyproj, always_xy) and sampled there, which
is the raster reprojected to the places without resampling it twice. Levels are interpolated bilinearly between the
centres of the four cells around each place (a cell's value stands at its centre, as GDAL's bilinear resampling
takes it). A place whose four cells are not all valid, nodata or NaN among them, or that lies outside the cell
centres, has no level (NaN); the route and the assessments turn that into an error naming the chainages.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import InputError
from .tables import printable

#: Levels outside this range are not ground levels in metres (a raster in feet, or of another quantity). [m]
LEVEL_LIMITS_M = (-12_000.0, 9_000.0)


@dataclass(frozen=True, eq=False)
class DemSurface:
    """A DEM's band as float64 (NaN where nodata), its affine transform (rasterio `Affine`), its CRS (WKT, or None
    when it is the project's) and the transformer from the project CRS to it."""

    levels_m: np.ndarray
    transform: tuple  # (a, b, c, d, e, f) of rasterio's Affine: x = a col + b row + c, y = d col + e row + f
    source: str
    crs_note: str = ""
    to_raster: object | None = field(default=None, repr=False)  # pyproj Transformer, or None

    def level_at(self, x, y) -> np.ndarray:
        """Ground level at plan places in the project CRS, bilinear between cell centres; NaN where any of the
        four cells is nodata, or outside the cell centres. [m]"""
        x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
        shape = np.broadcast_shapes(x.shape, y.shape)
        x, y = np.broadcast_to(x, shape).ravel(), np.broadcast_to(y, shape).ravel()
        if self.to_raster is not None and len(x):
            x, y = self.to_raster.transform(x, y)
        a, b, c, d, e, f = self.transform
        det = a * e - b * d
        col = (e * (x - c) - b * (y - f)) / det - 0.5  # fractional column of cell centres
        row = (-d * (x - c) + a * (y - f)) / det - 0.5
        rows, cols = self.levels_m.shape
        out = np.full(len(x), np.nan)
        inside = (col >= 0) & (col <= cols - 1) & (row >= 0) & (row <= rows - 1)
        c0 = np.minimum(np.floor(col[inside]).astype(np.int64), max(cols - 2, 0))
        r0 = np.minimum(np.floor(row[inside]).astype(np.int64), max(rows - 2, 0))
        c1, r1 = np.minimum(c0 + 1, cols - 1), np.minimum(r0 + 1, rows - 1)
        u, v = col[inside] - c0, row[inside] - r0
        z = self.levels_m
        out[inside] = ((1 - u) * (1 - v) * z[r0, c0] + u * (1 - v) * z[r0, c1]
                       + (1 - u) * v * z[r1, c0] + u * v * z[r1, c1])
        return out.reshape(shape)


def read_dem(path, project_crs: str, label: str) -> DemSurface:
    """Read a single-band GeoTIFF of ground levels [m] for a project in `project_crs`; InputError (one line, naming
    `label` and the file) for anything that is not such a raster."""
    import rasterio
    from rasterio.errors import RasterioError

    shown = f"{label}: {printable(path)}"
    try:
        with rasterio.open(Path(path)) as dem:
            if dem.count != 1:
                raise InputError(f"{shown} has {dem.count} bands; give a single-band DEM of ground levels in metres")
            if dem.width < 2 or dem.height < 2:
                raise InputError(f"{shown} is {dem.width} x {dem.height} cells; a DEM needs at least 2 x 2 to "
                                 "interpolate")
            levels = dem.read(1, masked=True).astype(float).filled(np.nan)
            transform, crs, driver = dem.transform, dem.crs, dem.driver
    except InputError:
        raise
    except (RasterioError, OSError, ValueError, MemoryError) as exc:
        raise InputError(f"{shown} cannot be read as a raster: {' '.join(str(exc).split())}") from None
    if driver != "GTiff":
        raise InputError(f"{shown} is a {driver} raster; give a GeoTIFF (.tif)")
    if abs(transform.a * transform.e - transform.b * transform.d) == 0.0 or not np.all(np.isfinite(tuple(transform))):
        raise InputError(f"{shown} has no usable geotransform (cell size and origin); give a georeferenced GeoTIFF")
    valid = np.isfinite(levels)
    if not valid.any():
        raise InputError(f"{shown} holds no valid level (every cell is nodata)")
    low, high = float(levels[valid].min()), float(levels[valid].max())
    if low < LEVEL_LIMITS_M[0] or high > LEVEL_LIMITS_M[1]:
        raise InputError(f"{shown} holds levels from {low:g} to {high:g}, outside {LEVEL_LIMITS_M[0]:g} to "
                         f"{LEVEL_LIMITS_M[1]:g} m; give ground levels in metres")
    to_raster, note = _transformer(crs, project_crs, shown)
    return DemSurface(levels_m=levels, transform=tuple(transform)[:6], source=str(path), crs_note=note,
                      to_raster=to_raster)


def _transformer(raster_crs, project_crs: str, shown: str):
    """The transformer from the project CRS to the raster's (None when they are the same), and a note for the
    report."""
    from pyproj import CRS, Transformer
    from pyproj.exceptions import CRSError

    if raster_crs is None:
        raise InputError(f"{shown} has no coordinate reference system; give a GeoTIFF that carries one (the project "
                         f"is in {project_crs})")
    try:
        source = CRS.from_user_input(raster_crs.to_wkt())
    except CRSError as exc:
        raise InputError(f"{shown}: its coordinate reference system is not understood: {exc}") from None
    target = CRS.from_user_input(project_crs)
    if source.equals(target, ignore_axis_order=True):
        return None, ""
    if not source.is_projected and not source.is_geographic:
        raise InputError(f"{shown}: its coordinate reference system ({source.name}) is neither projected nor "
                         "geographic")
    return (Transformer.from_crs(target, source, always_xy=True),
            f"sampled in its own CRS ({source.name}) at the project's places transformed into it")
