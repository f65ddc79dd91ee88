"""Figures of a finished run, as PNG files (matplotlib, Agg backend): a plan map, a longitudinal section of a drive and
transverse sections across it.

Everything is read from the run's outputs: the GeoPackage layers by name (`route`, `grid`, `settlement_bands`,
`settlement_lines`, and `buildings`, `utilities`, `face_stations` when the run has them) and summary.json. Nothing is
recomputed: the figures show the numbers the run wrote. Each function writes one PNG through a temporary file in the
target folder and an atomic rename, so a failed drawing never leaves half a file. Each figure is also available
as a matplotlib Figure (`plan_map_figure`, `longitudinal_section_figure`, `transverse_sections_figure`), to be
checked or saved by the caller.

Every figure is drawn at the size it is printed: the image area of a landscape page of the report
(`FIGURE_AREA_IN`, A4 or A3 by the `paper` keyword), so its text prints at its nominal point size, never under
`MIN_TEXT_PT`, and no text runs outside the figure.

Conventions (the project's, see `settle.results`), stated once:
- settlement positive downward, and drawn downward in the sections; horizontal strain tensile positive [microstrain];
- chainage along the 3-D tunnel axis from the route layer's `start_chainage_m` at the launch shaft (the first vertex
  of the route line), as `settle.route` measures it;
- transverse offsets are horizontal distances from the axis, looking up-chainage (in the direction of increasing
  chainage, towards the reception shaft): left of the axis negative, right positive, drawn left to right
  (`OFFSET_LABEL`; the monitoring figures use the same);
- plan coordinates in the project CRS, grid north up.

Colours, line styles and class labels are the palette tables of `gis_out.styles`, the same that style the layers in a
GIS, so a figure and the GeoPackage read alike. Every class is named in the legend with its number and its range or
words, and damage categories 2 and above are also written on the buildings, so colour is never the only cue. The
band colours match the GIS styles exactly when summary.json holds the run's contour levels
(`grid.contour_levels_mm`); otherwise they are spread over the bands present.

Names from the user (project, drives, buildings, pipes, the CRS) are drawn literally (`parse_math=False`: a "$" is
a dollar sign, never math), and the characters the font lacks come as one warning per figure (`gis_out.png`).

Where the outputs do not hold something a figure would show (ground levels along a drive that had no face check, the
water level of a river, a river's course away from the drive), the figure says so rather than making it up.

The plan draws the settlement bands and contours smoothed for reading, with small islands left out and the note
"islands under N m² not drawn" in its legend (`gis_out.figure_contours`); the GeoPackage layers keep them exact.
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
from matplotlib.patches import Circle, Patch  # noqa: E402
from matplotlib.textpath import TextToPath  # noqa: E402
from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar  # noqa: E402
from shapely import LineString  # noqa: E402
from shapely.ops import substring  # noqa: E402

from settle.errors import InputError  # noqa: E402

from . import figure_contours, plan_labels, styles  # noqa: E402
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
#: A transverse section runs past the place where its trough fades (to the grid threshold) by this share of the
#: distance to it, and at least two grid spacings. [-] (our choice)
SECTION_MARGIN_FRACTION = 0.2
#: Sections side by side on one figure at most; more go on further rows. (our choice)
SECTION_COLUMNS = 4
#: The most transverse sections one figure holds at a readable size, by paper (one row of four on A4, two on A3):
#: more are still drawn, smaller; a caller with more chainages should split them over several figures. (our choice)
SECTIONS_PER_FIGURE = {"A4": 4, "A3": 8}
PNG_DPI = 150  # resolution of the figures [dots per inch]
#: The image area of a landscape report page, width x height [in]: a figure is drawn at this size (the report
#: scales the image to fit the box keeping its aspect), so its text prints at its nominal point size.
FIGURE_AREA_IN = {"A4": (10.3, 6.2), "A3": (15.1, 9.6)}
#: The smallest text drawn on the figures, at print size. [pt] (our choice, for a figure read on paper)
MIN_TEXT_PT = 7.0
#: The horizontal axis of every cross-section (transverse sections here, monitored sections in
#: gis_out.monitoring_figures).
OFFSET_LABEL = "offset from the axis (m), looking up-chainage: left \u2212 / right +"
#: Half the width of the water-coloured band drawn across a drive where it passes under a river, as a share of the
#: map's width (the river's course away from the drive is not in the outputs). [-] (our choice)
RIVER_BAND_HALF_WIDTH_FRACTION = 0.05
RIVER_TEXT = "#1d4f91"  # the river's name: a darker blue than the water, to read on it
#: The plan's legend entries are wrapped to this width, leaving the rest of the figure to the map. [in]
LEGEND_TEXT_IN = 2.3


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

    def __call__(self, values, x, y, missing: float = np.nan) -> np.ndarray:
        """Values (one per node of the layer) interpolated bilinearly at the places (x, y). [their units]

        `missing` is the value taken at a node the layer does not hold: NaN (the default) leaves a gap wherever one
        of the four nodes around a place is missing; 0 takes a settlement below the layer's threshold as none,
        which is off by less than the threshold there."""
        values = np.asarray(values, dtype=float)
        fx, fy = np.asarray(x, float) / self.spacing_m, np.asarray(y, float) / self.spacing_m
        x0, y0 = np.floor(fx).astype(np.int64), np.floor(fy).astype(np.int64)
        tx, ty = fx - x0, fy - y0
        out = np.zeros(np.shape(fx))
        for dx, dy, weight in ((0, 0, (1 - tx) * (1 - ty)), (1, 0, tx * (1 - ty)), (0, 1, (1 - tx) * ty),
                               (1, 1, tx * ty)):
            row = self._index(x0 + dx, y0 + dy)
            value = np.where(row >= 0, values[np.maximum(row, 0)], missing)
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


def figure_size_in(paper: str) -> tuple[float, float]:
    """Width and height of a figure for the paper of the report's figure pages (`FIGURE_AREA_IN`). [in]

    Raises
    ------
    InputError  A paper other than "A4" or "A3".
    """
    key = str(paper).strip().upper()
    if key not in FIGURE_AREA_IN:
        raise InputError(f"paper must be one of {', '.join(sorted(FIGURE_AREA_IN, reverse=True))}; got {paper!r}")
    return FIGURE_AREA_IN[key]


_TEXT_PATH = TextToPath()


def text_width_in(text: str, fontsize: float) -> float:
    """Width of one line of text in the figures' font, as drawn. [in]"""
    prop = matplotlib.font_manager.FontProperties(size=fontsize)
    width_pt, _, _ = _TEXT_PATH.get_text_width_height_descent(text, prop, ismath=False)
    return float(width_pt) / 72.0


