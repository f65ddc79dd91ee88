"""Figures from finished runs: not blank, drawn from the outputs, sampled where they claim, errors for people; drawn at
the size they print, no text outside them, labels clear of each other, one offset sign convention."""
import json
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import geopandas as gpd  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
import shapely  # noqa: E402
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

import gis_out  # noqa: E402
import settle  # noqa: E402
from gis_out import figures  # noqa: E402
from settle.errors import InputError  # noqa: E402
from settle.engine.movements import Movements  # noqa: E402
from settle.procedure.summary import summarise  # noqa: E402

from . import builders  # noqa: E402

DEMO = Path(__file__).resolve().parent.parent / "demo_site"
# Thresholds measured on this machine: a figure holding only its title and caution line has a grey-level standard
# deviation of 0.03 and 0.2 % non-white pixels; an empty set of axes 0.053 and 0.4 %; the demo figures 0.12 to 0.14
# and 5 to 20 %.
MIN_STD, MIN_INKED = 0.08, 0.02


def ink(png):
    """(standard deviation of the grey level, share of pixels darker than near-white) of a PNG read back."""
    grey = plt.imread(str(png))[..., :3].mean(axis=2)
    return float(grey.std()), float((grey < 0.95).mean())


def assert_not_blank(png):
    std, inked = ink(png)
    assert std > MIN_STD and inked > MIN_INKED, (png, std, inked)


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo site run through the command line, as a user would."""
    out = tmp_path_factory.mktemp("figures_demo")
    builders.run_demo(out)
    gpkg = out / "ostrey.gpkg"
    return gpkg, json.loads((out / "summary.json").read_text()), out


def write_run(project, out: Path, stem="bare"):
    """A run's GeoPackage and summary.json, written as `settle run` writes them."""
    result = settle.run(project)
    gis_out.write_geopackage(out / f"{stem}.gpkg", gis_out.frames(result))
    gis_out.write_text_atomic(out / "summary.json", json.dumps(summarise(result)))
    return out / f"{stem}.gpkg", result


@pytest.fixture(scope="module")
def straight(tmp_path_factory):
    """Straight level drives due east: A along y = 0 from x = 0 to 100 m (axis 8 m deep, D = 3 m) and B along
    y = -10 m (axis 9 m deep), so the ground either side of A moves differently; no face check, buildings or
    utilities. Reporting points on grid nodes along A's axis and across it at x = 50 m."""
    out = tmp_path_factory.mktemp("figures_straight")
    along = [(x, 0.0) for x in range(30, 71)]
    across = [(50.0, -y) for y in range(-6, 7) if y != 0]
    project = builders.project([builders.drive([(0.0, 0.0), (100.0, 0.0)], 2.0),
                                builders.drive([(0.0, -10.0), (100.0, -10.0)], 1.0, name="B")],
                               points=builders.points(along + across))
    gpkg, result = write_run(project, out)
    return gpkg, result, out


# ------------------------------------------------------------------------------------------- demo figures
def test_plan_map_of_the_demo_is_drawn(demo, tmp_path):
    gpkg, summary, _ = demo
    png = figures.plan_map_png(gpkg, summary, tmp_path / "plan.png")
    assert png == (tmp_path / "plan.png").resolve()
    assert_not_blank(png)
    assert not list(tmp_path.glob(".*.tmp"))  # the temporary file was renamed


def test_longitudinal_section_of_every_demo_drive_is_drawn(demo, tmp_path):
    gpkg, summary, out = demo
    for k, name in enumerate(gpd.read_file(gpkg, layer="route")["drive"]):
        assert_not_blank(figures.longitudinal_section_png(gpkg, out / "summary.json", name, tmp_path / f"l{k}.png"))


def test_transverse_sections_of_the_demo_are_drawn(demo, tmp_path):
    gpkg, summary, _ = demo
    name = gpd.read_file(gpkg, layer="route")["drive"].iloc[0]
    assert_not_blank(figures.transverse_sections_png(gpkg, summary, name, [100.0, 200.0, 296.0, 400.0],
                                                     tmp_path / "t.png"))


def test_figures_of_a_run_without_face_buildings_or_utilities(straight, tmp_path):
    gpkg, _, out = straight
    summary = out / "summary.json"
    assert_not_blank(figures.plan_map_png(gpkg, summary, tmp_path / "p.png"))
    assert_not_blank(figures.longitudinal_section_png(gpkg, summary, "A", tmp_path / "l.png"))
    assert_not_blank(figures.transverse_sections_png(gpkg, summary, "A", [20.0, 50.0], tmp_path / "t.png"))


