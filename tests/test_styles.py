"""Tests of gis_out.styles: palette tables, QML and SLD 1.1, the layer_styles table, style files, colour vision."""
from __future__ import annotations

import contextlib
import os
import sqlite3
import xml.etree.ElementTree as ET

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st

from gis_out import frames, write_geopackage
from gis_out import styles as s
from gis_out.geopackage import read_only_uri
from settle.assessments import face_stations, utilities
from tests.gpkg_conformance import assert_conformant
from tests.test_geopackage import make_result

CRS = "EPSG:27700"
X0, Y0 = 530_000.0, 180_000.0
LEVELS_MM = (1.0, 2.0, 5.0, 10.0, 20.0)
SE = "{http://www.opengis.net/se}"
OGC = "{http://www.opengis.net/ogc}"
SLD = "{http://www.opengis.net/sld}"
VISIONS = (None, "protanopia", "deuteranopia", "tritanopia")


def frame(columns: dict, geometry, geometry_type: str) -> gpd.GeoDataFrame:
    gdf = gpd.GeoDataFrame(pd.DataFrame(columns), geometry=gpd.GeoSeries(geometry, crs=CRS), crs=CRS)
    gdf.attrs["geometry_type"] = geometry_type
    return gdf


def square(x, y, size=8.0):
    return shapely.MultiPolygon([shapely.box(X0 + x, Y0 + y, X0 + x + size, Y0 + y + size)])


def line(x, y):
    return shapely.LineString([(X0 + x, Y0 + y), (X0 + x + 30, Y0 + y + 5)])


def points(n):
    return shapely.points(X0 + np.arange(n) * 3.0, np.full(n, Y0 + 1.0))


def layers_all() -> dict[str, gpd.GeoDataFrame]:
    """Every styled layer, by hand; band 2 is absent (an empty band is skipped by the contouring)."""
    bands = [0, 1, 3, 4]
    lower = [LEVELS_MM[k] for k in bands]
    upper = [LEVELS_MM[1], LEVELS_MM[2], LEVELS_MM[4], 23.7]  # the top band ends at the largest settlement
    categories = pd.array([0, 1, 2, 3, 4, None], dtype="Int64")
    category_words = ["negligible", "very slight", "slight", "moderate", "severe to very severe", "not assessed"]
    return {
        "route": frame({"drive": ["North Main"]},
                       [shapely.LineString([(X0, Y0, 40.0), (X0 + 100, Y0, 39.0)])], "LineString Z"),
        "grid": frame({"settlement_mm": np.linspace(0, 5, 6)}, points(6), "Point"),
        "points": frame({"id": ["P1", "P2"], "depth_m": [0.0, 2.0]}, points(2), "Point"),
        "settlement_bands": frame({"band": np.array(bands, dtype=np.int64), "lower_mm": lower, "upper_mm": upper},
                                  [square(10 * k, 0) for k in bands], "MultiPolygon"),
        "settlement_lines": frame({"level_mm": list(LEVELS_MM)},
                                  [shapely.MultiLineString([line(0, 5 * k)]) for k in range(5)], "MultiLineString"),
        "buildings": frame({"id": list("ABCDEF"), "category": categories, "category_label": category_words},
                           [square(12 * k, 40) for k in range(6)], "MultiPolygon"),
        "building_walls": frame({"building_id": ["E", "E"], "category": np.array([4, 1], dtype=np.int64),
                                 "category_label": ["severe to very severe", "very slight"]},
                                [line(60, 40), line(60, 48)], "LineString"),
        "utilities": frame({"id": [f"U{k}" for k in range(5)], "status": list(utilities.STATUSES),
                            "status_class": np.arange(5, dtype=np.int64)},
                           [line(0, 60 + 4 * k) for k in range(5)], "LineString"),
        "utility_critical_points": frame({"id": ["U0"]}, points(1), "Point"),
        "face_stations": frame({"drive": ["North Main"] * 3, "status": list(face_stations.STATUSES),
                                "status_class": np.arange(3, dtype=np.int64)}, points(3), "Point"),
    }


