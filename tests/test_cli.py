"""The command line end to end on the demo site: outputs, exit status, messages, safe writes."""
import json
import re
import shutil
import subprocess
import sys
from pathlib import Path

import fiona
import pytest

from settle.cli import _Progress

from .gpkg_conformance import assert_conformant

DEMO = Path(__file__).resolve().parent.parent / "demo_site"


def settle(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "settle", *map(str, args)], capture_output=True, text=True, cwd=cwd)


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo_out")
    done = settle("run", DEMO / "ostrey.toml", "--readings", DEMO / "cable_tunnel_readings.csv", "--out", out)
    return done, out


def test_demo_runs_and_writes_the_contract_layers(demo_run):
    done, out = demo_run
    assert done.returncode == 0, done.stderr
    gpkg = out / "ostrey.gpkg"
    assert sorted(fiona.listlayers(gpkg)) == sorted(["layer_styles", "route", "grid", "settlement_bands", "settlement_lines", "points",
                                                     "face_stations", "utilities", "utility_critical_points",
                                                     "buildings", "building_walls", "readings",
                                                     "route_profile", "route_reaches"])
    fields = {name: set(fiona.open(gpkg, layer=name).schema["properties"]) for name in fiona.listlayers(gpkg)}
    assert {"settlement_mm", "ux_mm", "uy_mm", "strain_max_ue", "strain_min_ue", "tilt"} <= fields["grid"]
    assert {"id", "settlement_mm", "ux_mm", "uy_mm", "strain_max_ue", "strain_min_ue", "tilt"} <= fields["points"]
    assert {"lower_mm", "upper_mm"} <= fields["settlement_bands"]
    assert fields["settlement_lines"] >= {"level_mm"}
    with fiona.open(gpkg, layer="route") as route:
        assert route.schema["geometry"] == "3D LineString"
        assert route.crs.to_epsg() == 25832
        assert len(route) == 2
    assert_conformant(gpkg)  # OGC GeoPackage requirements, see tests/gpkg_conformance.py


def test_demo_face_support_outputs(demo_run):
    _, out = demo_run
    gpkg = out / "ostrey.gpkg"
    with fiona.open(gpkg, layer="face_stations") as layer:
        assert {"drive", "chainage_m", "cover_m", "water_pressure_kpa", "support_min_kpa", "blowout_kpa",
                "support_max_kpa", "window_kpa", "status"} <= set(layer.schema["properties"])
    with fiona.open(gpkg, layer="route") as layer:
        assert "face_min_window_kpa" in layer.schema["properties"]
    table = (out / "face_pressures.csv").read_text().splitlines()
    assert table[0].startswith("# Planning bounds only") and "responsible engineer" in table[0]
    assert table[2].startswith("drive,chainage_m,status")
    summary = json.loads((out / "summary.json").read_text())
    main = summary["face_support"][0]
    # The brook crossing: the window is narrow where the cover is lowest (the demo's purpose, issue 4).
    assert 289.0 <= main["face_min_window_chainage_m"] <= 305.0
    assert 0.0 <= main["face_min_window_kpa"] < 10.0
    for name in summary["outputs"]["face_sections"]:
        assert (out / name).stat().st_size > 20_000


def test_demo_utilities(demo_run):
    _, out = demo_run
    with fiona.open(out / "ostrey.gpkg", layer="utilities") as layer:
        assert {"max_bending_strain_ue", "max_axial_strain_ue", "max_joint_rotation_deg", "max_joint_opening_mm",
                "governing_check", "utilisation", "status"} <= set(layer.schema["properties"])
        assert len(layer) == 6
    summary = json.loads((out / "summary.json").read_text())
    assert summary["utilities"]["pipes"] == 6 and sum(summary["utilities"]["by_status"].values()) == 6
    table = (out / "utilities.csv").read_text().splitlines()
    assert "qualified engineer" in table[0] and table[1].startswith("id,material,")
    assert len(table) == 2 + 6


