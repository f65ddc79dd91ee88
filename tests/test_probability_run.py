"""The probabilistic run through the project file and the command line: distributions read from the project,
probabilities on the buildings and utilities layers, percentiles on the grid, counts in summary.json and the closing
table; a project without distributions runs exactly as before."""
import json
import subprocess
import sys

import geopandas as gpd
import numpy as np
import pytest

from settle.errors import InputError
from settle.inputs.project_file import load_project

from . import builders

DISTRIBUTIONS = '''[drives.volume_loss_distribution]
kind = "lognormal"
median_pct = 1.8
cov = 0.35

[drives.trough_width_distribution]
kind = "normal"
mean = 0.5
sd = 0.06

[[drives.reaches]]'''


def site_with(tmp_path, distributions: str = DISTRIBUTIONS, uncertainty: str = "[uncertainty]\nsamples = 256\n"):
    """The demo site with distributions on its first drive (the water main) and an [uncertainty] table."""
    project = builders.demo_copy(tmp_path)
    text = project.read_text().replace("[[drives.reaches]]", distributions, 1)
    project.write_text(text.replace("[report]", f"{uncertainty}\n[report]", 1))
    return project


def run(project, out):
    done = subprocess.run([sys.executable, "-m", "settle", "run", project, "--out", out], capture_output=True,
                          text=True)
    assert done.returncode == 0, done.stderr
    return done.stdout


@pytest.fixture(scope="module")
def probable(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("probable")
    project = site_with(tmp)
    table = run(project, tmp / "out")
    return tmp / "out", table, project


def test_the_layers_carry_probabilities_with_their_standard_errors(probable):
    out, _, _ = probable
    buildings = gpd.read_file(out / "ostrey.gpkg", layer="buildings")
    for k in range(1, 5):
        p = buildings[f"prob_category_ge_{k}"].to_numpy(float)
        assert np.all((p >= 0) & (p <= 1))
        se = buildings[f"prob_category_ge_{k}_se"].to_numpy(float)
        np.testing.assert_allclose(se, np.sqrt(p * (1 - p) / 256), atol=1e-12)
    p = np.column_stack([buildings[f"prob_category_ge_{k}"] for k in range(1, 5)])
    assert np.all(np.diff(p, axis=1) <= 1e-12)  # P(cat >= k) never rises with k
    # the design volume loss is the median: a building of category 2 at the design values is about even odds
    at_two = buildings["category"] == 2
    assert at_two.any() and np.all(buildings.loc[at_two, "prob_category_ge_2"].between(0.2, 0.9))
    pipes = gpd.read_file(out / "ostrey.gpkg", layer="utilities")
    assert np.all(pipes["prob_exceeds"] <= pipes["prob_near_or_exceeds"] + 1e-12)
    grid = gpd.read_file(out / "ostrey.gpkg", layer="grid")
    assert np.all(grid["settlement_p95_mm"] >= grid["settlement_p50_mm"] - 1e-9)


def test_summary_and_closing_table_count_the_buildings_by_probability(probable):
    out, table, _ = probable
    summary = json.loads((out / "summary.json").read_text())["probabilistic"]
    assert summary["samples"] == 256 and summary["seed"] == 0
    buildings = gpd.read_file(out / "ostrey.gpkg", layer="buildings")
    p2 = buildings["prob_category_ge_2"].to_numpy(float)
    for level, key in ((0.01, "1pct"), (0.10, "10pct"), (0.50, "50pct")):
        assert summary["buildings"][f"prob_category_ge_2_above_{key}"] == int(np.sum(p2 > level))
    assert f"above 1 %: {int(np.sum(p2 > 0.01))}" in table and "(256 samples, seed 0)" in table


def test_the_same_seed_gives_the_same_numbers(probable, tmp_path):
    out, _, project = probable
    run(project, tmp_path / "again")
    first = gpd.read_file(out / "ostrey.gpkg", layer="buildings")
    again = gpd.read_file(tmp_path / "again" / "ostrey.gpkg", layer="buildings")
    np.testing.assert_array_equal(first["prob_category_ge_2"], again["prob_category_ge_2"])


def test_without_distributions_the_run_is_todays(tmp_path):
    project = load_project(builders.DEMO / "ostrey.toml")
    assert project.uncertainty is None
    run(builders.DEMO / "ostrey.toml", tmp_path / "out")
    assert "probabilistic" not in json.loads((tmp_path / "out" / "summary.json").read_text())
    buildings = gpd.read_file(tmp_path / "out" / "ostrey.gpkg", layer="buildings")
    assert not [c for c in buildings.columns if c.startswith("prob_")]


@pytest.mark.parametrize("distributions, uncertainty, pattern", [
    (DISTRIBUTIONS.replace('kind = "lognormal"', 'kind = "gamma"'), "", r"kind must be one of"),
    (DISTRIBUTIONS.replace("cov = 0.35", "cov = -0.1"), "", r"\[drives.volume_loss_distribution\]: cov must be"),
    (DISTRIBUTIONS, "[uncertainty]\nsample = 100\n", r'\[uncertainty\]: unknown key "sample"; did you mean "samples"'),
    ("[[drives.reaches]]", "[uncertainty]\nsamples = 100\n", r"\[uncertainty\]"),
])
def test_bad_distributions_are_one_line_errors(tmp_path, distributions, uncertainty, pattern):
    with pytest.raises(InputError, match=pattern):
        load_project(site_with(tmp_path, distributions, uncertainty))


def test_the_95th_percentile_bands_agree_with_the_grid_percentiles(probable):
    out, _, project = probable
    bands = gpd.read_file(out / "ostrey.gpkg", layer="settlement_bands_p95")
    grid = gpd.read_file(out / "ostrey.gpkg", layer="grid")
    levels = list(load_project(project).output.contour_levels_mm)
    top = float(np.nanmax(grid["settlement_p95_mm"]))
    highest = int(np.searchsorted(levels, top, side="right")) - 1
    assert int(bands["band"].max()) == highest  # the largest p95 on the grid lies in the highest band drawn
    design = gpd.read_file(out / "ostrey.gpkg", layer="settlement_bands")
    assert int(design["band"].max()) <= highest
    from .gpkg_conformance import problems

    assert problems(out / "ostrey.gpkg") == []  # the new layer and fields keep the GeoPackage conformant


def test_the_report_gives_the_likeliest_buildings_a_figure_and_the_caution(probable):
    import pypdf

    out, _, project = probable
    done = subprocess.run([sys.executable, "-m", "settle", "report", project, "--out", out], capture_output=True,
                          text=True)
    assert done.returncode == 0, done.stderr
    reader = pypdf.PdfReader(out / "ostrey-report.pdf")
    text = "\n".join(page.extract_text() for page in reader.pages)
    section = " ".join(text[text.rindex("3.8 Probability of damage"):].split())
    buildings = gpd.read_file(out / "ostrey.gpkg", layer="buildings")
    top = buildings.sort_values("prob_category_ge_2", ascending=False).iloc[0]
    assert (f"{top['id']} {int(top['category'])} {top['prob_category_ge_1']:.2f} +- "
            f"{top['prob_category_ge_1_se']:.2f} {top['prob_category_ge_2']:.2f} +-") in section
    assert "The probabilities are only as good as the distributions" in section
    assert "Probability of damage: histogram of the damage category" in text
