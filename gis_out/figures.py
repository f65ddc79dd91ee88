"""Figures of a finished run, as PNG files (matplotlib, Agg backend): a plan map, a longitudinal section of a drive and
transverse sections across it.

Everything is read from the run's outputs: the GeoPackage layers by name (`route`, `grid`, `settlement_bands`,
`settlement_lines`, and `buildings`, `utilities`, `face_stations` when the run has them) and summary.json. Nothing is
recomputed: the figures show the numbers the run wrote. Each function writes one PNG through a temporary file in the
target folder and an atomic rename, so a failed drawing never leaves half a file.

Conventions (the project's, see `settle.results`), stated once:
- settlement positive downward, and drawn downward in the sections; horizontal strain tensile positive [microstrain];
- chainage along the 3-D tunnel axis from the route layer's `start_chainage_m` at the launch shaft (the first vertex
  of the route line), as `settle.route` measures it;
- transverse offsets are horizontal distances from the axis, positive to the right looking up-chainage (towards the
  reception shaft);
- plan coordinates in the project CRS, grid north up.

Colours, line styles and class labels are the palette tables of `gis_out.styles`, the same that style the layers in a
GIS, so a figure and the GeoPackage read alike. Every class is named in the legend with its number and its range or
words, and damage categories 2 and above are also written on the buildings, so colour is never the only cue. The
band colours match the GIS styles exactly when summary.json holds the run's contour levels
(`grid.contour_levels_mm`); otherwise they are spread over the bands present.

Names from the user (project, drives, buildings, pipes, the CRS) are drawn literally (`parse_math=False`: a "$" is
a dollar sign, never math), and the characters the font lacks come as one warning per figure (`gis_out.png`).

Where the outputs do not hold something a figure would show (ground levels along a drive that had no face check, the
water level of a river), the figure says so rather than making it up.
"""
from __future__ import annotations

import json
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import geopandas as gpd  # noqa: E402  (after choosing the backend)
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pyogrio  # noqa: E402
import shapely  # noqa: E402
from matplotlib.lines import Line2D  # noqa: E402
from matplotlib.patches import Ellipse, Patch  # noqa: E402
from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar  # noqa: E402
from shapely import LineString  # noqa: E402
from shapely.ops import substring  # noqa: E402

from settle.errors import InputError  # noqa: E402

from . import styles  # noqa: E402
from .png import glyph_checked  # noqa: E402
from .png import save_png as _save_png  # noqa: E402

# ------------------------------------------------------------------------------------------------------ palette
MM_TO_PT = 72.0 / 25.4
MARKERS = {"circle": "o", "triangle": "^", "square": "s", "star": "*"}  # styles.Symbol.shape -> matplotlib
ROUTE_COLOUR = styles.SINGLE_SYMBOLS["route"][1].colour
CONTOUR_COLOUR = styles.SINGLE_SYMBOLS["settlement_lines"][1].colour
CATEGORY_COLOURS = styles.DAMAGE_COLOURS  # damage categories 0 to 5
NOT_ASSESSED_COLOUR = "#ffffff"  # drawn with a dashed outline, as styles.damage_style draws NULL
FACE_STATUS_SYMBOLS = dict(zip(styles.face_stations.STATUSES, styles.FACE_SYMBOLS))  # open, narrow, closed
# Drawing the section (no GIS layer carries these).
GROUND = "#8c6d46"
WATER = "#3b7dd8"
TUNNEL = "#6f6f6f"

#: Chainage ticks on the plan every 50 m, or every 100 m when the map is wider than this. [m] (our choice)
CHAINAGE_STEP_SWITCH_M = 1000.0
#: Transverse sections sample the grid this far either side of the axis at most. [m] (our choice)
SECTION_MAX_HALF_WIDTH_M = 100.0
PNG_DPI = 150  # resolution of the figures [dots per inch]


# ------------------------------------------------------------------------------------------------------ reading
def read_summary(summary) -> dict:
    """summary.json as a dict: `summary` is the dict itself or the path of the file (an InputError when the file is
    missing, unreadable, not JSON or not a JSON object)."""
    if isinstance(summary, dict):
        return summary
    path = Path(summary)
    if not path.is_file():
        raise InputError(f"{path}: no summary.json here; run `settle run` first")
    try:
        summary = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise InputError(f"{path}: cannot read the run summary ({exc})") from None
    if not isinstance(summary, dict):
        raise InputError(f"{path}: the run summary must be a JSON object ({{...}}); got {json_kind(summary)}")
    return summary


def json_kind(value) -> str:
    """What a JSON value is, for a message: its kind and the start of its text."""
    kind = {dict: "an object", list: "an array", str: "a string", bool: "true or false", type(None): "null"}.get(
        type(value), "a number")
    text = json.dumps(value)
    return f"{kind} {text if len(text) <= 40 else text[:37] + '...'}"


def layer_names(gpkg) -> set[str]:
    """The layers of a GeoPackage written by a run; an InputError when the file is not there or not readable."""
    path = Path(gpkg)
    if not path.is_file():
        raise InputError(f"{path}: no GeoPackage here; run `settle run` first")
    try:
        return {str(name) for name, _ in pyogrio.list_layers(path)}
    except Exception as exc:  # pyogrio raises its own DataSourceError
        raise InputError(f"{path}: cannot read the GeoPackage ({exc})") from None


def read_layer(gpkg, name: str, bbox=None) -> gpd.GeoDataFrame:
    """One layer by name, optionally only the features meeting the box (minx, miny, maxx, maxy) in the layer's CRS."""
    return gpd.read_file(gpkg, layer=name, bbox=None if bbox is None else tuple(float(v) for v in bbox))


def _require(gpkg, names: set[str], layer: str) -> None:
    if layer not in names:
        raise InputError(f"{gpkg}: has no layer {layer!r}; it holds {sorted(names)}")


def _run_with_route(gpkg, summary) -> tuple[dict, set[str]]:
    """The run's summary and the names of its layers; InputError when it has no `route` layer."""
    info, names = read_summary(summary), layer_names(gpkg)
    _require(gpkg, names, "route")
    return info, names


