"""The assessment report of a finished run: `<out_dir>/<stem>-report.pdf` (matplotlib PdfPages).

Written from the run's outputs only (the GeoPackage `<stem>.gpkg`, `summary.json`), never recomputing. The run's CSV
tables (buildings.csv, utilities.csv, face_pressures.csv) list the same buildings, pipes and stations as the layers
`buildings`, `utilities` and `face_stations`, so the tables here are read from the layers, and the CSVs are listed
as outputs. The inputs section also lists the project file's ground layers, reaches and settings when the project is
given (they are not in the outputs). Sections, numbered as in `SECTIONS`:

1 Inputs                           drives, volume loss per reach, ground layers and parameters, water, settings,
                                   each with where it came from (the project file and its keys);
2 Methods and references           per assessment that ran, what it does and the published references (taken from
                                   the docstrings of the engine's method modules);
3 Results                          the key numbers, the figures (`gis_out.figures`), the buildings in damage category
                                   2 and above, the utilities near or over their limits, the face stations with a
                                   narrow or closed window, the counts behind each, the run's warnings;
4 Assumptions, limits and cautions the limits of greenfield methods and the cautions of the trade.

An assessment the run did not make (no buildings, no utilities, no face check) is reported as "not assessed".

Reproducibility: the run date is the only date in the report: the one given to the report, else the one given to the
run (run.json records it), else none ("undated run"). The PDF carries no creation time, so the same outputs and run
date give the same file.

Text: pages are laid out with `fig.text`, every line literally (a "$" in a name is a dollar sign, never math). Where
all of the report's text is in the Windows-1252 character set (the usual case), it is set in the PDF core fonts
(Helvetica, Courier), which any PDF reader extracts as plain text; otherwise in the embedded DejaVu fonts with a
Unicode map, so no character is lost; the characters those fonts lack (and those the figures' font lacks) come as
one warning for the whole report (`gis_out.png.glyph_check`).

Units and signs as in the outputs: settlement positive downward [mm], horizontal strain tensile positive, pressures at
the crown [kPa], chainage along the 3-D axis [m].
"""
from __future__ import annotations

import datetime as dt
import math
import re
import tempfile
import textwrap
from dataclasses import dataclass
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
from matplotlib.backends.backend_pdf import PdfPages  # noqa: E402

from settle.errors import InputError  # noqa: E402

from . import figures  # noqa: E402
from .png import glyph_check  # noqa: E402
from .report_monitoring import monitoring_blocks  # noqa: E402
from .report_probability import probability_blocks  # noqa: E402
from .report_schedules import schedule_blocks  # noqa: E402
from .report_layout import MONO_CHARS, Block, PageMarks, Renderer, atomic_pdf, core_fonts_suffice  # noqa: E402
from .report_tables import num as _num  # noqa: E402
from .report_tables import one_in as _one_in  # noqa: E402
from .report_tables import records as _records  # noqa: E402
from .report_tables import table_lines  # noqa: E402, F401  (public here too)

SECTIONS = ("1 Inputs", "2 Methods and references", "3 Results", "4 Assumptions, limits and cautions", "5 References")
APPENDICES = ("Appendix A Schedules",)
TITLE_CHARS = 52  # characters per line of the 18 pt title on the A4 text width
BUILDING_REPORT_CATEGORY = 2  # buildings in this damage category and above are tabled
UTILITY_REPORT_STATUSES = ("near limit", "exceeds")  # pipes with these statuses are tabled
FACE_REPORT_STATUSES = ("narrow", "closed")  # face stations with these statuses are tabled
FIGURE_DPI = 130



# ----------------------------------------------------------------------------------------------- the document
@dataclass
class RunOutputs:
    """What a finished run left in its folder, read once."""

    out_dir: Path
    stem: str
    gpkg: Path
    summary: dict
    layers: set[str]
    frames: dict  # layer name -> GeoDataFrame (route, buildings, utilities, face_stations when present)


def _is_number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


#: The kinds of value the report reads from summary.json, by the words its messages use.
SUMMARY_KINDS = {
    "text": lambda v: isinstance(v, str),
    "an object": lambda v: isinstance(v, dict),
    "an object or null": lambda v: v is None or isinstance(v, dict),
    "an array": lambda v: isinstance(v, list),
    "a number": _is_number,
    "a positive number": lambda v: _is_number(v) and math.isfinite(v) and v > 0,
    "an array of numbers": lambda v: isinstance(v, list) and all(map(_is_number, v)),
}

#: What the report reads from summary.json: key (its parts joined by ".") -> (kind, required). A key below another
#: is checked only where the one above it is an object, and "required" then means it must be there.
SUMMARY_KEYS = {
    "project": ("text", True), "caution": ("text", True), "crs": ("text", False),
    "grid": ("an object", True), "grid.spacing_m": ("a positive number", True),
    "grid.threshold_mm": ("a number", False), "grid.contour_levels_mm": ("an array of numbers", False),
    "outputs": ("an object", False), "warnings": ("an array", False), "volume_check": ("an object or null", False),
    **{k: v for peak, value in (("max_settlement", "settlement_mm"), ("max_tilt", "tilt"),
                                ("max_tensile_strain", "strain_ue"), ("max_compressive_strain", "strain_ue"))
       for k, v in ((peak, ("an object or null", False)), (f"{peak}.{value}", ("a number", True)),
                    (f"{peak}.x_m", ("a number", True)), (f"{peak}.y_m", ("a number", True)))},
    "points": ("an object or null", False), "points.count": ("a number", True),
    "points.max_settlement": ("an object or null", False), "points.max_settlement.settlement_mm": ("a number", True),
    "inputs": ("an object or null", False),
}


def check_summary(summary: dict, path) -> dict:
    """The run's summary when it holds what the report reads (`SUMMARY_KEYS`); else an InputError naming the file,
    the key and what it holds."""
    for key, (kind, required) in SUMMARY_KEYS.items():
        *above, name = key.split(".")
        parent = summary
        for part in above:
            parent = parent.get(part) if isinstance(parent, dict) else None
        if not isinstance(parent, dict):
            continue
        if name not in parent:
            if required:
                raise InputError(f"{path}: has no {key}, which the report needs; is it the summary.json of "
                                 "`settle run`?")
            continue
        if not SUMMARY_KINDS[kind](parent[name]):
            raise InputError(f"{path}: {key} must be {kind}; got {figures.json_kind(parent[name])}")
    return summary


def read_outputs(out_dir, stem: str) -> RunOutputs:
    """The GeoPackage and summary of a finished run; an InputError naming the file when one is missing, or when
    summary.json is not a JSON object holding what the report reads (`check_summary`)."""
    out = Path(out_dir)
    gpkg = out / f"{stem}.gpkg"
    summary = check_summary(figures.read_summary(out / "summary.json"), out / "summary.json")
    layers = figures.layer_names(gpkg)
    if "route" not in layers:
        raise InputError(f"{gpkg}: has no route layer; is it the output of `settle run`?")
    frames = {name: figures.read_layer(gpkg, name) for name in ("route", "buildings", "utilities", "face_stations",
                                                                "readings") if name in layers}
    return RunOutputs(out, stem, gpkg, summary, layers, frames)


