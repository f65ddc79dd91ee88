"""The probabilistic run: the probability of each damage category and utility status when the volume loss and the
trough width factor K of the drives are uncertain.

    run = ProbabilisticRun(project, uncertainty)     # samples drawn, drives routed
    buildings = run.buildings()                      # BuildingProbabilities
    utilities = run.utilities()                      # UtilityProbabilities
    nodes = run.settlement_percentiles(x, y)         # 50th and 95th percentile settlement at places
    summary = run.summary(buildings, utilities)

Inputs and sampling (`draw_samples`). Each drive may have a distribution of its volume loss and of its K
(`settle.inputs.uncertainty_settings`). The uncertain inputs are sampled together by a scrambled Sobol sequence
(scipy.stats.qmc.Sobol, seeded by `[uncertainty] seed`; the first `samples` points of a sequence of 2^m points), one
dimension per input, and turned into values by each distribution's inverse CDF. With `drives_correlated` every drive
takes the same uniform for its volume loss, and the same for its K; otherwise each drive has its own. A sample gives
each drive a volume-loss ratio r = VL_sample / VL_design (VL_design = the drive's `volume_loss_pct`) that also scales
every reach's own volume loss (fully correlated along a drive), and a trough-width ratio q = K_sample / K_design
(K_design = the drive's `trough_width_k` when given, else the distribution's median) that scales every trough width
of the drive, the layers' K and the reaches' own K alike: each element's K becomes clip(K q, 0.1, 1.5), so no
element leaves the range the loader allows (`scaled_elements`). A drive without a distribution keeps r = 1 or q = 1.

The fast path (`ProbabilisticRun.buildings`, `.utilities`). For a given K the movements are linear in the volume loss,
and so are the building and utility demands (`settle.assessments.damage_probability`): the category of a building and
the status of a utility at any r follow from their values at r = 1 through thresholds on r. K changes the shape of
the field, so it is discretised. Each drive with a sampled K is assessed at M = `k_nodes` values of K (DEFAULT_K_NODES
= 16), at equal steps of K from the smallest to the largest K sampled, once per node, at r = 1, with stage 1
screening set aside so that every building that moves gets its stage 2 strain. A sample takes the values at r = 1
(largest settlement and slope and governing tensile strain of a building; utilisation of a pipe) interpolated
linearly in K between the two nodes around its own K, and its category or status then follows from its r: exact in
r, linear in K between nodes. The nodes span every K sampled, so no sample is extrapolated. (With
`interpolate_k=False` the K dimension is cut into M strata of equal probability instead, each sample taking the
values at its stratum's median, the inverse CDF at (j + 1/2)/M: the simpler scheme, kept for comparison.)

Why M = 16, interpolated (measured, tests/benchmarks/probability.py; lognormal VL, median 2 %, cov 0.3; normal K,
mean 0.5, sd 0.08):
- Against the plain loop on the same 128 samples, on 3000 of the benchmark's buildings, the mean |difference| of
  P(category >= k) over the buildings reached was 0.0019 at M = 16 (0.0038 at 8, 0.0140 at 4, 0.0007 at 64; 0.0052
  with 16 strata held at their medians, 0.0083 with 8): an eighth of the standard error of a probability near 0.5
  at 1000 samples. The differences leaned to the safe side (their sum over the buildings was positive at every
  level k at M <= 16), as a chord lies above a demand that falls convexly with K (the settlement above the axis
  falls as 1/K, its slope and the strains faster).
- Against M = 32 on all 20 000 buildings and 1000 samples: mean |difference| 0.0010 at M = 16, 0.0026 at 8; 9 of
  the 6387 buildings reached moved by more than 0.03 at 16 (at most 0.048), 120 at 8. The time grows with M (one
  assessment of the buildings in reach per node): about 18 s at 16 on the benchmark, 9 s at 8, 50 s at 32.
- What remains is mostly the deterministic method's own roughness in K: the stage 2 strain of a building is not
  smooth in K, because its walls are sampled at 0.5 m and a part's end moves by a whole sample as the inflection
  point moves (a saw-tooth of a few per cent), and the governing part can change at some K (a jump, 28 % in one
  benchmark building). The plain loop carries it sample by sample; nodes only follow it as they get closer.

Assets that two or more drives reach see the sum of the drives' fields, each with its own r and K; the thresholds
of one drive do not hold for them. They are assessed per sample, exactly: the ordinary assessment on the sample's
elements (every drive scaled by its own r and its own q, K not discretised), as the plain loop does. A drive reaches
an asset when any of its elements contributes to the movements at the asset at any K node, at the precision of the
run divided by the largest r sampled (so that whatever the plain loop would count at any sample, the fast path counts
too).

Outputs. Per building P(category >= k), k = 1 to 4; per utility P(near limit or exceeds) and P(exceeds); each with its
standard error sqrt(p (1 - p) / n) (`damage_probability.binomial_standard_error`: the plain Monte Carlo value, which
for scrambled Sobol points is conservative as n grows); and the input whose Spearman rank correlation with the asset's
governing strain over the samples is largest in magnitude (`driven_by`), among the inputs of the drives that reach
it. The governing strain is the tensile strain of the governing part of a building (computed whether or not stage 1
would screen it out) and the utilisation of a utility. Settlement percentiles at places come from each drive's
settlement at r = 1 at its K nodes, F_d (interpolated to each sample's K as above), as the sum over drives of r_d F_d
for every sample: no field per sample, and exact in r wherever one or several drives reach.

The plain reference loop (`plain_loop`) runs the ordinary assessments once per sample on the sample's elements (r and
q of each drive, K not discretised); tests and the benchmark check the fast path against it. Scaling the elements is
the same as building the project with the sample's volume losses and K (tests/test_probability.py checks it on a
drive with its own K and reaches).
"""
from __future__ import annotations

import copy
import inspect
import time
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np
import shapely
from scipy.stats import qmc

from ..assessments.building_damage import NOT_ASSESSED
from ..assessments.damage_probability import (CATEGORY_LEVELS, EXCEEDS_CODE, NEAR_CODE, UNAVAILABLE_CODE,
                                              WITHIN_CODE, binomial_standard_error, categories_at_ratio,
                                              exceedance_probabilities, rank_correlations, statuses_at_ratio,
                                              strongest_input)
