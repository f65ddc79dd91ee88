"""The size guard: estimates that bound real runs from above, limits that refuse a run before it allocates."""
import dataclasses
import re

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st
from shapely.geometry import Polygon, box

from settle.assessments.buildings import interior_points, wall_samples
from settle.cli import main as cli_main
from settle.errors import InputError
from settle.inputs.building_settings import AssessmentOptions
from settle.inputs.face_settings import FaceOptions, LayerStrength
from settle.inputs.footprints import BuildingDefaults, buildings_from_table, footprint_walls
from settle.inputs.project_file import load_project
from settle.inputs.utility_lines import make_utilities
from settle.inputs.utility_settings import UtilityOptions
from settle.procedure import orchestrator
from settle.procedure import resources as r
from settle.procedure.orchestrator import Assessment, run

from . import builders as b
from .test_project import edit, site  # noqa: F401  (site is a fixture)
from .test_project_face import with_strengths

CLAY_STRENGTH = LayerStrength(24.0, 5.0, 50.0, 10.0)


@pytest.fixture
def machine(monkeypatch):
    """This machine as the tests see it: 8000 MB available, so the default limit is 4000 MB."""
    monkeypatch.setattr(r, "available_memory_mb", lambda: 8000.0)


def straight(spacing=1.0, **project_fields):
    """100 m straight drive, axis 10 m deep (builders' clay: K = 0.5, i = 5 m), 3 m bore, VL 1 %."""
    p = b.project([b.drive([[0, 0], [100, 0]], 0.0)], spacing=spacing)
    return dataclasses.replace(p, **project_fields)


def with_output(project, **output_fields):
    """The project with other [output] values."""
    return dataclasses.replace(project, output=dataclasses.replace(project.output, **output_fields))


def check(project):
    a = Assessment(project).route()
    return r.check_run_size(project, a.drives, a.elements)


def refused(project, pattern):
    with pytest.raises(InputError, match=pattern) as caught:
        check(project)
    message = str(caught.value)
    assert "\n" not in message
    return message


def round_value_below(value):
    """The largest of 1, 2, 2.5 and 5 x 10^k below `value`."""
    candidates = [m * 10.0**k for k in range(-8, 8) for m in (1.0, 2.0, 2.5, 5.0)]
    return max(c for c in candidates if c < value * (1 - 1e-9))


def assert_smallest_round_value_fits(message, key, project_at):
    """The value of `key` the message offers fits the limit, and the round value below it does not."""
    fits = float(re.search(rf"an? {key} of ([\d.e-]+) or more fits$", message).group(1))
    check(project_at(fits))
    refused(project_at(round_value_below(fits)), key)


def evaluated_nodes(result):
    """Grid nodes the engine evaluated: every node of a tile that some element reached (settlement > 0 there)."""
    return sum(int(np.count_nonzero(t)) for t in result.tiles.settlement_mm.values())


# ------------------------------------------------------------------------------------------------------- the grid
def test_tiny_grid_spacing_is_refused_with_the_numbers_and_a_spacing_that_fits(machine):
    message = refused(straight(spacing=0.001),
                      r"^project \[output\] grid_spacing_m = 0\.001: the run would need about [\d,]+ MB \(a grid of "
                      r"about [\d.]+ billion nodes\), more than the 4,000 MB limit \(\[output\] memory_limit_mb, "
                      r"default half of this machine's available memory\); a grid_spacing_m of [\d.]+ or more fits$")
    assert_smallest_round_value_fits(message, "grid_spacing_m", lambda h: straight(spacing=h))


def test_the_run_is_refused_before_the_grid_is_built(machine, monkeypatch):
    def no_grid(*args, **kwargs):
        raise AssertionError("the grid was started")

    monkeypatch.setattr(orchestrator, "grid_batches", no_grid)  # the first step of the grid
    with pytest.raises(InputError, match="grid_spacing_m = 0.001"):
        run(straight(spacing=0.001))


