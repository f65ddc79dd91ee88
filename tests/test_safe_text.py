"""User text in the outputs: CSV cells a spreadsheet cannot run as formulas, names drawn literally in the figures and
the PDF (a "$" is a dollar sign, never math), one warning for the characters the font lacks, and a summary.json the
report cannot use named as an input error."""
import csv
import dataclasses
import io
import json
import shutil
import warnings

import matplotlib

matplotlib.use("Agg")
import matplotlib.figure  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pypdf  # noqa: E402
import pytest  # noqa: E402
import shapely  # noqa: E402
from hypothesis import given  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

import gis_out  # noqa: E402
import settle  # noqa: E402
from gis_out import figures, png, report, tables  # noqa: E402
from gis_out.face_section import face_section_png  # noqa: E402
from gis_out.monitoring_figures import section_png  # noqa: E402
from settle.assessments.building_tables import report_rows  # noqa: E402
from settle.assessments.face_stations import face_stations  # noqa: E402
from settle.assessments.utility_tables import utility_rows  # noqa: E402
from settle.errors import InputError  # noqa: E402
from settle.inputs.footprints import BuildingDefaults, buildings_from_table  # noqa: E402
from settle.inputs.model import Layer  # noqa: E402
from settle.inputs.utility_lines import make_utilities  # noqa: E402
from settle.inputs.utility_settings import UtilityOptions  # noqa: E402
from settle.monitoring.sections import Section  # noqa: E402
from settle.procedure.forecast import FORECAST_FIELDS  # noqa: E402
from settle.procedure.summary import summarise  # noqa: E402

from . import builders  # noqa: E402
from .test_face_stations import SAND_S, geometry, model  # noqa: E402

FRACTION, DOLLAR, BROKEN_MATH = "$\\frac{1}{2}$", "$", "$x_$"
MAIN = f"{FRACTION} main"  # the first drive
HOUSE = f"{FRACTION} house"
UNDRAWABLE = "倉庫🏠"  # two CJK characters and an emoji that DejaVu Sans lacks
HOSTILE = ["=HYPERLINK(\"http://example.invalid\")", "+1+1", "-1+1", "@SUM(A1)", "=1", "-", "plain"]


def read_csv(text: str) -> list[dict]:
    """The rows of a CSV table written by gis_out.tables, the comment lines above the header skipped."""
    lines = io.StringIO(text).readlines()
    while lines and lines[0].startswith("# "):
        lines.pop(0)
    return list(csv.DictReader(lines))


# -------------------------------------------------------------------------------------------------------- CSV
@pytest.mark.parametrize("value, written", [
    ("=SUM(A1)", "'=SUM(A1)"), ("+1", "'+1"), ("-1+1", "'-1+1"), ("@cmd", "'@cmd"), ("\tx", "'\tx"),
    ("\rx", "'\rx"), ("-", "'-"), ("-inf", "'-inf"), ("Rope Street Hall", "Rope Street Hall"), ("a=b", "a=b"),
    ("", ""), ("-5.00", "-5.00"), ("12", "12"), ("1.5e-05", "1.5e-05"), (-5.0, -5.0), (-3, -3), (None, None),
])
def test_text_starting_a_formula_is_neutralised_and_numbers_are_not(value, written):
    assert tables.safe_cell(value) == written
    text = tables.csv_text(["a comment = 1"], ["id", "n"], [{"id": value, "n": -5.0}])
    assert text.splitlines()[0] == "# a comment = 1"
    row = read_csv(text)[0]
    assert row["id"] == ("" if written is None else str(written)) and row["n"] == "-5.0"


@given(st.text(max_size=12))
def test_no_cell_read_back_starts_a_formula_unless_a_plain_number(value):
    cell = read_csv(tables.csv_text([], ["id"], [{"id": value}]))[0]["id"] if value else ""
    assert cell in (value, "'" + value)
    assert not cell.startswith(tables.FORMULA_STARTS) or tables.PLAIN_NUMBER.fullmatch(cell)


