"""Superposition of tunnel elements: movements at given places and on the project grid.

Cost. Each element's settlement falls below the run's precision beyond its reach radius
c = i sqrt(2 ln(Smax / precision)) (`Elements.reach_radius_m`), so on the grid it is evaluated only at the nodes of
the rectangle within c of its length, found row by row (no candidate nodes are generated outside it). The work grows
with the area that moves, summed over elements, not with grid nodes x elements; results are accumulated into square
tiles, and only tiles that an element reaches exist.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..inputs.ground import GroundModel
from .elements import Elements
from .movements import Movements, SettlementTiles
from .troughs import straight_tunnel_movements, straight_tunnel_movements_to_faces, subsurface_width_ratio

FIELDS = ("settlement", "ux", "uy", "exx", "eyy", "exy", "sx", "sy")
TILE_SIZE = 128
PAIRS_PER_BATCH = 400_000


def strains_in(fields) -> bool:
    return any(f in fields for f in ("exx", "eyy", "exy"))


def _element_movements(elements: Elements, e: np.ndarray, x, y, trough_width, axis_depth, length=None,
                       fields=FIELDS) -> dict:
    """Movements of elements `e` at points (x, y), in project axes, each element `length` long from its start (its
    plan length when None): the `fields` asked for (names of FIELDS). Metres and strains as fractions."""
    c = elements.direction[e]
    dx = x - elements.start_xy[e, 0]
    dy = y - elements.start_xy[e, 1]
    cx, cy = c[:, 0], c[:, 1]
    u = dx * cx + dy * cy
    v = -dx * cy + dy * cx
    strains = strains_in(fields)
    m = straight_tunnel_movements(
        u, v, elements.plan_length_m[e] if length is None else length, elements.volume_per_m[e], trough_width,
        axis_depth, strains=strains
    )
    out = {"settlement": m["settlement"]}
    if "ux" in fields or "uy" in fields:
        out["ux"] = m["du"] * cx - m["dv"] * cy
        out["uy"] = m["du"] * cy + m["dv"] * cx
    if "sx" in fields or "sy" in fields:
        out["sx"] = m["slope_u"] * cx - m["slope_v"] * cy
        out["sy"] = m["slope_u"] * cy + m["slope_v"] * cx
    if strains:
        cxx, cyy, cxy = cx * cx, cy * cy, cx * cy
        euu, evv, euv = m["strain_uu"], m["strain_vv"], m["strain_uv"]
        out["exx"] = cxx * euu - 2.0 * cxy * euv + cyy * evv
        out["eyy"] = cyy * euu + 2.0 * cxy * euv + cxx * evv
        out["exy"] = cxy * (euu - evv) + (cxx - cyy) * euv
    return out


def _to_movements(x, y, depth, sums: dict) -> Movements:
    return Movements(
        x_m=x,
        y_m=y,
        depth_m=depth,
        settlement_mm=sums["settlement"] * 1e3,
        ux_mm=sums["ux"] * 1e3,
        uy_mm=sums["uy"] * 1e3,
        strain_xx_ue=sums["exx"] * 1e6,
        strain_yy_ue=sums["eyy"] * 1e6,
        strain_xy_ue=sums["exy"] * 1e6,
        slope_x=sums["sx"],
        slope_y=sums["sy"],
    )


def _distance_to_element(elements: Elements, e: np.ndarray, x, y) -> np.ndarray:
    """Plan distance from points to the axis of elements `e`. [m]"""
    dx = x - elements.start_xy[e, 0]
    dy = y - elements.start_xy[e, 1]
    c = elements.direction[e]
    u = dx * c[:, 0] + dy * c[:, 1]
    v = -dx * c[:, 1] + dy * c[:, 0]
    beyond = np.maximum(np.maximum(-u, u - elements.plan_length_m[e]), 0.0)
    return np.hypot(beyond, v)


def _pairs_within(elements: Elements, radius: np.ndarray, x: np.ndarray, y: np.ndarray, batch: int):
    """Yield batches of (place, element) index pairs with the place within `radius` of the element's axis.

    Places are binned into square cells; the cells near each element's rectangle are found row by row with the same
    rasterisation as the grid, and since a row's cells are consecutive keys, their places are one slice of the
    places sorted by cell. Fully vectorised; each batch holds about `batch` candidate pairs.
    """
    if not len(x) or not len(elements):
        return
    cell = max(float(np.median(radius)), 1.0)
    x0, y0 = x.min(), y.min()
    col = np.floor((x - x0) / cell).astype(np.int64)
    row = np.floor((y - y0) / cell).astype(np.int64)
    across = int(col.max()) + 1
    key = row * across + col
    order = np.argsort(key, kind="stable")
    sorted_key = key[order]
    # Rectangles grown by half a cell diagonal, rasterised on the cell centres: every cell they touch.
    corners = influence_corners(elements, None, radius + cell * np.sqrt(0.5))
    owner, rows, x_min, x_max = _rows_in_rectangles(corners - [x0 + cell / 2, y0 + cell / 2], 0.0, cell)
    c0 = np.maximum(np.ceil(x_min / cell), 0).astype(np.int64)
    c1 = np.minimum(np.floor(x_max / cell), across - 1).astype(np.int64)
    ok = (c1 >= c0) & (rows >= 0) & (rows <= row.max())
    owner, rows, c0, c1 = owner[ok], rows[ok], c0[ok], c1[ok]
    lo = np.searchsorted(sorted_key, rows * across + c0, side="left")
    hi = np.searchsorted(sorted_key, rows * across + c1, side="right")
    count = hi - lo
    group = np.floor(np.cumsum(count) / batch).astype(np.int64)
    for g in np.unique(group):
        sel = group == g
        n_sel = count[sel]
        run = np.repeat(np.arange(n_sel.size), n_sel)
        at = np.repeat(lo[sel] - (np.cumsum(n_sel) - n_sel), n_sel) + np.arange(run.size)
        p = order[at]
        e = owner[sel][run]
        keep = _distance_to_element(elements, e, x[p], y[p]) < radius[e]
        yield p[keep], e[keep]


def movements_at_points(elements: Elements, ground: GroundModel, x, y, depth, precision_m: float = 1e-6,
                        faces_m=None, face_drive: int | None = None) -> Movements:
    """Movements at places, each at its own depth below the ground surface (0 = at the surface).

    Each element is evaluated at the places within its reach radius (beyond, its surface settlement is below
    `precision_m`), so the cost grows with the places that move, not with places x elements. Below the surface the
    trough narrows with depth (`troughs.subsurface_width_ratio`) and keeps its volume, so Smax(z) = Vs / (sqrt(2 pi)
    i(z)). Places at or below the crown of an element that reaches them get NaN: the subsurface relations do not hold
    there.

    With `faces_m` (one chainage per place) the elements of drive `face_drive` count at each place only as far as that
    place's face: each such element is cut there (none of it beyond the face), as if the drive were excavated to it.
    One call then gives every place the movements of its own construction stage. [m]
    """
    x, y, depth = (np.asarray(a, dtype=float) for a in (x, y, depth))
    n = len(x)
    sums = {f: np.zeros(n) for f in FIELDS}
    below_crown = np.zeros(n, dtype=bool)
    reach = elements.reach_radius_m(precision_m)
    # At several faces the same place comes once per face: its elements are found once.
    search = _pairs_within if faces_m is None else _pairs_of_copies
    for p, e in search(elements, reach, x, y, 2 * PAIRS_PER_BATCH):
        length = None
        if faces_m is not None:
            p, e, length = _cut_at_faces(elements, p, e, np.asarray(faces_m, dtype=float), face_drive)
        deep, i, below = _at_depth(elements, ground, e, depth[p])
        below_crown[p[deep]] = True
        mov = _element_movements(elements, e, x[p], y[p], i, below, length)
        for f in FIELDS:
            sums[f] += np.bincount(p, weights=mov[f], minlength=n)
    for f in FIELDS:
        sums[f][below_crown] = np.nan
    return _to_movements(x, y, depth, sums)


#: The fields the building assessment reads (settlement, horizontal displacements and slopes).
BUILDING_FIELDS = ("settlement", "ux", "uy", "sx", "sy")


def movements_at_stages(elements: Elements, ground: GroundModel, x, y, depth, faces_m, first, count,
                        face_drive: int, precision_m: float = 1e-6, fields=FIELDS, rows=None) -> Movements:
    """Movements at places over runs of construction stages of drive `face_drive`, in one evaluation.

    Place q is wanted at the stages first[q], ..., first[q] + count[q] - 1 of the drive, whose faces are at the
    chainages `faces_m` [m]. Row start[q] + j of the result (start = cumsum(count) - count: place by place, stage
    by stage), or rows[start[q] + j] when `rows` (a permutation) is given, holds place q at stage first[q] + j, as
    `movements_at_points` with that face would give it: the elements of `face_drive` cut at the face, the others
    whole. The elements near a place are found once for all its stages; the other drives' elements are evaluated
    once per place and added to each stage, and an element of the drive is evaluated once per place for all the
    stages whose face lies beyond its end. Fields not in `fields` (names of FIELDS) are NaN, and so are the
    positions of the rows (x_m, y_m, depth_m) when `rows` is given.
    """
    x, y, depth = (np.asarray(a, dtype=float) for a in (x, y, depth))
    faces_m = np.asarray(faces_m, dtype=float)
    first, count = np.asarray(first, dtype=np.int64), np.asarray(count, dtype=np.int64)
    n, n_rows = len(x), int(count.sum())
    start = np.cumsum(count) - count
    layout = np.arange(n_rows) if rows is None else np.asarray(rows, dtype=np.int64)
    whole = {f: np.zeros(n) for f in fields}  # the other drives, per place
    sums = {f: np.zeros(n_rows) for f in fields}  # the drive, per place and stage
    place_below, row_below = np.zeros(n, dtype=bool), np.zeros(n_rows, dtype=bool)
    reach = elements.reach_radius_m(precision_m)
    batch = max(1, 2 * PAIRS_PER_BATCH // max(1, int(count.max(initial=1))))
    others = False
    for q, e in _pairs_within(elements, reach, x, y, batch):
        q, e = q[count[q] > 0], e[count[q] > 0]
        own = elements.drive[e] == face_drive
        if not own.all():
            others = True
            _add_whole(elements, ground, q[~own], e[~own], x, y, depth, whole, place_below, n)
        _add_stages(elements, ground, q[own], e[own], x, y, depth, faces_m, first, count, start, layout, sums,
                    row_below)
    place_of_row = np.empty(n_rows, dtype=np.int64)
    place_of_row[layout] = np.repeat(np.arange(n), count)
    if others:
        row_below |= place_below[place_of_row]
        for f in fields:
            sums[f] += whole[f][place_of_row]
    absent = np.broadcast_to(np.nan, n_rows)
    scale = {"settlement": 1e3, "ux": 1e3, "uy": 1e3, "exx": 1e6, "eyy": 1e6, "exy": 1e6, "sx": 1.0, "sy": 1.0}
    for f in fields:
        sums[f] *= scale[f]
        sums[f][row_below] = np.nan
    out = {f: sums.get(f, absent) for f in FIELDS}
    where = (x[place_of_row], y[place_of_row], depth[place_of_row]) if rows is None else (absent,) * 3
    return Movements(*where, out["settlement"], out["ux"], out["uy"], out["exx"], out["eyy"], out["exy"], out["sx"],
                     out["sy"])


def _add_whole(elements, ground, q, e, x, y, depth, sums, below_crown, n):
    """Add the movements of whole elements `e` at places `q` to `sums` (per place)."""
    deep, i, zr = _at_depth(elements, ground, e, depth[q])
    below_crown[q[deep]] = True
    mov = _element_movements(elements, e, x[q], y[q], i, zr, fields=tuple(sums))
    for f in sums:
        sums[f] += np.bincount(q, weights=mov[f], minlength=n)


def _add_stages(elements, ground, q, e, x, y, depth, faces_m, first, count, start, layout, sums, below_crown):
    """Add the movements of the elements `e` of the drive at places `q`, at each of the place's stages, to `sums`
    (per row, placed by `layout`): cut at the face where it lies within the element, whole (evaluated once) where
    it lies beyond."""
    k = count[q]
    pair = np.repeat(np.arange(len(q)), k)
    j = np.arange(pair.size) - np.repeat(np.cumsum(k) - k, k)
    row = layout[start[q][pair] + j]
    face = faces_m[first[q][pair] + j]
    span = elements.chainage_to_m[e] - elements.chainage_from_m[e]
    share = np.clip((face - elements.chainage_from_m[e][pair]) / np.maximum(span, 1e-12)[pair], 0.0, 1.0)
    deep, i, zr = _at_depth(elements, ground, e, depth[q])
    n_rows = len(below_crown)
    fields = tuple(sums)
    # the face beyond the element: one evaluation per place, added to each such stage
    full = share >= 1.0
    if full.any():
        once = np.bincount(pair[full], minlength=len(q)) > 0
        mov = _element_movements(elements, e[once], x[q[once]], y[q[once]], i[once], zr[once], fields=fields)
        slot = np.cumsum(once) - 1
        below_crown[row[full & deep[pair]]] = True
        for f in fields:
            sums[f] += np.bincount(row[full], weights=mov[f][slot[pair[full]]], minlength=n_rows)
    # the face within the element: the length excavated up to it
    part = (share > 0.0) & ~full
    p = pair[part]
    below_crown[row[part & deep[pair]]] = True
    if strains_in(fields):
        mov = _element_movements(elements, e[p], x[q[p]], y[q[p]], i[p], zr[p],
                                 length=elements.plan_length_m[e[p]] * share[part], fields=fields)
    else:
        mov = _element_movements_to_faces(elements, e, x[q], y[q], i, zr, p,
                                          elements.plan_length_m[e[p]] * share[part])
    for f in fields:
        sums[f] += np.bincount(row[part], weights=mov[f], minlength=n_rows)


def _element_movements_to_faces(elements: Elements, e, x, y, trough_width, axis_depth, pair, length) -> dict:
    """Settlement, horizontal displacement and slope (`_element_movements`) of elements `e` at points (x, y), each
    pair at several excavated lengths: row r is pair `pair[r]` with its element `length[r]` long."""
    c = elements.direction[e]
    dx = x - elements.start_xy[e, 0]
    dy = y - elements.start_xy[e, 1]
    cx, cy = c[:, 0], c[:, 1]
    m = straight_tunnel_movements_to_faces(dx * cx + dy * cy, -dx * cy + dy * cx, elements.volume_per_m[e],
                                           trough_width, axis_depth, pair, length)
    cx, cy = cx[pair], cy[pair]
    return {"settlement": m["settlement"], "ux": m["du"] * cx - m["dv"] * cy, "uy": m["du"] * cy + m["dv"] * cx,
            "sx": m["slope_u"] * cx - m["slope_v"] * cy, "sy": m["slope_u"] * cy + m["slope_v"] * cx}


def _at_depth(elements: Elements, ground: GroundModel, e: np.ndarray, depth: np.ndarray):
    """For (place, element) pairs at places `depth` below the surface: whether the place is at or below the
    element's crown, the trough width there i(z) [m] and the axis depth below the place z0 - z [m] (taken at the
    surface for places below the crown, whose movements are then left undefined)."""
    z0 = elements.axis_depth_m[e]
    deep = depth >= z0 - elements.outer_diameter_m[e] / 2.0
    d_ok = np.where(deep, 0.0, depth)
    share = ground.cohesive_fraction(elements.surface_level_m[e] - d_ok, elements.axis_level_m[e])
    return deep, elements.trough_width_m[e] * subsurface_width_ratio(d_ok, z0, share), z0 - d_ok


def tilt_bound_at_points(elements: Elements, ground: GroundModel, x, y, depth, precision_m: float = 1e-6):
    """An upper bound of the ground slope at places over every construction stage of these elements: whatever
    length of each element is excavated, its slope there is at most (S(v)/i) sqrt(phi(0)^2 + v^2/i^2), with S(v)
    the plane-strain settlement of the element at the place's offset v, i the trough width there and phi(0) =
    1/sqrt(2 pi) the largest slope of the longitudinal (cumulative normal) profile; the slopes of the elements add at
    most up to the sum of these. NaN at places at or below a crown. [-]

    References
    ----------
    Attewell, P. B. & Woodman, J. P. (1982). Predicting the dynamics of ground settlement and its derivatives caused
    by tunnelling in soil. Ground Engineering 15(8), 13-22 (the cumulative normal longitudinal profile; from memory).
    """
    x, y, depth = (np.asarray(a, dtype=float) for a in (x, y, depth))
    bound = np.zeros(len(x))
    below_crown = np.zeros(len(x), dtype=bool)
    reach = elements.reach_radius_m(precision_m)
    for p, e in _pairs_within(elements, reach, x, y, 2 * PAIRS_PER_BATCH):
        deep, i, _ = _at_depth(elements, ground, e, depth[p])
        below_crown[p[deep]] = True
        v = -(x[p] - elements.start_xy[e, 0]) * elements.direction[e, 1] + \
            (y[p] - elements.start_xy[e, 1]) * elements.direction[e, 0]
        plane = elements.volume_per_m[e] / (np.sqrt(2.0 * np.pi) * i) * np.exp(-0.5 * (v / i) ** 2)
        bound += np.bincount(p, weights=plane / i * np.sqrt(1.0 / (2.0 * np.pi) + (v / i) ** 2), minlength=len(x))
    bound[below_crown] = np.nan
    return bound


def _pairs_of_copies(elements: Elements, reach: np.ndarray, x: np.ndarray, y: np.ndarray, batch: int):
    """`_pairs_within` for places that repeat (one place at several construction stages): the elements near each
    distinct place are found once, and each pair is handed on for every copy of the place."""
    copies = np.lexsort((y, x))  # copies of a place side by side (a float sort: fast, unlike unique on rows)
    new = np.r_[True, (np.diff(x[copies]) != 0) | (np.diff(y[copies]) != 0)] if len(x) else np.empty(0, bool)
    starts = np.flatnonzero(new)
    count = np.diff(np.r_[starts, len(x)])
    places_x, places_y = x[copies[starts]], y[copies[starts]]
    for q, e in _pairs_within(elements, reach, places_x, places_y, max(1, batch // max(1, int(count.max(initial=1))))):
        k = count[q]
        p = copies[np.repeat(starts[q], k) + (np.arange(k.sum()) - np.repeat(np.cumsum(k) - k, k))]
        yield p, np.repeat(e, k)


def _cut_at_faces(elements: Elements, p: np.ndarray, e: np.ndarray, faces_m: np.ndarray, face_drive):
    """The (place, element) pairs that count with each place's face, and the plan length of each element that does:
    elements of `face_drive` in proportion to the chainage excavated up to the face, the others whole. [m]"""
    own = elements.drive[e] == face_drive
    span = elements.chainage_to_m[e] - elements.chainage_from_m[e]
    share = np.where(own, np.clip((faces_m[p] - elements.chainage_from_m[e]) / np.maximum(span, 1e-12), 0.0, 1.0),
                     1.0)
    keep = share > 0.0
    return p[keep], e[keep], (elements.plan_length_m[e] * share)[keep]


def _rows_in_rectangles(corners: np.ndarray, origin_y: float, h: float):
    """Grid rows crossing each convex quadrilateral, with the x-range of the quadrilateral on each row.

    corners: (n, 4, 2) in order around each quadrilateral. Returns (owner, row, x_min, x_max).
    """
    ys = corners[:, :, 1]
    r0 = np.ceil((ys.min(axis=1) - origin_y) / h).astype(np.int64)
    r1 = np.floor((ys.max(axis=1) - origin_y) / h).astype(np.int64)
    count = np.maximum(r1 - r0 + 1, 0)
    owner = np.repeat(np.arange(len(corners)), count)
    first = np.repeat(np.cumsum(count) - count, count)
    row = r0[owner] + (np.arange(owner.size) - first)
    y = origin_y + row * h
    x_min = np.full(owner.size, np.inf)
    x_max = np.full(owner.size, -np.inf)
    for k in range(4):
        a, b = corners[owner, k], corners[owner, (k + 1) % 4]
        dy = b[:, 1] - a[:, 1]
        lo, hi = np.minimum(a[:, 1], b[:, 1]), np.maximum(a[:, 1], b[:, 1])
        crosses = (y >= lo) & (y <= hi) & (dy != 0.0)
        t = np.where(crosses, (y - a[:, 1]) / np.where(dy == 0.0, 1.0, dy), 0.0)
        xc = a[:, 0] + t * (b[:, 0] - a[:, 0])
        x_min = np.where(crosses, np.minimum(x_min, xc), x_min)
        x_max = np.where(crosses, np.maximum(x_max, xc), x_max)
    return owner, row, x_min, x_max


def influence_corners(elements: Elements, precision_m: float | None, radius_m: np.ndarray | None = None) -> np.ndarray:
    """Corners (n, 4, 2) of the rectangle around each element outside which it settles less than the precision.

    `radius_m`, when given, is the distance from the axis instead of the element's reach radius.
    """
    c = (elements.reach_radius_m(precision_m) if radius_m is None else np.asarray(radius_m))[:, None]
    d = elements.direction
    nrm = np.column_stack([-d[:, 1], d[:, 0]])
    s = elements.start_xy
    e = s + d * elements.plan_length_m[:, None]
    return np.stack([s - d * c - nrm * c, e + d * c - nrm * c, e + d * c + nrm * c, s - d * c + nrm * c], axis=1)


@dataclass(frozen=True)
class GridFrame:
    """Where the grid lies: its spacing, its origin (the lower left node) and the tiles across it. [m]"""

    spacing_m: float
    origin_x_m: float
    origin_y_m: float
    tiles_across: int


def grid_batches(elements: Elements, spacing_m: float, precision_m: float) -> tuple[GridFrame | None, list[np.ndarray]]:
    """The grid's frame and its batches of elements: runs of consecutive elements of one drive, each covering
    about `PAIRS_PER_BATCH` nodes. They depend on the elements only, so the grid is summed in the same order
    wherever its batches are evaluated. (None, []) without elements."""
    if not len(elements):
        return None, []
    h = float(spacing_m)
    corners = influence_corners(elements, precision_m)
    ox = np.floor(corners[:, :, 0].min() / h) * h
    oy = np.floor(corners[:, :, 1].min() / h) * h
    ncols = int(np.ceil((corners[:, :, 0].max() - ox) / h)) + 1
    side_a, side_b = corners[:, 1] - corners[:, 0], corners[:, 3] - corners[:, 0]
    area = np.abs(side_a[:, 0] * side_b[:, 1] - side_a[:, 1] * side_b[:, 0]) / (h * h)
    batches = []
    for drive in np.unique(elements.drive):
        mine = np.flatnonzero(elements.drive == drive)
        batch_of = np.floor(np.cumsum(area[mine]) / PAIRS_PER_BATCH).astype(int)
        cuts = np.flatnonzero(np.diff(batch_of)) + 1
        batches.extend(np.split(mine, cuts))
    return GridFrame(h, float(ox), float(oy), ncols // TILE_SIZE + 1), batches


def grid_batch_blocks(elements: Elements, sel: np.ndarray, frame: GridFrame, precision_m: float) -> dict:
    """The movements of the elements `sel` summed on the nodes of each tile they reach: {tile key: (fields,
    TILE_SIZE^2)}, the tile key counting tiles row by row from the frame's origin. [m]"""
    h, T = frame.spacing_m, TILE_SIZE
    corners = influence_corners(elements.take(sel), precision_m)
    owner, row, x_min, x_max = _rows_in_rectangles(corners, frame.origin_y_m, h)
    c0 = np.ceil((x_min - frame.origin_x_m) / h).astype(np.int64)
    c1 = np.floor((x_max - frame.origin_x_m) / h).astype(np.int64)
    count = np.maximum(c1 - c0 + 1, 0)
    run = np.repeat(np.arange(owner.size), count)
    first = np.repeat(np.cumsum(count) - count, count)
    col = c0[run] + (np.arange(run.size) - first)
    r = row[run]
    e = sel[owner[run]]
    mov = _element_movements(elements, e, frame.origin_x_m + col * h, frame.origin_y_m + r * h,
                             elements.trough_width_m[e], elements.axis_depth_m[e])
    tile = (r // T) * frame.tiles_across + col // T
    local = (r % T) * T + col % T
    order = np.argsort(tile, kind="stable")
    tile, local = tile[order], local[order]
    bounds = np.flatnonzero(np.diff(tile)) + 1
    blocks = {}
    for a, b in zip(np.concatenate([[0], bounds]), np.concatenate([bounds, [tile.size]])):
        idx = local[a:b]
        blocks[int(tile[a])] = np.array([np.bincount(idx, weights=mov[f][order[a:b]], minlength=T * T)
                                         for f in FIELDS])
    return blocks


def grid_from_blocks(frame: GridFrame | None, batch_blocks, threshold_mm: float):
    """The grid from the blocks of every batch, added in batch order (an iterable: each batch's blocks may be
    dropped once added): movements at every node whose settlement reaches `threshold_mm`, the settlement tiles and
    the volume of the surface trough [m^3]."""
    T = TILE_SIZE
    if frame is None:
        empty = np.empty(0)
        return _to_movements(empty, empty, empty, {f: empty for f in FIELDS}), SettlementTiles(0.0, 0.0, 0.0, T), 0.0
    acc: dict[int, np.ndarray] = {}
    for blocks in batch_blocks:
        for key, block in blocks.items():
            if key in acc:
                acc[key] += block
            else:
                acc[key] = np.zeros((len(FIELDS), T * T)) + block
    h, ox, oy = frame.spacing_m, frame.origin_x_m, frame.origin_y_m
    tiles = SettlementTiles(spacing_m=h, origin_x_m=ox, origin_y_m=oy, size=T)
    volume = 0.0
    parts = {f: [] for f in FIELDS}
    xs, ys = [], []
    grid_r, grid_c = np.divmod(np.arange(T * T), T)
    for key in sorted(acc):
        block = acc[key]
        tr, tc = divmod(key, frame.tiles_across)
        tiles.settlement_mm[(tr, tc)] = (block[0] * 1e3).reshape(T, T)
        volume += float(block[0].sum()) * h * h
        keep = block[0] * 1e3 >= threshold_mm
        xs.append(ox + (tc * T + grid_c[keep]) * h)
        ys.append(oy + (tr * T + grid_r[keep]) * h)
        for k, f in enumerate(FIELDS):
            parts[f].append(block[k][keep])
    x = np.concatenate(xs)
    y = np.concatenate(ys)
    grid = _to_movements(x, y, np.zeros_like(x), {f: np.concatenate(parts[f]) for f in FIELDS})
    return grid, tiles, volume


def settlement_grid(
    elements: Elements,
    spacing_m: float,
    precision_m: float,
    threshold_mm: float,
    progress: Callable[[float], None] | None = None,
) -> tuple[Movements, SettlementTiles, float]:
    """Surface movements on the project grid, where the ground moves, in this process (the orchestrator may spread
    the same batches over workers: `grid_batches`, `grid_batch_blocks`, `grid_from_blocks`).

    Returns the movements at every node whose settlement reaches `threshold_mm`, the settlement tiles (for contours),
    and the volume of the surface trough summed over all nodes [m^3].
    """
    frame, batches = grid_batches(elements, spacing_m, precision_m)

    def blocks():
        for k, sel in enumerate(batches):
            yield grid_batch_blocks(elements, sel, frame, precision_m)
            if progress:
                progress(float(k + 1) / len(batches))

    grid, tiles, volume = grid_from_blocks(frame, blocks(), threshold_mm)
    if frame is None:
        tiles = SettlementTiles(float(spacing_m), 0.0, 0.0, TILE_SIZE)
    return grid, tiles, volume
