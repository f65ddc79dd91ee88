"""Benchmark: the construction envelope of the buildings against their single-stage assessment.

    .venv/bin/python -m tests.benchmarks.envelope [--buildings N]

The 20,000 buildings of `tests.benchmarks.buildings` along its straight 2 km drive (the engine's movements): the
single-stage assessment at completion, then the worst category of every building over every stage of the drive
(face steps of a quarter of the trough width), timed, with the number of building-stages assessed.
"""
from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd

from settle.assessments.buildings import assess_buildings
from settle.inputs.footprints import BuildingDefaults, buildings_from_table
from settle.inputs.model import Drive, Ground, Layer, Output, Project, Surface
from settle.procedure.envelope import Sequence, building_envelope
from tests.benchmarks.buildings import AXIS_DEPTH_M, DIAMETER_M, K, LENGTH_M, N, VOLUME_LOSS_PCT, rectangles


def main():
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--buildings", type=int, default=N)
    n = parser.parse_args().buildings
    polygons, height = rectangles(n)
    buildings = buildings_from_table(polygons, pd.DataFrame({"id": [f"B{k}" for k in range(n)], "height_m": height}),
                                     BuildingDefaults(default_foundation_depth_m=0.0, default_structure="masonry"))
    ground = Ground(Surface(level_m=10.0), 8.0, (Layer("clay", 10.0, 19.0, K, "cohesive"),))
    drive = Drive("bench", np.array([[0.0, 0.0], [LENGTH_M, 0.0]]), np.array([10.0 - AXIS_DEPTH_M] * 2), "axis",
                  DIAMETER_M, VOLUME_LOSS_PCT)
    project = Project("bench", "EPSG:25832", ground, (drive,), Output(1.0, (1.0,)), buildings=buildings)
    t0 = time.perf_counter()
    sequence = Sequence(project)
    t1 = time.perf_counter()
    single = assess_buildings(buildings, sequence.movements(sequence.completion_elements()))
    t2 = time.perf_counter()
    envelope = building_envelope(sequence, buildings)
    t3 = time.perf_counter()
    stages = len(sequence.faces[0])
    print(f"{n} buildings, a {LENGTH_M:.0f} m drive in {stages} stages of {sequence.faces[0][1]:.3f} m")
    print(f"sequence (complete route and elements): {t1 - t0:.2f} s")
    print(f"single-stage assessment: {t2 - t1:.2f} s; envelope over every stage: {t3 - t2:.2f} s "
          f"= {(t3 - t2) / (t2 - t1):.1f} x; building-stages assessed {int(envelope.stages_assessed.sum())} "
          f"(stages x buildings would be {stages * n})")
    worse = envelope.worst_category > single.category
    print(f"categories at completion {np.bincount(single.category[single.category >= 0], minlength=5)}; "
          f"worst over the stages {np.bincount(envelope.worst_category[envelope.worst_category >= 0], minlength=5)};"
          f" {int(worse.sum())} buildings worse during the drive than at completion")


if __name__ == "__main__":
    main()
