"""The report as a document an engineer can issue: document control from [report], "page k of N" on every page,
the PDF's metadata, complete schedules, the monitoring section, A3 figure pages. Read back with pypdf."""
import re
import subprocess
import sys

import geopandas as gpd
import numpy as np
import pypdf
import pytest

from settle.errors import InputError
from settle.inputs.project_file import load_project

from . import builders

A4_PT = (595.2, 841.9)  # portrait, 210 x 297 mm in points
A3_LANDSCAPE_PT = (1190.6, 841.9)


def run_site(out, *extra):
    """The demo site run with its report into `out`; the terminal table."""
    done = subprocess.run([sys.executable, "-m", "settle", "run", builders.DEMO / "ostrey.toml", "--out", out,
                           "--report", *extra], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    return done.stdout


@pytest.fixture(scope="module")
def monitored(tmp_path_factory):
    """The demo run with its readings and its report: (out folder, pypdf reader, text per page, terminal table)."""
    out = tmp_path_factory.mktemp("monitored")
    table = run_site(out, "--readings", builders.DEMO / "cable_tunnel_readings.csv")
    reader = pypdf.PdfReader(out / "ostrey-report.pdf")
    return out, reader, [p.extract_text() for p in reader.pages], table


def test_page_1_carries_the_title_block_and_the_revision_table(monitored):
    _, _, pages, _ = monitored
    control = load_project(builders.DEMO / "ostrey.toml").report
    first = pages[0]
    for label, value in (("Document number", control.document_number), ("Revision", control.revision),
                         ("Client", control.client), ("Prepared by", control.prepared_by),
                         ("Checked by", control.checked_by), ("Approved by", control.approved_by)):
        assert re.search(rf"{label} +{re.escape(value)}", first), label
    for r in control.revisions:
        assert re.search(rf"{re.escape(r.revision)} +{r.date} {re.escape(r.description)}", first), r
    assert control.title.split(":")[0] in first


def test_every_page_says_page_k_of_n_with_the_document_number_and_revision(monitored):
    _, reader, pages, _ = monitored
    n = len(reader.pages)
    assert n >= 15
    for k, text in enumerate(pages, start=1):
        assert f"page {k} of {n}" in text, k
        assert "OSW-GEO-RPT-0112 revision A" in text, k


def test_pdf_metadata_names_title_author_and_subject(monitored):
    _, reader, _, _ = monitored
    meta = reader.metadata
    assert meta.title == "Ostrey water main and cable tunnel: ground movement and damage assessment"
    assert meta.author == "R. Hallam"
    assert meta.subject.startswith("OSW-GEO-RPT-0112 revision A")


def _appendix(pages) -> str:
    text = "\n".join(pages)
    return text[text.rindex("Appendix A Schedules"):]


def test_schedules_list_every_building_and_every_pipe_with_its_allowables(monitored):
    out, _, pages, _ = monitored
    appendix = _appendix(pages)
    buildings = gpd.read_file(out / "ostrey.gpkg", layer="buildings")
    a1 = appendix[appendix.index("A.1 Buildings"):appendix.index("A.2 Utilities")]
    for _, b in buildings.iterrows():
        row = re.search(rf"^{re.escape(str(b['id']))} +(masonry|frame) +(\S+) +(\S+)", a1, re.M)
        assert row, b["id"]
        assert row.group(2) == str(int(b["category"])) and row.group(3) == str(int(b["worst_category"]))
    pipes = gpd.read_file(out / "ostrey.gpkg", layer="utilities")
    a2 = appendix[appendix.index("A.2 Utilities"):appendix.index("A.3 Face stations")]
    for _, p in pipes.iterrows():
        block = a2[a2.index(f"\n{p['id']} "):]
        for words, allowable in (("bending strain ue", "allowable_bending_strain_ue"),
                                 ("axial strain ue", "allowable_axial_strain_ue"),
                                 ("joint opening mm", "allowable_joint_opening_mm")):
            line = re.search(rf"{words} +\S+(?: / \S+)? +(\S+) +(\S+) +(.+)", block).groups()
            value = p[allowable]
            if np.isfinite(value):
                assert float(line[0]) == pytest.approx(value, rel=1e-3), (p["id"], words)
                assert line[2].startswith(("given", "default (")), (p["id"], words)
            else:
                assert line[0] == "-" and line[2].startswith("none"), (p["id"], words)
        assert f"status: {p['status']}" in block[:600]
    assert "default (assumed): assumed (common practice); no published source: confirm for this site" in \
        " ".join(a2.split())


def test_monitoring_section_tables_every_point_and_the_fits(monitored):
    out, _, pages, table = monitored
    text = "\n".join(pages)
    section = text[text.index("3.7 Monitoring: readings against the prediction"):text.rindex("4 Assumptions")]
    readings = gpd.read_file(out / "ostrey.gpkg", layer="readings")
    for _, r in readings.iterrows():
        assert re.search(rf"^{re.escape(r['point_id'])} +D\d +\S+ +\S+ +{r['reading_mm']:.2f} +"
                         rf"{r['predicted_mm']:.2f} .* {re.escape(r['trigger_status'])}$", section, re.M), r["point_id"]
    assert re.search(r"D2 +whole drive +\d\.\d{3} +[\d.]+ to [\d.]+ +\d\.\d{3} +[\d.]+ to [\d.]+", section)
    counts = readings["trigger_status"].value_counts()
    assert f"clear: {counts.get('clear', 0)}" in " ".join(section.split())
    assert "Figure 6. Monitored cross-section" in text
    assert re.search(r"monitoring triggers +clear: \d+, amber reached: \d+, red reached: \d+ \(of \d+ points; amber 3 "
                     r"mm, red 6 mm\)", table)


def test_a3_puts_the_figures_on_a3_landscape_pages(tmp_path):
    project = builders.demo_copy(tmp_path)
    project.write_text(project.read_text().replace('paper = "A4"', 'paper = "A3"'))
    done = subprocess.run([sys.executable, "-m", "settle", "run", project, "--out", tmp_path / "out", "--report",
                           "--quiet"], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    reader = pypdf.PdfReader(tmp_path / "out" / "ostrey-report.pdf")
    sizes = [(round(float(p.mediabox.width), 1), round(float(p.mediabox.height), 1)) for p in reader.pages]
    figure_pages = [k for k, p in enumerate(reader.pages) if re.search(r"^Figure \d+\.", p.extract_text(), re.M)
                    and len(p.extract_text().splitlines()) < 8]
    assert len(figure_pages) == 5  # plan, two longitudinal and two transverse sections
    for k, size in enumerate(sizes):
        assert size == pytest.approx(A3_LANDSCAPE_PT if k in figure_pages else A4_PT, abs=0.5), k


@pytest.mark.parametrize("text, pattern", [
    ('paper = "A2"', r'\[report\]: paper must be one of "A4", "A3"; got "A2"'),
    ('revision = "C"', r'\[report\]: revision "C" is not the last of \[\[report.revisions\]\] \("A"\)'),
    ('cheked_by = "X"', r'\[report\]: unknown key "cheked_by"; did you mean "checked_by"\?'),
    ('client = ""', r"\[report\]: client must be non-empty text"),
])
def test_report_keys_are_checked(tmp_path, text, pattern):
    project = builders.demo_copy(tmp_path)
    source = project.read_text()
    head, tail = source.split("[[report.revisions]]", 1)
    key = text.split(" =")[0]
    head = re.sub(rf"^{key} = .*$", "", head, flags=re.M)  # the demo's own value in [report], if any, makes way
    project.write_text(head + f"{text}\n\n[[report.revisions]]" + tail)
    with pytest.raises(InputError, match=pattern):
        load_project(project)


def test_revision_dates_must_be_dates_oldest_first(tmp_path):
    project = builders.demo_copy(tmp_path)
    source = project.read_text()
    project.write_text(source.replace("date = 2026-11-27", 'date = "27/11/2026"'))
    with pytest.raises(InputError, match=r"\[\[report.revisions\]\] #2: date must be a date such as 2026-11-30"):
        load_project(project)
    project.write_text(source.replace("date = 2026-11-27", "date = 2026-09-01"))
    with pytest.raises(InputError, match=r"#2 is dated 2026-09-01, before #1 \(2026-10-14\)"):
        load_project(project)