# ----------------------------------------------------------------------------------- read from the outputs
def test_chainage_from_the_route_line_matches_the_route_layer(demo):
    # README "The project file": chainage is measured along the 3-D axis from the drive's start chainage; the route
    # layer's end_chainage_m is the engine's own value, so the figures' chainage must end on it.
    gpkg, _, _ = demo
    route = gpd.read_file(gpkg, layer="route")
    for axis, end in zip(figures.drive_axes(route), route["end_chainage_m"]):
        assert axis.end_m == pytest.approx(end, abs=1e-6)


def test_axis_settlement_on_grid_nodes_equals_the_engine_at_the_same_places(straight):
    gpkg, result, out = straight
    names = figures.layer_names(gpkg)
    axis = figures.drive_axes(gpd.read_file(gpkg, layer="route"))[0]
    c, s = figures.axis_settlement(gpkg, names, axis, 1.0)
    # Reporting points P0..P40 lie on the axis at x = 30..70 m, which are grid nodes: bilinear sampling returns the
    # node's value there, and the grid and the points come from the same closed form.
    on_axis = np.isin(c, np.arange(30.0, 71.0))
    engine = result.points.settlement_mm[:41]
    np.testing.assert_allclose(s[on_axis], engine, atol=1e-3)


def test_transverse_section_samples_settlement_and_the_strain_across_the_drive(straight):
    gpkg, result, _ = straight
    names = figures.layer_names(gpkg)
    axis = figures.drive_axes(gpd.read_file(gpkg, layer="route"))[0]
    sec = figures.transverse_section(gpkg, names, axis, 50.0, 1.0, None)
    # The drive runs east, so "right looking up-chainage" is south: offset o is at y = -o. The section line runs
    # north-south, so the strain along it is the engine's strain_yy at those places (points P41.. at x = 50 m).
    # Drive B to the south makes the trough lopsided, so a section drawn the wrong way round would fail here.
    pts = result.points
    across = np.arange(41, len(pts))
    offset = -pts.y_m[across]
    at = np.searchsorted(sec.offset_m, offset)
    np.testing.assert_allclose(sec.offset_m[at], offset)
    np.testing.assert_allclose(sec.settlement_mm[at], pts.settlement_mm[across], atol=1e-3)
    np.testing.assert_allclose(sec.strain_ue[at], pts.strain_yy_ue[across], atol=1e-2)
    assert np.isnan(sec.axis_depth_m)  # no face stations: the ground level is not in the outputs
    assert sec.blocks == []


def test_transverse_section_draws_exactly_the_buildings_the_line_crosses(demo):
    gpkg, summary, _ = demo
    names = figures.layer_names(gpkg)
    route = gpd.read_file(gpkg, layer="route")
    buildings = gpd.read_file(gpkg, layer="buildings")
    seen = 0
    for axis in figures.drive_axes(route):
        for c in np.arange(axis.start_m, axis.end_m, 10.0):
            sec = figures.transverse_section(gpkg, names, axis, c, 1.0, None)
            x0, y0, _ = axis.at(c)
            n = figures._normal(axis.direction(c))
            w = sec.half_width_m
            line = shapely.LineString([(x0 - w * n[0], y0 - w * n[1]), (x0 + w * n[0], y0 + w * n[1])])
            crossed = {str(i) for i, g in zip(buildings["id"], buildings.geometry) if g.intersection(line).length > 0}
            assert {b[2] for b in sec.blocks} == crossed
            seen += len(crossed)
    assert seen > 0  # the demo street lies over the drives


def test_ground_profile_uses_surface_and_water_fields_when_the_layer_has_them(demo, tmp_path):
    gpkg, _, _ = demo
    stations = gpd.read_file(gpkg, layer="face_stations")
    axis = figures.drive_axes(gpd.read_file(gpkg, layer="route"))[0]
    derived = figures.ground_profile(gpkg, figures.layer_names(gpkg), axis)
    assert derived.source == "face stations, surface_level_m"  # the layer carries the surface the face sees
    # surface - cover is the crown: the surface is the bed in a river reach, the ground elsewhere.
    mine = stations[stations["drive"] == axis.name].sort_values("chainage_m")
    np.testing.assert_allclose(derived.surface_level_m - derived.cover_m,
                               axis.at(mine["chainage_m"])[2] + 0.5 * axis.outer_diameter_m)
    stations["surface_level_m"] = 40.0
    stations["water_level_m"] = 41.0
    copy = tmp_path / "copy.gpkg"
    gpd.read_file(gpkg, layer="route").to_file(copy, layer="route")
    stations.to_file(copy, layer="face_stations")
    given_ = figures.ground_profile(copy, figures.layer_names(copy), axis)
    assert np.all(given_.surface_level_m == 40.0) and np.all(given_.water_level_m == 41.0)


