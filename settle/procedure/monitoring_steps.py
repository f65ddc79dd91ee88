"""The monitoring steps of a run, in the engineer's order: read the readings against the project, back-analyse them,
and for `settle fit` make what the fit delivers (the fitted project file's text, fit.json's content and the forecast
ahead of the face). Nothing here writes a file: `gis_out.run_folder` does.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError
from ..inputs.model import Project
from ..inputs.readings import Readings, read_readings
from ..monitoring.fitted_file import fitted_project_toml
from ..monitoring.fitting import BackAnalysis, back_analysis, fit_report
from .forecast import FORECAST_FIELDS, forecast_ahead
from .summary import CAUTION

#: What fit.json says of the forecast.
FORECAST_NOTE = ("buildings (damage category) and utilities (status) ahead of the latest face, assessed with the "
                 "design and the fitted values, every drive complete")


@dataclass
class Monitoring:
    """Readings as read against the project, and their back-analysis."""

    readings: Readings
    analysis: BackAnalysis


@dataclass
class FitOutcome:
    """What `settle fit` delivers, ready to write."""

    readings: Readings
    analysis: BackAnalysis
    fitted_project_text: str  # the project file with the fitted values (paths relative to the output folder)
    report: dict  # fit.json's content, without its "outputs"
    forecast_rows: list[dict] = field(default_factory=list)  # FORECAST_FIELDS per item ahead of the face


def read_monitoring(project: Project, readings_path) -> Monitoring:
    """Readings and their back-analysis, for `settle run --readings`; the project must give trigger levels."""
    if project.monitoring is None:
        raise InputError(f"{project.path}: --readings needs trigger levels: add [monitoring] amber_mm and red_mm")
    readings = read_readings(readings_path, project)
    return Monitoring(readings, back_analysis(project, readings))


def fit_monitoring(project: Project, project_path, readings_path, out_dir: Path, *, per_reach: bool = False,
                   outlier_limit: float = 3.0, min_face_past_m: float | None = None) -> FitOutcome:
    """Back-analysis of the readings, the fitted project file's text, fit.json's content and the forecast."""
    readings = read_readings(readings_path, project)
    if not outlier_limit > 0:
        raise InputError(f"--outlier-limit must be more than 0; got {outlier_limit:g}")
    if not math.isfinite(outlier_limit):
        raise InputError(f"--outlier-limit must be a finite number of standard deviations; got {outlier_limit:g}")
    if min_face_past_m is not None and not math.isfinite(min_face_past_m):
        raise InputError(f"--min-face-past-m must be a finite number of metres; got {min_face_past_m:g}")
    analysis = back_analysis(project, readings, per_reach=per_reach, outlier_limit=outlier_limit,
                             min_face_past_m=min_face_past_m)
    fitted_text = fitted_project_toml(project_path, analysis.fits, out_dir=out_dir)
    report = fit_report(project, readings, analysis)
    forecast = forecast_ahead(project, readings, analysis)
    report["forecast"] = {"items_ahead_of_face": len(forecast), "changed": [r for r in forecast if r["changed"]],
                          "note": FORECAST_NOTE}
    report["caution"] = CAUTION
    rows = [{k: r[k] for k in FORECAST_FIELDS} for r in forecast]
    return FitOutcome(readings, analysis, fitted_text, report, rows)
