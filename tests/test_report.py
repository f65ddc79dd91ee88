"""The PDF assessment report: sections, tables that list exactly the rows meeting their criteria, counts, the run
date as its only date, reproducible bytes, runs without buildings, utilities or face check, errors for people.

The report's text is read back from the PDF line by line: pypdf gives each page's content stream, and the report is
set in the PDF core fonts, whose strings sit there as plain Windows-1252 text, one per line."""
import datetime as dt
import json
import re
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pypdf
import pytest

import gis_out
import settle
from gis_out import report
from settle.errors import InputError
from settle.procedure.summary import summarise

from . import builders

DEMO = Path(__file__).resolve().parent.parent / "demo_site"


# -------------------------------------------------------------------------------------------- reading the PDF
def _unescape(raw: bytes) -> bytes:
    """A PDF literal string's bytes (ISO 32000-1, 7.3.4.2: backslash escapes and octal codes)."""
    out, i = bytearray(), 0
    while i < len(raw):
        if raw[i] != 0x5C:
            out.append(raw[i])
            i += 1
            continue
        nxt = raw[i + 1:i + 2]
        if nxt.isdigit():
            j = i + 1
            while j < min(len(raw), i + 4) and raw[j:j + 1] in b"01234567":
                j += 1
            out.append(int(raw[i + 1:j], 8) & 0xFF)
            i = j
            continue
        out += {b"n": b"\n", b"r": b"\r", b"t": b"\t", b"b": b"\b", b"f": b"\f"}.get(nxt, nxt)
        i += 2
    return bytes(out)


def _shown(content: bytes) -> list[str]:
    return [_unescape(s).decode("cp1252") for s in re.findall(rb"\(((?:\\.|[^\\)])*)\)\s*Tj", content, re.S)]


def pdf_lines(path) -> list[str]:
    """Every string shown with Tj on the pages, in order: one per line of text. pypdf gives each page's content
    stream and the form XObjects it draws (matplotlib draws some text there); the report is set in the PDF core
    fonts, whose strings sit there as plain Windows-1252 text."""
    lines = []
    for page in pypdf.PdfReader(path).pages:
        lines += _shown(page.get_contents().get_data())
        xobjects = (page.get("/Resources") or {}).get("/XObject") or {}
        for ref in xobjects.values():
            obj = ref.get_object()
            if obj.get("/Subtype") == "/Form":
                lines += _shown(obj.get_data())
    return lines


def body(lines: list[str]) -> list[str]:
    """The lines without the page header and footer (the demo's document number and revision, or the project's
    name where the project gives no document number)."""
    return [t for t in lines if not (re.fullmatch(r"page \d+ of \d+", t) or re.search(r", (run of|undated run)", t)
                                     or re.fullmatch(r"[A-Z]+-[A-Z]+-[A-Z]+-\d+ revision \w+", t)
                                     or t == "Greenfield estimates for planning: see section 4.")]


def between(lines: list[str], start: str, end: str | None) -> list[str]:
    """The lines after the last `start` (a section title is also in the contents) up to the next `end`."""
    a = len(lines) - 1 - lines[::-1].index(start)
    return lines[a + 1:lines.index(end, a) if end else None]