# --------------------------------------------------------------------------------------- sampling identities
@settings(max_examples=25, deadline=None)
@given(a=st.floats(-5, 5), b=st.floats(-5, 5), c=st.floats(-10, 10), spacing=st.sampled_from([0.5, 1.0, 2.5]),
       u=st.floats(0, 1), v=st.floats(0, 1))
def test_grid_sampler_reproduces_a_linear_field_exactly(a, b, c, spacing, u, v):
    # Bilinear interpolation is exact for a field linear in x and y (an identity of the interpolant).
    ix, iy = np.meshgrid(np.arange(100, 106), np.arange(-3, 3))
    x, y = ix.ravel() * spacing, iy.ravel() * spacing
    grid = gpd.GeoDataFrame(geometry=gpd.points_from_xy(x, y), crs="EPSG:25832")
    sampler = figures.GridSampler(grid, spacing)
    px, py = (102 + 2 * u) * spacing, (-1 + 2 * v) * spacing
    assert sampler(a * x + b * y + c, [px], [py])[0] == pytest.approx(a * px + b * py + c, abs=1e-9)


def test_grid_sampler_leaves_a_gap_where_a_node_is_missing_but_not_on_a_node():
    x, y = np.array([0.0, 1.0, 0.0]), np.array([0.0, 0.0, 1.0])  # (1, 1) missing
    sampler = figures.GridSampler(gpd.GeoDataFrame(geometry=gpd.points_from_xy(x, y)), 1.0)
    values = np.array([1.0, 2.0, 3.0])
    assert np.isnan(sampler(values, [0.5], [0.5])[0])
    assert sampler(values, [0.0, 0.5], [0.0, 0.0]).tolist() == [1.0, 1.5]


@settings(max_examples=40, deadline=None)
@given(exx=st.floats(-2000, 2000), eyy=st.floats(-2000, 2000), exy=st.floats(-1000, 1000),
       azimuth=st.floats(0, 360))
def test_strain_along_a_direction_is_the_tensor_component_in_it(exx, eyy, exy, azimuth):
    # n.E.n with n the unit vector at the azimuth (clockwise from north: n = (sin a, cos a)); the principal strains
    # and their direction come from settle.results.Movements, so the conventions are the engine's.
    one = np.array([0.0])
    m = Movements(one, one, one, one, one, one, np.array([exx]), np.array([eyy]), np.array([exy]), one, one)
    got = figures.strain_along(m.strain_max_ue, m.strain_min_ue, m.strain_max_azimuth_deg, azimuth)[0]
    n = np.array([np.sin(np.radians(azimuth)), np.cos(np.radians(azimuth))])
    assert got == pytest.approx(n @ np.array([[exx, exy], [exy, eyy]]) @ n, abs=1e-6)


# ---------------------------------------------------------------------------------------------- bad input
def test_unknown_drive_is_an_input_error_naming_the_drives(straight, tmp_path):
    gpkg, _, out = straight
    with pytest.raises(InputError, match=r"no drive named 'C'; the drives are \['A', 'B'\]"):
        figures.longitudinal_section_png(gpkg, out / "summary.json", "C", tmp_path / "x.png")
    assert not (tmp_path / "x.png").exists()


@pytest.mark.parametrize("chainages, message", [
    ([50.0, 140.0], r"\[output\] sections_chainage_m: chainage 140 m is outside drive 'A' \(0.00 to 100.00 m\)"),
    ([], r"\[output\] sections_chainage_m: give at least one chainage"),
    (["ten"], r"\[output\] sections_chainage_m: chainages must be numbers in m; got \['ten'\]"),
])
def test_section_chainages_are_checked_against_the_drive(straight, tmp_path, chainages, message):
    gpkg, _, out = straight
    with pytest.raises(InputError, match=message):
        figures.transverse_sections_png(gpkg, out / "summary.json", "A", chainages, tmp_path / "x.png")


def test_missing_outputs_are_input_errors(tmp_path):
    with pytest.raises(InputError, match=r"no GeoPackage here; run `settle run` first"):
        figures.plan_map_png(tmp_path / "none.gpkg", {}, tmp_path / "p.png")
    with pytest.raises(InputError, match=r"no summary.json here"):
        figures.plan_map_png(tmp_path / "none.gpkg", tmp_path / "summary.json", tmp_path / "p.png")


# ============================================================================= printed size, clipping, reading
# The checks below build each figure once per module (the demo run is the module's `demo` fixture) and look at its
# artists before it is saved, through the `*_figure` builders the `*_png` functions save.
from matplotlib.patches import Circle  # noqa: E402
from matplotlib.text import Text  # noqa: E402

from gis_out import figure_contours, monitoring_figures  # noqa: E402
from settle.monitoring.sections import Section as MonitoredSection  # noqa: E402


