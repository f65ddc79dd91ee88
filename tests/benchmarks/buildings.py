"""Benchmark (not a test): 20,000 rectangular buildings of varied size and orientation along a 2 km drive.

    .venv/bin/python -m tests.benchmarks.buildings

Prints the time of the building assessment (stage 1 and stage 2, walls, sampling, parts) with two greenfield
callables: the closed form of a straight drive (so the time is the assessment's own), and the engine's
`settle.engine.field.movements_at_points` on the same drive built by `settle.assessment.Assessment`. Then, for a
sample of CURVED_SAMPLE buildings along the 2 km curved drive of `tests.benchmarks.long_drive`, the time with the
engine's callable, and the same scaled to 20,000 buildings: `movements_at_points` evaluates every tunnel element at
every point, so there the callable, not the assessment, sets the time.
"""
from __future__ import annotations

import time

import numpy as np
import pandas as pd
import shapely

from settle.assessment import Assessment
from settle.assessments.building_tables import building_columns, category_counts, report_rows, wall_columns
from settle.assessments.buildings import assess_buildings
from settle.engine.field import movements_at_points
from settle.engine.movements import Movements
from settle.engine.troughs import excavated_area, straight_tunnel_movements
from settle.inputs.footprints import BuildingDefaults, buildings_from_table
from settle.inputs.model import Drive, Ground, Layer, Output, Project, Surface

N = 20_000
CURVED_SAMPLE = 300
LENGTH_M = 2000.0
AXIS_DEPTH_M = 5.0
DIAMETER_M = 2.4
VOLUME_LOSS_PCT = 2.0
K = 0.5


def rectangles(n: int, seed: int = 7, axis_xy=None):
    """n rectangles 5-30 m by 5-15 m, any orientation, centres within 80 m of the drive: y = 0, 0 <= x <= 2 km,
    or the polyline `axis_xy` (centres offset across it)."""
    rng = np.random.default_rng(seed)
    cx, cy = rng.uniform(0.0, LENGTH_M, n), rng.uniform(-80.0, 80.0, n)
    if axis_xy is not None:
        seg = np.diff(axis_xy, axis=0)
        s = np.r_[0.0, np.cumsum(np.hypot(*seg.T))]
        k = np.clip(np.searchsorted(s, cx * s[-1] / LENGTH_M) - 1, 0, len(seg) - 1)
        unit = seg[k] / np.hypot(*seg[k].T)[:, None]
        base = axis_xy[k] + unit * (cx * s[-1] / LENGTH_M - s[k])[:, None]
        cx, cy = base[:, 0] - unit[:, 1] * cy, base[:, 1] + unit[:, 0] * cy
    a, b = rng.uniform(5.0, 30.0, n), rng.uniform(5.0, 15.0, n)
    t = rng.uniform(0.0, np.pi, n)
    corners = np.array([[-1, -1], [1, -1], [1, 1], [-1, 1]]) / 2.0
    u = corners[None, :, 0] * a[:, None]
    v = corners[None, :, 1] * b[:, None]
    x = cx[:, None] + u * np.cos(t)[:, None] - v * np.sin(t)[:, None]
    y = cy[:, None] + u * np.sin(t)[:, None] + v * np.cos(t)[:, None]
    return shapely.polygons(np.stack([x, y], axis=2)), rng.uniform(3.0, 15.0, n)


def closed_form(x, y, depth):
    """Greenfield movements of the straight drive at the surface (Attewell & Woodman closed form)."""
    m = straight_tunnel_movements(x, y, LENGTH_M, VOLUME_LOSS_PCT / 100 * excavated_area(DIAMETER_M),
                                  K * AXIS_DEPTH_M, AXIS_DEPTH_M)
    zero = np.zeros(len(x))
    return Movements(x, y, depth, m["settlement"] * 1e3, m["du"] * 1e3, m["dv"] * 1e3, zero, zero, zero,
                     m["slope_u"], m["slope_v"])


