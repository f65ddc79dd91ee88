"""A run's results as a DXF drawing (R2013) for CAD: tunnel axes with chainage ticks, settlement contours, buildings
by damage category and buried utilities by status, in the project coordinates (drawing unit: metre).

Layers (all names start with `settle_`, lower case like the GeoPackage layers they come from):

- `settle_route`           one 3-D polyline per drive through the vertices of its tunnel axis (x, y, axis level).
- `settle_route_ticks`     chainage ticks: short lines square to the axis in plan, every `tick_spacing_m` of chainage
                           and at both ends of each drive.
- `settle_route_text`      the chainage at each tick ("120 m", "104.1 m") and each drive's name at its launch end.
- `settle_contours`        one polyline per part of each settlement contour (`settlement_lines`), closed where the
                           contour closes; its elevation is minus the settlement in metres (the 10 mm contour lies
                           at z = -0.010), so a CAD user reads the level from the properties of the line.
- `settle_contour_text`    the level of every contour polyline ("10 mm"), beside the line (each level at its own
                           share of the line's length, so the labels of nested rings do not stack).
- `settle_buildings_cat0` .. `settle_buildings_cat5`, `settle_buildings_not_assessed`
                           one closed polyline per ring of each building footprint (outline, dark grey), and one
                           solid fill per footprint in the colour of its damage category (none when not assessed).
- `settle_utilities_within_limits`, `_near_limit`, `_exceeds`, `_not_checked`, `_crosses_the_tunnel`
                           one polyline per buried pipe, on the layer of its status.
- `settle_notes`           the caution of the run, the sign conventions and a list of the layers, below the drawing.

Every layer exists in every drawing, whether or not it holds anything, so a CAD template can rely on the names.
Colours are the project's palette (`gis_out.styles`) as true colours on the layers (an ACI colour as near as
possible is kept beside it for older readers); line weights follow the palette's widths in mm. Texts, ticks and
dashes are sized for a plot at 1:`plot_scale` (2.5 mm text at 1:500 is 1.25 m in the drawing).

Each polyline carries extended data under the application name `SETTLE`: the drive name, the contour level in mm,
the building id and damage category (-1 when not assessed), or the pipe id and status, as name/value pairs.
"""
from __future__ import annotations

import collections
import contextlib
import functools
import io
import math
import os
import re
from pathlib import Path

import ezdxf
import numpy as np
import pandas as pd
import shapely
from ezdxf import colors as dxf_colors
from ezdxf import units as dxf_units
from ezdxf.enums import TextEntityAlignment
from ezdxf.lldxf import const as dxf_const

from settle.assessments import utilities as pipe_checks
from settle.procedure.summary import CAUTION

from .contours import check_levels
from .geopackage import OutputError, write_text_atomic
from .styles import DAMAGE_WORDS, NOT_ASSESSED_WORDS, SINGLE_SYMBOLS, damage_style, layer_style

DXF_VERSION = "R2013"
APP_ID = "SETTLE"  # the application name of the extended data on our entities
PREFIX = "settle_"
ROUTE = PREFIX + "route"
ROUTE_TICKS = PREFIX + "route_ticks"
ROUTE_TEXT = PREFIX + "route_text"
CONTOURS = PREFIX + "contours"
CONTOUR_TEXT = PREFIX + "contour_text"
NOTES = PREFIX + "notes"
TEXT_STYLE = "settle_text"
#: A TrueType font every common CAD reader has or maps to a metric twin; the DXF names the file only.
TEXT_FONT = "arial.ttf"

#: Sizes on paper [mm]: 2.5 mm is the smallest text height usual on engineering drawings (common practice).
TEXT_PAPER_MM = 2.5
TITLE_PAPER_MM = 3.5
TICK_HALF_PAPER_MM = 3.0  # each side of the axis
TICK_WIDTH_MM = 0.35
NOTES_COLOUR = "#4d4d4d"  # the grey of the figures' caution line (matplotlib "0.3")
#: Regular ticks closer than this many text heights to a drive's end are left out, so labels do not overprint.
TICK_CLEAR_HEIGHTS = 2.0