def qml_categories(text: str) -> dict[str, tuple[str, str]]:
    """QML category value -> (label, fill or line colour "r,g,b,a" of its symbol's top layer)."""
    root = ET.fromstring(text)
    renderer = root.find("renderer-v2")
    colours = {}
    for symbol in renderer.find("symbols"):
        props = {p.get("k"): p.get("v") for p in symbol.findall("layer")[-1].findall("prop")}
        colours[symbol.get("name")] = props.get("color", props.get("line_color"))
    return {c.get("value"): (c.get("label"), colours[c.get("symbol")])
            for c in renderer.find("categories").findall("category")}


def sld_rules(text: str) -> list[dict]:
    """Per SLD rule: title, filter kind, property name, literal, fill or stroke colour."""
    root = ET.fromstring(text)
    out = []
    for rule in root.iter(f"{SE}Rule"):
        flt = rule.find(f"{OGC}Filter")
        test = flt[0] if flt is not None else None
        colour = next((p.text for p in rule.iter(f"{SE}SvgParameter") if p.get("name") == "fill"), None)
        stroke = [p.text for p in rule.iter(f"{SE}SvgParameter") if p.get("name") == "stroke"]
        out.append({"title": rule.find(f"{SE}Description/{SE}Title").text,
                    "test": None if test is None else test.tag.replace(OGC, ""),
                    "property": None if test is None else test.find(f"{OGC}PropertyName").text,
                    "literal": None if test is None or test.find(f"{OGC}Literal") is None
                    else test.find(f"{OGC}Literal").text,
                    "fill": colour, "stroke": stroke[-1] if stroke else None})
    return out


def hex_of(qml_colour: str) -> str:
    r, g, b, _ = (int(v) for v in qml_colour.split(","))
    return f"#{r:02x}{g:02x}{b:02x}"


@pytest.fixture(scope="module")
def styles():
    return s.layer_styles(layers_all(), LEVELS_MM)


# --- the documents ------------------------------------------------------------------------------------------------
def test_every_result_layer_is_styled(styles):
    assert list(styles) == list(layers_all())
    assert s.layer_style("tunnel_elements", layers_all()["grid"]) is None  # no default style: skipped


def test_qml_and_sld_parse_and_name_their_layer(styles):
    for name, style in styles.items():
        q = ET.fromstring(s.qml(style))
        assert q.tag == "qgis" and q.find("renderer-v2") is not None
        assert s.qml(style).startswith("<!DOCTYPE qgis")
        root = ET.fromstring(s.sld(style))
        assert root.tag == f"{SLD}StyledLayerDescriptor" and root.get("version") == "1.1.0"
        assert root.find(f"{SLD}NamedLayer/{SE}Name").text == name
        kind = "categorizedSymbol" if style.field else "singleSymbol"
        assert q.find("renderer-v2").get("type") == kind
        if style.field:
            assert q.find("renderer-v2").get("attr") == style.field


def test_every_class_in_the_data_has_a_style_entry(styles):
    layers = layers_all()
    for name, style in styles.items():
        if style.field is None:
            continue
        column = layers[name][style.field]
        found = {str(int(v)) for v in column.dropna()} | ({""} if column.isna().any() else set())
        categories = qml_categories(s.qml(style))
        assert found <= set(categories), name
        rules = sld_rules(s.sld(style))
        literals = {r["literal"] for r in rules if r["test"] == "PropertyIsEqualTo"}
        nulls = [r for r in rules if r["test"] == "PropertyIsNull"]
        assert {v for v in found if v} <= literals, name
        assert ("" not in found) or len(nulls) == 1, name


def test_every_class_of_the_vocabulary_has_an_entry_even_when_absent(styles):
    # band 2 does not occur in the data, and buildings have no category 5: both still get an entry.
    assert set(qml_categories(s.qml(styles["settlement_bands"]))) == {"0", "1", "2", "3", "4"}
    assert set(qml_categories(s.qml(styles["buildings"]))) == {"0", "1", "2", "3", "4", "5", ""}
    assert set(qml_categories(s.qml(styles["building_walls"]))) == {"0", "1", "2", "3", "4", "5", ""}
    assert set(qml_categories(s.qml(styles["utilities"]))) == {"0", "1", "2", "3", "4"}
    assert set(qml_categories(s.qml(styles["face_stations"]))) == {"0", "1", "2"}


