"""The construction envelope: the worst each building and utility sees over every stage of the sequence."""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely import Polygon

from settle.assessments.buildings import assess_buildings
from settle.assessments.utilities import STATUSES, assess_utilities
from settle.engine.field import tilt_bound_at_points
from settle.inputs.construction_settings import Construction
from settle.inputs.utility_lines import make_utilities
from settle.procedure.envelope import (Sequence, building_envelope, screened_at_every_stage, stage_pairs,
                                      utility_envelope)
from settle.procedure.orchestrator import Assessment

from . import builders as b
from .test_buildings import houses


def rectangle(cx, cy, a, c):
    return Polygon([(cx - a / 2, cy - c / 2), (cx + a / 2, cy - c / 2), (cx + a / 2, cy + c / 2),
                    (cx - a / 2, cy + c / 2)])


def two_drive_project(sequence=None, step=None, **kw):
    """Two straight drives 20 m apart, 120 m long, with houses over and between them."""
    d1 = b.drive([(0.0, 0.0), (120.0, 0.0)], 4.0, name="North", diameter=2.4, vl_pct=2.0)
    d2 = b.drive([(0.0, -20.0), (120.0, -20.0)], 4.0, name="South", diameter=2.4, vl_pct=2.0)
    buildings = houses(rectangle(60, 3, 12, 8), rectangle(30, -10, 10, 10), rectangle(90, -22, 14, 6),
                       rectangle(60, 60, 10, 10), height=6.0)
    project = b.project([d1, d2], ground_=b.ground(level=10.0))
    return replace(project, buildings=buildings, construction=Construction(sequence, step), **kw)


def test_the_stage_movements_are_those_of_a_run_with_the_face_there():
    # Equal within the run's precision (precision_mm = 0.001): ahead of the face the stage may keep contributions of
    # the cut element that the run, which never built the rest of it, leaves below precision.
    project = two_drive_project()
    sequence = Sequence(project)
    x, y = np.linspace(20, 100, 41), np.full(41, 2.0)
    for face in (35.0, 61.3, 120.0):
        staged = sequence.stage_movements(0, face)(x, y, np.zeros(41))
        one = replace(project, drives=(replace(project.drives[0], face_chainage_m=face),))
        direct = Assessment(one).movements_at(x, y, np.zeros(41))
        np.testing.assert_allclose(staged.settlement_mm, direct.settlement_mm, rtol=1e-9, atol=1e-3)
        scale = np.abs(direct.strain_xx_ue).max()  # strain there: within 0.1 % of the largest
        np.testing.assert_allclose(staged.strain_xx_ue, direct.strain_xx_ue, rtol=1e-9, atol=1e-3 * scale)


def test_during_the_second_drive_the_first_is_complete():
    project = two_drive_project()
    sequence = Sequence(project)
    x, y = np.array([60.0]), np.array([-20.0])
    start = sequence.stage_movements(1, 0.0)(x, y, np.zeros(1)).settlement_mm  # South not started
    north_alone = Sequence(replace(project, drives=project.drives[:1])).movements(
        Sequence(replace(project, drives=project.drives[:1])).completion_elements())(x, y, np.zeros(1)).settlement_mm
    np.testing.assert_allclose(start, north_alone, rtol=1e-12)
    assert sequence.stage_movements(1, 120.0)(x, y, np.zeros(1)).settlement_mm > 2 * start


def test_the_window_finds_every_stage_that_can_change_an_asset():
    # Brute force: every building at every stage of every drive; the windowed envelope must agree exactly.
    project = two_drive_project(step=2.0)
    sequence = Sequence(project)
    buildings = project.buildings
    envelope = building_envelope(sequence, buildings)
    brute = assess_buildings(buildings, sequence.movements(sequence.completion_elements())).category.copy()
    for d in sequence.order:
        for face in sequence.faces[d]:
            brute = np.maximum(brute, assess_buildings(buildings, sequence.stage_movements(d, face)).category)
    np.testing.assert_array_equal(envelope.worst_category, brute)
    stages = sum(len(f) for f in sequence.faces)
    assert envelope.stages_assessed.max() < stages and envelope.stages_assessed[3] == 1  # the far house: completion


def test_the_envelope_is_never_better_than_completion_and_names_its_stage():
    project = two_drive_project(step=1.0)
    sequence = Sequence(project)
    envelope = building_envelope(sequence, project.buildings)
    completion = assess_buildings(project.buildings, sequence.movements(sequence.completion_elements())).category
    assert np.all(envelope.worst_category >= completion)
    for k in range(len(completion)):
        if envelope.worst_category[k] == completion[k]:  # ties go to completion: no drive, no face
            assert envelope.worst_drive[k] == "" and np.isnan(envelope.worst_face_chainage_m[k])
        else:
            assert envelope.worst_drive[k] in ("North", "South")
            assert 0.0 <= envelope.worst_face_chainage_m[k] <= 120.0


