"""Buried pipes and utilities: bending and axial strain, joint rotation and joint opening along every pipe.

Conventions (stated once; the project's, see `settle.results`):
- settlement S positive downward; horizontal strain tensile positive, in microstrain (ue = 1e-6);
- chainage s along a pipe is the plan distance from its first vertex [m]; the unit tangent t points toward increasing
  chainage;
- ground curvature along the pipe is sagging positive: kappa = -d2S/ds2 (the middle of a settlement trough sags,
  kappa > 0) [1/m]; joint rotation is sagging positive too [rad, reported in deg];
- joint opening is positive when a joint opens (pull-out), negative when it closes [mm]; the joint opening checked is
  the one at the extreme fibre on the joint's opening side, the axial opening plus the rotation's share |theta| OD/2.

Assumptions (they belong in the README):
- The pipe follows the ground: its movements are the greenfield movements at the depth of its axis (the subsurface
  trough), which is conservative for flexible and jointed pipes (methods.md 6.1). A continuous pipe may carry a
  `bending_reduction_factor` the user took from a pipe-soil interaction assessment (Vorster et al. 2005 relative
  stiffness); it scales the bending strain only and is reported beside the results. It is 1 unless given.
- Bending: the curvature is the second derivative of the settlement along the straight line tangent to the pipe,
  kappa = t.H.t with H the Hessian of S, by central differences. This is the curvature of the profile along the
  pipe's own chainage wherever the pipe is straight; along a bend in plan it leaves out the term grad(S).dt/ds, which
  a rigid tilt of the ground produces without bending the pipe (at a polyline vertex it would be a spike).
- Axial strain is the ground's horizontal strain along the pipe axis, t.E.t (E the horizontal strain tensor).
- Joints (pipes with a segment length Lp): the joint positions are not known, so every sampled place is taken as a
  joint and the worst is reported. The two pipes either side of a joint at s move with the ground at their
  mid-points, s - Lp/2 and s + Lp/2 (clipped to the ends of the line): the joint rotates by the change of ground
  slope between them and opens by the change of ground displacement between them, both taken along the tangent at
  the joint. Where the curvature (strain) is uniform over Lp these are kappa Lp and eps Lp, the forms of methods.md
  6.1; elsewhere they never exceed max|kappa| Lp and max(eps) Lp.
- Joint opening at the extreme fibre: the change of ground displacement is the opening at the pipe axis (the axial
  part). A rotation theta turns the pipe ends about their axis, which opens one side of the joint by |theta| OD/2
  whichever way it turns (the invert when sagging, the crown when hogging) and closes the other by as much. The joint
  opening reported and checked against `allowable_joint_opening_mm` is the opening side's: axial part + |theta| OD/2
  (`utility_strains.joint_extreme_fibre_opening`). Where the axial part is a closing (negative) the opening side
  still opens by |theta| OD/2 less that closing, which may be negative (the whole joint closes). Both parts are kept.
- Strain limits: the bending strain is checked on its own; the axial strain in tension, and also in shortening for
  materials whose limit holds both ways (`MaterialLimits.checks_compression`); the extreme fibre by the linear
  interaction axial/allowable_axial + bending/allowable_bending, which is the extreme-fibre strain over the limit when
  the two limits are equal (our choice of combination, documented here).
- A pipe any of whose sampled places lies at or below the crown of a drive that reaches it (the movements come back
  as NaN there) crosses the tunnel: it gets no numbers, status "crosses the tunnel" and a warning.

Sampling: every pipe is sampled at equal steps of at most `sample_spacing_m` (0.5 m by default) along its chainage.
Then, around the two highest local peaks of each demand on each pipe (peaks above 0.1 % of the largest over all pipes),
the line is sampled ten times finer over one step either side, so the maxima do not depend on where the samples fell.

References
----------
[AYS86]  Attewell, P. B., Yeates, J. & Selby, A. R. (1986). Soil movements induced by tunnelling and their effects on
         pipelines and structures. Blackie, Glasgow. (Pipe following the ground; joint rotation and pull-out of
         jointed pipes; from memory in methods.md 6.1.)
[BMNT96] Bracegirdle, Mair, Nyren & Taylor (1996). A methodology for evaluating potential damage to cast iron pipes
         induced by tunnelling. Geotechnical Aspects of Underground Construction in Soft Ground (GAUCSG), London,
         Mair & Taylor (eds), Balkema, 569-575. (Steps: ground slope, joint rotation and pull-out, pipe strains;
         worst joint location.)
[VKSM05] Vorster, Klar, Soga & Mair (2005). Estimating the effects of tunneling on existing pipelines. J. Geotech.
         Geoenviron. Eng. 131(11). (Relative pipe-soil stiffness, from memory in methods.md 6.1; its charts are not
         available to us: the reduction factor is a user input.)
Formulas as collected in ../shared/methods.md section 6.1; greenfield movements of sections 2 to 4.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from ..engine.movements import Movements
from ..inputs.tables import shown
from ..inputs.utility_lines import Utilities
from ..inputs.utility_settings import UtilityOptions
from .utility_strains import (axial_strain, bending_strain, ground_curvature, joint_extreme_fibre_opening,
                              joint_opening, joint_rotation)

#: The checks, as (field prefix, words used in `governing_check` and messages).
CHECKS = (("bending", "bending strain"), ("axial", "axial strain"), ("fibre", "fibre strain"),
          ("joint_rotation", "joint rotation"), ("joint_opening", "joint opening"))
CHECK_WORDS = tuple(words for _, words in CHECKS)
ALLOWABLE_OF_CHECK = {"bending": "allowable_bending_strain_ue", "axial": "allowable_axial_strain_ue",
                      "joint_rotation": "allowable_joint_rotation_deg", "joint_opening": "allowable_joint_opening_mm"}
WITHIN, NEAR, EXCEEDS, NOT_CHECKED, CROSSES = ("within limits", "near limit", "exceeds", "not checked",
                                               "crosses the tunnel")
STATUSES = (WITHIN, NEAR, EXCEEDS, NOT_CHECKED, CROSSES)
REFINE_FACTOR = 10  # refinement sampling is this many times finer than the first pass
REFINE_PEAKS = 2  # highest local peaks refined per demand and pipe
REFINE_FLOOR = 1e-3  # peaks below this share of the largest value over all pipes are not refined


@dataclass
class UtilityProfiles:
    """Every sampled place along every pipe, sorted by pipe then chainage (arrays of one length).

    Joint values are those of a joint at that place (NaN on continuous pipes); NaN everywhere on a crossing pipe's
    places below the crown.
    """

    pipe: np.ndarray  # index of the pipe in `Utilities`
    chainage_m: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    depth_m: np.ndarray
    settlement_mm: np.ndarray
    ground_slope: np.ndarray  # magnitude of the settlement gradient at the pipe [-]
    curvature_per_m: np.ndarray  # along the pipe, sagging positive [1/m]
    bending_strain_ue: np.ndarray  # extreme fibre, magnitude, after any bending_reduction_factor
    axial_strain_ue: np.ndarray  # tensile positive
    joint_rotation_deg: np.ndarray  # sagging positive
    joint_opening_mm: np.ndarray  # at the extreme fibre on the opening side: axial + rotation parts; opening positive
    joint_axial_opening_mm: np.ndarray  # at the pipe axis, the change of ground displacement; opening positive
    joint_rotation_opening_mm: np.ndarray  # |theta| OD / 2, the rotation's share (never negative)
    undefined: np.ndarray  # bool: a movement needed here came back NaN (at or below a tunnel crown)

    def __len__(self) -> int:
        return len(self.pipe)


@dataclass
class UtilityResults:
    """Demands and verdict per pipe (arrays in the order of `Utilities`), with the sampled profiles.

    Demands are NaN for a pipe that crosses the tunnel; joint values are NaN for continuous pipes. `check_utilisation`
    maps each check prefix of `CHECKS` to the largest demand/allowable per pipe (NaN: no allowable, or the check does
    not apply); `check_place` maps it to the index into `profiles` where that check's demand is greatest (-1: none).
    """

    ids: tuple[str, ...]
    max_settlement_mm: np.ndarray
    max_ground_slope: np.ndarray  # [-]
    max_bending_strain_ue: np.ndarray
    max_axial_strain_ue: np.ndarray  # most tensile axial strain (negative when the pipe only shortens)
    min_axial_strain_ue: np.ndarray  # most compressive axial strain
    max_fibre_strain_ue: np.ndarray  # most tensile extreme-fibre strain, axial + bending
    min_fibre_strain_ue: np.ndarray  # most compressive extreme-fibre strain, axial - bending
    max_joint_rotation_deg: np.ndarray  # largest |rotation|
    max_joint_opening_mm: np.ndarray  # largest extreme-fibre opening, 0 when every joint closes
    max_joint_axial_opening_mm: np.ndarray  # the axial part where the extreme-fibre opening is largest
    max_joint_rotation_opening_mm: np.ndarray  # the rotation part there; the two add to the largest total (even <= 0)
    check_utilisation: dict[str, np.ndarray]
    check_place: dict[str, np.ndarray]
    utilisation: np.ndarray  # largest of the check utilisations [-]
    governing_check: tuple[str, ...]  # words of `CHECKS`, "" when none
    governing_chainage_m: np.ndarray
    status: tuple[str, ...]  # one of `STATUSES`
    not_checked: tuple[str, ...]  # checks that apply but have no allowable value, comma separated
    crossing_chainage_m: np.ndarray  # (n, 2) first and last chainage below a crown; NaN when none
    profiles: UtilityProfiles
    warnings: list[str] = field(default_factory=list)

    def __len__(self) -> int:
        return len(self.ids)


class _Lines:
    """All pipes' polylines in flat arrays, to locate places by (pipe, chainage) without a loop over pipes."""

    def __init__(self, utilities: Utilities):
        counts = np.array([len(xy) for xy in utilities.lines_xy])
        self.first = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(int)
        self.last_segment = self.first + counts - 2
        self.xy = np.concatenate(utilities.lines_xy).astype(float)
        self.depth = np.concatenate(utilities.depths_m).astype(float)
        owner = np.repeat(np.arange(len(counts)), counts)
        seg = np.hypot(*np.diff(self.xy, axis=0).T)
        seg[self.first[1:] - 1] = 0.0  # no segment between one pipe's last vertex and the next pipe's first
        step = np.concatenate([[0.0], seg])
        step[self.first] = 0.0
        cum = np.cumsum(step)
        local = cum - cum[self.first][owner]
        self.length = local[self.first + counts - 1]
        self.offset = np.concatenate([[0.0], np.cumsum(self.length + 1.0)[:-1]])  # 1 m gap between pipes
        self.vertex_key = local + self.offset[owner]

    def locate(self, pipe: np.ndarray, s: np.ndarray):
        """Plan position, depth and unit tangent at chainage s (clipped to the line) of pipes `pipe`."""
        s = np.clip(s, 0.0, self.length[pipe])
        key = s + self.offset[pipe]
        seg = np.searchsorted(self.vertex_key, key, side="right") - 1
        seg = np.clip(seg, self.first[pipe], self.last_segment[pipe])
        a = (key - self.vertex_key[seg]) / (self.vertex_key[seg + 1] - self.vertex_key[seg])
        d = self.xy[seg + 1] - self.xy[seg]
        x = self.xy[seg, 0] + a * d[:, 0]
        y = self.xy[seg, 1] + a * d[:, 1]
        depth = self.depth[seg] + a * (self.depth[seg + 1] - self.depth[seg])
        norm = np.hypot(d[:, 0], d[:, 1])
        return x, y, depth, d[:, 0] / norm, d[:, 1] / norm

    def uniform(self, spacing: float):
        """Pipe index and chainage of samples at equal steps of at most `spacing` along every pipe."""
        intervals = np.maximum(np.ceil(self.length / spacing - 1e-9), 1).astype(int)
        counts = intervals + 1
        pipe = np.repeat(np.arange(len(counts)), counts)
        k = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
        step = self.length / intervals
        return pipe, k * step[pipe], step


