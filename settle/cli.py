"""The command line: `settle run PROJECT.toml --out DIR`.

Exit status: 0 done; 2 a mistake in the input (one message naming the file, key or row); 1 the run could not write
its outputs (for example the GeoPackage is open for editing elsewhere).
"""
from __future__ import annotations

import argparse
import os
import sys
import textwrap
from pathlib import Path

from .version import __version__
from .errors import InputError
from .procedure.summary import CAUTION



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
    _add_run(commands)
    _add_report(commands)
    _add_fit(commands)
    _add_serve(commands)
    _add_token(commands)
    return parser


def _command(commands, name: str, summary: str, description: str, project_help: str,
             out_help: str) -> argparse.ArgumentParser:
    """A command with its one-line help, its description followed by the caution, PROJECT.toml and --out DIR."""
    command = commands.add_parser(name, help=summary, description=_paragraphs(description, CAUTION),
                                  formatter_class=argparse.RawDescriptionHelpFormatter)
    command.add_argument("project", metavar="PROJECT.toml", help=project_help)
    command.add_argument("--out", metavar="DIR", required=True, help=out_help)
    return command


def _add_run(commands) -> None:
    run = _command(
        commands, "run", "compute greenfield movements for a project and write the GeoPackage and summary",
        "Compute greenfield ground movements along every drive of PROJECT (a TOML project file), and the "
        "building damage, utility and face support checks the project asks for, and write "
        "DIR/<project file stem>.gpkg (layers route, route_reaches, route_profile, grid, settlement_bands, "
        "settlement_lines, points, and buildings, building_walls, utilities, utility_critical_points, "
        "face_stations, readings when computed, each with a default style), DIR/summary.json, the CSV tables "
        "and figures. Outputs are written to temporary files and moved into place, so a failed run never "
        "damages the result of an earlier one.", "the project file", "folder for the outputs (created if missing)")
    run.add_argument("--quiet", action="store_true", help="print nothing but errors")
    run.add_argument("--report", action="store_true",
                     help="also write DIR/<stem>-report.pdf, the assessment report (as `settle report` does)")
    run.add_argument("--date", metavar="YYYY-MM-DD",
                     help="the run date: printed in the report and kept in run.json and the GeoPackage; without "
                          "it the outputs carry no date, so the same inputs give the same bytes")
    run.add_argument("--readings", metavar="READINGS.csv",
                     help="monitoring readings: adds the `readings` layer (latest reading, prediction, difference, "
                          "trigger status against [monitoring] amber_mm and red_mm) and a figure per monitored "
                          "cross-section")
    where = run.add_mutually_exclusive_group()
    where.add_argument("--workers", type=_worker_count, metavar="N",
                       help="run the heavy steps on a local Dask cluster of N worker processes (the work is split by "
                            "drive and by tiles along the route; the numbers are the same as in one process)")
    where.add_argument("--scheduler", metavar="tcp://HOST:PORT", type=_scheduler_address,
                       help="send the heavy steps to a running Dask cluster: a scheduler started with `dask "
                            "scheduler` and workers started with `dask worker tcp://HOST:PORT`, each with this "
                            "settle version installed")


def _whole_number(low: int, high: int, what: str):
    """An argparse type: a whole number from `low` to `high`, `what` naming it in the message."""
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"must be {what}; got {text!r}") from None
        if not low <= value <= high:
            raise argparse.ArgumentTypeError(f"must be from {low} to {high}; got {value}")
        return value

    return parse


_worker_count = _whole_number(1, 256, "a whole number of worker processes")
_port = _whole_number(1, 65535, "a whole port number")


def _scheduler_address(text: str) -> str:
    """--scheduler ADDRESS: a Dask scheduler's address, tcp://HOST:PORT (or HOST:PORT)."""
    address = text.strip()
    host, _, port = address.rpartition(":")
    if not host or not port.isdigit() or not 0 < int(port) < 65536 or any(c.isspace() for c in address):
        raise argparse.ArgumentTypeError(f"must be a Dask scheduler's address, tcp://HOST:PORT; got {text!r}")
    return address


def _add_report(commands) -> None:
    report = _command(
        commands, "report", "write the PDF assessment report of a finished run, without recomputing",
        "Write DIR/<stem>-report.pdf from the outputs a finished `settle run PROJECT.toml --out DIR` left in "
        "DIR (GeoPackage and summary.json), with the inputs read from PROJECT.toml: title block, inputs and "
        "where they came from, methods with their references, results with figures and tables, assumptions and "
        "the cautions of the trade. Nothing is recomputed.", "the project file the run was made from",
        "the run's output folder")
    report.add_argument("--date", metavar="YYYY-MM-DD",
                        help="the date printed in the report (default: the run date given to settle run --date; "
                             "none when it was given none)")


