"""Appendix A of the report: complete schedules of every building, every utility with its allowable values and
their sources, and every face station with a narrow or closed window.

Read from the run's layers (`buildings`, `utilities`, `face_stations`), in the order of the layers (the input
files' order; stations by drive and chainage). Section 3 of the report shows the counts and the rows that need
attention; these schedules hold every row, so a checker can find any asset.
"""
from __future__ import annotations

import re

import numpy as np

from .report_layout import Block
from .report_tables import num, one_in, records, table_lines

APPENDIX = "Appendix A Schedules"

#: The status of a default allowable value as the utilities layer's `limits_source` gives it, in words a reader of
#: the report understands, with the short label of the schedule.
DEFAULT_STATUS_WORDS = {
    "common practice, no source": ("assumed", "assumed (common practice); no published source: confirm for this "
                                              "site with the asset owner"),
    "from memory": ("indicative", "indicative value as commonly quoted, not verified against a publication: confirm "
                                  "for this site with the asset owner"),
}

#: The demands of a pipe: (words, value field(s), allowable field, unit, utilisation field).
DEMANDS = (
    ("bending strain", ("max_bending_strain_ue",), "allowable_bending_strain_ue", "ue", "bending_utilisation"),
    ("axial strain", ("max_axial_strain_ue", "min_axial_strain_ue"), "allowable_axial_strain_ue", "ue",
     "axial_utilisation"),
    ("fibre strain", ("max_fibre_strain_ue", "min_fibre_strain_ue"), None, "ue", "fibre_utilisation"),
    ("joint rotation", ("max_joint_rotation_deg",), "allowable_joint_rotation_deg", "deg",
     "joint_rotation_utilisation"),
    ("joint opening", ("max_joint_opening_mm",), "allowable_joint_opening_mm", "mm", "joint_opening_utilisation"),
)


def schedule_blocks(frames: dict, drive_labels: dict[str, str]) -> list[Block]:
    """The appendix: A.1 buildings, A.2 utilities, A.3 face stations (each "not assessed" when the run has no
    such layer). `drive_labels` maps drive names to their short labels (D1, D2, ...)."""
    b = [Block("break"), Block("heading", APPENDIX)]
    b += building_schedule(frames.get("buildings"), drive_labels)
    b += utility_schedule(frames.get("utilities"))
    b += face_schedule(frames.get("face_stations"), drive_labels)
    return b


def _int(value) -> int | None:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return int(v) if np.isfinite(v) else None


def building_schedule(layer, drive_labels: dict[str, str]) -> list[Block]:
    """A.1: every building with its category at the stage of the run and over the construction sequence, the
    governing wall and mode, and the greenfield values of its governing part."""
    b = [Block("subheading", "A.1 Buildings")]
    if layer is None:
        return b + [Block("text", "Buildings: not assessed in this run.")]
    envelope = "worst_category" in layer

    def worst_at(r):
        drive = r.get("worst_drive")
        if not envelope or _int(r.get("worst_category")) is None:
            return None
        if not isinstance(drive, str) or not drive:
            return "completion"
        return f"{drive_labels.get(drive, drive)} {num(r.get('worst_face_chainage_m'), '.1f')}"

    mapping = {"id": "id", "structure": "structure",
               "cat": lambda r: _int(r.get("category")) if _int(r.get("category")) != -1 else "n/a",
               "worst": lambda r: (_int(r.get("worst_category")) if _int(r.get("worst_category")) != -1 else "n/a")
               if envelope else None,
               "worst at": worst_at,
               "wall": lambda r: f"{num(r.get('governing_wall'), '.0f')} {r.get('governing_mode') or ''}".strip()
               if _int(r.get("governing_wall")) not in (None, -1) else "-",
               "settl mm": "max_settlement_mm", "tilt": lambda r: one_in(r.get("max_tilt")),
               "defl ratio": "deflection_ratio", "hor strain %": "horizontal_strain_pct"}
    cols = [("id", 18, None), ("structure", 10, None), ("cat", 3, None), ("worst", 5, None), ("worst at", 13, None),
            ("wall", 11, None), ("settl mm", 8, ".1f"), ("tilt", 8, None), ("defl ratio", 10, ".2e"),
            ("hor strain %", 12, ".3f")]
    b.append(Block("text", f"{len(layer)} buildings, in the order of the buildings file."))
    b.append(Block("mono", lines=table_lines(cols, records(layer, mapping))))
    b.append(Block("text", "cat: damage category at the construction stage of this run (0 negligible, 1 very "
                           "slight, 2 slight, 3 moderate, 4 severe to very severe; n/a: not assessed, the "
                           "foundation is at or below a tunnel crown). worst: the highest category over the "
                           "construction sequence, and worst at: the drive and its face chainage [m] when it is "
                           "reached while a face passes, or completion. wall: the governing wall and whether it "
                           "sags or hogs (\"-\": screened out at stage 1). settl: largest greenfield settlement over "
                           "the footprint; tilt: largest greenfield slope; defl ratio and hor strain: the governing "
                           "part's deflection ratio and average horizontal strain (tensile positive)."))
    return b