def test_demo_buildings_show_several_categories(demo_run):
    _, out = demo_run
    with fiona.open(out / "ostrey.gpkg", layer="buildings") as layer:
        fields = set(layer.schema["properties"])
        assert {"max_settlement_mm", "max_tilt", "screened_out", "deflection_ratio", "horizontal_strain_pct",
                "tensile_strain_pct", "category", "category_label", "governing_wall"} <= fields
        assert {"height_m", "use"} <= fields  # the input attributes are carried
        categories = [f["properties"]["category"] for f in layer]
    with fiona.open(out / "ostrey.gpkg", layer="building_walls") as walls:
        assert len(walls) > 0
    summary = json.loads((out / "summary.json").read_text())["buildings"]
    assert summary["buildings"] == len(categories) == 29
    counts = {c: categories.count(int(c)) for c in summary["by_category"]}
    assert counts == summary["by_category"]
    assert sum(1 for n in counts.values() if n) >= 3  # the demo shows several categories (issue 3)
    table = (out / "buildings.csv").read_text().splitlines()
    assert "qualified engineer" in table[0] and len(table) == 2 + 29


def test_demo_route_reaches(demo_run):
    import pyogrio

    _, out = demo_run
    reaches = pyogrio.read_dataframe(out / "ostrey.gpkg", layer="route_reaches")
    route = pyogrio.read_dataframe(out / "ostrey.gpkg", layer="route")
    for _, drive in route.iterrows():
        mine = reaches[reaches["drive"] == drive["drive"]]
        assert abs(mine["length_m"].sum() - drive["length_m"]) < 1e-6  # the reaches tile the drive
        assert abs(mine.geometry.length.sum() - drive.geometry.length) < 1e-6  # and follow its axis
    brook = reaches[reaches["river"] == "Wenlow Brook"].iloc[0]
    assert (brook["from_chainage_m"], brook["to_chainage_m"]) == (289.0, 305.0)
    assert brook["volume_loss_pct"] == 2.5 and brook["support_mode"] == "air_cushion"
    assert brook["face_status"] == "narrow" and bool(brook["face_low_cover"])
    cable = reaches[reaches["drive"].str.startswith("Osier")]
    assert list(cable["excavated"]) == [True, False]  # split at the face, chainage 95 m


def test_demo_summary(demo_run):
    done, out = demo_run
    summary = json.loads((out / "summary.json").read_text())
    assert summary["project"] == "Ostrey water main and cable tunnel"
    assert [d["name"] for d in summary["drives"]] == ["Kiln Yard to Osier Meadow water main",
                                                     "Osier Meadow to Rope Street cable tunnel"]
    assert summary["drives"][1]["face_chainage_m"] == 95.0
    # The surface trough holds the lost volume (identity; the small remainder is the precision cut-off).
    assert abs(summary["volume_check"]["difference_pct"]) < 0.1
    assert summary["max_settlement"]["settlement_mm"] > 5
    assert any("2 x the outer diameter" in w for w in summary["warnings"])  # the brook crossing
    assert "qualified engineer" in summary["caution"]
    assert "warning: " in done.stderr and "cover is less than 2 x" in done.stderr


def test_same_project_gives_the_same_outputs(demo_run, tmp_path):
    _, out = demo_run
    again = settle("run", DEMO / "ostrey.toml", "--readings", DEMO / "cable_tunnel_readings.csv", "--out", tmp_path)
    assert again.returncode == 0
    assert (tmp_path / "summary.json").read_text() == (out / "summary.json").read_text()
    # Every layer, the style table included, holds the same rows and values (issue 7: reproducible output).
    import pyogrio

    for name in fiona.listlayers(out / "ostrey.gpkg"):
        first = pyogrio.read_dataframe(out / "ostrey.gpkg", layer=name)
        second = pyogrio.read_dataframe(tmp_path / "ostrey.gpkg", layer=name)
        assert first.equals(second), name


@pytest.mark.parametrize("args", [["--help"], ["run", "--help"], ["fit", "--help"], ["report", "--help"]])
def test_help_states_the_caution(args):
    done = settle(*args)
    assert done.returncode == 0
    text = " ".join(done.stdout.split())  # wrapped to the terminal
    assert "qualified engineer" in text and "local codes" in text


def _broken_copy(tmp_path, old, new):
    for f in DEMO.iterdir():
        if f.is_file():
            shutil.copy(f, tmp_path / f.name)
    toml = tmp_path / "ostrey.toml"
    text = toml.read_text()
    assert old in text
    toml.write_text(text.replace(old, new))
    return toml