def wrap_to_width(text: str, fontsize: float, width_in: float) -> str:
    """The text broken between words into lines no wider than `width_in` at `fontsize` [pt], measured in the
    figures' font with 4 % to spare (the drawn glyphs are hinted). A word longer than the width stays whole."""
    lines: list[str] = []
    for paragraph in str(text).split("\n"):
        line = ""
        for word in paragraph.split():
            trial = f"{line} {word}" if line else word
            if line and text_width_in(trial, fontsize) * 1.04 > width_in:
                lines.append(line)
                line = word
            else:
                line = trial
        lines.append(line)
    return "\n".join(lines)


def _caution(fig, summary: dict, fontsize: float = MIN_TEXT_PT) -> float:
    """The run's caution across the foot of the figure, wrapped to its width; the height it takes. [in]"""
    text = summary.get("caution")
    if not text:
        return 0.1
    width, height = fig.get_size_inches()
    wrapped = wrap_to_width(f"Caution. {text}", fontsize, width - 0.3)
    fig.text(0.12 / width, 0.06 / height, wrapped, fontsize=fontsize, color="0.25", va="bottom",
             linespacing=1.15, parse_math=False)
    return 0.12 + (wrapped.count("\n") + 1) * fontsize * 1.15 * 1.2 / 72.0


def _title_block(fig, lines: list[str], note: str = "", fontsize: float = 10.0, width_in: float | None = None) -> float:
    """A title of one or more lines at the top left of the figure, a smaller note under it, both wrapped to
    `width_in` (default: the figure's width); its height. [in]"""
    width, height = fig.get_size_inches()
    room = (width if width_in is None else width_in) - 0.3
    lines = [part for line in lines for part in wrap_to_width(line, fontsize, room).split("\n")]
    top = 0.1
    fig.text(0.12 / width, 1 - top / height, "\n".join(lines), fontsize=fontsize, va="top", linespacing=1.2,
             parse_math=False)
    top += len(lines) * fontsize * 1.2 * 1.2 / 72.0
    if note:
        note = wrap_to_width(note, 8.0, room)
        fig.text(0.12 / width, 1 - top / height, note, fontsize=8.0, va="top", color="0.2", parse_math=False)
        top += (note.count("\n") + 1) * 8.0 * 1.2 * 1.2 / 72.0
    return top + 0.05


def _rect(fig, left_in: float, bottom_in: float, width_in: float, height_in: float) -> list[float]:
    """An axes rectangle in figure fractions from inches."""
    w, h = fig.get_size_inches()
    return [left_in / w, bottom_in / h, width_in / w, height_in / h]


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
def plan_map_png(gpkg, summary, path, dpi: int = PNG_DPI, paper: str = "A4") -> Path:
    """Draw the plan of a run (settlement bands and contours, routes with chainage ticks, river crossings,
    buildings by damage category, pipes by status, face stations with a narrow or closed window) and write it as a
    PNG.

    Parameters
    ----------
    gpkg : str or Path        The run's GeoPackage.
    summary : dict or path    The run's summary.json (project name, CRS, grid, caution).
    path : str or Path        The PNG to write; its folder must exist.
    dpi : int                 Resolution. [dots per inch]
    paper : str               "A4" or "A3": the figure is drawn at the size of the report page's image area
                              (`FIGURE_AREA_IN`), so its text prints at its nominal size.

    Returns
    -------
    Path  The absolute path written.

    Notes
    -----
    See `plan_map_figure`.
    """
    return save_png(plan_map_figure(gpkg, summary, paper), path, dpi)


def plan_map_figure(gpkg, summary, paper: str = "A4"):
    """The plan of a run as a matplotlib Figure of the paper's figure size (see `plan_map_png`).

    Notes
    -----
    The map takes the figure's height and all its width but the legend's, in the project CRS with grid north up
    (north arrow), a scale bar, and the CRS under the title. Chainage ticks every 50 m, or every 100 m on maps
    wider than 1 km, labelled with the chainage [m]. The part of a drive not yet excavated (beyond its face) is
    dashed, and the face is marked. Where a drive passes under a river (the `river` field of `route_reaches`) a
    water-coloured band is drawn across the drive along that reach, named after the river. Buildings of damage
    category 1 or more (the larger of `category` and `worst_category`) and pipes not within limits (`status`, or
    `worst_status`) are labelled with their id, each label placed clear of the others with a leader line to its
    feature (`gis_out.plan_labels`). The settlement bands and contours are smoothed for reading and islands under
    `figure_contours.MIN_ISLAND_CELLS` grid cells are not drawn, as the legend says (`gis_out.figure_contours`).
    """
    info, names = _run_with_route(gpkg, summary)
    route = read_layer(gpkg, "route")
    axes = drive_axes(route)
    bands = read_layer(gpkg, "settlement_bands") if "settlement_bands" in names else None
    lines = read_layer(gpkg, "settlement_lines") if "settlement_lines" in names else None
    box = _plan_extent(route, bands)
    width = box[2] - box[0]
    spacing = _spacing_or_none(info)

    fig = plt.figure(figsize=figure_size_in(paper))
    ax = fig.add_axes([0.1, 0.1, 0.6, 0.8])  # placed once the legend is measured
    handles: list = []
    with _closed_on_failure(fig):
        levels = _figure_levels(bands, spacing)
        handles += _plan_bands(ax, bands, info, levels)
        handles += _plan_contours(ax, lines, levels, spacing)
        river_labels, river_handles = _plan_rivers(ax, gpkg, names, width)
        buildings = read_layer(gpkg, "buildings", bbox=box) if "buildings" in names else None
        pipes = read_layer(gpkg, "utilities", bbox=box) if "utilities" in names else None
        if buildings is not None:
            handles += _plan_buildings(ax, buildings)
        if pipes is not None:
            handles += _plan_utilities(ax, pipes)
        handles += _plan_routes(ax, axes, width) + river_handles
        if "face_stations" in names:
            handles += _plan_face(ax, read_layer(gpkg, "face_stations", bbox=box))
        _plan_layout(fig, ax, route, axes, info, handles)
        _fit_map_to_axes(fig, ax, box)
        drawn = _drawn_points(ax)
        bar = _scale_bar(ax, _emptiest_corner(ax, drawn, "lower"))
        arrow = _north_arrow(ax, _emptiest_corner(ax, drawn, "upper"))
        (x0, x1), (y0, y1) = ax.get_xlim(), ax.get_ylim()
        labels = river_labels + plan_labels.building_labels(buildings, (x0, y0, x1, y1))
        labels += plan_labels.utility_labels(pipes, (x0, y0, x1, y1))
        renderer = fig.canvas.get_renderer()
        plan_labels.place_labels(ax, labels, obstacles=[a.get_window_extent(renderer) for a in (bar, arrow)])
    return fig