# ------------------------------------------------------------------------------------------------------ the axis
@dataclass
class DriveAxis:
    """A drive's tunnel axis as the route layer holds it, with its chainage."""

    name: str
    xyz: np.ndarray  # vertices (n x 3) [m], launch shaft first
    chainage_m: np.ndarray  # at each vertex, along the 3-D axis [m]
    plan_m: np.ndarray  # plan distance along the axis at each vertex [m]
    outer_diameter_m: float
    face_chainage_m: float  # NaN when the drive is complete
    excavated_to_m: float
    min_cover_m: float

    @property
    def start_m(self) -> float:
        return float(self.chainage_m[0])

    @property
    def end_m(self) -> float:
        return float(self.chainage_m[-1])

    @property
    def line(self) -> LineString:
        """The axis in plan."""
        return LineString(self.xyz[:, :2])

    def at(self, chainage_m):
        """x, y, axis level at the chainages. [m]"""
        c = np.asarray(chainage_m, dtype=float)
        return tuple(np.interp(c, self.chainage_m, self.xyz[:, k]) for k in range(3))

    def plan_at(self, chainage_m):
        """Plan distance along the axis at the chainages. [m]"""
        return np.interp(np.asarray(chainage_m, dtype=float), self.chainage_m, self.plan_m)

    def direction(self, chainage_m):
        """Unit plan tangent (tx, ty) up-chainage at the chainages (of the segment that holds each)."""
        c = np.asarray(chainage_m, dtype=float)
        seg = np.clip(np.searchsorted(self.chainage_m, c, side="right") - 1, 0, len(self.chainage_m) - 2)
        d = self.xyz[seg + 1, :2] - self.xyz[seg, :2]
        return d / np.maximum(np.hypot(d[..., 0], d[..., 1]), 1e-12)[..., None]

    def locate(self, x, y):
        """(chainage [m], plan distance from the axis [m]) of places, by their nearest point on the axis in plan."""
        pts = shapely.points(np.asarray(x, dtype=float), np.asarray(y, dtype=float))
        line = self.line
        s = shapely.line_locate_point(line, pts)
        return np.interp(s, self.plan_m, self.chainage_m), shapely.distance(line, pts)


def drive_axes(route: gpd.GeoDataFrame) -> list[DriveAxis]:
    """One DriveAxis per row of the route layer, its chainage measured along the 3-D line from start_chainage_m."""
    out = []
    for row in route.itertuples(index=False):
        xyz = np.asarray(shapely.get_coordinates(row.geometry, include_z=True), dtype=float)
        step3 = np.linalg.norm(np.diff(xyz, axis=0), axis=1)
        step2 = np.hypot(*np.diff(xyz[:, :2], axis=0).T)
        face = getattr(row, "face_chainage_m", np.nan)
        out.append(DriveAxis(
            name=str(row.drive), xyz=xyz,
            chainage_m=float(row.start_chainage_m) + np.concatenate([[0.0], np.cumsum(step3)]),
            plan_m=np.concatenate([[0.0], np.cumsum(step2)]),
            outer_diameter_m=float(row.outer_diameter_m),
            face_chainage_m=np.nan if face is None or pd.isna(face) else float(face),
            excavated_to_m=float(row.excavated_to_m), min_cover_m=float(row.min_cover_m)))
    return out


def _drive(axes: list[DriveAxis], drive: str, gpkg) -> DriveAxis:
    for a in axes:
        if a.name == drive:
            return a
    raise InputError(f"{gpkg} route: no drive named {drive!r}; the drives are {[a.name for a in axes]}")


def _normal(t: np.ndarray) -> np.ndarray:
    """The right-hand normal of plan tangents t (looking along t)."""
    return np.stack([t[..., 1], -t[..., 0]], axis=-1)


@dataclass
class GroundProfile:
    """What the outputs say about the ground along a drive (face stations, or the route profile)."""

    chainage_m: np.ndarray
    surface_level_m: np.ndarray  # the ground, or the river bed in a river reach
    cover_m: np.ndarray
    in_river: np.ndarray  # bool
    low_cover: np.ndarray  # bool
    water_level_m: np.ndarray | None  # only when the layer carries it
    source: str


def ground_profile(gpkg, names: set[str], axis: DriveAxis) -> GroundProfile | None:
    """The ground surface along a drive, from the face stations: a `surface_level_m` field where the layer has one,
    otherwise crown level plus cover (the crown from the route's axis level and the outer diameter). None when the
    run has no face stations for the drive (the outputs then hold no ground levels along the route)."""
    if "face_stations" not in names:
        return _profile_from_route(gpkg, names, axis)
    fs = _rows_of_drive(gpkg, "face_stations", axis)
    if fs.empty:
        return None
    c, cover = fs["chainage_m"].to_numpy(float), fs["cover_m"].to_numpy(float)
    if "surface_level_m" in fs:
        surface, source = fs["surface_level_m"].to_numpy(float), "face stations, surface_level_m"
    else:
        surface = axis.at(c)[2] + 0.5 * axis.outer_diameter_m + cover
        source = "crown + cover at the face stations"
    water = fs["water_level_m"].to_numpy(float) if "water_level_m" in fs else None
    flag = (lambda k: fs[k].fillna(False).to_numpy(bool) if k in fs else np.zeros(len(fs), bool))
    return GroundProfile(c, surface, cover, flag("in_river"), flag("low_cover"), water, source)


def _rows_of_drive(gpkg, layer: str, axis: DriveAxis):
    """The features of a layer that belong to one drive, in chainage order."""
    rows = read_layer(gpkg, layer)
    return rows[rows["drive"] == axis.name].sort_values("chainage_m")


def _profile_from_route(gpkg, names: set[str], axis: DriveAxis) -> GroundProfile | None:
    """The ground along a drive from the `route_profile` layer (every metre; no river information)."""
    if "route_profile" not in names:
        return None
    rp = _rows_of_drive(gpkg, "route_profile", axis)
    if rp.empty:
        return None
    c, cover = rp["chainage_m"].to_numpy(float), rp["cover_m"].to_numpy(float)
    none = np.zeros(len(rp), bool)
    return GroundProfile(c, rp["ground_level_m"].to_numpy(float), cover, none,
                         cover < 2.0 * axis.outer_diameter_m, None, "route_profile, ground_level_m")


def _runs(flag: np.ndarray) -> list[tuple[int, int]]:
    """(first, last) index pairs of the runs where flag is set."""
    edges = np.diff(np.concatenate([[0], flag.astype(int), [0]]))
    return list(zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1))


def grid_spacing(summary: dict) -> float:
    try:
        return float(summary["grid"]["spacing_m"])
    except (KeyError, TypeError, ValueError):
        raise InputError("summary.json: grid.spacing_m missing; it is needed to sample the grid layer") from None


class GridSampler:
    """Bilinear sampling of the `grid` layer: its nodes lie on multiples of the grid spacing, so the four nodes around
    any place are found by their indices. A place with any of its four nodes missing from the layer (there the
    ground moved less than the layer's threshold) gets NaN."""

    _SHIFT = np.int64(2**31)

    def __init__(self, grid: gpd.GeoDataFrame, spacing_m: float):
        self.spacing_m = float(spacing_m)
        self.grid = grid.reset_index(drop=True)
        ix = np.rint(grid.geometry.x.to_numpy() / self.spacing_m).astype(np.int64)
        iy = np.rint(grid.geometry.y.to_numpy() / self.spacing_m).astype(np.int64)
        key = self._key(ix, iy)
        self._order = np.argsort(key, kind="stable")
        self._keys = key[self._order]

    def _key(self, ix, iy):
        return (ix + self._SHIFT) * (2 * self._SHIFT) + (iy + self._SHIFT)

    def _index(self, ix, iy) -> np.ndarray:
        """Row of the node (ix, iy) in the layer, -1 where the layer has no such node."""
        key = self._key(ix, iy)
        pos = np.clip(np.searchsorted(self._keys, key), 0, max(len(self._keys) - 1, 0))
        if not len(self._keys):
            return np.full(np.shape(key), -1)
        return np.where(self._keys[pos] == key, self._order[pos], -1)

    def __call__(self, values, x, y) -> np.ndarray:
        """Values (one per node of the layer) interpolated bilinearly at the places (x, y). [their units]"""
        values = np.asarray(values, dtype=float)
        fx, fy = np.asarray(x, float) / self.spacing_m, np.asarray(y, float) / self.spacing_m
        x0, y0 = np.floor(fx).astype(np.int64), np.floor(fy).astype(np.int64)
        tx, ty = fx - x0, fy - y0
        out = np.zeros(np.shape(fx))
        for dx, dy, weight in ((0, 0, (1 - tx) * (1 - ty)), (1, 0, tx * (1 - ty)), (0, 1, (1 - tx) * ty),
                               (1, 1, tx * ty)):
            row = self._index(x0 + dx, y0 + dy)
            value = np.where(row >= 0, values[np.maximum(row, 0)], np.nan)
            out += np.where(weight > 0.0, value * weight, 0.0)  # a missing node with no weight does not count
        return out