from ..engine.elements import Elements
from ..engine.field import movements_at_points
from ..inputs.building_settings import AssessmentOptions
from ..inputs.ground import GroundModel
from ..inputs.model import Project
from ..inputs.uncertainty_settings import K_MAX, K_MIN, ProjectUncertainty
from ..inputs.utility_settings import UtilityOptions
from .envelope import reaching_chainage_span, subset_table
from .orchestrator import drives_and_elements

#: K values at which each drive with a sampled K is assessed (our choice; see the module docstring and the benchmark).
DEFAULT_K_NODES = 16
#: Nodes of the percentile contours: those whose design settlement reaches the lowest contour level over this. [-]
TILE_REACH_FACTOR = 10.0
#: Cells (assets or places x samples) per batch of the fast path's arrays: a few arrays of 8 bytes a cell are held at
#: once, so about 32 MB each (bounds memory whatever the number of samples).
CELLS_PER_BATCH = 4_000_000
#: Stage 1 limits that screen out only a building that does not move at all: the fast path needs the stage 2
#: strain of every building that moves, whatever its screening at r = 1.
SCREEN_NOTHING = np.finfo(float).tiny
#: The evaluation of each asset, as `BuildingProbabilities.evaluation` and `UtilityProbabilities.evaluation` say it.
EVALUATIONS = {"scaled": "one drive: scaled by volume loss, K between nodes",
               "per sample": "several drives: assessed at every sample",
               "not reached": "no drive reaches it",
               "not assessed": "not assessed: movements undefined or no allowable value"}


# ------------------------------------------------------------------------------------------------------ samples
@dataclass(frozen=True)
class UncertainInput:
    """One dimension of the sampling: the volume loss or the K of one drive, or of several sharing it."""

    label: str  # e.g. "volume loss of S1-S2", "K of S1-S2, S2-S3 (one draw for all)"
    quantity: str  # "volume_loss" | "trough_width"
    drives: tuple[int, ...]  # indices of the project's drives that use it
    column: int  # its column in Samples.uniforms


@dataclass
class Samples:
    """The samples of a probabilistic run. Per-drive arrays are (drives, samples), in the project's drive order."""

    uniforms: np.ndarray  # (samples, inputs): the scrambled Sobol points, in [0, 1)
    inputs: tuple[UncertainInput, ...]
    volume_loss_pct: np.ndarray  # the drive's volume loss in each sample (its design value where fixed) [%]
    volume_loss_ratio: np.ndarray  # r = VL_sample / VL_design [-]
    trough_width_k: np.ndarray  # K in each sample (K_design where fixed; NaN: from the layers, not sampled) [-]
    trough_width_ratio: np.ndarray  # q = K_sample / K_design [-]
    design_k: np.ndarray  # (drives,) K_design; NaN where K is not sampled and comes from the layers [-]
    design_k_source: tuple[str, ...]  # per drive: where K_design comes from, in words
    trough_width_uniform: np.ndarray  # (drives, samples): the uniform behind each sampled K; NaN where K is fixed
    seed: int
    drives_correlated: bool

    @property
    def count(self) -> int:
        return int(self.uniforms.shape[0])


def sobol_uniforms(dimensions: int, samples: int, seed: int) -> np.ndarray:
    """The first `samples` points of a scrambled Sobol sequence of 2^m >= samples points (scipy.stats.qmc.Sobol).

    Returns
    -------
    (samples, dimensions) ndarray in [0, 1); the same seed gives the same points.
    """
    keyword = "rng" if "rng" in inspect.signature(qmc.Sobol.__init__).parameters else "seed"  # scipy >= 1.15: rng
    engine = qmc.Sobol(d=dimensions, scramble=True, **{keyword: np.random.default_rng(seed)})
    return engine.random_base2(int(np.ceil(np.log2(max(samples, 2)))))[:samples]


def draw_samples(project: Project, uncertainty: ProjectUncertainty) -> Samples:
    """The volume-loss and K ratios of every drive in every sample (see the module docstring).

    Parameters
    ----------
    project : Project                 Its drives give VL_design (`volume_loss_pct`) and K_design (`trough_width_k`).
    uncertainty : ProjectUncertainty  The distributions per drive (by name) and the sampling settings.
    """
    names = [d.name for d in project.drives]
    unknown = [item.drive for item in uncertainty.drives if item.drive not in names]
    if unknown:
        raise ValueError(f"distributions given for {unknown[0]!r}, which is not a drive of the project")
    settings = uncertainty.settings
    dists = [uncertainty.for_drive(name) for name in names]
    inputs = _uncertain_inputs(names, dists, settings.drives_correlated)
    if not inputs:
        raise ValueError("no drive has a volume loss or K distribution: there is nothing to sample")
    u = sobol_uniforms(len(inputs), settings.samples, settings.seed)
    column = {(item.quantity, d): item.column for item in inputs for d in item.drives}
    n, count = len(names), settings.samples
    vl, r = np.empty((n, count)), np.ones((n, count))
    k, q = np.full((n, count), np.nan), np.ones((n, count))
    design_k, source = np.full(n, np.nan), []
    k_uniform = np.full((n, count), np.nan)
    for d, (drive, dist) in enumerate(zip(project.drives, dists)):
        vl[d] = drive.volume_loss_pct
        if dist.volume_loss is not None:
            vl[d] = dist.volume_loss.ppf(u[:, column["volume_loss", d]])
            r[d] = vl[d] / drive.volume_loss_pct
        if dist.trough_width is None:
            design_k[d] = np.nan if drive.trough_width_k is None else drive.trough_width_k
            k[d] = design_k[d]
            source.append("not sampled")
            continue
        given = drive.trough_width_k is not None
        design_k[d] = drive.trough_width_k if given else dist.trough_width.median()
        source.append("trough_width_k of the drive" if given else "median of its distribution")
        k_uniform[d] = u[:, column["trough_width", d]]
        k[d] = dist.trough_width.ppf(k_uniform[d])
        q[d] = k[d] / design_k[d]
    return Samples(uniforms=u, inputs=tuple(inputs), volume_loss_pct=vl, volume_loss_ratio=r, trough_width_k=k,
                   trough_width_ratio=q, design_k=design_k, design_k_source=tuple(source),
                   trough_width_uniform=k_uniform, seed=settings.seed, drives_correlated=settings.drives_correlated)