def _spacing_or_none(info: dict) -> float | None:
    """The grid spacing from summary.json, or None when it is not there (the plan then draws the layers as they
    are). [m]"""
    try:
        return grid_spacing(info)
    except InputError:
        return None


def _figure_levels(bands: gpd.GeoDataFrame | None, spacing: float | None):
    """The bands and contours smoothed for drawing (`gis_out.figure_contours`), or None without bands or spacing."""
    if bands is None or not len(bands) or spacing is None:
        return None
    return figure_contours.figure_levels(bands["band"].to_numpy(), bands["lower_mm"].to_numpy(),
                                         bands.geometry.to_numpy(), spacing)


def _plan_extent(route: gpd.GeoDataFrame, bands: gpd.GeoDataFrame | None) -> tuple:
    """The map box (minx, miny, maxx, maxy) around the routes and the settlement bands, with a margin. [m]"""
    parts = [route.total_bounds] + ([bands.total_bounds] if bands is not None and len(bands) else [])
    b = np.array(parts)
    minx, miny, maxx, maxy = b[:, 0].min(), b[:, 1].min(), b[:, 2].max(), b[:, 3].max()
    pad = max(20.0, 0.08 * max(maxx - minx, maxy - miny))
    return (minx - pad, miny - pad, maxx + pad, maxy + pad)


def _plan_bands(ax, bands: gpd.GeoDataFrame | None, info: dict, levels) -> list:
    """Fill the settlement bands present (smoothed when `levels` are given), in the GIS style's colours; their
    legend entries."""
    handles: list = []
    if bands is None or not len(bands):
        return handles
    handles.append(Patch(alpha=0, label="Settlement (positive down)"))
    if levels is None:
        drawn = {int(b): g for b, g in zip(bands["band"], bands.geometry)}
    else:
        drawn = dict(zip(levels.band, levels.bands))
    for c in styles.band_style(bands, contour_levels(info)).classes:
        if c.value in drawn:
            sym = c.symbol
            gpd.GeoSeries([drawn[c.value]]).plot(ax=ax, color=sym.colour, alpha=sym.opacity, edgecolor="none",
                                                 zorder=1)
            handles.append(Patch(facecolor=sym.colour, alpha=sym.opacity, edgecolor=sym.outline, label=c.label))
    return handles


def _plan_contours(ax, lines: gpd.GeoDataFrame | None, levels, spacing: float | None) -> list:
    """Draw the settlement contours (the outlines of the smoothed bands when `levels` are given, else the layer's
    lines without their small closed rings), each labelled with its level [mm] at the middle of its longest part;
    the legend entries."""
    if levels is not None:
        drawn = list(zip(levels.lower_mm, levels.lines))
    elif lines is not None and len(lines):
        area = figure_contours.min_island_area_m2(spacing) if spacing else 0.0
        drawn = [(lev, figure_contours.drop_small_rings(g, area)[0]) for lev, g in zip(lines["level_mm"],
                                                                                      lines.geometry)]
    else:
        return []
    for level, geom in drawn:
        parts_ = [g for g in shapely.get_parts(geom) if g.length > 0]
        if not parts_:
            continue
        gpd.GeoSeries(parts_).plot(ax=ax, color=CONTOUR_COLOUR, linewidth=0.6, zorder=2)
        p = max(parts_, key=lambda g: g.length).interpolate(0.5, normalized=True)
        ax.text(p.x, p.y, f"{level:g}", fontsize=MIN_TEXT_PT, ha="center", va="center", zorder=6, clip_on=True,
                bbox=dict(boxstyle="round,pad=0.1", fc="white", ec="none", alpha=0.8))
    handles = [Line2D([], [], color=CONTOUR_COLOUR, lw=0.6, label="settlement contours, labelled in mm")]
    if levels is not None:
        handles.append(Patch(alpha=0, label=f"smoothed for reading: {figure_contours.island_note(spacing)}"))
    return handles


def _plan_rivers(ax, gpkg, names: set[str], width: float) -> tuple[list, list]:
    """A water-coloured band across each drive along every reach of it under a river (`route_reaches`, field
    `river`); (the rivers' labels, the legend entries). The river's own course is not in the outputs: the band is
    drawn square to the drive, `RIVER_BAND_HALF_WIDTH_FRACTION` of the map's width either side of it."""
    if "route_reaches" not in names:
        return [], []
    reaches = read_layer(gpkg, "route_reaches")
    if "river" not in reaches:
        return [], []
    under = reaches[reaches["river"].fillna("").astype(str).str.strip() != ""]
    if not len(under):
        return [], []
    half = RIVER_BAND_HALF_WIDTH_FRACTION * width
    labels = []
    for name, geom in zip(under["river"].astype(str), under.geometry):
        line = shapely.force_2d(geom)
        band = line.buffer(half, cap_style="flat")
        gpd.GeoSeries([band]).plot(ax=ax, color=WATER, alpha=0.45, edgecolor=WATER, linewidth=0.6, zorder=2.5)
        xy = np.asarray(line.coords)
        t = xy[-1] - xy[0]
        t = t / max(float(np.hypot(*t)), 1e-12)
        mid = line.interpolate(0.5, normalized=True)
        # The name at the band's end on the drive's left side.
        labels.append(plan_labels.Label(name.strip(), mid.x - 0.9 * half * t[1], mid.y + 0.9 * half * t[0],
                                        RIVER_TEXT, rank=-10, style="italic"))
    handle = Patch(facecolor=WATER, alpha=0.45, edgecolor=WATER,
                   label="reach of a drive under a river (its course off the drive: not in the outputs)")
    return labels, [Patch(alpha=0, label="Rivers"), handle]


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


def _plan_layout(fig, ax, route: gpd.GeoDataFrame, axes: list[DriveAxis], info: dict, handles: list) -> None:
    """The legend in a column at the right from the top, the caution across the foot, the title and CRS over the
    map, and the map's axes in all the room left."""
    width, height = fig.get_size_inches()
    foot = _caution(fig, info)
    renderer = fig.canvas.get_renderer()
    top = 0.1
    room = height - top - foot - 0.05
    labels = [h.get_label() for h in handles]
    # The largest legend that fits the height: one column at 7.5 pt, then 7 pt, then two columns.
    for fontsize, ncol in ((7.5, 1), (MIN_TEXT_PT, 1), (MIN_TEXT_PT, 2), (MIN_TEXT_PT, 3)):
        for h, label in zip(handles, labels):
            h.set_label(wrap_to_width(label, fontsize, LEGEND_TEXT_IN))
        legend = fig.legend(handles=handles, loc="upper right", bbox_to_anchor=(1 - 0.08 / width, 1 - top / height),
                            fontsize=fontsize, frameon=True, ncol=ncol, borderaxespad=0.0, labelspacing=0.3,
                            handlelength=1.8, borderpad=0.4)
        box = legend.get_window_extent(renderer)
        if box.height / fig.dpi <= room or ncol == 3:
            break
        legend.remove()
    for text in legend.get_texts():  # the drives' names among them
        text.set_parse_math(False)
    left, bottom = 0.62, foot + 0.4
    map_w = width - left - box.width / fig.dpi - 0.25
    top = _title_block(fig, [str(info.get("project", "")), f"Plan: greenfield surface settlement{_stage_text(axes)}"],
                       note=_crs_text(route, info), width_in=left + map_w)
    ax.set_position(_rect(fig, left, bottom, map_w, height - top - bottom - 0.02))