def test_the_sequence_decides_which_drive_is_complete():
    forward, backward = (Sequence(two_drive_project(sequence=s, step=2.0)) for s in (None, ("South", "North")))
    assert forward.order == [0, 1] and backward.order == [1, 0]
    geometries = two_drive_project().buildings.polygons
    # The house between the drives is reached by both: assessed over stages of both drives either way.
    for seq in (forward, backward):
        for d in (0, 1):
            asset, _ = stage_pairs(seq, d, geometries)
            assert 1 in asset and 3 not in asset


def test_default_stage_step_is_a_quarter_of_the_smallest_trough_width():
    sequence = Sequence(two_drive_project())
    i_min = min(float(e.trough_width_m.min()) for e in sequence.elements)
    steps = np.diff(sequence.faces[0])[:-1]
    assert steps.max() == pytest.approx(i_min / 4.0) and steps.max() <= i_min / 4.0 + 1e-12


def test_utility_worst_status_and_utilisation_over_the_sequence():
    project = two_drive_project(step=1.0)
    pipes = make_utilities(["W1", "W2"], ["cast_iron", "pvc"],
                           [np.array([[60.0, -40.0], [60.0, 30.0]]), np.array([[0.0, 8.0], [120.0, 8.0]])],
                           [np.array([1.2, 1.2]), np.array([1.0, 1.0])], [150.0, 110.0],
                           segment_length_m=[3.66, 6.0])
    sequence = Sequence(project)
    envelope = utility_envelope(sequence, pipes)
    completion = assess_utilities(pipes, sequence.movements(sequence.completion_elements()))
    assert np.all(envelope.worst_utilisation >= np.nan_to_num(completion.utilisation) - 1e-12)
    for k, status in enumerate(envelope.worst_status):
        assert STATUSES.index(status) == envelope.worst_status_class[k]
        rank = ["within limits", "near limit", "exceeds"]
        if status in rank and completion.status[k] in rank:
            assert rank.index(status) >= rank.index(completion.status[k])


@settings(max_examples=25, deadline=None)
@given(face=st.floats(0.0, 120.0), x=st.floats(-20.0, 140.0), y=st.floats(-30.0, 30.0), depth=st.floats(0.0, 2.0),
       bend=st.floats(-0.4, 0.4))
def test_the_tilt_bound_holds_at_every_stage(face, x, y, depth, bend):
    # At any face position the ground slope at a place never exceeds tilt_bound_at_points of the complete drives:
    # the screen that spares the envelope its far buildings must never hide a stage.
    xy = np.array([(0.0, 0.0), (60.0, 0.0), (60.0 + 60.0 * np.cos(bend), 60.0 * np.sin(bend))])
    project = b.project([b.drive(xy, 4.0, name="A", diameter=2.4, vl_pct=2.0)], ground_=b.ground(10.0))
    sequence = Sequence(project)
    place = (np.array([x]), np.array([y]), np.array([depth]))
    bound = tilt_bound_at_points(sequence.completion_elements(), sequence.ground, *place,
                                 precision_m=sequence.precision_m)
    tilt = sequence.stage_movements(0, face)(*place).tilt
    assert np.isnan(bound[0]) or tilt[0] <= bound[0] * (1 + 1e-9) + 1e-12


def test_buildings_screened_at_every_stage_are_category_0_at_every_stage():
    project = two_drive_project(step=2.0)
    sequence = Sequence(project)
    screened = screened_at_every_stage(sequence, project.buildings)
    assert screened[3] and not screened[0]  # the far house is spared; the house over North is not
    for d in sequence.order:
        for face in sequence.faces[d][::5]:
            category = assess_buildings(project.buildings, sequence.stage_movements(d, face)).category
            assert np.all(category[screened] == 0)


@pytest.mark.parametrize("text, pattern", [
    ('sequence = ["Cable", "Water"]', r"\[construction\]: sequence names 'Cable', which is not a drive"),
    ('sequence = ["Kiln Yard to Osier Meadow water main"]', r"\[construction\]: sequence leaves out 'Osier Meadow"),
    ("stage_step_m = 0", r"\[construction\]: stage_step_m must be more than 0"),
    ("stage_step_m = 80", r"\[construction\]: stage_step_m must be .*at most 50"),
    ("stage = 1", r'\[construction\]: unknown key "stage"'),
])
def test_construction_keys_are_checked(tmp_path, text, pattern):
    
    from settle.errors import InputError
    from settle.inputs.project_file import load_project

    project = b.demo_copy(tmp_path)
    project.write_text(project.read_text() + f"\n[construction]\n{text}\n")
    with pytest.raises(InputError, match=pattern):
        load_project(project)


def test_the_demo_reads_its_construction_sequence(tmp_path):
    
    from settle.inputs.project_file import load_project

    project = b.demo_copy(tmp_path)
    names = [d.name for d in load_project(project).drives]
    sequence = ", ".join(f'"{n}"' for n in reversed(names))
    project.write_text(project.read_text() + f"\n[construction]\nsequence = [{sequence}]\nstage_step_m = 1.5\n")
    loaded = load_project(project)
    assert loaded.construction == Construction(tuple(reversed(names)), 1.5)
    assert Sequence(loaded).order == [1, 0]
