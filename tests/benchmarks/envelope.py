"""Benchmark: the construction envelope of the buildings against their single-stage assessment.

    .venv/bin/python -m tests.benchmarks.envelope [--buildings N]

The 20,000 buildings of `tests.benchmarks.buildings` along its straight 2 km drive (the engine's movements): the
single-stage assessment at completion, then the worst category of every building over every stage of the drive
(face steps of a quarter of the trough width), timed, with the number of building-stages assessed: once with the
completion results at hand (as a run with no face given has them), once assessing completion as well. Each is timed
`--repeat` times and the best is kept (single runs vary by a quarter on a shared machine).
"""
from __future__ import annotations

import argparse
import time

import numpy as np

from settle.assessments.buildings import assess_buildings
from settle.procedure.envelope import Sequence, building_envelope
from tests.benchmarks.buildings import LENGTH_M, N, bench_project


def best_of(repeat: int, run):
    """The result of `run()` and its shortest time over `repeat` runs. [s]"""
    best = np.inf
    for _ in range(max(1, repeat)):
        t0 = time.perf_counter()
        result = run()
        best = min(best, time.perf_counter() - t0)
    return result, best


def main():
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--buildings", type=int, default=N)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    n = args.buildings
    project = bench_project(n)
    buildings = project.buildings
    t0 = time.perf_counter()
    sequence = Sequence(project)
    t1 = time.perf_counter()
    single, t_single = best_of(args.repeat, lambda: assess_buildings(
        buildings, sequence.movements(sequence.completion_elements())))
    envelope, t_envelope = best_of(args.repeat, lambda: building_envelope(sequence, buildings, completion=single))
    again, t_alone = best_of(args.repeat, lambda: building_envelope(sequence, buildings))
    assert np.array_equal(again.worst_category, envelope.worst_category)
    stages = len(sequence.faces[0])
    print(f"{n} buildings, a {LENGTH_M:.0f} m drive in {stages} stages of {sequence.faces[0][1]:.3f} m")
    print(f"sequence (complete route and elements): {t1 - t0:.2f} s")
    print(f"single-stage assessment: {t_single:.2f} s; envelope over every stage: {t_envelope:.2f} s "
          f"= {t_envelope / t_single:.1f} x (best of {args.repeat}; the run's case with no face given, completion "
          f"at hand); {t_alone:.2f} s = {t_alone / t_single:.1f} x assessing completion too (a face given); "
          f"building-stages assessed {int(envelope.stages_assessed.sum())} (stages x buildings would be "
          f"{stages * n})")
    worse = envelope.worst_category > single.category
    print(f"categories at completion {np.bincount(single.category[single.category >= 0], minlength=5)}; "
          f"worst over the stages {np.bincount(envelope.worst_category[envelope.worst_category >= 0], minlength=5)};"
          f" {int(worse.sum())} buildings worse during the drive than at completion")


if __name__ == "__main__":
    main()