def grid_near(gpkg, names: set[str], bounds, spacing_m: float) -> GridSampler | None:
    """A sampler of the grid nodes in the box (minx, miny, maxx, maxy) grown by one spacing; None without a grid."""
    if "grid" not in names:
        return None
    minx, miny, maxx, maxy = bounds
    grid = read_layer(gpkg, "grid", bbox=(minx - spacing_m, miny - spacing_m, maxx + spacing_m, maxy + spacing_m))
    return GridSampler(grid, spacing_m)


def axis_settlement(gpkg, names: set[str], axis: DriveAxis, spacing_m: float):
    """Settlement along a drive's axis, every half grid spacing of chainage, interpolated bilinearly between the four
    grid nodes around each place (NaN where one of them is below the grid layer's threshold).

    Returns
    -------
    (chainage_m, settlement_mm)  [m], [mm]
    """
    sampler = grid_near(gpkg, names, axis.line.bounds, spacing_m)
    c = np.unique(np.concatenate([np.arange(axis.start_m, axis.end_m, 0.5 * spacing_m), [axis.end_m]]))
    if sampler is None or not len(sampler.grid):
        return c, np.full(len(c), np.nan)
    x, y, _ = axis.at(c)
    return c, sampler(sampler.grid["settlement_mm"], x, y)


# ------------------------------------------------------------------------------------------------------ helpers
def save_png(fig, path, dpi: int = PNG_DPI) -> Path:
    """Write the figure as a PNG safely and close it (`gis_out.png.save_png`)."""
    return _save_png(fig, path, dpi)


@contextmanager
def _closed_on_failure(fig):
    """Close the figure when a drawing step fails, and let the error go on."""
    try:
        yield fig
    except BaseException:
        plt.close(fig)
        raise


def line_style(symbol) -> dict:
    """matplotlib keywords of a styles.Symbol line (width and dashes from mm to points)."""
    lw = max(symbol.width_mm * MM_TO_PT, 0.5)
    dashes = (0, tuple(d * MM_TO_PT / lw for d in symbol.dash_mm)) if symbol.dash_mm else "-"
    return {"color": symbol.colour, "linewidth": lw, "linestyle": dashes, "alpha": symbol.opacity}


def marker_style(symbol) -> dict:
    """matplotlib keywords of a styles.Symbol marker, for `plot` (marker size in points)."""
    return {"marker": MARKERS.get(symbol.shape, "o"), "markersize": symbol.size_mm * MM_TO_PT * 0.8,
            "markerfacecolor": symbol.colour, "markeredgecolor": symbol.outline or symbol.colour,
            "markeredgewidth": max(symbol.width_mm * MM_TO_PT, 0.3), "linestyle": "none"}


def contour_levels(summary: dict):
    """The run's contour levels [mm] when summary.json holds them (grid.contour_levels_mm), else None."""
    levels = (summary.get("grid") or {}).get("contour_levels_mm")
    return None if levels is None else [float(v) for v in levels]


def _caution(fig, summary: dict, y: float = 0.008) -> None:
    text = summary.get("caution")
    if text:
        fig.text(0.01, y, f"Caution. {text}", fontsize=7, color="0.25", wrap=True, parse_math=False)


def _nice(length: float) -> float:
    """A round length (1, 2 or 5 x 10^k) no more than `length`."""
    k = 10.0 ** np.floor(np.log10(length))
    return float(max(m for m in (1.0, 2.0, 5.0) if m * k <= length) * k)


def category_ranges() -> list[tuple[int, str, str]]:
    """(category, degree of damage, limiting tensile strain range in %) per damage category, from
    `settle.buildings` (Boscardin & Cording 1989; Burland 1995)."""
    from settle.assessments.building_damage import CATEGORY_LABELS, CATEGORY_LIMITS_PCT

    lim = CATEGORY_LIMITS_PCT
    out = [(0, CATEGORY_LABELS[0], f"< {lim[0]:g} %, or screened out at stage 1")]
    out += [(k, CATEGORY_LABELS[k], f"{lim[k - 1]:g}–{lim[k]:g} %") for k in range(1, len(lim))]
    out.append((len(lim), CATEGORY_LABELS[len(lim)], f"> {lim[-1]:g} %"))
    return out


def building_categories(buildings: gpd.GeoDataFrame) -> np.ndarray:
    """The damage category of every building as integers, -1 where it is NULL (not assessed)."""
    if "category" not in buildings:
        raise InputError("buildings layer: no `category` field")
    return pd.to_numeric(buildings["category"], errors="coerce").fillna(-1).to_numpy().astype(np.int64)


def pipe_status_classes(utilities: gpd.GeoDataFrame) -> np.ndarray:
    """The status of every pipe as the integer `status_class` (settle.pipelines.STATUSES order)."""
    if "status_class" in utilities:
        return pd.to_numeric(utilities["status_class"], errors="coerce").fillna(-1).to_numpy().astype(np.int64)
    from settle.assessments.utilities import STATUSES

    index = {s: k for k, s in enumerate(STATUSES)}
    return np.array([index.get(s, -1) for s in utilities["status"]], dtype=np.int64)