@pytest.fixture(scope="module")
def hostile_results():
    """A run with buildings and pipes whose ids would be formulas in a spreadsheet."""
    polys = [shapely.box(5.0 + 8 * k, 4.0, 11.0 + 8 * k, 10.0) for k in range(len(HOSTILE))]
    buildings = buildings_from_table(polys, pd.DataFrame({"id": HOSTILE, "height_m": 6.0, "foundation_depth_m": 1.0,
                                                          "structure": "masonry"}), BuildingDefaults())
    lines = [np.array([[5.0 + 8 * k, -20.0], [5.0 + 8 * k, 20.0]]) for k in range(len(HOSTILE))]
    pipes = make_utilities(HOSTILE, ["cast_iron"] * len(HOSTILE), lines, [1.0] * len(HOSTILE),
                           [300.0] * len(HOSTILE))
    project = dataclasses.replace(builders.project([builders.drive([(0.0, 0.0), (60.0, 0.0)], 2.0)]),
                                  buildings=buildings, utilities=pipes, utility_options=UtilityOptions())
    return settle.run(project)


@pytest.mark.parametrize("table", ["buildings", "utilities"])
def test_hostile_ids_in_the_result_tables_are_neutralised(hostile_results, table):
    result = hostile_results
    rows = (report_rows(result.project.buildings, result.buildings) if table == "buildings" else
            utility_rows(result.project.utilities, result.utilities, geometry=False))
    back = read_csv(tables.rows_csv_text(rows))
    assert [r["id"] for r in back] == [tables.safe_cell(i) for i in HOSTILE]
    assert [r["id"] for r in back][:6] == ["'" + i for i in HOSTILE[:6]] and back[-1]["id"] == "plain"
    numbers = [k for k, v in rows[0].items() if isinstance(v, float) and np.isfinite(v)]
    assert numbers and all(back[0][k] == str(rows[0][k]) for k in numbers)  # numbers written as before


def test_hostile_forecast_rows_are_neutralised():
    rows = [dict(zip(FORECAST_FIELDS, ("building", "=1+1", "@drive", -5.0, 0, 2, True))),
            dict(zip(FORECAST_FIELDS, ("utility", "-2.50", "+A", 12.5, 1, 1, False)))]
    back = read_csv(tables.rows_csv_text(rows))
    assert [(r["id"], r["drive"], r["chainage_m"]) for r in back] == [("'=1+1", "'@drive", "-5.0"),
                                                                      ("-2.50", "'+A", "12.5")]


# ------------------------------------------------------------------------------------------------ the figures
@pytest.fixture(scope="module")
def dollar_run(tmp_path_factory):
    """A run whose project, drives and buildings carry "$" in their names, and one building an undrawable name."""
    out = tmp_path_factory.mktemp("safe_text")
    names = [HOUSE, DOLLAR, UNDRAWABLE]
    polys = [shapely.box(25, 4, 35, 12), shapely.box(40, -14, 48, -5), shapely.box(28, -12, 34, -5)]
    buildings = buildings_from_table(polys, pd.DataFrame({"id": names, "height_m": 6.0, "foundation_depth_m": 1.0,
                                                          "structure": "masonry"}), BuildingDefaults())
    project = builders.project([builders.drive([(0.0, 0.0), (60.0, 0.0)], 2.0, name=MAIN),
                                builders.drive([(0.0, -30.0), (60.0, -30.0)], 2.0, name=DOLLAR)])
    result = settle.run(dataclasses.replace(project, name=f"{BROKEN_MATH} project", buildings=buildings))
    gis_out.write_geopackage(out / "t.gpkg", gis_out.frames(result))
    gis_out.write_text_atomic(out / "summary.json", json.dumps(summarise(result)))
    return out


@pytest.fixture
def drawn_texts(monkeypatch):
    """(text, parse_math) of every text of each figure saved, recorded as it is saved."""
    seen: list[tuple[str, bool]] = []
    save = matplotlib.figure.Figure.savefig

    def spy(fig, *args, **kwargs):
        seen.extend((t.get_text(), t.get_parse_math()) for t in fig.findobj(matplotlib.text.Text) if t.get_text())
        return save(fig, *args, **kwargs)

    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", spy)
    return seen


