"""Figures from finished runs: not blank, drawn from the outputs, sampled where they claim, errors for people."""
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
