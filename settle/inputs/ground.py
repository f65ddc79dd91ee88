"""The ground: its surface (flat, triangulated or a DEM), its layers, and what the trough models need from them."""
from __future__ import annotations

import numpy as np
from scipy.interpolate import LinearNDInterpolator
from scipy.spatial import Delaunay, QhullError

from ..errors import InputError
from .model import Ground


class GroundModel:
    """Ground surface levels and layer properties, evaluated on arrays of places.

    The top layer is taken to extend up to the ground surface wherever the surface stands above its `top_level_m`;
    the last layer has no base.
    """

    def __init__(self, ground: Ground):
        self.ground = ground
        surface = ground.surface
        self.flat_level_m = None
        if surface.raster is not None:
            self._interpolate = surface.raster.level_at
        elif surface.points_xyz is None:
            self._interpolate = None
            self.flat_level_m = float(surface.level_m)
        else:
            pts = np.asarray(surface.points_xyz, dtype=float)
            try:
                triangulation = Delaunay(pts[:, :2])
            except (QhullError, ValueError) as exc:
                raise InputError(
                    f"{surface.source}: the ground surface points cannot be triangulated "
                    f"(are they all on one line?): {str(exc).splitlines()[0]}"
                ) from None
            self._interpolate = LinearNDInterpolator(triangulation, pts[:, 2])
        layers = ground.layers
        self._tops = np.array([layer.top_level_m for layer in layers], dtype=float)
        self._k = np.array([layer.trough_width_k for layer in layers], dtype=float)
        self._cohesive = np.array([layer.behaviour == "cohesive" for layer in layers], dtype=float)
        # Layer j spans [bottoms[j], tops_open[j]]; the top one is open upward, the last one downward.
        self._tops_open = self._tops.copy()
        self._tops_open[0] = np.inf
        self._bottoms = np.append(self._tops[1:], -np.inf)

    def surface_level(self, x, y):
        """Ground surface level at plan positions; NaN outside a triangulated surface, and outside a DEM or on its
        nodata. [m]"""
        x = np.asarray(x, dtype=float)
        if self._interpolate is None:
            return np.full(np.shape(x), self.flat_level_m)
        return self._interpolate(x, np.asarray(y, dtype=float))

    def _thickness(self, upper, lower):
        """Thickness of each layer between two levels, shape (n, layers). [m]"""
        upper = np.asarray(upper, dtype=float)[..., None]
        lower = np.asarray(lower, dtype=float)[..., None]
        return np.clip(np.minimum(upper, self._tops_open) - np.maximum(lower, self._bottoms), 0.0, None)

    def trough_width_k(self, surface_level, axis_level):
        """Thickness-weighted trough width factor of the ground between the surface and the tunnel axis.

        i = sum(K_j t_j) over the layers above the axis (Selby 1988; New & O'Reilly 1991, from memory, methods.md
        section 1), which is K = sum(K_j t_j) / z0 applied to i = K z0.

        Returns
        -------
        ndarray  K. [-]
        """
        t = self._thickness(surface_level, axis_level)
        return (t @ self._k) / t.sum(axis=-1)

    def cohesive_fraction(self, upper_level, lower_level):
        """Share of cohesive ground, by thickness, between two levels (upper > lower). [-]"""
        t = self._thickness(upper_level, lower_level)
        total = t.sum(axis=-1)
        with np.errstate(invalid="ignore", divide="ignore"):
            share = (t @ self._cohesive) / total
        # A zero-thickness interval (a point at the axis level) takes the layer it lies in.
        at = np.asarray(lower_level, dtype=float)
        layer = np.clip(np.searchsorted(-self._tops, -at, side="right") - 1, 0, len(self._tops) - 1)
        return np.where(total > 0, share, self._cohesive[layer])
