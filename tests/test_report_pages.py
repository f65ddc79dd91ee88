"""The report's pages as a reader sees them: every page rendered to pixels and compared with the reference made
from an approved report (tests/report_pages.py), so a broken figure fails. Tolerances are ours: wide enough for a
change of wording or anti-aliasing, far narrower than a lost figure, layer or colour scheme."""
import json

import numpy as np
import pytest

from .report_pages import REFERENCE, demo_report, page_statistics

INK_TOLERANCE = 0.015  # share of the page
COLOUR_TOLERANCE = 0.01
GRID_TOLERANCE = 0.05  # share of a grid cell


@pytest.fixture(scope="module")
def pages(tmp_path_factory):
    return page_statistics(demo_report(tmp_path_factory.mktemp("pages") / "out"))


def test_the_pages_match_the_reference_report(pages):
    reference = json.loads(REFERENCE.read_text())
    assert len(pages) == len(reference)
    for k, (got, want) in enumerate(zip(pages, reference), start=1):
        assert got["size_pt"] == pytest.approx(want["size_pt"], abs=0.5), k
        assert got["ink"] == pytest.approx(want["ink"], abs=INK_TOLERANCE), k
        assert got["colour"] == pytest.approx(want["colour"], abs=COLOUR_TOLERANCE), k
        assert np.allclose(got["grid_ink"], want["grid_ink"], atol=GRID_TOLERANCE), k


def test_figure_pages_carry_colour_and_text_pages_do_not(pages):
    # The figures are in colour (settlement bands, damage categories); the text pages are black on white.
    landscape = [p for p in pages if p["size_pt"][0] > p["size_pt"][1]]
    portrait = [p for p in pages if p["size_pt"][0] < p["size_pt"][1]]
    assert len(landscape) == 5 and portrait
    assert all(p["colour"] > 0.002 for p in landscape)  # sections are mostly black lines: 0.35 % on the demo
    assert all(p["colour"] < 0.001 for p in portrait)


def test_a_blank_figure_would_fail(pages):
    # The statistics tell a figure from a blank page: the check above is not vacuous.
    figure = next(p for p in pages if p["size_pt"][0] > p["size_pt"][1])
    assert figure["ink"] > INK_TOLERANCE * 3 and max(figure["grid_ink"]) > GRID_TOLERANCE * 2