# ------------------------------------------------------------------------------------------------ layer names
def building_layer(category) -> str:
    """DXF layer of a building of damage `category` (0 to 5), or of one not assessed (None)."""
    return PREFIX + ("buildings_not_assessed" if category is None else f"buildings_cat{int(category)}")


def utility_layer(status: str) -> str:
    """DXF layer of a buried pipe of this status (a word of settle.assessments.utilities.STATUSES)."""
    return PREFIX + "utilities_" + re.sub(r"[^0-9a-z]+", "_", status.lower()).strip("_")


# ----------------------------------------------------------------------------------------------- small helpers
def lineweight(width_mm: float) -> int:
    """The DXF line weight nearest a width [mm], in the hundredths of a mm DXF allows (0.25 mm -> 25)."""
    valid = np.array(dxf_const.VALID_DXF_LINEWEIGHTS)
    return int(valid[np.argmin(np.abs(valid - 100.0 * width_mm))])


def rgb(hex_colour: str) -> tuple[int, int, int]:
    """"#rrggbb" as integers 0-255."""
    return tuple(int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))


@functools.lru_cache(maxsize=1)
def _aci_table() -> np.ndarray:
    return np.array([dxf_colors.int2rgb(c) for c in dxf_colors.DXF_DEFAULT_COLORS[1:256]], dtype=float)


def nearest_aci(hex_colour: str) -> int:
    """The ACI colour (1-255) nearest in sRGB to a colour, for readers that ignore true colours."""
    table = _aci_table()
    return 1 + int(np.argmin(((table - np.array(rgb(hex_colour), dtype=float)) ** 2).sum(axis=1)))


def chainage_text(chainage_m: float) -> str:
    """A chainage as the drawing shows it: to 0.1 m, a whole number without decimals ("120 m", "104.1 m")."""
    text = f"{chainage_m:.1f}"
    text = text.removesuffix(".0")
    return f"{'0' if text == '-0' else text} m"


def _one_line(text) -> str:
    """Text for a DXF TEXT entity: control characters (newlines included) become spaces."""
    return re.sub(r"[\x00-\x1f\x7f]", " ", str(text))


def upright_deg(angle_deg):
    """An angle of text turned by 180 degrees where it would read upside down; result in (-90, 90]. [deg]"""
    a = (np.asarray(angle_deg, dtype=float) + 180.0) % 360.0 - 180.0  # (-180, 180]
    return np.where(a > 90.0, a - 180.0, np.where(a <= -90.0, a + 180.0, a))


def _finite(coords: np.ndarray, layer: str, row) -> np.ndarray:
    if not np.all(np.isfinite(coords)):
        raise ValueError(f"layer {layer!r}: row {row} has coordinates that are not finite numbers; "
                         f"the drawing cannot place it")
    return coords


def _parts(geom) -> list:
    """The LineStrings or Polygons of a (multi-part) geometry; none for a missing or empty one."""
    if geom is None or geom.is_empty:
        return []
    return list(geom.geoms) if geom.geom_type.startswith("Multi") else [geom]


def _ring(coords: np.ndarray) -> tuple[np.ndarray, bool]:
    """Vertices of a line without the repeated last vertex of a closed one, and whether it closes."""
    closed = len(coords) > 2 and np.array_equal(coords[0], coords[-1])
    return (coords[:-1] if closed else coords), closed


# ------------------------------------------------------------------------------------------------- the chainage
def tick_chainages(chainage_m, spacing_m: float, clear_m: float = 0.0) -> np.ndarray:
    """Chainages of the ticks of one drive: its start, every whole multiple of `spacing_m` within it, its end.

    Parameters
    ----------
    chainage_m : array_like  Chainage at the axis vertices, increasing. [m]
    spacing_m : float        Tick spacing, positive. [m]
    clear_m : float          Regular ticks closer than this to the start or end are left out (their labels would
                             overprint the end's). [m]

    Returns
    -------
    ndarray  Increasing chainages. [m]

    Examples
    --------
    >>> tick_chainages([10.0, 111.2], 50.0).tolist()
    [10.0, 50.0, 100.0, 111.2]
    """
    c = np.asarray(chainage_m, dtype=float)
    start, end = float(c[0]), float(c[-1])
    regular = spacing_m * np.arange(math.ceil(start / spacing_m), math.floor(end / spacing_m) + 1)
    regular = regular[(regular - start > max(clear_m, 1e-6)) & (end - regular > max(clear_m, 1e-6))]
    return np.concatenate([[start], regular, [end]]) if end > start else np.array([start])


