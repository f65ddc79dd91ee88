"""The site service's API (settle serve): tokens, posts and their checks, the store's merging, status, layers in
WGS 84, a point's series, JSON errors, path traversal refused; and, against a real server, 20 clients posting at
once and a server killed with SIGKILL during a post.

The demo's readings (demo_site/cable_tunnel_readings.csv, 252 readings of 14 points, invented) are the data."""
from __future__ import annotations

import json
import os
import signal
import socket
import sqlite3
import subprocess
import sys
import threading
import time

import httpx
import numpy as np
import pytest
from fastapi.testclient import TestClient

from settle.cli import main
from settle.inputs.project_file import load_project
from settle.inputs.readings import read_readings
from settle.monitoring.fitting import back_analysis, predicted_settlement_mm
from settle.service.app import create_app
from settle.service.store import Store

from . import builders

PROJECT = builders.DEMO / "ostrey.toml"
READINGS = builders.DEMO / "cable_tunnel_readings.csv"


@pytest.fixture(scope="module")
def project():
    return load_project(PROJECT)


@pytest.fixture(scope="module")
def served(project, tmp_path_factory):
    """The demo served from a fresh data folder, the demo's readings posted and one refit run."""
    data = tmp_path_factory.mktemp("site")
    token = Store(data, create=True).add_token("site-team")
    app = create_app(project, data, refit=False)
    with TestClient(app) as client:
        posted = client.post("/api/readings", content=READINGS.read_bytes(),
                             headers={"Authorization": f"Bearer {token}", "Content-Type": "text/csv"})
        assert not app.state.refitter.run_once(), app.state.refitter.message
        yield client, token, data, posted


def auth(token):
    return {"Authorization": f"Bearer {token}", "Content-Type": "text/csv"}


def test_an_accepted_post_is_201_with_its_counts_and_batch(served):
    _, _, _, posted = served
    assert posted.status_code == 201
    body = posted.json()
    lines = READINGS.read_text().strip().splitlines()
    assert body == {"kept": len(lines) - 1, "added": len(lines) - 1, "batch": 1, "left_out": []}


def test_posting_the_same_file_again_adds_nothing(served):
    client, token, data, _ = served
    again = client.post("/api/readings", content=READINGS.read_bytes(), headers=auth(token))
    assert again.status_code == 201 and again.json()["added"] == 0
    count, _ = Store(data).reading_summary()
    assert count == len(READINGS.read_text().strip().splitlines()) - 1


def test_a_late_survey_fills_in_an_earlier_day_of_a_points_series(project, tmp_path):
    """Across batches a point's series is merged by date: a batch dated before the stored readings still adds."""
    rows = READINGS.read_text().strip().splitlines()
    header, body = rows[0], rows[1:]
    point = [r for r in body if r.startswith("CT30-L3,")]
    late = point[3]
    first = "\n".join([header] + [r for r in body if r != late]) + "\n"
    store = Store(tmp_path, create=True)
    token = store.add_token("surveyor")
    with TestClient(create_app(project, tmp_path, refit=False)) as client:
        assert client.post("/api/readings", content=first, headers=auth(token)).json()["added"] == len(body) - 1
        added = client.post("/api/readings", content=f"{header}\n{late}\n", headers=auth(token)).json()
        assert added["added"] == 1 and added["batch"] == 2
    series = store.readings(tuple(d.name for d in project.drives), point_id="CT30-L3")
    assert len(series) == len(point) and np.all(np.diff(series.date.astype(np.int64)) > 0)


def test_a_later_batch_may_not_move_a_stored_point(project, tmp_path):
    """A point keeps its place across batches as within a file (settle.inputs.readings.SAME_PLACE_M): a row that
    places CT30-L3 a metre east of where it is stored is left out, naming the line; one at its place is taken."""
    token = Store(tmp_path, create=True).add_token("surveyor")
    with TestClient(create_app(project, tmp_path, refit=False)) as client:
        assert client.post("/api/readings", content=READINGS.read_bytes(), headers=auth(token)).status_code == 201
        _moved_and_kept(client, token)