def _uncertain_inputs(names, dists, correlated: bool) -> list[UncertainInput]:
    """The sampling's dimensions: per drive its volume loss then its K; with `correlated`, one of each for all."""
    words = {"volume_loss": "volume loss", "trough_width": "K"}  # quantity = the DriveUncertainty field
    inputs: list[UncertainInput] = []
    if correlated:
        for quantity in ("volume_loss", "trough_width"):
            users = tuple(d for d, dist in enumerate(dists) if getattr(dist, quantity) is not None)
            if users:
                label = f"{words[quantity]} of {', '.join(names[d] for d in users)}"
                label += " (one draw for all)" if len(users) > 1 else ""
                inputs.append(UncertainInput(label, quantity, users, len(inputs)))
        return inputs
    for d, dist in enumerate(dists):
        for quantity in ("volume_loss", "trough_width"):
            if getattr(dist, quantity) is not None:
                inputs.append(UncertainInput(f"{words[quantity]} of {names[d]}", quantity, (d,), len(inputs)))
    return inputs


def scaled_elements(elements: Elements, volume_ratio, width_ratio) -> Elements:
    """Tunnel elements with each drive's lost volume times r and trough widths times q.

    Parameters
    ----------
    elements : Elements         The design elements (any drives).
    volume_ratio : array_like   r per drive, indexed by `elements.drive`. [-]
    width_ratio : array_like    q per drive, indexed by `elements.drive`. [-]

    Returns
    -------
    Elements  volume_per_m and volume_loss times r; trough_width_k = clip(K q, 0.1, 1.5) and trough_width_m =
              trough_width_k z0 (i = K z0, O'Reilly & New 1982; methods.md section 1). At r = q = 1 the elements
              are unchanged.
    """
    r = np.asarray(volume_ratio, dtype=float)[elements.drive]
    k = np.clip(elements.trough_width_k * np.asarray(width_ratio, dtype=float)[elements.drive], K_MIN, K_MAX)
    return replace(elements, volume_per_m=elements.volume_per_m * r, volume_loss=elements.volume_loss * r,
                   trough_width_k=k, trough_width_m=k * elements.axis_depth_m)


# ------------------------------------------------------------------------------------------------------ results
@dataclass
class BuildingProbabilities:
    """Per building (arrays in the order of `Buildings`): the probability of each damage category level over the
    samples, its standard error, and the input that drives it."""

    ids: tuple[str, ...]
    prob_category_ge_1: np.ndarray  # P(category >= 1) [-]; NaN where not assessed
    prob_category_ge_2: np.ndarray
    prob_category_ge_3: np.ndarray
    prob_category_ge_4: np.ndarray
    prob_category_ge_1_se: np.ndarray  # standard error of each [-]
    prob_category_ge_2_se: np.ndarray
    prob_category_ge_3_se: np.ndarray
    prob_category_ge_4_se: np.ndarray
    driven_by: np.ndarray  # text: label of the input with the largest |Spearman rho|; "" when none
    driven_by_rho: np.ndarray  # that Spearman rank correlation, signed [-]; NaN when none
    reached_by: np.ndarray  # text: the drives that reach the building, comma separated
    evaluation: np.ndarray  # text: a key of EVALUATIONS
    samples: int

    def prob_category_ge(self, k: int) -> np.ndarray:
        return getattr(self, f"prob_category_ge_{k}")

    def columns(self) -> dict[str, np.ndarray]:
        """Every per-building field, by name, for a layer or a table."""
        names = [f"prob_category_ge_{k}" for k in CATEGORY_LEVELS] + \
                [f"prob_category_ge_{k}_se" for k in CATEGORY_LEVELS] + \
                ["driven_by", "driven_by_rho", "reached_by", "evaluation"]
        return {"id": np.array(self.ids, dtype=object), **{n: getattr(self, n) for n in names}}


@dataclass
class UtilityProbabilities:
    """Per utility (arrays in the order of `Utilities`): the probability of each status over the samples."""

    ids: tuple[str, ...]
    prob_near_or_exceeds: np.ndarray  # P(near limit or exceeds) [-]; NaN where not assessed
    prob_exceeds: np.ndarray
    prob_near_or_exceeds_se: np.ndarray
    prob_exceeds_se: np.ndarray
    driven_by: np.ndarray
    driven_by_rho: np.ndarray
    reached_by: np.ndarray
    evaluation: np.ndarray
    samples: int

    def columns(self) -> dict[str, np.ndarray]:
        names = ["prob_near_or_exceeds", "prob_exceeds", "prob_near_or_exceeds_se", "prob_exceeds_se", "driven_by",
                 "driven_by_rho", "reached_by", "evaluation"]
        return {"id": np.array(self.ids, dtype=object), **{n: getattr(self, n) for n in names}}


@dataclass
class SettlementPercentiles:
    """Percentiles of the settlement over the samples at places (arrays of one length)."""

    x_m: np.ndarray
    y_m: np.ndarray
    depth_m: np.ndarray
    percentiles: tuple[float, ...]  # e.g. (50, 95) [%]
    settlement_mm: np.ndarray  # (places, len(percentiles)): linear interpolation between order statistics [mm]

    def at(self, percentile: float) -> np.ndarray:
        """The settlement at one of `percentiles`. [mm]"""
        return self.settlement_mm[:, self.percentiles.index(percentile)]

    def columns(self) -> dict[str, np.ndarray]:
        """x_m, y_m and settlement_p<percentile>_mm for each percentile (e.g. settlement_p95_mm), for a layer."""
        named = {f"settlement_p{p:g}_mm": self.settlement_mm[:, k] for k, p in enumerate(self.percentiles)}
        return {"x_m": self.x_m, "y_m": self.y_m, **named}


@dataclass
class _Levels:
    """Per asset and sample: its level (category or status code) and its governing strain, for a set of assets."""

    assets: np.ndarray  # indices into the whole table
    levels: np.ndarray  # (assets, samples) int
    strain: np.ndarray  # (assets, samples) float


