"""The run folder: every file `settle run`, `settle fit` and `settle report` leave in `--out`.

This is the one place that decides which files a run delivers and under which names. Each file is written by the
module of its kind (GeoPackage and styles, CSV tables, figures, PDF) into a staging folder, and the set is swapped in
at the end as one (`gis_out.run_set`): a run killed or failing at any moment leaves the complete earlier set, or the
complete new one, never a mix. run.json records what made the set: the tool version, the command and its options,
the sha256 of every input read and of every output. The same inputs give the same bytes: the only date a set carries
is the run date the user gives (`--date`); without one, the GeoPackage's last_change is 1970-01-01T00:00:00Z.
The command line only calls these functions.
"""
from __future__ import annotations

import json
import os
import re
import shlex
from pathlib import Path

from settle.errors import InputError
from settle.inputs.file_hashes import sha256_of
from settle.procedure.monitoring_steps import FitOutcome, Monitoring
from settle.procedure.results import Result
from settle.procedure.run_record import RunRecord
from settle.procedure.summary import CAUTION, summarise
from settle.version import __version__

from .frames import frames
from .geopackage import OutputError, write_geopackage, write_text_atomic
from .run_set import MANIFEST, RunSet, changed_files, read_manifest
from .tables import operator_csv_text, write_rows_csv

#: gpkg_contents.last_change of a run given no date: a fixed time, so the file is reproducible.
UNDATED_LAST_CHANGE = "1970-01-01T00:00:00.000Z"


def check_out_folder(out) -> Path:
    """The `--out` folder as a Path; InputError when something that is not a folder has its name."""
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out}: exists and is not a folder")
    return out


def output_stem(project_file) -> str:
    """The stem that names a run's outputs (`<stem>.gpkg`): the project file's name without its suffix. InputError
    when it holds a control character (a newline, a tab), which would make file names that scripts cannot use."""
    stem = Path(project_file).stem
    bad = sorted({c for c in stem if ord(c) < 32 or ord(c) == 127})
    if bad or not stem:
        shown = ", ".join(f"U+{ord(c):04X}" for c in bad) or "an empty name"
        raise InputError(f"{str(project_file)!r}: the project file's name names the outputs and must not hold control "
                         f"characters; it holds {shown}: rename the file")
    return stem


def slug(name: str) -> str:
    """A drive's name as a file name part: lower case letters and digits joined by "-"."""
    return re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-") or "drive"


def write_run(result: Result, out: Path, stem: str, monitoring: Monitoring | None = None,
              report: bool = False, record: RunRecord | None = None, design=None) -> dict:
    """Write a run's outputs into `out` (created if missing) as one set and return its summary (summary.json's
    content).

    The GeoPackage `<stem>.gpkg` with its styles (and the .qml/.sld files beside it), the optional settlement
    GeoTIFF, buildings.csv, utilities.csv, the face pressure table and sections, the monitored sections,
    summary.json, the PDF report when asked, and run.json. `design`, when given, is the project whose prediction the
    readings are compared with (the site service's fitted run keeps the design's); default the run's own.
    """
    record = record or RunRecord()
    with _writing(out) as run_set:
        summary = _write_run_files(result, run_set.stage, stem, monitoring, report, record, design)
        run_set.commit(_manifest("run", record, out))
    return summary


def _write_run_files(result: Result, stage: Path, stem: str, monitoring, report: bool, record: RunRecord,
                     design=None) -> dict:
    """Every file of a run, written into the staging folder; the summary."""
    project = design or result.project
    layers = frames(result)
    if monitoring:
        layers["readings"] = _readings_layer(project, monitoring)
    outputs = _write_layers(result, layers, stage, stem, record.run_date)
    outputs.update(_write_tables(result, stage))
    if monitoring:
        outputs["readings_sections"] = _write_sections(project, monitoring, stage)
    if report:
        outputs["report"] = f"{stem}-report.pdf"
    summary = summarise(result, outputs=outputs)
    if monitoring:
        summary["readings"] = _readings_summary(project, layers["readings"], monitoring)
    write_text_atomic(stage / "summary.json", json.dumps(summary, indent=2) + "\n")
    if report:
        _report_pdf(result.project, stage, stage, stem, record.run_date)
    return summary