def _evaluate(lines: _Lines, utilities: Utilities, pipe, s, movements, options: UtilityOptions) -> dict:
    """Movements and demands at places (pipe, chainage): one call of `movements` for all of them."""
    n = len(s)
    x, y, depth, tx, ty = lines.locate(pipe, s)
    h = options.curvature_step_m
    lp = utilities.segment_length_m[pipe]
    j = np.flatnonzero(np.isfinite(lp))
    xb, yb, db, _, _ = lines.locate(pipe[j], s[j] - lp[j] / 2.0)
    xa, ya, da, _, _ = lines.locate(pipe[j], s[j] + lp[j] / 2.0)
    m = movements(np.concatenate([x, x + h * tx, x - h * tx, xb, xa]),
                  np.concatenate([y, y + h * ty, y - h * ty, yb, ya]),
                  np.concatenate([depth, depth, depth, db, da]))
    if len(m) != 3 * n + 2 * len(j):
        raise ValueError(f"the movements callable returned {len(m)} places for {3 * n + 2 * len(j)}")
    here, ahead, behind = slice(0, n), slice(n, 2 * n), slice(2 * n, 3 * n)
    jb, ja = slice(3 * n, 3 * n + len(j)), slice(3 * n + len(j), 3 * n + 2 * len(j))
    settle_m = m.settlement_mm / 1e3
    curvature = ground_curvature(settle_m[behind], settle_m[here], settle_m[ahead], h)
    od_m = utilities.outer_diameter_mm[pipe] / 1e3
    bending = np.abs(bending_strain(curvature, od_m)) * utilities.bending_reduction_factor[pipe] * 1e6
    axial = axial_strain(m.strain_xx_ue[here], m.strain_yy_ue[here], m.strain_xy_ue[here], tx, ty)
    rotation, opening, axial_opening, rotation_opening = (np.full(n, np.nan) for _ in range(4))
    theta = joint_rotation(m.slope_x[jb], m.slope_y[jb], m.slope_x[ja], m.slope_y[ja], tx[j], ty[j])
    rotation[j] = np.degrees(theta)
    axial_opening[j] = joint_opening(m.ux_mm[jb], m.uy_mm[jb], m.ux_mm[ja], m.uy_mm[ja], tx[j], ty[j])
    od_mm = utilities.outer_diameter_mm[pipe[j]]
    opening[j] = joint_extreme_fibre_opening(axial_opening[j], theta, od_mm)
    rotation_opening[j] = joint_extreme_fibre_opening(0.0, theta, od_mm)
    undefined = np.isnan(settle_m[here]) | np.isnan(settle_m[ahead]) | np.isnan(settle_m[behind])
    undefined[j] |= np.isnan(settle_m[jb]) | np.isnan(settle_m[ja])
    return dict(pipe=pipe, chainage_m=s, x_m=x, y_m=y, depth_m=depth, settlement_mm=m.settlement_mm[here],
                ground_slope=np.hypot(m.slope_x[here], m.slope_y[here]), curvature_per_m=curvature,
                bending_strain_ue=bending, axial_strain_ue=axial, joint_rotation_deg=rotation,
                joint_opening_mm=opening, joint_axial_opening_mm=axial_opening,
                joint_rotation_opening_mm=rotation_opening, undefined=undefined)


