"""The site page in a real browser: `settle serve` on the demo, headless Chromium driven by selenium.

The page loads the map's features, the site team posts a readings file through the page's form, and the point that
file takes past the amber trigger turns amber on the map once the refit is done.

Chromium and its driver are Debian's packages (tests/install_browser.sh); nothing downloads a browser. The test is
skipped only when /usr/bin/chromium is absent.
"""
import csv
import json
import socket
import subprocess
import sys
import time
import tomllib
import urllib.request
from datetime import datetime, timedelta, timezone
from pathlib import Path

import pytest

CHROMIUM = Path("/usr/bin/chromium")
CHROMEDRIVER = Path("/usr/bin/chromedriver")
REPO = Path(__file__).resolve().parents[1]
PROJECT = REPO / "demo_site" / "ostrey.toml"
DEMO_READINGS = REPO / "demo_site" / "cable_tunnel_readings.csv"
SERVER_START_S = 30.0   # the server answers /api/status within this
REFIT_S = 40.0          # one refit of the demo (a back-analysis and a run) ends within this; about 9 s seen
PAGE_S = 20.0           # the page draws its layers within this

pytestmark = pytest.mark.skipif(not CHROMIUM.exists(), reason="no /usr/bin/chromium (tests/install_browser.sh "
                                                              "installs Debian's chromium and chromium-driver)")


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def settle_command(*args) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "settle", *map(str, args)], capture_output=True, text=True,
                          cwd=REPO, timeout=60)


def get_json(url: str) -> dict:
    with urllib.request.urlopen(url, timeout=10) as r:
        return json.loads(r.read())


def post_csv(url: str, token: str, text: str) -> tuple[int, dict]:
    req = urllib.request.Request(url, data=text.encode("utf-8"), method="POST",
                                 headers={"Content-Type": "text/csv", "Authorization": f"Bearer {token}"})
    with urllib.request.urlopen(req, timeout=30) as r:
        return r.status, json.loads(r.read())


def wait_for(condition, timeout_s: float, what: str, every_s: float = 0.25):
    """condition() until it returns something truthy; fails naming `what` after timeout_s."""
    end = time.monotonic() + timeout_s
    while True:
        value = condition()
        if value:
            return value
        if time.monotonic() > end:
            pytest.fail(f"waited {timeout_s:.0f} s for {what}")
        time.sleep(every_s)


def refit_idle(base: str) -> bool:
    state = get_json(f"{base}/api/status")["refit"]
    if state["state"] == "failed":
        pytest.fail(f"the refit failed: {state['message']}")
    return state["state"] == "idle"


@pytest.fixture
def served(tmp_path):
    """The demo served on a free port with one write token and the demo's readings posted: (base URL, token)."""
    data = tmp_path / "site-data"
    made = settle_command("token", "add", "site-test", "--data", data)
    assert made.returncode == 0, made.stderr
    token = made.stdout.strip().splitlines()[-1].strip()  # the contract: the token is the last line
    port = free_port()
    log = open(tmp_path / "serve.log", "w+")
    server = subprocess.Popen([sys.executable, "-m", "settle", "serve", str(PROJECT), "--data", str(data),
                               "--port", str(port)], cwd=REPO, stdout=log, stderr=subprocess.STDOUT)
    base = f"http://127.0.0.1:{port}"

    def answering():
        if server.poll() is not None:
            log.seek(0)
            pytest.fail(f"settle serve exited with {server.returncode}: {log.read()[-2000:]}")
        try:
            return get_json(f"{base}/api/status")
        except OSError:
            return None

    try:
        wait_for(answering, SERVER_START_S, "settle serve to answer")
        # The demo's readings as they stood before the day under test: the points and their history.
        status, body = post_csv(f"{base}/api/readings", token, DEMO_READINGS.read_text())
        assert status == 201 and body["kept"] > 0, body
        # Idle with the readings layer drawn from them (not the design run's empty one).
        wait_for(lambda: refit_idle(base) and get_json(f"{base}/api/layers/readings.geojson")["features"],
                 2 * REFIT_S, "the refit of the demo's readings", every_s=0.5)
        yield base, token
    finally:
        server.terminate()
        try:
            server.wait(timeout=10)
        except subprocess.TimeoutExpired:
            server.kill()
            server.wait(timeout=10)
        log.close()


@pytest.fixture
def browser():
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = str(CHROMIUM)
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                "--window-size=1440,900"):
        options.add_argument(arg)
    driver = webdriver.Chrome(options=options, service=Service(str(CHROMEDRIVER)))  # never selenium-manager
    try:
        yield driver
    finally:
        driver.quit()


def point_statuses(driver) -> dict:
    """Per point id, its status in the page's registry and on its marker's SVG element."""
    return driver.execute_script("""
        var out = {};
        var reg = (window.settleSite && window.settleSite.points) || {};
        Object.keys(reg).forEach(function (id) { out[id] = {registry: reg[id].status}; });
        document.querySelectorAll('#map [data-point-id]').forEach(function (node) {
            var id = node.getAttribute('data-point-id');
            out[id] = out[id] || {};
            out[id].marker = node.getAttribute('data-status');
        });
        return out;""")