def default_sources(limits_source: str) -> tuple[list[str], str | None]:
    """From a pipe's `limits_source` text: the allowable fields given as the pipe's own attributes, and the status
    of the material's defaults used for the rest (a key of DEFAULT_STATUS_WORDS), None when none is used."""
    text = str(limits_source or "")
    given = []
    m = re.search(r"pipe attributes for ([a-z_, ]+?)(;|$)", text)
    if m:
        given = [g.strip() for g in m.group(1).split(",") if g.strip()]
    status = None
    m = re.search(r"defaults \(([^)]*)\)", text)
    if m:
        status = m.group(1).strip()
    return given, status


def utility_schedule(layer) -> list[Block]:
    """A.2: every pipe, one row per demand: its value, allowable value and where that comes from, utilisation; the
    pipe's status at the stage of the run and over the construction sequence."""
    b = [Block("subheading", "A.2 Utilities")]
    if layer is None:
        return b + [Block("text", "Utilities: not assessed in this run.")]
    envelope = "worst_status" in layer
    rows, statuses = [], set()
    for _, r in layer.iterrows():
        given, status = default_sources(r.get("limits_source"))
        if status is not None:
            statuses.add(status)
        label = f"default ({DEFAULT_STATUS_WORDS.get(status, (status or '-',))[0]})"
        about = [str(r.get("id")), f"{r.get('material')}, OD {num(r.get('outer_diameter_mm'), '.0f')} mm",
                 f"status: {r.get('status')}", f"worst: {r.get('worst_status')}" if envelope else "", ""]
        for k, (words, values, allowable, unit, util) in enumerate(DEMANDS):
            if allowable is None:
                allowed, source = "interaction", "both limits above"
            else:
                allowed = num(r.get(allowable), ".4g")
                source = ("given" if allowable in given else label) if allowed != "-" else "none: not checked"
            value = " / ".join(num(r.get(v), ".3g" if unit == "deg" else ".0f" if unit == "ue" else ".2f")
                               for v in values if v in r)
            rows.append({"pipe": about[k], "demand": f"{words} {unit}", "value": value, "allowable": allowed,
                         "util": r.get(util), "source": source})
        at = _float(r.get("governing_chainage_m"))
        rows.append({"pipe": "", "demand": "utilisation", "value": f"at {at:.1f} m" if np.isfinite(at) else "",
                     "allowable": "", "util": r.get("utilisation"), "source": ""})
    cols = [("pipe", 34, None), ("demand", 18, None), ("value", 13, None), ("allowable", 11, None),
            ("util", 6, ".2f"), ("source", 26, None)]
    b.append(Block("text", f"{len(layer)} pipes, in the order of the utilities file; each demand with its allowable "
                           "value and where that value comes from."))
    b.append(Block("mono", lines=table_lines(cols, rows)))
    notes = ["value: the largest demand along the pipe (axial and fibre strain: most tensile / most compressive; ue: "
             "microstrain, tensile positive); util: demand over allowable (fibre strain: axial over its allowable plus "
             "bending over its allowable); utilisation: the largest, and where along the pipe. status: at the "
             "construction stage of this run; worst: over the construction sequence.",
             "source: given = the pipe's own attribute in the utilities file; default = the value for its material "
             "that the project uses where the file gives none."]
    notes += [f"default ({DEFAULT_STATUS_WORDS[s][0]}): {DEFAULT_STATUS_WORDS[s][1]}." for s in sorted(statuses)
              if s in DEFAULT_STATUS_WORDS]
    notes += [f"default ({s}): as the project's utility settings give it." for s in sorted(statuses)
              if s not in DEFAULT_STATUS_WORDS]
    b += [Block("text", t) for t in notes]
    return b


def _float(value) -> float:
    try:
        return float(value)
    except (TypeError, ValueError):
        return float("nan")


def face_schedule(layer, drive_labels: dict[str, str]) -> list[Block]:
    """A.3: every face station whose support window is narrow or closed, by drive and chainage."""
    b = [Block("subheading", "A.3 Face stations with a narrow or closed window")]
    if layer is None:
        return b + [Block("text", "Face support window: not assessed in this run.")]
    rows = layer[layer["status"].isin(("narrow", "closed"))]
    if rows.empty:
        return b + [Block("text", "No face station has a narrow or closed window.")]
    mapping = {"drive": lambda r: drive_labels.get(r["drive"], r["drive"]), "ch m": "chainage_m",
               "cover m": "cover_m", "water kPa": "water_pressure_kpa", "min kPa": "support_min_kpa",
               "max kPa": "support_max_kpa", "window kPa": "window_kpa", "status": "status",
               "mode": "support_mode", "low cover": lambda r: "yes" if r.get("low_cover") else "no",
               "river": lambda r: "yes" if r.get("in_river") else "no", "max by": "max_limited_by"}
    cols = [("drive", 5, None), ("ch m", 8, ".2f"), ("cover m", 7, ".2f"), ("water kPa", 9, ".1f"),
            ("min kPa", 7, ".1f"), ("max kPa", 7, ".1f"), ("window kPa", 10, ".1f"), ("status", 6, None),
            ("mode", 11, None), ("low cover", 9, None), ("river", 5, None), ("max by", 12, None)]
    return b + [Block("text", f"{len(rows)} station(s), by drive and chainage:"),
                Block("mono", lines=table_lines(cols, records(rows, mapping))),
                Block("text", "Pressures at the crown [kPa]; window: the maximum less the minimum less twice the "
                              "operating tolerance; max by: what limits the maximum. These are planning bounds: "
                              "the operating pressures are set and reviewed by the responsible engineer, under "
                              "local codes.")]