def run_date_of(folder) -> dt.date | None:
    """The run date the run was given (`settle run --date`), as its run.json records it; None when it was given none
    (or the folder has no run.json)."""
    from .run_set import read_manifest

    day = (read_manifest(folder) or {}).get("run_date")
    try:
        return dt.date.fromisoformat(day) if isinstance(day, str) else None
    except ValueError:
        return None


def _run_date(run_date, folder) -> dt.date | None:
    if run_date is None:
        return run_date_of(folder)
    if isinstance(run_date, dt.datetime):
        return run_date.date()
    if isinstance(run_date, dt.date):
        return run_date
    try:
        return dt.date.fromisoformat(str(run_date))
    except ValueError:
        raise InputError(f"run date must be a date as YYYY-MM-DD; got {run_date!r}") from None


def _dated(date: dt.date | None) -> str:
    """How the report names its run: "run of 2026-12-01", or "undated run"."""
    return f"run of {date.isoformat()}" if date else "undated run"


# ------------------------------------------------------------------------------------------ rows to report
def buildings_to_report(buildings) -> pd.DataFrame:
    """The buildings in damage category 2 and above, worst first (category, then tensile strain)."""
    cat = figures.building_categories(buildings)
    keep = cat >= BUILDING_REPORT_CATEGORY
    rows = buildings[keep]
    strain = (pd.to_numeric(rows["tensile_strain_pct"], errors="coerce").to_numpy(float)
              if "tensile_strain_pct" in rows else np.full(len(rows), np.nan))
    order = np.lexsort((-np.nan_to_num(strain, nan=-np.inf), -cat[keep]))  # the last key sorts first
    return rows.iloc[order]


def utilities_to_report(utilities) -> pd.DataFrame:
    """The pipes near or over their limits (status "near limit" or "exceeds"), highest utilisation first."""
    rows = utilities[utilities["status"].isin(UTILITY_REPORT_STATUSES)]
    return rows.sort_values("utilisation", ascending=False, kind="stable")


def face_stations_to_report(stations) -> pd.DataFrame:
    """The face stations whose window is narrow or closed, in the order of the layer (drive, then chainage)."""
    return stations[stations["status"].isin(FACE_REPORT_STATUSES)]


def _name(path, project_dir: Path | None) -> str:
    """A file of the project as the project file names it (relative to its folder where it lies inside it)."""
    text = str(path)
    parts = text.split(" layer ", 1)  # "<path> layer <name>" as the readers record it
    p = Path(parts[0])
    if project_dir is not None and p.is_absolute():
        try:
            p = p.relative_to(project_dir.resolve())
        except ValueError:
            p = Path(p.name)
    return str(p) + (f" (layer {parts[1]})" if len(parts) > 1 else "")


# ------------------------------------------------------------------------------------------ project inputs
def project_inputs(project) -> dict:
    """The inputs of a project as the report lists them: a JSON-ready dict (a candidate for summary.json).

    Parameters
    ----------
    project : settle.model.Project   As `settle.load_project` returns it.

    Returns
    -------
    dict  project_file; ground (surface, groundwater_level_m, layers with their parameters and keys); drives (with
          their alignment file, diameters, volume loss, K, face, reaches and face-support reaches, and keys);
          rivers; face options (as used); the files of buildings, utilities and points with their counts; output
          settings. Lengths and levels in m, volume loss in %, strengths in kPa, shear modulus in MPa.
    """
    folder = Path(project.path).parent if project.path is not None else None
    file = Path(project.path).name if project.path is not None else "(not read from a file)"
    surface = project.ground.surface
    if surface.level_m is not None:
        surf = {"kind": "flat", "level_m": surface.level_m, "key": "[ground] surface_level_m"}
    elif surface.raster is not None:
        rows, cols = surface.raster.levels_m.shape
        a, b, _, d, e, _ = surface.raster.transform
        surf = {"kind": "dem", "file": _name(surface.source, folder), "cells": [int(cols), int(rows)],
                "cell_size_m": [abs(a) if b == 0 else float(np.hypot(a, d)), abs(e) if d == 0 else float(np.hypot(b, e))],
                "crs_note": surface.raster.crs_note, "key": "[ground] surface_raster"}
    else:
        surf = {"kind": "survey", "file": _name(surface.source, folder), "points": int(len(surface.points_xyz)),
                "key": "[ground] surface_points"}
    strengths = list(project.strengths) or [None] * len(project.ground.layers)
    layers = []
    for k, (layer, s) in enumerate(zip(project.ground.layers, strengths), start=1):
        item = {"key": f"[[ground.layers]] #{k}", "name": layer.name, "top_level_m": layer.top_level_m,
                "unit_weight_kn_m3": layer.unit_weight_kn_m3, "trough_width_k": layer.trough_width_k,
                "behaviour": layer.behaviour}
        if s is not None:
            item.update(friction_angle_deg=s.friction_angle_deg, cohesion_kpa=s.cohesion_kpa,
                        undrained_strength_kpa=s.undrained_strength_kpa, shear_modulus_mpa=s.shear_modulus_mpa)
        layers.append(item)
    drives = []
    for k, d in enumerate(project.drives, start=1):
        drives.append({
            "key": f"[[drives]] #{k}", "name": d.name, "alignment": _name(d.source, folder),
            "vertical": d.vertical, "outer_diameter_m": d.outer_diameter_m, "inner_diameter_m": d.inner_diameter_m,
            "volume_loss_pct": d.volume_loss_pct, "trough_width_k": d.trough_width_k,
            "face_chainage_m": d.face_chainage_m, "start_chainage_m": d.start_chainage_m,
            "reaches": [{"key": f"[[drives.reaches]] #{j}", "from_chainage_m": r.from_chainage_m,
                         "to_chainage_m": r.to_chainage_m, "volume_loss_pct": r.volume_loss_pct,
                         "trough_width_k": r.trough_width_k} for j, r in enumerate(d.reaches, start=1)],
            "face_support": [{"key": f"[[drives.face_support]] #{j}", "from_chainage_m": r.from_chainage_m,
                              "to_chainage_m": r.to_chainage_m, "mode": r.mode}
                             for j, r in enumerate(d.face_support, start=1)],
        })
    rivers = [{"key": f"[[rivers]] #{k}", "name": r.name, "drive": r.drive, "from_chainage_m": r.from_chainage_m,
               "to_chainage_m": r.to_chainage_m, "bed_level_m": r.bed_level_m, "water_level_m": r.water_level_m}
              for k, r in enumerate(project.rivers, start=1)]
    face = None
    if project.strengths:
        from dataclasses import asdict

        from settle.inputs.face_settings import FaceOptions

        face = {k: v for k, v in asdict(project.face or FaceOptions()).items() if isinstance(v, (int, float, str))}
    tables = {}
    for name, obj, count in (("buildings", project.buildings, lambda o: len(o)),
                             ("utilities", project.utilities, lambda o: len(o.ids)),
                             ("points", project.points, lambda o: len(o.ids))):
        tables[name] = None if obj is None else {"key": f"[{name}] file", "file": _name(obj.source, folder),
                                                  "count": int(count(obj))}
    out = project.output
    return {
        "project_file": file,
        "ground": {"surface": surf, "groundwater_level_m": project.ground.groundwater_level_m,
                   "groundwater_key": "[ground] groundwater_level_m", "layers": layers},
        "drives": drives, "rivers": rivers, "face": face, **tables,
        "output": {"grid_spacing_m": out.grid_spacing_m, "contour_levels_mm": list(out.contour_levels_mm),
                   "grid_threshold_mm": out.grid_threshold_mm, "precision_mm": out.precision_mm},
        "report": project.report.as_dict() if getattr(project, "report", None) is not None else None,
    }