def plan_directions(axis_xyz_m, chainage_m, at_m) -> np.ndarray:
    """Unit plan tangents (tx, ty) up-chainage at the chainages `at_m`, of the segment that holds each (the later
    one at a vertex, the last at the end). Segments with no length in plan take their neighbour's direction."""
    xy = np.asarray(axis_xyz_m, dtype=float)[:, :2]
    seg = np.diff(xy, axis=0)
    length = np.hypot(seg[:, 0], seg[:, 1])
    good = np.flatnonzero(length > 1e-9)
    if not len(good):
        return np.tile([1.0, 0.0], (len(np.atleast_1d(at_m)), 1))
    # Each segment takes the direction of the nearest segment with a length in plan (itself when it has one).
    nearest = good[np.clip(np.searchsorted(good, np.arange(len(seg))), 0, len(good) - 1)]
    unit = seg[nearest] / length[nearest][:, None]
    k = np.clip(np.searchsorted(np.asarray(chainage_m, dtype=float), np.atleast_1d(at_m), side="right") - 1,
                0, len(seg) - 1)
    return unit[k]


# ---------------------------------------------------------------------------------------------------- document
def _xdata(entity, pairs) -> None:
    """Name/value pairs as extended data under APP_ID: text 1000, real 1040, integer 1071."""
    tags = []
    for name, value in pairs:
        tags.append((1000, name))
        if isinstance(value, (bool, np.bool_, int, np.integer)):
            tags.append((1071, int(value)))
        elif isinstance(value, (float, np.floating)):
            tags.append((1040, float(value)))
        else:
            tags.append((1000, _one_line(value)[:255]))
    entity.set_xdata(APP_ID, tags)


def _linetype(doc, name: str, dash_mm, scale: float) -> str:
    """A linetype from a palette dash pattern (dash, gap, ... on paper [mm]) at 1:scale; its name."""
    if not dash_mm:
        return "Continuous"
    if name not in doc.linetypes:
        pattern = [d * scale / 1000.0 * (1 if k % 2 == 0 else -1) for k, d in enumerate(dash_mm)]
        doc.linetypes.add(name, [sum(abs(p) for p in pattern)] + pattern,
                          description="settle " + " ".join(f"{d:g}" for d in dash_mm) + " mm")
    return name


#: ACI 7, the foreground colour: CAD programs draw it black on a light background and white on a dark one.
FOREGROUND_ACI = 7
#: Palette greys darker than this (relative luminance, 0-1) are drawn in the foreground colour: a near-black true
#: colour (the route, contours, outlines, text) would vanish on the dark model space most CAD programs open with.
#: Only greys: a dark hue (damage category 5) keeps its colour.
DARK_LUMINANCE = 0.1
GREY_SPREAD = 0.1  # a grey: its sRGB channels within this of one another [0-1]


def is_dark(hex_colour: str) -> bool:
    """Whether a palette colour is a near-black grey (sRGB relative luminance below `DARK_LUMINANCE`, IEC 61966-2-1,
    channels within `GREY_SPREAD`)."""
    from .colour import hex_to_srgb, srgb_to_linear

    channels = hex_to_srgb([hex_colour])[0]
    luminance = float(srgb_to_linear(channels) @ (0.2126, 0.7152, 0.0722))
    return luminance < DARK_LUMINANCE and float(np.ptp(channels)) < GREY_SPREAD