def _fit_map_to_axes(fig, ax, box: tuple) -> None:
    """Grow the box to the shape of the axes, so one metre is as long east as north, and label the axes. [box: m]"""
    pos = ax.get_position(original=True)  # geopandas has set an equal aspect already: not the shrunk box
    shape = (pos.height * fig.get_figheight()) / (pos.width * fig.get_figwidth())
    cx, cy = 0.5 * (box[0] + box[2]), 0.5 * (box[1] + box[3])
    half_w = 0.5 * max(box[2] - box[0], (box[3] - box[1]) / shape)
    ax.set_xlim(cx - half_w, cx + half_w)
    ax.set_ylim(cy - half_w * shape, cy + half_w * shape)
    ax.set_aspect("equal", adjustable="box")
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.tick_params(labelsize=MIN_TEXT_PT)
    for label in ax.get_yticklabels():
        label.set_rotation(90)
        label.set_verticalalignment("center")
    ax.set_xlabel("easting (m)", fontsize=8)
    ax.set_ylabel("northing (m)", fontsize=8)
    ax.grid(alpha=0.2, lw=0.5)


def _emptiest_corner(ax, xy: np.ndarray, side: str) -> str:
    """"lower left" or "lower right" (side "lower"), "upper left" or "upper right" (side "upper"): the corner of the
    map holding fewer of the points xy [m] within a quarter of its width and a fifth of its height (left on a
    tie)."""
    (x0, x1), (y0, y1) = ax.get_xlim(), ax.get_ylim()
    near_y = (xy[:, 1] < y0 + 0.2 * (y1 - y0)) if side == "lower" else (xy[:, 1] > y1 - 0.2 * (y1 - y0))
    left = int(np.sum(near_y & (xy[:, 0] < x0 + 0.25 * (x1 - x0))))
    right = int(np.sum(near_y & (xy[:, 0] > x1 - 0.25 * (x1 - x0))))
    return f"{side} {'right' if right < left else 'left'}"


def _drawn_points(ax) -> np.ndarray:
    """Points of what is drawn on the map (lines' vertices, texts' anchors, patches' and collections' vertices)."""
    pts = [np.asarray(line.get_xydata(), float).reshape(-1, 2) for line in ax.lines]
    pts += [np.array([t.get_position()], float) for t in ax.texts]
    for c in ax.collections:
        for path in c.get_paths():
            pts.append(path.vertices[::10])
    pts = [p for p in pts if len(p)]
    return np.concatenate(pts) if pts else np.empty((0, 2))


def _scale_bar(ax, where: str = "lower left"):
    """A scale bar of a round length near a fifth of the map's width, in a lower corner; the bar."""
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    length = _nice(0.2 * (x1 - x0))
    bar = AnchoredSizeBar(ax.transData, length, f"{length:g} m", where, pad=0.6, borderpad=0.8,
                          sep=4, frameon=True, size_vertical=0.006 * (y1 - y0), fontproperties={"size": 8})
    ax.add_artist(bar)
    return bar


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


def _north_arrow(ax, where: str = "upper left"):
    """A north arrow in an upper corner of the map (whose axes are grid north up), on a white ground; its frame, for
    the labels to keep clear of."""
    from matplotlib.offsetbox import AnchoredOffsetbox, AuxTransformBox, TextArea, VPacker

    arrow = AuxTransformBox(matplotlib.transforms.IdentityTransform())
    arrow.add_artist(matplotlib.patches.FancyArrowPatch((0, 0), (0, 34), arrowstyle="-|>", mutation_scale=14,
                                                        lw=1.4, color="k"))
    pack = VPacker(children=[TextArea("N", textprops=dict(fontsize=10, weight="bold")), arrow,
                             TextArea("grid north", textprops=dict(fontsize=MIN_TEXT_PT))],
                   align="center", pad=0, sep=2)
    box = AnchoredOffsetbox(where, child=pack, pad=0.3, borderpad=0.6, frameon=True)
    box.patch.set(facecolor="white", edgecolor="0.6", alpha=0.85)
    ax.add_artist(box)
    return box


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
            ax.text(xi + 2.8 * tick * nx, yi + 2.8 * tick * ny, f"{c:g}", fontsize=MIN_TEXT_PT, ha="center",
                    va="center", color=ROUTE_COLOUR, zorder=6, clip_on=True)
    xe, ye = a.xyz[-1, 0], a.xyz[-1, 1]
    t = a.direction(a.end_m)
    ax.text(xe + 0.015 * width * t[0], ye + 0.015 * width * t[1], f"D{k}", fontsize=8, weight="bold",
            ha="center", va="center", zorder=7, clip_on=True,
            bbox=dict(boxstyle="round,pad=0.15", fc="white", ec=ROUTE_COLOUR))
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
            ax.text(p.x, p.y, str(c), fontsize=MIN_TEXT_PT, weight="bold", ha="center", va="center", zorder=7,
                    color="white" if c >= 4 else "black", clip_on=True)
    stages = " at any stage" if "worst_category" in buildings else ""
    handles.append(Patch(alpha=0, label=f"labelled: category 1 or more{stages} (id)"))
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
    stages = " at any stage" if "worst_status" in pipes else ""
    handles.append(Line2D([], [], alpha=0, label=f"labelled: not within limits{stages} (id)"))
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
def longitudinal_section_png(gpkg, summary, drive: str, path, dpi: int = PNG_DPI, paper: str = "A4") -> Path:
    """Draw the longitudinal section of one drive and write it as a PNG (see `longitudinal_section_figure`).

    Parameters
    ----------
    gpkg, summary, drive      As for `longitudinal_section_figure`.
    path, dpi                 The PNG to write (its folder must exist) and its resolution, as for `plan_map_png`.
    paper : str               "A4" or "A3", as for `plan_map_png`.

    Returns
    -------
    Path  The absolute path of the PNG.
    """
    return save_png(longitudinal_section_figure(gpkg, summary, drive, paper), path, dpi)


