"""Benchmark (not a test): the probabilistic run on the 20,000 buildings of `tests.benchmarks.buildings`.

    .venv/bin/python -m tests.benchmarks.probability [--samples 1000] [--repeat 3] [--plain 3] [--nodes-check]

The straight 2 km drive of the building benchmark (VL 2 %, K 0.5, z0 5 m, D 2.4 m) with a lognormal volume loss
(median 2 %, cov 0.3) and a normal K (mean 0.5, sd 0.08, truncated to 0.1-1.5), `--samples` samples. Prints:

- the fast path (`ProbabilisticRun.buildings`: exact in volume loss, K between 16 nodes), best of `--repeat` runs
  (single runs vary by a quarter or more on a shared machine), and the settlement percentiles at the design grid's
  nodes;
- the plain loop (`plain_loop`: the ordinary assessment at every sample) on `--plain` samples, its time per sample
  and that time scaled to all the samples; on those samples, how many building categories the fast path gives
  differently (the cost of discretising K);
- with `--nodes-check`, the fast path again with 8 and with 32 nodes of K, and with 16 strata held at their medians
  (no interpolation), and how far the probabilities move from the default.
"""
from __future__ import annotations

import argparse

import numpy as np

from settle.engine.field import settlement_grid
from settle.inputs.uncertainty_settings import (DriveUncertainty, ProjectUncertainty, TroughWidthDistribution,
                                                UncertaintySettings, VolumeLossDistribution)
from settle.procedure.probability import DEFAULT_K_NODES, ProbabilisticRun, plain_loop
from tests.benchmarks.buildings import K, N, VOLUME_LOSS_PCT, bench_project
from tests.benchmarks.envelope import best_of


def bench_uncertainty(samples: int, seed: int = 0) -> ProjectUncertainty:
    return ProjectUncertainty(UncertaintySettings(samples=samples, seed=seed), (DriveUncertainty(
        "bench", VolumeLossDistribution("lognormal", median_pct=VOLUME_LOSS_PCT, cov=0.3),
        TroughWidthDistribution("normal", mean=K, sd=0.08)),))


def main():
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--buildings", type=int, default=N)
    parser.add_argument("--samples", type=int, default=1000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--plain", type=int, default=3, help="samples of the plain loop")
    parser.add_argument("--nodes-check", action="store_true", help="also run with 8 and 32 nodes and 16 strata of K")
    args = parser.parse_args()
    project = bench_project(args.buildings)
    uncertainty = bench_uncertainty(args.samples)

    def fast(nodes=DEFAULT_K_NODES, interpolate=True):
        run = ProbabilisticRun(project, uncertainty, k_nodes=nodes, interpolate_k=interpolate)
        return run, run.buildings()

    (run, probs), t_fast = best_of(args.repeat, fast)
    p2 = probs.prob_category_ge_2
    print(f"{args.buildings} buildings, {args.samples} samples, {DEFAULT_K_NODES} nodes of K: fast path "
          f"{t_fast:.1f} s (best of {args.repeat})")
    print(f"  P(category >= 2) above 1 %: {int(np.sum(p2 > 0.01))}, above 10 %: {int(np.sum(p2 > 0.1))}, above 50 %: "
          f"{int(np.sum(p2 > 0.5))}; buildings reached {int(np.sum(probs.evaluation != 'not reached'))}")
    print(f"  driven by: {dict(zip(*np.unique(probs.driven_by[probs.driven_by != ''], return_counts=True)))}")

    grid, _, _ = settlement_grid(run.elements, project.output.grid_spacing_m, run.precision_m,
                                 project.output.grid_threshold_mm)
    nodes, t_nodes = best_of(1, lambda: run.settlement_percentiles(grid.x_m, grid.y_m))
    print(f"settlement percentiles at {len(grid)} grid nodes: {t_nodes:.1f} s; largest p50 {np.max(nodes.at(50)):.2f} "
          f"mm, p95 {np.max(nodes.at(95)):.2f} mm (design {np.max(grid.settlement_mm):.2f} mm)")

    if args.plain > 0:
        picks = np.linspace(0, args.samples - 1, args.plain).round().astype(int)
        plain = plain_loop(run, picks)
        per = plain.seconds / len(picks)
        print(f"plain loop: {per:.1f} s a sample on {len(picks)} samples; scaled to {args.samples} samples: "
              f"{per * args.samples:.0f} s = {per * args.samples / t_fast:.0f} x the fast path")
        fast_categories = _categories_of(run, picks)
        differ = fast_categories != plain.categories
        print(f"  on those samples the fast path's category differs for {int(differ.sum())} of {differ.size} "
              f"building-samples ({int(differ.any(axis=1).sum())} buildings), by at most "
              f"{int(np.abs(fast_categories - plain.categories).max())}")

    if args.nodes_check:
        for nodes, interpolate, words in ((8, True, "8 nodes"), (32, True, "32 nodes"),
                                          (DEFAULT_K_NODES, False, f"{DEFAULT_K_NODES} strata at medians")):
            (_, other), t_other = best_of(1, lambda: fast(nodes, interpolate))
            change = np.abs(np.stack([other.prob_category_ge(k) - probs.prob_category_ge(k) for k in (1, 2, 3, 4)]))
            reached = probs.evaluation != "not reached"
            print(f"{words}: {t_other:.1f} s; change of P(category >= k) from the default: largest "
                  f"{np.nanmax(change):.4f}, mean over reached buildings {np.nanmean(change[:, reached]):.4f}, "
                  f"buildings changed by more than 0.03: {int(np.sum(np.nanmax(change, axis=0) > 0.03))} "
                  f"(standard error at p = 0.5: {0.5 / np.sqrt(args.samples):.4f})")


def _categories_of(run: ProbabilisticRun, picks: np.ndarray) -> np.ndarray:
    """The fast path's categories of every building at the samples `picks` (the whole table is held only for
    those samples)."""
    return run.building_categories()[:, picks]


if __name__ == "__main__":
    main()