def drawn_texts(fig) -> list[tuple[Text, object]]:
    """(text artist, its window extent) for every text the figure draws when rendered (tick labels of ticks outside
    the view are made but never drawn, so only what draw() reaches counts)."""
    seen = []
    draw = Text.draw

    def record(self, renderer):
        draw(self, renderer)
        if self.get_visible() and self.get_text():
            assert not self.get_wrap(), f"{self.get_text()!r}: wrapped by matplotlib, so measured unwrapped"
            seen.append((self, self.get_window_extent(renderer)))

    Text.draw = record
    try:
        fig.canvas.draw()
    finally:
        Text.draw = draw
    return seen


def assert_no_text_outside(fig, tolerance_px: float = 0.5):
    """Every text the figure draws lies inside the figure (its window extent within the figure's)."""
    box = fig.bbox
    texts = drawn_texts(fig)
    assert texts
    outside = [(t.get_text(), tuple(round(v) for v in b.extents)) for t, b in texts
               if b.x0 < box.x0 - tolerance_px or b.y0 < box.y0 - tolerance_px
               or b.x1 > box.x1 + tolerance_px or b.y1 > box.y1 + tolerance_px]
    assert not outside, (tuple(box.extents), outside)


@pytest.fixture(scope="module")
def demo_figures(demo):
    """The demo's figures, built once: the plan on A4 and A3, each drive's longitudinal section, and transverse
    sections across the water main (four, and one alone)."""
    gpkg, summary, _ = demo
    drives = list(gpd.read_file(gpkg, layer="route")["drive"])
    built = {"plan A4": figures.plan_map_figure(gpkg, summary, "A4"),
             "plan A3": figures.plan_map_figure(gpkg, summary, paper="A3"),
             "transverse 4": figures.transverse_sections_figure(gpkg, summary, drives[0], [100.0, 200.0, 296.0, 400.0]),
             "transverse 1": figures.transverse_sections_figure(gpkg, summary, drives[0], [130.0], paper="A3")}
    for k, name in enumerate(drives):
        built[f"longitudinal {k}"] = figures.longitudinal_section_figure(gpkg, summary, name)
    yield built
    for fig in built.values():
        plt.close(fig)


def monitored_section(readings=(1.0, 3.0, 0.5), offsets=(5.0, 0.0, -5.0)):
    """A monitored section with a point 5 m left of the drive (offset +5 in the left-positive data), one on the
    axis and one 5 m right, and a design trough deepest 2 m left of the axis."""
    profile = np.linspace(-10.0, 10.0, 81)
    return MonitoredSection("A", 30.0, 40.0, np.array(["L5", "C0", "R5"], dtype=object),
                            np.asarray(offsets, float), np.asarray(readings, float), profile,
                            3.0 * np.exp(-0.5 * ((profile - 2.0) / 3.0) ** 2), np.full(len(profile), np.nan))


# ------------------------------------------------------------------------------------------------ page size
@pytest.mark.parametrize("paper", ["A4", "A3"])
def test_figures_are_drawn_at_the_size_of_the_page_image_area(straight, tmp_path, paper):
    # The report's image area of a landscape page (the brief of this change): A4 10.3 x 6.2 in, A3 15.1 x 9.6 in.
    expected = {"A4": (10.3, 6.2), "A3": (15.1, 9.6)}[paper]
    assert figures.FIGURE_AREA_IN[paper] == expected
    gpkg, _, out = straight
    summary = out / "summary.json"
    dpi = 40
    for k, draw in enumerate((lambda p: figures.plan_map_png(gpkg, summary, p, dpi=dpi, paper=paper),
                              lambda p: figures.longitudinal_section_png(gpkg, summary, "A", p, dpi=dpi, paper=paper),
                              lambda p: figures.transverse_sections_png(gpkg, summary, "A", [50.0], p, dpi=dpi,
                                                                        paper=paper))):
        png = draw(tmp_path / f"{k}.png")
        height, width = plt.imread(str(png)).shape[:2]
        assert (width, height) == (round(expected[0] * dpi), round(expected[1] * dpi))


def test_an_unknown_paper_is_an_input_error(straight, tmp_path):
    gpkg, _, out = straight
    with pytest.raises(InputError, match=r"paper must be one of A4, A3; got 'Letter'"):
        figures.plan_map_png(gpkg, out / "summary.json", tmp_path / "p.png", paper="Letter")
    assert not (tmp_path / "p.png").exists()


def test_the_default_paper_is_a4(demo_figures):
    for name, fig in demo_figures.items():
        if "A3" not in name and name != "transverse 1":
            assert tuple(fig.get_size_inches()) == pytest.approx(figures.FIGURE_AREA_IN["A4"]), name