def longitudinal_section_figure(gpkg, summary, drive: str, paper: str = "A4"):
    """The longitudinal section of one drive as a matplotlib Figure of the paper's figure size.

    Panels against chainage: (1) the ground surface (river bed in river reaches) and the tunnel between crown and
    invert, with the least cover marked; (2) the settlement along the axis, from the grid nodes within half a grid
    spacing of it; (3) when the run has face stations for the drive, the face support window at the crown.

    Parameters
    ----------
    gpkg : str or Path        The run's GeoPackage.
    summary : dict or path    The run's summary.json.
    drive : str               The drive's name (the `drive` field of the route layer).
    paper : str               "A4" or "A3", as for `plan_map_png`.

    Returns
    -------
    Figure

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
    fig, panels = plt.subplots(rows, 1, sharex=True, figsize=figure_size_in(paper),
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
            sec.annotate(f"face {axis.face_chainage_m:.1f} m", (axis.face_chainage_m, 0.0),
                         xycoords=("data", "axes fraction"), xytext=(3, 3), textcoords="offset points",
                         fontsize=MIN_TEXT_PT, va="bottom", zorder=6,
                         bbox=dict(boxstyle="square,pad=0.15", fc="white", ec="none", alpha=0.85))
        panels[-1].set_xlabel("chainage along the axis (m)", fontsize=8)
        panels[-1].set_xlim(axis.start_m, axis.end_m)
        for p in panels:
            p.tick_params(labelsize=MIN_TEXT_PT)
            p.yaxis.label.set_fontsize(8)
        sec.set_title(f"{info.get('project', '')}\nLongitudinal section: {axis.name}", fontsize=9.5, loc="left",
                      parse_math=False)
        foot = _caution(fig, info)
        fig.tight_layout(rect=(0, foot / fig.get_figheight(), 1, 1), h_pad=0.6)
    return fig


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
        note = ("Ground levels along this drive are not in the outputs (no face stations, no route profile): the "
                f"tunnel alone is drawn. Least cover (route layer): {axis.min_cover_m:.2f} m.")
        ax.text(0.01, 0.95, wrap_to_width(note, 7.5, ax.figure.get_figwidth() - 1.5), transform=ax.transAxes,
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
                    textcoords="offset points", xytext=(-5 if right else 5, 4), fontsize=MIN_TEXT_PT,
                    ha="right" if right else "left")
    levels = [z - r, z + r] + ([] if profile is None else [profile.surface_level_m])
    bottom, top = np.nanmin(np.concatenate(levels)), np.nanmax(np.concatenate(levels))
    span = max(top - bottom, 1.0)
    ax.set_ylim(bottom - 0.05 * span, top + 0.5 * span)  # room for the legend above the ground
    ax.set_ylabel("level (m)")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=MIN_TEXT_PT, ncol=3)


def _settlement_panel(ax, c, s, spacing: float, info: dict) -> None:
    threshold = info.get("grid", {}).get("threshold_mm")
    if len(c) and np.isfinite(s).any():
        ax.plot(c, s, color="#2b5d8a", lw=1.4)
        k = int(np.nanargmax(s))
        ax.plot([c[k]], [s[k]], "o", color="#2b5d8a", ms=4)
        right = c[k] > 0.5 * (c[0] + c[-1])
        ax.annotate(f"{s[k]:.1f} mm at {c[k]:.1f} m", (c[k], s[k]), textcoords="offset points",
                    xytext=(-6 if right else 6, 2), ha="right" if right else "left", va="bottom",
                    fontsize=MIN_TEXT_PT)
        ax.set_ylim(max(np.nanmax(s) * 1.15, 1e-3), 0.0)  # settlement drawn downward
    else:
        ax.text(0.01, 0.5, "no grid node on the axis reaches the grid layer's threshold", transform=ax.transAxes,
                fontsize=8, color="0.2")
        ax.set_ylim(1.0, 0.0)
    # One curve: its key goes above the panel, where it covers nothing.
    key = "settlement on the axis (bilinear between the grid nodes around it)"
    if threshold is not None:
        key += f"; gaps: settlement below the grid threshold ({threshold:g} mm)"
    ax.set_title(key, fontsize=MIN_TEXT_PT, loc="left", pad=2, color="0.2")
    ax.set_ylabel("settlement (mm, down)")
    ax.grid(alpha=0.3)


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
    drawn = np.concatenate([lo, hi, fs["blowout_kpa"].to_numpy(float), fs["water_pressure_kpa"].to_numpy(float)])
    if np.isfinite(drawn).any():
        bottom, top = float(np.nanmin(drawn)), float(np.nanmax(drawn))
        span = max(top - bottom, 1.0)
        ax.set_ylim(bottom - 0.05 * span, top + 0.35 * span)  # room for the legend above the lines
    ax.set_ylabel("pressure at crown (kPa)")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", fontsize=MIN_TEXT_PT, ncol=3)


# ------------------------------------------------------------------------------------------ transverse sections
@dataclass
class Section:
    """Settlement and strain along one transverse section, and the buildings it crosses."""

    chainage_m: float
    offset_m: np.ndarray  # increasing; looking up-chainage, left of the axis negative, right positive [m]
    settlement_mm: np.ndarray  # NaN below the grid threshold [mm]
    strain_ue: np.ndarray  # horizontal normal strain along the section line, tensile positive [microstrain]
    half_width_m: float
    blocks: list  # (offset from [m], offset to [m], building id, height_m, foundation_depth_m, category)
    axis_depth_m: float  # NaN when the ground level is not in the outputs
    fade_m: tuple = (np.nan, np.nan)  # offsets of the farthest places either side reaching the threshold [m]
    threshold_mm: float = np.nan  # the grid layer's threshold [mm]


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
                       profile: GroundProfile | None, half_width_m: float | None = None,
                       threshold_mm: float | None = None) -> Section:
    """Settlement and horizontal strain along the section line at a chainage (every half grid spacing, bilinear
    between the four grid nodes around each place), and the buildings the line crosses.

    The grid layer holds only the nodes whose settlement reaches the run's threshold (`threshold_mm`; default the
    smallest settlement in the layer nearby, which is no less than it). A node missing from the layer is taken as
    no settlement, off by less than the threshold, so the trough runs out to where it falls to the threshold
    (NaN below it) rather than stopping at the first place one of its four nodes is missing, some way short of
    it. The strain is only known at the nodes the layer holds: it is left as a gap wherever one is missing.

    Without `half_width_m` the section runs past the farthest place (within `SECTION_MAX_HALF_WIDTH_M` of the
    axis) where the settlement reaches the threshold, on either side, by `SECTION_MARGIN_FRACTION` of its
    distance and at least two grid spacings, and is no shorter than 5 outer diameters either side. [m]
    """
    x0, y0, _ = (float(v) for v in axis.at(chainage_m))
    n = _normal(axis.direction(chainage_m))
    reach = SECTION_MAX_HALF_WIDTH_M if half_width_m is None else float(half_width_m)
    offset = np.arange(-reach, reach + 1e-9, 0.5 * spacing_m)
    x, y = x0 + offset * n[0], y0 + offset * n[1]
    sampler = grid_near(gpkg, names, (x.min(), y.min(), x.max(), y.max()), spacing_m)
    settlement = strain = np.full(len(offset), np.nan)
    threshold = np.nan if threshold_mm is None else float(threshold_mm)
    if sampler is not None and len(sampler.grid):
        g = sampler.grid
        if threshold_mm is None:
            threshold = float(g["settlement_mm"].min())
        settlement = sampler(g["settlement_mm"], x, y, missing=0.0)
        settlement = np.where(settlement >= threshold - 1e-12, settlement, np.nan)
        azimuth = np.degrees(np.arctan2(n[0], n[1])) % 180.0  # the section's direction, clockwise from north
        # The strain along the section at each node (tensor rotation), then interpolated like the settlement.
        strain = sampler(strain_along(g["strain_max_ue"], g["strain_min_ue"], g["strain_max_azimuth_deg"], azimuth),
                         x, y)
    found = np.isfinite(settlement)
    fade = (float(offset[found].min()), float(offset[found].max())) if found.any() else (np.nan, np.nan)
    w = reach
    if half_width_m is None:
        far = max(abs(fade[0]), abs(fade[1])) if found.any() else 0.0
        margin = max(SECTION_MARGIN_FRACTION * far, 2.0 * spacing_m)
        w = min(max(far + margin, 5.0 * axis.outer_diameter_m), reach)
    inside = np.abs(offset) <= w + 1e-9
    blocks = section_blocks(gpkg, names, axis, chainage_m, w)
    depth = np.nan
    if profile is not None and len(profile.chainage_m):
        depth = float(np.interp(chainage_m, profile.chainage_m, profile.surface_level_m) - axis.at(chainage_m)[2])
    return Section(float(chainage_m), offset[inside], settlement[inside], strain[inside], w, blocks, depth, fade,
                   threshold)


def section_blocks(gpkg, names: set[str], axis: DriveAxis, chainage_m: float, half_width_m: float) -> list:
    """The buildings a section line of half length `half_width_m` [m] crosses: (offset from [m], offset to [m],
    building id, height_m, foundation_depth_m, category) per piece of footprint on the line."""
    if "buildings" not in names:
        return []
    x0, y0, _ = (float(v) for v in axis.at(chainage_m))
    n = _normal(axis.direction(chainage_m))
    w = float(half_width_m)
    line = LineString([(x0 - w * n[0], y0 - w * n[1]), (x0 + w * n[0], y0 + w * n[1])])
    hit = read_layer(gpkg, "buildings", bbox=line.bounds)
    blocks = []
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
    return blocks


@glyph_checked
def transverse_sections_png(gpkg, summary, drive: str, chainages_m, path, half_width_m: float | None = None,
                            dpi: int = PNG_DPI, paper: str = "A4") -> Path:
    """Draw transverse sections across one drive at the chosen chainages and write them as one PNG (see
    `transverse_sections_figure`).

    Parameters
    ----------
    gpkg, summary, drive, chainages_m, half_width_m
                                  As for `transverse_sections_figure`.
    path : str or Path            The PNG to write; its folder must exist.
    dpi : int                     Resolution. [dots per inch]
    paper : str                   "A4" or "A3", as for `plan_map_png`.

    Returns
    -------
    Path  The absolute path written.

    Raises
    ------
    InputError  As `transverse_sections_figure`.
    """
    figure = transverse_sections_figure(gpkg, summary, drive, chainages_m, half_width_m, paper)
    return save_png(figure, path, dpi)


def transverse_sections_figure(gpkg, summary, drive: str, chainages_m, half_width_m: float | None = None,
                               paper: str = "A4"):
    """Transverse sections across one drive at the chosen chainages, as a matplotlib Figure of the paper's size.

    For each chainage three panels against the offset from the axis, looking up-chainage (left of the axis
    negative, right positive: `OFFSET_LABEL`): the buildings the section line crosses, drawn as blocks from
    foundation level to their height with their damage category, and the tunnel at its depth (when the ground level
    there is in the outputs), at true scale (one metre as long across as up, so the tunnel is round); the
    settlement trough, drawn out to where it falls to the grid threshold on both sides (see `transverse_section`);
    the horizontal strain along the section line (tensile positive). Both are sampled every half grid spacing along
    the line, bilinear between the four grid nodes around each place (the strain first turned into the section's
    direction at each node). Up to `SECTION_COLUMNS` sections side by side; one section alone is drawn with its
    buildings beside its trough rather than above it, so both read at a useful size.

    Parameters
    ----------
    gpkg : str or Path            The run's GeoPackage.
    summary : dict or path        The run's summary.json.
    drive : str                   The drive's name (the `drive` field of the route layer).
    chainages_m : sequence        Chainages of the sections, within the drive. [m]
    half_width_m : float, optional  Half the length of each section. [m] Default: past the farthest place within
                                  100 m of the axis where the settlement reaches the grid threshold, with a margin,
                                  and no less than 5 outer diameters (`transverse_section`). The buildings panel
                                  may show more, to keep its true scale.
    paper : str                   "A4" or "A3", as for `plan_map_png`.

    Returns
    -------
    Figure

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
    size = figure_size_in(paper)
    spacing = grid_spacing(info)
    threshold = (info.get("grid") or {}).get("threshold_mm")
    profile = ground_profile(gpkg, names, axis)
    sections = [transverse_section(gpkg, names, axis, c, spacing, profile, half_width_m, threshold)
                for c in chainages]

    fig = plt.figure(figsize=size)
    with _closed_on_failure(fig):
        note = (f"{OFFSET_LABEL.replace(' (m)', '')}. Troughs drawn out to the grid threshold"
                + (f" ({threshold:g} mm, dotted)" if threshold is not None else "")
                + "; buildings and tunnel at true scale.")
        top = _title_block(fig, [str(info.get("project", "")), f"Transverse sections across {axis.name}"],
                           note=note)
        foot = _caution(fig, info)
        blocks_for = (lambda c, w: section_blocks(gpkg, names, axis, c, w))
        cells = _section_cells(fig, len(sections), top, foot)
        # One height for every buildings panel of the figure, so the panels line up in rows.
        pw = cells[0][2] - _CELL_LEFT_IN - _CELL_RIGHT_IN
        room = cells[0][3] - _CELL_TOP_IN - _CELL_FOOT_IN - 2 * _PANEL_GAP_IN
        hg = max(_geometry_height_in(sec, axis, pw, room) for sec in sections)
        for cell, sec in zip(cells, sections):
            _draw_section(fig, cell, sec, axis, blocks_for, side_by_side=len(sections) == 1, geometry_in=hg)
    return fig