def _layer(doc, name: str, colour: str, width_mm: float, linetype: str = "Continuous") -> None:
    """A layer in a palette colour: as a true colour (with the nearest ACI beside it for older readers), or in the
    foreground colour when the palette's is near black."""
    dark = is_dark(colour)
    layer = doc.layers.add(name, color=FOREGROUND_ACI if dark else nearest_aci(colour), linetype=linetype,
                           lineweight=lineweight(width_mm))
    if not dark:
        layer.rgb = rgb(colour)


def _setup(scale: float):
    """A new R2013 drawing in metres with our text style, application id and all our layers."""
    doc = ezdxf.new(DXF_VERSION, setup=False, units=dxf_units.M)
    doc.header["$MEASUREMENT"] = 1  # metric
    doc.header["$LUNITS"] = 2  # decimal
    doc.header["$LWDISPLAY"] = 1  # show line weights
    doc.appids.add(APP_ID)
    doc.styles.add(TEXT_STYLE, font=TEXT_FONT)
    route = SINGLE_SYMBOLS["route"][1]
    contour = SINGLE_SYMBOLS["settlement_lines"][1]
    _layer(doc, ROUTE, route.colour, route.width_mm)
    _layer(doc, ROUTE_TICKS, route.colour, TICK_WIDTH_MM)
    _layer(doc, ROUTE_TEXT, route.colour, TICK_WIDTH_MM)
    _layer(doc, CONTOURS, contour.colour, contour.width_mm)
    _layer(doc, CONTOUR_TEXT, contour.colour, contour.width_mm)
    for cls in damage_style(pd.DataFrame({"category": pd.array([], dtype="Int64")})).classes:
        look = cls.symbol
        # Filled classes: the layer has the fill colour and the outline polylines carry the outline colour. The
        # class not assessed has no fill; its layer has the outline colour and the dashed line.
        colour = look.colour if look.filled else look.outline
        dash = _linetype(doc, "settle_dash_building", look.dash_mm, scale)
        _layer(doc, building_layer(cls.value), colour, look.width_mm, dash)
    for cls in layer_style("utilities", pd.DataFrame({"status_class": np.empty(0, dtype=np.int64)})).classes:
        look = cls.symbol
        dash = _linetype(doc, "settle_dash_" + "_".join(f"{d:g}".replace(".", "p") for d in look.dash_mm),
                         look.dash_mm, scale)
        _layer(doc, utility_layer(pipe_checks.STATUSES[cls.value]), look.colour, look.width_mm, dash)
    _layer(doc, NOTES, NOTES_COLOUR, 0.18)
    return doc


def _text(msp, text: str, at, height_m: float, layer: str, rotation_deg: float = 0.0,
          align: TextEntityAlignment = TextEntityAlignment.MIDDLE_CENTER):
    entity = msp.add_text(_one_line(text), height=height_m, rotation=float(rotation_deg),
                          dxfattribs={"layer": layer, "style": TEXT_STYLE})
    entity.set_placement((float(at[0]), float(at[1])), align=align)
    return entity