def _add_fit(commands) -> None:
    fit = _command(
        commands, "fit", "back-analyse volume loss and trough width from monitoring readings",
        "Back-analyse the volume loss and trough width factor K that the monitoring readings show, per drive "
        "(or per reach), against the same three-dimensional model `settle run` uses, with each reading's face "
        "position. Writes DIR/fit.json (values, standard errors, readings used, residual RMS, outliers), "
        "DIR/<stem>-fitted.toml (the project with the fitted values, which `settle run` accepts unchanged) "
        "and, when the project has buildings or utilities, DIR/forecast.csv: what lies ahead of the face, "
        "assessed again with the fitted values, marked where its category or status changed.", "the project file",
        "folder for the outputs (created if missing)")
    fit.add_argument("readings", metavar="READINGS.csv",
                     help="readings: point_id, date (ISO 8601), settlement_mm, face_chainage_m, and x, y, depth_m "
                          "or the [points] of the project; a drive column when there are several drives")
    fit.add_argument("--per-reach", action="store_true", help="fit each reach of a drive on its own")
    fit.add_argument("--outlier-limit", type=float, default=3.0, metavar="SIGMA",
                     help="a reading further than this many robust standard deviations from the fit is an outlier "
                          "(default 3)")
    fit.add_argument("--min-face-past-m", type=float, default=None, metavar="M",
                     help="fit only readings taken with the face at least this far past the point (default: all)")
    fit.add_argument("--quiet", action="store_true", help="print nothing but errors")


def _add_serve(commands) -> None:
    serve = commands.add_parser(
        "serve", help="serve a project to the site team: readings posted daily, refits, triggers and the map",
        description=_paragraphs(
            "Serve PROJECT on a web page and a JSON API: the site team posts readings (POST /api/readings with a "
            "write token from `settle token add`); after each post the back-analysis, the forecast ahead of the "
            "face and a run with the fitted values are redone in the background; the page shows the map, the "
            "points over their triggers, each point's readings against the predicted and fitted values, and the "
            "downloads. DIR holds the database (site.sqlite) and the latest fitted run (DIR/latest). Binds to "
            "127.0.0.1 unless --host says otherwise.", CAUTION),
        formatter_class=argparse.RawDescriptionHelpFormatter)
    serve.add_argument("project", metavar="PROJECT.toml", help="the project file")
    serve.add_argument("--data", metavar="DIR", required=True, help="the service's data folder (created if missing)")
    serve.add_argument("--host", default="127.0.0.1", help="address to listen on (default 127.0.0.1: this machine "
                                                           "only)")
    serve.add_argument("--port", type=_port, default=8650, help="port to listen on (default 8650)")
    serve.add_argument("--max-upload-mb", type=_upload_limit, default=50.0, metavar="MB",
                       help="largest readings file accepted (default 50)")