# ------------------------------------------------------------------------------------------------ clipping
def test_the_clipping_check_finds_a_text_outside_the_figure():
    fig = plt.figure(figsize=(3.0, 2.0))
    fig.text(0.9, 0.5, "runs off the right edge")
    with pytest.raises(AssertionError, match="runs off the right edge"):
        assert_no_text_outside(fig)
    plt.close(fig)


def test_no_text_of_the_demo_figures_runs_outside_them(demo_figures):
    for name, fig in demo_figures.items():
        assert_no_text_outside(fig), name


def test_no_text_of_the_figures_of_a_bare_run_runs_outside_them(straight):
    gpkg, _, out = straight
    summary = out / "summary.json"
    for fig in (figures.plan_map_figure(gpkg, summary), figures.longitudinal_section_figure(gpkg, summary, "B"),
                figures.transverse_sections_figure(gpkg, summary, "A", [20.0, 50.0, 60.0, 70.0, 80.0])):
        assert_no_text_outside(fig)
        plt.close(fig)


def test_no_text_of_the_monitoring_figure_runs_outside_it():
    fig = monitoring_figures.section_figure(monitored_section(readings=(-1.0, 3.0, 0.5)), amber_mm=2.0, red_mm=4.0)
    assert_no_text_outside(fig)
    plt.close(fig)


def test_no_text_of_the_face_section_runs_outside_it(monkeypatch, tmp_path):
    from gis_out import face_section
    from settle.assessments.face_stations import face_stations
    from settle.inputs.face_settings import LayerStrength, River
    from settle.inputs.model import Layer

    from .test_face_stations import SAND_S, geometry, model

    sand, clay = Layer("sand", 10.0, 20.0, 0.35, "granular"), Layer("clay", 4.0, 19.0, 0.5, "cohesive")
    ground = model((sand, clay), water=9.0)
    drive = geometry(ground, axis=[5.0, 4.0], xy=((0, 0), (60, 0)))
    stations = face_stations(drive, ground, [SAND_S, LayerStrength(24.0, 5.0, 50.0, 8.0)],
                             [River("A", 20.0, 35.0, 8.5, 10.5)])
    checked = []
    save = face_section.save_png

    def check_then_save(fig, path, dpi):
        assert_no_text_outside(fig)
        checked.append(path)
        return save(fig, path, dpi)

    monkeypatch.setattr(face_section, "save_png", check_then_save)
    face_section.face_section_png(stations, drive, tmp_path / "f.png", layers=(sand, clay))
    assert checked


def test_the_plan_text_prints_at_seven_points_or_more(demo_figures):
    for name in ("plan A4", "plan A3"):
        small = {(t.get_text(), t.get_fontsize()) for t, _ in drawn_texts(demo_figures[name])
                 if t.get_fontsize() < figures.MIN_TEXT_PT}
        assert not small, (name, small)


def test_the_map_takes_most_of_the_plan(demo_figures):
    # The map's axes against the whole figure, after its equal scale is applied: most of its width (the legend
    # beside it takes the rest) and most of its height (the title over it, the caution under it). Seen on the demo:
    # A4 68 % of the width and 76 % of the height, A3 78 % and 86 %.
    for name in ("plan A4", "plan A3"):
        fig = demo_figures[name]
        fig.canvas.draw()
        box = fig.axes[0].get_window_extent()
        assert box.width / fig.bbox.width > 0.6 and box.height / fig.bbox.height > 0.7, name


# ------------------------------------------------------------------------------------------ rivers and labels
def plan_texts(fig) -> list[str]:
    return [t.get_text() for t, _ in drawn_texts(fig)]


def test_rivers_are_drawn_across_the_drive_named_and_in_the_legend(demo, demo_figures):
    gpkg, _, _ = demo
    reaches = gpd.read_file(gpkg, layer="route_reaches")
    rivers = sorted({r for r in reaches["river"].fillna("") if r.strip()})
    assert rivers == ["Wenlow Brook"]  # demo_site/ostrey.toml [[rivers]]
    fig = demo_figures["plan A4"]
    texts = plan_texts(fig)
    assert "Wenlow Brook" in texts
    legend = " ".join(t.get_text() for t in fig.legends[0].get_texts())
    assert "under a river" in legend
    # The water band covers the reach of the drive under the brook.
    reach = reaches[reaches["river"] == "Wenlow Brook"].geometry.iloc[0]
    middle = reach.interpolate(0.5, normalized=True)
    water = [c for c in fig.axes[0].collections
             if len(c.get_facecolor()) and np.allclose(c.get_facecolor()[0][:3],
                                                       matplotlib.colors.to_rgb(figures.WATER))]
    assert water and any(p.contains_point((middle.x, middle.y)) for c in water for p in c.get_paths())


