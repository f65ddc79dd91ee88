"""The run folder: every file `settle run`, `settle fit` and `settle report` leave in `--out`.

This is the one place that decides which files a run delivers and under which names; each file is written by the
module of its kind (GeoPackage and styles, CSV tables, figures, PDF), always through a temporary file and an atomic
rename, so a failed run never damages an earlier good result. The command line only calls these functions.
"""
from __future__ import annotations

import json
import re
from pathlib import Path

from settle.errors import InputError
from settle.procedure.monitoring_steps import FitOutcome, Monitoring
from settle.procedure.results import Result
from settle.procedure.summary import summarise

from .frames import frames
from .geopackage import write_geopackage, write_text_atomic
from .tables import operator_csv_text, write_rows_csv


def check_out_folder(out) -> Path:
    """The `--out` folder as a Path; InputError when something that is not a folder has its name."""
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out}: exists and is not a folder")
    return out


def slug(name: str) -> str:
    """A drive's name as a file name part: lower case letters and digits joined by "-"."""
    return re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-") or "drive"


def write_run(result: Result, out: Path, stem: str, monitoring: Monitoring | None = None,
              report: bool = False) -> dict:
    """Write a run's outputs into `out` (created if missing) and return its summary (summary.json's content).

    The GeoPackage `<stem>.gpkg` with its styles (and the .qml/.sld files beside it), the optional settlement
    GeoTIFF, buildings.csv, utilities.csv, the face pressure table and sections, the monitored sections, then
    summary.json, and last the PDF report when asked.
    """
    project = result.project
    layers = frames(result)
    if monitoring:
        layers["readings"] = _readings_layer(project, monitoring)
    out.mkdir(parents=True, exist_ok=True)
    outputs = _write_layers(result, layers, out, stem)
    outputs.update(_write_tables(result, out))
    if monitoring:
        outputs["readings_sections"] = _write_sections(project, monitoring, out)
    if report:
        outputs["report"] = f"{stem}-report.pdf"
    summary = summarise(result, outputs=outputs)
    if monitoring:
        summary["readings"] = _readings_summary(layers["readings"], monitoring.readings)
    write_text_atomic(out / "summary.json", json.dumps(summary, indent=2) + "\n")
    if report:
        write_run_report(project, out, stem)
    return summary


def _write_layers(result: Result, layers: dict, out: Path, stem: str) -> dict:
    """The GeoPackage with its styles, the style files beside it and the optional GeoTIFF; their names."""
    from .styles import styles_hook, write_style_files

    levels = result.project.output.contour_levels_mm
    gpkg = out / f"{stem}.gpkg"
    write_geopackage(gpkg, layers, extra=styles_hook(layers, levels))
    styles = write_style_files(out, stem, layers=layers, levels_mm=levels)
    outputs = {"geopackage": gpkg.name, "summary": "summary.json", "styles": sorted(p.name for p in styles)}
    if result.project.output.settlement_geotiff:
        from .raster import write_settlement_geotiff

        tif = write_settlement_geotiff(result.tiles, result.project.crs, out / f"{stem}-settlement.tif")
        outputs["settlement_geotiff"] = tif.name
    return outputs


def _write_tables(result: Result, out: Path) -> dict:
    """buildings.csv, utilities.csv, and the face pressure table with a section figure per drive; their names."""
    outputs = {}
    if result.buildings is not None:
        from settle.assessments.building_tables import report_rows

        rows = report_rows(result.project.buildings, result.buildings)
        outputs["buildings_table"] = write_rows_csv(out / "buildings.csv", rows)
    if result.utilities is not None:
        from settle.assessments.utility_tables import utility_rows

        rows = utility_rows(result.project.utilities, result.utilities, geometry=False)
        outputs["utilities_table"] = write_rows_csv(out / "utilities.csv", rows)
    if result.face:
        outputs.update(_write_face(result, out))
    return outputs


def _write_face(result: Result, out: Path) -> dict:
    """The operator's pressure table (CSV) and a longitudinal section (PNG) per drive."""
    from .face_section import face_section_png

    table = out / "face_pressures.csv"
    write_text_atomic(table, operator_csv_text(result.face))
    figures = []
    for stations, drive in zip(result.face, result.drives):
        path = out / f"face_section_{slug(drive.name)}.png"
        face_section_png(stations, drive, path, layers=result.project.ground.layers)
        figures.append(path.name)
    return {"face_pressures": table.name, "face_sections": figures}


def _readings_layer(project, monitoring: Monitoring):
    """The `readings` layer: each point's latest reading, prediction, difference, fitted value, trigger status."""
    from settle.monitoring.fitting import comparison

    from .frames import readings_frame

    amber, red = project.monitoring
    compared = comparison(project, monitoring.readings, amber, red, fits=monitoring.analysis.fits)
    return readings_frame(compared, project.crs)


def _write_sections(project, monitoring: Monitoring, out: Path) -> list[str]:
    """A figure per monitored cross-section: readings against the design and the fitted troughs."""
    from settle.monitoring.sections import monitored_sections

    from .monitoring_figures import section_png

    names = []
    for section in monitored_sections(project, monitoring.readings, monitoring.analysis):
        path = out / f"section_{slug(section.drive)}_{section.chainage_m:.0f}.png"
        section_png(section, path)
        names.append(path.name)
    return names


def _readings_summary(layer, readings) -> dict:
    """Counts for summary.json: points compared, by trigger status, and rows left out of the readings file."""
    counts = layer["trigger_status"].value_counts()
    return {"points": len(layer), "by_trigger_status": {k: int(v) for k, v in counts.items()},
            "rows_left_out": readings.left_out_count}


def write_run_report(project, out: Path, stem: str, date=None) -> Path:
    """The PDF assessment report of a finished run in `out`, from its outputs (nothing recomputed)."""
    from .report import write_report

    return write_report(out, stem, date, project=project,
                        sections_chainage_m=list(project.output.sections_chainage_m) or None)


def write_fit(fit: FitOutcome, out: Path, stem: str) -> dict:
    """Write what `settle fit` delivers into `out` (created if missing): `<stem>-fitted.toml`, forecast.csv (when
    anything lies ahead of the face) and fit.json. Returns the paths written, by kind."""
    out.mkdir(parents=True, exist_ok=True)
    fitted_path = out / f"{stem}-fitted.toml"
    write_text_atomic(fitted_path, fit.fitted_project_text)
    written = {"fitted_project": fitted_path}
    if fit.forecast_rows:
        written["forecast"] = out / write_rows_csv(out / "forecast.csv", fit.forecast_rows)
    report = dict(fit.report, outputs={k: p.name for k, p in written.items()})
    written["fit"] = out / "fit.json"
    write_text_atomic(written["fit"], json.dumps(report, indent=2, allow_nan=False) + "\n")
    return written
