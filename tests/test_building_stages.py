"""Many construction stages at once: the engine's movements over runs of stages and the building categories at each
stage must be exactly what one stage at a time gives."""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely import Polygon

from settle.assessments.building_stages import stage_categories
from settle.assessments.buildings import assess_buildings
from settle.engine.field import BUILDING_FIELDS, FIELDS, movements_at_points, movements_at_stages
from settle.engine.troughs import straight_tunnel_movements, straight_tunnel_movements_to_faces
from settle.inputs.building_settings import AssessmentOptions
from settle.inputs.construction_settings import Construction
from settle.procedure.envelope import Sequence

from . import builders as b
from .test_buildings import houses

MOVEMENT_NAMES = {"settlement": "settlement_mm", "ux": "ux_mm", "uy": "uy_mm", "exx": "strain_xx_ue",
                  "eyy": "strain_yy_ue", "exy": "strain_xy_ue", "sx": "slope_x", "sy": "slope_y"}


def bent_project(step=1.5):
    """A drive bending through 40 degrees (many short elements) and a straight one across its end, with houses: over
    the bend, an L-shaped one between the drives, one with a basement below the crown, one out of reach."""
    bend = b.arc(60.0, 40.0, 9, start=(0.0, 0.0))
    d1 = b.drive(np.vstack([[-40.0, 0.0], bend]), 4.0, name="Bend", diameter=2.4, vl_pct=2.0)
    d2 = b.drive([(0.0, -25.0), (90.0, -25.0)], 4.5, name="Straight", diameter=2.0, vl_pct=1.5)
    ell = Polygon([(10, -18), (30, -18), (30, -8), (20, -8), (20, -4), (10, -4)])
    square = Polygon([(-20, -4), (-8, -4), (-8, 6), (-20, 6)])
    basement = Polygon([(40, -29), (52, -29), (52, -21), (40, -21)])
    far = Polygon([(0, 80), (10, 80), (10, 90), (0, 90)])
    over_bend = Polygon([(25, 6), (37, 6), (37, 14), (25, 14)])
    buildings = houses(square, ell, basement, far, over_bend, height=7.0, depth=[0.5, 0.0, 5.2, 0.0, 1.0])
    project = b.project([d1, d2], ground_=b.ground(level=10.0))
    return replace(project, buildings=buildings, construction=Construction(None, step))


@pytest.mark.parametrize("options, full", [
    (AssessmentOptions(), False),
    (AssessmentOptions(), True),  # the interior grid at every stage: same categories
    (AssessmentOptions(stiffness_correction="potts_addenbrooke_1997",
                       modification_factors={"m_dr_sag": 0.6, "m_dr_hog": 0.4, "m_eps_ht": 0.3, "m_eps_hc": 0.2}),
     False),
    (AssessmentOptions(screening_slope_limit=1e-5, screening_settlement_limit_mm=0.05), False),
])
def test_each_stage_gets_the_category_assess_buildings_gives_it(options, full):
    project = bent_project()
    sequence = Sequence(project)
    buildings = project.buildings
    n = len(buildings)
    for d in sequence.order:
        first, last = sequence.windows(d, buildings.polygons)
        count = np.maximum(last - first + 1, 0)
        assert count[3] == 0 and count.sum() > 40  # the far house is out of reach of both
        category = stage_categories(buildings, first, count, sequence.stage_range_movements(d), options,
                                    full_check=np.full(n, full))
        assert len(category) == count.sum()
        start = np.cumsum(count) - count
        for k in range(n):
            for j in range(count[k]):
                face = sequence.faces[d][first[k] + j]
                one = assess_buildings(buildings, sequence.stage_movements(d, face), options).category[k]
                assert category[start[k] + j] == one, (d, k, j, face)
    # The basement is below the crown of Straight: not assessed once that drive reaches it.
    first, last = sequence.windows(1, buildings.polygons)
    category = stage_categories(buildings, first, np.maximum(last - first + 1, 0), sequence.stage_range_movements(1))
    start = (np.cumsum(np.maximum(last - first + 1, 0)) - np.maximum(last - first + 1, 0))[2]
    assert category[start + (last[2] - first[2])] == -1


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), d=st.sampled_from([0, 1]), strains=st.booleans())
def test_movements_over_runs_of_stages_are_those_of_each_stage(seed, d, strains):
    # Exact identity: the same elements, cut at the same faces, summed in the same order (to rounding where the
    # stage-wise closed form is evaluated in another order, BUILDING_FIELDS).
    sequence = Sequence(bent_project(step=2.5))
    elements = sequence.drive_elements(d)
    faces = sequence.faces[d]
    rng = np.random.default_rng(seed)
    n = 60
    x, y = rng.uniform(-50.0, 95.0, n), rng.uniform(-35.0, 30.0, n)
    depth = rng.choice([0.0, 1.0, 3.0, 5.5, 6.5], n)  # some at or below a crown
    first = rng.integers(0, len(faces), n)
    count = np.minimum(rng.integers(0, 9, n), len(faces) - first)
    fields = FIELDS if strains else BUILDING_FIELDS
    rows = rng.permutation(int(count.sum()))
    staged = movements_at_stages(elements, sequence.ground, x, y, depth, faces, first, count, d,
                                 precision_m=sequence.precision_m, fields=fields, rows=rows)
    place = np.repeat(np.arange(n), count)
    stage = first[place] + np.arange(len(place)) - np.repeat(np.cumsum(count) - count, count)
    one = movements_at_points(elements, sequence.ground, x[place], y[place], depth[place],
                              precision_m=sequence.precision_m, faces_m=faces[stage], face_drive=d)
    for f in FIELDS:
        got, want = getattr(staged, MOVEMENT_NAMES[f])[rows], getattr(one, MOVEMENT_NAMES[f])
        if f not in fields:
            assert np.isnan(got).all()
            continue
        np.testing.assert_array_equal(np.isnan(got), np.isnan(want))
        scale = np.nanmax(np.abs(want), initial=0.0)
        np.testing.assert_allclose(got, want, rtol=0, atol=1e-12 * max(scale, 1e-30))