@pytest.mark.parametrize(
    "old, new, message",
    [
        ("outer_diameter_m = 2.0", 'outer_diameter_m = "2,0"', r'outer_diameter_m .*got "2,0"'),
        ('crs = "EPSG:25832"', 'crs = "EPSG:4326"', r"crs .*not projected"),
        ("volume_loss_pct = 0.8\n", "volume_loss = 0.8\n", r'unknown key "volume_loss"; did you mean "volume_loss_pct"'),
        ("inner_diameter_m = 1.6\n", "inner_diameter_m = 1.6\nface_chainage_m = 900.0\n",
         r"face_chainage_m = 900 is outside the drive"),
    ],
)
def test_bad_input_exits_2_with_one_line_and_no_traceback(tmp_path, old, new, message):
    toml = _broken_copy(tmp_path, old, new)
    done = settle("run", toml, "--out", tmp_path / "out")
    assert done.returncode == 2
    assert "Traceback" not in done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("settle: error: ")
    assert re.search(message, lines[0]), lines[0]
    assert not (tmp_path / "out" / "ostrey.gpkg").exists()


def test_crown_above_ground_is_refused(tmp_path):
    # Lift the water main's invert profile (the levels of its LandXML PVIs) by 6 m: its crown comes out of the ground.
    toml = _broken_copy(tmp_path, 'alignment = "water_main.xml"', 'alignment = "lifted.xml"')
    text = (DEMO / "water_main.xml").read_text()
    lifted, count = re.subn(r"(<(?:PVI|ParaCurve)[^>]*>)([^<\s]+) ([^<\s]+)<",
                            lambda m: f"{m[1]}{m[2]} {float(m[3]) + 6.0:.3f}<", text)
    assert count == 5
    (tmp_path / "lifted.xml").write_text(lifted)
    done = settle("run", toml, "--out", tmp_path)
    assert done.returncode == 2
    assert "crown is above the ground surface" in done.stderr and "Traceback" not in done.stderr


def test_failed_run_leaves_the_earlier_result_untouched(demo_run, tmp_path):
    _, good = demo_run
    out = tmp_path / "out"
    shutil.copytree(good, out)
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    toml = _broken_copy(tmp_path, "grid_spacing_m = 1.0", "grid_spacing_m = -1.0")
    done = settle("run", toml, "--out", out)
    assert done.returncode == 2
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before


def test_progress_only_on_a_terminal(capsys):
    quiet = _Progress(enabled=False)
    quiet("grid", 0.5)
    quiet.done()
    assert capsys.readouterr().err == ""
    shown = _Progress(enabled=True)
    shown("grid", 0.5)
    shown.done()
    assert "grid:          50.0 %" in capsys.readouterr().err


def test_piped_run_prints_no_progress(demo_run):
    done, _ = demo_run
    assert "\r" not in done.stderr and "%" not in done.stderr


def test_terminal_summary_table(demo_run):
    done, out = demo_run
    summary = json.loads((out / "summary.json").read_text())
    lines = done.stdout.strip().splitlines()
    table = dict(line.split("  ", 1) for line in lines)
    table = {k.strip(): v.strip() for k, v in table.items()}
    assert table["max settlement"].startswith(f"{summary['max_settlement']['settlement_mm']:.1f} mm")
    assert table["buildings by category"].startswith(", ".join(
        f"{c}: {n}" for c, n in summary["buildings"]["by_category"].items()))
    assert "exceeds" in table["utilities by status"]
    assert "smallest" in table["face support window"] and "ostrey.gpkg" in table["outputs"]


def test_demo_styles_inside_and_beside_the_geopackage(demo_run):
    import sqlite3

    _, out = demo_run
    with sqlite3.connect(f"file:{out / 'ostrey.gpkg'}?mode=ro", uri=True) as con:
        rows = con.execute("SELECT f_table_schema, f_table_name, f_geometry_column FROM layer_styles").fetchall()
        kind = con.execute("SELECT data_type FROM gpkg_contents WHERE table_name = 'layer_styles'").fetchone()
    assert kind == ("attributes",)
    assert {name for _, name, _ in rows} >= {"settlement_bands", "buildings", "utilities", "face_stations",
                                             "readings"}
    assert all(schema == "" and column == "geom" for schema, _, column in rows)  # what QGIS looks up
    for name in ("settlement_bands", "buildings", "utilities", "face_stations"):
        assert (out / f"ostrey-{name}.qml").exists() and (out / f"ostrey-{name}.sld").exists()