def _peaks_to_refine(values: dict, pipe: np.ndarray) -> np.ndarray:
    """Indices of the highest local peaks, per pipe, of each demand worth refining."""
    bending, axial = values["bending_strain_ue"], values["axial_strain_ue"]
    demands = (bending, axial, -axial, axial + bending, bending - axial, np.abs(values["joint_rotation_deg"]),
               values["joint_opening_mm"], values["ground_slope"], values["settlement_mm"])
    same_prev = np.concatenate([[False], pipe[1:] == pipe[:-1]])
    same_next = np.concatenate([pipe[1:] == pipe[:-1], [False]])
    chosen = []
    for q in demands:
        q = np.where(np.isfinite(q), q, -np.inf)
        top = q.max() if q.size else -np.inf
        if not top > 0:
            continue
        left = np.where(same_prev, np.concatenate([[-np.inf], q[:-1]]), -np.inf)
        right = np.where(same_next, np.concatenate([q[1:], [-np.inf]]), -np.inf)
        cand = np.flatnonzero((q >= left) & (q >= right) & (q > REFINE_FLOOR * top))
        order = cand[np.lexsort((-q[cand], pipe[cand]))]
        p = pipe[order]
        new_group = np.concatenate([[True], p[1:] != p[:-1]]) if p.size else np.empty(0, bool)
        start = np.maximum.accumulate(np.where(new_group, np.arange(p.size), 0)) if p.size else np.empty(0, int)
        chosen.append(order[np.arange(p.size) - start < REFINE_PEAKS])
    return np.unique(np.concatenate(chosen)) if chosen else np.empty(0, int)


