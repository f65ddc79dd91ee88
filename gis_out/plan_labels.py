"""Labels on the plan: which features get one, and where each label goes so that labels do not cover each other.

Placement is greedy and deterministic: labels are placed in a fixed order (most severe first, then by text), and
each takes the first of a fixed list of positions around its anchor (four diagonals, then above, below, right
and left, at growing distances) whose box stays inside the map and clear of the boxes already taken (earlier
labels, the texts already on the map, the scale bar, and a small square around every anchor). A label that finds
no clear place takes the position overlapping least. A thin leader line joins every label to its anchor, so a
label set off its feature still points at it. Texts are drawn literally (`parse_math=False`).
"""
from __future__ import annotations

from dataclasses import dataclass

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from matplotlib.transforms import Bbox

#: Font size of the labels on the plan. [pt]
LABEL_PT = 7.0
#: Distances from the anchor tried for a label, nearest first. [pt] (our choice)
RINGS_PT = (8.0, 16.0, 26.0, 38.0, 52.0)
#: Directions tried at each distance, in this order: the four diagonals, then above, below, right, left.
DIRECTIONS = ((1, 1), (1, -1), (-1, 1), (-1, -1), (0, 1), (0, -1), (1, 0), (-1, 0))
#: Half the side of the square kept clear around every anchor. [pt]
ANCHOR_CLEAR_PT = 3.0
#: Padding of a label's white box. [pt]
BOX_PAD_PT = 1.5


@dataclass
class Label:
    """A label to place: its text, its anchor in map coordinates [m], its colour and its rank (lower first)."""

    text: str
    x: float
    y: float
    colour: str = "black"
    rank: int = 0
    style: str = "normal"


# ------------------------------------------------------------------------------------------- what gets a label
def worst_category(buildings: gpd.GeoDataFrame) -> np.ndarray:
    """The larger of `category` and `worst_category` (when the layer has it) per building; -1 where both are NULL."""
    cat = pd.to_numeric(buildings["category"], errors="coerce").to_numpy(float)
    if "worst_category" in buildings:
        worst = pd.to_numeric(buildings["worst_category"], errors="coerce").to_numpy(float)
        cat = np.fmax(cat, worst)
    return np.nan_to_num(cat, nan=-1.0).astype(np.int64)


def building_labels(buildings: gpd.GeoDataFrame | None, view: tuple) -> list[Label]:
    """A label with its id for every building in damage category 1 or more (see `worst_category`) whose anchor (a
    point on its surface) lies in the map's view (minx, miny, maxx, maxy) [m]. A building whose worst category over
    the construction sequence is above its category at this stage says so. None: no buildings layer."""
    if buildings is None or buildings.empty or "category" not in buildings:
        return []
    worst = worst_category(buildings)
    now = pd.to_numeric(buildings["category"], errors="coerce").fillna(-1).to_numpy().astype(np.int64)
    out = []
    for k in np.flatnonzero(worst >= 1):
        p = shapely.point_on_surface(buildings.geometry.iloc[k])
        if not _in_view(p, view):
            continue
        text = str(buildings["id"].iloc[k])
        if worst[k] > now[k]:
            text += f" (worst cat. {worst[k]})"
        out.append(Label(text, p.x, p.y, "black", rank=-int(worst[k])))
    return out


def utility_labels(pipes: gpd.GeoDataFrame | None, view: tuple) -> list[Label]:
    """A label with its id for every pipe whose `status` (or `worst_status`, when the layer has it) is not
    "within limits", anchored at the middle of its part in the map's view (minx, miny, maxx, maxy) [m], in the
    colour the pipe is drawn in (`gis_out.styles`). A pipe whose worst status differs from its status now says so.
    None: no utilities layer."""
    if pipes is None or pipes.empty or "status" not in pipes:
        return []
    from settle.assessments.utilities import STATUSES, WITHIN

    from .styles import layer_style

    severity = {s: k for k, s in enumerate(STATUSES)}
    colours = {STATUSES[c.value]: c.symbol.colour for c in layer_style("utilities", pipes).classes
               if 0 <= c.value < len(STATUSES)}
    now = pipes["status"].fillna("").astype(str).to_numpy()
    worst = pipes["worst_status"].fillna("").astype(str).to_numpy() if "worst_status" in pipes else now
    box = shapely.box(*view)
    out = []
    for k in range(len(pipes)):
        if now[k] == WITHIN and worst[k] in (WITHIN, ""):
            continue
        inside = pipes.geometry.iloc[k].intersection(box)
        if inside.is_empty or inside.length <= 0:
            continue
        longest = max(shapely.get_parts(inside), key=lambda g: g.length)
        p = longest.interpolate(0.5, normalized=True)
        text = str(pipes["id"].iloc[k])
        if worst[k] and worst[k] != now[k]:
            text += f" (worst: {worst[k]})"
        rank = -max(severity.get(now[k], 0), severity.get(worst[k], 0))
        out.append(Label(text, p.x, p.y, colours.get(now[k], "black"), rank=rank))
    return out


def _in_view(p, view) -> bool:
    return view[0] <= p.x <= view[2] and view[1] <= p.y <= view[3]