# ---------------------------------------------------------------------------------------------- sections
def _title_blocks(run: RunOutputs, date: dt.date, inputs: dict | None, title: str) -> list[Block]:
    """Page 1: the title block (project, client, document number, revision, run date, who prepared, checked and
    approved it), the revision table, where the report comes from, the contents and the caution."""
    s = run.summary
    from settle.version import __version__

    control = _control(inputs)
    outputs = s.get("outputs", {})
    files = [run.gpkg.name, "summary.json"] + [v for k, v in outputs.items() if k not in ("geopackage", "summary")
                                               and isinstance(v, str)]
    for k, v in outputs.items():
        if isinstance(v, list):
            files += [f"{len(v)} style files (.qml, .sld)"] if k == "styles" else [str(x) for x in v]
    given = "not given"
    block = [("Project", s.get("project", run.stem)), ("Client", control.get("client") or given),
             ("Document number", control.get("document_number") or given),
             ("Revision", control.get("revision") or given),
             ("Run date", date.isoformat() if date else "not given (settle run --date YYYY-MM-DD dates a run)"),
             ("Prepared by", control.get("prepared_by") or given), ("Checked by", control.get("checked_by") or given),
             ("Approved by", control.get("approved_by") or given)]
    b = [Block("title", line) for line in textwrap.wrap(title, TITLE_CHARS)]
    b.append(Block("mono", lines=[f"{label:<16} {value}" for label, value in block]))
    b.append(Block("subheading", "Revisions"))
    revisions = control.get("revisions") or []
    if revisions:
        rows = [{"revision": r["revision"], "date": r["date"], "description": r["description"]} for r in revisions]
        b.append(Block("mono", lines=table_lines([("revision", 10, None), ("date", 10, None),
                                                  ("description", 90, None)], rows)))
    else:
        b.append(Block("text", "No revision history given ([[report.revisions]] in the project file)."))
    lines = [f"Project file: {inputs['project_file'] if inputs else 'not given to the report'}",
             f"Coordinate reference system: {s.get('crs', '-')}",
             f"Outputs of the run: {', '.join(dict.fromkeys(files))}",
             f"Written by settle {__version__} from the outputs of the run; nothing was recomputed."]
    return [*b, Block("subheading", "Source"), *[Block("text", t) for t in lines],
            Block("subheading", "Contents"), Block("mono", lines=list(SECTIONS) + list(APPENDICES)),
            Block("subheading", "Caution"),
            Block("text", s.get("caution", "")),
            Block("text", "Buildings in damage category 3 or above need a detailed assessment by a qualified engineer. "
                          "Local codes and the responsible engineer decide what is acceptable.")]


def _inputs_blocks(run: RunOutputs, inputs: dict | None) -> list[Block]:
    b = [Block("break"), Block("heading", SECTIONS[0])]
    b += _drive_blocks(run.frames["route"], inputs)
    if not inputs:
        b.append(Block("text", "The project file was not given to the report, so the volume loss per reach, the "
                               "ground layers and the settings, which are not in the run's outputs, are not listed "
                               "here: give the project file to list them."))
        return b
    return b + _reach_blocks(inputs) + _ground_blocks(inputs) + _settings_blocks(inputs)


def _drive_blocks(route, inputs: dict | None) -> list[Block]:
    """1.1: the drives of the route layer, with their diameters, volume loss and K from the project when given."""
    src = f"Source: the project file {inputs['project_file']}" if inputs else "Source: the route layer"
    b = [Block("subheading", "1.1 Drives")]
    names = [f"D{k}  {d}" for k, d in enumerate(route["drive"], start=1)]
    b.append(Block("mono", lines=names))
    by_name = {d["name"]: d for d in inputs["drives"]} if inputs else {}
    rows = []
    for k, r in enumerate(route.itertuples(index=False), start=1):
        d = by_name.get(r.drive, {})
        rows.append({"drive": f"D{k}", "from m": r.start_chainage_m, "to m": r.end_chainage_m, "length m": r.length_m,
                     "OD m": r.outer_diameter_m, "ID m": d.get("inner_diameter_m"), "VL %": d.get("volume_loss_pct"),
                     "K": d.get("trough_width_k"), "face m": r.face_chainage_m, "min cover m": r.min_cover_m,
                     "lost m3": r.lost_volume_m3})
    cols = [("drive", 5, None), ("from m", 8, ".1f"), ("to m", 8, ".1f"), ("length m", 9, ".1f"),
            ("OD m", 6, ".2f"), ("ID m", 6, ".2f"), ("VL %", 6, ".2f"), ("K", 5, ".2f"), ("face m", 8, ".1f"),
            ("min cover m", 11, ".2f"), ("lost m3", 9, ".3f")]
    b.append(Block("mono", lines=table_lines(cols, rows)))
    b.append(Block("text", "VL: volume loss of the drive outside its reaches; K: trough width factor set for the "
                           "whole drive (\"-\": from the ground layers); face: the face position of a drive under "
                           "construction; lost m3: volume lost along the excavated length. " + src +
                           (" ([[drives]] and their alignment files: "
                            + "; ".join(f"D{k} {d['key']}, {d['alignment']}" for k, d in
                                        enumerate(inputs["drives"], start=1)) + ")." if inputs else ".")))
    return b


def _reach_blocks(inputs: dict) -> list[Block]:
    """1.2: the volume loss [%] and K of each drive outside its reaches, then of each reach."""
    b = [Block("subheading", "1.2 Volume loss per reach")]
    rows = []
    for k, d in enumerate(inputs["drives"], start=1):
        rows.append({"drive": f"D{k}", "from m": None, "to m": None, "VL %": d["volume_loss_pct"],
                     "K": d["trough_width_k"], "key": f"{d['key']} (outside its reaches)"})
        for r in d["reaches"]:
            rows.append({"drive": f"D{k}", "from m": r["from_chainage_m"], "to m": r["to_chainage_m"],
                         "VL %": r["volume_loss_pct"], "K": r["trough_width_k"], "key": f"{d['key']} {r['key']}"})
    b.append(Block("mono", lines=table_lines([("drive", 5, None), ("from m", 8, ".1f"), ("to m", 8, ".1f"),
                                              ("VL %", 6, ".2f"), ("K", 5, ".2f"), ("key", 60, None)], rows)))
    return b