def _merge(a: dict, b: dict, lines: _Lines) -> dict:
    """Samples of both passes, sorted by pipe then chainage, each place once."""
    both = {k: np.concatenate([a[k], b[k]]) for k in a}
    key = both["chainage_m"] + lines.offset[both["pipe"]]
    _, keep = np.unique(key, return_index=True)
    return {k: v[keep] for k, v in both.items()}


def _group_argmax(values: np.ndarray, pipe: np.ndarray, n: int):
    """Largest value per pipe ignoring NaN, and its index (NaN and -1 for a pipe with no value)."""
    w = np.where(np.isnan(values), -np.inf, values)
    order = np.lexsort((-w, pipe))
    first = order[np.searchsorted(pipe[order], np.arange(n))]
    best = np.where(np.isneginf(w[first]), np.nan, values[first])
    return best, np.where(np.isnan(best), -1, first)


def assess_utilities(utilities: Utilities, movements: Callable[..., Movements],
                     options: UtilityOptions = UtilityOptions()) -> UtilityResults:
    """Strains, joint rotations and joint openings along every pipe, with a verdict per pipe.

    Parameters
    ----------
    utilities : Utilities  The pipes (see `settle.utility_lines`).
    movements : callable   movements(x_m, y_m, depth_m) -> `settle.results.Movements`, the greenfield movements
                           (all drives superposed at the run's face positions) at places at a depth below the
                           surface; NaN where a place is at or below the crown of a drive that reaches it.
    options : UtilityOptions

    Returns
    -------
    UtilityResults  Demands, utilisations, status and governing check per pipe; warnings for pipes that cross the
                    tunnel and for checks without an allowable value.

    Notes
    -----
    Steps: sample every pipe (module docstring); evaluate the movements at each sample, at the two curvature-stencil
    places along its tangent and, for jointed pipes, at the middles of the pipes either side of a joint there; refine
    around the peaks; take the largest demand of each check per pipe; divide by the allowable values. Assumptions in
    the module docstring.
    """
    lines = _Lines(utilities)
    pipe, s, step = lines.uniform(options.sample_spacing_m)
    values = _evaluate(lines, utilities, pipe, s, movements, options)
    peaks = _peaks_to_refine(values, pipe)
    if peaks.size:
        k = np.concatenate([np.arange(1, REFINE_FACTOR), -np.arange(1, REFINE_FACTOR)]) / REFINE_FACTOR
        rp = np.repeat(pipe[peaks], k.size)
        rs = np.clip((s[peaks][:, None] + step[pipe[peaks]][:, None] * k).ravel(), 0.0, lines.length[rp])
        values = _merge(values, _evaluate(lines, utilities, rp, rs, movements, options), lines)
    return _verdict(utilities, UtilityProfiles(**values), options)