def _draw_route(msp, drives, spacing_m: float, text_m: float, tick_half_m: float) -> list[np.ndarray]:
    """Axis polylines, ticks and their labels, drive names; the plan points drawn (for the extents)."""
    drawn = []
    for d in drives:
        xyz = _finite(np.asarray(d.axis_xyz_m, dtype=float), "route", d.name)
        chain = np.asarray(d.chainage_m, dtype=float)
        if xyz.ndim != 2 or xyz.shape[1] != 3 or len(xyz) < 2 or len(chain) != len(xyz):
            raise ValueError(f"drive {d.name!r}: axis_xyz_m must be an (n >= 2) x 3 array with a chainage at each "
                             f"vertex; got shape {xyz.shape} and {len(chain)} chainages")
        axis = msp.add_polyline3d(xyz.tolist(), dxfattribs={"layer": ROUTE})
        _xdata(axis, [("drive", d.name), ("start_chainage_m", float(chain[0])), ("end_chainage_m", float(chain[-1]))])
        at = tick_chainages(chain, spacing_m, TICK_CLEAR_HEIGHTS * text_m)
        where = np.column_stack([np.interp(at, chain, xyz[:, k]) for k in range(2)])
        t = plan_directions(xyz, chain, at)
        left = np.column_stack([-t[:, 1], t[:, 0]])  # looking up-chainage
        ends = np.stack([where - tick_half_m * left, where + tick_half_m * left], axis=1)
        angle = np.degrees(np.arctan2(left[:, 1], left[:, 0]))
        for c, (a, b), p, n, ang in zip(at, ends, where, left, angle):
            msp.add_line(tuple(a), tuple(b), dxfattribs={"layer": ROUTE_TICKS})
            # The label reads along the tick, outward from its left end, turned to read upright.
            flip = abs(upright_deg(ang) - ang) > 1e-9
            align = TextEntityAlignment.MIDDLE_RIGHT if flip else TextEntityAlignment.MIDDLE_LEFT
            _text(msp, chainage_text(c), p + (tick_half_m + 0.5 * text_m) * n, text_m, ROUTE_TEXT,
                  upright_deg(ang), align)
        # The drive's name along its first metres, on the right of the axis (the ticks' labels are on the left).
        heading = float(np.degrees(np.arctan2(t[0, 1], t[0, 0])))
        flip = abs(upright_deg(heading) - heading) > 1e-9
        _text(msp, d.name, where[0] - (tick_half_m + TITLE_PAPER_MM / TEXT_PAPER_MM * text_m) * left[0],
              TITLE_PAPER_MM / TEXT_PAPER_MM * text_m, ROUTE_TEXT, upright_deg(heading),
              TextEntityAlignment.MIDDLE_RIGHT if flip else TextEntityAlignment.MIDDLE_LEFT)
        drawn += [xyz[:, :2], ends.reshape(-1, 2)]
    return drawn


def _label_place(xy: np.ndarray, closed: bool, fraction: float = 0.5) -> tuple[np.ndarray, float]:
    """Point at `fraction` of the length of a line and the direction of the line there, upright. [m], [deg]"""
    pts = np.vstack([xy, xy[:1]]) if closed else xy
    seg = np.diff(pts, axis=0)
    length = np.hypot(seg[:, 0], seg[:, 1])
    if not len(seg) or length.sum() <= 0.0:
        return xy[0], 0.0
    run = np.concatenate([[0.0], np.cumsum(length)])
    target = fraction * run[-1]
    k = min(int(np.searchsorted(run, target, side="right")) - 1, len(seg) - 1)
    k = k if length[k] > 0 else int(np.argmax(length))
    f = (target - run[k]) / length[k]
    return pts[k] + np.clip(f, 0.0, 1.0) * seg[k], float(upright_deg(np.degrees(np.arctan2(seg[k, 1], seg[k, 0]))))


def _draw_contours(msp, frame, levels_mm, text_m: float) -> list[np.ndarray]:
    """Contour polylines at elevation minus the settlement [m], each with its level as text."""
    if frame is None or not len(frame):
        return []
    level = pd.to_numeric(frame["level_mm"]).to_numpy(dtype=float)
    if levels_mm is not None:
        allowed = check_levels(levels_mm, "levels_mm")
        off = ~np.isclose(level[:, None], allowed[None, :], rtol=0.0, atol=1e-9).any(axis=1)
        if off.any():
            raise ValueError(f"layer 'settlement_lines': level {level[off][0]:g} mm is not one of the levels_mm "
                             f"given ({', '.join(f'{v:g}' for v in allowed)} mm)")
    # Each level's labels sit at their own share of the line's length, so the labels of nested rings spread out
    # instead of stacking at one place.
    rank = {v: k for k, v in enumerate(np.unique(level))}
    drawn = []
    for row, (geom, mm) in enumerate(zip(frame.geometry, level)):
        for line in _parts(geom):
            xy, closed = _ring(_finite(shapely.get_coordinates(line), "settlement_lines", row))
            polyline = msp.add_lwpolyline(xy.tolist(), format="xy", close=closed,
                                          dxfattribs={"layer": CONTOURS, "elevation": -mm / 1000.0})
            _xdata(polyline, [("level_mm", float(mm))])
            at, angle = _label_place(xy, closed, (rank[mm] + 0.5) / len(rank))
            rad = np.radians(angle)
            # Beside the line, not on it, so the text does not hide the line it names.
            _text(msp, f"{mm:g} mm", at + 0.8 * text_m * np.array([-np.sin(rad), np.cos(rad)]), text_m,
                  CONTOUR_TEXT, angle)
            drawn.append(xy)
    return drawn


