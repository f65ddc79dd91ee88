"""Tests of gis_out.dxf_drawing: the DXF drawing of a run, read back with ezdxf and compared with the layers.

One small project (two drives, six buildings, four pipes; under a second to run) is assessed once for the module.
"""
from __future__ import annotations

import dataclasses
import json
import os
import warnings
from collections import Counter

import ezdxf
import numpy as np
import pandas as pd
import pyogrio
import pytest
import shapely
from shapely.geometry import MultiPolygon, Polygon

from gis_out import dxf_drawing as dx
from gis_out import write_geopackage
from gis_out.frames import frames
from gis_out.geopackage import OutputError
from gis_out.styles import DAMAGE_COLOURS, SINGLE_SYMBOLS, UTILITY_SYMBOLS, hex_to_srgb
from settle.assessments.utilities import STATUSES
from settle.procedure.orchestrator import run

from .test_project import BASE, EAST_CSV, POINTS_CSV, WEST_CSV

MM = 1e-3  # coordinates must match to 1 mm [m]
CRS_URN = {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::27700"}}


def _house(k, x, y, w=8.0, h=12.0):
    ring = [[x, y], [x + w, y], [x + w, y + h], [x, y + h], [x, y]]
    return {"type": "Feature", "properties": {"id": f"H{k}", "height_m": 8.0},
            "geometry": {"type": "Polygon", "coordinates": [ring]}}


def _pipe(k, coords):
    return {"type": "Feature", "properties": {"id": f"W{k}", "material": "cast_iron", "outer_diameter_mm": 300,
                                              "depth_m": 1.0, "segment_length_m": 3.66},
            "geometry": {"type": "LineString", "coordinates": coords}}


@pytest.fixture(scope="module")
def run_layers(tmp_path_factory):
    """(layers, drives, contour levels) of a small real run: the loader tests' two-drive site with a larger, lossier
    West drive (3 m, 4 %) so that buildings fall in several damage categories and pipes in two statuses."""
    site = tmp_path_factory.mktemp("dxf_site")
    (site / "data").mkdir()
    text = BASE.replace("outer_diameter_m = 1.5\nvolume_loss_pct = 1.0\n", "outer_diameter_m = 3.0\nvolume_loss_pct = 4.0\n")
    text = text.replace("[output]", '[buildings]\nfile = "houses.geojson"\ndefault_foundation_depth_m = 1.0\n'
                                    'default_structure = "masonry"\n\n[utilities]\nfile = "pipes.geojson"\n\n[output]')
    assert "volume_loss_pct = 4.0" in text and "[buildings]" in text  # the edits took
    houses = [_house(1, 500020, 179995), _house(2, 500040, 180004), _house(3, 500060, 180020),
              _house(4, 500060, 180060), _house(5, 500195, 180030, 10, 8), _house(6, 500300, 180300)]
    pipes = [_pipe(0, [[500030, 179980], [500030, 180020]]), _pipe(1, [[500070, 179970], [500075, 180040]]),
             _pipe(2, [[500150, 180200], [500160, 180300]]), _pipe(3, [[500180, 180040], [500230, 180045]])]
    (site / "houses.geojson").write_text(json.dumps({"type": "FeatureCollection", "crs": CRS_URN, "features": houses}))
    (site / "pipes.geojson").write_text(json.dumps({"type": "FeatureCollection", "crs": CRS_URN, "features": pipes}))
    (site / "project.toml").write_text(text)
    (site / "west.csv").write_text(WEST_CSV)
    (site / "data" / "east.csv").write_text(EAST_CSV)
    (site / "points.csv").write_text(POINTS_CSV)
    result = run(site / "project.toml")
    return frames(result), result.drives, result.project.output.contour_levels_mm


@pytest.fixture(scope="module")
def drawing(run_layers, tmp_path_factory):
    """The run's DXF written once and read back: (document, path)."""
    layers, drives, levels = run_layers
    path = dx.write_dxf(tmp_path_factory.mktemp("dxf_out") / "run.dxf", layers, drives, levels_mm=levels)
    return ezdxf.readfile(path), path


def _on(doc, kind, layer):
    return [e for e in doc.modelspace() if e.dxftype() == kind and e.dxf.layer == layer]


def _xdata(entity) -> dict:
    tags = [value for _, value in entity.get_xdata(dx.APP_ID)]
    return dict(zip(tags[::2], tags[1::2]))


def _categories(frame) -> list:
    return [None if pd.isna(v) else int(v) for v in frame["category"]]


# ---------------------------------------------------------------------------------------------- the whole file
def test_file_reads_back_audits_clean_and_is_in_metres(drawing):
    doc, path = drawing
    auditor = doc.audit()
    assert len(auditor.errors) == 0, [e.message for e in auditor.errors]
    assert doc.dxfversion == "AC1027"  # R2013
    assert doc.header["$INSUNITS"] == 6 == ezdxf.units.M  # metres (DXF reference, $INSUNITS codes; from memory)
    assert doc.header["$MEASUREMENT"] == 1
    assert not [p for p in os.listdir(path.parent) if p.endswith(".tmp")]  # no temporary file left
    # The extents hold every vertex drawn (the view opens on them).
    low, high = np.array(doc.header["$EXTMIN"])[:2], np.array(doc.header["$EXTMAX"])[:2]
    vertices = np.vstack([np.array(p.get_points("xy")) for p in doc.modelspace().query("LWPOLYLINE")])
    assert np.all(vertices >= low) and np.all(vertices <= high)


def test_every_layer_exists_with_our_prefix(drawing):
    doc, _ = drawing
    names = {layer.dxf.name for layer in doc.layers}
    ours = {dx.ROUTE, dx.ROUTE_TICKS, dx.ROUTE_TEXT, dx.CONTOURS, dx.CONTOUR_TEXT, dx.NOTES}
    ours |= {dx.building_layer(k) for k in (0, 1, 2, 3, 4, 5, None)} | {dx.utility_layer(s) for s in STATUSES}
    assert len(ours) == 6 + 7 + 5
    assert ours <= names
    assert {e.dxf.layer for e in doc.modelspace()} <= ours


# -------------------------------------------------------------------------------------------------- buildings
def test_one_closed_polyline_per_building_on_its_category_layer(run_layers, drawing, tmp_path):
    layers, _, _ = run_layers
    doc, _ = drawing
    buildings = layers["buildings"]
    expected = Counter(_categories(buildings))
    assert len(expected) >= 3, expected  # the run spreads the buildings over several categories
    # The same counts from the GeoPackage the run writes beside the DXF.
    gpkg = write_geopackage(tmp_path / "run.gpkg", {"buildings": buildings})
    stored = pyogrio.read_dataframe(gpkg, layer="buildings")
    assert Counter(_categories(stored)) == expected
    for category in (0, 1, 2, 3, 4, 5, None):
        outlines = _on(doc, "LWPOLYLINE", dx.building_layer(category))
        fills = _on(doc, "HATCH", dx.building_layer(category))
        assert len(outlines) == expected.get(category, 0), category
        assert all(p.closed for p in outlines)
        assert len(fills) == (0 if category is None else expected.get(category, 0))


def test_building_outlines_match_the_footprints(run_layers, drawing):
    layers, _, _ = run_layers
    doc, _ = drawing
    buildings = layers["buildings"]
    seen = 0
    for ident, geom, category in zip(buildings["id"], buildings.geometry, _categories(buildings)):
        (polyline,) = [p for p in _on(doc, "LWPOLYLINE", dx.building_layer(category)) if _xdata(p)["id"] == ident]
        ring = shapely.get_coordinates(geom.geoms[0].exterior)[:-1]
        got = np.array(polyline.get_points("xy"))
        assert got.shape == ring.shape
        assert np.abs(got - ring).max() < MM
        assert _xdata(polyline)["category"] == (-1 if category is None else category)
        seen += 1
    assert seen == len(buildings) == 6


def test_holes_parts_and_not_assessed(run_layers, tmp_path):
    layers, drives, _ = run_layers
    buildings = layers["buildings"].copy()
    outer = Polygon([(500300, 180300), (500320, 180300), (500320, 180320), (500300, 180320)],
                    [[(500305, 180305), (500310, 180305), (500310, 180310), (500305, 180310)]])
    second = Polygon([(500330, 180300), (500335, 180300), (500335, 180306)])
    buildings.loc[5, "geometry"] = MultiPolygon([outer, second])
    buildings["category"] = buildings["category"].astype("Int64")
    buildings.loc[4, "category"] = pd.NA
    buildings.loc[4, "category_label"] = "not assessed"
    categories = _categories(buildings)
    doc = ezdxf.readfile(dx.write_dxf(tmp_path / "holes.dxf", {"buildings": buildings}, drives))
    assert len(doc.audit().errors) == 0
    moved = dx.building_layer(categories[5])
    rings = [p for p in _on(doc, "LWPOLYLINE", moved) if _xdata(p)["id"] == "H6"]
    assert len(rings) == 3  # exterior, hole, second part
    assert np.abs(np.array(rings[1].get_points("xy")) - np.array(outer.interiors[0].coords)[:-1]).max() < MM
    assert np.abs(np.array(rings[2].get_points("xy")) - np.array(second.exterior.coords)[:-1]).max() < MM
    fills = [h for h in _on(doc, "HATCH", moved) if _xdata(h)["id"] == "H6"]
    assert len(fills) == 2  # one per polygon
    assert len(fills[0].paths) == 2 and len(fills[1].paths) == 1  # the hole is a second path of the first
    (unassessed,) = _on(doc, "LWPOLYLINE", dx.building_layer(None))
    assert _xdata(unassessed)["id"] == "H5" and _xdata(unassessed)["category"] == -1
    assert not _on(doc, "HATCH", dx.building_layer(None))


# --------------------------------------------------------------------------------------------------- contours
def test_contours_match_settlement_lines(run_layers, drawing):
    layers, _, levels = run_layers
    doc, _ = drawing
    lines = layers["settlement_lines"]
    polylines = _on(doc, "LWPOLYLINE", dx.CONTOURS)
    parts = [(mm, np.asarray(part.coords)) for mm, geom in zip(lines["level_mm"], lines.geometry)
             for part in geom.geoms]
    assert len(parts) >= len(lines) >= 3
    assert len(polylines) == len(parts)
    for (mm, coords), polyline in zip(parts, polylines):
        closed = np.array_equal(coords[0], coords[-1])
        expected = coords[:-1] if closed else coords
        got = np.array(polyline.get_points("xy"))
        assert polyline.closed == closed
        assert got.shape == expected.shape and np.abs(got - expected).max() < MM
        assert polyline.dxf.elevation == pytest.approx(-mm / 1000.0, abs=1e-12)  # minus the settlement [m]
        assert _xdata(polyline)["level_mm"] == pytest.approx(mm)
    labels = Counter(t.dxf.text for t in _on(doc, "TEXT", dx.CONTOUR_TEXT))
    assert labels == Counter(f"{mm:g} mm" for mm, _ in parts)
    assert set(labels) <= {f"{v:g} mm" for v in levels}


# ------------------------------------------------------------------------------------------------------ route
def test_route_polylines_are_the_axis_vertices(run_layers, drawing):
    _, drives, _ = run_layers
    doc, _ = drawing
    axes = _on(doc, "POLYLINE", dx.ROUTE)
    assert len(axes) == len(drives) == 2
    for axis, d in zip(axes, drives):
        assert axis.is_3d_polyline
        got = np.array([tuple(v) for v in axis.points()])
        assert got.shape == d.axis_xyz_m.shape
        assert np.abs(got - d.axis_xyz_m).max() < 1e-9
        assert _xdata(axis)["drive"] == d.name


def test_chainage_ticks_and_labels(run_layers, drawing):
    _, drives, _ = run_layers
    doc, _ = drawing
    # Expected ticks by hand from each drive's chainage: start, every 50 m inside it, end. West runs from 0 m to
    # its 3-D length (about 104 m), East from its start_chainage_m 10 m to about 111 m (test_project's alignments).
    expected = []
    for d in drives:
        start, end = d.chainage_m[0], d.chainage_m[-1]
        regular = [c for c in range(0, 1000, 50) if start < c < end]
        expected.append([start, *regular, end])
    assert [len(e) for e in expected] == [4, 4]
    assert [round(c, 1) for c in expected[1]][:3] == [10.0, 50.0, 100.0]
    ticks = _on(doc, "LINE", dx.ROUTE_TICKS)
    assert len(ticks) == sum(len(e) for e in expected)
    texts = [t.dxf.text for t in _on(doc, "TEXT", dx.ROUTE_TEXT) if t.dxf.text.endswith(" m")]
    assert texts == [f"{c:.1f}".removesuffix(".0") + " m" for e in expected for c in e]
    half = dx.TICK_HALF_PAPER_MM * 500 / 1000.0
    k = 0
    for d, chain in zip(drives, expected):
        route = shapely.LineString(d.axis_xyz_m[:, :2])
        for c in chain:
            a, b = np.array(ticks[k].dxf.start)[:2], np.array(ticks[k].dxf.end)[:2]
            middle = (a + b) / 2.0
            assert np.hypot(*(b - a)) == pytest.approx(2 * half)
            assert route.distance(shapely.Point(middle)) < 1e-6
            assert route.project(shapely.Point(middle)) == pytest.approx(
                np.interp(c, d.chainage_m, np.concatenate([[0], np.cumsum(np.hypot(*np.diff(d.axis_xyz_m[:, :2],
                                                                                            axis=0).T))])), abs=1e-6)
            # Square to the axis segment that holds the chainage (the last one at the end).
            j = min(int(np.searchsorted(d.chainage_m, c, side="right")) - 1, len(d.chainage_m) - 2)
            tangent = d.axis_xyz_m[j + 1, :2] - d.axis_xyz_m[j, :2]
            assert abs(np.dot(tangent / np.linalg.norm(tangent), (b - a) / np.linalg.norm(b - a))) < 1e-9
            k += 1
    names = [t.dxf.text for t in _on(doc, "TEXT", dx.ROUTE_TEXT) if not t.dxf.text.endswith(" m")]
    assert names == [d.name for d in drives]


def test_tick_chainages_unit():
    assert dx.tick_chainages([10.0, 111.2], 50.0).tolist() == [10.0, 50.0, 100.0, 111.2]
    assert dx.tick_chainages([0.0, 100.0], 50.0).tolist() == [0.0, 50.0, 100.0]  # ends on a multiple: once
    assert dx.tick_chainages([0.0, 101.0], 50.0, clear_m=2.5).tolist() == [0.0, 50.0, 101.0]  # 100 too near
    assert dx.tick_chainages([-20.0, 30.0], 25.0).tolist() == [-20.0, 0.0, 25.0, 30.0]
    assert dx.tick_chainages([0.0, 20.0], 50.0).tolist() == [0.0, 20.0]


def test_text_helpers():
    assert [dx.chainage_text(c) for c in (0.0, 120.0, 104.08, -0.01, 99.96)] == ["0 m", "120 m", "104.1 m", "0 m",
                                                                                  "100 m"]
    assert dx.upright_deg([0.0, 90.0, 91.0, 180.0, -90.0, -135.0, 270.0]).tolist() == [0.0, 90.0, -89.0, 0.0, 90.0,
                                                                                         45.0, 90.0]
    assert dx.lineweight(0.26) == 25 and dx.lineweight(1.1) == 106 and dx.lineweight(0.9) == 90
    assert dx.utility_layer("crosses the tunnel") == "settle_utilities_crosses_the_tunnel"


# -------------------------------------------------------------------------------------------------- utilities
def test_one_polyline_per_pipe_on_its_status_layer(run_layers, drawing):
    layers, _, _ = run_layers
    doc, _ = drawing
    pipes = layers["utilities"]
    expected = Counter(pipes["status"])
    assert len(expected) >= 2, expected
    for status in STATUSES:
        assert len(_on(doc, "LWPOLYLINE", dx.utility_layer(status))) == expected.get(status, 0)
    for ident, status, geom in zip(pipes["id"], pipes["status"], pipes.geometry):
        (line,) = [p for p in _on(doc, "LWPOLYLINE", dx.utility_layer(status)) if _xdata(p)["id"] == ident]
        assert np.abs(np.array(line.get_points("xy")) - shapely.get_coordinates(geom)).max() < MM
        assert _xdata(line)["status"] == status


# ---------------------------------------------------------------------------------------------------- palette
def test_true_colours_and_line_weights_follow_the_palette(drawing):
    doc, _ = drawing

    def colour(name):
        """A layer's true colour, or "foreground" (ACI 7, no true colour) for a near-black palette colour."""
        layer = doc.layers.get(name)
        if layer.rgb is None:
            assert layer.dxf.color == dx.FOREGROUND_ACI, name
            return "foreground"
        return tuple(layer.rgb)

    def srgb(hex_colour):
        """What the palette colour becomes: its sRGB bytes, or the foreground colour when near black (relative
        luminance under 0.1: #111111, #303030, #3c3c3c, #1a1a1a; checked by hand against the sRGB formula)."""
        if hex_colour.lower() in ("#111111", "#303030", "#3c3c3c", "#1a1a1a"):
            return "foreground"
        return tuple(int(np.rint(v * 255)) for v in hex_to_srgb([hex_colour])[0])

    route, contour = SINGLE_SYMBOLS["route"][1], SINGLE_SYMBOLS["settlement_lines"][1]
    assert colour(dx.ROUTE) == srgb(route.colour) and doc.layers.get(dx.ROUTE).dxf.lineweight == 90  # 0.9 mm
    assert colour(dx.CONTOURS) == srgb(contour.colour) and doc.layers.get(dx.CONTOURS).dxf.lineweight == 25
    for k, hex_colour in enumerate(DAMAGE_COLOURS):
        assert colour(dx.building_layer(k)) == srgb(hex_colour), k
    assert colour(dx.building_layer(None)) == srgb("#3c3c3c")
    assert doc.layers.get(dx.building_layer(None)).dxf.linetype != "Continuous"  # dashed, as in the GIS style
    for status, symbol in zip(STATUSES, UTILITY_SYMBOLS):
        layer = doc.layers.get(dx.utility_layer(status))
        assert colour(dx.utility_layer(status)) == srgb(symbol.colour), status
        assert layer.dxf.lineweight == dx.lineweight(symbol.width_mm)
        assert (layer.dxf.linetype == "Continuous") == (not symbol.dash_mm)
    kinds = [e.dxftype() for e in doc.modelspace()]
    assert kinds.index("LWPOLYLINE") > max(k for k, kind in enumerate(kinds) if kind == "HATCH")  # fills underneath
    for e in doc.modelspace():
        if e.dxftype() == "HATCH":
            assert e.dxf.color == 256 and not e.dxf.hasattr("true_color")  # BYLAYER: the category colour
            assert e.dxf.solid_fill == 1
        if e.dxftype() == "LWPOLYLINE" and e.dxf.layer.startswith("settle_buildings"):
            assert e.rgb is None and e.dxf.color == dx.FOREGROUND_ACI  # the GIS style's near-black outline


def test_text_style_uses_a_common_font(drawing):
    doc, _ = drawing
    assert doc.styles.get(dx.TEXT_STYLE).dxf.font == "arial.ttf"
    texts = [e for e in doc.modelspace() if e.dxftype() == "TEXT"]
    assert texts and all(t.dxf.style == dx.TEXT_STYLE for t in texts)
    names = [t for t in _on(doc, "TEXT", dx.ROUTE_TEXT) if not t.dxf.text.endswith(" m")]
    assert len(names) == 2 and all(t.dxf.height == pytest.approx(1.75) for t in names)  # 3.5 mm at 1:500
    assert all(t.dxf.height == pytest.approx(1.25) for t in texts if t not in names)  # 2.5 mm at 1:500
    notes = [t.dxf.text for t in _on(doc, "TEXT", dx.NOTES)]
    assert notes[0].startswith("Greenfield estimates for planning")


# ---------------------------------------------------------------------------------------------- safe writing
def test_failed_write_leaves_earlier_file_untouched(run_layers, tmp_path, monkeypatch):
    layers, drives, _ = run_layers
    path = tmp_path / "run.dxf"
    path.write_text("earlier drawing")

    def half_then_fail(self, stream, fmt="asc"):
        stream.write("  0\nSECTION\n")
        raise OSError("disk full")

    with monkeypatch.context() as m:
        m.setattr(ezdxf.document.Drawing, "write", half_then_fail)
        with pytest.raises(OSError, match="disk full"):
            dx.write_dxf(path, layers, drives)
    assert path.read_text() == "earlier drawing"

    def no_rename(tmp, final, database):
        raise OSError("rename refused")

    with monkeypatch.context() as m:
        m.setattr("gis_out.geopackage._replace", no_rename)
        with pytest.raises(OSError, match="rename refused"):
            dx.write_dxf(path, layers, drives)
    assert path.read_text() == "earlier drawing"
    assert sorted(os.listdir(tmp_path)) == ["run.dxf"]  # the temporary file is gone
    dx.write_dxf(path, layers, drives)
    assert ezdxf.readfile(path).modelspace().query("POLYLINE")


# ------------------------------------------------------------------------------------------------ hostile input
def test_empty_layers_still_give_a_valid_drawing(run_layers, tmp_path):
    layers, drives, _ = run_layers
    empty = {"buildings": layers["buildings"].iloc[:0], "settlement_lines": layers["settlement_lines"].iloc[:0],
             "utilities": layers["utilities"].iloc[:0]}
    for name, given, axes in (("empty.dxf", empty, drives), ("nothing.dxf", {}, [])):
        doc = ezdxf.readfile(dx.write_dxf(tmp_path / name, given, axes))
        assert len(doc.audit().errors) == 0
        assert dx.building_layer(3) in doc.layers and dx.CONTOURS in doc.layers
        kinds = Counter(e.dxftype() for e in doc.modelspace())
        assert kinds["LWPOLYLINE"] == 0 and kinds["HATCH"] == 0
        assert kinds["POLYLINE"] == len(axes)
        assert kinds["TEXT"] >= len(dx._notes())


def test_bad_inputs_are_refused_with_a_reason(run_layers, tmp_path):
    layers, drives, _ = run_layers
    with pytest.raises(ValueError, match=r"tick_spacing_m must be a positive number; got 0"):
        dx.write_dxf(tmp_path / "a.dxf", layers, drives, tick_spacing_m=0)
    with pytest.raises(ValueError, match=r"plot_scale must be a positive number; got nan"):
        dx.write_dxf(tmp_path / "a.dxf", layers, drives, plot_scale=float("nan"))
    with pytest.raises(OutputError, match=r"must end in \.dxf; got 'a\.dwg'"):
        dx.write_dxf(tmp_path / "a.dwg", layers, drives)
    with pytest.raises(ValueError, match=r"level 5 mm is not one of the levels_mm given \(1, 2, 10 mm\)"):
        dx.write_dxf(tmp_path / "a.dxf", layers, drives, levels_mm=[1, 2, 10])
    wrong = layers["buildings"].copy()
    wrong["category"] = 7
    with pytest.raises(ValueError, match=r"'category' holds \[7\]"):
        dx.write_dxf(tmp_path / "a.dxf", {"buildings": wrong}, drives)
    holed = layers["settlement_lines"].copy()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # shapely's own note on the NaN it is given
        holed.loc[0, "geometry"] = shapely.MultiLineString([[(0, 0), (np.nan, 1)]])
    with pytest.raises(ValueError, match=r"layer 'settlement_lines': row 0 has coordinates that are not finite"):
        dx.write_dxf(tmp_path / "a.dxf", {"settlement_lines": holed}, drives)
    assert not list(tmp_path.iterdir())  # nothing written by any refused call


def test_odd_names_are_written_on_one_line(run_layers, tmp_path):
    _, drives, _ = run_layers
    odd = [dataclasses.replace(drives[0], name="Line\n2 Ø 東")]
    doc = ezdxf.readfile(dx.write_dxf(tmp_path / "odd.dxf", {}, odd))
    assert len(doc.audit().errors) == 0
    assert "Line 2 Ø 東" in [t.dxf.text for t in _on(doc, "TEXT", dx.ROUTE_TEXT)]


def test_a_run_with_dxf_true_writes_the_drawing_into_its_folder(tmp_path):
    """[output] dxf = true: `settle run` writes <stem>.dxf beside the GeoPackage, lists it in summary.json and
    run.json, and its buildings match the GeoPackage's by category; a value that is not true or false is one line
    and exit 2."""
    import json
    import subprocess
    import sys

    import ezdxf
    import geopandas as gpd

    from tests import builders

    project = builders.demo_copy(tmp_path)  # the demo asks for the drawing: [output] dxf = true
    text = project.read_text()
    assert "\ndxf = true" in text
    out = tmp_path / "out"
    done = subprocess.run([sys.executable, "-m", "settle", "run", project, "--out", out, "--quiet"],
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    summary = json.loads((out / "summary.json").read_text())
    assert summary["outputs"]["dxf"] == "ostrey.dxf"
    assert "ostrey.dxf" in json.loads((out / "run.json").read_text())["outputs"]
    doc = ezdxf.readfile(out / "ostrey.dxf")
    assert len(doc.audit().errors) == 0
    buildings = gpd.read_file(out / "ostrey.gpkg", layer="buildings")
    msp = doc.modelspace()
    for category, count in buildings["category"].value_counts().items():
        layer = f"settle_buildings_cat{int(category)}" if category >= 0 else "settle_buildings_not_assessed"
        fills = [e for e in msp.query("HATCH") if e.dxf.layer == layer]
        assert len(fills) == count, layer
    project.write_text(text.replace("\ndxf = true", '\ndxf = "yes"', 1))
    done = subprocess.run([sys.executable, "-m", "settle", "run", project, "--out", out, "--quiet"],
                          capture_output=True, text=True)
    assert done.returncode == 2 and "dxf must be true or false" in done.stderr and done.stderr.count("\n") == 1
