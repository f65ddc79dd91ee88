"""The site service: readings posted daily, the back-analysis redone, triggers and the map on a web page.

    settle serve PROJECT.toml --data DIR [--host 127.0.0.1] [--port 8650] [--max-upload-mb 50]

`create_app(project, data_folder)` makes the FastAPI application; `settle serve` runs it with uvicorn. Every answer
is JSON (errors too, never a traceback page), but the page itself and its static files. Writes need a token
(`Authorization: Bearer TOKEN`, made by `settle token add`); the database is read on every request, so a revoked
token is refused at once. Layers are served in WGS 84, as RFC 7946 requires of GeoJSON.

Endpoints
    GET  /                         the site page (settle/service/site/index.html) and /static/... its files
    POST /api/readings             a readings CSV (text/csv) -> 201 {kept, added, left_out, batch}; 401, 413, 422
    GET  /api/status               readings, last_reading, points by trigger status, drives with their fits, refit
    GET  /api/layers/{name}.geojson  route, buildings, utilities, readings, settlement_lines of the latest fitted run
    GET  /api/points/{id}          a point's series: each reading with the design prediction and the latest fit
    GET  /api/palette              the project's colours, for the page
    GET  /api/files/geopackage, /api/files/report   the latest fitted run's GeoPackage and PDF
"""
from __future__ import annotations

import hashlib
import json
import math
from contextlib import asynccontextmanager
from dataclasses import replace
from pathlib import Path

import numpy as np
from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import FileResponse, JSONResponse, Response
from fastapi.staticfiles import StaticFiles
from starlette.exceptions import HTTPException as StarletteHTTPException

from ..errors import InputError
from ..inputs.model import Project
from ..inputs.readings import read_readings_text
from ..monitoring.fitting import STATUS_AMBER, STATUS_CLEAR, STATUS_RED, predicted_settlement_mm
from ..procedure.summary import CAUTION
from .refit import Refitter, fitted_from
from .store import Store

SITE = Path(__file__).parent / "site"
LAYERS = ("route", "buildings", "utilities", "readings", "settlement_lines")
DEFAULT_MAX_UPLOAD_MB = 50.0
TRIGGER_WORDS = (STATUS_CLEAR, STATUS_AMBER, STATUS_RED)