def _surface_text(surf: dict) -> str:
    """The ground surface in one sentence: flat, triangulated survey points, or a DEM."""
    if surf["kind"] == "flat":
        return "Ground surface: flat at {:.2f} m ({}).".format(surf["level_m"], surf["key"])
    if surf["kind"] == "dem":
        cols, rows = surf["cells"]
        dx, dy = surf["cell_size_m"]
        note = f", {surf['crs_note']}" if surf["crs_note"] else ""
        return (f"Ground surface: the DEM {surf['file']} ({cols} x {rows} cells of {dx:g} x {dy:g} m, levels "
                f"interpolated bilinearly between cell centres{note}; {surf['key']}).")
    return f"Ground surface: triangulated through {surf['points']} survey points in {surf['file']} ({surf['key']})."


def _ground_blocks(inputs: dict) -> list[Block]:
    """1.3: the ground surface, the groundwater level, the ground layers and their parameters, and the rivers."""
    b = [Block("subheading", "1.3 Ground and water")]
    g = inputs["ground"]
    surf = g["surface"]
    b.append(Block("text", _surface_text(surf) +
                   f" Groundwater level {g['groundwater_level_m']:.2f} m ({g['groundwater_key']})."))
    rows = [{"key": ly["key"].replace("[[ground.layers]] ", ""), "name": ly["name"], "top m": ly["top_level_m"],
             "gamma kN/m3": ly["unit_weight_kn_m3"], "K": ly["trough_width_k"], "behaviour": ly["behaviour"],
             "phi' deg": ly.get("friction_angle_deg"), "c' kPa": ly.get("cohesion_kpa"),
             "cu kPa": ly.get("undrained_strength_kpa"), "G MPa": ly.get("shear_modulus_mpa")}
            for ly in g["layers"]]
    b.append(Block("mono", lines=table_lines(
        [("key", 4, None), ("name", 26, None), ("top m", 7, ".2f"), ("gamma kN/m3", 11, ".1f"), ("K", 5, ".2f"),
         ("behaviour", 9, None), ("phi' deg", 8, ".1f"), ("c' kPa", 7, ".1f"), ("cu kPa", 7, ".1f"),
         ("G MPa", 6, ".1f")], rows)))
    b.append(Block("text", "Layers from the top down, as [[ground.layers]] #n of the project file; each runs down to "
                           "the next one's top. gamma: total unit weight; K: trough width factor; phi', c': "
                           "effective strength; cu: undrained strength; G: shear modulus (\"-\": not given)."))
    if inputs["rivers"]:
        rows = [{"key": r["key"], "name": r["name"] or "-", "drive": r["drive"], "from m": r["from_chainage_m"],
                 "to m": r["to_chainage_m"], "bed m": r["bed_level_m"], "water m": r["water_level_m"]}
                for r in inputs["rivers"]]
        b.append(Block("text", "Open water over the drives (water level: design high water):"))
        b.append(Block("mono", lines=table_lines(
            [("key", 13, None), ("name", 16, None), ("drive", 30, None), ("from m", 8, ".1f"), ("to m", 8, ".1f"),
             ("bed m", 7, ".2f"), ("water m", 7, ".2f")], rows)))
    return b


def _settings_blocks(inputs: dict) -> list[Block]:
    """1.4: the output settings, the files read, the face-support reaches and the face options as used."""
    b = [Block("subheading", "1.4 Settings and other inputs")]
    o = inputs["output"]
    lines = [f"[output] grid_spacing_m = {o['grid_spacing_m']:g}; contour_levels_mm = "
             f"{', '.join(f'{v:g}' for v in o['contour_levels_mm'])}; grid_threshold_mm = "
             f"{o['grid_threshold_mm']:g}; precision_mm = {o['precision_mm']:g}"]
    for name in ("buildings", "utilities", "points"):
        t = inputs.get(name)
        lines.append(f"[{name}] file = {t['file']} ({t['count']} read)" if t else f"[{name}]: none")
    for k, d in enumerate(inputs["drives"], start=1):
        for r in d["face_support"]:
            lines.append(f"D{k} {r['key']}: {r['mode']} from {r['from_chainage_m']:g} to {r['to_chainage_m']:g} m")
    if inputs.get("face"):
        items = [f"{k} = {v:g}" if isinstance(v, float) else f"{k} = {v}" for k, v in inputs["face"].items()]
        lines.append("[face] as used (given in the project file, or assumed by default): ")
        lines += textwrap.wrap("; ".join(items), MONO_CHARS - 2, initial_indent="  ", subsequent_indent="  ")
    b.append(Block("mono", lines=lines))
    return b