# ------------------------------------------------------------------------------------------------------ plan map
@glyph_checked
def plan_map_png(gpkg, summary, path, dpi: int = PNG_DPI) -> Path:
    """Draw the plan of a run (settlement bands and contours, routes with chainage ticks, buildings by damage
    category, pipes by status, face stations with a narrow or closed window) and write it as a PNG.

    Parameters
    ----------
    gpkg : str or Path        The run's GeoPackage.
    summary : dict or path    The run's summary.json (project name, CRS, caution).
    path : str or Path        The PNG to write; its folder must exist.
    dpi : int                 Resolution. [dots per inch]

    Returns
    -------
    Path  The absolute path written.

    Notes
    -----
    The map is in the project CRS with grid north up (north arrow), a scale bar, and the CRS named under the title.
    Chainage ticks every 50 m, or every 100 m on maps wider than 1 km, labelled with the chainage [m]. The part of a
    drive not yet excavated (beyond its face) is dashed, and the face is marked.
    """
    info, names = _run_with_route(gpkg, summary)
    route = read_layer(gpkg, "route")
    axes = drive_axes(route)
    bands = read_layer(gpkg, "settlement_bands") if "settlement_bands" in names else None
    lines = read_layer(gpkg, "settlement_lines") if "settlement_lines" in names else None
    box = _plan_extent(route, bands)
    width = box[2] - box[0]

    fig = plt.figure(figsize=(14.0, 9.5))
    ax = fig.add_axes([0.06, 0.09, 0.62, 0.80])
    handles: list = []
    with _closed_on_failure(fig):
        handles += _plan_bands(ax, bands, info)
        handles += _plan_contours(ax, lines)
        if "buildings" in names:
            handles += _plan_buildings(ax, read_layer(gpkg, "buildings", bbox=box))
        if "utilities" in names:
            handles += _plan_utilities(ax, read_layer(gpkg, "utilities", bbox=box))
        handles += _plan_routes(ax, axes, width)
        if "face_stations" in names:
            handles += _plan_face(ax, read_layer(gpkg, "face_stations", bbox=box))
        _fit_map_to_axes(fig, ax, box)
        _north_arrow(fig)
        _scale_bar(ax)
        _plan_title_legend_caution(fig, ax, route, axes, info, handles)
    return save_png(fig, path, dpi)


def _plan_extent(route: gpd.GeoDataFrame, bands: gpd.GeoDataFrame | None) -> tuple:
    """The map box (minx, miny, maxx, maxy) around the routes and the settlement bands, with a margin. [m]"""
    parts = [route.total_bounds] + ([bands.total_bounds] if bands is not None and len(bands) else [])
    b = np.array(parts)
    minx, miny, maxx, maxy = b[:, 0].min(), b[:, 1].min(), b[:, 2].max(), b[:, 3].max()
    pad = max(20.0, 0.08 * max(maxx - minx, maxy - miny))
    return (minx - pad, miny - pad, maxx + pad, maxy + pad)


def _plan_bands(ax, bands: gpd.GeoDataFrame | None, info: dict) -> list:
    """Fill the settlement bands present, in the GIS style's colours; their legend entries."""
    handles: list = []
    if bands is not None and len(bands):
        handles.append(Patch(alpha=0, label="Settlement (positive down)"))
        present = set(bands["band"].astype(int).tolist())
        for c in styles.band_style(bands, contour_levels(info)).classes:
            if c.value in present:
                sym = c.symbol
                bands[bands["band"] == c.value].plot(ax=ax, color=sym.colour, alpha=sym.opacity,
                                                     edgecolor="none", zorder=1)
                handles.append(Patch(facecolor=sym.colour, alpha=sym.opacity, edgecolor=sym.outline,
                                     label=c.label))
    return handles


def _plan_contours(ax, lines: gpd.GeoDataFrame | None) -> list:
    """Draw the settlement contours, each labelled with its level [mm] at the middle of its longest part; the
    legend entry."""
    handles: list = []
    if lines is not None and len(lines):
        lines.plot(ax=ax, color=CONTOUR_COLOUR, linewidth=0.6, zorder=2)
        for row in lines.itertuples(index=False):
            parts_ = list(getattr(row.geometry, "geoms", [row.geometry]))
            longest = max(parts_, key=lambda g: g.length)
            p = longest.interpolate(0.5, normalized=True)
            ax.text(p.x, p.y, f"{row.level_mm:g}", fontsize=6.5, ha="center", va="center", zorder=6,
                    bbox=dict(boxstyle="round,pad=0.1", fc="white", ec="none", alpha=0.8))
        handles.append(Line2D([], [], color=CONTOUR_COLOUR, lw=0.6, label="settlement contours, labelled in mm"))
    return handles


def _plan_routes(ax, axes: list[DriveAxis], width: float) -> list:
    """Draw every drive with its chainage ticks and face; the legend entries of the drives. [width: map, m]"""
    step = 50.0 if width <= CHAINAGE_STEP_SWITCH_M else 100.0
    handles: list = [Patch(alpha=0, label="Drives")]
    for k, a in enumerate(axes, start=1):
        _plan_route(ax, a, k, step, width)
        handles.append(Line2D([], [], color=ROUTE_COLOUR, lw=2.0, label=f"D{k}: {a.name}"))
    handles.append(Line2D([], [], color=ROUTE_COLOUR, lw=1.2, ls=(0, (4, 3)), label="not yet excavated"))
    if any(np.isfinite(a.face_chainage_m) for a in axes):
        handles.append(Line2D([], [], color="white", marker="D", mec=ROUTE_COLOUR, mfc="white", ls="none",
                              label="face position"))
    handles.append(Line2D([], [], color=ROUTE_COLOUR, lw=0.8, marker="|", ls="none",
                          label=f"chainage ticks every {step:g} m, labelled in m"))
    return handles


def _fit_map_to_axes(fig, ax, box: tuple) -> None:
    """Grow the box to the shape of the axes, so one metre is as long east as north, and label the axes. [box: m]"""
    pos = ax.get_position()
    shape = (pos.height * fig.get_figheight()) / (pos.width * fig.get_figwidth())
    cx, cy = 0.5 * (box[0] + box[2]), 0.5 * (box[1] + box[3])
    half_w = 0.5 * max(box[2] - box[0], (box[3] - box[1]) / shape)
    ax.set_xlim(cx - half_w, cx + half_w)
    ax.set_ylim(cy - half_w * shape, cy + half_w * shape)
    ax.set_aspect("equal", adjustable="box")
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.tick_params(labelsize=7)
    ax.set_xlabel("easting (m)", fontsize=8)
    ax.set_ylabel("northing (m)", fontsize=8)
    ax.grid(alpha=0.2, lw=0.5)


def _scale_bar(ax) -> None:
    """A scale bar of a round length near a fifth of the map's width, at the lower left."""
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    length = _nice(0.2 * (x1 - x0))
    ax.add_artist(AnchoredSizeBar(ax.transData, length, f"{length:g} m", "lower left", pad=0.6, borderpad=0.8,
                                  sep=4, frameon=True, size_vertical=0.006 * (y1 - y0), fontproperties={"size": 8}))


def _plan_title_legend_caution(fig, ax, route: gpd.GeoDataFrame, axes: list[DriveAxis], info: dict,
                               handles: list) -> None:
    """The map's title with the construction stage, the CRS under it, the legend beside it and the caution."""
    crs = _crs_text(route, info)
    ax.set_title(f"{info.get('project', '')}\nPlan: greenfield surface settlement{_stage_text(axes)}",
                 fontsize=11, loc="left", parse_math=False)
    fig.text(0.06, 0.03, crs, fontsize=8, color="0.2", parse_math=False)
    legend = fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.70, 0.89), fontsize=7.5, frameon=True,
                        title="Legend", title_fontsize=9, alignment="left")
    for text in legend.get_texts():  # the drives' names among them
        text.set_parse_math(False)
    _caution(fig, info)


