"""Benchmark (not a test): a city programme, probabilistic, in one process and on a local Dask cluster.

    .venv/bin/python -m tests.benchmarks.programme [--workers 2] [--drives 10] [--buildings 100000] [--samples 1000]

Ten straight drives of 2 km (z0 5 m, D 2.4 m, VL 2 %, K 0.5 in clay), 400 m apart, each with its own lognormal
volume loss (median 2 %, cov 0.3) and normal K (mean 0.5, sd 0.08), independent of the other drives' (20 inputs);
100 000 rectangular buildings of `tests.benchmarks.buildings` shared evenly between the drives; 1000 samples.
Each mode runs in a fresh process (`settle.procedure.orchestrator.run`: route, grid, buildings, envelope over the
construction sequence, probabilities), so its peak memory is its own. Prints, for one process and for
`--workers N`, the wall time, the peak resident memory of the main process, and of each worker (VmHWM, as
`getrusage` gives it), and checks that both modes give the same categories and probabilities.
"""
from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time

import numpy as np
import pandas as pd

SPACING_M = 400.0


def programme(drives: int, buildings: int, samples: int):
    """The programme as a project, built in memory."""
    from settle.inputs.footprints import BuildingDefaults, buildings_from_table
    from settle.inputs.model import Drive, Ground, Layer, Output, Project, Surface
    from settle.inputs.uncertainty_settings import (DriveUncertainty, ProjectUncertainty, TroughWidthDistribution,
                                                    UncertaintySettings, VolumeLossDistribution)
    from tests.benchmarks.buildings import AXIS_DEPTH_M, DIAMETER_M, K, LENGTH_M, VOLUME_LOSS_PCT, rectangles

    per = buildings // drives
    polygons, heights = [], []
    for d in range(drives):
        p, h = rectangles(per, seed=100 + d)
        polygons.append(np.array([shift(g, d * SPACING_M) for g in p], dtype=object))
        heights.append(h)
    polygons, heights = np.concatenate(polygons), np.concatenate(heights)
    table = pd.DataFrame({"id": [f"B{k}" for k in range(len(polygons))], "height_m": heights})
    assets = buildings_from_table(polygons, table, BuildingDefaults(default_foundation_depth_m=0.0,
                                                                    default_structure="masonry"))
    ground = Ground(Surface(level_m=10.0), 8.0, (Layer("clay", 10.0, 19.0, K, "cohesive"),))
    names = [f"D{d + 1:02d}" for d in range(drives)]
    routes = tuple(Drive(name, np.array([[0.0, d * SPACING_M], [LENGTH_M, d * SPACING_M]]),
                         np.array([10.0 - AXIS_DEPTH_M] * 2), "axis", DIAMETER_M, VOLUME_LOSS_PCT)
                   for d, name in enumerate(names))
    uncertainty = ProjectUncertainty(UncertaintySettings(samples=samples, seed=0), tuple(
        DriveUncertainty(name, VolumeLossDistribution("lognormal", median_pct=VOLUME_LOSS_PCT, cov=0.3),
                         TroughWidthDistribution("normal", mean=K, sd=0.08)) for name in names))
    return Project("programme", "EPSG:25832", ground, routes, Output(1.0, (1.0, 10.0)), buildings=assets,
                   uncertainty=uncertainty)


def shift(polygon, dy: float):
    import shapely

    return shapely.transform(polygon, lambda xy: xy + np.array([0.0, dy]))


def _peak_mb() -> float:
    """This process's peak resident memory. [MB]"""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def one_mode(args) -> dict:
    """Run the programme once in this process, with `args.workers` worker processes or none; its figures."""
    from settle.procedure.orchestrator import run
    from settle.procedure.workers import Workers

    t0 = time.perf_counter()
    project = programme(args.drives, args.buildings, args.samples)
    built = time.perf_counter() - t0
    t0 = time.perf_counter()
    with Workers(count=args.workers or None) as workers:
        result = run(project, workers=workers)
        seconds = time.perf_counter() - t0
        per_worker = sorted(workers._client.run(_peak_mb).values()) if workers.distributed else []
    p = result.probability["buildings"]
    return {"workers": args.workers, "build_s": round(built, 1), "run_s": round(seconds, 1),
            "timings_s": {k: round(v, 1) for k, v in result.timings_s.items()},
            "main_peak_mb": round(_peak_mb()), "worker_peak_mb": [round(v) for v in per_worker],
            "categories": np.bincount(result.buildings.category + 1, minlength=6).tolist(),
            "worst": np.bincount(result.building_envelope.worst_category + 1, minlength=6).tolist(),
            "p2_sum": float(np.nansum(p.prob_category_ge_2)), "grid_nodes": int(len(result.grid.x_m)),
            "p95_sum": float(np.nansum(result.probability["grid"].settlement_mm[:, 1]))}


def main():
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--drives", type=int, default=10)
    parser.add_argument("--buildings", type=int, default=100_000)
    parser.add_argument("--samples", type=int, default=1000)
    parser.add_argument("--one", action="store_true", help=argparse.SUPPRESS)  # a single mode, in this process
    args = parser.parse_args()
    if args.one:
        print(json.dumps(one_mode(args)))
        return
    found = []
    for workers in (0, args.workers):
        command = [sys.executable, "-m", "tests.benchmarks.programme", "--one", "--workers", str(workers),
                   "--drives", str(args.drives), "--buildings", str(args.buildings), "--samples", str(args.samples)]
        done = subprocess.run(command, capture_output=True, text=True, check=True)
        found.append(json.loads(done.stdout.strip().splitlines()[-1]))
        mode = f"--workers {workers}" if workers else "one process"
        f = found[-1]
        print(f"{mode:>12}: {f['run_s']:7.1f} s; main process peak {f['main_peak_mb']} MB; "
              f"workers' peaks {f['worker_peak_mb'] or '-'} MB; steps {f['timings_s']}")
    same = all(found[0][k] == found[1][k] for k in ("categories", "worst", "p2_sum", "grid_nodes", "p95_sum"))
    print(f"{args.drives} drives, {args.buildings} buildings, {args.samples} samples; categories "
          f"{found[0]['categories']}; worst over the sequence {found[0]['worst']}; grid nodes "
          f"{found[0]['grid_nodes']}; same numbers in both modes: {same}")


if __name__ == "__main__":
    main()