def _upload_limit(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a number of megabytes; got {text!r}") from None
    if not 0 < value <= 10_000:
        raise argparse.ArgumentTypeError(f"must be more than 0 and at most 10000 MB; got {text}")
    return value


def _add_token(commands) -> None:
    token = commands.add_parser("token", help="add, list or revoke the write tokens of a site service",
                                description="Write tokens of the site service in DIR: each post of readings needs "
                                            "one. Only a token's hash is stored; `add` prints the token once.")
    actions = token.add_subparsers(dest="action", metavar="ACTION", required=True)
    add = actions.add_parser("add", help="make a new token for NAME and print it once (its last line of output)")
    add.add_argument("name", metavar="NAME", help="who the token is for: letters, digits, '-', '_', '.'")
    listing = actions.add_parser("list", help="list the tokens: name, created, revoked")
    revoke = actions.add_parser("revoke", help="revoke NAME's token: refused at once, also by a running server")
    revoke.add_argument("name", metavar="NAME")
    for action in (add, listing, revoke):
        action.add_argument("--data", metavar="DIR", required=True, help="the service's data folder")


def _serve(args) -> int:
    """`settle serve`: the site service, until interrupted."""
    import uvicorn

    from .inputs.project_file import load_project
    from .service.app import create_app

    project = load_project(args.project)
    if project.monitoring is None:
        raise InputError(f"{args.project}: the site service needs trigger levels: add [monitoring] amber_mm and "
                         "red_mm")
    app = create_app(project, args.data, max_upload_mb=args.max_upload_mb)
    print(f"serving {project.name} on http://{args.host}:{args.port}/ (data in {args.data}); Ctrl-C stops",
          file=sys.stderr)
    uvicorn.run(app, host=args.host, port=args.port, log_level="warning")
    return 0


def _token(args) -> int:
    """`settle token add|list|revoke`."""
    from .service.store import Store, check_token_name

    if args.action == "add":
        check_token_name(args.name)  # before the data folder is made
    store = Store(args.data, create=args.action == "add")
    if args.action == "add":
        token = store.add_token(args.name)
        print(f"token for {args.name} (shown once; keep it secret, give it to whoever posts readings):")
        print(token)
    elif args.action == "list":
        rows = store.tokens()
        if not rows:
            print("no tokens")
        for row in rows:
            state = f"revoked {row.revoked_utc}" if row.revoked_utc else "valid"
            print(f"{row.name}\tcreated {row.created_utc}\t{state}")
    else:
        store.revoke_token(args.name)
        print(f"revoked {args.name}")
    return 0


def _run(args) -> int:
    """`settle run`: the assessment, its outputs in the run folder, and the closing table."""
    from gis_out.run_folder import check_out_folder, output_stem, write_run

    from .inputs.project_file import load_project
    from .procedure.monitoring_steps import read_monitoring
    from .procedure.orchestrator import run
    from .procedure.run_record import record_run
    from .procedure.workers import Workers

    project = load_project(args.project)
    out, stem = check_out_folder(args.out), output_stem(args.project)
    options = {"report": args.report, "readings": args.readings, "date": args.date}
    if args.workers or args.scheduler:
        options.update(workers=args.workers, scheduler=args.scheduler)
    record = record_run(project, args.argv, options, args.date, [args.readings] if args.readings else ())
    monitoring = read_monitoring(project, args.readings) if args.readings else None
    progress = _Progress(sys.stderr.isatty() and not args.quiet)
    try:
        with Workers(count=args.workers, scheduler=args.scheduler) as workers:
            result = run(project, progress, workers)
    finally:
        progress.done()
    summary = write_run(result, out, stem, monitoring=monitoring, report=args.report, record=record)
    if not args.quiet:
        if monitoring:
            for message in monitoring.readings.left_out_messages():
                print(f"warning: left out: {message}", file=sys.stderr)
        for warning in result.warnings:
            print(f"warning: {warning}", file=sys.stderr)
        from .terminal import summary_table

        print(summary_table(summary, out))
    return 0


def _report(args) -> int:
    """`settle report`: the PDF from a finished run's outputs."""
    from gis_out.run_folder import output_stem, write_run_report

    from .inputs.project_file import load_project

    from .procedure.run_record import run_date

    project = load_project(args.project)
    path = write_run_report(project, Path(args.out), output_stem(args.project), run_date(args.date))
    print(f"wrote {path}")
    return 0


def _fit(args) -> int:
    """`settle fit`: back-analysis, fitted project file, forecast ahead of the face."""
    from gis_out.run_folder import check_out_folder, output_stem, write_fit

    from .inputs.project_file import load_project
    from .procedure.monitoring_steps import fit_monitoring
    from .procedure.run_record import record_run

    project = load_project(args.project)
    out, stem = check_out_folder(args.out), output_stem(args.project)
    options = {"readings": args.readings, "per_reach": args.per_reach, "outlier_limit": args.outlier_limit,
               "min_face_past_m": args.min_face_past_m}
    record = record_run(project, args.argv, options, extra_inputs=[args.readings])
    fit = fit_monitoring(project, args.project, args.readings, out, per_reach=args.per_reach,
                         outlier_limit=args.outlier_limit, min_face_past_m=args.min_face_past_m)
    written = write_fit(fit, out, stem, record=record)
    if not args.quiet:
        _print_fit(fit, written)
    return 0


def _print_fit(fit, written: dict) -> None:
    """The fit's warnings on stderr, then a line per fitted drive or reach and where the files are."""
    for message in fit.readings.left_out_messages():
        print(f"warning: left out: {message}", file=sys.stderr)
    for warning in fit.analysis.warnings:
        print(f"warning: {warning}", file=sys.stderr)
    for one in fit.report["fits"]:
        print(f"{one['drive']} ({one['part']}): volume loss {one['volume_loss_pct']:.3f} % "
              f"(se {one['volume_loss_pct_se'] or float('nan'):.3f}), K {one['trough_width_k']:.3f} "
              f"(se {one['trough_width_k_se'] or float('nan'):.3f}); {one['readings_used']} readings, "
              f"RMS {one['rms_mm']:.2f} mm, {len(one['outliers'])} outliers")
    changed = fit.report["forecast"]["changed"]
    print(f"ahead of the face: {len(fit.forecast_rows)} buildings and utilities re-assessed, {len(changed)} changed")
    files = [written["fit"], written["fitted_project"]] + ([written["forecast"]] if "forecast" in written else [])
    print("wrote " + ", ".join(str(f) for f in files))


def main(argv=None) -> int:
    argv = [os.fspath(a) for a in (sys.argv[1:] if argv is None else argv)]
    args = _parser().parse_args(argv)
    args.argv = ["settle", *argv]
    try:
        if args.command == "run":
            return _run(args)
        if args.command == "fit":
            return _fit(args)
        if args.command == "report":
            return _report(args)
        if args.command == "serve":
            return _serve(args)
        if args.command == "token":
            return _token(args)
    except InputError as exc:
        print(f"settle: error: {exc}", file=sys.stderr)
        return InputError.exit_status
    except KeyboardInterrupt:
        print("settle: interrupted; the earlier outputs are untouched", file=sys.stderr)
        return 130
    except Exception as exc:  # the outputs could not be written; the earlier result is untouched
        import gis_out

        if isinstance(exc, (OSError, MemoryError, gis_out.OutputError)):
            print(f"settle: could not write the outputs: {_one_line(exc)}", file=sys.stderr)
            return 1
        raise
    return 0


def _one_line(exc: BaseException) -> str:
    """An exception's message on one line."""
    return " ".join(str(exc).split()) or type(exc).__name__


if __name__ == "__main__":
    sys.exit(main())
