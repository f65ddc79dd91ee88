"""The command line: `settle run PROJECT.toml --out DIR`.

Exit status: 0 done; 2 a mistake in the input (one message naming the file, key or row); 1 the run could not write
its outputs (for example the GeoPackage is open for editing elsewhere).
"""
from __future__ import annotations

import argparse
import json
import re
import sys
from pathlib import Path

from . import __version__
from .errors import InputError
from .summary import CAUTION

DESCRIPTION = (
    "settle: greenfield ground movements along pipejacked and microtunnelled drives, from one project file "
    "to a GeoPackage.\n\n" + CAUTION
)


class _Progress:
    """A one-line progress indicator on a terminal; silent when stderr is not one."""

    def __init__(self, enabled: bool):
        self.enabled = enabled
        self.shown = False

    def __call__(self, stage: str, fraction: float) -> None:
        if self.enabled:
            sys.stderr.write(f"\r{stage}: {100 * fraction:5.1f} %")
            sys.stderr.flush()
            self.shown = True

    def done(self) -> None:
        if self.shown:
            sys.stderr.write("\r" + " " * 40 + "\r")
            sys.stderr.flush()


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="settle", description=DESCRIPTION, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    parser.add_argument("--version", action="version", version=f"settle {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    run = commands.add_parser(
        "run",
        help="compute greenfield movements for a project and write the GeoPackage and summary",
        description=(
            "Compute greenfield ground movements along every drive of PROJECT (a TOML project file) and write "
            "DIR/<project file stem>.gpkg (layers route, grid, settlement_bands, settlement_lines, points) and "
            "DIR/summary.json. Outputs are written to temporary files and moved into place, so a failed run "
            "never damages the result of an earlier one.\n\n" + CAUTION
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    run.add_argument("project", metavar="PROJECT.toml", help="the project file")
    run.add_argument("--out", metavar="DIR", required=True, help="folder for the outputs (created if missing)")
    run.add_argument("--quiet", action="store_true", help="print nothing but errors")
    return parser


def _run(args) -> int:
    from .assessment import run
    from .project import load_project
    from .summary import summarise

    project = load_project(args.project)
    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out}: exists and is not a folder")
    progress = _Progress(sys.stderr.isatty() and not args.quiet)
    try:
        result = run(project, progress)
    finally:
        progress.done()

    import gis_out

    out.mkdir(parents=True, exist_ok=True)
    stem = Path(args.project).stem
    gpkg = out / f"{stem}.gpkg"
    summary_path = out / "summary.json"
    gis_out.write_geopackage(gpkg, gis_out.frames(result))
    outputs = {"geopackage": gpkg.name, "summary": summary_path.name}
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
    summary = summarise(result, outputs=outputs)
    gis_out.write_text_atomic(summary_path, json.dumps(summary, indent=2) + "\n")

    if not args.quiet:
        for warning in result.warnings:
            print(f"warning: {warning}", file=sys.stderr)
        from .terminal import summary_table

        print(summary_table(summary, out))
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