def _categories(frame) -> list:
    """Damage category of each building: an int 0..5, or None when not assessed (checked by `damage_style`)."""
    damage_style(frame, "buildings")
    column = pd.Series(frame["category"])
    return [None if pd.isna(v) else int(v) for v in column]


def _building_rings(polygon, row) -> list[np.ndarray]:
    """Exterior then holes of a polygon, each without its repeated last vertex. [m]"""
    return [_ring(_finite(shapely.get_coordinates(r), "buildings", row))[0]
            for r in [polygon.exterior, *polygon.interiors]]


def _building_ids(frame) -> list[str]:
    return frame["id"].astype(str).tolist() if "id" in frame.columns else [str(k) for k in range(len(frame))]


def _building_fills(frame) -> list[tuple[str, list[np.ndarray], str, int]]:
    """(layer, rings, id, category) of the solid fill of every polygon of a building with a damage category."""
    if frame is None or not len(frame):
        return []
    return [(building_layer(category), _building_rings(polygon, row), ident, category)
            for row, (geom, category, ident) in enumerate(zip(frame.geometry, _categories(frame), _building_ids(frame)))
            if category is not None for polygon in _parts(geom)]


def _draw_buildings(msp, frame) -> list[np.ndarray]:
    """Closed outline polylines of every ring of every building, on the layer of its damage category."""
    if frame is None or not len(frame):
        return []
    outline_hex = damage_style(frame.iloc[:0], "buildings").classes[0].symbol.outline
    outline = None if is_dark(outline_hex) else rgb(outline_hex)  # near black: the foreground colour
    drawn = []
    for row, (geom, category, ident) in enumerate(zip(frame.geometry, _categories(frame), _building_ids(frame))):
        layer = building_layer(category)
        words = NOT_ASSESSED_WORDS if category is None else DAMAGE_WORDS[category]
        for polygon in _parts(geom):
            for ring in _building_rings(polygon, row):
                polyline = msp.add_lwpolyline(ring.tolist(), format="xy", close=True, dxfattribs={"layer": layer})
                if outline is None:
                    polyline.dxf.color = FOREGROUND_ACI
                else:
                    polyline.rgb = outline
                _xdata(polyline, [("id", ident), ("category", -1 if category is None else category),
                                  ("category_label", words)])
                drawn.append(ring)
    return drawn


def _draw_fills(msp, fills) -> None:
    """One solid fill per polygon, in its layer's colour (BYLAYER), holes left open."""
    for layer, rings, ident, category in fills:
        hatch = msp.add_hatch(color=dxf_colors.BYLAYER, dxfattribs={"layer": layer})
        _xdata(hatch, [("id", ident), ("category", category)])
        hatch.paths.add_polyline_path(rings[0].tolist(), is_closed=True, flags=dxf_const.BOUNDARY_PATH_EXTERNAL)
        for hole in rings[1:]:
            hatch.paths.add_polyline_path(hole.tolist(), is_closed=True, flags=dxf_const.BOUNDARY_PATH_DEFAULT)


def _draw_utilities(msp, frame) -> list[np.ndarray]:
    """One polyline per pipe (3-D when the layer has levels) on the layer of its status."""
    if frame is None or not len(frame):
        return []
    layer_style("utilities", frame)  # checks status_class against the vocabulary and the status words
    classes = pd.to_numeric(frame["status_class"]).to_numpy(dtype=np.int64)
    ids = frame["id"].astype(str).tolist() if "id" in frame.columns else [str(k) for k in range(len(frame))]
    drawn = []
    for row, (geom, k, ident) in enumerate(zip(frame.geometry, classes, ids)):
        status = pipe_checks.STATUSES[k]
        for line in _parts(geom):
            xyz = _finite(shapely.get_coordinates(line, include_z=line.has_z), "utilities", row)
            attribs = {"layer": utility_layer(status)}
            entity = (msp.add_polyline3d(xyz.tolist(), dxfattribs=attribs) if line.has_z
                      else msp.add_lwpolyline(xyz.tolist(), format="xy", dxfattribs=attribs))
            _xdata(entity, [("id", ident), ("status", status)])
            drawn.append(xyz[:, :2])
    return drawn


