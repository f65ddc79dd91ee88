"""The command line: `settle run PROJECT.toml --out DIR`.

Exit status: 0 done; 2 a mistake in the input (one message naming the file, key or row); 1 the run could not write
its outputs (for example the GeoPackage is open for editing elsewhere).
"""
from __future__ import annotations

import argparse
import json
import re
import sys
import textwrap
from pathlib import Path

from . import __version__
from .errors import InputError
from .summary import CAUTION



def _paragraphs(*texts: str) -> str:
    """Help text: each paragraph wrapped to 100 columns (the formatter keeps the blank lines between them)."""
    return "\n\n".join(textwrap.fill(t, 100) for t in texts)


class _Progress:
    """A one-line progress indicator on a terminal; silent when stderr is not one."""

    def __init__(self, enabled: bool):
        self.enabled = enabled
        self.shown = False

    def __call__(self, stage: str, fraction: float) -> None:
        if self.enabled:
            sys.stderr.write(f"\r{stage + ':':<14}{100 * fraction:5.1f} %")
            sys.stderr.flush()
            self.shown = True

    def done(self) -> None:
        if self.shown:
            sys.stderr.write("\r" + " " * 40 + "\r")
            sys.stderr.flush()


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="settle",
        description=_paragraphs("settle: greenfield ground movements, building damage, utility strains and face "
                                "support windows along pipejacked and microtunnelled drives, from one project file "
                                "to a GeoPackage, tables, figures and a report.", CAUTION),
        formatter_class=argparse.RawDescriptionHelpFormatter
    )
    parser.add_argument("--version", action="version", version=f"settle {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    run = commands.add_parser(
        "run",
        help="compute greenfield movements for a project and write the GeoPackage and summary",
        description=_paragraphs(
            "Compute greenfield ground movements along every drive of PROJECT (a TOML project file), and the "
            "building damage, utility and face support checks the project asks for, and write "
            "DIR/<project file stem>.gpkg (layers route, route_reaches, route_profile, grid, settlement_bands, "
            "settlement_lines, points, and buildings, building_walls, utilities, utility_critical_points, "
            "face_stations, readings when computed, each with a default style), DIR/summary.json, the CSV tables "
            "and figures. Outputs are written to temporary files and moved into place, so a failed run never "
            "damages the result of an earlier one.",
            CAUTION,
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    run.add_argument("project", metavar="PROJECT.toml", help="the project file")
    run.add_argument("--out", metavar="DIR", required=True, help="folder for the outputs (created if missing)")
    run.add_argument("--quiet", action="store_true", help="print nothing but errors")
    run.add_argument("--report", action="store_true",
                     help="also write DIR/<stem>-report.pdf, the assessment report (as `settle report` does)")
    run.add_argument("--readings", metavar="READINGS.csv",
                     help="monitoring readings: adds the `readings` layer (latest reading, prediction, difference, "
                          "trigger status against [monitoring] amber_mm and red_mm) and a figure per monitored "
                          "cross-section")

    report = commands.add_parser(
        "report",
        help="write the PDF assessment report of a finished run, without recomputing",
        description=_paragraphs(
            "Write DIR/<stem>-report.pdf from the outputs a finished `settle run PROJECT.toml --out DIR` left in "
            "DIR (GeoPackage and summary.json), with the inputs read from PROJECT.toml: title block, inputs and "
            "where they came from, methods with their references, results with figures and tables, assumptions and "
            "the cautions of the trade. Nothing is recomputed.",
            CAUTION,
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    report.add_argument("project", metavar="PROJECT.toml", help="the project file the run was made from")
    report.add_argument("--out", metavar="DIR", required=True, help="the run's output folder")
    report.add_argument("--date", metavar="YYYY-MM-DD",
                        help="the date printed in the report (default: the date the run wrote its GeoPackage)")

    fit = commands.add_parser(
        "fit",
        help="back-analyse volume loss and trough width from monitoring readings",
        description=_paragraphs(
            "Back-analyse the volume loss and trough width factor K that the monitoring readings show, per drive "
            "(or per reach), against the same three-dimensional model `settle run` uses, with each reading's face "
            "position. Writes DIR/fit.json (values, standard errors, readings used, residual RMS, outliers), "
            "DIR/<stem>-fitted.toml (the project with the fitted values, which `settle run` accepts unchanged) "
            "and, when the project has buildings or utilities, DIR/forecast.csv: what lies ahead of the face, "
            "assessed again with the fitted values, marked where its category or status changed.",
            CAUTION,
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    fit.add_argument("project", metavar="PROJECT.toml", help="the project file")
    fit.add_argument("readings", metavar="READINGS.csv",
                     help="readings: point_id, date (ISO 8601), settlement_mm, face_chainage_m, and x, y, depth_m "
                          "or the [points] of the project; a drive column when there are several drives")
    fit.add_argument("--out", metavar="DIR", required=True, help="folder for the outputs (created if missing)")
    fit.add_argument("--per-reach", action="store_true", help="fit each reach of a drive on its own")
    fit.add_argument("--outlier-limit", type=float, default=3.0, metavar="SIGMA",
                     help="a reading further than this many robust standard deviations from the fit is an outlier "
                          "(default 3)")
    fit.add_argument("--min-face-past-m", type=float, default=None, metavar="M",
                     help="fit only readings taken with the face at least this far past the point (default: all)")
    fit.add_argument("--quiet", action="store_true", help="print nothing but errors")
    return parser


def _run(args) -> int:
    from .assessment import run
    from .project import load_project
    from .summary import summarise

    project = load_project(args.project)
    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out}: exists and is not a folder")
    monitoring = _read_for_monitoring(project, args.readings) if args.readings else None
    progress = _Progress(sys.stderr.isatty() and not args.quiet)
    try:
        result = run(project, progress)
    finally:
        progress.done()

    import gis_out

    layers = gis_out.frames(result)
    if monitoring:
        layers["readings"] = _readings_layer(project, *monitoring)
    out.mkdir(parents=True, exist_ok=True)
    stem = Path(args.project).stem
    gpkg = out / f"{stem}.gpkg"
    summary_path = out / "summary.json"
    from gis_out.styles import styles_hook, write_style_files

    levels = project.output.contour_levels_mm
    gis_out.write_geopackage(gpkg, layers, extra=styles_hook(layers, levels))
    styles = write_style_files(out, stem, layers=layers, levels_mm=levels)
    outputs = {"geopackage": gpkg.name, "summary": summary_path.name, "styles": sorted(p.name for p in styles)}
    if result.project.output.settlement_geotiff:
        from gis_out.raster import write_settlement_geotiff

        tif = write_settlement_geotiff(result.tiles, result.project.crs, out / f"{stem}-settlement.tif")
        outputs["settlement_geotiff"] = tif.name
    if result.buildings is not None:
        from .buildings import report_rows

        rows = report_rows(result.project.buildings, result.buildings)
        outputs["buildings_table"] = _write_rows_csv(out / "buildings.csv", rows)
    if result.utilities is not None:
        outputs["utilities_table"] = _write_rows_csv(out / "utilities.csv", _utility_table(result))
    if result.face:
        outputs.update(_write_face(result, out))
    if monitoring:
        outputs["readings_sections"] = _write_sections(project, *monitoring, out)
    if args.report:
        outputs["report"] = f"{stem}-report.pdf"
    summary = summarise(result, outputs=outputs)
    if monitoring:
        summary["readings"] = _readings_summary(layers["readings"], monitoring[0])
    gis_out.write_text_atomic(summary_path, json.dumps(summary, indent=2) + "\n")
    if args.report:
        _write_report(project, out, stem)

    if not args.quiet:
        if monitoring:
            for message in monitoring[0].left_out_messages():
                print(f"warning: left out: {message}", file=sys.stderr)
        for warning in result.warnings:
            print(f"warning: {warning}", file=sys.stderr)
        from .terminal import summary_table

        print(summary_table(summary, out))
    return 0


def _write_report(project, out: Path, stem: str, date=None) -> Path:
    from gis_out.report import write_report

    return write_report(out, stem, date, project=project,
                        sections_chainage_m=list(project.output.sections_chainage_m) or None)


def _report(args) -> int:
    """`settle report`: the PDF from a finished run's outputs."""
    from .project import load_project

    project = load_project(args.project)
    path = _write_report(project, Path(args.out), Path(args.project).stem, args.date)
    print(f"wrote {path}")
    return 0


def _read_for_monitoring(project, readings_path):
    """Readings and their back-analysis; the project must give trigger levels."""
    from .fitting import back_analysis
    from .readings import read_readings

    if project.monitoring is None:
        raise InputError(f"{project.path}: --readings needs trigger levels: add [monitoring] amber_mm and red_mm")
    readings = read_readings(readings_path, project)
    return readings, back_analysis(project, readings)


def _readings_layer(project, readings, analysis):
    """The `readings` layer: each point's latest reading, prediction, difference, fitted value, trigger status."""
    from gis_out.frames import readings_frame

    from .fitting import comparison

    amber, red = project.monitoring
    return readings_frame(comparison(project, readings, amber, red, fits=analysis.fits), project.crs)


def _write_sections(project, readings, analysis, out: Path) -> list[str]:
    """A figure per monitored cross-section: readings against the design and the fitted troughs."""
    from gis_out.monitoring_figures import section_png

    from .monitoring import monitored_sections

    names = []
    for section in monitored_sections(project, readings, analysis):
        path = out / f"section_{_slug(section.drive)}_{section.chainage_m:.0f}.png"
        section_png(section, path)
        names.append(path.name)
    return names


def _readings_summary(layer, readings) -> dict:
    """Counts for summary.json: points compared, by trigger status, and rows left out of the readings file."""
    counts = layer["trigger_status"].value_counts()
    return {"points": len(layer), "by_trigger_status": {k: int(v) for k, v in counts.items()},
            "rows_left_out": readings.left_out_count}


def _fit(args) -> int:
    """`settle fit`: back-analysis, fitted project file, forecast ahead of the face."""
    import gis_out

    from .fitted_file import fitted_project_toml
    from .fitting import back_analysis, fit_report
    from .monitoring import FORECAST_FIELDS, forecast_ahead
    from .project import load_project
    from .readings import read_readings

    project = load_project(args.project)
    readings = read_readings(args.readings, project)
    if not args.outlier_limit > 0:
        raise InputError(f"--outlier-limit must be more than 0; got {args.outlier_limit:g}")
    analysis = back_analysis(project, readings, per_reach=args.per_reach, outlier_limit=args.outlier_limit,
                             min_face_past_m=args.min_face_past_m)
    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out}: exists and is not a folder")
    out.mkdir(parents=True, exist_ok=True)
    stem = Path(args.project).stem
    fitted_path = out / f"{stem}-fitted.toml"
    fitted_text = fitted_project_toml(args.project, analysis.fits, out_dir=out)
    report = fit_report(project, readings, analysis)
    forecast = forecast_ahead(project, readings, analysis)
    report["forecast"] = {"items_ahead_of_face": len(forecast),
                          "changed": [r for r in forecast if r["changed"]],
                          "note": "buildings (damage category) and utilities (status) ahead of the latest face, "
                                  "assessed with the design and the fitted values, every drive complete"}
    report["caution"] = CAUTION
    gis_out.write_text_atomic(fitted_path, fitted_text)
    outputs = {"fitted_project": fitted_path.name}
    if forecast:
        outputs["forecast"] = _write_rows_csv(out / "forecast.csv", [{k: r[k] for k in FORECAST_FIELDS}
                                                                     for r in forecast])
    report["outputs"] = outputs
    gis_out.write_text_atomic(out / "fit.json", json.dumps(report, indent=2, allow_nan=False) + "\n")
    if not args.quiet:
        for message in readings.left_out_messages():
            print(f"warning: left out: {message}", file=sys.stderr)
        for warning in analysis.warnings:
            print(f"warning: {warning}", file=sys.stderr)
        for fit in report["fits"]:
            print(f"{fit['drive']} ({fit['part']}): volume loss {fit['volume_loss_pct']:.3f} % "
                  f"(se {fit['volume_loss_pct_se'] or float('nan'):.3f}), K {fit['trough_width_k']:.3f} "
                  f"(se {fit['trough_width_k_se'] or float('nan'):.3f}); {fit['readings_used']} readings, "
                  f"RMS {fit['rms_mm']:.2f} mm, {len(fit['outliers'])} outliers")
        changed = report["forecast"]["changed"]
        print(f"ahead of the face: {len(forecast)} buildings and utilities re-assessed, {len(changed)} changed")
        print(f"wrote {out / 'fit.json'}, {fitted_path}" + (f", {out / 'forecast.csv'}" if forecast else ""))
    return 0


def _utility_table(result) -> list[dict]:
    from .pipelines import utility_rows

    return utility_rows(result.project.utilities, result.utilities, geometry=False)


def _write_rows_csv(path: Path, rows: list[dict]) -> str:
    """A CSV table of result rows (the assessment report's tables), written safely; the caution on line one."""
    import csv
    import io

    import gis_out

    from .summary import CAUTION

    text = io.StringIO()
    text.write(f"# {CAUTION}\n")
    if rows:
        writer = csv.DictWriter(text, fieldnames=list(rows[0]), lineterminator="\n")
        writer.writeheader()
        writer.writerows({k: ("" if isinstance(v, float) and v != v else v) for k, v in r.items()} for r in rows)
    gis_out.write_text_atomic(path, text.getvalue())
    return path.name


def _slug(name: str) -> str:
    return re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-") or "drive"


def _write_face(result, out: Path) -> dict:
    """The operator's pressure table (CSV) and a longitudinal section (PNG) per drive."""
    import gis_out
    from gis_out.face_section import face_section_png

    from .face_stations import operator_csv_text

    table = out / "face_pressures.csv"
    gis_out.write_text_atomic(table, operator_csv_text(result.face))
    figures = []
    for stations, drive in zip(result.face, result.drives):
        path = out / f"face_section_{_slug(drive.name)}.png"
        face_section_png(stations, drive, path, layers=result.project.ground.layers)
        figures.append(path.name)
    return {"face_pressures": table.name, "face_sections": figures}


def main(argv=None) -> int:
    args = _parser().parse_args(argv)
    try:
        if args.command == "run":
            return _run(args)
        if args.command == "fit":
            return _fit(args)
        if args.command == "report":
            return _report(args)
    except InputError as exc:
        print(f"settle: error: {exc}", file=sys.stderr)
        return InputError.exit_status
    except Exception as exc:  # the outputs could not be written; the earlier result is untouched
        import gis_out

        if isinstance(exc, (OSError, gis_out.OutputError)):
            print(f"settle: could not write the outputs: {exc}", file=sys.stderr)
            return 1
        raise
    return 0


if __name__ == "__main__":
    sys.exit(main())
