"""Benchmark (not a test): a 2 km curved, inclined drive on a 1 m grid, GeoPackage included.

    .venv/bin/python -m tests.benchmarks.long_drive [--out DIR]

Prints the time of each step and the peak resident memory of the process, and compares the engine with a plain
evaluation of the closed form (Attewell & Woodman) at the same number of grid nodes for a straight drive.
"""
from __future__ import annotations

import argparse
import resource
import tempfile
import time
from pathlib import Path

import numpy as np

from settle.assessment import Assessment
from settle.inputs.model import Drive, Ground, Layer, Output, Project, Surface
from settle.engine.troughs import excavated_area, straight_tunnel_movements


def curved_project() -> Project:
    """2 km: 500 m straight, a 1000 m left curve of radius 800 m, a 500 m right curve of radius 600 m; 5 m chords."""
    pieces, heading, pos = [], 0.0, np.zeros(2)
    for length, radius in ((500.0, np.inf), (1000.0, 800.0), (500.0, -600.0)):
        s = np.arange(5.0, length + 1e-9, 5.0)
        if np.isinf(radius):
            pts = pos + np.outer(s, [np.cos(heading), np.sin(heading)])
            new_heading = heading
        else:
            a = heading + s / radius
            centre = pos + radius * np.array([-np.sin(heading), np.cos(heading)])
            pts = centre + radius * np.column_stack([np.sin(a), -np.cos(a)])
            new_heading = heading + length / radius
        pieces.append(pts)
        pos, heading = pts[-1], new_heading
    xy = np.vstack([[0.0, 0.0], *pieces]) + [500000.0, 5700000.0]
    chain = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy, axis=0).T))])
    axis = 30.0 - 6.0 - 0.004 * chain + 1.5 * np.sin(chain / 300.0)  # falls 8 m, with undulations
    ground = Ground(Surface(level_m=30.0), 28.0, (
        Layer("sand", 30.0, 19.0, 0.35, "granular"), Layer("clay", 27.0, 19.5, 0.5, "cohesive")))
    drive = Drive("benchmark", xy, axis, "axis", 2.4, 1.5)
    return Project("benchmark", "EPSG:25832", ground, (drive,), Output(1.0, (1.0, 2.0, 5.0, 10.0, 20.0)))


def main():
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--out", help="folder for the GeoPackage (default: a temporary folder)")
    args = parser.parse_args()
    project = curved_project()
    t0 = time.perf_counter()
    a = Assessment(project)
    result = a.result
    t1 = time.perf_counter()
    import gis_out

    layers = gis_out.frames(result)
    t2 = time.perf_counter()
    out = Path(args.out or tempfile.mkdtemp())
    from gis_out.styles import styles_hook

    levels = project.output.contour_levels_mm
    path = gis_out.write_geopackage(out / "benchmark.gpkg", layers, extra=styles_hook(layers, levels))
    t3 = time.perf_counter()
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    n = len(result.grid)
    print(f"drive 2000 m, {result.drives[0].element_count} tunnel elements, grid 1 m")
    print(f"grid nodes >= 0.1 mm: {n}; tiles: {len(result.tiles.settlement_mm)}")
    print(f"engine (route + grid): {t1 - t0:.2f} s  ({a.timings})")
    print(f"layers (contours, frames): {t2 - t1:.2f} s; GeoPackage write with styles: {t3 - t2:.2f} s; "
          f"total {t3 - t0:.2f} s")
    print(f"volume check: lost {result.lost_volume_m3:.3f} m3, trough {result.settlement_volume_m3:.3f} m3")
    print(f"peak resident memory: {peak_mb:.0f} MB; file {path.stat().st_size / 1e6:.1f} MB")

    # Plain closed form at the same nodes: one straight 2 km element over a band of the same number of nodes.
    from settle.engine.field import influence_corners

    corners = influence_corners(a.elements, project.output.precision_mm / 1e3)
    side_a, side_b = corners[:, 1] - corners[:, 0], corners[:, 3] - corners[:, 0]
    pairs = float(np.abs(side_a[:, 0] * side_b[:, 1] - side_a[:, 1] * side_b[:, 0]).sum())
    half = int(np.ceil(n / 2001 / 2))
    x, y = np.meshgrid(np.arange(0.0, 2001.0), np.arange(-half, half + 1.0))
    t4 = time.perf_counter()
    straight_tunnel_movements(x.ravel(), y.ravel(), 2000.0, 0.015 * excavated_area(2.4), 0.4 * 6.0, 6.0)
    t5 = time.perf_counter()
    plain = t5 - t4
    print(f"plain closed form at {x.size} nodes: {plain:.3f} s ({1e9 * plain / x.size:.0f} ns a node)")
    print(f"engine grid step: {pairs:.0f} element-node pairs ({pairs / n:.1f} a reported node), "
          f"{1e9 * a.timings['grid'] / pairs:.0f} ns a pair; {a.timings['grid'] / plain:.0f} x the plain closed form")

    run_folder_overhead(result, out, t3 - t0)


def run_folder_overhead(result, out: Path, whole_run_s: float, repeats: int = 9) -> None:
    """What writing the outputs as one set costs: the lock and the staging folder, run.json, the sha256 of every
    output, the flushes, the commit and the swap, timed inside `RunSet` (medians of `repeats` runs of `write_run`),
    as a share of the whole run. Writing the files themselves costs the same in place or staged."""
    from gis_out import run_set
    from gis_out.run_folder import write_run

    spent: dict[str, float] = {}

    def timed(name, call):
        def wrapper(*args, **kwargs):
            start = time.perf_counter()
            try:
                return call(*args, **kwargs)
            finally:
                spent[name] = spent.get(name, 0.0) + time.perf_counter() - start
        return wrapper

    enter, commit = run_set.RunSet.__enter__, run_set.RunSet.commit
    run_set.RunSet.__enter__, run_set.RunSet.commit = timed("open", enter), timed("commit", commit)
    hashing = run_set.sha256_of
    run_set.sha256_of = timed("sha256", hashing)
    totals, own, hashed = [], [], []
    try:
        for k in range(repeats):
            spent.clear()
            start = time.perf_counter()
            write_run(result, out / f"set-{k}", "bench")
            totals.append(time.perf_counter() - start)
            own.append(spent["open"] + spent["commit"])
            hashed.append(spent["sha256"])
    finally:
        run_set.RunSet.__enter__, run_set.RunSet.commit, run_set.sha256_of = enter, commit, hashing
    own_s = float(np.median(own))
    print(f"outputs as one set: write_run {np.median(totals):.3f} s, of which staging, run.json, sha256 of every "
          f"output ({np.median(hashed) * 1e3:.1f} ms), flushes, commit and swap {own_s * 1e3:.1f} ms = "
          f"{100 * own_s / whole_run_s:.1f} % of the whole run ({whole_run_s:.2f} s; medians of {repeats})")


if __name__ == "__main__":
    main()
