"""The construction envelope: the worst each building and utility sees while the faces pass, over the whole sequence.

The drives are driven one after another in `[construction] sequence` order (default: the order of `[[drives]]`).
During a drive's stages the drives before it are complete and those after it not started; its face advances from the
launch shaft to the reception shaft in steps of `stage_step_m` (default, our choice: a quarter of the smallest trough
width i = K z0 of the drive, so the face never moves more than i/4 between two looks at the ground). The completion
of the sequence is a stage too, and wins ties: a worst value that completion reaches is reported as completion's.

Cost grows with the area that moves, not with stages x assets. A length of tunnel reaches an asset when it passes
closer to it than the reach radius (the engine's: beyond it a length settles the ground by less than `precision_mm`).
The movements at the asset then change only while the face of that drive passes along the lengths that reach it;
before, that drive adds nothing there, and after, it adds what it adds when complete. So each asset is assessed only
at the stages whose face lies in that window (its ends included), and at completion. A building that stage 1
screens out at every stage, by a bound that needs no stage (`screened_at_every_stage`), is assessed at completion
only. The stages of a building share its sampling and its search for elements
(`assessments.building_stages.stage_categories`), so the envelope of the 20 000-building benchmark costs about 8
single-stage assessments, not the 13 its stages would (README, Speed).

The element at the face is the complete drive's element cut at the face (its depth and trough width those of the
whole element, within the 2 % the elements keep everywhere; its lost volume exactly that of the length excavated):
`engine.field.movements_at_stages` gives every place the movements of each of its stages in one evaluation
(`engine.field.movements_at_points` with `faces_m` one stage per place).
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, replace

import numpy as np
import shapely

from ..assessments.building_damage import NOT_ASSESSED as NOT_ASSESSED_CATEGORY
from ..engine.elements import Elements, tunnel_elements
from ..engine.field import BUILDING_FIELDS, movements_at_points, movements_at_stages
from ..inputs.ground import GroundModel
from ..inputs.model import Project
from ..inputs.route import build_drive

#: Assets are found in reach of elements in chunks of this many asset-element pairs (bounds memory).
PAIRS_PER_CHUNK = 2_000_000


@dataclass
class Stage:
    """One state of the construction sequence: `drive` (its index in the project) driven to `face_chainage_m` (its
    stage `index`), the drives before it in the sequence complete."""

    drive: int
    index: int
    face_chainage_m: float


@dataclass
class BuildingEnvelope:
    """The worst damage category of each building over the sequence (arrays follow `Buildings`)."""

    worst_category: np.ndarray  # int; -1 where no stage could assess it
    worst_drive: np.ndarray  # text: the drive being driven when the worst is reached; "" when completion governs
    worst_face_chainage_m: np.ndarray  # that drive's face [m]; NaN when completion governs
    stages_assessed: np.ndarray  # how many stages each building was assessed at (completion included)


@dataclass
class UtilityEnvelope:
    """The worst status and utilisation of each pipe over the sequence (arrays follow `Utilities`)."""

    worst_status: np.ndarray  # text, a word of settle.assessments.utilities.STATUSES
    worst_status_class: np.ndarray  # int: its index in STATUSES
    worst_utilisation: np.ndarray  # the largest utilisation over the stages [-]
    worst_drive: np.ndarray
    worst_face_chainage_m: np.ndarray
    stages_assessed: np.ndarray


class Sequence:
    """The construction sequence of a project: complete drives, their elements, the stages of each drive."""

    def __init__(self, project: Project, ground: GroundModel | None = None):
        self.project = project
        self.ground = ground or GroundModel(project.ground)
        self.order = sequence_order(project)
        where = project.path.name if project.path else "project"
        self.geometry, self.elements = [], []
        for index, drive in enumerate(project.drives):
            complete = replace(drive, face_chainage_m=None)
            geometry, _ = build_drive(complete, self.ground, where)
            self.geometry.append(geometry)
            self.elements.append(tunnel_elements(complete, geometry, self.ground, index))
        self.faces = [self._faces(d) for d in range(len(project.drives))]
        self.precision_m = project.output.precision_mm / 1e3

    def _faces(self, d: int) -> np.ndarray:
        """The face positions of drive d's stages, launch to reception, the reception included. [m]"""
        geometry, elements = self.geometry[d], self.elements[d]
        step = stage_step_m(self.project, d, elements)
        faces = np.arange(geometry.start_chainage_m, geometry.end_chainage_m, step)
        return np.append(faces, geometry.end_chainage_m)

    def drive_elements(self, d: int) -> Elements:
        """The tunnel elements of drive d's stages: the drives before it complete, and d complete (each stage cuts
        d at its face: `stage_movements`)."""
        return Elements.concatenate([self.elements[e] for e in self.order[: self.order.index(d) + 1]])

    def completion_elements(self) -> Elements:
        return Elements.concatenate([self.elements[d] for d in self.order])

    def movements(self, elements: Elements):
        """movements(x, y, depth) of these elements, as the assessments take it."""
        return lambda x, y, depth: movements_at_points(elements, self.ground, x, y, depth,
                                                       precision_m=self.precision_m)

    def stage_movements(self, d: int, faces_m):
        """movements(x, y, depth) at stage faces of drive d: `faces_m` one chainage for every place, or one for all."""
        elements = self.drive_elements(d)

        def movements(x, y, depth):
            faces = np.broadcast_to(np.asarray(faces_m, dtype=float), np.shape(x))
            return movements_at_points(elements, self.ground, x, y, depth, precision_m=self.precision_m,
                                       faces_m=faces, face_drive=d)

        return movements

    def stage_range_movements(self, d: int):
        """movements(x, y, depth, first, count, rows=None) at runs of stages of drive d
        (`engine.field.movements_at_stages`): the fields the building assessment reads."""
        elements = self.drive_elements(d)

        def movements(x, y, depth, first, count, rows=None):
            return movements_at_stages(elements, self.ground, x, y, depth, self.faces[d], first, count, d,
                                       precision_m=self.precision_m, fields=BUILDING_FIELDS, rows=rows)

        return movements

    def windows(self, d: int, geometries) -> tuple[np.ndarray, np.ndarray]:
        """For each asset (shapely geometry), the first and last stage of drive d whose face lies between the first
        and the last element of d that reaches it; (-1, -2) where none reaches it."""
        elements = self.elements[d]
        reach = elements.reach_radius_m(self.precision_m)
        lo, hi = reaching_chainage_span(elements, reach, geometries)
        faces = self.faces[d]
        first = np.searchsorted(faces, lo, side="right") - 1  # the stage at or before the first element's start
        last = np.searchsorted(faces, hi, side="left")  # the stage at or after the last element's end
        none = ~np.isfinite(lo)
        first = np.where(none, -1, np.clip(first, 0, len(faces) - 1))
        last = np.where(none, -2, np.clip(last, 0, len(faces) - 1))
        return first, last