# ---------------------------------------------------------------------------------------------------- runs
@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo site run through the command line, then its report with the project file (timed)."""
    out = tmp_path_factory.mktemp("report_demo")
    builders.run_demo(out)
    start = time.perf_counter()
    pdf = report.write_report(out, "ostrey", project=DEMO / "ostrey.toml")
    seconds = time.perf_counter() - start
    return out, pdf, seconds, body(pdf_lines(pdf))


@pytest.fixture(scope="module")
def bare(tmp_path_factory):
    """A run with one straight drive and nothing else: no buildings, utilities, face check or points."""
    out = tmp_path_factory.mktemp("report_bare")
    project = builders.project([builders.drive([(0.0, 0.0), (60.0, 0.0)], 2.0)])
    result = settle.run(project)
    gis_out.write_geopackage(out / "bare.gpkg", gis_out.frames(result))
    gis_out.write_text_atomic(out / "summary.json", json.dumps(summarise(result)))
    return out, project


def layer(out, name, stem="ostrey"):
    return gpd.read_file(out / f"{stem}.gpkg", layer=name)


# ------------------------------------------------------------------------------------------------ the demo
def test_demo_report_is_written_in_seconds_with_its_sections(demo):
    out, pdf, seconds, text = demo
    assert pdf == (out / "ostrey-report.pdf").resolve() and pdf.read_bytes().startswith(b"%PDF-")
    assert seconds < 30.0, seconds  # the issue asks for seconds; about 5 s on the shared 2-core machine
    for title in report.SECTIONS + ("1.1 Drives", "1.2 Volume loss per reach", "1.3 Ground and water",
                                    "3.1 Key numbers", "3.2 Figures", "3.3 Buildings in damage category 2 and above",
                                    "3.4 Utilities near or over their limits",
                                    "3.5 Face stations with a narrow or closed window", "3.6 Warnings of the run"):
        assert text.count(title) >= 1, title
    assert text.index(report.SECTIONS[0]) < text.index(report.SECTIONS[1]) < text.index(report.SECTIONS[2]) \
        < text.index(report.SECTIONS[3]) < text.index(report.SECTIONS[4]) < text.index(report.APPENDICES[0])
    assert any(re.fullmatch(r"Project +Ostrey water main and cable tunnel", t) for t in text)
    assert not [t for t in text if "not assessed (the run has no" in t]
    assert not list(out.glob(".*")), "temporary files left behind"


def test_demo_report_lists_inputs_from_the_project_file(demo):
    _, _, _, text = demo
    inputs = between(text, "1.2 Volume loss per reach", "1.3 Ground and water")
    # demo_site/ostrey.toml: the reach from 240 to 320 m of the first drive has its own volume loss.
    project = settle.load_project(DEMO / "ostrey.toml")
    reach = project.drives[0].reaches[0]
    assert any(re.match(rf"D1\s+{reach.from_chainage_m:.1f}\s+{reach.to_chainage_m:.1f}\s+"
                        rf"{reach.volume_loss_pct:.2f}\s", t) for t in inputs)
    ground = "\n".join(between(text, "1.3 Ground and water", "1.4 Settings and other inputs"))
    for ly in project.ground.layers:
        assert ly.name in ground
    assert "[ground] groundwater_level_m" in " ".join(ground.split())  # the key may wrap onto the next line


def test_every_work_cited_is_listed_in_full_and_every_work_listed_is_cited(demo):
    _, _, _, text = demo
    cited = " ".join(between(text, report.SECTIONS[1], report.SECTIONS[2]))
    entries = []
    for line in between(text, report.SECTIONS[4], report.APPENDICES[0]):
        if line.startswith("- "):
            entries.append(line[2:])
        elif entries:
            entries[-1] += ("" if entries[-1].endswith("-") else " ") + line.strip()
    assert len(entries) >= 15
    by_year = {}
    for entry in entries:
        surname, year = entry.split(",")[0], re.search(r"\((\d{4})\)", entry).group(1)
        # in full: authors with initials, the year, a title, where published
        assert re.match(r"[A-Z][A-Za-z' ]+, [A-Z]\.", entry) and len(entry) > 60, entry
        assert surname in cited and year in cited, entry  # cited in section 2
        by_year.setdefault(year, []).append(surname)
    for m in re.finditer(r"([A-Z][A-Za-z']+)[^()0-9]{0,60}?\(?(\d{4})\)?", cited):
        if m.group(2) in ("1000",) or not 1800 < int(m.group(2)) < 2100:
            continue
        assert m.group(2) in by_year, m.group(0)  # every year cited belongs to a work listed
    for word in ("docstring", "methods.md", "from memory", "settle.", "the issue", "to come"):
        assert word not in " ".join(text), word


def outside_revisions(text: list[str]) -> list[str]:
    """The report's lines but its revision table (which dates the revisions of the document, not the run)."""
    return text[:text.index("Revisions")] + text[text.index("Source"):]


def test_a_run_given_no_date_gives_a_report_with_none(demo):
    out, _, _, text = demo
    assert not re.findall(r"\d{4}-\d{2}-\d{2}", "\n".join(outside_revisions(text)))
    assert any(re.match(r"Run date +not given", line) for line in text)