#: What each assessment does, in brief, with the works it cites (written out in section 5,
#: `report_references`), and the status of its relations and values in words for the report's reader.
METHODS = {
    "greenfield": (
        "Greenfield ground movements. Transverse Gaussian trough (Peck 1969) with i = K z0 (O'Reilly & New 1982), K "
        "weighted by layer thickness; three-dimensional trough from point sinks integrated exactly over straight "
        "tunnel elements along the excavated length (Attewell & Woodman 1982; Attewell, Yeates & Selby 1986), which "
        "conserves the lost volume; settlement is half its full value over the launch shaft and the face. Subsurface "
        "troughs after Mair, Taylor & Bracegirdle (1993) in clay and Moh, Ju & Hwang (1996) in sand; horizontal "
        "movements toward the axis and their strains after O'Reilly & New (1982).",
        "Published relations. The subsurface trough widths are used as commonly quoted, not verified against the "
        "original publications, and in mixed ground they are weighted by the share of clay between the point and "
        "the axis (assumed; no published source: confirm for this site where subsurface values govern)."),
    "buildings": (
        "Building damage. Stage 1 screening on the greenfield settlement and slope over each footprint (Rankin 1988; "
        "Mair, Taylor & Burland 1996): below 10 mm and 1/500, negligible risk. Stage 2: each wall a weightless "
        "elastic deep beam following the greenfield profile (Burland & Wroth 1974; Burland 1995), split into "
        "sagging and hogging parts, bending and diagonal strains combined with the average horizontal strain, and "
        "the damage category from the limiting tensile strain (Boscardin & Cording 1989; Burland 1995). The "
        "building takes its worst wall.",
        "The deep-beam equations and the category limits follow the published sources; the stage 1 limits (10 mm, "
        "1/500) are used as commonly quoted from Rankin (1988), not verified against the original. A strain above "
        "0.3 % is reported as category 4 (severe to very severe): no strain criterion separates categories 4 and 5."),
    "utilities": (
        "Buried utilities. Each pipe follows the ground at its own depth: bending strain from the curvature of the "
        "settlement along it, axial strain from the horizontal ground strain along its axis, their combination at "
        "the extreme fibre, and for jointed pipes the joint rotation and opening over one pipe length at the worst "
        "place (Attewell, Yeates & Selby 1986; Bracegirdle et al. 1996). Each demand is divided by its allowable "
        "value; the largest ratio is the utilisation.",
        "The default allowable values per material are assumed; no published source: confirm them for this site "
        "with the asset owner, whose limits govern. Appendix A gives each pipe's allowable values and where each "
        "comes from."),
    "face": (
        "Face support window. Minimum support at the crown: water pressure plus the wedge-and-silo support "
        "(Anagnostou & Kovari 1994) with partial factors, and in cohesive ground the support that holds the Broms & "
        "Bennermark (1967) stability ratio at its working level (3 by default; face movements stay small below "
        "about 2 to 4, Mair 1979, O'Reilly 1988). Where the axis is in clay, the volume loss that support implies "
        "(load factor against a closed face's collapse ratio, Davis et al. 1980; Macklin 1999) is compared with "
        "the design volume loss. Maximum: the blow-out stress (total vertical stress at the crown) and the Delft "
        "cavity-expansion fracture pressure (Luger & Hergarden 1988) at the crown, from the initial stress with "
        "K0 (Jaky 1944), each over its factor. The window is the maximum less the minimum less twice the operating "
        "tolerance.",
        "The wedge-and-silo, Broms & Bennermark, blow-out and Delft relations, the working stability ratio, the "
        "collapse ratio of a closed face, Macklin's fit and Jaky's K0 are used as commonly quoted, not verified "
        "against the original publications. Several default factors and the operating tolerances are assumed, with "
        "no published source: confirm them for this site (the values used are listed in 1.4)."),
    "monitoring": (
        "Back-analysis of monitoring. The volume loss and trough width factor of each drive (or reach) are fitted to "
        "the settlement readings with the same Gaussian troughs (Peck 1969) by robust least squares, following the "
        "guidance of Jones & Clayton (2013) to report how well the fit is determined, not only its best values. "
        "Readings of one point over many days are not independent: the standard errors are cluster-robust, with "
        "the readings clustered by point (Cameron & Miller 2015; CR2 after Bell & McCaffrey 2002), and each "
        "fitted value has a 95 % interval.",
        "Published methods. The trigger levels are the project's; the fit describes the drive so far and is checked "
        "against new readings as the drive proceeds."),
}


def _methods_used(run: RunOutputs) -> set[str]:
    """The methods of the run (keys of `report_references.CITED`): the assessments that ran, a building stiffness
    correction or a pipe bending reduction when any was used, the back-analysis when readings were compared."""
    used = {"greenfield"}
    buildings = run.frames.get("buildings")
    if buildings is not None:
        used.add("buildings")
        if "stiffness_correction" in buildings and (buildings["stiffness_correction"].fillna("none") != "none").any():
            used.add("stiffness_correction")
    utilities = run.frames.get("utilities")
    if utilities is not None:
        used.add("utilities")
        factor = pd.to_numeric(utilities.get("bending_reduction_factor", pd.Series(dtype=float)), errors="coerce")
        if (factor.fillna(1.0) != 1.0).any():
            used.add("pipe_stiffness")
    if "face_stations" in run.layers:
        used.add("face")
    if "readings" in run.layers:
        used.add("monitoring")
    return used


def _methods_blocks(run: RunOutputs) -> list[Block]:
    b = [Block("break"), Block("heading", SECTIONS[1])]
    used = _methods_used(run)
    for n, (key, (text, status)) in enumerate(METHODS.items(), start=1):
        title = text.split(".", 1)[0]
        if key == "monitoring" and key not in used:
            continue  # no readings: the run compared none
        b.append(Block("subheading", f"2.{n} {title}"))
        if key not in used:
            b.append(Block("text", f"{title}: not assessed in this run."))
            continue
        b.append(Block("text", text.split(".", 1)[1].strip()))
        if key == "buildings" and "stiffness_correction" in used:
            b.append(Block("text", "Relative stiffness modification factors M (Potts & Addenbrooke 1997; Franzius, "
                                   "Potts & Burland 2006), read by the engineer from the published charts, were "
                                   "applied to the buildings whose schedule row says so."))
        if key == "utilities" and "pipe_stiffness" in used:
            b.append(Block("text", "A bending reduction factor for the pipe-soil relative stiffness (Vorster et al. "
                                   "2005), given by the engineer, was applied to the pipes whose schedule row "
                                   "says so."))
        b.append(Block("text", f"Status: {status}"))
    b.append(Block("text", "The works cited are listed in full in section 5."))
    return b


def _reference_blocks(run: RunOutputs) -> list[Block]:
    """Section 5: every work the run's methods cite, in full, and nothing else."""
    from .report_references import references_used

    return [Block("break"), Block("heading", SECTIONS[4])] + [
        Block("text", f"- {r}") for r in references_used(_methods_used(run))]


def _results_blocks(run: RunOutputs, figure_paths: list[tuple[Path, str]]) -> list[Block]:
    s = run.summary
    b = [Block("break"), Block("heading", SECTIONS[2]), Block("subheading", "3.1 Key numbers")]
    lines = []
    peak = s.get("max_settlement")
    lines.append(f"Largest settlement on the grid: {peak['settlement_mm']:.1f} mm at x = {peak['x_m']:.1f}, "
                 f"y = {peak['y_m']:.1f} m" if peak else "Largest settlement on the grid: no node above the threshold")
    tilt = s.get("max_tilt")
    if tilt:
        lines.append(f"Largest tilt (ground slope): {tilt['tilt']:.4f} ({_one_in(tilt['tilt'])}) at x = "
                     f"{tilt['x_m']:.1f}, y = {tilt['y_m']:.1f} m")
    for key, word in (("max_tensile_strain", "tensile"), ("max_compressive_strain", "compressive")):
        v = s.get(key)
        if v:
            lines.append(f"Largest {word} horizontal strain: {v['strain_ue']:.0f} microstrain at x = {v['x_m']:.1f}, "
                         f"y = {v['y_m']:.1f} m")
    vc = s.get("volume_check")
    if vc:
        lines.append(f"Volume check: surface trough {_num(vc.get('surface_trough_volume_m3'), '.3f')} m3 against "
                     f"{_num(vc.get('lost_volume_m3'), '.3f')} m3 lost ({_num(vc.get('difference_pct'), '+.4f')} %)")
    grid = s.get("grid", {})
    lines.append(f"Grid: spacing {_num(grid.get('spacing_m'), 'g')} m, {grid.get('nodes_reported', '-')} nodes of "
                 f"{_num(grid.get('threshold_mm'), 'g')} mm or more")
    pts = s.get("points")
    if pts:
        top = pts.get("max_settlement")
        lines.append(f"Reporting points: {pts['count']}" + (f"; largest settlement {top['settlement_mm']:.1f} mm at "
                                                             f"{top['id']}" if top else ""))
    b += [Block("text", t) for t in lines]
    b.append(Block("text", "Settlement is positive downward; strain tensile positive; coordinates in the project "
                           "CRS."))

    b.append(Block("subheading", "3.2 Figures"))
    b += [Block("text", f"Figure {k}. {caption}") for k, (_, caption) in enumerate(figure_paths, start=1)]
    b.append(Block("text", "Offsets across a drive are taken looking up-chainage (in the direction of increasing "
                           "chainage): left negative, right positive, in every figure and table."))
    for k, (png, caption) in enumerate(figure_paths, start=1):
        b.append(Block("image", f"Figure {k}. {caption}", image=png))

    b += _building_blocks(run) + _utility_blocks(run) + _face_blocks(run)
    b.append(Block("subheading", "3.6 Warnings of the run"))
    warnings = s.get("warnings", [])
    b.append(Block("text", f"{len(warnings)} warning(s)." if warnings else "None."))
    b += [Block("text", f"- {w}") for w in warnings]
    text, images = monitoring_blocks(run.frames.get("readings"), s, run.out_dir, _drive_labels(run),
                                     len(figure_paths) + 1)
    more, drawn = probability_blocks(run.frames.get("buildings"), run.frames.get("utilities"), s,
                                     figure_paths[0][0].parent if figure_paths else run.out_dir,
                                     len(figure_paths) + len(images) + 1, _drive_labels(run))
    return b + text + images + more + drawn