def test_sld_filters_are_property_is_equal_to_on_the_integer_field(styles):
    for name, style in styles.items():
        rules = sld_rules(s.sld(style))
        if style.field is None:
            assert len(rules) == 1 and rules[0]["test"] is None, name
            continue
        assert len(rules) == len(style.classes)
        for rule, c in zip(rules, style.classes):
            assert rule["property"] == style.field
            if c.value is None:
                assert rule["test"] == "PropertyIsNull"
            else:
                assert rule["test"] == "PropertyIsEqualTo" and rule["literal"] == str(c.value)
                assert int(rule["literal"]) == c.value  # a whole number, not "1.0"


def test_labels_carry_the_class_number_and_its_range_or_words(styles):
    bands = [c.label for c in styles["settlement_bands"].classes]
    assert bands == ["band 0: 1-2 mm", "band 1: 2-5 mm", "band 2: 5-10 mm", "band 3: 10-20 mm",
                     "band 4: \u2265 20 mm"]
    buildings = [c.label for c in styles["buildings"].classes]
    # Categories 0-4 in the words settle.buildings writes (it reads > 0.3 % as "severe to very severe"); 5 keeps
    # the Burland (1995) degree of damage (methods.md section 5.2).
    assert buildings == ["0 negligible", "1 very slight", "2 slight", "3 moderate", "4 severe to very severe",
                         "5 very severe", "not assessed"]
    assert [c.label for c in styles["building_walls"].classes] == buildings
    assert [c.label for c in styles["utilities"].classes] == [
        "0 within limits", "1 near limit", "2 exceeds", "3 not checked", "4 crosses the tunnel"]
    assert [c.label for c in styles["face_stations"].classes] == ["0 open", "1 narrow", "2 closed"]
    assert [c.label for c in s.damage_style(layers_all()["buildings"].iloc[:4]).classes] == buildings  # stable


def test_band_labels_from_the_data_without_levels():
    style = s.band_style(layers_all()["settlement_bands"])
    assert [c.label for c in style.classes] == ["band 0: 1-2 mm", "band 1: 2-5 mm", "band 3: 10-20 mm",
                                                "band 4: \u2265 20 mm"]
    empty = layers_all()["settlement_bands"].iloc[:0]
    assert s.band_style(empty) is None
    assert len(s.band_style(empty, LEVELS_MM).classes) == 5  # with the levels, every band has an entry


def test_qml_and_sld_come_from_one_palette(styles):
    for name, style in styles.items():
        rules = sld_rules(s.sld(style))
        if style.field is None:
            root = ET.fromstring(s.qml(style))
            top = root.findall("renderer-v2/symbols/symbol/layer")[-1]
            props = {p.get("k"): p.get("v") for p in top.findall("prop")}
            written = [(style.classes[0].label, props.get("color", props.get("line_color")))]
        else:
            categories = qml_categories(s.qml(style))
            written = [categories["" if c.value is None else str(c.value)] for c in style.classes]
        assert len(rules) == len(written) == len(style.classes), name
        for (label, colour), rule, c in zip(written, rules, style.classes):
            assert rule["title"] == label == c.label, name
            if c.symbol.kind == "line":
                assert hex_of(colour) == rule["stroke"] == c.symbol.colour, name
            elif c.symbol.filled:
                assert hex_of(colour) == rule["fill"] == c.symbol.colour, name


def test_status_classes_also_differ_by_shape_width_or_dash():
    shapes = [sym.shape for sym in s.FACE_SYMBOLS]
    assert len(set(shapes)) == len(shapes)
    looks = [(sym.width_mm, sym.dash_mm) for sym in s.UTILITY_SYMBOLS]
    assert len(set(looks)) == len(looks)


@settings(max_examples=25, deadline=None)
@given(st.lists(st.floats(0.05, 500.0, allow_nan=False), min_size=1, max_size=12, unique=True))
def test_any_levels_give_one_labelled_band_each(levels):
    levels = sorted(levels)
    if np.any(np.diff(levels) <= 1e-9):
        return
    empty = layers_all()["settlement_bands"].iloc[:0]
    style = s.band_style(empty, levels)
    assert [c.value for c in style.classes] == list(range(len(levels)))
    for k, c in enumerate(style.classes):
        assert c.label.startswith(f"band {k}: ") and f"{levels[k]:g}" in c.label
    assert "\u2265" in style.classes[-1].label
    assert len({c.symbol.colour for c in style.classes}) == len(levels)
    ET.fromstring(s.qml(style))
    ET.fromstring(s.sld(style))