def _moved_and_kept(client, token):
    rows = READINGS.read_text().strip().splitlines()
    header = rows[0].split(",")
    last = dict(zip(header, [r for r in rows if r.startswith("CT30-L3,")][-1].split(",")))
    moved = dict(last, x=f"{float(last['x']) + 1.0:.2f}", date="2026-11-20T07:30:00", face_chainage_m="100.0")
    same = dict(last, date="2026-11-21T07:30:00", face_chainage_m="105.0")
    def post(row):
        text = "\n".join([rows[0], ",".join(row[h] for h in header)]) + "\n"
        return client.post("/api/readings", content=text, headers=auth(token)).json()

    refused = post(moved)
    assert refused["kept"] == 0 and refused["added"] == 0
    assert [r["line"] for r in refused["left_out"]] == [2] and "1.00 m away" in refused["left_out"][0]["reason"]
    taken = post(same)
    assert taken["kept"] == 1 and taken["added"] == 1 and taken["left_out"] == []


def test_writes_need_a_valid_token_and_a_revoked_one_is_refused_at_once(served, capsys):
    client, _, data, _ = served
    for headers in ({}, {"Authorization": "Bearer not-a-token"}, {"Authorization": "Basic abc"}):
        answer = client.post("/api/readings", content=b"x", headers=headers)
        assert answer.status_code == 401 and "token" in answer.json()["error"]
    assert main(["token", "add", "temp", "--data", str(data)]) == 0
    token = capsys.readouterr().out.strip().splitlines()[-1]  # the last line of output is the token
    assert len(token) >= 40
    ok = client.post("/api/readings", content=READINGS.read_bytes(), headers=auth(token))
    assert ok.status_code == 201
    assert main(["token", "revoke", "temp", "--data", str(data)]) == 0
    refused = client.post("/api/readings", content=READINGS.read_bytes(), headers=auth(token))
    assert refused.status_code == 401
    assert main(["token", "list", "--data", str(data)]) == 0
    listing = capsys.readouterr().out
    assert "temp\t" in listing and "revoked" in listing and token not in listing
    digests = sqlite3.connect(data / "site.sqlite").execute("SELECT token_sha256 FROM tokens").fetchall()
    assert token not in json.dumps(digests)  # only hashes are stored


def test_a_body_over_the_limit_is_413_also_when_chunked_without_a_length(project, tmp_path):
    token = Store(tmp_path, create=True).add_token("big")
    with TestClient(create_app(project, tmp_path, max_upload_mb=0.001, refit=False)) as client:
        big = READINGS.read_bytes()[:5000]
        assert client.post("/api/readings", content=big, headers=auth(token)).status_code == 413

        def chunks():
            for k in range(0, len(big), 500):
                yield big[k:k + 500]

        answer = client.post("/api/readings", content=chunks(), headers=auth(token))
        assert answer.status_code == 413 and "limit" in answer.json()["error"]
    assert Store(tmp_path).reading_summary()[0] == 0


@pytest.mark.parametrize("body, words", [
    (b"a,b\n1,2\n", 'missing column "point_id"'),
    (b"\xff\xfe\x00", "not UTF-8"),
    (b"", "no header line"),
    (b"point_id,drive,x,y,date,settlement_mm,face_chainage_m\nP1,nope,1,2,2026-01-01,1,1\n", "left out"),
])
def test_a_bad_file_is_422_with_its_lines_and_stores_nothing(served, body, words):
    client, token, data, _ = served
    before = Store(data).reading_summary()[0]
    answer = client.post("/api/readings", content=body, headers=auth(token))
    assert answer.status_code == 422, answer.text
    assert words in answer.json()["error"] + " ".join(answer.json()["lines"])
    assert Store(data).reading_summary()[0] == before