@dataclass
class _Evaluation:
    """What the assessments of one kind of asset at the K nodes found: per drive the assets in its reach with their
    values at r = 1 at its nodes, which drives move each asset, which cannot be assessed, and the limits that turn
    values into levels."""

    unit: list  # per drive: (rows, dict of arrays (rows, nodes) and (rows,))
    moved: np.ndarray  # (assets, drives) bool
    undefined: np.ndarray  # (assets,) bool
    limits: object  # buildings: (slope limit, settlement limit [mm]); utilities: the near-limit fraction
    per_sample: list | None = None  # the per-sample `_Levels` once found, kept when they fit in one batch

    def single_drive_batches(self, samples: int):
        """(d, rows, pick, unit) for batches of assets that drive d alone reaches (CELLS_PER_BATCH / samples at a
        time): `pick` indexes `rows` (the assets in d's reach) and the arrays of `unit`."""
        step = _batch(samples)
        for d, (rows, unit) in enumerate(self.unit):
            own = (self.moved[rows].sum(axis=1) == 1) & self.moved[rows, d] & ~self.undefined[rows]
            local = np.flatnonzero(own)
            for a in range(0, len(local), step):
                yield d, rows, local[a:a + step], unit

    def several_drive_batches(self, samples: int):
        """Batches of the assets (indices) that several drives reach, CELLS_PER_BATCH / samples at a time."""
        several = np.flatnonzero((self.moved.sum(axis=1) >= 2) & ~self.undefined)
        step = _batch(samples)
        for a in range(0, len(several), step):
            yield several[a:a + step]