def create_app(project: Project, data_folder, max_upload_mb: float = DEFAULT_MAX_UPLOAD_MB, refit: bool = True):
    """The FastAPI application serving `project` with its data in `data_folder` (created when missing).

    refit=False leaves the background refit to the caller (tests drive `app.state.refitter.run_once()`)."""
    from gis_out.run_folder import output_stem
    from gis_out.site_folder import latest_run_folder

    store = Store(data_folder, create=True)
    stem = output_stem(project.path) if project.path else "site"
    latest = latest_run_folder(data_folder)
    refitter = Refitter(project, store, _run_writer(latest, stem))
    limit = int(max_upload_mb * 1e6)
    layers = _LayerCache(latest, stem)
    face_places = _Faces(project)

    @asynccontextmanager
    async def lifespan(app):
        if refit:
            refitter.start()
            refitter.request()  # the page needs a run: fit what is stored, or the design run
        yield
        refitter.stop()

    app = FastAPI(title="settle site service", lifespan=lifespan, docs_url=None, redoc_url=None, openapi_url=None)
    app.state.refitter, app.state.store = refitter, store

    def error(status: int, message: str, **extra) -> JSONResponse:
        return JSONResponse({"error": message, **extra}, status_code=status)

    @app.exception_handler(StarletteHTTPException)
    async def http_error(request, exc):
        return error(exc.status_code, str(exc.detail))

    @app.exception_handler(RequestValidationError)
    async def validation_error(request, exc):
        return error(422, "the request is not valid", lines=[str(e.get("msg", e)) for e in exc.errors()])

    @app.exception_handler(Exception)
    async def any_error(request, exc):
        return error(500, f"the server could not answer: {type(exc).__name__}")

    # ------------------------------------------------------------------------------------------------- writes
    @app.post("/api/readings")
    async def post_readings(request: Request):
        token = _bearer(request.headers.get("authorization", ""))
        name = store.token_name(token) if token else None
        if name is None:
            return error(401, "a valid write token is needed: Authorization: Bearer TOKEN (settle token add)")
        length = request.headers.get("content-length")
        if length is not None and length.isdigit() and int(length) > limit:
            return error(413, f"the file is larger than the limit of {max_upload_mb:g} MB (--max-upload-mb)")
        body = bytearray()
        async for chunk in request.stream():
            body.extend(chunk)
            if len(body) > limit:
                return error(413, f"the file is larger than the limit of {max_upload_mb:g} MB (--max-upload-mb)")
        try:
            text = bytes(body).decode("utf-8")
        except UnicodeDecodeError:
            return error(422, "the readings file is not UTF-8 text; save it as CSV UTF-8", lines=[])
        digest = hashlib.sha256(body).hexdigest()
        try:
            readings = read_readings_text(text, project, "upload")
        except InputError as exc:
            return error(422, "the readings file was refused", lines=[str(exc)])
        stored = store.store_readings(readings, name, digest)
        if stored.added:
            refitter.request()
        left_out = sorted([(r.line, r.reason) for r in readings.left_out] + list(stored.left_out))
        return JSONResponse({"kept": stored.kept, "added": stored.added, "batch": stored.batch,
                             "left_out": [{"line": line, "reason": reason} for line, reason in left_out]},
                            status_code=201)

    # -------------------------------------------------------------------------------------------------- reads
    @app.get("/api/status")
    def status():
        count, last = store.reading_summary()
        done = store.latest_run(finished_well=True)
        fits = {f["drive"]: f for f in ((done or {}).get("fits") or {}).get("fits", [])}
        faces = ((done or {}).get("fits") or {}).get("faces", {})
        counts = layers.trigger_counts()
        drives = []
        for k, d in enumerate(project.drives):
            face = faces.get(d.name, d.face_chainage_m)
            fit = fits.get(d.name, {})
            lon, lat = face_places.lonlat(k, face)
            drives.append({"drive": d.name, "face_chainage_m": face, "face_lon": lon, "face_lat": lat,
                           "volume_loss_pct": fit.get("volume_loss_pct"),
                           "volume_loss_pct_se": fit.get("volume_loss_pct_se"),
                           "trough_width_k": fit.get("trough_width_k"),
                           "trough_width_k_se": fit.get("trough_width_k_se"),
                           "volume_loss_pct_ci95": fit.get("volume_loss_pct_ci95"),
                           "trough_width_k_ci95": fit.get("trough_width_k_ci95"),
                           "readings_used": fit.get("readings_used"),
                           "fitted_at": done["finished_utc"] if fit else None,
                           "volume_loss_design_pct": d.volume_loss_pct})
        amber, red = project.monitoring or (None, None)
        return {"project": project.name, "readings": count, "last_reading": last,
                "points": {w: counts.get(w, 0) for w in TRIGGER_WORDS},
                "trigger_levels_mm": {"amber_mm": amber, "red_mm": red},
                "drives": drives, "refit": refitter.status(),
                "forecast_changed": (done or {}).get("forecast") or [],
                "downloads": {"geopackage": "/api/files/geopackage" if layers.file("geopackage") else None,
                              "report": "/api/files/report" if layers.file("report") else None},
                "caution": CAUTION}

    @app.get("/api/layers/{name}")
    def layer(name: str):
        if not name.endswith(".geojson") or name[: -len(".geojson")] not in LAYERS:
            return error(404, f"no layer {name!r}; the layers are " + ", ".join(f"{n}.geojson" for n in LAYERS))
        return Response(layers.geojson(name[: -len(".geojson")]), media_type="application/geo+json")

    @app.get("/api/points/{point_id:path}")
    def point(point_id: str):
        names = tuple(d.name for d in project.drives)
        readings = store.readings(names, point_id=point_id)
        if readings is None:
            return error(404, f"no readings of point {point_id!r}")
        done = store.latest_run(finished_well=True)
        design = predicted_settlement_mm(project, readings)
        fits = ((done or {}).get("fits") or {}).get("fits")
        if fits:
            fitted = predicted_settlement_mm(fitted_from(project, fits), readings)
        else:
            fitted = np.full(len(readings), np.nan)
        order = np.argsort(readings.date, kind="stable")
        series = [{"date": f"{np.datetime_as_string(readings.date[i], unit='s')}Z",
                   "settlement_mm": _num(readings.settlement_mm[i]),
                   "face_chainage_m": _num(readings.face_chainage_m[i]), "drive": names[int(readings.drive[i])],
                   "predicted_mm": _num(design[i]), "fitted_mm": _num(fitted[i])} for i in order]
        return {"point_id": point_id, "drive": series[-1]["drive"], "trigger_status": layers.status_of(point_id),
                "x_m": _num(readings.x_m[0]), "y_m": _num(readings.y_m[0]), "readings": series}

    @app.get("/api/palette")
    def palette():
        from gis_out.site_folder import palette as colours

        return colours()

    @app.get("/api/files/{kind}")
    def download(kind: str):
        path = layers.file(kind) if kind in ("geopackage", "report") else None
        if path is None:
            return error(404, f"no {kind} yet: the first refit writes it" if kind in ("geopackage", "report")
                         else f"no file {kind!r}; the files are geopackage and report")
        media = "application/geopackage+sqlite3" if kind == "geopackage" else "application/pdf"
        return FileResponse(path, media_type=media, filename=path.name)

    @app.get("/")
    def page():
        return FileResponse(SITE / "index.html", media_type="text/html")

    app.mount("/static", StaticFiles(directory=SITE), name="static")
    return app