def _notes() -> list[str]:
    """The lines of the notes block: caution, conventions, then every layer and what it holds."""
    lines = [CAUTION,
             ("Coordinates in the project CRS, metres. Settlement positive downward; a contour's elevation is minus "
              "its settlement in metres. Chainage along the 3-D tunnel axis."),
             "Layers:",
             f"{ROUTE}: tunnel axis of each drive (3-D, axis levels)",
             f"{ROUTE_TICKS}, {ROUTE_TEXT}: chainage ticks and labels, drive names",
             f"{CONTOURS}, {CONTOUR_TEXT}: settlement contours and their levels"]
    lines += [f"{building_layer(k)}: buildings, damage category {k} {w} (Burland 1995)"
              for k, w in enumerate(DAMAGE_WORDS)]
    lines += [f"{building_layer(None)}: buildings {NOT_ASSESSED_WORDS}"]
    lines += [f"{utility_layer(s)}: buried utilities, {s}" for s in pipe_checks.STATUSES]
    return lines


def _draw_notes(msp, lines, corner, text_m: float) -> np.ndarray:
    """The notes block downward from `corner` (its top left); its bottom left and top right corners."""
    step = 1.6 * text_m
    for k, line in enumerate(lines):
        _text(msp, line, (corner[0], corner[1] - k * step), text_m, NOTES, 0.0, TextEntityAlignment.TOP_LEFT)
    # Width from the longest line at about 0.6 of the height per character (a rough measure, for the view only).
    width = 0.6 * text_m * max(len(s) for s in lines)
    return np.array([[corner[0], corner[1] - len(lines) * step], [corner[0] + width, corner[1]]])


def dxf_document(layers: dict, drives: list, levels_mm=None, tick_spacing_m: float = 50.0,
                 plot_scale: float = 500.0):
    """The drawing of a run as an ezdxf document (see the module docstring for its layers).

    Parameters
    ----------
    layers : dict           Layer name -> GeoDataFrame, as `gis_out.frames.frames` gives them; `settlement_lines`,
                            `buildings` and `utilities` are drawn when present (other layers are not).
    drives : list           settle.inputs.route.DriveResult of the run (axis_xyz_m, chainage_m, name).
    levels_mm : sequence, optional
                            The run's contour levels [mm]; when given, every contour must be at one of them.
    tick_spacing_m : float  Chainage between ticks, positive. [m]
    plot_scale : float      The drawing is sized for a plot at 1:plot_scale (text, ticks, dashes). [-]

    Returns
    -------
    ezdxf.document.Drawing  Audited: ezdxf's audit found no errors.

    Raises
    ------
    ValueError   For a spacing or scale that is not a positive number, a coordinate that is not finite, a damage
                 category or status outside its classes, or a contour level not in `levels_mm`.
    OutputError  When ezdxf's audit of the finished drawing reports errors.
    """
    for name, value in (("tick_spacing_m", tick_spacing_m), ("plot_scale", plot_scale)):
        if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
                or not np.isfinite(value) or value <= 0:
            raise ValueError(f"{name} must be a positive number; got {value!r}")
    text_m = TEXT_PAPER_MM * plot_scale / 1000.0
    doc = _setup(float(plot_scale))
    msp = doc.modelspace()
    # Fills go first: DXF readers draw in entity order, so every line drawn after them stays visible above them.
    _draw_fills(msp, _building_fills(layers.get("buildings")))
    drawn = []
    drawn += _draw_contours(msp, layers.get("settlement_lines"), levels_mm, text_m)
    drawn += _draw_buildings(msp, layers.get("buildings"))
    drawn += _draw_utilities(msp, layers.get("utilities"))
    drawn += _draw_route(msp, drives, float(tick_spacing_m), text_m, TICK_HALF_PAPER_MM * plot_scale / 1000.0)
    points = np.vstack(drawn) if drawn else np.zeros((1, 2))
    low, high = points.min(axis=0), points.max(axis=0)
    box = _draw_notes(msp, _notes(), (low[0], low[1] - 3.0 * text_m), text_m)
    low, high = np.minimum(low, box.min(axis=0)), np.maximum(high, box.max(axis=0))
    # ezdxf copies the modelspace's extents into $EXTMIN / $EXTMAX when it writes the file.
    levels = [] if layers.get("settlement_lines") is None else pd.to_numeric(layers["settlement_lines"]["level_mm"])
    z = np.concatenate([[0.0], -np.asarray(levels, dtype=float) / 1000.0,
                        *[np.asarray(d.axis_xyz_m, dtype=float)[:, 2] for d in drives]])
    msp.dxf.extmin = (float(low[0]), float(low[1]), float(z.min()))
    msp.dxf.extmax = (float(high[0]), float(high[1]), float(z.max()))
    doc.set_modelspace_vport(height=float(max(high[1] - low[1], (high[0] - low[0]) * 0.6, 1.0)) * 1.1,
                             center=(float(low[0] + high[0]) / 2.0, float(low[1] + high[1]) / 2.0))
    auditor = doc.audit()
    if auditor.has_errors:
        raise OutputError(f"DXF drawing failed ezdxf's audit: {[str(e.message) for e in auditor.errors[:3]]}")
    return doc