class _writing:
    """`RunSet(out)` whose failures while writing become OutputError: one line, the earlier set untouched."""

    def __init__(self, out: Path):
        self.run_set = RunSet(out)

    def __enter__(self) -> RunSet:
        try:
            return self.run_set.__enter__()
        except OSError as exc:
            raise OutputError(f"{self.run_set.folder}: cannot be written: {exc}") from exc

    def __exit__(self, kind, error, trace):
        self.run_set.__exit__(kind, error, trace)
        if not isinstance(error, Exception) or isinstance(error, InputError) or os.environ.get("SETTLE_DEBUG"):
            return False
        where = ("the new outputs are committed and the next settle command on this folder finishes moving them "
                 "into place") if self.run_set.committed else "the earlier outputs are untouched"
        reason = str(error) if isinstance(error, OutputError) else f"{type(error).__name__}: {error}"
        raise OutputError(f"{self.run_set.folder}: {reason}; {where}") from error


def _manifest(kind: str, record: RunRecord, out: Path) -> dict:
    """run.json's content but the outputs (`RunSet.commit` adds them)."""
    folder = Path(out).resolve()
    names = {path: Path(os.path.relpath(path, folder)).as_posix() for path in record.inputs}
    return {"settle_version": __version__, "kind": kind, "command": record.command, "options": record.options,
            "run_date": record.run_date, "inputs": {names[p]: digest for p, digest in record.inputs.items()},
            "input_locations": {names[p]: p.as_posix() for p in record.inputs}, "caution": CAUTION}


def _write_layers(result: Result, layers: dict, out: Path, stem: str, run_date: str | None) -> dict:
    """The GeoPackage with its styles, the style files beside it and the optional GeoTIFF; their names."""
    from .styles import styles_hook, write_style_files

    levels = result.project.output.contour_levels_mm
    gpkg = out / f"{stem}.gpkg"
    last_change = f"{run_date}T00:00:00.000Z" if run_date else UNDATED_LAST_CHANGE
    write_geopackage(gpkg, layers, extra=styles_hook(layers, levels), last_change=last_change)
    styles = write_style_files(out, stem, layers=layers, levels_mm=levels)
    outputs = {"geopackage": gpkg.name, "summary": "summary.json", "styles": sorted(p.name for p in styles)}
    if result.project.output.settlement_geotiff:
        from .raster import write_settlement_geotiff

        tif = write_settlement_geotiff(result.tiles, result.project.crs, out / f"{stem}-settlement.tif")
        outputs["settlement_geotiff"] = tif.name
    if result.project.output.dxf:
        from .dxf_drawing import write_dxf

        outputs["dxf"] = write_dxf(out / f"{stem}.dxf", layers, result.drives, levels_mm=levels).name
    return outputs


def _write_tables(result: Result, out: Path) -> dict:
    """buildings.csv, utilities.csv, and the face pressure table with a section figure per drive; their names."""
    outputs = {}
    if result.buildings is not None:
        from settle.assessments.building_tables import report_rows

        rows = report_rows(result.project.buildings, result.buildings, result.building_envelope)
        outputs["buildings_table"] = write_rows_csv(out / "buildings.csv", rows)
    if result.utilities is not None:
        from settle.assessments.utility_tables import utility_rows

        rows = utility_rows(result.project.utilities, result.utilities, geometry=False,
                            envelope=result.utility_envelope)
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
        amber, red = project.monitoring
        section_png(section, path, amber_mm=amber, red_mm=red)
        names.append(path.name)
    return names


def _readings_summary(project, layer, monitoring: Monitoring) -> dict:
    """For summary.json: points compared, by trigger status (every status, in order, zeros included), the trigger
    levels, rows left out of the readings file, and the back-analysed fits with their 95 % intervals (as fit.json
    gives them)."""
    from settle.monitoring.fitting import STATUS_AMBER, STATUS_CLEAR, STATUS_RED, fit_report

    counts = layer["trigger_status"].value_counts()
    amber, red = project.monitoring
    return {"points": len(layer),
            "by_trigger_status": {k: int(counts.get(k, 0)) for k in (STATUS_CLEAR, STATUS_AMBER, STATUS_RED)},
            "trigger_levels_mm": {"amber_mm": amber, "red_mm": red},
            "rows_left_out": monitoring.readings.left_out_count,
            "fits": fit_report(project, monitoring.readings, monitoring.analysis)["fits"]}