def _drive_labels(run: RunOutputs) -> dict[str, str]:
    """Each drive's short label in the report: D1, D2, ... in the order of the route layer."""
    return {d: f"D{k}" for k, d in enumerate(run.frames["route"]["drive"], start=1)}


def _schedule_blocks(run: RunOutputs) -> list[Block]:
    return schedule_blocks(run.frames, _drive_labels(run))


def _subsection_layer(run: RunOutputs, heading: str, name: str, not_assessed: str):
    """A results subsection's heading and the run's layer `name`; with no such layer, the heading and the line
    saying it was not assessed, and None for the layer."""
    b = [Block("subheading", heading)]
    layer = run.frames.get(name)
    if layer is None:
        return b + [Block("text", not_assessed)], None
    return b, layer


def _listed(rows, none_text: str, intro: str, mapping: dict, cols: list, note: str) -> list[Block]:
    """The rows to report as a table between its intro line and its note; one line saying there are none when the
    rows are empty."""
    if rows.empty:
        return [Block("text", none_text)]
    return [Block("text", intro), Block("mono", lines=table_lines(cols, _records(rows, mapping))),
            Block("text", note)]


def _building_blocks(run: RunOutputs) -> list[Block]:
    b, layer = _subsection_layer(run, "3.3 Buildings in damage category 2 and above", "buildings",
                                 "Buildings: not assessed (the run has no buildings layer).")
    if layer is None:
        return b
    cat = figures.building_categories(layer)
    ranges = figures.category_ranges()
    counts = [f"cat. {c} {word}: {int(np.sum(cat == c))}" for c, word, _ in ranges]
    screened = int(layer["screened_out"].fillna(False).astype(bool).sum()) if "screened_out" in layer else None
    text = f"{len(layer)} buildings assessed: " + "; ".join(counts) + f"; not assessed: {int(np.sum(cat < 0))}."
    if screened is not None:
        text += f" {screened} cleared at stage 1 (screening) and counted in category 0."
    b.append(Block("text", text))
    if "worst_category" in layer and layer["worst_category"].notna().any():
        worst = layer["worst_category"].to_numpy(dtype=float, na_value=np.nan)
        during = int(layer["worst_drive"].notna().sum()) if "worst_drive" in layer else 0
        b.append(Block("text", "Worst over the construction sequence (every stage of every drive, and completion): "
                       + "; ".join(f"cat. {c}: {int(np.sum(worst == c))}" for c, _, _ in ranges)
                       + f"; {int(np.nansum(worst > cat))} worse than at the stage of this run, {during} governed "
                       "while a face passes (fields worst_category, worst_drive, worst_face_chainage_m)."))
    rows = buildings_to_report(layer)
    mapping = {"id": "id", "cat": "category", "degree": "category_label",
               "settl mm": "max_settlement_mm", "tilt": lambda r: _one_in(r.get("max_tilt")),
               "strain %": "tensile_strain_pct", "defl ratio": "deflection_ratio",
               "hor strain %": "horizontal_strain_pct",
               "wall": lambda r: f"{_num(r.get('governing_wall'), '.0f')} {r.get('governing_mode') or ''}"}
    cols = [("id", 22, None), ("cat", 3, ".0f"), ("degree", 21, None), ("settl mm", 8, ".1f"), ("tilt", 8, None),
            ("strain %", 8, ".3f"), ("defl ratio", 10, ".2e"), ("hor strain %", 12, ".3f"), ("wall", 12, None)]
    return b + _listed(rows, "No building is in damage category 2 or above.",
                       f"{len(rows)} building(s) in category 2 or above, worst first:", mapping, cols,
                       "strain %: limiting tensile strain of the governing wall; defl ratio: its deflection ratio "
                       "Delta/L; hor strain %: its average horizontal strain (tensile positive); wall: the "
                       "governing wall and whether it sags or hogs. Category 3 and above: detailed assessment. Every "
                       "building is scheduled in A.1.")


def _utility_blocks(run: RunOutputs) -> list[Block]:
    b, layer = _subsection_layer(run, "3.4 Utilities near or over their limits", "utilities",
                                 "Utilities: not assessed (the run has no utilities layer).")
    if layer is None:
        return b
    from settle.assessments.utilities import STATUSES

    counts = layer["status"].value_counts()
    b.append(Block("text", f"{len(layer)} pipes assessed: " +
                   "; ".join(f"{word}: {int(counts.get(word, 0))}" for word in STATUSES) + "."))
    if "worst_status" in layer and layer["worst_status"].notna().any():
        worst = layer["worst_status"].value_counts()
        b.append(Block("text", "Worst over the construction sequence: " +
                       "; ".join(f"{word}: {int(worst.get(word, 0))}" for word in STATUSES) + "."))
    crossing = layer[layer["status"] == "crosses the tunnel"]
    if len(crossing):
        b.append(Block("text", "Crossing the tunnel (no numbers; to be resolved with the asset owner): "
                       + ", ".join(map(str, crossing["id"])) + "."))
    rows = utilities_to_report(layer)
    mapping = {"id": "id", "material": "material", "status": "status", "governs": "governing_check",
               "util": "utilisation", "at m": "governing_chainage_m", "bend ue": "max_bending_strain_ue",
               "axial+ ue": "max_axial_strain_ue", "axial- ue": "min_axial_strain_ue",
               "rot deg": "max_joint_rotation_deg", "open mm": "max_joint_opening_mm"}
    cols = [("id", 14, None), ("material", 14, None), ("status", 11, None), ("governs", 14, None),
            ("util", 5, ".2f"), ("at m", 6, ".1f"), ("bend ue", 7, ".0f"), ("axial+ ue", 9, ".0f"),
            ("axial- ue", 9, ".0f"), ("rot deg", 7, ".3f"), ("open mm", 7, ".2f")]
    return b + _listed(rows, "No pipe is near or over its limits.",
                       f"{len(rows)} pipe(s) near or over their limits, highest utilisation first:", mapping, cols,
                       "util: the largest demand over its allowable value; at m: where along the pipe; ue: "
                       "microstrain (axial tensile positive); rot, open: joint rotation and opening over one pipe "
                       "length. Near-limit and exceeding pipes go to the asset owner for assessment. Every pipe is "
                       "scheduled in A.2 with its allowable values and their sources.")