def _check_utilisations(u: Utilities, pipe: np.ndarray, n: int, bending, axial, rotation, opening):
    """Per check of `CHECKS`, the largest demand/allowable per pipe [-] and the index of its place (-1: none)."""
    both_ways = u.checks_compression[pipe]
    axial_counted = np.where(both_ways, np.abs(axial), np.maximum(axial, 0.0))
    fibre_counted = np.where(both_ways, np.abs(axial), axial) + bending

    allow = {c: getattr(u, key)[pipe] for c, key in ALLOWABLE_OF_CHECK.items()}
    demand = {"bending": bending, "axial": axial_counted, "fibre": fibre_counted, "joint_rotation": rotation,
              "joint_opening": np.maximum(opening, 0.0)}
    ratio = {
        "bending": bending / allow["bending"],
        "axial": axial_counted / allow["axial"],
        "fibre": np.maximum(np.where(both_ways, np.abs(axial), axial) / allow["axial"] + bending / allow["bending"],
                            0.0),
        "joint_rotation": rotation / allow["joint_rotation"],
        "joint_opening": np.maximum(opening, 0.0) / allow["joint_opening"],
    }
    check_utilisation, check_place = {}, {}
    for c, _ in CHECKS:
        best, at = _group_argmax(ratio[c], pipe, n)
        _, at_demand = _group_argmax(demand[c], pipe, n)
        check_utilisation[c] = best
        check_place[c] = np.where(at >= 0, at, at_demand)
    return check_utilisation, check_place