def test_demo_readings_layer_and_sections(demo_run):
    _, out = demo_run
    with fiona.open(out / "ostrey.gpkg", layer="readings") as layer:
        assert {"point_id", "reading_mm", "predicted_mm", "difference_mm", "fitted_mm", "trigger_status"} <= set(
            layer.schema["properties"])
        features = list(layer)
    for f in features:
        p = f["properties"]
        assert abs(p["difference_mm"] - (p["reading_mm"] - p["predicted_mm"])) < 1e-9
        assert p["trigger_status"] == ("red reached" if abs(p["reading_mm"]) >= 6.0 else
                                       "amber reached" if abs(p["reading_mm"]) >= 3.0 else "clear")
    summary = json.loads((out / "summary.json").read_text())
    assert len(summary["outputs"]["readings_sections"]) == 2  # the two monitored arrays of the demo
    for name in summary["outputs"]["readings_sections"]:
        assert (out / name).stat().st_size > 20_000


def test_fit_recovers_the_demo_truth_and_forecasts_ahead(tmp_path):
    # demo_site/make_demo.py made the cable tunnel's readings from volume loss 1.2 % and K 0.42 (invented truth)
    # with 0.3 mm noise and two misread staff readings: the fit finds them within 3 standard errors and flags both.
    done = settle("fit", DEMO / "ostrey.toml", DEMO / "cable_tunnel_readings.csv", "--out", tmp_path)
    assert done.returncode == 0, done.stderr
    report = json.loads((tmp_path / "fit.json").read_text())
    fit = report["fits"][0]
    assert abs(fit["volume_loss_pct"] - 1.2) < 3 * fit["volume_loss_pct_se"]
    assert abs(fit["trough_width_k"] - 0.42) < 3 * fit["trough_width_k_se"]
    assert len(fit["outliers"]) == 2 and fit["rms_mm"] < 0.4
    rerun = settle("run", tmp_path / "ostrey-fitted.toml", "--out", tmp_path / "rerun")
    assert rerun.returncode == 0, rerun.stderr  # the fitted file runs unchanged
    forecast = (tmp_path / "forecast.csv").read_text().splitlines()
    assert forecast[1] == "kind,id,drive,chainage_m,design,forecast,changed"
    assert any(line.endswith(",True") for line in forecast[2:])
    assert report["forecast"]["items_ahead_of_face"] == len(forecast) - 2


def test_fit_with_bad_readings_file(tmp_path):
    bad = tmp_path / "r.csv"
    bad.write_text("point_id,date,settlement_mm\nA,2026-01-01,1.0\n")
    done = settle("fit", DEMO / "ostrey.toml", bad, "--out", tmp_path)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "face_chainage_m" in done.stderr


def test_readings_need_trigger_levels(tmp_path):
    toml = _broken_copy(tmp_path, "amber_mm = 3.0\nred_mm = 6.0\n", "")
    toml.write_text(re.sub(r"\[monitoring\][^\n]*\n", "", toml.read_text()))
    done = settle("run", toml, "--readings", DEMO / "cable_tunnel_readings.csv", "--out", tmp_path / "o")
    assert done.returncode == 2 and "[monitoring] amber_mm and red_mm" in done.stderr


def test_report_from_a_finished_run_without_recomputing(demo_run, tmp_path, monkeypatch):
    # `settle report` reads the outputs only: it must not call the engine.
    import settle.procedure.orchestrator

    _, good = demo_run
    out = tmp_path / "out"
    shutil.copytree(good, out)
    monkeypatch.setattr(settle.procedure.orchestrator, "run",
                        lambda *a, **k: pytest.fail("the report recomputed the run"))
    from settle.cli import main

    assert main(["report", str(DEMO / "ostrey.toml"), "--out", str(out), "--date", "2026-12-01"]) == 0
    pdf = (out / "ostrey-report.pdf").read_bytes()
    assert pdf.startswith(b"%PDF") and len(pdf) > 50_000


def test_report_needs_a_finished_run(tmp_path):
    done = settle("report", DEMO / "ostrey.toml", "--out", tmp_path)
    assert done.returncode == 2 and "Traceback" not in done.stderr


def test_sections_chainage_must_be_numbers(tmp_path):
    toml = _broken_copy(tmp_path, "grid_spacing_m = 1.0", 'grid_spacing_m = 1.0\nsections_chainage_m = "120"')
    done = settle("run", toml, "--out", tmp_path / "o")
    assert done.returncode == 2 and "sections_chainage_m must be a non-empty list" in done.stderr
