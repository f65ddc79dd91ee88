"""Monitored cross-sections after the back-analysis (`settle.monitoring.fitting`), and their troughs.

Each monitored point is placed on its drive by the chainage of the foot of its perpendicular
(`fitting.point_chainage_m`) and its signed offset (left of the drive positive). Points whose chainages lie within
`SECTION_GAP_M` of each other form one section; a section needs `SECTION_MIN_POINTS` points. Its troughs are the design
model and the fitted model, evaluated along the section line at the face of the section's latest reading, at the
surface.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..inputs.ground import GroundModel
from ..inputs.model import Project
from ..inputs.readings import Readings
from ..inputs.route import build_drive, position_at
from .fitting import BackAnalysis, apply_fits, point_chainage_m, predicted_settlement_mm

SECTION_GAP_M = 3.0  # points closer than this in chainage belong to one section [m]; our choice
SECTION_MIN_POINTS = 3  # fewer monitored points do not make a trough to draw
PROFILE_STEP_M = 0.25  # spacing of the drawn troughs [m]


@dataclass
class Section:
    """One monitored cross-section: its points' latest readings, and the design and fitted troughs across it."""

    drive: str
    chainage_m: float
    face_chainage_m: float  # face of the section's latest reading
    point_id: np.ndarray
    offset_m: np.ndarray  # of each point, left of the drive positive
    reading_mm: np.ndarray  # latest reading of each point
    profile_offset_m: np.ndarray
    design_mm: np.ndarray  # the project's model along the section
    fitted_mm: np.ndarray  # the fitted model along the section (NaN where the drive was not fitted)


def _latest(readings: Readings) -> np.ndarray:
    """Index of each point's latest reading."""
    order = np.lexsort((readings.date, readings.point_id))
    ids = readings.point_id[order]
    last = np.append(ids[1:] != ids[:-1], True)
    return order[last]


def _line_readings(readings: Readings, x, y, drive: int, face: float) -> Readings:
    """Readings-shaped places (no values) for evaluating a model along a line."""
    n = len(x)
    return Readings(point_id=np.array([""] * n, dtype=object), x_m=np.asarray(x), y_m=np.asarray(y),
                    depth_m=np.zeros(n), date=np.zeros(n, dtype="datetime64[s]"), settlement_mm=np.zeros(n),
                    face_chainage_m=np.full(n, face), drive=np.full(n, drive), line=np.zeros(n, dtype=int),
                    drive_names=readings.drive_names, source=readings.source)


def monitored_sections(project: Project, readings: Readings, analysis: BackAnalysis) -> list[Section]:
    """The monitored cross-sections of every drive, with their readings and troughs (see the module docstring)."""
    ground = GroundModel(project.ground)
    fitted = apply_fits(project, analysis.fits)
    latest = _latest(readings)
    sections = []
    for d, drive in enumerate(project.drives):
        rows = latest[(readings.drive[latest] == d) & (readings.depth_m[latest] == 0.0)]
        if len(rows) < SECTION_MIN_POINTS:
            continue
        geometry, _ = build_drive(replace(drive, face_chainage_m=None), ground)
        chain = point_chainage_m(geometry, readings.x_m[rows], readings.y_m[rows])
        order = np.argsort(chain)
        rows, chain = rows[order], chain[order]
        groups = np.split(np.arange(len(rows)), np.flatnonzero(np.diff(chain) > SECTION_GAP_M) + 1)
        for group in groups:
            if len(group) < SECTION_MIN_POINTS:
                continue
            at = float(np.mean(chain[group]))
            here = position_at(geometry.axis_xyz_m, geometry.chainage_m, [at, at + 0.5])
            direction = (here[1, :2] - here[0, :2]) / np.hypot(*(here[1, :2] - here[0, :2]))
            left = np.array([-direction[1], direction[0]])
            r = rows[group]
            offset = (np.column_stack([readings.x_m[r], readings.y_m[r]]) - here[0, :2]) @ left
            face = float(readings.face_chainage_m[r][np.argmax(readings.date[r])])
            reach = max(15.0, 1.5 * np.abs(offset).max())
            line = np.arange(-reach, reach + 1e-9, PROFILE_STEP_M)
            xy = here[0, :2] + np.outer(line, left)
            places = _line_readings(readings, xy[:, 0], xy[:, 1], d, face)
            design = predicted_settlement_mm(project, places, ground)
            fitted_line = (predicted_settlement_mm(fitted, places, ground)
                           if any(key[0] == drive.name for key in analysis.fits) else np.full(len(line), np.nan))
            sections.append(Section(drive=drive.name, chainage_m=at, face_chainage_m=face,
                                    point_id=readings.point_id[r], offset_m=offset,
                                    reading_mm=readings.settlement_mm[r], profile_offset_m=line, design_mm=design,
                                    fitted_mm=fitted_line))
    return sections