def amber_reading(point_id: str, series: dict, amber_mm: float, red_mm: float) -> tuple[str, float]:
    """One CSV line for `point_id`, a day after its latest reading, between the amber and red triggers."""
    rows = {r["point_id"]: r for r in csv.DictReader(DEMO_READINGS.open())}
    where = rows[point_id]
    last = series["readings"][-1]
    date = datetime.fromisoformat(last["date"].replace("Z", "+00:00")).astimezone(timezone.utc) + timedelta(days=1)
    settlement_mm = round(amber_mm + 0.25 * (red_mm - amber_mm), 2)
    face_m = last["face_chainage_m"]
    line = (f"{point_id},{where['drive']},{where['x']},{where['y']},{date.strftime('%Y-%m-%dT%H:%M:%SZ')},"
            f"{settlement_mm},{face_m}")
    return "point_id,drive,x,y,date,settlement_mm,face_chainage_m\n" + line + "\n", settlement_mm


def test_posting_through_the_form_turns_a_point_amber(served, browser, tmp_path):
    from selenium.webdriver.common.by import By

    base, token = served
    monitoring = tomllib.loads(PROJECT.read_text())["monitoring"]
    amber_mm, red_mm = float(monitoring["amber_mm"]), float(monitoring["red_mm"])
    demo_points = {r["point_id"] for r in csv.DictReader(DEMO_READINGS.open())}

    browser.get(base + "/")
    wait_for(lambda: browser.execute_script("return document.body.dataset.featuresLoaded") == "true",
             PAGE_S, "the page to draw its layers")
    before = point_statuses(browser)
    # Every point of the posted readings has a marker, and marker and registry agree.
    assert set(before) == demo_points
    assert all(v.get("registry") == v.get("marker") for v in before.values()), before
    assert browser.find_elements(By.CSS_SELECTOR, "#map path.leaflet-interactive[data-point-id]")
    assert browser.find_element(By.ID, "readings-count").text == str(get_json(f"{base}/api/status")["readings"])

    # The clear point with the highest latest reading: a further day's reading at amber is plausible for it.
    layer = get_json(f"{base}/api/layers/readings.geojson")
    clear = [f["properties"] for f in layer["features"] if f["properties"]["trigger_status"] == "clear"]
    assert clear, "the demo's readings leave no point clear"
    target = max(clear, key=lambda p: p["latest_mm"])["point_id"]
    assert before[target] == {"registry": "clear", "marker": "clear"}
    text, settlement_mm = amber_reading(target, get_json(f"{base}/api/points/{target}"), amber_mm, red_mm)
    upload = tmp_path / "day_readings.csv"
    upload.write_text(text)
    drawn_before = int(browser.execute_script("return document.body.dataset.layersDrawn"))

    browser.find_element(By.ID, "token").send_keys(token)
    browser.find_element(By.ID, "readings-file").send_keys(str(upload))
    browser.find_element(By.ID, "upload-button").click()
    result = wait_for(lambda: browser.find_element(By.ID, "upload-result").get_attribute("data-outcome")
                      in ("ok", "error") and browser.find_element(By.ID, "upload-result"), PAGE_S, "the post's answer")
    assert result.get_attribute("data-outcome") == "ok", result.text
    assert "kept 1 reading" in result.text

    def turned_amber():
        now = point_statuses(browser).get(target, {})
        return now.get("registry") == "amber reached" and now.get("marker") == "amber reached"

    wait_for(turned_amber, REFIT_S + PAGE_S, f"{target} to turn amber on the map")
    assert int(browser.execute_script("return document.body.dataset.layersDrawn")) > drawn_before
    assert browser.execute_script("return document.body.dataset.refitState") == "idle"
    after = point_statuses(browser)
    # Only the target changed; the other points keep the status they had.
    assert {k: v for k, v in after.items() if k != target} == {k: v for k, v in before.items() if k != target}
    # The target is now listed among the points at or over a trigger, with its new reading and the amber level.
    item = browser.find_element(By.CSS_SELECTOR, f'#alerts .alert-item[data-point-id="{target}"]')
    assert item.get_attribute("data-status") == "amber reached"
    assert f"{settlement_mm:.2f} mm" in item.text and f"amber {amber_mm:.1f} mm" in item.text
    # Selecting it draws its readings: one measured marker per stored reading, the last the one just posted.
    item.click()
    series = get_json(f"{base}/api/points/{target}")["readings"]
    wait_for(lambda: len(browser.find_elements(By.CSS_SELECTOR, "#point-chart .measured circle")) == len(series),
             PAGE_S, f"the chart of {target}")
    assert series[-1]["settlement_mm"] == pytest.approx(settlement_mm)
    assert browser.find_elements(By.CSS_SELECTOR, "#point-chart line.trigger.amber")