# --------------------------------------------------------------------------------------------------------- run
class ProbabilisticRun:
    """A probabilistic run of one project at the run's construction stage (its drives' face positions).

    Parameters
    ----------
    project : Project
    uncertainty : ProjectUncertainty, optional  The distributions and settings; default `project.uncertainty`.
    k_nodes : int                               M, the K values at which a drive with a sampled K is assessed.
    interpolate_k : bool                        True: linear in K between nodes spanning the K sampled; False: M
                                                strata of equal probability held at their medians (module docstring).
    progress : callable, optional               progress(stage, fraction), told how far a long step has got.
    """

    def __init__(self, project: Project, uncertainty: ProjectUncertainty | None = None,
                 k_nodes: int = DEFAULT_K_NODES, progress: Callable[[str, float], None] | None = None,
                 interpolate_k: bool = True):
        uncertainty = uncertainty if uncertainty is not None else getattr(project, "uncertainty", None)
        if uncertainty is None:
            raise ValueError("the project has no distributions of volume loss or K: nothing to sample")
        self.project = project
        self.uncertainty = uncertainty
        self.k_nodes = int(k_nodes)
        self.interpolate_k = bool(interpolate_k)
        self.progress = progress or (lambda stage, fraction: None)
        self.ground = GroundModel(project.ground)
        self.warnings: list[str] = []
        self.drives, self.elements = drives_and_elements(project, self.ground, self.warnings)
        self.samples = draw_samples(project, uncertainty)
        self.names = [d.name for d in project.drives]
        self.node_ratios = [self._k_nodes(d) for d in range(len(self.names))]
        self.precision_m = project.output.precision_mm / 1e3
        # r F counts a contribution where the plain loop at r would: F at the precision over the largest r.
        self.unit_precision_m = self.precision_m / max(1.0, float(np.max(self.samples.volume_loss_ratio)))
        self.timings_s: dict[str, float] = {}
        self._evaluations: dict[str, _Evaluation] = {}

    def with_assets(self, buildings=None, utilities=None) -> "ProbabilisticRun":
        """This run (the same samples, elements and K nodes) over other assets: a task's share of the buildings or
        utilities, or none (the light copy sent to workers)."""
        other = copy.copy(self)
        other.project = replace(self.project, buildings=buildings, utilities=utilities, points=None)
        other.timings_s, other._evaluations, other.warnings = {}, {}, []
        return other

    # -------------------------------------------------------------------------------------------- elements
    def unit_elements(self, d: int, width_ratio: float) -> Elements:
        """The elements of drive d at its design volume loss (r = 1), trough widths times `width_ratio`."""
        keep = self.elements.drive == d
        part = self.elements.take(keep)
        q = np.ones(len(self.names))
        q[d] = width_ratio
        return scaled_elements(part, np.ones(len(self.names)), q)

    def sample_elements(self, n: int) -> Elements:
        """Every drive's elements in sample n: each drive's own r and q (K not discretised)."""
        s = self.samples
        return scaled_elements(self.elements, s.volume_loss_ratio[:, n], s.trough_width_ratio[:, n])

    def movements(self, elements: Elements, precision_m: float):
        """movements(x, y, depth) of these elements, as the assessments take it."""
        return lambda x, y, depth: movements_at_points(elements, self.ground, x, y, depth, precision_m=precision_m)

    def _k_nodes(self, d: int) -> np.ndarray:
        """The K ratios q at which drive d is assessed (increasing): [1] when its K is not sampled; else M nodes,
        at equal steps of K from the smallest to the largest K sampled (`interpolate_k`), or at the medians of M
        strata of equal probability (not `interpolate_k`). [-]"""
        dist = self.uncertainty.for_drive(self.names[d]).trough_width
        if dist is None:
            return np.ones(1)
        m = self.k_nodes
        if not self.interpolate_k:
            return dist.ppf((np.arange(m) + 0.5) / m) / self.samples.design_k[d]
        q = self.samples.trough_width_ratio[d]
        if m == 1:
            return np.array([float(np.median(q))])
        return q.min() + (q.max() - q.min()) * np.arange(m) / (m - 1)

    def at_samples(self, d: int, values: np.ndarray) -> np.ndarray:
        """Values of assets at r = 1 given at drive d's K nodes (assets, nodes), taken to every sample's K
        (assets, samples): linear in K between the two nodes around the sample's K (`interpolate_k`), or the value
        at the node of the sample's stratum (not `interpolate_k`)."""
        s = self.samples
        nodes = self.node_ratios[d]
        if len(nodes) == 1:
            return np.repeat(values[:, :1], s.count, axis=1)
        if not self.interpolate_k:
            stratum = np.minimum((s.trough_width_uniform[d] * len(nodes)).astype(int), len(nodes) - 1)
            return values[:, stratum]
        q = s.trough_width_ratio[d]
        lower = np.clip(np.searchsorted(nodes, q, side="right") - 1, 0, len(nodes) - 2)
        gap = nodes[lower + 1] - nodes[lower]
        with np.errstate(invalid="ignore", divide="ignore"):
            w = np.clip(np.where(gap > 0, (q - nodes[lower]) / gap, 0.0), 0.0, 1.0)
        return values[:, lower] * (1.0 - w) + values[:, lower + 1] * w

    def in_reach(self, d: int, geometries) -> np.ndarray:
        """Indices of the geometries that drive d may reach at some K node (bounding boxes against the reach of its
        elements at the widest trough and the fast path's precision; conservative)."""
        widest = self.unit_elements(d, float(np.max(self.node_ratios[d])))
        if len(widest) == 0 or len(geometries) == 0:
            return np.empty(0, dtype=int)
        lo, _ = reaching_chainage_span(widest, widest.reach_radius_m(self.unit_precision_m), geometries)
        return np.flatnonzero(np.isfinite(lo))

    # -------------------------------------------------------------------------------------------- buildings
    def buildings(self) -> BuildingProbabilities | None:
        """P(category >= k) of every building of the project (None without [buildings]); module docstring."""
        if self.project.buildings is None:
            return None
        t0 = time.perf_counter()
        found = self._building_evaluation()
        probabilities, rho, label = self._summarise(found, self._building_level_sets(found), CATEGORY_LEVELS)
        se = binomial_standard_error(probabilities, self.samples.count)
        self.timings_s["buildings"] = time.perf_counter() - t0
        return BuildingProbabilities(
            ids=self.project.buildings.ids,
            **{f"prob_category_ge_{k}": probabilities[:, j] for j, k in enumerate(CATEGORY_LEVELS)},
            **{f"prob_category_ge_{k}_se": se[:, j] for j, k in enumerate(CATEGORY_LEVELS)},
            driven_by=label, driven_by_rho=rho, reached_by=self._reached_text(found.moved),
            evaluation=_evaluation(found.moved, found.undefined), samples=self.samples.count)

    def building_categories(self) -> np.ndarray:
        """(buildings, samples) int: the category of every building in every sample as the fast path finds it (-1
        where not assessed). For checks: it holds every sample of every building at once."""
        found = self._building_evaluation()
        return _level_table(len(self.project.buildings), self.samples.count, self._building_level_sets(found),
                            found.undefined)

    def _building_evaluation(self) -> _Evaluation:
        """Each drive's assessment of the buildings in its reach at its K nodes (computed once per run)."""
        if "buildings" in self._evaluations:
            return self._evaluations["buildings"]
        t0 = time.perf_counter()
        buildings = self.project.buildings
        options = self.project.building_options or AssessmentOptions()
        every_mover = _every_mover(options)
        limits = (options.screening_slope_limit, options.screening_settlement_limit_mm)
        unit = []
        for d in range(len(self.names)):
            self.progress("probability: buildings", d / max(1, len(self.names)))
            rows = self.in_reach(d, buildings.polygons)
            unit.append((rows, self._building_unit_values(d, subset_table(buildings, rows), every_mover)))
        moved, undefined = self._reach_table(len(buildings), [(rows, u["moved"], u["undefined"]) for rows, u in unit])
        found = self._evaluations["buildings"] = _Evaluation(unit, moved, undefined, limits)
        self.timings_s["buildings at the K nodes"] = time.perf_counter() - t0
        return found

    def _building_level_sets(self, found: _Evaluation):
        """The categories of the buildings in every sample, a batch of buildings at a time (`_Levels`): those one
        drive reaches from its values at r = 1 at the K nodes, then those several drives reach, assessed at every
        sample."""
        count = self.samples.count
        for d, rows, pick, unit in found.single_drive_batches(count):
            yield self._scaled_building_levels(d, rows[pick], {k: v[pick] for k, v in unit.items()}, found.limits)
        every_mover = _every_mover(self.project.building_options or AssessmentOptions())
        yield from _kept(found, count, lambda several: self._per_sample_building_levels(
            subset_table(self.project.buildings, several), several, every_mover, found.limits))

    def _building_unit_values(self, d: int, buildings, every_mover: AssessmentOptions) -> dict[str, np.ndarray]:
        """Per building (of this subset) and K node of drive d, at r = 1: the stage 1 maxima and the governing
        tensile strain (0 for a building that does not move), whether it moves and whether it is undefined."""
        from ..assessments.buildings import assess_buildings

        ratios = self.node_ratios[d]
        shape = (len(buildings), len(ratios))
        out = {"settlement": np.zeros(shape), "tilt": np.zeros(shape), "strain": np.zeros(shape)}
        undefined = np.zeros(len(buildings), dtype=bool)
        if len(buildings):
            for m, q in enumerate(ratios):
                res = assess_buildings(buildings, self.movements(self.unit_elements(d, q), self.unit_precision_m),
                                       every_mover)
                out["settlement"][:, m], out["tilt"][:, m] = res.max_settlement_mm, res.max_tilt
                out["strain"][:, m] = np.where(res.screened_out, 0.0, res.tensile_strain_pct)
                undefined |= res.category == NOT_ASSESSED
        moves = (out["settlement"] > 0) | (out["tilt"] > 0)
        out["moved"] = moves.any(axis=1) | undefined
        out["undefined"] = undefined
        return out

    def _scaled_building_levels(self, d: int, assets: np.ndarray, unit: dict, limits) -> _Levels:
        """Categories of buildings that only drive d reaches, in every sample: the values at the sample's K times r."""
        s = self.samples
        r = s.volume_loss_ratio[d][None, :]
        strain = self.at_samples(d, unit["strain"])
        levels = categories_at_ratio(r, self.at_samples(d, unit["settlement"]), self.at_samples(d, unit["tilt"]),
                                     strain, *limits)
        return _Levels(assets, levels, r * strain)

    def _per_sample_building_levels(self, buildings, assets: np.ndarray, every_mover, limits) -> _Levels:
        """Categories of buildings that several drives reach: the ordinary assessment on every sample's elements."""
        from ..assessments.buildings import assess_buildings

        count = self.samples.count
        levels, strain = np.zeros((len(assets), count), dtype=int), np.zeros((len(assets), count))
        for n in range(count):
            self.progress("probability: buildings at every sample", n / count)
            res = assess_buildings(buildings, self.movements(self.sample_elements(n), self.precision_m), every_mover)
            eps = np.where(res.screened_out, 0.0, res.tensile_strain_pct)
            strain[:, n] = eps
            levels[:, n] = categories_at_ratio(1.0, res.max_settlement_mm, res.max_tilt, eps, *limits)
        return _Levels(assets, levels, strain)

    # -------------------------------------------------------------------------------------------- utilities
    def utilities(self) -> UtilityProbabilities | None:
        """P(near limit or exceeds) and P(exceeds) of every utility of the project (None without [utilities])."""
        if self.project.utilities is None:
            return None
        t0 = time.perf_counter()
        found = self._utility_evaluation()
        probabilities, rho, label = self._summarise(found, self._utility_level_sets(found), (NEAR_CODE, EXCEEDS_CODE))
        se = binomial_standard_error(probabilities, self.samples.count)
        self.timings_s["utilities"] = time.perf_counter() - t0
        return UtilityProbabilities(
            ids=self.project.utilities.ids, prob_near_or_exceeds=probabilities[:, 0], prob_exceeds=probabilities[:, 1],
            prob_near_or_exceeds_se=se[:, 0], prob_exceeds_se=se[:, 1], driven_by=label, driven_by_rho=rho,
            reached_by=self._reached_text(found.moved), evaluation=_evaluation(found.moved, found.undefined),
            samples=self.samples.count)

    def utility_status_codes(self) -> np.ndarray:
        """(utilities, samples) int: the status code (`status_codes`) of every pipe in every sample as the fast path
        finds it (-1 where not assessed). For checks: it holds every sample of every pipe at once."""
        found = self._utility_evaluation()
        return _level_table(len(self.project.utilities), self.samples.count, self._utility_level_sets(found),
                            found.undefined)

    def _utility_evaluation(self) -> _Evaluation:
        """Each drive's assessment of the utilities in its reach at its K nodes (computed once per run)."""
        if "utilities" in self._evaluations:
            return self._evaluations["utilities"]
        t0 = time.perf_counter()
        utilities = self.project.utilities
        options = self.project.utility_options or UtilityOptions()
        lines = np.array([shapely.LineString(xy) for xy in utilities.lines_xy], dtype=object)
        unit = []
        for d in range(len(self.names)):
            self.progress("probability: utilities", d / max(1, len(self.names)))
            rows = self.in_reach(d, lines)
            unit.append((rows, self._utility_unit_values(d, subset_table(utilities, rows), options)))
        moved, undefined = self._reach_table(len(utilities), [(rows, u["moved"], u["undefined"]) for rows, u in unit])
        found = self._evaluations["utilities"] = _Evaluation(unit, moved, undefined, options.near_limit_fraction)
        self.timings_s["utilities at the K nodes"] = time.perf_counter() - t0
        return found

    def _utility_level_sets(self, found: _Evaluation):
        """The status codes of the pipes in every sample, a batch at a time (as `_building_level_sets`)."""
        s = self.samples
        for d, rows, pick, unit in found.single_drive_batches(s.count):
            value = s.volume_loss_ratio[d][None, :] * self.at_samples(d, unit["utilisation"][pick])
            yield _Levels(rows[pick], statuses_at_ratio(1.0, value, found.limits), value)
        options = self.project.utility_options or UtilityOptions()
        yield from _kept(found, s.count, lambda several: self._per_sample_utility_levels(
            subset_table(self.project.utilities, several), several, options))

    def _utility_unit_values(self, d: int, utilities, options: UtilityOptions) -> dict[str, np.ndarray]:
        """Per pipe (of this subset) and K node of drive d, at r = 1: the utilisation, whether it moves and whether
        it cannot be assessed (it crosses the tunnel, or has no allowable value)."""
        from ..assessments.utilities import CROSSES, NOT_CHECKED, assess_utilities

        ratios = self.node_ratios[d]
        utilisation = np.zeros((len(utilities), len(ratios)))
        moves = np.zeros(len(utilities), dtype=bool)
        undefined = np.zeros(len(utilities), dtype=bool)
        if len(utilities):
            for m, q in enumerate(ratios):
                res = assess_utilities(utilities, self.movements(self.unit_elements(d, q), self.unit_precision_m),
                                       options)
                utilisation[:, m] = res.utilisation
                moves |= np.nan_to_num(res.max_settlement_mm, nan=1.0) > 0
                undefined |= np.isin(np.array(res.status, dtype=object), [CROSSES, NOT_CHECKED])
        return {"utilisation": utilisation, "moved": moves | undefined, "undefined": undefined}

    def _per_sample_utility_levels(self, utilities, assets: np.ndarray, options: UtilityOptions) -> _Levels:
        """Status codes of pipes that several drives reach: the ordinary assessment on every sample's elements."""
        from ..assessments.utilities import assess_utilities

        count = self.samples.count
        levels, value = np.zeros((len(assets), count), dtype=int), np.zeros((len(assets), count))
        for n in range(count):
            self.progress("probability: utilities at every sample", n / count)
            res = assess_utilities(utilities, self.movements(self.sample_elements(n), self.precision_m), options)
            levels[:, n] = status_codes(res.status)
            value[:, n] = res.utilisation
        return _Levels(assets, levels, value)

    # ------------------------------------------------------------------------------------------- shared steps
    def _reach_table(self, n: int, per_drive):
        """(moved, undefined): which drives move each asset (n, drives) and which assets cannot be assessed."""
        moved = np.zeros((n, len(self.names)), dtype=bool)
        undefined = np.zeros(n, dtype=bool)
        for d, (rows, moves, undef) in enumerate(per_drive):
            moved[rows, d] = moves
            undefined[rows] |= undef
        return moved, undefined

    def _summarise(self, found: _Evaluation, level_sets, thresholds):
        """Per asset: the exceedance probabilities of `thresholds` (assets, thresholds), and the input with the
        largest |Spearman rho| among those of the drives that reach it (rho, label); each set of levels is reduced
        as it comes, so only one batch of (assets, samples) arrays is held at a time."""
        n = len(found.undefined)
        probabilities = np.zeros((n, len(thresholds)))
        probabilities[found.undefined] = np.nan
        rho_best, label = np.full(n, np.nan), np.full(n, "", dtype=object)
        s = self.samples
        labels = np.array([item.label for item in s.inputs] + [""], dtype=object)
        candidates = np.array([[d in item.drives for item in s.inputs] for d in range(len(self.names))], dtype=int)
        for part in level_sets:
            probabilities[part.assets] = exceedance_probabilities(part.levels, thresholds)
            rho = rank_correlations(part.strain, s.uniforms.T)
            best, value = strongest_input(rho, (found.moved[part.assets].astype(int) @ candidates) > 0)
            rho_best[part.assets], label[part.assets] = value, labels[best]
        return probabilities, rho_best, label

    def _reached_text(self, moved: np.ndarray) -> np.ndarray:
        return np.array([", ".join(self.names[d] for d in np.flatnonzero(row)) for row in moved], dtype=object)

    # ---------------------------------------------------------------------------------------- settlement
    def settlement_percentiles(self, x, y, depth=None, percentiles=(50.0, 95.0)) -> SettlementPercentiles:
        """Percentiles of the settlement over the samples at places (grid nodes or any other), without a field per
        sample: the settlement of sample n is the sum over drives of r_d F_d, with F_d the drive's settlement at
        r = 1 at the sample's K (exact in r; K between nodes as for the assets). np.percentile's linear
        interpolation between order statistics. NaN where a place is at or below a crown.

        Parameters
        ----------
        x, y : array_like   Plan positions. [m]
        depth : array_like  Depth below the ground surface; the surface when None. [m]
        percentiles : sequence of float  In 0..100. [%]
        """
        t0 = time.perf_counter()
        x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
        depth = np.zeros_like(x) if depth is None else np.broadcast_to(np.asarray(depth, dtype=float), x.shape)
        s = self.samples
        unit = []
        for d in range(len(self.names)):
            per_node = [self.movements(self.unit_elements(d, q), self.unit_precision_m)(x, y, depth).settlement_mm
                        for q in self.node_ratios[d]]
            unit.append(np.array(per_node).T)  # (places, nodes)
        out = np.empty((len(x), len(percentiles)))
        step = _batch(s.count)
        for a in range(0, len(x), step):
            b = slice(a, a + step)
            total = sum(s.volume_loss_ratio[d][None, :] * self.at_samples(d, unit[d][b]) for d in range(len(unit)))
            out[b] = np.percentile(total, percentiles, axis=1).T  # total: (places, samples)
        self.timings_s["settlement_percentiles"] = time.perf_counter() - t0
        return SettlementPercentiles(x, y, np.asarray(depth), tuple(float(p) for p in percentiles), out)

    def percentile_tiles(self, tiles, percentile: float = 95.0, reach_factor: float = TILE_REACH_FACTOR,
                         lowest_mm: float | None = None, percentile_at: Callable | None = None):
        """The settlement tiles of a percentile over the samples (`settlement_percentiles` at the tiles' nodes), for
        contouring: every node whose design settlement is at least `lowest_mm` / `reach_factor` is evaluated, the
        others are left at zero (our choice: with the default factor 10 a node would need its percentile ten times
        its design value to reach the lowest contour level). `percentile_at(x, y)`, when given, evaluates the
        percentile at the nodes instead of this process (the orchestrator's workers). Returns a new SettlementTiles.
        [mm]"""
        from dataclasses import replace as copy_with

        out = copy_with(tiles, settlement_mm={})
        floor = 0.0 if lowest_mm is None else lowest_mm / reach_factor
        keys = sorted(tiles.settlement_mm)
        rows, cols = np.divmod(np.arange(tiles.size * tiles.size), tiles.size)
        xs, ys, where = [], [], []
        for key in keys:
            block = tiles.settlement_mm[key].ravel()
            keep = np.flatnonzero(block >= max(floor, 1e-12))
            tr, tc = key
            xs.append(tiles.origin_x_m + (tc * tiles.size + cols[keep]) * tiles.spacing_m)
            ys.append(tiles.origin_y_m + (tr * tiles.size + rows[keep]) * tiles.spacing_m)
            where.append(keep)
        x, y = (np.concatenate(v) if v else np.empty(0) for v in (xs, ys))
        if percentile_at is None:
            def percentile_at(x, y):
                return self.settlement_percentiles(x, y, percentiles=(percentile,)).settlement_mm[:, 0]
        values = percentile_at(x, y) if len(x) else x
        start = 0
        for key, keep in zip(keys, where):
            block = np.zeros(tiles.size * tiles.size)
            block[keep] = np.nan_to_num(values[start:start + len(keep)])
            out.settlement_mm[key] = block.reshape(tiles.size, tiles.size)
            start += len(keep)
        return out

    # ----------------------------------------------------------------------------------------------- summary
    def summary(self, buildings: BuildingProbabilities | None = None,
                utilities: UtilityProbabilities | None = None) -> dict:
        """A JSON-ready dict for summary.json: the sampling, the inputs, and counts of assets by probability."""
        s = self.samples
        dists = [self.uncertainty.for_drive(name) for name in self.names]
        inputs = []
        for item in s.inputs:
            d = item.drives[0]
            dist = dists[d].volume_loss if item.quantity == "volume_loss" else dists[d].trough_width
            inputs.append({"input": item.label, "distribution": dist.describe()})
        drives = [{"name": name, "volume_loss_design_pct": self.project.drives[d].volume_loss_pct,
                   "trough_width_k_design": None if np.isnan(s.design_k[d]) else round(float(s.design_k[d]), 4),
                   "trough_width_k_design_from": s.design_k_source[d],
                   "k_nodes": len(self.node_ratios[d])} for d, name in enumerate(self.names)]
        out = {"samples": s.count, "seed": s.seed, "drives_correlated": s.drives_correlated,
               "sampling": "scrambled Sobol sequence (scipy.stats.qmc.Sobol), first points of 2^m",
               "standard_error": "sqrt(p (1 - p) / n), the plain Monte Carlo value (conservative for Sobol points)",
               "inputs": inputs, "drives": drives}
        if buildings is not None:
            p2 = buildings.prob_category_ge_2
            out["buildings"] = {
                "prob_category_ge_2_above_1pct": int(np.sum(p2 > 0.01)),
                "prob_category_ge_2_above_10pct": int(np.sum(p2 > 0.10)),
                "prob_category_ge_2_above_50pct": int(np.sum(p2 > 0.50)),
                "not_assessed": int(np.sum(np.isnan(p2))),
                "assessed_per_sample": int(np.sum(buildings.evaluation == "per sample"))}
        if utilities is not None:
            p = utilities.prob_near_or_exceeds
            out["utilities"] = {
                "prob_near_or_exceeds_above_10pct": int(np.sum(p > 0.10)),
                "prob_exceeds_above_10pct": int(np.sum(utilities.prob_exceeds > 0.10)),
                "not_assessed": int(np.sum(np.isnan(p))),
                "assessed_per_sample": int(np.sum(utilities.evaluation == "per sample"))}
        return out