def _face_counts_block(k: int, st) -> Block:
    """The line on the face stations of drive Dk: how many of each status, the smallest window [kPa] and where [m],
    and how many have low cover."""
    if st.empty:
        return Block("text", f"D{k}: no face stations.")
    counts = st["status"].value_counts()
    worst = st.iloc[int(np.argmin(st["window_kpa"].to_numpy(float)))]
    low = int(st["low_cover"].fillna(False).astype(bool).sum()) if "low_cover" in st else 0
    n = {word: int(counts.get(word, 0)) for word in ("open", "narrow", "closed")}
    return Block("text", f"D{k}: {len(st)} stations: open {n['open']}, narrow {n['narrow']}, closed "
                         f"{n['closed']}; smallest window {worst['window_kpa']:.1f} kPa at "
                         f"{worst['chainage_m']:.1f} m; {low} with low cover.")


def _face_blocks(run: RunOutputs) -> list[Block]:
    b, layer = _subsection_layer(run, "3.5 Face stations with a narrow or closed window", "face_stations",
                                 "Face support window: not assessed (the run has no face_stations layer; the check "
                                 "runs when every ground layer carries its strength).")
    if layer is None:
        return b
    route = run.frames["route"]
    for k, r in enumerate(route.itertuples(index=False), start=1):
        b.append(_face_counts_block(k, layer[layer["drive"] == r.drive]))
    rows = face_stations_to_report(layer)
    b.append(Block("text", f"{len(rows)} station(s) with a narrow or closed window: each is scheduled in A.3, with "
                           "its pressures, support mode and what limits it." if len(rows) else
                   "No face station has a narrow or closed window."))
    return b


CAUTIONS = (
    "Greenfield. The movements are those of the ground without the buildings and pipes in it: no structure or "
    "utility stiffens the ground, unless a building's stiffness correction or a pipe's bending reduction factor was "
    "given, and then the output says so.",
    "The trough is Gaussian; volume loss and the trough width factor K are the engineer's inputs for each drive and "
    "reach, and the results scale with them. The settlement ahead of the face of a closed-face machine is taken as "
    "half the full value (often less in practice); consolidation settlement is not included; in sands the volume of "
    "the subsurface trough is taken as constant with depth.",
    "Buildings are treated as weightless elastic deep beams that follow the greenfield profile. A building in "
    "category 3 (moderate) or above needs a detailed assessment (stage 3) by a qualified engineer, accounting for "
    "its structure, foundations, condition and soil-structure interaction; category 5 is not assigned from strain.",
    "Pipes are assumed to follow the ground, which is conservative for flexible and jointed pipes. The default "
    "allowable values are indicative, not published values; exceedances and near-limit pipes go to the asset owner "
    "for assessment with the owner's own limits.",
    "The face support window gives planning bounds. The operating pressures are set and reviewed by the responsible "
    "engineer under local codes, and adjusted to what the drive shows; slurry infiltration in coarse ground is not "
    "modelled.",
    "These are planning estimates. They support, and do not replace, the judgement of a qualified engineer. Local "
    "codes and the responsible engineer decide what is acceptable, and monitoring during the drive checks the "
    "prediction.",
)


def _caution_blocks(run: RunOutputs) -> list[Block]:
    b = [Block("break"), Block("heading", SECTIONS[3])]
    b += [Block("text", t) for t in CAUTIONS]
    note = run.summary.get("buildings", {}).get("category_5_note") if isinstance(run.summary.get("buildings"),
                                                                                  dict) else None
    if note:
        b.append(Block("text", f"Note from the run: {note}."))
    if run.summary.get("caution"):
        b.append(Block("text", f"The run's caution: {run.summary['caution']}"))
    return b