@settings(max_examples=60, deadline=None)
@given(u=st.floats(-30.0, 60.0), v=st.floats(-20.0, 20.0), i=st.floats(0.5, 8.0), zr=st.floats(1.0, 20.0),
       lengths=st.lists(st.floats(0.01, 40.0), min_size=1, max_size=6))
def test_the_closed_form_at_several_faces_is_the_closed_form(u, v, i, zr, lengths):
    # Attewell & Woodman (1982) closed form, its two ends' terms taken apart: equal to rounding.
    vs = 0.1
    pair = np.zeros(len(lengths), dtype=int)
    many = straight_tunnel_movements_to_faces([u], [v], [vs], [i], [zr], pair, lengths)
    each = straight_tunnel_movements(np.full(len(lengths), u), v, np.array(lengths), vs, i, zr, strains=False)
    for key, values in many.items():
        np.testing.assert_allclose(values, each[key], rtol=1e-9, atol=1e-15)


def test_the_interior_grid_is_read_where_it_decides_the_screen():
    # A made-up field whose walls pass the slope screen while a dimple inside the footprint fails it at odd stages
    # (k = 1, 3, ...):
    # there the walls' stage 2 category stands, at even stages the building is screened out, as assess_buildings
    # finds with the same field. (The dimple is invisible at the walls, 5 m away, so only the interior sees it.)
    from settle.engine.movements import Movements

    buildings = houses(Polygon([(-5, -5), (5, -5), (5, 5), (-5, 5)]), height=4.0)

    def field(x, y, k):
        trough = 20.0 * np.exp(-x**2 / (2 * 5.0**2))  # settlement [mm] across x, steepest at the walls x = +-5
        dimple = 40.0 * (k % 2) * np.exp(-(x**2 + y**2) / (2 * 0.4**2))
        sx = (-x / 5.0**2 * trough - x / 0.4**2 * dimple) * 1e-3
        sy = (-y / 0.4**2 * dimple) * 1e-3
        zero = np.zeros(len(x))
        return Movements(x, y, zero, trough + dimple, zero, zero, zero, zero, zero, sx, sy)

    def at_stages(x, y, depth, first, count, rows=None):
        place = np.repeat(np.arange(len(x)), count)
        k = first[place] + np.arange(len(place)) - np.repeat(np.cumsum(count) - count, count)
        m = field(x[place], y[place], k)
        if rows is not None:
            order = np.empty(len(rows), dtype=int)
            order[rows] = np.arange(len(rows))
            m = Movements(*(getattr(m, f)[order] for f in m.__dataclass_fields__))
        return m

    walls_tilt = abs(field(np.array([5.0]), np.array([0.0]), 2).slope_x[0])
    options = AssessmentOptions(screening_slope_limit=1.01 * walls_tilt, screening_settlement_limit_mm=1e6)
    category = stage_categories(buildings, np.array([1]), np.array([8]), at_stages, options)
    alone = [assess_buildings(buildings, lambda x, y, depth, k=k: field(x, y, np.full(len(x), k)),
                              options).category[0] for k in range(1, 9)]
    np.testing.assert_array_equal(category, alone)
    assert set(category[1::2]) == {0} and min(category[0::2]) >= 1