def write_dxf(path, layers: dict, drives: list, levels_mm=None, tick_spacing_m: float = 50.0,
              plot_scale: float = 500.0) -> Path:
    """Write a run's drawing as DXF R2013, replacing any earlier file at `path` in one atomic step.

    The drawing (`dxf_document`) is built and audited in memory, then written through a temporary file in the same
    folder, flushed to disk and renamed over `path` (`write_text_atomic`): a failed write leaves an earlier file
    as it was.

    Parameters
    ----------
    path : str or Path      The .dxf file; its folder must exist.
    layers, drives, levels_mm, tick_spacing_m, plot_scale
                            As for `dxf_document`. [m], [mm], [-]

    Returns
    -------
    Path  The absolute path written.

    Raises
    ------
    OutputError  When the name does not end in .dxf, the folder is missing, or the audit reports errors.
    ValueError   As for `dxf_document`.
    """
    if not os.fspath(path).lower().endswith(".dxf"):
        raise OutputError(f"{os.path.abspath(os.fspath(path))}: output file name must end in .dxf; got "
                          f"{os.path.basename(os.fspath(path))!r}")
    with _fixed_metadata():
        doc = dxf_document(layers, drives, levels_mm, tick_spacing_m, plot_scale)
        classes = doc.classes
        classes.export_dxf = functools.partial(_export_classes_in_order, classes)
        stream = io.StringIO()
        doc.write(stream)
    return write_text_atomic(path, stream.getvalue(), encoding=doc.output_encoding)


def _export_classes_in_order(section, tagwriter) -> None:
    """The CLASSES section sorted by class name: ezdxf adds the required classes in the order of a set, which changes
    from one process to the next (string hashing), and the same inputs must give the same bytes."""
    section.classes = collections.OrderedDict(sorted(section.classes.items()))
    type(section).export_dxf(section, tagwriter)


@contextlib.contextmanager
def _fixed_metadata():
    """The same inputs give the same bytes: ezdxf's fixed creation and update times, GUIDs and marker for this
    drawing (its own switch for reproducible files), set back as it was afterwards."""
    before = ezdxf.options.write_fixed_meta_data_for_testing
    ezdxf.options.write_fixed_meta_data_for_testing = True
    try:
        yield
    finally:
        ezdxf.options.write_fixed_meta_data_for_testing = before