def literally(seen, name: str) -> bool:
    """Some text drawn holds `name` as it is, and every text holding it is drawn without math."""
    holding = [math for text, math in seen if name in text]
    return bool(holding) and not any(holding)


def test_figures_draw_names_with_dollars_literally(dollar_run, tmp_path, drawn_texts):
    gpkg, summary = dollar_run / "t.gpkg", dollar_run / "summary.json"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # the undrawable name: tested below
        figures.plan_map_png(gpkg, summary, tmp_path / "p.png")
        for k, name in enumerate((MAIN, DOLLAR)):
            figures.longitudinal_section_png(gpkg, summary, name, tmp_path / f"l{k}.png")
        figures.transverse_sections_png(gpkg, summary, MAIN, [30.0], tmp_path / "t.png")
    for name in (f"D1: {MAIN}", f"D2: {DOLLAR}", f"Longitudinal section: {DOLLAR}", f"{BROKEN_MATH} project",
                 f"Transverse sections across {MAIN}", f"{HOUSE}\ncat. 0"):
        assert literally(drawn_texts, name), name


def test_face_section_and_monitoring_figures_draw_names_literally(tmp_path, drawn_texts):
    sand = Layer(f"{FRACTION} sand", 10.0, 20.0, 0.35, "granular")
    ground = model((sand,))
    drive = geometry(ground, xy=((0, 0), (60, 0)), name=MAIN)
    face_section_png(face_stations(drive, ground, [SAND_S]), drive, tmp_path / "f.png",
                     layers=(sand, dataclasses.replace(sand, name=BROKEN_MATH, top_level_m=7.0)))
    offsets = np.array([-5.0, 0.0, 5.0])
    section_png(Section(DOLLAR, 30.0, 40.0, np.array([FRACTION, DOLLAR, BROKEN_MATH]), offsets,
                        np.array([1.0, 3.0, 1.0]), offsets, np.array([1.0, 3.0, 1.0]), np.full(3, np.nan)),
                tmp_path / "m.png")
    for name in (f"{MAIN}: section", BROKEN_MATH, f"{DOLLAR}: section at chainage 30.0 m", FRACTION):
        assert literally(drawn_texts, name), name


def test_report_prints_names_with_dollars_literally(dollar_run):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        pdf = report.write_report(dollar_run, "t")
    # The schedule names the undrawable building, so the report is set in the embedded Unicode fonts: read with
    # pypdf's text extraction, which maps their glyphs back to characters.
    lines = [line for page in pypdf.PdfReader(pdf).pages for line in page.extract_text().splitlines()]
    assert any(f"{BROKEN_MATH} project" in line for line in lines)
    assert any(line.endswith(f"D1  {MAIN}") for line in lines) and any(line.endswith(f"D2  {DOLLAR}")
                                                                        for line in lines)