def _stage_text(axes: list[DriveAxis]) -> str:
    faces = [f"D{k} face at {a.face_chainage_m:.1f} m" for k, a in enumerate(axes, start=1)
             if np.isfinite(a.face_chainage_m)]
    return f" (construction stage: {', '.join(faces)})" if faces else " (all drives complete)"


def _crs_text(route: gpd.GeoDataFrame, summary: dict) -> str:
    crs = route.crs
    if crs is None:
        return f"CRS: {summary.get('crs', 'not recorded')} (m); grid north up"
    code = crs.to_authority()
    code = f"{code[0]}:{code[1]}" if code else summary.get("crs", "")
    return f"CRS: {code} {crs.name} (coordinates in m); grid north up"


def _north_arrow(fig, x: float = 0.74, y: float = 0.10) -> None:
    """A north arrow beside the map (whose axes are grid north up), in figure fractions."""
    fig.patches.append(matplotlib.patches.FancyArrowPatch((x, y), (x, y + 0.09), transform=fig.transFigure,
                                                          arrowstyle="-|>", mutation_scale=18, lw=1.6, color="k"))
    fig.text(x, y + 0.095, "N", ha="center", va="bottom", fontsize=12, weight="bold")
    fig.text(x + 0.012, y + 0.02, "grid north", ha="left", va="center", fontsize=7)


def _plan_route(ax, a: DriveAxis, k: int, step: float, width: float) -> None:
    line = a.line
    dug = float(a.plan_at(a.excavated_to_m))
    total = float(a.plan_m[-1])
    if dug > 0:
        g = substring(line, 0.0, dug)
        ax.plot(*np.asarray(g.coords).T, color=ROUTE_COLOUR, lw=2.0, zorder=5, solid_capstyle="butt")
    if dug < total - 1e-9:
        g = substring(line, dug, total)
        ax.plot(*np.asarray(g.coords).T, color=ROUTE_COLOUR, lw=1.2, ls=(0, (4, 3)), zorder=5)
    first = np.ceil(a.start_m / step - 1e-9) * step + 0.0  # + 0.0: no "-0" label
    ticks = np.arange(first, a.end_m + 1e-6, step)
    if len(ticks):
        x, y, _ = a.at(ticks)
        n = _normal(a.direction(ticks))
        tick = 0.008 * width
        for xi, yi, (nx, ny), c in zip(x, y, n, ticks):
            ax.plot([xi - tick * nx, xi + tick * nx], [yi - tick * ny, yi + tick * ny], color=ROUTE_COLOUR, lw=0.8,
                    zorder=5)
            ax.text(xi + 2.6 * tick * nx, yi + 2.6 * tick * ny, f"{c:g}", fontsize=6, ha="center", va="center",
                    color=ROUTE_COLOUR, zorder=6)
    xe, ye = a.xyz[-1, 0], a.xyz[-1, 1]
    t = a.direction(a.end_m)
    ax.text(xe + 0.015 * width * t[0], ye + 0.015 * width * t[1], f"D{k}", fontsize=8, weight="bold",
            ha="center", va="center", zorder=7, bbox=dict(boxstyle="round,pad=0.15", fc="white", ec=ROUTE_COLOUR))
    if np.isfinite(a.face_chainage_m):
        fx, fy, _ = a.at(a.face_chainage_m)
        ax.plot([fx], [fy], marker="D", ms=6, mfc="white", mec=ROUTE_COLOUR, mew=1.5, zorder=7)


def _plan_buildings(ax, buildings: gpd.GeoDataFrame) -> list:
    handles = [Patch(alpha=0, label="Buildings: damage category (limiting tensile strain)")]
    if buildings.empty:
        return handles + [Patch(alpha=0, label="no buildings in the map")]
    cat = building_categories(buildings)
    ranges = {c: rng for c, _, rng in category_ranges()}
    for c in styles.damage_style(buildings).classes:
        value = -1 if c.value is None else c.value
        count = int(np.sum(cat == value))
        if value not in ranges and not count:
            continue  # category 5 is never assigned from strain; NULL only when present
        sym = c.symbol
        look = dict(facecolor=sym.colour if sym.filled else "none", edgecolor=sym.outline,
                    linewidth=max(sym.width_mm * MM_TO_PT, 0.4), linestyle="--" if sym.dash_mm else "-")
        if count:
            buildings[cat == value].plot(ax=ax, zorder=3, **look)
        rng = f" ({ranges[value]})" if value in ranges else ""
        handles.append(Patch(**look, label=f"{c.label}{rng}: {count}"))
    marked = np.flatnonzero(cat >= 2)
    if 0 < len(marked) <= 300:
        where = shapely.point_on_surface(buildings.geometry.to_numpy()[marked])
        for p, c in zip(where, cat[marked]):
            ax.text(p.x, p.y, str(c), fontsize=7, weight="bold", ha="center", va="center", zorder=7,
                    color="white" if c >= 4 else "black")
    return handles


def _plan_utilities(ax, pipes: gpd.GeoDataFrame) -> list:
    handles = [Line2D([], [], alpha=0, label="Pipes: status (utilisation = demand / allowable)")]
    if pipes.empty:
        return handles + [Line2D([], [], alpha=0, label="no pipes in the map")]
    cls = pipe_status_classes(pipes)
    for c in styles.layer_style("utilities", pipes).classes:
        count = int(np.sum(cls == c.value))
        if count:
            pipes[cls == c.value].plot(ax=ax, zorder=4, **line_style(c.symbol))
            handles.append(Line2D([], [], **line_style(c.symbol), label=f"{c.label}: {count}"))
    colours = {c.value: c.symbol.colour for c in styles.layer_style("utilities", pipes).classes}
    flagged = np.flatnonzero(np.isin(cls, (1, 2, 4)))
    if 0 < len(flagged) <= 40:
        for k in flagged:
            p = pipes.geometry.iloc[k].interpolate(0.5, normalized=True)
            ax.text(p.x, p.y, str(pipes["id"].iloc[k]), fontsize=6, ha="left", va="bottom", zorder=7,
                    color=colours.get(int(cls[k]), "k"), parse_math=False,
                    bbox=dict(boxstyle="round,pad=0.1", fc="white", ec="none", alpha=0.7))
    return handles


def _plan_face(ax, stations: gpd.GeoDataFrame) -> list:
    handles = []
    if stations.empty or "status" not in stations:
        return handles
    for status in ("narrow", "closed"):
        sub = stations[stations["status"] == status]
        look = marker_style(FACE_STATUS_SYMBOLS[status])
        if len(sub):
            ax.plot(sub.geometry.x, sub.geometry.y, zorder=8, **look)
        k = styles.face_stations.STATUSES.index(status)
        handles.append(Line2D([], [], **look, label=f"{k} {status} window: {len(sub)}"))
    return [Patch(alpha=0, label="Face stations (support window)")] + handles