def _governing_check(check_utilisation: dict, check_place: dict, chainage_m: np.ndarray, n: int):
    """Per pipe, the largest check utilisation [-], whether any check was made, the governing check's words and the
    chainage of its place [m] (NaN when none)."""
    table = np.column_stack([check_utilisation[c] for c, _ in CHECKS])
    table_w = np.where(np.isnan(table), -np.inf, table)
    governing_k = np.argmax(table_w, axis=1)
    utilisation = table_w[np.arange(n), governing_k]
    checked = np.isfinite(utilisation)
    utilisation = np.where(checked, utilisation, np.nan)
    governing = tuple(CHECKS[k][1] if ok else "" for k, ok in zip(governing_k, checked))
    place = np.array([check_place[CHECKS[k][0]][p] if ok else -1 for p, (k, ok) in enumerate(zip(governing_k,
                                                                                                  checked))], int)
    governing_chainage = np.where(place >= 0, chainage_m[np.maximum(place, 0)], np.nan)
    return utilisation, checked, governing, governing_chainage


def _status(crossing: np.ndarray, checked: np.ndarray, utilisation: np.ndarray, near_limit_fraction: float):
    """One of `STATUSES` per pipe, from its utilisation [-]."""
    status = []
    for p in range(len(crossing)):
        if crossing[p]:
            status.append(CROSSES)
        elif not checked[p]:
            status.append(NOT_CHECKED)
        elif utilisation[p] > 1.0:
            status.append(EXCEEDS)
        elif utilisation[p] >= near_limit_fraction:
            status.append(NEAR)
        else:
            status.append(WITHIN)
    return tuple(status)


def _checks_without_limit(u: Utilities):
    """Per check prefix, which pipes the check applies to and which have no allowable value for it (bool arrays)."""
    n = len(u)
    jointed = u.jointed
    applies = {"bending": np.ones(n, bool), "axial": np.ones(n, bool), "fibre": np.ones(n, bool),
               "joint_rotation": jointed, "joint_opening": jointed}
    no_limit = {"bending": np.isnan(u.allowable_bending_strain_ue), "axial": np.isnan(u.allowable_axial_strain_ue),
                "joint_rotation": np.isnan(u.allowable_joint_rotation_deg),
                "joint_opening": np.isnan(u.allowable_joint_opening_mm)}
    no_limit["fibre"] = no_limit["bending"] | no_limit["axial"]
    return applies, no_limit


def _crossing_warnings(u: Utilities, crossing: np.ndarray, crossing_range: np.ndarray) -> list[str]:
    """A warning for each pipe that crosses the tunnel, with the chainages below the crown [m]."""
    warnings = []
    for p in np.flatnonzero(crossing):
        a, b = crossing_range[p]
        warnings.append(f"utility {shown(u.ids[p])} crosses the tunnel: between chainages {a:.1f} and {b:.1f} m "
                        "along the pipe it lies at or below the crown of a drive, where the greenfield subsurface trough is "
                        "not defined; no strains are given for it: refer it to the asset owner for a separate "
                        "assessment")
    return warnings