def write_run_report(project, out: Path, stem: str, date=None, record: RunRecord | None = None) -> Path:
    """The PDF assessment report of a finished run in `out`, from its outputs (nothing recomputed), added to the
    run's set. Refused (InputError naming what changed and the command that re-runs) when the run's inputs or
    outputs changed since the run, or when `project` is not the run's project file."""
    out = Path(out)
    manifest = _current_manifest(project, out)
    pdf = f"{stem}-report.pdf"
    with _writing(out) as run_set:
        _report_pdf(project, out, run_set.stage, stem, date or manifest.get("run_date"))
        options = dict(manifest.get("options") or {}, report=True)
        record = RunRecord(command=manifest.get("command"), options=options, run_date=manifest.get("run_date"))
        kept = set(manifest.get("outputs", {})) - {pdf}
        run_set.commit(dict(_manifest("run", record, out), inputs=manifest.get("inputs", {}),
                            input_locations=manifest.get("input_locations", {})), kept=kept)
    return (out / pdf).resolve()


def _current_manifest(project, out: Path) -> dict:
    """The run folder's run.json, checked: its inputs and outputs are as the run left them, and `project` is its
    project file. InputError otherwise, naming what changed and the command that re-runs."""
    manifest = read_manifest(out)
    project_file = getattr(project, "path", None) or project
    again = f"settle run {shlex.quote(str(project_file))} --out {shlex.quote(str(out))}"
    if manifest is None:
        raise InputError(f"{out}: holds no {MANIFEST} (not a finished run of this version of settle); "
                         f"re-run: {again}")
    if manifest.get("command"):
        again = shlex.join(manifest["command"])
    for section, what in (("inputs", "the inputs changed since the run"),
                          ("outputs", "the outputs changed since the run")):
        changed = changed_files(manifest, out, section)
        if changed:
            shown = ", ".join(changed[:5]) + (" ..." if len(changed) > 5 else "")
            raise InputError(f"{out}: {what}: {shown}; re-run: {again}")
    recorded = set((manifest.get("inputs") or {}).values())
    if Path(project_file).is_file() and sha256_of(project_file) not in recorded:
        raise InputError(f"{project_file}: is not the project file of the run in {out}; re-run: {again}")
    return manifest


def _report_pdf(project, source: Path, target: Path, stem: str, date=None) -> Path:
    """The PDF report of the run whose outputs lie in `source`, written into `target`."""
    from .report import write_report

    return write_report(source, stem, date, project=project,
                        sections_chainage_m=list(project.output.sections_chainage_m) or None,
                        pdf_folder=target)


def write_fit(fit: FitOutcome, out: Path, stem: str, record: RunRecord | None = None) -> dict:
    """Write what `settle fit` delivers into `out` (created if missing) as one set: `<stem>-fitted.toml`,
    forecast.csv (when anything lies ahead of the face), fit.json and run.json. Returns the paths, by kind."""
    record = record or RunRecord()
    written = {"fitted_project": out / f"{stem}-fitted.toml"}
    if fit.forecast_rows:
        written["forecast"] = out / "forecast.csv"
    written["fit"] = out / "fit.json"
    with _writing(out) as run_set:
        stage = run_set.stage
        write_text_atomic(stage / written["fitted_project"].name, fit.fitted_project_text)
        if fit.forecast_rows:
            write_rows_csv(stage / "forecast.csv", fit.forecast_rows)
        report = dict(fit.report, outputs={k: p.name for k, p in written.items() if k != "fit"})
        write_text_atomic(stage / "fit.json", json.dumps(report, indent=2, allow_nan=False) + "\n")
        run_set.commit(_manifest("fit", record, out))
    return written