# ----------------------------------------------------------------------------------------------- figures
def _slug(name: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-") or "drive"


def _section_chainages(run: RunOutputs, sections_chainage_m) -> dict[str, list[float]]:
    """Chainages of the transverse sections per drive: a dict per drive, or one list for every drive (each drive
    takes those within it), or None: per drive, where the settlement along its axis is largest."""
    axes = figures.drive_axes(run.frames["route"])
    if sections_chainage_m is None:
        spacing = figures.grid_spacing(run.summary)
        out = {}
        for a in axes:
            c, s = figures.axis_settlement(run.gpkg, run.layers, a, spacing)
            if np.isfinite(s).any():
                out[a.name] = [float(np.round(c[int(np.nanargmax(s))], 1))]
        return out
    key = "[output] sections_chainage_m"
    if isinstance(sections_chainage_m, dict):
        unknown = [k for k in sections_chainage_m if k not in {a.name for a in axes}]
        if unknown:
            raise InputError(f"{key}: no drive named {unknown[0]!r}; the drives are {[a.name for a in axes]}")
        return {str(k): list(np.atleast_1d(v)) for k, v in sections_chainage_m.items() if len(np.atleast_1d(v))}
    try:
        wanted = [float(c) for c in np.atleast_1d(np.asarray(sections_chainage_m, dtype=float))]
    except (TypeError, ValueError):
        raise InputError(f"{key}: chainages must be numbers in m; got {sections_chainage_m!r}") from None
    out = {a.name: [c for c in wanted if a.start_m - 1e-6 <= c <= a.end_m + 1e-6] for a in axes}
    for c in wanted:
        if not any(c in v for v in out.values()):
            raise InputError(f"{key}: chainage {c:g} m lies in no drive (" + "; ".join(
                f"{a.name}: {a.start_m:.2f} to {a.end_m:.2f} m" for a in axes) + ")")
    return {k: v for k, v in out.items() if v}


def _figures(run: RunOutputs, folder: Path, sections: dict[str, list[float]], paper: str = "A4"
             ) -> list[tuple[Path, str]]:
    """Write the figures of the report into `folder`, drawn for the paper of the figure pages; (path, caption) per
    figure."""
    stem = run.stem
    out = []
    size = {"paper": paper}
    png = figures.plan_map_png(run.gpkg, run.summary, folder / f"{stem}-plan.png", dpi=FIGURE_DPI, **size)
    out.append((png, "Plan: settlement bands and contours, drives with chainage, buildings by damage category, "
                     "pipes by status, face stations with a narrow or closed window."))
    route = run.frames["route"]
    for k, name in enumerate(route["drive"], start=1):
        png = figures.longitudinal_section_png(run.gpkg, run.summary, name,
                                               folder / f"{stem}-section-{k}-{_slug(name)}.png", dpi=FIGURE_DPI,
                                               **size)
        out.append((png, f"Longitudinal section of D{k}, {name}: ground, tunnel and cover, settlement along the axis"
                         + (", face support window." if "face_stations" in run.layers else ".")))
    for k, name in enumerate(route["drive"], start=1):
        if name in sections:
            where = ", ".join(f"{c:g}" for c in sections[name])
            png = figures.transverse_sections_png(run.gpkg, run.summary, name, sections[name],
                                                  folder / f"{stem}-transverse-{k}-{_slug(name)}.png",
                                                  dpi=FIGURE_DPI, **size)
            out.append((png, f"Transverse sections across D{k}, {name}, at chainage {where} m: buildings over it, "
                             "settlement trough, horizontal strain across the route."))
    return out


# ---------------------------------------------------------------------------------------------- the report
def write_report(out_dir, stem: str, run_date=None, project=None, sections_chainage_m=None,
                 keep_figures: bool = False, pdf_folder=None) -> Path:
    """Write the assessment report of a finished run as `<out_dir>/<stem>-report.pdf` (or in `pdf_folder`).

    Parameters
    ----------
    out_dir : str or Path          The run's output folder (holding `<stem>.gpkg` and `summary.json`).
    stem : str                     The project file's stem, which names the GeoPackage.
    run_date : date, datetime or "YYYY-MM-DD", optional
                                   The date printed in the report. Default: the run date given to the run
                                   (run.json's run_date); none when it was given none.
    project : settle.model.Project or path, optional
                                   The project the run was made from, to list its inputs (ground layers, volume loss
                                   per reach, settings) that the outputs do not hold; read again with
                                   `settle.load_project` when a path. Its name and drives must match the run's.
                                   Without it the inputs come from summary.json's "inputs" (the form of
                                   `project_inputs`) when it has them, else only the route layer's are listed.
    sections_chainage_m : sequence, dict or None
                                   Chainages of the transverse sections [m]: one list for every drive (each takes
                                   those within it), or {drive name: list}. Default: per drive, where the settlement
                                   along its axis is largest.
    keep_figures : bool            Also keep the figures as PNGs in out_dir (`<stem>-plan.png`,
                                   `<stem>-section-<n>-<drive>.png`, `<stem>-transverse-<n>-<drive>.png`).
    pdf_folder : str or Path, optional
                                   The folder to write the PDF (and the kept figures) into, when not out_dir; it
                                   must exist.

    Returns
    -------
    Path  The PDF written (through a temporary file and an atomic rename).

    Raises
    ------
    InputError  A missing or unreadable output, a run date that is not a date, a project that is not the run's,
                a section chainage outside every drive.
    """
    run = read_outputs(out_dir, stem)
    date = _run_date(run_date, run.out_dir)
    inputs = _report_inputs(run, project)
    sections = _section_chainages(run, sections_chainage_m)
    final = (Path(pdf_folder or run.out_dir) / f"{stem}-report.pdf").resolve()
    with glyph_check(f"report {final.name}"):
        return _write_pdf(run, date, inputs, sections, final, keep_figures)


def _report_inputs(run: RunOutputs, project) -> dict | None:
    """The inputs the report lists: from the project when given (it must be the run's; its contour levels complete
    the summary's grid), else from summary.json's "inputs" when it has them (they must be in the form of
    `project_inputs`), else None."""
    if project is None:
        inputs = run.summary.get("inputs")
        if inputs:
            try:
                _inputs_blocks(run, inputs)
            except (KeyError, TypeError, ValueError, AttributeError) as exc:
                raise InputError(f"{run.out_dir / 'summary.json'}: inputs is not in the form the report writes "
                                 f"(project_inputs): {type(exc).__name__} {exc}") from None
        return inputs
    if not hasattr(project, "drives"):
        from settle.inputs.project_file import load_project

        project = load_project(project)
    inputs = project_inputs(project)
    ran = list(run.frames["route"]["drive"])
    if project.name != run.summary.get("project") or [d.name for d in project.drives] != ran:
        raise InputError(f"{inputs['project_file']}: is not the project of the run in {run.out_dir} (project "
                         f"{project.name!r} with drives {[d.name for d in project.drives]}; the run has "
                         f"{run.summary.get('project')!r} with drives {ran})")
    grid = dict(run.summary.get("grid") or {})
    if "contour_levels_mm" not in grid:  # so the figures colour the bands as the GIS styles do
        grid["contour_levels_mm"] = list(project.output.contour_levels_mm)
        run.summary = {**run.summary, "grid": grid}
    return inputs


def _control(inputs: dict | None) -> dict:
    """The document control of `[report]` as the inputs carry it ({} when none was given)."""
    return dict((inputs or {}).get("report") or {})


def _write_pdf(run: RunOutputs, date: dt.date, inputs: dict | None, sections: dict, final: Path,
               keep_figures: bool) -> Path:
    """Draw the figures (in a temporary folder, unless kept beside the PDF), lay out the report and write it to
    `final`: once to count the pages, once to write them with "page k of N"."""
    stem = run.stem
    control = _control(inputs)
    paper = control.get("paper") or "A4"
    project = run.summary.get("project", stem)
    title = control.get("title") or f"{project}: ground movement assessment"
    document = " ".join(x for x in (control.get("document_number"),
                                    f"revision {control['revision']}" if control.get("revision") else None) if x)
    with tempfile.TemporaryDirectory(dir=final.parent, prefix=f".{stem}-figures-") as tmp:
        folder = final.parent if keep_figures else Path(tmp)
        figure_paths = _figures(run, folder, sections, paper)
        blocks = (_title_blocks(run, date, inputs, title) + _inputs_blocks(run, inputs) + _methods_blocks(run)
                  + _results_blocks(run, figure_paths) + _caution_blocks(run) + _reference_blocks(run)
                  + _schedule_blocks(run))
        marks = PageMarks(header=f"{title}, {_dated(date)}", footer=document or project)
        core = core_fonts_suffice(blocks, marks)
        rc = {"pdf.use14corefonts": core, "pdf.fonttype": 42, "font.family": "sans-serif"}
        if core:
            rc.update({"font.sans-serif": ["Helvetica"], "font.monospace": ["Courier"]})
        else:
            rc.update({"font.sans-serif": ["DejaVu Sans"], "font.monospace": ["DejaVu Sans Mono"]})
        from settle.version import __version__

        metadata = {"Title": title, "Subject": (f"{document}: " if document else "") +
                    f"ground movement assessment of {project}, {_dated(date)}",
                    "Creator": f"settle {__version__}", "CreationDate": None}
        if control.get("prepared_by"):
            metadata["Author"] = control["prepared_by"]
        with matplotlib.rc_context(rc):
            pages = Renderer(None, marks, paper=paper).render(blocks)

        def draw(path):
            with matplotlib.rc_context(rc), PdfPages(path, metadata=metadata) as pdf:
                Renderer(pdf, marks, pages=pages, paper=paper, check_glyphs=not core).render(blocks)

        return atomic_pdf(final, draw)