def main():
    polygons, height = rectangles(N)
    attrs = pd.DataFrame({"id": [f"B{k}" for k in range(N)], "height_m": height})
    t0 = time.perf_counter()
    buildings = buildings_from_table(polygons, attrs, BuildingDefaults(default_foundation_depth_m=0.0,
                                                                       default_structure="masonry"))
    t1 = time.perf_counter()
    print(f"{N} buildings checked and tabled: {t1 - t0:.2f} s")

    calls = {"points": 0, "seconds": 0.0}

    def counted(fn):
        def wrapped(x, y, depth):
            t = time.perf_counter()
            out = fn(x, y, depth)
            calls["points"] += len(x)
            calls["seconds"] += time.perf_counter() - t
            return out
        return wrapped

    small = buildings_from_table(polygons[:200], attrs[:200], BuildingDefaults(default_foundation_depth_m=0.0,
                                                                               default_structure="masonry"))
    assess_buildings(small, closed_form)  # warm-up
    t2 = time.perf_counter()
    result = assess_buildings(buildings, counted(closed_form))
    t3 = time.perf_counter()
    print(f"assessment with the closed-form field: {t3 - t2:.2f} s, of which {calls['seconds']:.2f} s in the "
          f"movements callable ({calls['points']} points)")
    print(f"  {category_counts(buildings, result)['by_category']}, screened out "
          f"{int(result.screened_out.sum())}, walls assessed {int((result.wall_governing_part >= 0).sum())}")

    t6 = time.perf_counter()
    cols, walls, rows = building_columns(buildings, result), wall_columns(buildings, result), report_rows(buildings,
                                                                                                          result)
    t7 = time.perf_counter()
    print(f"output columns ({len(cols['id'])} buildings, {len(walls['wall'])} walls) and {len(rows)} CSV rows: "
          f"{t7 - t6:.2f} s")

    ground = Ground(Surface(level_m=10.0), 8.0, (Layer("clay", 10.0, 19.0, K, "cohesive"),))
    drive = Drive("bench", np.array([[0.0, 0.0], [LENGTH_M, 0.0]]), np.array([10.0 - AXIS_DEPTH_M] * 2), "axis",
                  DIAMETER_M, VOLUME_LOSS_PCT)
    a = Assessment(Project("bench", "EPSG:25832", ground, (drive,), Output(1.0, (1.0,)))).route()
    calls.update(points=0, seconds=0.0)
    t4 = time.perf_counter()
    engine = assess_buildings(buildings, counted(lambda x, y, d: movements_at_points(a.elements, a.ground, x, y, d)))
    t5 = time.perf_counter()
    print(f"assessment with the engine's movements_at_points ({len(a.elements)} element): {t5 - t4:.2f} s, of which "
          f"{calls['seconds']:.2f} s in the movements callable")
    same = np.array_equal(engine.category, result.category)
    print(f"  categories identical to the closed-form run: {same}")

    from tests.benchmarks.long_drive import curved_project

    project = curved_project()
    a = Assessment(project).route()
    polygons, height = rectangles(CURVED_SAMPLE, seed=11, axis_xy=project.drives[0].alignment_xy)
    sample = buildings_from_table(polygons, pd.DataFrame({"id": [f"C{k}" for k in range(CURVED_SAMPLE)],
                                                          "height_m": height}),
                                  BuildingDefaults(default_foundation_depth_m=0.0, default_structure="masonry"))
    calls.update(points=0, seconds=0.0)
    t8 = time.perf_counter()
    curved = assess_buildings(sample, counted(lambda x, y, d: movements_at_points(a.elements, a.ground, x, y, d)))
    t9 = time.perf_counter()
    own = t9 - t8 - calls["seconds"]
    print(f"curved 2 km drive ({len(a.elements)} elements), {CURVED_SAMPLE} buildings: {t9 - t8:.2f} s, of which "
          f"{calls['seconds']:.2f} s in movements_at_points ({calls['points']} points, "
          f"{1e6 * calls['seconds'] / calls['points']:.0f} us a point); categories "
          f"{category_counts(sample, curved)['by_category']}")
    print(f"  scaled to {N} buildings: about {(t9 - t8) * N / CURVED_SAMPLE:.0f} s, of which "
          f"{own * N / CURVED_SAMPLE:.1f} s outside the callable")


if __name__ == "__main__":
    main()


def bench_project(n: int = N):
    """The benchmark as a project: n buildings along the straight drive, in clay of K = 0.5 (the engine's movements).
    """
    from settle.inputs.model import Drive, Ground, Layer, Output, Project, Surface

    polygons, height = rectangles(n)
    buildings = buildings_from_table(polygons, pd.DataFrame({"id": [f"B{k}" for k in range(n)], "height_m": height}),
                                     BuildingDefaults(default_foundation_depth_m=0.0, default_structure="masonry"))
    ground = Ground(Surface(level_m=10.0), 8.0, (Layer("clay", 10.0, 19.0, K, "cohesive"),))
    drive = Drive("bench", np.array([[0.0, 0.0], [LENGTH_M, 0.0]]), np.array([10.0 - AXIS_DEPTH_M] * 2), "axis",
                  DIAMETER_M, VOLUME_LOSS_PCT)
    return Project("bench", "EPSG:25832", ground, (drive,), Output(1.0, (1.0,)), buildings=buildings)