def test_buildings_in_category_1_or_more_and_pipes_not_within_limits_are_labelled(demo, demo_figures):
    gpkg, _, _ = demo
    buildings = gpd.read_file(gpkg, layer="buildings")
    pipes = gpd.read_file(gpkg, layer="utilities")
    worst = np.fmax(buildings["category"].to_numpy(float), buildings["worst_category"].to_numpy(float))
    status = pipes["status"].to_numpy(str)
    worst_status = pipes["worst_status"].to_numpy(str)
    flagged = (status != "within limits") | (worst_status != "within limits")
    texts = plan_texts(demo_figures["plan A4"])
    firsts = {t.split(" (worst")[0] for t in texts}
    assert {str(i) for i in buildings["id"][worst >= 1]} <= firsts
    assert not {str(i) for i in buildings["id"][worst < 1]} & firsts
    assert {str(i) for i in pipes["id"][flagged]} <= firsts
    assert not {str(i) for i in pipes["id"][~flagged]} & firsts
    # ST-RS-5 is within limits now and near its limit at a stage of the sequence: its label says so.
    assert "ST-RS-5 (worst: near limit)" in texts


def test_plan_labels_do_not_overlap_and_are_drawn_literally(demo_figures):
    from gis_out import plan_labels

    for name in ("plan A4", "plan A3"):
        fig = demo_figures[name]
        ax = fig.axes[0]
        renderer = fig.canvas.get_renderer()
        labels = [a for a in ax.texts if isinstance(a, matplotlib.text.Annotation) and a.arrow_patch is not None]
        assert len(labels) >= 12  # 6 buildings, 5 pipes and the brook on the demo
        boxes = [Text.get_window_extent(a, renderer) for a in labels]  # the text alone, not its leader
        assert plan_labels.overlaps(boxes) == [], name
        frame = ax.get_window_extent(renderer)
        assert all(frame.x0 <= b.x0 and b.x1 <= frame.x1 and frame.y0 <= b.y0 and b.y1 <= frame.y1 for b in boxes)
        assert not any(a.get_parse_math() for a in labels)


def test_label_placement_is_deterministic(demo):
    gpkg, summary, _ = demo
    positions = []
    for _ in range(2):
        fig = figures.plan_map_figure(gpkg, summary)
        positions.append([(a.get_text(), a.xyann) for a in fig.axes[0].texts
                          if isinstance(a, matplotlib.text.Annotation)])
        plt.close(fig)
    assert positions[0] == positions[1]


def test_the_plan_states_the_islands_left_out(demo_figures):
    legend = " ".join(t.get_text() for t in demo_figures["plan A4"].legends[0].get_texts())
    assert f"islands under {figure_contours.MIN_ISLAND_CELLS:g} m²" in legend.replace("\n", " ")


def test_the_demo_10_mm_level_reads_as_few_shapes_not_specks(demo):
    # The settlement_bands layer (exact) holds the 10 mm level as 10 pieces along the water main (15 on the survey
    # surface before the demo took its DEM), most of them specks under a square metre where the settlement ripples
    # about 10 mm; the figure draws at most two shapes.
    gpkg, _, _ = demo
    bands = gpd.read_file(gpkg, layer="settlement_bands")
    exact = len(shapely.get_parts(shapely.union_all(bands.geometry[bands["lower_mm"] >= 10.0].to_numpy())))
    levels = figure_contours.figure_levels(bands["band"], bands["lower_mm"], bands.geometry, 1.0)
    k = levels.lower_mm.index(10.0)
    drawn = len(shapely.get_parts(shapely.union_all([levels.bands[j] for j in range(k, len(levels.bands))])))
    assert exact >= 8 and drawn <= 2
    assert levels.dropped[10.0] >= 1


# ---------------------------------------------------------------------------------------- cross sections
def geometry_panels(fig):
    return [ax for ax in fig.axes if ax.get_ylabel().startswith("height above")]


def test_the_buildings_and_tunnel_panel_is_at_true_scale(demo_figures):
    for name in ("transverse 4", "transverse 1"):
        fig = demo_figures[name]
        fig.canvas.draw()
        panels = geometry_panels(fig)
        assert panels
        for ax in panels:
            assert ax.get_aspect() == 1.0
            origin = ax.transData.transform((0.0, 0.0))
            across = ax.transData.transform((1.0, 0.0)) - origin
            up = ax.transData.transform((0.0, 1.0)) - origin
            assert abs(across[0]) == pytest.approx(abs(up[1]), rel=1e-6)
            (tunnel,) = [p for p in ax.patches if isinstance(p, Circle)]
            box = tunnel.get_window_extent()
            assert box.width == pytest.approx(box.height, rel=0.01)  # a circle is a circle