def _bearer(header: str) -> str | None:
    scheme, _, token = header.partition(" ")
    return token.strip() or None if scheme.lower() == "bearer" else None


def _num(value) -> float | None:
    value = float(value)
    return value if math.isfinite(value) else None


def _run_writer(latest: Path, stem: str):
    """The refit's writing step: the fitted run folder, its report included, as one set."""
    def write(result, monitoring, design):
        from gis_out.run_folder import write_run

        write_run(result, latest, stem, monitoring=monitoring, report=True, design=design)

    return write


class _LayerCache:
    """The latest fitted run's layers as GeoJSON in WGS 84, read again only when its GeoPackage changes."""

    def __init__(self, latest: Path, stem: str):
        self.latest, self.stem = latest, stem
        self._key = None
        self._frames: dict = {}

    def file(self, kind: str) -> Path | None:
        path = self.latest / (f"{self.stem}.gpkg" if kind == "geopackage" else f"{self.stem}-report.pdf")
        return path if path.is_file() else None

    def _load(self) -> dict:
        gpkg = self.file("geopackage")
        key = None if gpkg is None else (gpkg.stat().st_mtime_ns, gpkg.stat().st_size)
        if key != self._key:
            import pyogrio

            frames = {}
            if gpkg is not None:
                present = {row[0] for row in pyogrio.list_layers(gpkg)}
                for name in LAYERS:
                    if name in present:
                        frames[name] = pyogrio.read_dataframe(gpkg, layer=name).to_crs("EPSG:4326")
            self._frames, self._key = frames, key
        return self._frames

    def geojson(self, name: str) -> str:
        frame = self._load().get(name)
        if frame is None or frame.empty:
            return json.dumps({"type": "FeatureCollection", "features": []})
        frame = frame.copy()
        for column in frame.columns:
            if str(frame[column].dtype).startswith("datetime64"):
                frame[column] = frame[column].dt.strftime("%Y-%m-%dT%H:%M:%SZ")
        if name == "readings":
            frame["latest_mm"] = frame["reading_mm"]
        return frame.to_json(na="null", drop_id=True)

    def trigger_counts(self) -> dict:
        frame = self._load().get("readings")
        return {} if frame is None else frame["trigger_status"].value_counts().to_dict()

    def status_of(self, point_id: str) -> str | None:
        frame = self._load().get("readings")
        if frame is None:
            return None
        found = frame.loc[frame["point_id"] == point_id, "trigger_status"]
        return str(found.iloc[0]) if len(found) else None



class _Faces:
    """Where each drive's face is, in WGS 84: on its 3-D axis at the face chainage."""

    def __init__(self, project: Project):
        from pyproj import Transformer

        from ..inputs.route import position_at
        from ..procedure.orchestrator import Assessment

        self._position_at = position_at
        self.drives = Assessment(replace(project, buildings=None, utilities=None, points=None)).route().drives
        self.to_wgs84 = Transformer.from_crs(project.crs, "EPSG:4326", always_xy=True)

    def lonlat(self, k: int, face: float | None):
        if face is None:
            return None, None
        d = self.drives[k]
        x, y, _ = self._position_at(d.axis_xyz_m, d.chainage_m, [face])[0]
        lon, lat = self.to_wgs84.transform(x, y)
        return round(float(lon), 7), round(float(lat), 7)