def _batch(samples: int) -> int:
    """Assets or places per batch of (rows x samples) arrays."""
    return max(1, CELLS_PER_BATCH // max(1, samples))


def _kept(found: _Evaluation, samples: int, assess):
    """The per-sample `_Levels` of the assets several drives reach, batch by batch (`assess(indices)`); when they all
    fit in one batch they are kept in `found` and not assessed again."""
    if found.per_sample is not None:
        yield from found.per_sample
        return
    batches = list(found.several_drive_batches(samples))
    for several in batches:
        part = assess(several)
        if len(batches) == 1:
            found.per_sample = [part]
        yield part
    if not batches:
        found.per_sample = []


def _every_mover(options: AssessmentOptions) -> AssessmentOptions:
    """The building options with stage 1 set aside: only a building that does not move is screened out."""
    return replace(options, screening_slope_limit=SCREEN_NOTHING, screening_settlement_limit_mm=SCREEN_NOTHING)


def _evaluation(moved: np.ndarray, undefined: np.ndarray) -> np.ndarray:
    count = moved.sum(axis=1)
    return np.where(undefined, "not assessed", np.where(count >= 2, "per sample",
                                                        np.where(count == 1, "scaled", "not reached"))).astype(object)


def _level_table(n: int, samples: int, level_sets, undefined: np.ndarray) -> np.ndarray:
    """(assets, samples) levels from the sets of `_Levels`: 0 where no drive reaches an asset, -1 where not
    assessed."""
    table = np.zeros((n, samples), dtype=int)
    for part in level_sets:
        table[part.assets] = part.levels
    table[undefined] = UNAVAILABLE_CODE
    return table


def status_codes(statuses) -> np.ndarray:
    """Status words of `settle.assessments.utilities` as codes: within 0, near 1, exceeds 2, anything else -1."""
    from ..assessments.utilities import EXCEEDS, NEAR, WITHIN

    code = {WITHIN: WITHIN_CODE, NEAR: NEAR_CODE, EXCEEDS: EXCEEDS_CODE}
    return np.array([code.get(s, UNAVAILABLE_CODE) for s in statuses], dtype=int)


# ------------------------------------------------------------------------------------------- the plain loop
@dataclass
class PlainLoop:
    """The ordinary assessments run once per sample (the reference of the fast path)."""

    sample_indices: np.ndarray  # which samples of the run
    categories: np.ndarray | None  # (buildings, samples) int, as assess_buildings gives them
    statuses: np.ndarray | None  # (utilities, samples) status codes (`status_codes`)
    utilisation: np.ndarray | None  # (utilities, samples) [-]
    settlement_mm: np.ndarray | None  # (places, samples) at the places given [mm]
    seconds: float = 0.0  # time of the loop [s]

    def building_probabilities(self) -> np.ndarray:
        """(buildings, 4): P(category >= 1..4) over the samples looped."""
        return exceedance_probabilities(self.categories, CATEGORY_LEVELS)

    def utility_probabilities(self) -> np.ndarray:
        """(utilities, 2): P(near limit or exceeds), P(exceeds) over the samples looped."""
        return exceedance_probabilities(self.statuses, (NEAR_CODE, EXCEEDS_CODE))


def plain_loop(run: ProbabilisticRun, sample_indices=None, places=None) -> PlainLoop:
    """For each sample: the sample's elements (every drive's r and q, K as sampled), then the ordinary building and
    utility assessments with the project's options and precision, and the settlement at `places`.

    Parameters
    ----------
    run : ProbabilisticRun     Gives the project, the samples and the design elements.
    sample_indices : array_like, optional  Which samples (default all).
    places : (x, y) or (x, y, depth), optional  Where to record the settlement. [m]
    """
    from ..assessments.buildings import assess_buildings
    from ..assessments.utilities import assess_utilities

    p = run.project
    idx = np.arange(run.samples.count) if sample_indices is None else np.asarray(sample_indices, dtype=int)
    k = len(idx)
    categories = None if p.buildings is None else np.zeros((len(p.buildings), k), dtype=int)
    statuses = None if p.utilities is None else np.zeros((len(p.utilities), k), dtype=int)
    utilisation = None if p.utilities is None else np.zeros((len(p.utilities), k))
    settlement = None
    if places is not None:
        x, y = (np.asarray(a, dtype=float) for a in places[:2])
        depth = np.zeros_like(x) if len(places) < 3 else np.asarray(places[2], dtype=float)
        settlement = np.zeros((len(x), k))
    t0 = time.perf_counter()
    for j, n in enumerate(idx):
        movements = run.movements(run.sample_elements(int(n)), run.precision_m)
        if categories is not None:
            categories[:, j] = assess_buildings(p.buildings, movements, p.building_options).category
        if statuses is not None:
            res = assess_utilities(p.utilities, movements, p.utility_options or UtilityOptions())
            statuses[:, j], utilisation[:, j] = status_codes(res.status), res.utilisation
        if settlement is not None:
            settlement[:, j] = movements(x, y, depth).settlement_mm
    return PlainLoop(idx, categories, statuses, utilisation, settlement, time.perf_counter() - t0)