def test_the_command_line_exits_2_with_the_one_line(site, machine, capsys):  # noqa: F811
    path = edit(site, "grid_spacing_m = 2.0", "grid_spacing_m = 0.0001")
    assert cli_main(["run", path, "--out", site / "out", "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert re.fullmatch(r"settle: error: project\.toml \[output\] grid_spacing_m = 0\.0001: the run would need .* "
                        r"or more fits", err)
    assert not (site / "out").exists() or not any((site / "out").iterdir())


@pytest.mark.parametrize("drives, spacing", [
    ([b.drive([[0, 0], [100, 0]], 0.0)], 0.5),
    ([b.drive([[0, 0], [100, 0]], 0.0)], 3.0),
    ([b.drive([[0, 0], [100, 0]], 0.0)], 10.0),
    ([b.drive(b.arc(80.0, 90.0, 25), 4.0, vl_pct=1.5)], 1.0),
    ([b.drive([[0, 0], [60, 0], [90, 40]], 2.0, name="A"), b.drive([[0, 30], [120, 30]], 5.0, name="B")], 0.7),
    ([b.drive([[0, 0], [200, 0]], 0.0, face_chainage_m=80.0)], 1.0),
])
def test_the_estimate_bounds_the_grid_of_real_runs_within_its_factor(drives, spacing):
    project = b.project(drives, spacing=spacing)
    a = Assessment(project).route()
    estimate = r.estimate_run_size(project, a.drives, a.elements)
    result = a.result
    nodes = evaluated_nodes(result)
    assert len(result.grid) <= nodes <= estimate.grid_nodes <= r.GRID_NODE_FACTOR * nodes
    assert len(result.tiles.settlement_mm) <= estimate.grid_tiles


def test_a_drive_not_started_needs_no_grid():
    project = b.project([b.drive([[0, 0], [100, 0]], 0.0, face_chainage_m=0.0)], spacing=0.001)
    assert check(project).grid_nodes == 0.0


# ------------------------------------------------------------------------------------------------- contour levels
def test_a_hundred_thousand_contour_levels_are_refused():
    levels = tuple(0.001 * k for k in range(1, 100_001))
    refused(with_output(straight(), contour_levels_mm=levels),
            r"^project \[output\] contour_levels_mm has 100,000 levels, more than the 200 a run contours .*; "
            r"give 200 levels or fewer$")


def test_two_hundred_contour_levels_pass_and_one_more_is_refused(machine):
    levels = tuple(0.1 * k for k in range(1, 202))
    assert check(with_output(straight(), contour_levels_mm=levels[:200])).contour_levels == 200
    refused(with_output(straight(), contour_levels_mm=levels), "has 201 levels")


# ---------------------------------------------------------------------------------------------------- face stations
def test_micrometre_face_station_spacing_is_refused(machine):
    project = straight(strengths=(CLAY_STRENGTH,), face=FaceOptions(face_station_spacing_m=1e-6))
    message = refused(project, r'^project \[face\] face_station_spacing_m = 1e-06: drive "A" would have about 100 '
                               r"million face stations, more than the 1,000,000 a drive may have; a "
                               r"face_station_spacing_m of 0\.0002 or more fits$")
    assert message


def test_face_station_spacing_in_the_project_file_is_refused_by_settle_run(site, machine):  # noqa: F811
    with_strengths(site)
    path = edit(site, "[output]", "[face]\nface_station_spacing_m = 1e-6\n\n[output]")
    with pytest.raises(InputError, match=r"^project\.toml \[face\] face_station_spacing_m = 1e-06: drive \"\w+\" "
                                         r"would have about [\d.]+ million face stations"):
        run(load_project(path))


def test_face_stations_estimate_bounds_the_stations_placed():
    project = straight(spacing=2.0, strengths=(CLAY_STRENGTH,), face=FaceOptions(face_station_spacing_m=0.7))
    a = Assessment(project).route()
    estimate = r.estimate_run_size(project, a.drives, a.elements)
    placed = len(a.face().result.face[0])
    assert placed <= estimate.face_stations["A"] <= placed + 10


def test_face_memory_names_the_station_spacing(machine):
    project = with_output(straight(strengths=(CLAY_STRENGTH,), face=FaceOptions(face_station_spacing_m=0.0002)),
                          memory_limit_mb=3000)
    refused(project, r"^project \[face\] face_station_spacing_m = 0\.0002: the run would need about 5,\d00 MB "
                     r"\(about 500,000 face stations on a drive\), more than the 3,000 MB limit \(\[output\] "
                     r"memory_limit_mb\); a face_station_spacing_m of 0\.0005 or more fits$")


# ------------------------------------------------------------------------------------------------------ the limit
def test_a_small_memory_limit_is_refused_and_a_large_one_passes():
    project = straight(spacing=0.05)
    message = refused(with_output(project, memory_limit_mb=100),
                      r"^project \[output\] memory_limit_mb = 100: the run would need about [\d,]+ MB \(a grid of "
                      r"about [\d.]+ million nodes\), more than the 100 MB limit \(\[output\] memory_limit_mb\); a "
                      r"memory_limit_mb of \d+ or more fits$")
    enough = float(re.search(r"a memory_limit_mb of (\d+)", message).group(1))
    assert check(with_output(project, memory_limit_mb=enough)).total_mb <= enough
    assert check(with_output(straight(spacing=0.002), memory_limit_mb=1e9)).grid_nodes > 1e9


def test_a_limit_the_grid_can_meet_names_the_grid_spacing():
    message = refused(with_output(straight(spacing=0.01), memory_limit_mb=1000),
                      r"^project \[output\] grid_spacing_m = 0\.01: the run would need about [\d,]+ MB \(a grid of "
                      r"about \d+ million nodes\), more than the 1,000 MB limit \(\[output\] memory_limit_mb\); a "
                      r"grid_spacing_m of [\d.]+ or more fits$")
    assert_smallest_round_value_fits(message, "grid_spacing_m",
                                     lambda h: with_output(straight(spacing=h), memory_limit_mb=1000))


def test_default_limit_is_half_the_available_memory(monkeypatch):
    monkeypatch.setattr(r, "available_memory_mb", lambda: 10_000.0)
    assert r.memory_limit(straight()) == (5000.0, "[output] memory_limit_mb, default half of this machine's "
                                                  "available memory")
    assert r.memory_limit(with_output(straight(), memory_limit_mb=700)) == (700.0, "[output] memory_limit_mb")
    monkeypatch.setattr(r, "available_memory_mb", lambda: None)
    assert r.memory_limit(straight())[0] == r.UNKNOWN_MACHINE_LIMIT_MB


def test_available_memory_is_read_from_this_machine():
    available = r.available_memory_mb()
    assert available is None or 0.0 < available < 1e9


def test_the_demo_passes_with_the_default_limit():
    project = load_project(b.DEMO / "ostrey.toml")
    estimate = check(project)
    assert estimate.total_mb <= r.memory_limit(project)[0]
    assert 5_000 < estimate.grid_nodes < 50_000 and estimate.building_places > 0 and estimate.utility_samples > 0
    assert len(estimate.face_stations) == 2


# ------------------------------------------------------------------------------------------------------ the assets
def houses(*polygons):
    frame = pd.DataFrame({"id": [f"H{k}" for k in range(len(polygons))], "height_m": 6.0, "foundation_depth_m": 0.0,
                          "structure": "masonry"})
    return buildings_from_table(list(polygons), frame, BuildingDefaults())


@pytest.mark.parametrize("spacing", [0.3, 1.0, 2.5])
def test_building_places_bound_the_places_sampled(spacing):
    polygons = [box(20, -20, 60, 20), Polygon([(0, 30), (12, 30), (12, 38), (5, 45), (0, 38)]), box(70, 5, 73, 8)]
    buildings = houses(*polygons)
    total, batch = r.building_places(buildings, spacing)
    walls = len(wall_samples(footprint_walls(buildings.polygons))[0])
    interior = len(interior_points(buildings.polygons, spacing)[0])
    assert walls + interior <= total <= 2.0 * (walls + interior)
    assert batch == total  # one batch: fewer places than POINTS_PER_BATCH


def test_tiny_interior_spacing_names_its_key(machine):
    project = straight(buildings=houses(box(20, -20, 60, 20)),
                       building_options=AssessmentOptions(interior_spacing_m=0.001))
    refused(project, r"^project \[buildings\] interior_spacing_m = 0\.001: the run would need about [\d,]+ MB \(about "
                     r"[\d.]+ billion sample places of buildings at once\), .*; an interior_spacing_m of [\d.]+ or "
                     r"more fits$")


def test_utility_samples_bound_the_samples_of_a_real_run():
    pipes = make_utilities(["P0", "P1"], ["cast_iron"] * 2, [np.array([[50.0, -60.0], [50.0, 60.0]]),
                                                             np.array([[-10.0, 8.0], [40.0, 12.0], [110.0, 9.0]])],
                           [1.0, 1.5], [300.0, 150.0], [3.0, np.nan])
    project = straight(spacing=2.0, utilities=pipes, utility_options=UtilityOptions(sample_spacing_m=0.25))
    a = Assessment(project).route()
    estimate = r.estimate_run_size(project, a.drives, a.elements)
    sampled = len(a.utilities().utility_results.profiles.pipe)
    assert sampled <= estimate.utility_samples <= 2.0 * sampled


# ---------------------------------------------------------------------------------------------- never anything else
PIPES = make_utilities(["P0"], ["cast_iron"], [np.array([[50.0, -100.0], [50.0, 100.0]])], [1.0], [300.0], [3.0])


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(spacing=st.floats(1e-300, 1e5), precision=st.floats(1e-12, 0.05), levels=st.integers(1, 400),
       face_spacing=st.floats(1e-300, 1e4), interior=st.floats(1e-300, 1e4), samples=st.floats(1e-300, 0.5),
       limit=st.one_of(st.none(), st.floats(1e-3, 1e12)), geotiff=st.booleans())
@example(spacing=1e-300, precision=1e-12, levels=3, face_spacing=5.0, interior=1.0, samples=0.5, limit=None,
         geotiff=True)
@example(spacing=1e-300, precision=0.001, levels=3, face_spacing=5.0, interior=1e-300, samples=1e-300, limit=100.0,
         geotiff=False)
@example(spacing=1e5, precision=0.05, levels=1, face_spacing=1e4, interior=1e4, samples=0.5, limit=1e-3,
         geotiff=True)
def test_the_check_raises_nothing_but_input_error(machine, spacing, precision, levels, face_spacing, interior, samples,
                                                  limit, geotiff):
    project = straight(strengths=(CLAY_STRENGTH,), face=FaceOptions(face_station_spacing_m=face_spacing),
                       buildings=houses(box(20, -20, 60, 20)),
                       building_options=AssessmentOptions(interior_spacing_m=interior),
                       utilities=PIPES, utility_options=UtilityOptions(sample_spacing_m=samples))
    project = with_output(project, grid_spacing_m=spacing, precision_mm=precision, settlement_geotiff=geotiff,
                          contour_levels_mm=tuple(float(k) for k in range(1, levels + 1)), memory_limit_mb=limit)
    a = Assessment(project).route()
    try:
        estimate = r.check_run_size(project, a.drives, a.elements)
    except InputError as caught:
        assert "\n" not in str(caught) and str(caught).startswith("project [")
    else:
        assert estimate.total_mb <= r.memory_limit(project)[0]