def test_status_gives_counts_triggers_and_the_fit_that_the_back_analysis_gives(served, project):
    client, _, _, _ = served
    status = client.get("/api/status").json()
    readings = read_readings(READINGS, project)
    assert status["readings"] >= len(readings) and status["last_reading"] == "2026-11-19T07:30:00Z"
    assert sum(status["points"].values()) == len(set(readings.point_id))
    assert status["refit"]["state"] in ("idle", "queued")  # later posts of this module ask for another refit
    fit = back_analysis(project, readings).fits[("Osier Meadow to Rope Street cable tunnel", None)]
    cable = status["drives"][1]
    assert cable["volume_loss_pct"] == pytest.approx(fit.volume_loss_pct, rel=1e-9)
    assert cable["trough_width_k_se"] == pytest.approx(fit.trough_width_k_se, rel=1e-9)
    assert cable["volume_loss_pct_ci95"] == pytest.approx(fit.volume_loss_pct_ci95, rel=1e-9)  # as fit.json
    assert cable["face_chainage_m"] == 95.0 and 9.0 < cable["face_lon"] < 9.3 and 51.3 < cable["face_lat"] < 51.6
    assert status["downloads"] == {"geopackage": "/api/files/geopackage", "report": "/api/files/report"}
    assert "do not replace" in status["caution"]


@pytest.mark.parametrize("name", ["route", "buildings", "utilities", "readings", "settlement_lines"])
def test_layers_are_geojson_in_wgs84(served, project, name):
    client, _, _, _ = served
    answer = client.get(f"/api/layers/{name}.geojson")
    assert answer.status_code == 200 and answer.headers["content-type"].startswith("application/geo+json")
    layer = answer.json()
    assert layer["type"] == "FeatureCollection" and layer["features"]
    xy = np.array([c for f in layer["features"] for c in _coordinates(f["geometry"])])
    assert np.all((xy[:, 0] > 9.0) & (xy[:, 0] < 9.3) & (xy[:, 1] > 51.3) & (xy[:, 1] < 51.6))  # lon, lat: Ostrey
    if name == "buildings":
        assert len(layer["features"]) == len(project.buildings)
    if name == "readings":
        assert {f["properties"]["trigger_status"] for f in layer["features"]} <= {"clear", "amber reached",
                                                                                "red reached"}


def _coordinates(geometry):
    def walk(c):
        if isinstance(c[0], (int, float)):
            yield c[:2]
        else:
            for part in c:
                yield from walk(part)
    return list(walk(geometry["coordinates"]))


def test_a_points_series_carries_the_design_prediction_and_the_latest_fit(served, project):
    client, _, _, _ = served
    series = client.get("/api/points/CT30-C0").json()
    readings = read_readings(READINGS, project)
    mine = readings.subset(readings.point_id == "CT30-C0")
    assert [r["date"][:10] for r in series["readings"]] == [str(d)[:10] for d in mine.date]
    np.testing.assert_allclose([r["predicted_mm"] for r in series["readings"]],
                               predicted_settlement_mm(project, mine), atol=1e-9)
    assert all(r["fitted_mm"] is not None for r in series["readings"])
    assert series["trigger_status"] in ("clear", "amber reached", "red reached")


@pytest.mark.parametrize("path", ["/api/layers/..%2F..%2Fsite.sqlite", "/api/layers/../site.sqlite",
                                  "/api/layers/route.gpkg", "/api/points/..%2F..%2Fetc%2Fpasswd",
                                  "/api/points/%00", "/static/../site.sqlite", "/static/..%2F..%2Fstore.py",
                                  "/api/files/..%2Fsite.sqlite", "/api/nothing"])
def test_traversal_and_unknown_paths_are_refused_with_json(served, path):
    client, _, _, _ = served
    answer = client.get(path)
    assert answer.status_code == 404, (path, answer.text)
    assert answer.headers["content-type"].startswith("application/json") and "error" in answer.json()