# ------------------------------------------------------------------------------------------ longitudinal section
@glyph_checked
def longitudinal_section_png(gpkg, summary, drive: str, path, dpi: int = PNG_DPI) -> Path:
    """Draw the longitudinal section of one drive and write it as a PNG.

    Panels against chainage: (1) the ground surface (river bed in river reaches) and the tunnel between crown and
    invert, with the least cover marked; (2) the settlement along the axis, from the grid nodes within half a grid
    spacing of it; (3) when the run has face stations for the drive, the face support window at the crown.

    Parameters
    ----------
    gpkg : str or Path        The run's GeoPackage.
    summary : dict or path    The run's summary.json.
    drive : str               The drive's name (the `drive` field of the route layer).
    path, dpi                 The PNG to write (its folder must exist) and its resolution, as for `plan_map_png`.

    Returns
    -------
    Path  The absolute path of the PNG.

    Notes
    -----
    Ground levels along the route come from the face stations when the face check ran (with river beds), else from
    the `route_profile` layer; with neither the section shows the tunnel alone and says so. The water level over a
    river reach is drawn only when the face stations carry a `water_level_m` field.
    """
    info, names = _run_with_route(gpkg, summary)
    axis = _drive(drive_axes(read_layer(gpkg, "route")), drive, gpkg)
    spacing = grid_spacing(info)
    profile = ground_profile(gpkg, names, axis)
    stations = None
    if "face_stations" in names:
        fs = read_layer(gpkg, "face_stations")
        fs = fs[fs["drive"] == axis.name].sort_values("chainage_m")
        stations = fs if len(fs) else None
    ch_s, settle_s = axis_settlement(gpkg, names, axis, spacing)

    rows = 3 if stations is not None else 2
    ratios = [3.0, 2.0, 3.0][:rows]
    fig, panels = plt.subplots(rows, 1, sharex=True, figsize=(12.0, 3.0 + 2.4 * rows),
                               gridspec_kw={"height_ratios": ratios})
    with _closed_on_failure(fig):
        sec, sett = panels[0], panels[1]
        _section_panel(sec, axis, profile)
        _settlement_panel(sett, ch_s, settle_s, spacing, info)
        if stations is not None:
            _window_panel(panels[2], stations)
        if np.isfinite(axis.face_chainage_m):
            for p in panels:
                p.axvline(axis.face_chainage_m, color=ROUTE_COLOUR, lw=1.0, ls="--")
            sec.annotate(f"face {axis.face_chainage_m:.1f} m", (axis.face_chainage_m, 1.0),
                         xycoords=("data", "axes fraction"), xytext=(3, -10), textcoords="offset points",
                         fontsize=7)
        panels[-1].set_xlabel("chainage along the axis (m)")
        panels[-1].set_xlim(axis.start_m, axis.end_m)
        sec.set_title(f"{info.get('project', '')}\nLongitudinal section: {axis.name}", fontsize=10, loc="left",
                      parse_math=False)
        fig.tight_layout(rect=(0, 0.03, 1, 1))
        _caution(fig, info)
    return save_png(fig, path, dpi)


def _section_panel(ax, axis: DriveAxis, profile: GroundProfile | None) -> None:
    c = axis.chainage_m
    z = axis.xyz[:, 2]
    r = 0.5 * axis.outer_diameter_m
    ax.fill_between(c, z - r, z + r, color=TUNNEL, alpha=0.55, lw=0,
                    label=f"tunnel, outer diameter {axis.outer_diameter_m:g} m")
    ax.plot(c, z, color="k", lw=0.6, ls="-.", label="axis")
    if np.isfinite(axis.face_chainage_m) and axis.face_chainage_m < axis.end_m:
        ahead = np.concatenate([[axis.face_chainage_m], c[c > axis.face_chainage_m]])
        za = np.interp(ahead, c, z)
        ax.fill_between(ahead, za - r, za + r, facecolor="white", edgecolor=TUNNEL, hatch="///", lw=0,
                        label="not yet excavated")
    if profile is None:
        ax.text(0.01, 0.95, "Ground levels along this drive are not in the outputs (no face stations, no route "
                "profile): the tunnel alone "
                f"is drawn. Least cover (route layer): {axis.min_cover_m:.2f} m.", transform=ax.transAxes,
                fontsize=7.5, va="top", color="0.2")
    else:
        pc, ps = profile.chainage_m, profile.surface_level_m
        dry = np.where(profile.in_river, np.nan, ps)
        ax.plot(pc, dry, color=GROUND, lw=1.6, label=f"ground surface ({profile.source})")
        for k, (a, b) in enumerate(_runs(profile.in_river)):
            s = slice(a, b + 1)
            ax.plot(pc[s], ps[s], color=GROUND, lw=1.6, ls="--", label="river bed" if k == 0 else None)
            if profile.water_level_m is not None:
                ax.fill_between(pc[s], ps[s], profile.water_level_m[s], color=WATER, alpha=0.35, lw=0,
                                label="river water" if k == 0 else None)
            else:
                ax.axvspan(pc[a], pc[b], color=WATER, alpha=0.12, lw=0,
                           label="river reach (water level not in the outputs)" if k == 0 else None)
        for k, (a, b) in enumerate(_runs(profile.low_cover)):
            ax.axvspan(pc[a], pc[b], ymax=0.06, color="#d55e00", alpha=0.6, lw=0,
                       label="low cover (flagged at the face stations)" if k == 0 else None)
        k = int(np.argmin(profile.cover_m))
        crown = ps[k] - profile.cover_m[k]
        ax.annotate("", xy=(pc[k], ps[k]), xytext=(pc[k], crown),
                    arrowprops=dict(arrowstyle="<->", color="k", lw=0.8, shrinkA=0, shrinkB=0))
        right = pc[k] > 0.5 * (pc[0] + pc[-1])
        least = axis.min_cover_m if np.isfinite(axis.min_cover_m) else profile.cover_m[k]  # the route's one value
        ax.annotate(f"least cover {least:.2f} m\nat {pc[k]:.1f} m", (pc[k], ps[k]),
                    textcoords="offset points", xytext=(-5 if right else 5, 4), fontsize=7,
                    ha="right" if right else "left")
    levels = [z - r, z + r] + ([] if profile is None else [profile.surface_level_m])
    bottom, top = np.nanmin(np.concatenate(levels)), np.nanmax(np.concatenate(levels))
    span = max(top - bottom, 1.0)
    ax.set_ylim(bottom - 0.05 * span, top + 0.5 * span)  # room for the legend above the ground
    ax.set_ylabel("level (m)")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=7, ncol=3)