# ------------------------------------------------------------------------------------------------ placement
def place_labels(ax, labels: list[Label], obstacles=(), fontsize: float = LABEL_PT) -> list:
    """Draw the labels on the map axes where they do not overlap (see the module docstring).

    Call it once the map's limits and the axes' place in the figure are final.

    Parameters
    ----------
    ax : Axes                     The map (data in m).
    labels : list of Label        The labels; placed in the order (rank, text).
    obstacles : iterable of Bbox  Boxes in display units labels should keep clear of (besides the axes' texts).
    fontsize : float              [pt]

    Returns
    -------
    list  The annotations drawn, in the order placed.
    """
    fig = ax.figure
    renderer = fig.canvas.get_renderer()
    px = fig.dpi / 72.0  # display units per point
    frame = ax.get_window_extent(renderer)
    fixed = [b.extents for b in obstacles] + [t.get_window_extent(renderer).extents for t in ax.texts
                                              if t.get_visible() and t.get_text()]
    ordered = sorted(labels, key=lambda lab: (lab.rank, lab.text))
    anchors = ax.transData.transform([(lab.x, lab.y) for lab in ordered]) if ordered else np.empty((0, 2))
    clear = ANCHOR_CLEAR_PT * px
    # Boxes as rows (x0, y0, x1, y1): the fixed ones, every anchor's square, then each label as it is placed.
    taken = np.vstack([np.reshape(fixed, (-1, 4)), np.hstack([anchors - clear, anchors + clear])])
    first_anchor = len(fixed)
    drawn = []
    for k, (lab, (ax_x, ax_y)) in enumerate(zip(ordered, anchors)):
        w, h = _text_size(fig, renderer, lab.text, fontsize, lab.style)
        others = np.delete(taken, first_anchor + k, axis=0)  # its own anchor does not count
        offset, box = _best_position(ax_x, ax_y, w, h, px, frame, others)
        taken = np.vstack([taken, box.extents])
        dx, dy = offset
        drawn.append(ax.annotate(
            lab.text, (lab.x, lab.y), xytext=(dx, dy), textcoords="offset points", fontsize=fontsize,
            ha="left" if dx > 0 else "right" if dx < 0 else "center",
            va="bottom" if dy > 0 else "top" if dy < 0 else "center", color=lab.colour, style=lab.style,
            zorder=9, parse_math=False, annotation_clip=False,
            bbox=dict(boxstyle=f"square,pad={BOX_PAD_PT / fontsize:.3f}", fc="white", ec="none", alpha=0.85),
            arrowprops=dict(arrowstyle="-", lw=0.5, color="0.25", shrinkA=0, shrinkB=1.5)))
    return drawn


def _text_size(fig, renderer, text: str, fontsize: float, style: str = "normal") -> tuple[float, float]:
    """Width and height of a text in display units."""
    probe = fig.text(0, 0, text, fontsize=fontsize, style=style, parse_math=False)
    try:
        box = probe.get_window_extent(renderer)
    finally:
        probe.remove()
    return box.width, box.height


def _candidate(ax_x: float, ax_y: float, w: float, h: float, dx: float, dy: float, px: float) -> Bbox:
    """The box (with its white padding) of a text of size (w, h) [display units] set off (dx, dy) [pt] from its
    anchor, aligned away from it."""
    x = ax_x + dx * px
    y = ax_y + dy * px
    x0 = x if dx > 0 else x - w if dx < 0 else x - 0.5 * w
    y0 = y if dy > 0 else y - h if dy < 0 else y - 0.5 * h
    pad = BOX_PAD_PT * px
    return Bbox.from_extents(x0 - pad, y0 - pad, x0 + w + pad, y0 + h + pad)


def _best_position(ax_x, ax_y, w, h, px, frame: Bbox, others: np.ndarray) -> tuple[tuple[float, float], Bbox]:
    """The first clear candidate inside the frame, else the one overlapping least: ((dx, dy) [pt], its box).
    `others`: the boxes to keep clear of, as rows (x0, y0, x1, y1) in display units."""
    best = None
    for ring in RINGS_PT:
        for ux, uy in DIRECTIONS:
            scale = 1.0 if ux and uy else 1.3  # straight up or across: a little farther, clear of the feature
            dx, dy = ux * ring * scale, uy * ring * scale * (0.8 if ux else 1.0)
            box = _candidate(ax_x, ax_y, w, h, dx, dy, px)
            if not _inside(box, frame):
                continue
            cover = float(np.sum(_overlaps_with(box, others)))
            if cover == 0.0:
                return (dx, dy), box
            if best is None or cover < best[0]:
                best = (cover, (dx, dy), box)
    if best is None:  # no candidate inside the map (a map smaller than the label): up and right
        box = _candidate(ax_x, ax_y, w, h, RINGS_PT[0], RINGS_PT[0], px)
        return (RINGS_PT[0], RINGS_PT[0]), box
    return best[1], best[2]


def _inside(box: Bbox, frame: Bbox) -> bool:
    return box.x0 >= frame.x0 and box.y0 >= frame.y0 and box.x1 <= frame.x1 and box.y1 <= frame.y1


def _overlaps_with(box: Bbox, others: np.ndarray) -> np.ndarray:
    """The area a box shares with each of the boxes given as rows (x0, y0, x1, y1). [display units squared]"""
    w = np.minimum(box.x1, others[:, 2]) - np.maximum(box.x0, others[:, 0])
    h = np.minimum(box.y1, others[:, 3]) - np.maximum(box.y0, others[:, 1])
    return np.where((w > 0) & (h > 0), w * h, 0.0)


def _overlap(a: Bbox, b: Bbox) -> float:
    """The area two boxes share. [display units squared]"""
    w = min(a.x1, b.x1) - max(a.x0, b.x0)
    h = min(a.y1, b.y1) - max(a.y0, b.y0)
    return w * h if w > 0 and h > 0 else 0.0


def overlaps(boxes: list) -> list[tuple[int, int, float]]:
    """(i, j, area shared) for every pair of boxes that overlap. [display units squared]"""
    out = []
    for i in range(len(boxes)):
        for j in range(i + 1, len(boxes)):
            area = _overlap(boxes[i], boxes[j])
            if area > 0:
                out.append((i, j, area))
    return out