# -------------------------------------------------------------------------------------------- missing glyphs
def glyph_warnings(draw) -> tuple[list[str], list[str]]:
    """(our warnings about missing glyphs, matplotlib's own per glyph) given while drawing."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        draw()
    texts = [str(w.message) for w in caught if issubclass(w.category, UserWarning)]
    return [t for t in texts if "has no glyph for" in t], [t for t in texts if t.startswith("Glyph ")]


def test_missing_glyphs_lists_each_character_the_font_lacks_once():
    assert png.missing_glyphs(["ab 倉", "€µε\n倉🏠", "😀"]) == ["倉", "🏠"]  # DejaVu Sans has 😀
    assert png.describe_characters(["倉", "🏠"]) == "'倉' (U+5009), '🏠' (U+1F3E0)"


def test_a_figure_with_an_undrawable_building_id_gives_one_warning(dollar_run, tmp_path):
    ours, theirs = glyph_warnings(lambda: figures.transverse_sections_png(
        dollar_run / "t.gpkg", dollar_run / "summary.json", MAIN, [30.0, 31.0], tmp_path / "t.png"))
    assert theirs == [] and len(ours) == 1
    assert "figure t.png" in ours[0] and "'倉' (U+5009), '庫' (U+5EAB), '🏠' (U+1F3E0)" in ours[0]
    assert "DejaVu Sans" in ours[0]


def test_the_report_gives_one_warning_for_its_figures_and_pages(dollar_run, tmp_path):
    for name in ("t.gpkg", "summary.json"):
        shutil.copy(dollar_run / name, tmp_path / name)
    summary = json.loads((tmp_path / "summary.json").read_text())
    (tmp_path / "summary.json").write_text(json.dumps({**summary, "project": "Ω 東"}))  # the PDF then embeds DejaVu
    ours, theirs = glyph_warnings(lambda: report.write_report(tmp_path, "t", sections_chainage_m={MAIN: [30.0]}))
    assert theirs == [] and len(ours) == 1
    assert ours[0].startswith("report t-report.pdf") and "'東' (U+6771)" in ours[0] and "(U+1F3E0)" in ours[0]
    assert "'Ω'" not in ours[0]


def test_glyph_checks_nest_into_one_warning(tmp_path):
    @png.glyph_checked
    def draw(text, path):
        fig = plt.figure()
        fig.text(0.1, 0.5, text, parse_math=False)
        return png.save_png(fig, path)

    def both():
        with png.glyph_check("both"):
            draw("倉", tmp_path / "a.png")
            draw("🏠 and 倉", tmp_path / "b.png")

    ours, theirs = glyph_warnings(both)
    assert theirs == [] and ours == ["both: the font (DejaVu Sans) has no glyph for '倉' (U+5009), '🏠' (U+1F3E0) "
                                     "in the names drawn; they show as boxes"]
    ours, _ = glyph_warnings(lambda: draw("plain", tmp_path / "c.png"))
    assert ours == []


# ------------------------------------------------------------------------------------------------ summary.json
@pytest.mark.parametrize("content, message", [
    ("[]", r"summary.json: the run summary must be a JSON object \(\{\.\.\.\}\); got an array \[\]"),
    ('"run"', r"summary.json: the run summary must be a JSON object .*; got a string \"run\""),
    ('{"project": "x", "grid": {', r"summary.json: cannot read the run summary \(Expecting"),
    ("{}", r"summary.json: has no project, which the report needs; is it the summary.json of `settle run`\?"),
    (None, r"summary.json: has no grid.spacing_m, which the report needs"),
])
def test_a_summary_the_report_cannot_use_is_an_input_error(dollar_run, tmp_path, content, message):
    shutil.copy(dollar_run / "t.gpkg", tmp_path / "t.gpkg")
    if content is None:
        summary = json.loads((dollar_run / "summary.json").read_text())
        content = json.dumps({**summary, "grid": {"threshold_mm": 0.1}})
    (tmp_path / "summary.json").write_text(content)
    with pytest.raises(InputError, match=message):
        report.write_report(tmp_path, "t")


@pytest.mark.parametrize("change, message", [
    ({"project": 3}, r"summary.json: project must be text; got a number 3"),
    ({"grid": {"spacing_m": 0}}, r"summary.json: grid.spacing_m must be a positive number; got a number 0"),
    ({"max_settlement": {"settlement_mm": "5", "x_m": 0, "y_m": 0}},
     r"summary.json: max_settlement.settlement_mm must be a number; got a string \"5\""),
    ({"points": {"count": 2, "max_settlement": []}}, r"summary.json: points.max_settlement must be an object or "
                                                     r"null; got an array \[\]"),
    ({"inputs": {"drives": []}}, r"summary.json: inputs is not in the form the report writes \(project_inputs\): "
                                 r"KeyError 'project_file'"),
])
def test_summary_keys_of_the_wrong_kind_are_input_errors(dollar_run, tmp_path, change, message):
    shutil.copy(dollar_run / "t.gpkg", tmp_path / "t.gpkg")
    summary = json.loads((dollar_run / "summary.json").read_text())
    (tmp_path / "summary.json").write_text(json.dumps({**summary, **change}))
    with pytest.raises(InputError, match=message):
        report.write_report(tmp_path, "t")