def test_the_run_date_given_is_the_only_date_in_report_and_geopackage(tmp_path):
    out = tmp_path / "out"
    done = subprocess.run([sys.executable, "-m", "settle", "run", DEMO / "ostrey.toml", "--out", out, "--quiet",
                           "--report", "--date", "2026-11-30"], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    with sqlite3.connect(out / "ostrey.gpkg") as con:
        stamps = {row[0] for row in con.execute("SELECT last_change FROM gpkg_contents")}
    assert stamps == {"2026-11-30T00:00:00.000Z"}
    text = pdf_lines(out / "ostrey-report.pdf")
    assert set(re.findall(r"\d{4}-\d{2}-\d{2}", "\n".join(outside_revisions(text)))) == {"2026-11-30"}
    assert json.loads((out / "run.json").read_text())["run_date"] == "2026-11-30"


def test_building_table_lists_exactly_the_buildings_in_category_2_and_above(demo):
    out, _, _, text = demo
    buildings = layer(out, "buildings")
    category = pd.to_numeric(buildings["category"], errors="coerce")
    expected = set(buildings.loc[category >= 2, "id"].astype(str))
    part = between(text, "3.3 Buildings in damage category 2 and above", "3.4 Utilities near or over their limits")
    ids = set(buildings["id"].astype(str))
    tabled = [t[:22].rstrip() for t in part if t[:22].rstrip() in ids]
    assert sorted(tabled) == sorted(expected)
    counts = part[0] + " " + part[1]
    assert f"{len(buildings)} buildings assessed" in counts
    for c in range(5):
        assert re.search(rf"cat\. {c} [a-z ]+: {int((category == c).sum())}[;.]", counts), c


def test_utility_table_lists_exactly_the_pipes_near_or_over_their_limits(demo):
    out, _, _, text = demo
    pipes = layer(out, "utilities")
    expected = set(pipes.loc[pipes["status"].isin(["near limit", "exceeds"]), "id"].astype(str))
    part = between(text, "3.4 Utilities near or over their limits",
                   "3.5 Face stations with a narrow or closed window")
    ids = set(pipes["id"].astype(str))
    tabled = [t[:14].rstrip() for t in part if t[:14].rstrip() in ids]
    assert sorted(tabled) == sorted(expected)
    for status, n in pipes["status"].value_counts().items():
        assert f"{status}: {n}" in " ".join(part[:2])


def test_face_table_lists_exactly_the_narrow_and_closed_stations(demo):
    out, _, _, text = demo
    stations = layer(out, "face_stations")
    part = between(text, "3.5 Face stations with a narrow or closed window", "3.6 Warnings of the run")
    schedule = between(text, "A.3 Face stations with a narrow or closed window", None)
    rows = [t for t in schedule if re.match(r"D\d+\s+\d+\.\d\d\s", t)]
    flagged = stations[stations["status"].isin(["narrow", "closed"])]
    assert len(rows) == len(flagged)
    assert sorted(float(r.split()[1]) for r in rows) == sorted(np.round(flagged["chainage_m"], 2).tolist())
    assert all(r.split()[7] in ("narrow", "closed") for r in rows)
    assert any(f"{len(flagged)} station(s) with a narrow or closed window: each is scheduled in A.3" in t
               for t in part)
    for k, drive in enumerate(layer(out, "route")["drive"], start=1):
        mine = stations[stations["drive"] == drive]
        assert any(t.startswith(f"D{k}: {len(mine)} stations: open {int((mine['status'] == 'open').sum())}, narrow "
                                f"{int((mine['status'] == 'narrow').sum())}") for t in part)


def test_same_outputs_and_date_give_the_same_pdf(demo):
    out, _, _, _ = demo
    first = report.write_report(out, "ostrey", run_date="2031-05-06").read_bytes()
    second = report.write_report(out, "ostrey", run_date=dt.date(2031, 5, 6)).read_bytes()
    assert first == second
    assert b"/CreationDate" not in first and b"/ModDate" not in first
    assert any(re.match(r"Run date +2031-05-06$", t) for t in body(pdf_lines(out / "ostrey-report.pdf")))


def test_figures_can_be_kept_beside_the_report(demo):
    out, _, _, _ = demo
    report.write_report(out, "ostrey", keep_figures=True, sections_chainage_m=[50.0])
    kept = sorted(p.name for p in out.glob("ostrey-*.png"))
    assert "ostrey-plan.png" in kept and len([k for k in kept if "-section-" in k]) == 2
    assert len([k for k in kept if "-transverse-" in k]) == 2  # chainage 50 m lies in both demo drives


# ------------------------------------------------------------------------------------------ a bare run
def test_a_run_without_buildings_utilities_or_face_check_says_not_assessed(bare):
    out, _ = bare
    text = body(pdf_lines(report.write_report(out, "bare")))
    for what in ("Buildings: not assessed", "Utilities: not assessed", "Face support window: not assessed"):
        assert any(t.startswith(what) for t in text), what
    methods = between(text, report.SECTIONS[1], report.SECTIONS[2])
    assert "Building damage: not assessed in this run." in methods
    assert "Project file: not given to the report" in text


def test_inputs_can_come_from_the_summary(bare, tmp_path):
    out, project = bare
    for name in ("bare.gpkg", "summary.json"):
        (tmp_path / name).write_bytes((out / name).read_bytes())
    summary = json.loads((tmp_path / "summary.json").read_text())
    summary["inputs"] = report.project_inputs(project)
    (tmp_path / "summary.json").write_text(json.dumps(summary))
    text = body(pdf_lines(report.write_report(tmp_path, "bare")))
    reaches = between(text, "1.2 Volume loss per reach", "1.3 Ground and water")
    assert any(re.match(r"D1\s+-\s+-\s+1.00\s", t) for t in reaches)  # builders.drive: 1 % over the whole drive
    assert "clay" in " ".join(between(text, "1.3 Ground and water", "1.4 Settings and other inputs"))


def test_the_project_must_be_the_runs(bare):
    out, project = bare
    other = builders.project([builders.drive([(0.0, 0.0), (60.0, 0.0)], 2.0, name="Z")])
    with pytest.raises(InputError, match=r"is not the project of the run in .*drives \['Z'\].*drives \['A'\]"):
        report.write_report(out, "bare", project=other)
    assert report.write_report(out, "bare", project=project).is_file()


@pytest.mark.parametrize("kwargs, message", [
    ({"run_date": "1 May"}, r"run date must be a date as YYYY-MM-DD; got '1 May'"),
    ({"sections_chainage_m": [75.0]}, r"\[output\] sections_chainage_m: chainage 75 m lies in no drive"),
    ({"sections_chainage_m": {"Q": [10.0]}}, r"\[output\] sections_chainage_m: no drive named 'Q'"),
])
def test_bad_report_arguments_are_input_errors(bare, kwargs, message):
    out, _ = bare
    with pytest.raises(InputError, match=message):
        report.write_report(out, "bare", **kwargs)


def test_missing_run_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match=r"summary.json: no summary.json here; run `settle run` first"):
        report.write_report(tmp_path, "nothing")