def _settlement_panel(ax, c, s, spacing: float, info: dict) -> None:
    threshold = info.get("grid", {}).get("threshold_mm")
    if len(c) and np.isfinite(s).any():
        ax.plot(c, s, color="#2b5d8a", lw=1.4,
                label="settlement on the axis (bilinear between the grid nodes around it)")
        k = int(np.nanargmax(s))
        ax.plot([c[k]], [s[k]], "o", color="#2b5d8a", ms=4)
        ax.annotate(f"{s[k]:.1f} mm at {c[k]:.1f} m", (c[k], s[k]), textcoords="offset points", xytext=(5, -10),
                    fontsize=7)
        ax.set_ylim(max(np.nanmax(s) * 1.15, 1e-3), 0.0)  # settlement drawn downward
    else:
        ax.text(0.01, 0.5, "no grid node on the axis reaches the grid layer's threshold", transform=ax.transAxes,
                fontsize=8, color="0.2")
        ax.set_ylim(1.0, 0.0)
    if threshold is not None:
        ax.text(0.99, 0.04, f"gaps: settlement below the grid threshold ({threshold:g} mm)", transform=ax.transAxes,
                ha="right", fontsize=6.5, color="0.35")
    ax.set_ylabel("settlement (mm, down)")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=7)


def _window_panel(ax, fs: pd.DataFrame) -> None:
    c = fs["chainage_m"].to_numpy(float)
    lo, hi = fs["support_min_kpa"].to_numpy(float), fs["support_max_kpa"].to_numpy(float)
    window = fs["window_kpa"].to_numpy(float)
    tol = 0.5 * (hi - lo - window)  # window = max - min - 2 x tolerance (settle.face_stations)
    a, b = lo + tol, hi - tol
    ax.fill_between(c, a, b, where=b >= a, color="#9ecae1", alpha=0.6, lw=0, interpolate=True,
                    label="band to hold (within the operating tolerance)")
    ax.plot(c, lo, color="#0072b2", lw=1.4, label="minimum support")
    ax.plot(c, hi, color="#d55e00", lw=1.4, label="maximum support")
    ax.plot(c, fs["blowout_kpa"].to_numpy(float), color="#d55e00", lw=0.8, ls="--", label="blow-out (total stress)")
    ax.plot(c, fs["water_pressure_kpa"].to_numpy(float), color=WATER, lw=0.8, ls=":", label="water pressure")
    for status in ("narrow", "closed"):
        flag = (fs["status"] == status).to_numpy()
        if flag.any():
            ax.plot(c[flag], lo[flag], zorder=5, **marker_style(FACE_STATUS_SYMBOLS[status]),
                    label=f"{status} window ({int(flag.sum())} stations)")
    ax.set_ylabel("pressure at crown (kPa)")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=7, ncol=3)


# ------------------------------------------------------------------------------------------ transverse sections
@dataclass
class Section:
    """Settlement and strain along one transverse section, and the buildings it crosses."""

    chainage_m: float
    offset_m: np.ndarray  # increasing, + right looking up-chainage [m]
    settlement_mm: np.ndarray
    strain_ue: np.ndarray  # horizontal normal strain along the section line, tensile positive [microstrain]
    half_width_m: float
    blocks: list  # (offset from [m], offset to [m], building id, height_m, foundation_depth_m, category)
    axis_depth_m: float  # NaN when the ground level is not in the outputs


def strain_along(strain_max_ue, strain_min_ue, azimuth_max_deg, azimuth_deg):
    """Normal horizontal strain in a plan direction, from the principal strains (tensor rotation).

    Parameters
    ----------
    strain_max_ue, strain_min_ue : array_like  Principal horizontal strains, tensile positive. [microstrain]
    azimuth_max_deg : array_like               Direction of the major principal strain, clockwise from grid north.
                                               [deg]
    azimuth_deg : array_like                   The direction wanted, clockwise from grid north. [deg]

    Returns
    -------
    ndarray  (e1 + e2)/2 + (e1 - e2)/2 cos 2(a - a1). [microstrain]
    """
    e1, e2 = np.asarray(strain_max_ue, float), np.asarray(strain_min_ue, float)
    return 0.5 * (e1 + e2) + 0.5 * (e1 - e2) * np.cos(2.0 * np.radians(np.asarray(azimuth_deg, float)
                                                                            - np.asarray(azimuth_max_deg, float)))


def transverse_section(gpkg, names: set[str], axis: DriveAxis, chainage_m: float, spacing_m: float,
                       profile: GroundProfile | None, half_width_m: float | None = None) -> Section:
    """Settlement and horizontal strain along the section line at a chainage (every half grid spacing, bilinear
    between the four grid nodes around each place), and the buildings the line crosses."""
    x0, y0, _ = (float(v) for v in axis.at(chainage_m))
    n = _normal(axis.direction(chainage_m))
    reach = SECTION_MAX_HALF_WIDTH_M if half_width_m is None else float(half_width_m)
    offset = np.arange(-reach, reach + 1e-9, 0.5 * spacing_m)
    x, y = x0 + offset * n[0], y0 + offset * n[1]
    sampler = grid_near(gpkg, names, (x.min(), y.min(), x.max(), y.max()), spacing_m)
    settlement = strain = np.full(len(offset), np.nan)
    if sampler is not None and len(sampler.grid):
        g = sampler.grid
        settlement = sampler(g["settlement_mm"], x, y)
        azimuth = np.degrees(np.arctan2(n[0], n[1])) % 180.0  # the section's direction, clockwise from north
        # The strain along the section at each node (tensor rotation), then interpolated like the settlement.
        strain = sampler(strain_along(g["strain_max_ue"], g["strain_min_ue"], g["strain_max_azimuth_deg"], azimuth),
                         x, y)
    found = np.isfinite(settlement)
    w = reach
    if half_width_m is None:
        w = max(float(np.max(np.abs(offset[found]))) + 2.0 * spacing_m if found.any() else 0.0,
                5.0 * axis.outer_diameter_m)
    inside = np.abs(offset) <= w + 1e-9
    blocks = []
    if "buildings" in names:
        line = LineString([(x0 - w * n[0], y0 - w * n[1]), (x0 + w * n[0], y0 + w * n[1])])
        hit = read_layer(gpkg, "buildings", bbox=line.bounds)
        if len(hit):
            column = (lambda k: hit[k].to_numpy(float) if k in hit else np.full(len(hit), np.nan))
            for geom, bid, h, f, cat in zip(hit.geometry, hit["id"], column("height_m"), column("foundation_depth_m"),
                                            building_categories(hit)):
                cut = geom.intersection(line)
                for piece in getattr(cut, "geoms", [cut]):
                    if piece.is_empty or piece.length <= 0:
                        continue
                    s = [line.project(shapely.Point(p)) - w for p in piece.coords]
                    blocks.append((min(s), max(s), str(bid), float(h), float(f), int(cat)))
    depth = np.nan
    if profile is not None and len(profile.chainage_m):
        depth = float(np.interp(chainage_m, profile.chainage_m, profile.surface_level_m) - axis.at(chainage_m)[2])
    return Section(float(chainage_m), offset[inside], settlement[inside], strain[inside], w, blocks, depth)