# --- the GeoPackage -------------------------------------------------------------------------------------------------
def style_rows(path):
    with contextlib.closing(sqlite3.connect(read_only_uri(path), uri=True)) as con:
        rows = con.execute("SELECT f_table_catalog, f_table_schema, typeof(f_table_schema), f_table_name, "
                           "f_geometry_column, styleName, useAsDefault, update_time, styleQML, styleSLD "
                           "FROM layer_styles ORDER BY id").fetchall()
        geometry_columns = dict(con.execute("SELECT table_name, column_name FROM gpkg_geometry_columns"))
        contents = dict(con.execute("SELECT table_name, data_type FROM gpkg_contents"))
        # The lookup QGIS makes when it opens a layer (gis-notes §C): schema '', table, geometry column.
        qgis = {t: con.execute("SELECT count(*) FROM layer_styles WHERE f_table_schema='' AND f_table_name=? "
                               "AND f_geometry_column=? AND useAsDefault=1", (t, c)).fetchone()[0]
                for t, c in geometry_columns.items()}
    return rows, geometry_columns, contents, qgis


@pytest.fixture(scope="module")
def styled_gpkg(tmp_path_factory):
    layers = layers_all()
    path = write_geopackage(tmp_path_factory.mktemp("styled") / "result.gpkg", layers,
                            extra=s.styles_hook(layers, LEVELS_MM))
    return path, layers


def test_styled_geopackage_is_conformant(styled_gpkg):
    path, _ = styled_gpkg
    assert_conformant(path)


def test_style_rows_as_qgis_looks_for_them(styled_gpkg):
    path, layers = styled_gpkg
    rows, geometry_columns, contents, qgis = style_rows(path)
    assert [r[3] for r in rows] == list(layers)  # one row per styled layer, in layer order
    for catalog, schema, schema_type, table, geom, name, default, updated, q, sld in rows:
        assert schema == "" and schema_type == "text"  # '' not NULL, or QGIS finds nothing
        assert catalog == ""
        assert geom == geometry_columns[table] == "geom"
        assert name == "default" and default == 1
        assert updated == "1970-01-01T00:00:00.000Z"  # fixed: the file is reproducible
        ET.fromstring(q)
        ET.fromstring(sld)
    assert contents["layer_styles"] == "attributes"  # registered, so the file stays a GeoPackage
    assert all(qgis[t] == 1 for t in layers)


def test_styled_real_frames_from_a_run(tmp_path):
    result = make_result()  # route, grid, points, bands and lines from the engine's frames
    layers = frames(result)
    levels = result.project.output.contour_levels_mm
    path = write_geopackage(tmp_path / "run.gpkg", layers, extra=s.styles_hook(layers, levels))
    assert_conformant(path)
    rows, _, _, qgis = style_rows(path)
    assert [r[3] for r in rows] == list(layers) and "buildings" not in qgis  # absent layer, no row
    bands = layers["settlement_bands"]
    entries = qml_categories(rows[list(layers).index("settlement_bands")][8])
    assert {str(int(b)) for b in bands["band"]} <= set(entries)
    assert len(entries) == len(levels)


def test_write_styles_again_replaces_its_rows_and_keeps_others(tmp_path):
    layers = layers_all()
    path = write_geopackage(tmp_path / "twice.gpkg", layers, extra=s.styles_hook(layers, LEVELS_MM))
    stamp = pd.Timestamp("2026-03-02T09:30:00+01:00")
    assert s.write_styles(path, {"utilities": layers["utilities"]}, update_time=stamp) == ["utilities"]
    assert_conformant(path)
    rows, *_ = style_rows(path)
    tables = [r[3] for r in rows]
    assert sorted(tables) == sorted(layers) and len(tables) == len(set(tables))
    assert dict((r[3], r[7]) for r in rows)["utilities"] == "2026-03-02T08:30:00.000Z"  # stored in UTC


