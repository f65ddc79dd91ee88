"""The refit: after each accepted post, the back-analysis of every stored reading, the forecast ahead of the face and
a run with the fitted values at the latest face, redone in a background thread, one at a time.

Posts that arrive while a refit runs ask for one more; a refit always starts from everything stored, so no post is
missed and none is fitted twice for nothing. A refit that fails keeps the earlier fitted run and says why in the
status. Without readings the run is the design run (so the page has its layers from the start).
"""
from __future__ import annotations

import threading
import traceback
from dataclasses import replace

import numpy as np

from ..errors import InputError
from ..inputs.model import Project
from ..monitoring.fitting import apply_fits, back_analysis, drive_with_values
from ..procedure.forecast import forecast_ahead
from ..procedure.monitoring_steps import Monitoring
from ..procedure.orchestrator import run as run_project
from .store import Store, utc_now


def latest_faces(project: Project, readings) -> dict[int, float]:
    """Per drive with readings, the face at its latest reading (the construction stage the readings show). [m]"""
    faces = {}
    if readings is None:
        return faces
    for d in range(len(project.drives)):
        mine = readings.drive == d
        if mine.any():
            faces[d] = float(readings.face_chainage_m[mine][np.argmax(readings.date[mine])])
    return faces


def at_faces(project: Project, faces: dict[int, float]) -> Project:
    """The project at the faces the readings show: a drive still being driven takes its latest face; a drive the
    project gives complete stays complete."""
    drives = tuple(replace(d, face_chainage_m=faces[k]) if k in faces and d.face_chainage_m is not None else d
                   for k, d in enumerate(project.drives))
    return replace(project, drives=drives)


def fits_of(analysis) -> list[dict]:
    """The whole-drive fits as JSON-ready dicts (NaN as None)."""
    out = []
    for (name, part), fit in analysis.fits.items():
        if part is not None:
            continue
        out.append({"drive": name, "volume_loss_pct": _finite(fit.volume_loss_pct),
                    "volume_loss_pct_se": _finite(fit.volume_loss_pct_se),
                    "trough_width_k": _finite(fit.trough_width_k), "trough_width_k_se": _finite(fit.trough_width_k_se),
                    "volume_loss_pct_ci95": [_finite(v) for v in fit.volume_loss_pct_ci95],
                    "trough_width_k_ci95": [_finite(v) for v in fit.trough_width_k_ci95],
                    "readings_used": int(fit.readings_used), "rms_mm": _finite(fit.rms_mm)})
    return out


def fitted_from(project: Project, fits: list[dict] | None) -> Project:
    """The project with the stored whole-drive fits applied (drives without a fit keep their design values)."""
    if not fits:
        return project
    values = {f["drive"]: (f["volume_loss_pct"], f["trough_width_k"]) for f in fits
              if f["volume_loss_pct"] is not None and f["trough_width_k"] is not None}
    drives = tuple(drive_with_values(d, {None: values[d.name]}) if d.name in values else d for d in project.drives)
    return replace(project, drives=drives)


class Refitter:
    """The background refit of one served project. `request()` asks for a refit; `status()` tells where it is:
    idle, queued, running or failed (with the message)."""

    def __init__(self, project: Project, store: Store, write_run):
        """`write_run(result, monitoring, design_project)` writes the fitted run folder (the service's gis_out
        step)."""
        self.project = project
        self.store = store
        self.write_run = write_run
        self._wake = threading.Condition()
        self._pending = False
        self._stop = False
        self.state = "idle"
        self.message = ""
        self.started_utc: str | None = None
        self.finished_utc: str | None = None
        self._thread: threading.Thread | None = None

    def start(self) -> None:
        self._thread = threading.Thread(target=self._loop, name="settle-refit", daemon=True)
        self._thread.start()

    def stop(self, timeout_s: float = 5.0) -> None:
        with self._wake:
            self._stop = True
            self._wake.notify()
        if self._thread is not None:
            self._thread.join(timeout_s)

    def request(self) -> None:
        with self._wake:
            self._pending = True
            if self.state != "running":
                self.state = "queued"
            self._wake.notify()

    def status(self) -> dict:
        return {"state": self.state, "message": self.message, "started_at": self.started_utc,
                "finished_at": self.finished_utc}

    def _loop(self) -> None:
        while True:
            with self._wake:
                while not self._pending and not self._stop:
                    self._wake.wait()
                if self._stop:
                    return
                self._pending = False
                self.state = "running"
                self.started_utc = utc_now()
            failed = self.run_once()
            with self._wake:
                self.finished_utc = utc_now()
                self.state = "failed" if failed else ("queued" if self._pending else "idle")

    def run_once(self) -> bool:
        """One refit from everything stored; True when it failed (the message says why)."""
        count, _ = self.store.reading_summary()
        run = self.store.start_run(count)
        try:
            fits, forecast = self._refit()
        except InputError as exc:
            self.message = f"refit failed: {exc}"
            self.store.end_run(run, "failed", self.message)
            return True
        except Exception as exc:  # keep serving; the status and the log say what went wrong
            traceback.print_exc()
            self.message = f"refit failed: {type(exc).__name__}: {' '.join(str(exc).split())}"
            self.store.end_run(run, "failed", self.message)
            return True
        self.message = f"fitted {count} readings" if count else "design run (no readings yet)"
        self.store.end_run(run, "done", self.message, fits=fits, forecast=forecast)
        return False

    def _refit(self):
        project = self.project
        names = tuple(d.name for d in project.drives)
        readings = self.store.readings(names)
        faces = latest_faces(project, readings)
        if readings is None:
            self.write_run(run_project(project), None, project)
            return {"fits": [], "faces": {}}, []
        analysis = back_analysis(project, readings)
        forecast = [r for r in forecast_ahead(project, readings, analysis) if r["changed"]]
        fitted = at_faces(apply_fits(project, analysis.fits), faces)
        self.write_run(run_project(fitted), Monitoring(readings, analysis), at_faces(project, faces))
        return ({"fits": fits_of(analysis), "faces": {names[d]: f for d, f in faces.items()}},
                [{"asset": r["id"], "kind": r["kind"], "drive": r["drive"], "design": r["design"],
                  "forecast": r["forecast"]} for r in forecast])


def _finite(value) -> float | None:
    value = float(value)
    return value if np.isfinite(value) else None