def test_every_cross_section_draws_left_negative(demo, demo_figures):
    # Independently of the figures: a building piece is on the left of the drive, looking up-chainage, when the
    # cross product of the axis direction and the vector to it is positive.
    gpkg, _, _ = demo
    axis = figures.drive_axes(gpd.read_file(gpkg, layer="route"))[0]
    fig = demo_figures["transverse 1"]  # chainage 130 m: the houses of the street either side of the water main
    (ax,) = geometry_panels(fig)
    labels = {t.get_text().split("\n")[0]: t.get_position()[0] for t in ax.texts if "\ncat." in t.get_text()}
    x0, y0, _ = axis.at(130.0)
    t = axis.direction(130.0)
    buildings = gpd.read_file(gpkg, layer="buildings").set_index("id")
    line = shapely.LineString([(x0 - 40 * t[1], y0 + 40 * t[0]), (x0 + 40 * t[1], y0 - 40 * t[0])])
    sides = set()
    for bid, x_drawn in labels.items():
        piece = buildings.geometry[bid].intersection(line)
        p = piece.interpolate(0.5, normalized=True)
        left = t[0] * (p.y - y0) - t[1] * (p.x - x0) > 0
        assert (x_drawn < 0) == left, (bid, x_drawn)
        sides.add(left)
    assert sides == {True, False}  # buildings on both sides were checked
    for ax in fig.axes:
        if ax.get_xlabel():
            assert "left \u2212 / right +" in ax.get_xlabel() and "looking" in ax.get_xlabel()


def test_the_monitoring_figure_draws_left_negative_and_leaves_the_data():
    section = monitored_section()
    offsets = section.offset_m.copy()
    fig = monitoring_figures.section_figure(section)
    ax = fig.axes[0]
    (points,) = [line for line in ax.lines if line.get_label() == "latest reading"]
    assert list(points.get_xdata()) == [-5.0, 0.0, 5.0]  # L5 (5 m left) drawn at -5
    left = next(t for t in ax.texts if t.get_text() == "L5")
    assert left.xy[0] == -5.0
    (design,) = [line for line in ax.lines if line.get_label().startswith("design")]
    assert design.get_xdata()[np.argmax(design.get_ydata())] == pytest.approx(-2.0)  # deepest 2 m left
    assert "left \u2212 / right +" in ax.get_xlabel()
    np.testing.assert_array_equal(section.offset_m, offsets)  # the data are not changed
    plt.close(fig)


def test_the_demo_trough_is_drawn_out_to_the_grid_threshold(demo):
    # At chainage 296 m on the water main (under the brook) the section used to stop at +-5 m, where the settlement
    # is still 0.5 to 0.6 mm (grid nodes there), because a place with one of its four nodes missing was a gap.
    gpkg, summary, _ = demo
    threshold = summary["grid"]["threshold_mm"]
    names = figures.layer_names(gpkg)
    axis = figures.drive_axes(gpd.read_file(gpkg, layer="route"))[0]
    sec = figures.transverse_section(gpkg, names, axis, 296.0, 1.0, None, threshold_mm=threshold)
    drawn = np.isfinite(sec.settlement_mm)
    assert sec.fade_m[0] <= -5.5 and sec.fade_m[1] >= 5.5
    ends = sec.settlement_mm[drawn][[0, -1]]
    assert np.all(ends < 2 * threshold)  # drawn down to near the threshold on both sides
    assert sec.half_width_m >= max(-sec.fade_m[0], sec.fade_m[1]) + 2.0  # with a margin
    # The figure draws the trough over that whole range.
    fig = figures.transverse_sections_figure(gpkg, summary, axis.name, [296.0])
    (mid,) = [ax for ax in fig.axes if ax.get_ylabel().startswith("settlement")]
    x = mid.lines[0].get_xdata()[np.isfinite(mid.lines[0].get_ydata())]
    assert (x.min(), x.max()) == (sec.fade_m[0], sec.fade_m[1])
    assert mid.get_xlim()[0] < sec.fade_m[0] and mid.get_xlim()[1] > sec.fade_m[1]
    plt.close(fig)


@pytest.fixture(scope="module")
def wide(tmp_path_factory):
    """One straight level drive due east (axis 6 m deep, D = 3 m) and reporting points across it at x = 50 m every
    metre out to 25 m either side, beyond where the settlement falls under the 0.1 mm grid threshold."""
    out = tmp_path_factory.mktemp("figures_wide")
    across = [(50.0, float(y)) for y in range(-25, 26)]
    project = builders.project([builders.drive([(0.0, 0.0), (100.0, 0.0)], 4.0)],
                               points=builders.points(across))
    gpkg, result = write_run(project, out)
    return gpkg, result