def _no_limit_warnings(u: Utilities, crossing: np.ndarray, applies: dict, no_limit: dict) -> list[str]:
    """A warning per check that applies to some pipes outside the tunnel but has no allowable value on them."""
    warnings = []
    for c, words in CHECKS:
        short = [u.ids[p] for p in range(len(u)) if applies[c][p] and no_limit[c][p] and not crossing[p]]
        if short:
            listed = ", ".join(shown(i) for i in short[:10]) + (" ..." if len(short) > 10 else "")
            keys = ("allowable_bending_strain_ue and allowable_axial_strain_ue" if c == "fibre"
                    else ALLOWABLE_OF_CHECK[c])
            warnings.append(f"{len(short)} utilit{'y has' if len(short) == 1 else 'ies have'} no allowable {words} "
                            f"(no default for the material and none given on the pipe), so it is not checked for "
                            f"it; give {keys} on: {listed}")
    return warnings


def _verdict(u: Utilities, prof: UtilityProfiles, options: UtilityOptions) -> UtilityResults:
    """Per-pipe demands, utilisations and status from the profiles."""
    n, pipe = len(u), prof.pipe
    crossing = np.bincount(pipe, weights=prof.undefined, minlength=n) > 0
    keep = ~crossing[pipe]  # places of crossing pipes count for nothing
    masked = lambda v: np.where(keep, v, np.nan)  # noqa: E731
    bending, axial = masked(prof.bending_strain_ue), masked(prof.axial_strain_ue)
    rotation, opening = masked(np.abs(prof.joint_rotation_deg)), masked(prof.joint_opening_mm)

    check_utilisation, check_place = _check_utilisations(u, pipe, n, bending, axial, rotation, opening)
    utilisation, checked, governing, governing_chainage = _governing_check(check_utilisation, check_place,
                                                                           prof.chainage_m, n)
    status = _status(crossing, checked, utilisation, options.near_limit_fraction)
    applies, no_limit = _checks_without_limit(u)
    not_checked = tuple(", ".join(w for c, w in CHECKS if applies[c][p] and no_limit[c][p]) for p in range(n))

    group = lambda v: _group_argmax(v, pipe, n)[0]  # noqa: E731
    max_opening, at_max_opening = _group_argmax(opening, pipe, n)
    at_opening = lambda v: np.where(at_max_opening >= 0, v[np.maximum(at_max_opening, 0)] + 0.0, np.nan)  # noqa: E731
    undefined_s = np.where(prof.undefined, prof.chainage_m, np.nan)
    crossing_range = np.column_stack([-group(-undefined_s), group(undefined_s)])
    warnings = _crossing_warnings(u, crossing, crossing_range) + _no_limit_warnings(u, crossing, applies, no_limit)

    return UtilityResults(
        ids=u.ids,
        max_settlement_mm=group(masked(prof.settlement_mm)),
        max_ground_slope=group(masked(prof.ground_slope)),
        max_bending_strain_ue=group(bending),
        max_axial_strain_ue=group(axial),
        min_axial_strain_ue=-group(-axial),
        max_fibre_strain_ue=group(axial + bending),
        min_fibre_strain_ue=-group(bending - axial),
        max_joint_rotation_deg=group(rotation),
        max_joint_opening_mm=np.where(np.isnan(max_opening), np.nan, np.maximum(max_opening, 0.0)),
        max_joint_axial_opening_mm=at_opening(prof.joint_axial_opening_mm),
        max_joint_rotation_opening_mm=at_opening(prof.joint_rotation_opening_mm),
        check_utilisation=check_utilisation,
        check_place=check_place,
        utilisation=utilisation,
        governing_check=governing,
        governing_chainage_m=governing_chainage,
        status=status,
        not_checked=not_checked,
        crossing_chainage_m=crossing_range,
        profiles=prof,
        warnings=warnings,
    )