def test_names_outside_windows_1252_switch_to_embedded_unicode_fonts(tmp_path):
    project = builders.project([builders.drive([(0.0, 0.0), (60.0, 0.0)], 2.0, name="Łódź → Gdańsk")])
    result = settle.run(project)
    gis_out.write_geopackage(tmp_path / "u.gpkg", gis_out.frames(result))
    gis_out.write_text_atomic(tmp_path / "summary.json", json.dumps(summarise(result)))
    data = report.write_report(tmp_path, "u").read_bytes()
    assert b"/ToUnicode" in data and b"DejaVu" in data  # a reader maps the glyphs back to the characters


# ---------------------------------------------------------------------------------------- the row filters
def test_row_filters_keep_exactly_their_criteria_worst_first():
    buildings = pd.DataFrame({"id": list("abcdefg"), "category": pd.array([0, 2, 4, None, 3, 2, 1], dtype="Int64"),
                              "tensile_strain_pct": [0.01, 0.08, 0.5, np.nan, 0.2, 0.12, 0.06]})
    assert report.buildings_to_report(buildings)["id"].tolist() == ["c", "e", "f", "b"]
    pipes = pd.DataFrame({"id": list("abcde"), "status": ["within limits", "exceeds", "near limit", "not checked",
                                                          "crosses the tunnel"], "utilisation": [0.2, 1.5, 0.9, 0.0,
                                                                                                  np.nan]})
    assert report.utilities_to_report(pipes)["id"].tolist() == ["b", "c"]
    stations = pd.DataFrame({"chainage_m": [0.0, 5.0, 10.0], "status": ["open", "narrow", "closed"]})
    assert report.face_stations_to_report(stations)["chainage_m"].tolist() == [5.0, 10.0]


def test_table_lines_mark_missing_values_and_cut_long_text():
    lines = report.table_lines([("id", 6, None), ("v", 6, ".2f")],
                               [{"id": "abcdefghij", "v": np.nan}, {"id": "x", "v": 1.234}])
    assert lines == ["id          v", "-------------", "abc...      -", "x        1.23"]