def test_the_trough_runs_to_where_the_engine_settlement_falls_under_twice_the_threshold(wide):
    # The settlement sampled with missing nodes taken as none is short of the engine's by less than the threshold,
    # so beyond the drawn trough the engine's settlement is under twice the threshold, and every reporting point
    # at or over the threshold lies inside it.
    gpkg, result = wide
    threshold = 0.1  # builders.project's threshold_mm
    names = figures.layer_names(gpkg)
    axis = figures.drive_axes(gpd.read_file(gpkg, layer="route"))[0]
    sec = figures.transverse_section(gpkg, names, axis, 50.0, 1.0, None, threshold_mm=threshold)
    offset = -result.points.y_m  # the drive runs east: right of it (positive) is south
    settlement = result.points.settlement_mm
    beyond = (offset < sec.fade_m[0]) | (offset > sec.fade_m[1])
    assert beyond.any() and np.all(settlement[beyond] < 2 * threshold)
    assert np.all((offset[settlement >= threshold] >= sec.fade_m[0]) & (offset[settlement >= threshold]
                                                                        <= sec.fade_m[1]))


# ---------------------------------------------------------------------------------------------- triggers
def trigger_lines(ax) -> dict[str, float]:
    return {line.get_label(): float(line.get_ydata()[0]) for line in ax.lines if "trigger" in line.get_label()}


def test_trigger_lines_are_drawn_when_levels_are_given(tmp_path):
    fig = monitoring_figures.section_figure(monitored_section(), amber_mm=10.0, red_mm=15.0)
    ax = fig.axes[0]
    assert trigger_lines(ax) == {"amber trigger 10 mm": 10.0, "red trigger 15 mm": 15.0}
    texts = {t.get_text() for t in ax.texts}
    assert {"amber trigger 10 mm", "red trigger 15 mm"} <= texts
    colours = {line.get_label(): line.get_color() for line in ax.lines if "trigger" in line.get_label()}
    assert colours == {"amber trigger 10 mm": monitoring_figures.TRIGGER_LOOKS["amber"][0],
                       "red trigger 15 mm": monitoring_figures.TRIGGER_LOOKS["red"][0]}
    low, high = sorted(ax.get_ylim())
    assert low <= 0.0 and high >= 15.0  # both lines in view
    plt.close(fig)
    png = monitoring_figures.section_png(monitored_section(), tmp_path / "m.png", amber_mm=10.0, red_mm=15.0)
    assert_not_blank(png)


def relative_luminance(colour: str) -> float:
    """WCAG 2.1 relative luminance of an sRGB colour (W3C, Web Content Accessibility Guidelines 2.1, definition of
    "relative luminance")."""
    c = np.array(matplotlib.colors.to_rgb(colour))
    c = np.where(c <= 0.03928, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    return float(c @ [0.2126, 0.7152, 0.0722])


def test_the_two_trigger_lines_differ_without_their_hue():
    # A reader who cannot tell red from amber, or a grey print, still tells the lines apart: by their dashes and by
    # their lightness (WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05) of at least 3, its figure for large text
    # and graphics).
    (amber, amber_dash), (red, red_dash) = (monitoring_figures.TRIGGER_LOOKS[k] for k in ("amber", "red"))
    assert amber_dash != red_dash
    lighter, darker = sorted((relative_luminance(amber), relative_luminance(red)), reverse=True)
    assert (lighter + 0.05) / (darker + 0.05) >= 3.0


def test_heave_readings_add_trigger_lines_below_zero():
    fig = monitoring_figures.section_figure(monitored_section(readings=(-2.0, 3.0, 0.5)), amber_mm=10.0,
                                            red_mm=15.0)
    ax = fig.axes[0]
    levels = sorted(float(line.get_ydata()[0]) for line in ax.lines if line.get_linestyle() != "None"
                    and len(line.get_ydata()) == 2 and line.get_ydata()[0] == line.get_ydata()[1]
                    and line.get_xdata()[0] == 0 and line.get_xdata()[1] == 1)
    assert levels == [-15.0, -10.0, 10.0, 15.0]
    assert {"amber trigger 10 mm (heave)", "red trigger 15 mm (heave)"} <= {t.get_text() for t in ax.texts}
    plt.close(fig)


def test_no_trigger_lines_without_levels_and_bad_levels_are_input_errors():
    fig = monitoring_figures.section_figure(monitored_section())
    assert trigger_lines(fig.axes[0]) == {}
    plt.close(fig)
    with pytest.raises(InputError, match=r"red_mm must be more than amber_mm \(10 mm\); got 5"):
        monitoring_figures.section_figure(monitored_section(), amber_mm=10.0, red_mm=5.0)
    with pytest.raises(InputError, match=r"amber_mm must be a trigger level in mm, a number more than 0; got -1"):
        monitoring_figures.section_figure(monitored_section(), amber_mm=-1)