# ---------------------------------------------------------------------------------------------- a real server
def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _serve(data, port):
    server = subprocess.Popen([sys.executable, "-m", "settle", "serve", str(PROJECT), "--data", str(data), "--port",
                               str(port)], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    for _ in range(300):
        try:
            if httpx.get(f"http://127.0.0.1:{port}/api/status", timeout=2).status_code == 200:
                return server
        except httpx.HTTPError:
            time.sleep(0.1)
    server.kill()
    raise AssertionError(f"the server did not start: {server.stderr.read()}")


def test_twenty_clients_posting_at_once_store_every_reading_once(tmp_path):
    rows = READINGS.read_text().strip().splitlines()
    header, body = rows[0], rows[1:]
    parts = [body[k::20] for k in range(20)]  # 20 different batches, each in file order
    token = Store(tmp_path, create=True).add_token("crew")
    port = _free_port()
    server = _serve(tmp_path, port)
    answers = [None] * 20
    try:
        def post(k):
            text = "\n".join([header] + parts[k]) + "\n"
            answers[k] = httpx.post(f"http://127.0.0.1:{port}/api/readings", content=text, headers=auth(token),
                                    timeout=60)

        threads = [threading.Thread(target=post, args=(k,)) for k in range(20)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(90)
    finally:
        server.terminate()
        server.wait(30)
    assert [a.status_code for a in answers] == [201] * 20, [a.text for a in answers if a.status_code != 201]
    assert sorted(a.json()["batch"] for a in answers) == list(range(1, 21))
    db = sqlite3.connect(tmp_path / "site.sqlite")
    assert db.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == len(body)
    assert db.execute("SELECT SUM(rows_added) FROM batches").fetchone()[0] == len(body)


def test_a_server_killed_during_posts_leaves_each_batch_all_in_or_not_at_all(tmp_path):
    """SIGKILL while large batches are being checked and stored; after restart the database is consistent and
    every batch recorded holds exactly the readings it says it added."""
    rng = np.random.default_rng(5)
    header = "point_id,drive,x,y,date,settlement_mm,face_chainage_m"
    drive = "Osier Meadow to Rope Street cable tunnel"
    lines = [header]
    days = np.datetime64("2026-09-01") + np.arange(50)
    for p in range(2000):
        x, y = 512680.0 + p % 40, 5703640.0 + p // 40
        for k, day in enumerate(days):
            lines.append(f"K{p},{drive},{x},{y},{day},{rng.normal(0, 1):.2f},{2 * k + 2}")
    big = "\n".join(lines) + "\n"  # 100 000 readings, about 2 s to check and store
    token = Store(tmp_path, create=True).add_token("crew")
    for attempt in range(3):
        port = _free_port()
        server = _serve(tmp_path, port)

        def post():
            try:
                httpx.post(f"http://127.0.0.1:{port}/api/readings", content=big.replace("K", f"K{attempt}-"),
                           headers=auth(token), timeout=60)
            except httpx.HTTPError:
                pass  # the server died under it

        thread = threading.Thread(target=post)
        thread.start()
        time.sleep((0.8, 2.0, 6.0)[attempt])  # during the upload, the checks or the insert; the last after it
        os.kill(server.pid, signal.SIGKILL)
        server.wait(10)
        thread.join(30)
    store = Store(tmp_path)  # opening rolls back what a killed writer left
    db = sqlite3.connect(tmp_path / "site.sqlite")
    assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    recorded = db.execute("SELECT batch, rows_added FROM batches").fetchall()
    print(f"batches recorded after 3 kills: {recorded}")
    for batch, added in recorded:
        assert db.execute("SELECT COUNT(*) FROM readings WHERE batch = ?", (batch,)).fetchone()[0] == added
        assert added in (0, len(lines) - 1)
    orphans = db.execute("SELECT COUNT(*) FROM readings WHERE batch NOT IN (SELECT batch FROM batches)").fetchone()
    assert orphans[0] == 0
    assert store.reading_summary()[0] % (len(lines) - 1) == 0