def sequence_order(project: Project) -> list[int]:
    """Indices of the drives in driving order: `[construction] sequence` (checked by the loader), or the order of
    [[drives]]."""
    names = [d.name for d in project.drives]
    sequence = getattr(project.construction, "sequence", None)
    return [names.index(s) for s in sequence] if sequence else list(range(len(names)))


def stage_step_m(project: Project, d: int, elements: Elements) -> float:
    """The face step of drive d: `[construction] stage_step_m`, or a quarter of the drive's smallest trough width i
    at the surface (our choice). [m]"""
    given = getattr(project.construction, "stage_step_m", None)
    if given is not None:
        return float(given)
    if len(elements) == 0:
        return 1.0
    return float(np.min(elements.trough_width_m)) / 4.0


def reaching_chainage_span(elements: Elements, reach: np.ndarray, geometries) -> tuple[np.ndarray, np.ndarray]:
    """For each geometry, the span of chainage [lo, hi] over which the drive's axis passes within reach of it: the
    parts of the elements closer to its bounding box than their reach radius. NaN, NaN where no element reaches it.
    [m]"""
    geometries = np.asarray(geometries, dtype=object)
    n, m = len(geometries), len(elements)
    lo, hi = np.full(n, np.inf), np.full(n, -np.inf)
    if n == 0 or m == 0:
        return np.full(n, np.nan), np.full(n, np.nan)
    bounds = shapely.bounds(geometries)
    centre = 0.5 * (bounds[:, :2] + bounds[:, 2:])
    half_diagonal = 0.5 * np.hypot(bounds[:, 2] - bounds[:, 0], bounds[:, 3] - bounds[:, 1])
    length = elements.plan_length_m
    per_m = (elements.chainage_to_m - elements.chainage_from_m) / np.maximum(length, 1e-12)
    rows = max(1, PAIRS_PER_CHUNK // m)
    for a in range(0, n, rows):
        rel = centre[a:a + rows, None, :] - elements.start_xy[None, :, :]
        along = (rel * elements.direction[None, :, :]).sum(axis=2)  # u of the centre along each element [m]
        across = rel[..., 0] * elements.direction[None, :, 1] - rel[..., 1] * elements.direction[None, :, 0]
        radius = reach[None, :] + half_diagonal[a:a + rows, None]
        half = np.sqrt(np.maximum(radius ** 2 - across ** 2, 0.0))
        u_lo, u_hi = np.maximum(along - half, 0.0), np.minimum(along + half, length[None, :])
        touches = (np.abs(across) <= radius) & (u_lo <= u_hi)
        c_lo = elements.chainage_from_m[None, :] + u_lo * per_m[None, :]
        c_hi = elements.chainage_from_m[None, :] + u_hi * per_m[None, :]
        lo[a:a + rows] = np.where(touches, c_lo, np.inf).min(axis=1)
        hi[a:a + rows] = np.where(touches, c_hi, -np.inf).max(axis=1)
    none = ~np.isfinite(lo)
    lo[none], hi[none] = np.nan, np.nan
    return lo, hi


def stage_pairs(sequence: Sequence, d: int, geometries) -> tuple[np.ndarray, np.ndarray]:
    """(asset, stage index) of every stage of drive d at which an asset is assessed, by stage."""
    first, last = sequence.windows(d, geometries)
    count = np.maximum(last - first + 1, 0)
    asset = np.repeat(np.arange(len(first)), count)
    stage = np.repeat(first, count) + (np.arange(count.sum()) - np.repeat(np.cumsum(count) - count, count))
    order = np.argsort(stage, kind="stable")
    return asset[order], stage[order]


def stage_visits(sequence: Sequence, geometries) -> list[tuple[Stage, np.ndarray]]:
    """The stages to assess, each with the assets to assess at it (indices), in sequence order."""
    visits = []
    for d in sequence.order:
        asset, stage = stage_pairs(sequence, d, geometries)
        cuts = np.flatnonzero(np.diff(stage)) + 1
        for assets, stages in zip(np.split(asset, cuts), np.split(stage, cuts)):
            if len(stages):
                k = int(stages[0])
                visits.append((Stage(d, k, float(sequence.faces[d][k])), assets))
    return visits


def subset_table(table, keep: np.ndarray):
    """A Buildings or Utilities table reduced to the rows `keep` (indices), every per-item field taken alike."""
    n = len(table)
    changes = {}
    for f in dataclasses.fields(table):
        value = getattr(table, f.name)
        if isinstance(value, np.ndarray) and len(value) == n:
            changes[f.name] = value[keep]
        elif isinstance(value, tuple) and len(value) == n:
            changes[f.name] = tuple(value[i] for i in keep)
        elif isinstance(value, dict) and all(isinstance(v, np.ndarray) and len(v) == n for v in value.values()):
            changes[f.name] = {k: v[keep] for k, v in value.items()}
        elif hasattr(value, "iloc") and len(value) == n:
            changes[f.name] = value.iloc[keep].reset_index(drop=True)
    return replace(table, **changes)


def _worst_over_stages(sequence: Sequence, geometries, completion_value: np.ndarray, assess_at) -> tuple:
    """The worst value of each asset over the sequence: `assess_at(stage, assets)` gives the values of those assets
    at that stage (larger is worse). Returns (worst value, governing stage or None per asset, stages assessed)."""
    worst = completion_value.astype(float).copy()
    governing: list[Stage | None] = [None] * len(worst)
    counted = np.ones(len(worst), dtype=int)
    for stage, assets in stage_visits(sequence, geometries):
        values = np.asarray(assess_at(stage, assets), dtype=float)
        counted[assets] += 1
        better = values > worst[assets]
        for a, v in zip(assets[better], values[better]):
            worst[a], governing[a] = v, stage
    return worst, governing, counted


def _drive_and_face(sequence: Sequence, governing) -> tuple[np.ndarray, np.ndarray]:
    names = [d.name for d in sequence.project.drives]
    drive = np.array(["" if g is None else names[g.drive] for g in governing], dtype=object)
    face = np.array([np.nan if g is None else g.face_chainage_m for g in governing], dtype=float)
    return drive, face


def building_envelope(sequence: Sequence, buildings, options=None, completion=None) -> BuildingEnvelope:
    """The worst damage category of every building over the construction sequence (see the module docstring).

    Each drive's stages are assessed in one call of `assessments.building_stages.stage_categories`: every building
    at each stage of its window, sampled once, with the movements of all its stages found in one evaluation.
    Buildings that no drive reaches, and those that stage 1 screens out at every stage (`screened_at_every_stage`),
    are assessed at completion only. `completion`, the BuildingResults at completion when the caller has them, spares
    assessing it again."""
    from ..assessments.building_stages import stage_categories
    from ..assessments.buildings import assess_buildings

    n = len(buildings)
    if completion is None:
        completion = assess_buildings(buildings, sequence.movements(sequence.completion_elements()), options)
    worst = completion.category.astype(int)
    undefined_at_completion = worst == NOT_ASSESSED_CATEGORY
    governing_drive, governing_stage = np.full(n, -1), np.full(n, -1)
    counted = np.ones(n, dtype=int)
    windows = {d: sequence.windows(d, buildings.polygons) for d in sequence.order}
    reached = np.flatnonzero(np.any([last >= first for first, last in windows.values()], axis=0)) if n else []
    always_screened = np.zeros(n, dtype=bool)
    if len(reached):
        always_screened[reached] = screened_at_every_stage(sequence, subset_table(buildings, reached), options,
                                                           completion.max_settlement_mm[reached])
    for d in sequence.order:
        first, last = windows[d]
        count = np.where(always_screened, 0, np.maximum(last - first + 1, 0))
        if not count.any():
            continue
        category = stage_categories(buildings, first, count, sequence.stage_range_movements(d), options,
                                    full_check=undefined_at_completion)
        counted += count
        owner = np.repeat(np.arange(n), count)
        stage = first[owner] + (np.arange(len(owner)) - np.repeat(np.cumsum(count) - count, count))
        order = np.lexsort((stage, -category, owner))  # per building: its worst, at its earliest stage
        head = order[np.r_[True, owner[order][1:] != owner[order][:-1]]]
        better = category[head] > worst[owner[head]]
        b, k = owner[head][better], stage[head][better]
        worst[b], governing_drive[b], governing_stage[b] = category[head][better], d, k
    names = np.array([d.name for d in sequence.project.drives] + [""], dtype=object)
    drive = names[governing_drive]  # -1: completion, ""
    face = np.full(n, np.nan)
    for d in set(governing_drive[governing_drive >= 0].tolist()):
        face[governing_drive == d] = sequence.faces[d][governing_stage[governing_drive == d]]
    return BuildingEnvelope(worst, drive, face, counted)


def screened_at_every_stage(sequence: Sequence, buildings, options=None, max_settlement_mm=None) -> np.ndarray:
    """Buildings that stage 1 screens out (category 0) at every stage, without assessing a stage: settlement only
    grows as the faces advance (each length excavated adds a trough), so completion gives its largest value
    (`max_settlement_mm`, each building's largest at completion, when the caller has it); the slope at any stage is
    at most `engine.field.tilt_bound_at_points` of every length of every drive."""
    from ..assessments.building_damage import rankin_screening
    from ..assessments.buildings import footprint_maxima
    from ..engine.field import tilt_bound_at_points
    from ..engine.movements import Movements
    from ..inputs.building_settings import AssessmentOptions

    options = options or AssessmentOptions()
    elements = sequence.completion_elements()

    def bounds(x, y, depth):
        tilt = tilt_bound_at_points(elements, sequence.ground, x, y, depth, precision_m=sequence.precision_m)
        if max_settlement_mm is None:
            settlement = movements_at_points(elements, sequence.ground, x, y, depth,
                                             precision_m=sequence.precision_m).settlement_mm
        else:
            settlement = tilt * 0.0  # NaN where undefined, as the tilt bound is
        zero = np.zeros(len(x))
        return Movements(x, y, depth, settlement, zero, zero, zero, zero, zero, tilt, zero)

    settlement, tilt, undefined = footprint_maxima(buildings, bounds, options)
    if max_settlement_mm is not None:
        settlement = np.where(undefined, np.nan, max_settlement_mm)
    return ~undefined & rankin_screening(tilt, settlement, options.screening_slope_limit,
                                         options.screening_settlement_limit_mm)


def utility_envelope(sequence: Sequence, utilities, options=None) -> UtilityEnvelope:
    """The worst status and utilisation of every pipe over the construction sequence (see the module docstring).

    The status ranks within limits < near limit < exceeds; "crosses the tunnel" ranks above them and "not checked"
    (no allowable value) stays as completion gives it. The worst utilisation is the largest over the stages."""
    from ..assessments.utilities import STATUSES, assess_utilities
    from ..inputs.utility_settings import UtilityOptions

    options = options or UtilityOptions()

    rank = {"within limits": 0, "near limit": 1, "exceeds": 2, "crosses the tunnel": 3, "not checked": -1}

    def assessed(movements, keep):
        return assess_utilities(subset_table(utilities, keep), movements, options)

    def assessed_at(stage, keep):
        return assessed(sequence.stage_movements(stage.drive, stage.face_chainage_m), keep)

    everyone = np.arange(len(utilities))
    final = assessed(sequence.movements(sequence.completion_elements()), everyone)
    final_rank = np.array([rank[s] for s in final.status], dtype=float)

    def value(results):
        """Status first, then utilisation: rank + u / (1 + u) stays in [rank, rank + 1)."""
        u = np.nan_to_num(np.asarray(results.utilisation, dtype=float), nan=0.0)
        return np.array([rank[s] for s in results.status], dtype=float) + u / (1.0 + u)

    def value_at(stage, keep):
        return value(assessed_at(stage, keep))

    worst, governing, counted = _worst_over_stages(sequence, _pipe_lines(utilities), value(final), value_at)
    status_rank = np.floor(worst)
    worst_status = np.array([final.status[k] if final_rank[k] < 0 else
                             {v: s for s, v in rank.items()}[int(status_rank[k])] for k in range(len(worst))],
                            dtype=object)
    share = worst - status_rank
    utilisation = np.where(final_rank < 0, np.asarray(final.utilisation, dtype=float), share / (1.0 - share))
    drive, face = _drive_and_face(sequence, governing)
    status_class = np.array([STATUSES.index(s) for s in worst_status], dtype=int)
    return UtilityEnvelope(worst_status, status_class, utilisation, drive, face, counted)


def _pipe_lines(utilities) -> np.ndarray:
    return np.array([shapely.LineString(xy) for xy in utilities.lines_xy], dtype=object)