def test_write_style_files(tmp_path):
    layers = layers_all()
    written = s.write_style_files(tmp_path, "result", layers, levels_mm=LEVELS_MM)
    names = sorted(p.name for p in written)
    assert names == sorted([f"result-{n}.qml" for n in layers] + [f"result-{n}.sld" for n in layers])
    assert sorted(os.listdir(tmp_path)) == names  # no temporary files left
    styles = s.layer_styles(layers, LEVELS_MM)
    for p in written:
        name = p.stem[len("result-"):]
        text = p.read_text(encoding="utf-8")
        assert text == (s.qml if p.suffix == ".qml" else s.sld)(styles[name])
        ET.fromstring(text)


# --- mistakes in the wiring ---------------------------------------------------------------------------------------
def test_a_status_layer_without_its_class_field():
    utilities = layers_all()["utilities"].drop(columns="status_class")
    with pytest.raises(ValueError, match=r"layer 'utilities': field 'status_class' is missing"):
        s.layer_styles({"utilities": utilities})


def test_a_class_outside_the_vocabulary():
    faces = layers_all()["face_stations"]
    faces["status_class"] = [0, 1, 3]
    with pytest.raises(ValueError, match=r"layer 'face_stations': field 'status_class' holds \[3\], outside"):
        s.layer_styles({"face_stations": faces})
    buildings = layers_all()["buildings"]
    buildings["category"] = pd.array([0, 1, 2, 3, 4, -1], dtype="Int64")
    with pytest.raises(ValueError, match=r"layer 'buildings': field 'category' holds \[-1\]"):
        s.layer_styles({"buildings": buildings})


def test_a_fractional_class():
    faces = layers_all()["face_stations"]
    faces["status_class"] = [0.0, 1.5, 2.0]
    with pytest.raises(ValueError, match=r"'status_class' must hold whole numbers; got \[0.0, 1.5, 2.0\]"):
        s.layer_styles({"face_stations": faces})


def test_status_words_that_disagree_with_the_class():
    utilities = layers_all()["utilities"]
    utilities["status_class"] = [0, 2, 1, 3, 4]
    with pytest.raises(ValueError, match=r"row 1 has status 'near limit' but status_class 2 \('exceeds'\)"):
        s.layer_styles({"utilities": utilities})


def test_category_words_that_disagree_with_the_category():
    buildings = layers_all()["buildings"]
    buildings.loc[4, "category_label"] = "severe"
    with pytest.raises(ValueError, match=r"row 4 has category_label 'severe' but category 4 "
                                         r"\('severe to very severe'\)"):
        s.layer_styles({"buildings": buildings})


def test_bands_cut_at_other_levels():
    with pytest.raises(ValueError, match=r"band 1 starts at 2 mm, not at the level 5 mm"):
        s.band_style(layers_all()["settlement_bands"], (1.0, 5.0, 10.0, 20.0, 30.0))


def test_a_layer_missing_from_the_file(tmp_path):
    layers = layers_all()
    path = write_geopackage(tmp_path / "few.gpkg", {"route": layers["route"]})
    with pytest.raises(ValueError, match=r"layer 'grid' is not a feature table of the file"):
        s.write_styles(path, {"route": layers["route"], "grid": layers["grid"]})


def test_naive_update_time_and_bad_stem(tmp_path):
    layers = layers_all()
    path = write_geopackage(tmp_path / "t.gpkg", {"route": layers["route"]})
    with pytest.raises(ValueError, match=r"update_time must carry a time zone"):
        s.write_styles(path, {"route": layers["route"]}, update_time=pd.Timestamp("2026-01-01"))
    with pytest.raises(ValueError, match=r"stem must be a file name without folders; got 'a/b'"):
        s.write_style_files(tmp_path, "a/b", layers)