def _section_cells(fig, n: int, top_in: float, foot_in: float) -> list[tuple[float, float, float, float]]:
    """(left, bottom, width, height) of each section's cell, in inches, row by row, `SECTION_COLUMNS` a row."""
    width, height = fig.get_size_inches()
    cols = min(n, SECTION_COLUMNS)
    rows = int(np.ceil(n / cols))
    cw, ch = (width - 0.1) / cols, (height - top_in - foot_in) / rows
    return [(0.05 + (k % cols) * cw, foot_in + (rows - 1 - k // cols) * ch, cw, ch) for k in range(n)]


# Margins of a section's panels in its cell [in]: room for the y labels at the left, the x label at the foot.
_CELL_LEFT_IN, _CELL_RIGHT_IN, _CELL_TOP_IN, _CELL_FOOT_IN, _PANEL_GAP_IN = 0.74, 0.08, 0.3, 0.5, 0.08
_BLOCK_LABEL_IN = 0.27  # the height a two-line building label takes above its block [in]
_DEPTH_TEXT_IN = 0.18  # the height of the depth text under the tunnel [in]


def _draw_section(fig, cell, sec: Section, axis: DriveAxis, blocks_for, side_by_side: bool,
                  geometry_in: float) -> None:
    """One section in its cell: the buildings and tunnel at true scale (the panel `geometry_in` high when above
    the trough), the trough, the strain."""
    left, bottom, cw, ch = cell
    inner_h = ch - _CELL_TOP_IN - _CELL_FOOT_IN
    if side_by_side:
        gw = 0.45 * cw - _CELL_LEFT_IN
        geo_box = (left + _CELL_LEFT_IN, bottom + _CELL_FOOT_IN, gw, inner_h)
        px = left + 2 * _CELL_LEFT_IN + gw + 0.15
        pw, ph = left + cw - _CELL_RIGHT_IN - px, 0.5 * (inner_h - _PANEL_GAP_IN)
        low = fig.add_axes(_rect(fig, px, bottom + _CELL_FOOT_IN, pw, ph))
        mid = fig.add_axes(_rect(fig, px, bottom + _CELL_FOOT_IN + ph + _PANEL_GAP_IN, pw, ph), sharex=low)
        geo = fig.add_axes(_rect(fig, *geo_box))
        mid.tick_params(labelbottom=False)
    else:
        pw = cw - _CELL_LEFT_IN - _CELL_RIGHT_IN
        h = inner_h - 2 * _PANEL_GAP_IN
        hg = geometry_in
        hm = 0.52 * (h - hg)
        x = left + _CELL_LEFT_IN
        low = fig.add_axes(_rect(fig, x, bottom + _CELL_FOOT_IN, pw, h - hg - hm))
        mid = fig.add_axes(_rect(fig, x, bottom + _CELL_FOOT_IN + h - hg - hm + _PANEL_GAP_IN, pw, hm), sharex=low)
        geo_box = (x, bottom + _CELL_FOOT_IN + h - hg + 2 * _PANEL_GAP_IN, pw, hg)
        geo = fig.add_axes(_rect(fig, *geo_box), sharex=low)
        for p in (geo, mid):
            p.tick_params(labelbottom=False)
    width, height = fig.get_size_inches()
    fig.text((left + _CELL_LEFT_IN) / width, (bottom + ch - 0.06) / height, f"chainage {sec.chainage_m:g} m",
             fontsize=8.5, va="top", weight="bold")
    w = sec.half_width_m
    half = _geometry_half_width(sec, axis, w, geo_box[2], geo_box[3])
    blocks = sec.blocks if half <= w + 1e-9 else blocks_for(sec.chainage_m, half)
    _geometry_panel(geo, sec, axis, blocks, half, geo_box[2], geo_box[3])
    _trough_panels(mid, low, sec, blocks)
    low.set_xlim(*((-w, w) if side_by_side else (-half, half)))
    narrow = (pw if not side_by_side else gw) < 3.2
    label = OFFSET_LABEL.replace(", looking", ",\nlooking") if narrow else OFFSET_LABEL
    low.set_xlabel(label, fontsize=MIN_TEXT_PT)
    if side_by_side:
        geo.set_xlabel(label, fontsize=MIN_TEXT_PT)
    for p, short in ((geo, "level (m)"), (mid, "settl. (mm)"), (low, "strain (µε)")):
        p.grid(alpha=0.3)
        p.tick_params(labelsize=MIN_TEXT_PT)
        p.axvline(0.0, color="k", lw=0.5, ls="-.")
        if p.get_position().height * height < 0.75:  # a two-line label would be taller than its panel [in]
            p.set_ylabel(short, fontsize=MIN_TEXT_PT)
    _place_block_labels(geo, blocks)


def _geometry_height_in(sec: Section, axis: DriveAxis, width_in: float, room_in: float) -> float:
    """The height of a buildings panel above the trough [in]: what shows the section's width at true scale, but
    between 30 and 58 % of the room for the three panels (beyond that the panel shows more than the section's
    width instead)."""
    low_m, high_m = _geometry_levels(sec, axis)
    extras_in = _DEPTH_TEXT_IN + (_block_label_rows(sec.blocks) * _BLOCK_LABEL_IN) + 0.1
    wanted = width_in * (high_m - low_m) / (2.0 * sec.half_width_m) + extras_in
    return float(np.clip(wanted, 0.30 * room_in, 0.58 * room_in))


def _geometry_half_width(sec: Section, axis: DriveAxis, w: float, box_w_in: float, box_h_in: float) -> float:
    """Half the width the buildings panel shows [m]: the section's, or more when the levels to show (foundations
    and tunnel to roofs, plus the labels' room) need it at one metre as long across as up."""
    low_m, high_m = _geometry_levels(sec, axis)
    extras_in = _DEPTH_TEXT_IN + (_block_label_rows(sec.blocks) * _BLOCK_LABEL_IN) + 0.1
    usable = max(box_h_in - extras_in, 0.25 * box_h_in)
    return max(w, 0.5 * (high_m - low_m) * box_w_in / usable)


def _geometry_levels(sec: Section, axis: DriveAxis) -> tuple[float, float]:
    """The lowest and highest levels the buildings panel must show, from the ground at the axis. [m]"""
    d = axis.outer_diameter_m
    bottom = -(sec.axis_depth_m + 0.5 * d + 0.2) if np.isfinite(sec.axis_depth_m) else -3.0
    founds = [-b[4] for b in sec.blocks if np.isfinite(b[4])]
    tallest = max([b[3] for b in sec.blocks if np.isfinite(b[3])] + [2.0])
    return min([bottom] + founds), tallest


def _block_label_rows(blocks: list) -> int:
    """Rows of building labels to leave room for: two when labels may have to be staggered."""
    return 0 if not blocks else (1 if len(blocks) == 1 else 2)


def _geometry_panel(ax, sec: Section, axis: DriveAxis, blocks: list, half: float, box_w_in: float,
                    box_h_in: float) -> None:
    """Buildings and tunnel, levels from the ground at the axis, at one metre as long across as up."""
    ax.axhline(0.0, color=GROUND, lw=1.2)
    for a, b, bid, h, f, cat in blocks:
        colour = CATEGORY_COLOURS[cat] if 0 <= cat < len(CATEGORY_COLOURS) else NOT_ASSESSED_COLOUR
        base = -f if np.isfinite(f) else 0.0
        height = h if np.isfinite(h) else 1.0
        ax.add_patch(plt.Rectangle((a, base), b - a, height - base, facecolor=colour, edgecolor="0.15", lw=0.6,
                                   linestyle="--" if cat < 0 else "-"))
    d = axis.outer_diameter_m
    if np.isfinite(sec.axis_depth_m):
        ax.add_patch(Circle((0.0, -sec.axis_depth_m), 0.5 * d, facecolor=TUNNEL, edgecolor="k", lw=0.6, alpha=0.7))
        ax.annotate(f"axis {sec.axis_depth_m:.1f} m deep", (0.0, -sec.axis_depth_m - 0.5 * d),
                    textcoords="offset points", xytext=(0, -2), ha="center", va="top", fontsize=MIN_TEXT_PT)
    else:
        ax.text(0.0, -0.5, "tunnel depth here not in the outputs", ha="center", va="top", fontsize=MIN_TEXT_PT)
    if not blocks:
        ax.text(0.02, 0.96, "no building on this section", transform=ax.transAxes, fontsize=MIN_TEXT_PT, va="top")
    # True scale: the x range is `half` either side; the y range is what the box's shape gives, the levels to show
    # at the foot and the labels' room at the top.
    low_m, high_m = _geometry_levels(sec, axis)
    metres_per_in = 2.0 * half / box_w_in
    span = box_h_in * metres_per_in
    need = (high_m - low_m) + (_DEPTH_TEXT_IN + _block_label_rows(blocks) * _BLOCK_LABEL_IN) * metres_per_in
    bottom = low_m - _DEPTH_TEXT_IN * metres_per_in - 0.5 * max(span - need, 0.0)
    ax.set_xlim(-half, half)
    ax.set_ylim(bottom, bottom + span)
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_ylabel("height above\nground at axis (m)", fontsize=MIN_TEXT_PT)


def _place_block_labels(ax, blocks: list) -> None:
    """Each block's id and category above it, raised a row where it would overlap a label to its left, and kept
    inside the panel; a label that would still overlap one is left out, and the panel says how many were."""
    if not blocks:
        return
    renderer = ax.figure.canvas.get_renderer()
    ax.apply_aspect()
    frame = ax.get_window_extent(renderer)
    (x0, x1), (y0, y1) = ax.get_xlim(), ax.get_ylim()
    per_px_y = (y1 - y0) / frame.height
    placed, left_out = [], 0
    for a, b, bid, h, f, cat in sorted(blocks, key=lambda blk: 0.5 * (blk[0] + blk[1])):
        height = h if np.isfinite(h) else 1.0
        text = f"{bid}\ncat. {cat}" if cat >= 0 else f"{bid}\nnot assessed"
        t = ax.text(0.5 * (max(a, x0) + min(b, x1)), height, text, ha="center", va="bottom",
                    fontsize=MIN_TEXT_PT, parse_math=False, linespacing=1.1)
        box = t.get_window_extent(renderer)
        shift = max(frame.x0 - box.x0, 0.0) - max(box.x1 - frame.x1, 0.0)  # keep it inside the panel [px]
        if shift:
            t.set_x(t.get_position()[0] + shift * (x1 - x0) / frame.width)
            box = t.get_window_extent(renderer)
        if any(box.overlaps(p) for p in placed):
            t.set_y(height + (box.height + 2) * per_px_y)
            box = t.get_window_extent(renderer)
        if any(box.overlaps(p) for p in placed) or box.y1 > frame.y1:
            t.remove()
            left_out += 1
            continue
        placed.append(box)
    if left_out:
        ax.text(0.98, 0.03, f"{left_out} not labelled (no room)",
                transform=ax.transAxes, ha="right", va="bottom", fontsize=MIN_TEXT_PT, color="0.3",
                bbox=dict(boxstyle="square,pad=0.1", fc="white", ec="none", alpha=0.8))


def _trough_panels(mid, low, sec: Section, blocks: list) -> None:
    """The settlement trough (to the grid threshold, which is dotted) and the strain across, with the buildings'
    extents shaded."""
    for a, b, *_ in blocks:
        for p in (mid, low):
            p.axvspan(a, b, color="0.88", lw=0, zorder=0)
    if np.isfinite(sec.settlement_mm).any():
        mid.plot(sec.offset_m, sec.settlement_mm, color="#2b5d8a", lw=1.3, marker=".", ms=2)
        deepest = float(np.nanmax(sec.settlement_mm))
        mid.set_ylim(max(deepest * 1.2, 1e-3), 0.0)
        k = int(np.nanargmax(sec.settlement_mm))
        mid.annotate(f"{sec.settlement_mm[k]:.1f} mm", (sec.offset_m[k], sec.settlement_mm[k]),
                     fontsize=MIN_TEXT_PT, textcoords="offset points", xytext=(4, -2), va="bottom")
        if np.isfinite(sec.threshold_mm):
            mid.axhline(sec.threshold_mm, color="0.35", lw=0.7, ls=":")
    else:
        mid.text(0.02, 0.5, "no grid node on this section\nreaches the grid threshold", transform=mid.transAxes,
                 fontsize=MIN_TEXT_PT)
        mid.set_ylim(1.0, 0.0)
    if np.isfinite(sec.strain_ue).any():
        low.plot(sec.offset_m, sec.strain_ue, color="#7b3294", lw=1.2, marker=".", ms=2)
    low.axhline(0.0, color="k", lw=0.6)
    mid.set_ylabel("settlement\n(mm, down)", fontsize=MIN_TEXT_PT)
    low.set_ylabel("horizontal strain\nacross (µε, + tension)", fontsize=MIN_TEXT_PT)