@glyph_checked
def transverse_sections_png(gpkg, summary, drive: str, chainages_m, path, half_width_m: float | None = None,
                            dpi: int = PNG_DPI) -> Path:
    """Draw transverse sections across one drive at the chosen chainages and write them as one PNG.

    For each chainage a column of three panels against the offset from the axis: the buildings the section line
    crosses, drawn as blocks from foundation level to their height with their damage category, and the tunnel at
    its depth (when the ground level there is in the outputs); the settlement trough; the horizontal strain along
    the section line (tensile positive). Both are sampled every half grid spacing along the line, bilinear between
    the four grid nodes around each place (the strain first turned into the section's direction at each node); a
    place with one of its nodes below the grid layer's threshold is left as a gap.

    Parameters
    ----------
    gpkg : str or Path            The run's GeoPackage.
    summary : dict or path        The run's summary.json.
    drive : str                   The drive's name (the `drive` field of the route layer).
    chainages_m : sequence        Chainages of the sections, within the drive. [m]
    path : str or Path            The PNG to write; its folder must exist.
    half_width_m : float, optional  Half the length of each section. [m] Default: two grid spacings past the
                                  farthest sampled settlement within 100 m of the axis, and no less than 5 outer
                                  diameters.
    dpi : int                     Resolution. [dots per inch]

    Returns
    -------
    Path  The absolute path written.

    Raises
    ------
    InputError  A chainage outside the drive, or no chainage given (named as `[output] sections_chainage_m`).
    """
    info, names = _run_with_route(gpkg, summary)
    axis = _drive(drive_axes(read_layer(gpkg, "route")), drive, gpkg)
    key = "[output] sections_chainage_m"
    try:
        chainages = [float(c) for c in np.atleast_1d(np.asarray(chainages_m, dtype=float))]
    except (TypeError, ValueError):
        raise InputError(f"{key}: chainages must be numbers in m; got {chainages_m!r}") from None
    if not chainages:
        raise InputError(f"{key}: give at least one chainage for drive {axis.name!r}")
    for c in chainages:
        if not np.isfinite(c) or c < axis.start_m - 1e-6 or c > axis.end_m + 1e-6:
            raise InputError(f"{key}: chainage {c:g} m is outside drive {axis.name!r} "
                             f"({axis.start_m:.2f} to {axis.end_m:.2f} m)")
    if half_width_m is not None and not (np.isfinite(half_width_m) and half_width_m > 0):
        raise InputError(f"half_width_m must be a positive length in m; got {half_width_m!r}")
    spacing = grid_spacing(info)
    profile = ground_profile(gpkg, names, axis)
    sections = [transverse_section(gpkg, names, axis, c, spacing, profile, half_width_m) for c in chainages]

    cols = min(len(sections), 3)
    rows = int(np.ceil(len(sections) / cols))
    fig = plt.figure(figsize=(max(4.8 * cols + 0.6, 7.5), 7.0 * rows + 1.3))
    with _closed_on_failure(fig):
        head, body, foot = fig.subfigures(3, 1, height_ratios=[0.9, 7.0 * rows, 0.4])
        head.text(0.01, 0.5, f"{info.get('project', '')}\nTransverse sections across {axis.name}\noffset from the "
                  "axis, + to the right looking up-chainage", fontsize=9.5, va="center", parse_math=False)
        subs = body.subfigures(rows, cols, squeeze=False).ravel()
        for sub, sec in zip(subs, sections):
            _draw_section(sub, sec, axis, info)
        _caution(foot, info, y=0.3)
    return save_png(fig, path, dpi)


def _draw_section(sub, sec: Section, axis: DriveAxis, info: dict) -> None:
    top, mid, low = sub.subplots(3, 1, sharex=True, gridspec_kw={"height_ratios": [2.2, 2.0, 2.0]})
    sub.subplots_adjust(left=0.17, right=0.96, top=0.9, bottom=0.1, hspace=0.12)
    w = sec.half_width_m
    # Buildings and tunnel, levels relative to the ground at the axis.
    top.axhline(0.0, color=GROUND, lw=1.2)
    for a, b, bid, h, f, cat in sec.blocks:
        colour = CATEGORY_COLOURS[cat] if 0 <= cat < len(CATEGORY_COLOURS) else NOT_ASSESSED_COLOUR
        base = -f if np.isfinite(f) else 0.0
        height = h if np.isfinite(h) else 1.0
        top.add_patch(plt.Rectangle((a, base), b - a, height - base, facecolor=colour, edgecolor="0.15", lw=0.6,
                                    linestyle="--" if cat < 0 else "-"))
        top.text(0.5 * (a + b), height, f"{bid}\ncat. {cat}" if cat >= 0 else f"{bid}\nnot assessed",
                 ha="center", va="bottom", fontsize=6, parse_math=False)
    if np.isfinite(sec.axis_depth_m):
        d = axis.outer_diameter_m
        top.add_patch(Ellipse((0.0, -sec.axis_depth_m), d, d, facecolor=TUNNEL, edgecolor="k", lw=0.6, alpha=0.7))
        top.text(0.0, -sec.axis_depth_m - 0.6 * d, f"axis {sec.axis_depth_m:.1f} m deep", ha="center", va="top",
                 fontsize=6.5)
        bottom = -sec.axis_depth_m - 1.5 * d
    else:
        top.text(0.0, -0.5, "tunnel depth here not in the outputs", ha="center", va="top", fontsize=6.5)
        bottom = -3.0
    tallest = max([b[3] for b in sec.blocks if np.isfinite(b[3])] + [2.0])
    top.set_ylim(bottom, tallest * 1.35 + 1.0)
    top.set_ylabel("height above\nground at axis (m)", fontsize=7)
    top.set_title(f"chainage {sec.chainage_m:g} m", fontsize=9)
    if not sec.blocks:
        top.text(0.02, 0.95, "no building on this section", transform=top.transAxes, fontsize=6.5, va="top")

    for a, b, *_ in sec.blocks:
        for p in (mid, low):
            p.axvspan(a, b, color="0.85", lw=0, zorder=0)
    if len(sec.offset_m):
        mid.plot(sec.offset_m, sec.settlement_mm, color="#2b5d8a", lw=1.3, marker=".", ms=2)
        mid.set_ylim(max(np.nanmax(sec.settlement_mm) * 1.15, 1e-3), 0.0)
        low.plot(sec.offset_m, sec.strain_ue, color="#7b3294", lw=1.2, marker=".", ms=2)
        k = int(np.nanargmax(sec.settlement_mm))
        mid.annotate(f"{sec.settlement_mm[k]:.1f} mm", (sec.offset_m[k], sec.settlement_mm[k]), fontsize=6.5,
                     textcoords="offset points", xytext=(4, -8))
    else:
        mid.text(0.02, 0.5, "no grid node on this section\nreaches the grid threshold", transform=mid.transAxes,
                 fontsize=7)
        mid.set_ylim(1.0, 0.0)
    low.axhline(0.0, color="k", lw=0.6)
    mid.set_ylabel("settlement\n(mm, down)", fontsize=7)
    low.set_ylabel("horizontal strain\nacross (µε, + tension)", fontsize=7)
    low.set_xlabel("offset from the axis (m)", fontsize=7)
    low.set_xlim(-w, w)
    for p in (top, mid, low):
        p.grid(alpha=0.3)
        p.tick_params(labelsize=6.5)
        p.axvline(0.0, color="k", lw=0.5, ls="-.")