# --- colour science ---------------------------------------------------------------------------------------------------
def test_srgb_to_cielab_check_values():
    # IEC 61966-2-1: the RGB to XYZ matrix maps white to the D65 white point (0.9505, 1.0000, 1.0890), from memory.
    np.testing.assert_allclose(s.D65_WHITE_XYZ, [0.9505, 1.0, 1.089], atol=1e-4)
    lab = s.perceived_cielab(["#ffffff", "#000000", "#ff0000"])
    np.testing.assert_allclose(lab[0], [100.0, 0.0, 0.0], atol=1e-9)
    np.testing.assert_allclose(lab[1], [0.0, 0.0, 0.0], atol=1e-9)
    # sRGB red is L*a*b* (53.24, 80.09, 67.20): widely tabulated value, from memory.
    np.testing.assert_allclose(lab[2], [53.24, 80.09, 67.20], atol=0.1)
    rgb = np.random.default_rng(1).uniform(0, 1, (50, 3))
    np.testing.assert_allclose(s.cielab_to_linear_rgb(s.linear_rgb_to_cielab(rgb)), rgb, atol=1e-9)


def test_machado_matrices_identities():
    # Machado et al. (2009): each simulation keeps achromatic colours (rows sum to 1), and the dichromat's colour
    # space is two-dimensional (protanopia and deuteranopia matrices singular). Values typed from memory; these
    # identities would catch a mistyped digit.
    for name, m in s.MACHADO_MATRICES.items():
        np.testing.assert_allclose(m.sum(axis=1), 1.0, atol=2e-6, err_msg=name)
        grey = np.full((1, 3), 0.37)
        np.testing.assert_allclose(s.machado_cvd_simulation(grey, name), grey, atol=1e-6)
    for name in ("protanopia", "deuteranopia"):
        assert abs(np.linalg.det(s.MACHADO_MATRICES[name])) < 1e-5
    # Red and green, far apart with normal vision, come close for a deuteranope.
    normal = s.delta_e_cie76(*s.perceived_cielab(["#ff0000", "#00ff00"]))
    deutan = s.delta_e_cie76(*s.perceived_cielab(["#ff0000", "#00ff00"], "deuteranopia"))
    assert deutan < 0.25 * normal
    with pytest.raises(ValueError, match=r"deficiency must be one of"):
        s.machado_cvd_simulation(grey, "achromatopsia")


def ordered_ok(colours) -> tuple[bool, str]:
    """Neighbours at least MIN_DELTA_E apart and CIE lightness falling, with normal vision and each dichromacy."""
    for vision in VISIONS:
        lab = s.perceived_cielab(colours, vision)
        gaps = s.delta_e_cie76(lab[1:], lab[:-1])
        if gaps.min() < s.MIN_DELTA_E:
            return False, f"{vision}: neighbours {gaps.round(1)}"
        if np.any(np.diff(lab[:, 0]) >= 0.0):
            return False, f"{vision}: lightness {lab[:, 0].round(1)}"
    return True, ""


def test_band_palette_reads_for_colour_blind_people():
    for n in range(2, s.MAX_DISTINCT_BANDS + 1):
        style = s.band_style(layers_all()["settlement_bands"].iloc[:0], list(range(1, n + 1)))
        fills = [r["fill"] for r in sld_rules(s.sld(style))]  # the colours as written
        ok, why = ordered_ok(fills)
        assert ok, f"{n} bands: {why}"


def test_damage_palette_reads_for_colour_blind_people(styles):
    fills = [r["fill"] for r in sld_rules(s.sld(styles["buildings"])) if r["test"] == "PropertyIsEqualTo"]
    assert len(fills) == 6
    ok, why = ordered_ok(fills)
    assert ok, why


def test_status_palettes_read_for_colour_blind_people(styles):
    for name in ("utilities", "face_stations"):
        colours = [c.symbol.colour for c in styles[name].classes]
        for vision in VISIONS:
            lab = s.perceived_cielab(colours, vision)
            i, j = np.triu_indices(len(colours), 1)
            assert s.delta_e_cie76(lab[i], lab[j]).min() >= s.MIN_DELTA_E, (name, vision)


def test_the_check_rejects_a_red_green_traffic_light():
    # The traffic-light damage palette listed in gis-notes §C: green to red. Under simulated deuteranopia two of its
    # neighbours are almost the same colour, so the check above would fail it.
    traffic_light = ["#1a9850", "#91cf60", "#d9ef8b", "#fee08b", "#fc8d59", "#d73027"]
    ok, why = ordered_ok(traffic_light)
    assert not ok
    lab = s.perceived_cielab(traffic_light, "deuteranopia")
    assert s.delta_e_cie76(lab[1:], lab[:-1]).min() < 3.0
